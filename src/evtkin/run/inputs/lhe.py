"""LHE files as a run input: byte-range work units of plain files, chunks from
:func:`evtkin.io.lhe.read_lhe`, variation names and run information from the header
(:func:`evtkin.io.lhe_header.lhe_info`), σ from the ``<init>`` block and IDWTUP
(:func:`evtkin.hists.xsec.combine_files`).

Compressed files cannot be entered at an arbitrary byte offset, so they are whole-file units.
"""

from __future__ import annotations

import os
import re
from collections.abc import Iterator, Sequence
from typing import TYPE_CHECKING, Any

from evtkin.hists.xsec import FileTotals, ProcessDecl, RunDecl, XsecResult, combine_files
from evtkin.run.inputs.base import InputSource, UnitReading, limit_events
from evtkin.run.workunit import WorkUnit

if TYPE_CHECKING:  # pragma: no cover
    from evtkin.config import SampleSpec
    from evtkin.io.lhe_header import LHEInfo
    from evtkin.run.partial import FileRecord
    from evtkin.run.plan import Plan

__all__ = ["LHESource", "lhe_byte_ranges"]


# --------------------------------------------------------------------------- splitting

#: an event start tag at the start of a line (leading blanks allowed): ``<event>`` or
#: ``<event attr=...>``, not ``<eventgroup>`` (LHEF 1.0, hep-ph/0609017; 3.0, arXiv:1405.1067)
_EVENT_START = re.compile(rb"\n[ \t]*(<event)[\s>]")
_SEARCH_BLOCK = 1 << 20


def _next_event_start(fh: Any, pos: int, stop: int) -> int | None:
    """Offset of the first line-start ``<event`` tag at or after ``pos`` (before ``stop``)."""
    base = max(pos - 1, 0)  # one byte early: a tag right at ``pos`` follows a newline
    data = b""
    while base + len(data) < stop:
        fh.seek(base + len(data))
        block = fh.read(min(_SEARCH_BLOCK, stop - base - len(data)))
        if not block:
            return None
        data += block
        m = _EVENT_START.search(data)
        if m is not None:
            return base + m.start(1)
        keep = min(len(data), 64)  # a tag may straddle two blocks
        base += len(data) - keep
        data = data[-keep:]
    return None


def lhe_byte_ranges(path: str | os.PathLike[str], parts: int,
                    events_offset: int | None = None) -> list[tuple[int, int]]:
    """Split a plain LHE file into about ``parts`` byte ranges of whole events.

    The first range starts at the first ``<event`` tag after ``</init>``; the others at the
    first line-start ``<event`` tag after an evenly spaced offset; the last ends at the end
    of the file. A file with fewer events than ``parts`` gets fewer ranges.
    """
    from evtkin.io.sources import detect_compression

    if detect_compression(path) is not None:
        raise ValueError(f"{os.fspath(path)}: compressed files cannot be split by byte ranges")
    if events_offset is None:
        from evtkin.io.lhe_header import lhe_info

        events_offset = lhe_info(path).events_offset
    size = os.path.getsize(path)
    with open(path, "rb") as fh:
        first = _next_event_start(fh, events_offset, size)
        if first is None:  # no events: one (empty) range
            return [(events_offset, size)]
        starts = [first]
        parts = max(1, int(parts))
        span = size - first
        for k in range(1, parts):
            approx = first + (span * k) // parts
            if approx <= starts[-1]:
                continue
            nxt = _next_event_start(fh, approx, size)
            if nxt is None:
                break
            if nxt > starts[-1]:
                starts.append(nxt)
    stops = [*starts[1:], size]
    return list(zip(starts, stops, strict=True))


# --------------------------------------------------------------------------- reading

def lhe_chunks(unit: WorkUnit, step_size: int, threads: int | None,
               strict: bool = True) -> Iterator[Any]:
    """The reader of one unit's events (a byte range or the whole file)."""
    from evtkin.io.lhe import read_lhe

    if unit.byte_range is None:
        return read_lhe(unit.path, step_size=step_size, threads=threads, strict=strict)
    return read_lhe(unit.path, step_size=step_size, threads=threads,
                    byte_range=unit.byte_range, strict=strict)


class _LHEReading(UnitReading):
    def __init__(self, unit: WorkUnit, step_size: int, threads: int | None,
                 strict: bool = True) -> None:
        from evtkin.io.lhe_header import lhe_info

        self._strict = strict
        self.unit = unit
        self.info: LHEInfo = lhe_info(unit.path)
        self._names = tuple(str(v) for v in self.info.weight_names)
        self._reader: Any = None
        self._step_size = step_size
        self._threads = threads

    def chunks(self) -> Iterator[Any]:
        if self.unit.max_events == 0:
            return iter(())
        self._reader = lhe_chunks(self.unit, self._step_size, self._threads, self._strict)
        return limit_events(iter(self._reader), self.unit.first_event, self.unit.max_events)

    def variation_names(self) -> tuple[str, ...]:
        return self._names

    def file_info(self, n_events: int) -> LHEInfo:
        return self.info

    def close(self) -> None:
        close = getattr(self._reader, "close", None)
        if close is not None:
            close()


def _run_decl(info: Any, path: str) -> RunDecl:
    tot = info.xsecinfo.get("totxsec") if info.xsecinfo else None
    try:
        totxsec = float(tot) if tot is not None else None
    except ValueError:
        totxsec = None
    return RunDecl(
        idwtup=int(info.weighting),
        processes=tuple(ProcessDecl(p.process_id, p.xsec_pb, p.xsec_err_pb, p.max_weight)
                        for p in info.processes),
        totxsec_pb=totxsec,
        source=path,
    )


class LHESource(InputSource):
    """Les Houches event files (plain or compressed)."""

    format = "lhe"
    reads_leniently = True

    def work_units(self, spec: SampleSpec, file_index: int, path: str, size: int, parts: int,
                   max_events: int | None) -> list[WorkUnit]:
        from evtkin.io.sources import detect_compression

        if parts <= 1 or detect_compression(path) is not None:
            return super().work_units(spec, file_index, path, size, 1, max_events)
        ranges = lhe_byte_ranges(path, parts)
        return [WorkUnit(spec.name, file_index, path, byte_range=(a, b), part=k,
                         n_parts=len(ranges), size=b - a, format=self.format)
                for k, (a, b) in enumerate(ranges)]

    def open(self, plan: Plan, unit: WorkUnit, *, read_threads: int | None = None,
             with_truth: bool = False) -> UnitReading:
        return _LHEReading(unit, plan.step_size, read_threads, not plan.lenient)

    def cross_section(self, spec: SampleSpec, records: Sequence[FileRecord],
                      totals: Sequence[FileTotals]) -> XsecResult:
        return combine_files(
            [(_run_decl(r.info, r.path), t) for r, t in zip(records, totals, strict=True)],
            override_pb=spec.cross_section_pb,
        )
