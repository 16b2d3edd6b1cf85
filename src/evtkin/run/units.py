"""Work units: the pieces a run is split into, and how one is processed.

A :class:`WorkUnit` names an input file of a sample (and, for later executors, a range of
events within it). :func:`process_unit` reads the unit chunk by chunk, runs
:func:`evtkin.run.plan.analyse_chunk`, fills the histograms with the nominal and every
variation weight in one pass, and returns a :class:`~evtkin.run.partial.PartialResult`.
Units are independent: any executor may run them in any order and merge the results.
"""

from __future__ import annotations

import hashlib
import os
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError
from evtkin.hists.fill import HistAccumulator, fill_many
from evtkin.run.partial import Cutflow, FileRecord, PartialResult, ProcessTotals
from evtkin.run.plan import Plan, analyse_chunk, hist_entries

__all__ = ["WorkUnit", "make_units", "process_unit", "sha256_of"]

Progress = Callable[[int], None]


@dataclass(frozen=True)
class WorkUnit:
    """One input file of one sample (``first_event``/``max_events`` restrict the events)."""

    sample: str
    file_index: int
    path: str
    first_event: int = 0
    max_events: int | None = None

    @property
    def starts_file(self) -> bool:
        return self.first_event == 0


def make_units(plan: Plan) -> list[WorkUnit]:
    """One unit per input file, in config order. Missing files are a ConfigError."""
    units = []
    for name, sample in plan.config.samples.items():
        for i, path in enumerate(sample.files):
            if not path.is_file():
                raise ConfigError(
                    f"{plan.config.source}: samples.{name}.files[{i}]: no such file: {path}"
                )
            units.append(WorkUnit(name, i, str(path), 0, plan.max_events))
    return units


def sha256_of(path: str | os.PathLike[str], block: int = 1 << 23) -> str:
    """SHA-256 of a file's bytes as stored (compressed files are hashed compressed)."""
    h = hashlib.sha256()
    with open(path, "rb") as f:
        while chunk := f.read(block):
            h.update(chunk)
    return h.hexdigest()


def _chunks(unit: WorkUnit, step_size: int) -> Iterator[Any]:
    from evtkin.io.lhe import read_lhe

    remaining = unit.max_events
    skip = unit.first_event
    if remaining == 0:
        return
    reader = read_lhe(unit.path, step_size=step_size)
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


def process_unit(plan: Plan, unit: WorkUnit, progress: Progress | None = None) -> PartialResult:
    """Read and analyse one unit; return its partial result."""
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
        sha256_of(unit.path) if unit.starts_file else None, 0, info,
    )
    seconds = {"read": 0.0, "select": 0.0, "fill": 0.0}
    n_rows = len(plan.cutflow_rows)
    t0 = time.perf_counter()
    for chunk in _chunks(unit, plan.step_size):
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
        pid = np.asarray(ak.to_numpy(chunk["process_id"]), dtype=np.int64)
        pids = [int(pid[0])] if np.all(pid == pid[0]) else [int(p) for p in np.unique(pid)]
        for p in pids:
            key = (sample, unit.file_index, p)
            in_p = None if len(pids) == 1 else pid == p
            _add_totals(result, key, w0, wv, in_p)
            _add_cutflow(result, key, masks, w0, in_p, n_rows)
            items = []
            for name in hist_names:
                values, rows = entries[name]
                if in_p is not None:
                    sel = in_p[rows]
                    values, rows = [v[sel] for v in values], rows[sel]
                hkey = (sample, name, unit.file_index, p)
                acc = result.hists.get(hkey)
                if acc is None:
                    acc = result.hists[hkey] = HistAccumulator(plan.hist_specs[name], variations)
                items.append((acc, values, rows))
            fill_many(items, weight=w0, variations=wv)
        result.files[(sample, unit.file_index)].n_events += n
        t0 = time.perf_counter()
        seconds["fill"] += t0 - t2
        if progress is not None:
            progress(n)
    seconds["read"] += time.perf_counter() - t0
    result.seconds = seconds
    return result


def _add_totals(result: PartialResult, key: tuple[str, int, int], w0: np.ndarray,
                wv: np.ndarray, sel: np.ndarray | None) -> None:
    w = w0 if sel is None else w0[sel]
    v = wv if sel is None else wv[sel]
    add = ProcessTotals(int(w.size), float(w.sum()), float(np.dot(w, w)),
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
        cf.sum_w2[i] = float(np.dot(w, w))
    result.cutflows[key] = result.cutflows[key] + cf if key in result.cutflows else cf
