"""The input-source contract: what the run layer needs from each input format.

An :class:`InputSource` (one per value of ``[samples.NAME] format``) says

* how to list the work units of one file (:meth:`InputSource.work_units`: the whole file, or
  byte or entry ranges that any executor may run in any order);
* how to read a unit (:meth:`InputSource.open` gives a :class:`UnitReading`: its chunks of
  events as awkward Arrays, the names of the variation weights, the generator-level partner
  events where the format has them, and at the end the record that describes the file in the
  provenance, ``FileRecord.info``);
* what the file's record in the provenance adds (:meth:`InputSource.provenance`);
* how the sample's cross section follows from the weights read
  (:meth:`InputSource.cross_section`).

:func:`evtkin.run.units.process_unit` is the one unit loop for every format: it asks the source
for the reading and does the rest (objects, selection, histograms, totals, cutflows) the same way
for all of them. A chunk holds one record per event with at least ``weight`` (float64) and
``process_id`` (int), ``weights`` (``n × k``, the variation weights in the order of
:meth:`UnitReading.variation_names`) where the file has any, ``group`` where events form
statistical groups, and either ``particles`` (an event record: objects are built from particles)
or the mapped collections of reconstructed objects.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Iterator, Sequence
from typing import TYPE_CHECKING, Any, ClassVar

from evtkin.run.workunit import WorkUnit

if TYPE_CHECKING:  # pragma: no cover
    from evtkin.config import SampleSpec
    from evtkin.hists.xsec import FileTotals, XsecResult
    from evtkin.run.partial import FileRecord
    from evtkin.run.plan import Plan

__all__ = ["InputSource", "UnitReading", "limit_events", "whole_file_unit"]


class UnitReading(ABC):
    """One work unit being read: iterate :meth:`chunks` once, then :meth:`close`."""

    @abstractmethod
    def chunks(self) -> Iterator[Any]:
        """The unit's events, chunk by chunk (awkward Arrays, one record per event)."""

    @abstractmethod
    def variation_names(self) -> tuple[str, ...] | None:
        """Names of the variation-weight columns of ``chunk["weights"]`` (``None`` while they
        are not known yet: some formats know them only once the first chunk was read)."""

    def truth(self, chunk: Any) -> Any:
        """The generator-level partner events of ``chunk`` (same length and order), or
        ``None`` where the format or the sample has none."""
        return None

    @abstractmethod
    def file_info(self, n_events: int) -> Any:
        """What the provenance records about the file (``FileRecord.info``), after reading
        ``n_events`` events of this unit; its ``weight_names`` are the variation names."""

    def close(self) -> None:  # noqa: B027 - most readings hold something to release
        """Release the files (called once, also after an error)."""


class InputSource(ABC):
    """One input format of the run layer (see the module docstring)."""

    #: the value of ``[samples.NAME] format``
    format: ClassVar[str]
    #: whether :meth:`open` reads leniently with ``plan.lenient`` (damaged events skipped
    #: with a warning naming their lines); ``--skip-bad`` then reads a unit that failed
    #: again leniently, so that it keeps every intact event
    reads_leniently: ClassVar[bool] = False

    def work_units(self, spec: SampleSpec, file_index: int, path: str, size: int, parts: int,
                   max_events: int | None) -> list[WorkUnit]:
        """The units of one file, about ``parts`` of them (1: the whole file; ``max_events``
        is only ever given with ``parts = 1``). Default: the whole file."""
        return [whole_file_unit(spec.name, file_index, path, size, self.format, max_events)]

    @abstractmethod
    def open(self, plan: Plan, unit: WorkUnit, *, read_threads: int | None = None,
             with_truth: bool = False) -> UnitReading:
        """Start reading ``unit`` (``with_truth``: the generator-level partners are needed,
        for response matrices)."""

    def provenance(self, info: Any) -> dict[str, Any]:
        """Extra entries of the file's ``inputs`` record in provenance.json, from its
        ``FileRecord.info`` (default: none)."""
        return {}

    @abstractmethod
    def cross_section(self, spec: SampleSpec, records: Sequence[FileRecord],
                      totals: Sequence[FileTotals]) -> XsecResult:
        """σ bookkeeping of a sample from its files (``records``, in file order, with the
        :meth:`UnitReading.file_info` of each) and the weight totals read from each."""


def whole_file_unit(sample: str, file_index: int, path: str, size: int, fmt: str,
                    max_events: int | None) -> WorkUnit:
    """A unit holding a whole file (or its first ``max_events`` events)."""
    return WorkUnit(sample, file_index, path, 0, max_events, size=size, format=fmt)


def limit_events(chunks: Iterator[Any], first: int, limit: int | None) -> Iterator[Any]:
    """Skip the first ``first`` events of ``chunks`` and stop after ``limit`` (``None``: all),
    for readers that cannot start or stop at an event themselves."""
    remaining = limit
    skip = first
    if remaining == 0:
        return
    for chunk in chunks:
        if skip:
            if skip >= len(chunk):
                skip -= len(chunk)
                continue
            chunk = chunk[skip:]
            skip = 0
        if remaining is not None:
            if len(chunk) >= remaining:
                yield chunk[:remaining]
                return
            remaining -= len(chunk)
        yield chunk
        # let go of the chunk before the reader makes the next one, so that its memory
        # is reused instead of a second chunk's being allocated
        del chunk
