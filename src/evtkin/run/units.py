"""Work units: the pieces a run is split into, and how one is processed.

A :class:`WorkUnit` is a whole input file of a sample, or a part of one: a byte range of a
plain (uncompressed) LHE file aligned to event boundaries, or (for ROOT ntuples) a range of
tree entries. :func:`make_units` splits the inputs; :func:`process_unit` reads one unit
chunk by chunk, runs :func:`evtkin.run.plan.analyse_chunk`, fills the histograms with the
nominal and every variation weight in one pass, and returns a
:class:`~evtkin.run.partial.PartialResult`. Units are independent: any executor may run
them in any order and merge the results; histograms and cutflows do not depend on how the
inputs were split (up to floating-point summation order).

Compressed files cannot be entered at an arbitrary byte offset, so they are whole-file
units; so is every file when ``max_events`` limits the events read per file.
"""

from __future__ import annotations

import itertools
import math
import os
import re
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError
from evtkin.hists.fill import HistAccumulator, fill_many
from evtkin.run.checksums import sha256_of
from evtkin.run.partial import Cutflow, FileRecord, PartialResult, ProcessTotals
from evtkin.run.plan import Plan, analyse_chunk, hist_entries

__all__ = [
    "MIN_UNIT_BYTES",
    "WorkUnit",
    "entry_ranges",
    "lhe_byte_ranges",
    "make_units",
    "process_unit",
    "sha256_of",
]

Progress = Callable[[int], None]

#: automatic splitting never makes byte-range units smaller than this
MIN_UNIT_BYTES = 32 << 20
#: automatic splitting aims at this many units per worker (load balance vs per-unit cost)
UNITS_PER_WORKER = 2


@dataclass(frozen=True)
class WorkUnit:
    """One input file of one sample, or a part of it.

    ``first_event``/``max_events`` restrict the events of a whole-file unit.
    ``byte_range`` = ``(start, stop)``: decompressed byte offsets of a plain LHE file; the
    range starts at an ``<event`` tag and holds whole events only. ``entry_range`` =
    ``(start, stop)``: tree entries of a ROOT ntuple. ``part``/``n_parts`` number the parts
    of one file (part 0 records the file's checksum, unless ``checksum`` is false because
    the run computes it separately); ``size`` is the number of bytes on
    disk the unit covers (for throughput figures); ``index`` is the unit's position in the
    run.
    """

    sample: str
    file_index: int
    path: str
    first_event: int = 0
    max_events: int | None = None
    byte_range: tuple[int, int] | None = None
    entry_range: tuple[int, int] | None = None
    part: int = 0
    n_parts: int = 1
    size: int = 0
    format: str = "lhe"
    index: int = 0
    checksum: bool = True  # False: the run hashes the file elsewhere (see executors.execute)

    @property
    def starts_file(self) -> bool:
        return self.first_event == 0 and self.part == 0

    @property
    def label(self) -> str:
        """The file and, for a part, the range: for messages and the provenance."""
        if self.byte_range is not None:
            a, b = self.byte_range
            return f"{self.path} (bytes {a}-{b}, part {self.part + 1} of {self.n_parts})"
        if self.entry_range is not None:
            a, b = self.entry_range
            return f"{self.path} (entries {a}-{b}, part {self.part + 1} of {self.n_parts})"
        if self.first_event or self.max_events is not None:
            last = "end" if self.max_events is None else self.first_event + self.max_events
            return f"{self.path} (events {self.first_event}-{last})"
        return self.path

    def describe(self) -> dict[str, Any]:
        """A JSON-ready record of the unit."""
        return {
            "sample": self.sample, "file_index": self.file_index, "path": self.path,
            "byte_range": list(self.byte_range) if self.byte_range else None,
            "entry_range": list(self.entry_range) if self.entry_range else None,
            "part": self.part, "n_parts": self.n_parts,
        }


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


def entry_ranges(n_entries: int, parts: int) -> list[tuple[int, int]]:
    """Split ``n_entries`` tree entries into ``parts`` contiguous ranges (sizes differ by
    at most one)."""
    parts = max(1, min(int(parts), int(n_entries))) if n_entries else 1
    edges = [(n_entries * k) // parts for k in range(parts + 1)]
    return list(itertools.pairwise(edges))


def _splittable(path: str, fmt: str) -> bool:
    from evtkin.io.sources import detect_compression

    return fmt == "lhe" and detect_compression(path) is None


def make_units(plan: Plan, *, workers: int = 1, unit_bytes: int | None = None
               ) -> list[WorkUnit]:
    """Split the inputs of every sample into work units, in config order.

    Plain LHE files larger than the target unit size become byte-range units, ROOT
    ntuples (without ``truth_files``) entry-range units. The target
    is ``unit_bytes`` if given, else the total input size over ``UNITS_PER_WORKER x
    workers`` (never below :data:`MIN_UNIT_BYTES`); with ``workers=1`` and no
    ``unit_bytes`` every file is one unit. Compressed files, and every file when
    ``plan.max_events`` is set, are whole-file units. Missing files are a ConfigError.
    """
    if unit_bytes is not None and unit_bytes <= 0:
        raise ConfigError(f"unit size must be a positive number of bytes, got {unit_bytes}")
    inputs: list[tuple[str, int, str, str, int]] = []
    for name, sample in plan.config.samples.items():
        fmt = getattr(sample, "format", "lhe")
        for i, file in enumerate(sample.files):
            if not file.is_file():
                raise ConfigError(
                    f"{plan.config.source}: samples.{name}.files[{i}]: no such file: {file}"
                )
            inputs.append((name, i, str(file), fmt, file.stat().st_size))
    total = sum(x[4] for x in inputs)
    if unit_bytes is not None:
        target: int | None = unit_bytes
    elif workers > 1:
        target = max(MIN_UNIT_BYTES, math.ceil(total / (UNITS_PER_WORKER * workers)))
    else:
        target = None
    units: list[WorkUnit] = []
    for name, i, path, fmt, size in inputs:
        parts = 1 if target is None else math.ceil(size / target)
        spec = plan.config.samples[name]
        if parts > 1 and plan.max_events is None and _splittable(path, fmt):
            ranges = lhe_byte_ranges(path, parts)
            for k, (a, b) in enumerate(ranges):
                units.append(WorkUnit(name, i, path, byte_range=(a, b), part=k,
                                      n_parts=len(ranges), size=b - a, format=fmt,
                                      index=len(units)))
        elif (parts > 1 and plan.max_events is None and fmt == "root"
              and not getattr(spec, "truth_files", ())):
            from evtkin.io.ntuple import describe_ntuple

            n = describe_ntuple(path, spec.input, fields=[]).entries
            ranges = entry_ranges(n, parts)
            for k, (a, b) in enumerate(ranges):
                units.append(WorkUnit(name, i, path, entry_range=(a, b), part=k,
                                      n_parts=len(ranges), size=size * (b - a) // max(n, 1),
                                      format=fmt, index=len(units)))
        else:
            units.append(WorkUnit(name, i, path, 0, plan.max_events, size=size, format=fmt,
                                  index=len(units)))
    return units


def _lhe_reader(unit: WorkUnit, step_size: int, threads: int | None) -> Iterator[Any]:
    from evtkin.io.lhe import read_lhe

    if unit.byte_range is None:
        return read_lhe(unit.path, step_size=step_size, threads=threads)
    return read_lhe(unit.path, step_size=step_size, threads=threads,
                    byte_range=unit.byte_range)


def _chunks(unit: WorkUnit, step_size: int, threads: int | None = None) -> Iterator[Any]:
    remaining = unit.max_events
    skip = unit.first_event
    if remaining == 0:
        return
    if unit.format != "lhe":
        raise ConfigError(f"{unit.path}: input format {unit.format!r} is not supported by "
                          "the run pipeline yet")
    reader = _lhe_reader(unit, step_size, threads)
    try:
        for chunk in reader:
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
    finally:
        close = getattr(reader, "close", None)
        if close is not None:
            close()


def _weights(chunk: Any) -> tuple[np.ndarray, np.ndarray]:
    w0 = np.ascontiguousarray(ak.to_numpy(chunk["weight"]), dtype=np.float64)
    fields = ak.fields(chunk)
    if "weights" in fields:
        wv = ak.to_numpy(chunk["weights"])
        wv = np.ascontiguousarray(wv, dtype=np.float64).reshape(len(w0), -1)
    else:
        wv = np.zeros((len(w0), 0), dtype=np.float64)
    return w0, wv


def fill_by_process(
    plan: Plan,
    result: PartialResult,
    sample: str,
    file_index: int,
    chunk: Any,
    masks: Any,
    entries: dict[str, Any],
    w0: np.ndarray,
    wv: np.ndarray,
    variations: tuple[str, ...],
    group: np.ndarray | None = None,
) -> None:
    """Add one analysed chunk to ``result``, separately for each process id it holds.

    Totals (for the cross-section bookkeeping), cutflow counters and histograms are kept per
    (sample, file, process id), so that each gets its own normalisation factor after the merge.
    """
    n_rows = len(plan.cutflow_rows)
    pid = np.asarray(ak.to_numpy(chunk["process_id"]), dtype=np.int64)
    pids = [int(pid[0])] if np.all(pid == pid[0]) else [int(p) for p in np.unique(pid)]
    for p in pids:
        key = (sample, file_index, p)
        in_p = None if len(pids) == 1 else pid == p
        _add_totals(result, key, w0, wv, in_p)
        _add_cutflow(result, key, masks, w0, in_p, n_rows)
        items = []
        for name, (values, rows) in entries.items():
            if in_p is not None:
                sel = in_p[rows]
                values, rows = [v[sel] for v in values], rows[sel]
            hkey = (sample, name, file_index, p)
            acc = result.hists.get(hkey)
            if acc is None:
                acc = result.hists[hkey] = HistAccumulator(plan.hist_specs[name], variations)
            items.append((acc, values, rows))
        fill_many(items, weight=w0, variations=wv, group=group)


def process_unit(plan: Plan, unit: WorkUnit, progress: Progress | None = None, *,
                 read_threads: int | None = None) -> PartialResult:
    """Read and analyse one unit; return its partial result.

    ``progress`` is called with the number of events of every chunk done;
    ``read_threads`` is the number of parse threads of the LHE reader (default: its own).
    """
    if plan.config.samples[unit.sample].format == "root":
        from evtkin.run.ntuple_input import process_ntuple_unit

        return process_ntuple_unit(plan, unit, progress)
    from evtkin.io.lhe_header import lhe_info

    info = lhe_info(unit.path)
    variations = tuple(str(v) for v in info.weight_names)
    sample = unit.sample
    hist_names = plan.histograms_for(sample)
    steps = {s.name: i + 1 for i, s in enumerate(plan.config.steps)}
    rows_of_hist = {
        n: steps[h.after] if h.after is not None else len(steps)
        for n, h in plan.config.histograms.items() if n in hist_names
    }
    result = PartialResult()
    result.files[(sample, unit.file_index)] = FileRecord(
        sample, unit.file_index, unit.path, os.path.getsize(unit.path),
        sha256_of(unit.path) if unit.starts_file and unit.checksum else None, 0, info,
    )
    seconds = {"read": 0.0, "select": 0.0, "fill": 0.0}
    t0 = time.perf_counter()
    for chunk in _chunks(unit, plan.step_size, read_threads):
        t1 = time.perf_counter()
        seconds["read"] += t1 - t0
        n = len(chunk)
        if n == 0:
            t0 = time.perf_counter()
            continue
        view, masks = analyse_chunk(plan, chunk)
        entries = {name: hist_entries(view, name, masks[rows_of_hist[name]])
                   for name in hist_names}
        t2 = time.perf_counter()
        seconds["select"] += t2 - t1
        w0, wv = _weights(chunk)
        if wv.shape[1] != len(variations):
            raise ConfigError(
                f"{unit.path}: events carry {wv.shape[1]} variation weights but the header "
                f"declares {len(variations)}"
            )
        # LHEF 2.0 <eventgroup>: one statistical unit (weights summed per bin before squaring)
        group = (np.asarray(ak.to_numpy(chunk["group"]), dtype=np.int64)
                 if "group" in ak.fields(chunk) else None)
        fill_by_process(plan, result, sample, unit.file_index, chunk, masks, entries,
                        w0, wv, variations, group)
        result.files[(sample, unit.file_index)].n_events += n
        t0 = time.perf_counter()
        seconds["fill"] += t0 - t2
        if progress is not None:
            progress(n)
        # drop the chunk and everything made from it before the next one is read: the
        # reader then reuses its memory (a worker holds one chunk at a time, not two)
        del chunk, view, masks, entries, w0, wv, group
    seconds["read"] += time.perf_counter() - t0
    result.seconds = seconds
    return result


def _add_totals(result: PartialResult, key: tuple[str, int, int], w0: np.ndarray,
                wv: np.ndarray, sel: np.ndarray | None) -> None:
    w = w0 if sel is None else w0[sel]
    v = wv if sel is None else wv[sel]
    # Σw² as a numpy reduction, not np.dot: a BLAS dot product starts the BLAS library's
    # threads, which then spin on the other cores (measured: +6 % CPU over the wall time of
    # a one-core run, taken from the other worker when workers share the cores)
    add = ProcessTotals(int(w.size), float(w.sum()), float(np.square(w).sum()),
                        float(np.abs(w).sum()), int(np.count_nonzero(w < 0)), v.sum(axis=0))
    result.totals[key] = result.totals[key] + add if key in result.totals else add


def _add_cutflow(result: PartialResult, key: tuple[str, int, int], masks: list[np.ndarray],
                 w0: np.ndarray, sel: np.ndarray | None, n_rows: int) -> None:
    cf = Cutflow.empty(n_rows)
    for i, m in enumerate(masks):
        mm = m if sel is None else m & sel
        w = w0[mm]
        cf.n_raw[i] = int(np.count_nonzero(mm))
        cf.sum_w[i] = float(w.sum())
        cf.sum_w2[i] = float(np.square(w).sum())
    result.cutflows[key] = result.cutflows[key] + cf if key in result.cutflows else cf
