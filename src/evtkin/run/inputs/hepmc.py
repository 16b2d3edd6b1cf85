"""HepMC ASCII files (Asciiv3 or IO_GenEvent, plain or compressed) as a run input: chunks from
:func:`evtkin.io.hepmc.read_hepmc`, byte-range work units of plain files from
:func:`evtkin.io.hepmc.hepmc_byte_ranges`, variation names from the header
(:func:`evtkin.io.hepmc_header.hepmc_info`).

Cross section: a generator prints its running estimate of σ into each event's cross-section
record, so the best one of a file is in its **last** event: the file's σ ± error are the
``xsec_pb`` ± ``xsec_err_pb`` of the last event that carries them (``cross_section_pb`` of the
sample overrides it). Events are normalised as LHE's XSECUP-based mode with the signed sum of
weights (:func:`evtkin.hists.xsec.combine_files`, IDWTUP 3): every event weight is scaled by
``σ / Σw`` of its file, so the σ of a bin is ``σ · Σ_bin w / Σ w`` (files of one sample
share σ by their event counts). The first weight is the nominal one; every weight column,
the nominal one included, is a variation named as in the header.

The normalisation is per file, whatever the events' processes: the chunks get
``process_id = 0``, the key the run keeps totals and histograms by. The events' own signal
process ids (``signal_process_id`` of :func:`~evtkin.io.hepmc.read_hepmc`) are what the name
``process_id`` gives in expressions (:mod:`evtkin.run.plan`).

Truth. ``truth_files = [LHE files]`` gives the generator-level events the file was showered
from: event number N (counted from 1, as ``evtkin toy shower`` writes them) is the N-th event of
those files, read in order as one sequence (the join of :mod:`evtkin.run.inputs.ntuple`). A
byte-range unit in the middle of a file reads the truth files from their start and skips the
events before its first event number (parton-level events are a few per cent of the size of
their showered ones, so a file's units cost little more than one).
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError
from evtkin.hists.xsec import FileTotals, ProcessDecl, RunDecl, XsecResult, combine_files
from evtkin.run.inputs.base import InputSource, UnitReading, limit_events
from evtkin.run.workunit import WorkUnit

if TYPE_CHECKING:  # pragma: no cover
    from evtkin.config import SampleSpec
    from evtkin.run.partial import FileRecord
    from evtkin.run.plan import Plan

__all__ = ["HepMCRunInfo", "HepMCSource"]

#: the process id every HepMC event gets
PROCESS_ID = 0


@dataclass(frozen=True)
class HepMCRunInfo:
    """What a run records about one HepMC input (``FileRecord.info``): the header facts and
    the cross-section record of the last event read (``last_at``: where the unit that read it
    starts, so that units of one file merge to the file's last event in any order)."""

    header: dict[str, Any]
    weight_names: tuple[str, ...]
    xsec_pb: float = math.nan
    xsec_err_pb: float = math.nan
    last_at: int = -1

    def merged_with(self, other: HepMCRunInfo) -> HepMCRunInfo:
        """Two units of one file: the later unit's last cross-section record counts."""
        if math.isnan(other.xsec_pb) or (not math.isnan(self.xsec_pb)
                                         and self.last_at >= other.last_at):
            return self
        return replace(self, xsec_pb=other.xsec_pb, xsec_err_pb=other.xsec_err_pb,
                       last_at=other.last_at)

    def provenance(self) -> dict[str, Any]:
        h = self.header
        xs = None if math.isnan(self.xsec_pb) else self.xsec_pb
        xe = None if math.isnan(self.xsec_err_pb) else self.xsec_err_pb
        return {"format": "hepmc", "hepmc_form": h.get("form"), "hepmc_version": h.get("version"),
                "tools": h.get("tools", []), "weight_names": list(self.weight_names),
                "momentum_unit": h.get("momentum_unit"), "length_unit": h.get("length_unit"),
                "last_event_xsec_pb": xs, "last_event_xsec_err_pb": xe}


def _last_xsec(chunk: Any) -> tuple[float, float] | None:
    """σ and its error of the chunk's last event with a cross-section record."""
    xs = np.asarray(ak.to_numpy(chunk["xsec_pb"]), dtype=np.float64)
    have = np.flatnonzero(~np.isnan(xs))
    if have.size == 0:
        return None
    i = int(have[-1])
    xe = float(np.asarray(ak.to_numpy(chunk["xsec_err_pb"][i:i + 1]), dtype=np.float64)[0])
    return float(xs[i]), 0.0 if math.isnan(xe) else xe


class _HepMCReading(UnitReading):
    def __init__(self, unit: WorkUnit, step_size: int, threads: int | None,
                 strict: bool = True) -> None:
        from evtkin.io.hepmc_header import hepmc_info

        self.unit = unit
        header = hepmc_info(unit.path)
        self._header = header.to_dict()
        self._names = tuple(str(v) for v in header.weight_names)
        self._step_size = step_size
        self._threads = threads
        self._strict = strict
        self._reader: Any = None
        self._last: tuple[float, float] | None = None
        #: the generator-level partner events (``truth_files``), by event number
        self.join: Any = None

    def _read(self) -> Iterator[Any]:
        from evtkin.io.hepmc import read_hepmc

        u = self.unit
        self._reader = (read_hepmc(u.path, step_size=self._step_size, threads=self._threads,
                                   strict=self._strict) if u.byte_range is None else
                        read_hepmc(u.path, step_size=self._step_size, threads=self._threads,
                                   strict=self._strict, byte_range=u.byte_range))
        for chunk in limit_events(iter(self._reader), u.first_event, u.max_events):
            last = _last_xsec(chunk)
            if last is not None:
                self._last = last
            pid = np.full(len(chunk), PROCESS_ID, dtype=np.int64)
            yield ak.with_field(chunk, pid, "process_id")

    def chunks(self) -> Iterator[Any]:
        if self.unit.max_events == 0:
            return iter(())
        return self._read()

    def variation_names(self) -> tuple[str, ...]:
        return self._names

    def truth(self, chunk: Any) -> Any:
        """The generator-level partners: HepMC event number N (counted from 1, as the toy
        shower writes them) is the N-th event of the truth files."""
        if self.join is None:
            return None
        numbers = np.asarray(ak.to_numpy(chunk["event_number"]), dtype=np.int64) - 1
        return self.join.take(numbers)

    def file_info(self, n_events: int) -> HepMCRunInfo:
        xs, xe = self._last if self._last is not None else (math.nan, math.nan)
        at = self.unit.byte_range[0] if self.unit.byte_range is not None else self.unit.part
        return HepMCRunInfo(self._header, self._names, xs, xe, at)

    def close(self) -> None:
        close = getattr(self._reader, "close", None)
        if close is not None:
            close()


class HepMCSource(InputSource):
    """HepMC ASCII event files (plain or compressed)."""

    format = "hepmc"
    reads_leniently = True

    def work_units(self, spec: SampleSpec, file_index: int, path: str, size: int, parts: int,
                   max_events: int | None) -> list[WorkUnit]:
        from evtkin.io.hepmc import hepmc_byte_ranges
        from evtkin.io.hepmc_header import compression

        if parts <= 1 or compression(path) is not None:
            return super().work_units(spec, file_index, path, size, 1, max_events)
        ranges = hepmc_byte_ranges(path, parts)
        return [WorkUnit(spec.name, file_index, path, byte_range=(a, b), part=k,
                         n_parts=len(ranges), size=b - a, format=self.format)
                for k, (a, b) in enumerate(ranges)]

    def open(self, plan: Plan, unit: WorkUnit, *, read_threads: int | None = None,
             with_truth: bool = False) -> UnitReading:
        reading = _HepMCReading(unit, plan.step_size, read_threads, not plan.lenient)
        if with_truth:
            from evtkin.errors import HepMCError
            from evtkin.run.inputs.ntuple import TruthJoin

            spec = plan.config.samples[unit.sample]
            reading.join = TruthJoin([str(p) for p in spec.truth_files], plan.step_size,
                                     f"{unit.path} (samples.{unit.sample}.truth_files)",
                                     error=HepMCError)
        return reading

    def provenance(self, info: Any) -> dict[str, Any]:
        return info.provenance() if isinstance(info, HepMCRunInfo) else {}

    def cross_section(self, spec: SampleSpec, records: Sequence[FileRecord],
                      totals: Sequence[FileTotals]) -> XsecResult:
        found = [(r.info.xsec_pb, r.info.xsec_err_pb) if isinstance(r.info, HepMCRunInfo)
                 else (math.nan, math.nan) for r in records]
        missing = [r.path for r, (xs, _e) in zip(records, found, strict=True) if math.isnan(xs)]
        if missing:
            if spec.cross_section_pb is None:
                raise ConfigError(
                    f"{missing[0]}: no event carries a cross-section record; give "
                    f"[samples.{spec.name}] cross_section_pb")
            # none declared: combine_files scales w / N to the user's σ
            found = [(0.0, 0.0)] * len(records)
        runs = [RunDecl(idwtup=3, processes=(ProcessDecl(PROCESS_ID, xs, xe),), source=r.path)
                for r, (xs, xe) in zip(records, found, strict=True)]
        return combine_files(list(zip(runs, totals, strict=True)),
                             override_pb=spec.cross_section_pb)
