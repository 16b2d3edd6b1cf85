"""Work units: the pieces a run is split into, and how one is processed.

A :class:`WorkUnit` is a whole input file of a sample, or a part of one: a byte range of a
plain (uncompressed) LHE file aligned to event boundaries, or (for ROOT ntuples) a range of
tree entries. :func:`make_units` splits the inputs (each format's input source,
:mod:`evtkin.run.inputs`, says how); :func:`process_unit`, the one unit loop of every format,
reads one unit chunk by chunk through the format's source, runs
:func:`evtkin.run.plan.analyse_chunk`, fills the histograms with the nominal and every variation
weight in one pass, and returns a
:class:`~evtkin.run.partial.PartialResult`. Units are independent: any executor may run
them in any order and merge the results; histograms and cutflows do not depend on how the
inputs were split (up to floating-point summation order).

Every file is a whole-file unit when ``max_events`` limits the events read per file.
"""

from __future__ import annotations

import dataclasses
import math
import os
import time
from collections.abc import Callable
from typing import Any

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError, EvtkinError, collect_reading_warnings
from evtkin.run.checksums import sha256_of
from evtkin.run.inputs import input_source
from evtkin.run.inputs.base import InputSource, limit_events
from evtkin.run.inputs.lhe import lhe_byte_ranges
from evtkin.run.partial import FileRecord, PartialResult
from evtkin.run.plan import Plan, analyse_chunk
from evtkin.run.responses import fill_responses, response_names
from evtkin.run.workunit import WorkUnit, entry_ranges

__all__ = [
    "MIN_UNIT_BYTES",
    "WorkUnit",
    "entry_ranges",
    "lhe_byte_ranges",
    "make_units",
    "process_unit",
    "reader_warnings",
    "sha256_of",
]

Progress = Callable[[int], None]


def reader_warnings() -> dict[str, type[Warning]]:
    """The readers' warning classes by name: a unit keeps their messages with its result
    (``PartialResult.warnings``, collected by :func:`~evtkin.errors.warn_reading`) and the
    caller shows them under their own class."""
    from evtkin.io.hepmc import HepMCWarning
    from evtkin.io.lhe import LHEWarning

    return {"LHEWarning": LHEWarning, "HepMCWarning": HepMCWarning}

#: automatic splitting never makes byte-range units smaller than this
MIN_UNIT_BYTES = 32 << 20
#: automatic splitting aims at this many units per worker (load balance vs per-unit cost)
UNITS_PER_WORKER = 2


def make_units(plan: Plan, *, workers: int = 1, unit_bytes: int | None = None
               ) -> list[WorkUnit]:
    """Split the inputs of every sample into work units, in config order.

    Plain LHE and HepMC files larger than the target unit size become byte-range units,
    ROOT ntuples entry-range units (with ``truth_files`` too: a unit's truth join skips the
    generator-level events before its first event number). The target
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
        parts = 1 if target is None or plan.max_events is not None else math.ceil(size / target)
        source = input_source(fmt)
        for u in source.work_units(plan.config.samples[name], i, path, size, parts,
                                   plan.max_events):
            units.append(dataclasses.replace(u, index=len(units)))
    return units


def _weights(chunk: Any) -> tuple[np.ndarray, np.ndarray]:
    w0 = np.ascontiguousarray(ak.to_numpy(chunk["weight"]), dtype=np.float64)
    fields = ak.fields(chunk)
    if "weights" in fields:
        wv = ak.to_numpy(chunk["weights"])
        wv = np.ascontiguousarray(wv, dtype=np.float64).reshape(len(w0), -1)
    else:
        wv = np.zeros((len(w0), 0), dtype=np.float64)
    return w0, wv


class PartialUnitError(EvtkinError):
    """A unit's input failed after some chunks were analysed (``plan.keep_partial``):
    ``result`` holds those chunks."""

    def __init__(self, message: str, result: PartialResult) -> None:
        super().__init__(message)
        self.result = result


def process_unit(plan: Plan, unit: WorkUnit, progress: Progress | None = None, *,
                 read_threads: int | None = None) -> PartialResult:
    """Read and analyse one unit; return its partial result (the one unit loop of every
    input format: the format's :class:`~evtkin.run.inputs.InputSource` reads, the rest is
    common).

    ``progress`` is called with the number of events of every chunk done;
    ``read_threads`` is the number of parse threads of the reader (default: its own).
    With ``truth_files`` the response matrices of the histograms marked ``response = true``
    are filled as well. The readers' warnings (:func:`reader_warnings`) go to
    ``PartialResult.warnings`` instead of being shown here (collected per thread: units
    running at the same time in threads of one process each keep their own). With
    ``plan.keep_partial`` (``--skip-bad``) a unit whose reading fails is read again
    leniently where its format can, after the events already analysed, and then raises
    :class:`PartialUnitError` holding every intact event's contribution.
    """
    sample = unit.sample
    spec = plan.config.samples[sample]
    responses = response_names(plan, sample) if spec.truth_files else []
    source = input_source(spec.format)
    result = PartialResult()
    with collect_reading_warnings() as caught:
        # the readers' warnings are kept with the result: from a worker process (or one of
        # several threads of a worker) they reach the caller that way (execute() shows
        # them there, once)
        try:
            return _process_unit(plan, unit, source, result, responses, progress,
                                 read_threads)
        finally:
            result.warnings.extend(caught)


def _process_unit(plan: Plan, unit: WorkUnit, source: InputSource, result: PartialResult,
                  responses: list[str], progress: Progress | None,
                  read_threads: int | None) -> PartialResult:
    from evtkin.run.chunkfill import fill_chunk

    sample = unit.sample
    reading = source.open(plan, unit, read_threads=read_threads, with_truth=bool(responses))
    seconds = {"read": 0.0, "select": 0.0, "fill": 0.0}
    variations: tuple[str, ...] | None = None
    n_total = 0
    n_chunks = 0
    t0 = time.perf_counter()
    failure: EvtkinError | None = None
    #: --skip-bad: the error after which the unit was read again leniently
    first_failure: EvtkinError | None = None
    chunks = reading.chunks()
    try:
        while True:
            try:
                chunk = next(chunks, None)
            except ConfigError:
                raise
            except EvtkinError as exc:
                if not plan.keep_partial:
                    raise
                if first_failure is None and not plan.lenient and source.reads_leniently:
                    # --skip-bad: read the unit again, leniently (damaged events skipped
                    # with a warning naming their lines), after the events analysed so
                    # far (the lenient reading delivers the same ones before the damage)
                    first_failure = exc
                    reading.close()
                    try:
                        reading = source.open(dataclasses.replace(plan, lenient=True), unit,
                                              read_threads=read_threads,
                                              with_truth=bool(responses))
                    except EvtkinError:
                        failure = exc
                        break
                    chunks = limit_events(reading.chunks(), n_total, None)
                    continue
                failure = exc  # keep the chunks analysed so far (--skip-bad)
                break
            if chunk is None:
                break
            t1 = time.perf_counter()
            seconds["read"] += t1 - t0
            if variations is None:
                variations = reading.variation_names()
            n = len(chunk)
            if n == 0:
                t0 = time.perf_counter()
                continue
            w0, wv = _weights(chunk)
            names = variations or ()
            if wv.shape[1] != len(names):
                raise ConfigError(
                    f"{unit.path}: events carry {wv.shape[1]} variation weights but the header "
                    f"declares {len(names)}"
                )
            # LHEF 2.0 <eventgroup>: one statistical unit (weights summed per bin before squaring)
            group = (np.asarray(ak.to_numpy(chunk["group"]), dtype=np.int64)
                     if "group" in ak.fields(chunk) else None)
            view, masks = fill_chunk(plan, result, sample, unit.file_index, chunk, w0, wv,
                                     names, group, unit_index=unit.index,
                                     chunk_index=n_chunks, seconds=seconds)
            n_chunks += 1
            generated = reading.truth(chunk) if responses else None
            if generated is not None:
                t2 = time.perf_counter()
                truth = analyse_chunk(plan, generated)
                _fill_responses_by_process(plan, result, sample, unit.file_index, chunk,
                                           responses, (view, masks), truth, w0)
                seconds["fill"] += time.perf_counter() - t2
            n_total += n
            t0 = time.perf_counter()
            if progress is not None:
                progress(n)
            # drop the chunk and everything made from it before the next one is read: the
            # reader then reuses its memory (a worker holds one chunk at a time, not two)
            del chunk, view, masks, w0, wv, group, generated
    finally:
        reading.close()
    seconds["read"] += time.perf_counter() - t0
    result.files[(sample, unit.file_index)] = FileRecord(
        sample, unit.file_index, unit.path, os.path.getsize(unit.path),
        sha256_of(unit.path) if unit.starts_file and unit.checksum else None, n_total,
        reading.file_info(n_total),
    )
    result.seconds = seconds
    failure = first_failure or failure
    if failure is not None:
        if n_total == 0:
            raise failure  # nothing read: the unit is skipped as a whole
        raise PartialUnitError(str(failure), result)
    return result


def _fill_responses_by_process(plan: Plan, result: PartialResult, sample: str,
                               file_index: int, chunk: Any, names: list[str],
                               reco: tuple[Any, list[np.ndarray]],
                               truth: tuple[Any, list[np.ndarray]], w0: np.ndarray) -> None:
    pid = np.asarray(ak.to_numpy(chunk["process_id"]), dtype=np.int64)
    pids = np.unique(pid)
    for p in pids:
        in_p = None if pids.size == 1 else pid == p
        fill_responses(plan, result, (sample, file_index, int(p)), names, reco, truth, w0, in_p)
