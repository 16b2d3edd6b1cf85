"""Partial results: what one work unit produces, and their associative merge.

A :class:`PartialResult` is a plain, picklable container. Histograms and cutflow counters
are kept per *normalisation group* ``(sample, file index, process id)`` with the weights as
written in the file (XWGTUP and the variation weights), because the factor that turns them
into cross sections depends on the file's IDWTUP and on totals known only after every unit
has run (see :mod:`evtkin.run.pipeline`). Merging adds Σw, Σw², counts and totals, so it is
associative and independent of the order of units up to floating-point summation order;
integer counters merge exactly.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from evtkin.hists.fill import HistAccumulator

__all__ = ["Cutflow", "FileRecord", "GroupKey", "PartialResult", "ProcessTotals", "merge_all"]

#: (sample name, file index within the sample, process id IDPRUP)
GroupKey = tuple[str, int, int]


@dataclass
class Cutflow:
    """Counters per selection row (row 0 = all events): raw counts, Σw and Σw² (nominal)."""

    n_raw: np.ndarray  # int64, one per row
    sum_w: np.ndarray
    sum_w2: np.ndarray

    @classmethod
    def empty(cls, rows: int) -> Cutflow:
        return cls(np.zeros(rows, np.int64), np.zeros(rows), np.zeros(rows))

    def __add__(self, other: Cutflow) -> Cutflow:
        if self.n_raw.shape != other.n_raw.shape:
            raise ValueError("cannot merge cutflows with different numbers of steps")
        return Cutflow(self.n_raw + other.n_raw, self.sum_w + other.sum_w,
                       self.sum_w2 + other.sum_w2)


@dataclass
class ProcessTotals:
    """Totals over every event read (before any selection) of one normalisation group."""

    n_events: int = 0
    sum_w: float = 0.0  # Σ XWGTUP
    sum_w2: float = 0.0  # Σ XWGTUP²
    sum_abs_w: float = 0.0
    n_negative: int = 0
    sum_var: np.ndarray = field(default_factory=lambda: np.zeros(0))  # Σ of each variation

    def __add__(self, other: ProcessTotals) -> ProcessTotals:
        if self.sum_var.shape != other.sum_var.shape and self.sum_var.size and other.sum_var.size:
            raise ValueError("cannot merge totals with different numbers of variation weights")
        sv = self.sum_var + other.sum_var if self.sum_var.size and other.sum_var.size else (
            self.sum_var if self.sum_var.size else other.sum_var)
        return ProcessTotals(
            self.n_events + other.n_events, self.sum_w + other.sum_w,
            self.sum_w2 + other.sum_w2, self.sum_abs_w + other.sum_abs_w,
            self.n_negative + other.n_negative, sv,
        )


@dataclass
class FileRecord:
    """Provenance of one input file: what was read from it and its identity."""

    sample: str
    index: int
    path: str
    size: int
    sha256: str | None = None  # filled by the unit that starts at the beginning of the file
    n_events: int = 0
    info: Any = None  # the file's run information (evtkin.io.lhe_header.LHEInfo)

    def __add__(self, other: FileRecord) -> FileRecord:
        if (self.sample, self.index, self.path) != (other.sample, other.index, other.path):
            raise ValueError("cannot merge records of different files")
        info = self.info if self.info is not None else other.info
        merge = getattr(self.info, "merged_with", None)  # ntuple units add their bytes read
        if callable(merge) and other.info is not None:
            info = merge(other.info)
        return FileRecord(self.sample, self.index, self.path, self.size,
                          self.sha256 or other.sha256, self.n_events + other.n_events, info)


def _merge_dicts(a: dict[Any, Any], b: dict[Any, Any]) -> dict[Any, Any]:
    out = dict(a)
    for k, v in b.items():
        out[k] = out[k] + v if k in out else v
    return out


@dataclass
class PartialResult:
    """Histograms, cutflow counters, per-group totals and provenance of some units of work."""

    hists: dict[tuple[str, str, int, int], HistAccumulator] = field(default_factory=dict)
    cutflows: dict[GroupKey, Cutflow] = field(default_factory=dict)
    totals: dict[GroupKey, ProcessTotals] = field(default_factory=dict)
    files: dict[tuple[str, int], FileRecord] = field(default_factory=dict)
    seconds: dict[str, float] = field(default_factory=dict)  # time per stage (read, select, fill)
    #: the readers' warnings while these units ran, ``(category name, message)`` in unit
    #: order (e.g. ``("LHEWarning", "...: skipped 2 damaged part(s) ... at line(s) ...")``):
    #: they travel back from worker processes with the result
    warnings: list[tuple[str, str]] = field(default_factory=list)

    def merge(self, other: PartialResult) -> PartialResult:
        """A new result holding both (associative; neither input is modified)."""
        return PartialResult(
            hists=_merge_dicts(self.hists, other.hists),
            cutflows=_merge_dicts(self.cutflows, other.cutflows),
            totals=_merge_dicts(self.totals, other.totals),
            files=_merge_dicts(self.files, other.files),
            seconds=_merge_dicts(self.seconds, other.seconds),
            warnings=[*self.warnings, *other.warnings],
        )

    def __add__(self, other: PartialResult) -> PartialResult:
        return self.merge(other)

    def n_events(self, sample: str | None = None) -> int:
        return sum(f.n_events for (s, _), f in self.files.items() if sample in (None, s))


def merge_all(parts: Any) -> PartialResult:
    """Merge an iterable of partial results (pairwise tree, so the cost stays balanced)."""
    items = [p for p in parts if p is not None]
    if not items:
        return PartialResult()
    while len(items) > 1:
        nxt = [items[i].merge(items[i + 1]) for i in range(0, len(items) - 1, 2)]
        if len(items) % 2:
            nxt.append(items[-1])
        items = nxt
    out: PartialResult = items[0]
    return out
