"""The run pipeline: config → plan → work units → partial results → merge → normalise → outputs.

:func:`run` is the Python API behind ``evtkin run``. Histograms are filled per file and per
process with the weights as written (XWGTUP and the variation weights); after the merge,
:func:`evtkin.hists.xsec.combine_files` turns each file's totals into per-process factors
(IDWTUP rules, several files of a sample combined, optional user cross section), the
accumulators are scaled and summed per sample, and :func:`evtkin.hists.normalise.normalise`
applies the histogram's normalisation with propagated MC-statistics variances.
"""

from __future__ import annotations

import datetime as _dt
import math
import platform
import sys
import time
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import numpy as np

from evtkin._version import __version__
from evtkin.config import AnalysisConfig, SampleSpec, load_config
from evtkin.errors import ConfigError, ResultsError
from evtkin.hists.fill import HistAccumulator
from evtkin.hists.normalise import normalise, normalise_counts
from evtkin.hists.record import HistRecord
from evtkin.hists.xsec import FileTotals, XsecResult
from evtkin.run.chunkfill import varied_name
from evtkin.run.executors import Executor, execute, executor_for, local_cores
from evtkin.run.inputs import input_source
from evtkin.run.partial import PartialResult
from evtkin.run.plan import Plan, build_plan
from evtkin.run.responses import finalise_responses
from evtkin.run.result import RunResult, SampleResult
from evtkin.run.units import make_units

__all__ = ["RunResult", "SampleResult", "finalise", "run"]


# --------------------------------------------------------------------------- finalising

def _file_totals(partial: PartialResult, sample: str, index: int) -> FileTotals:
    out = FileTotals()
    for (s, i, pid), t in partial.totals.items():
        if (s, i) != (sample, index):
            continue
        out = out + FileTotals({pid: t.n_events}, {pid: t.sum_w}, {pid: t.sum_w2},
                               {pid: t.sum_abs_w}, t.n_negative)
    return out


def _sample_result(plan: Plan, spec: SampleSpec, partial: PartialResult) -> SampleResult:
    name = spec.name
    files = sorted(i for (s, i) in partial.files if s == name)
    records = [partial.files[(name, i)] for i in files]
    n_events = sum(r.n_events for r in records)
    variation_sets = {tuple(r.info.weight_names) for r in records if r.info is not None}
    if len(variation_sets) > 1:
        raise ConfigError(
            f"{plan.config.source}: samples.{name}: the files declare different variation "
            "weights; split them into separate samples"
        )
    variations = tuple(str(v) for v in (variation_sets.pop() if variation_sets else ()))
    if spec.data:  # counted events (weights 1): no variation weights, no cross section
        variations = ()
    xsec: XsecResult | None = None
    factor: Callable[[int, int], float]
    if spec.data:
        def factor(file_index: int, pid: int) -> float:
            return 1.0
    elif n_events > 0:
        try:
            xsec = input_source(spec.format).cross_section(
                spec, records, [_file_totals(partial, name, r.index) for r in records])
        except ValueError as exc:
            raise ConfigError(f"samples.{name}: {exc}") from None
        position = {i: k for k, i in enumerate(files)}
        xs = xsec

        def factor(file_index: int, pid: int) -> float:
            return xs.factor(pid, position[file_index])
    else:
        def factor(file_index: int, pid: int) -> float:
            return 0.0

    def summed(hname: str, stored: str, weight_names: tuple[str, ...]) -> HistAccumulator:
        acc = HistAccumulator(plan.hist_specs[hname], weight_names)
        for (s, h, i, pid), part in sorted(partial.hists.items()):
            if s == name and h == stored:
                acc.add_scaled(part, factor(i, pid))
        return acc

    def normalised_of(hname: str, acc: HistAccumulator) -> HistRecord:
        try:
            if spec.data:
                return normalise_counts(acc, plan.histogram(hname).normalise,
                                        luminosity_fb=spec.luminosity_fb)
            return normalise(acc, plan.histogram(hname).normalise,
                             luminosity_fb=spec.luminosity_fb)
        except ValueError as exc:
            raise ConfigError(f"histograms.{hname} for sample {name!r}: {exc}") from None

    weighted: dict[str, HistAccumulator] = {}
    normalised: dict[str, HistRecord] = {}
    for hname in plan.histograms_for(name):
        weighted[hname] = summed(hname, hname, variations)
        normalised[hname] = normalised_of(hname, weighted[hname])
    varied: dict[str, dict[str, HistRecord]] = {}
    for vname, _sys, _sign in () if spec.data else plan.variations:
        varied[vname] = {h: normalised_of(h, summed(h, varied_name(h, vname), ()))
                         for h in normalised}

    rows = plan.cutflow_rows
    n_raw = np.zeros(len(rows), np.int64)
    sum_w = np.zeros(len(rows))
    sum_w2 = np.zeros(len(rows))
    for (s, i, pid), cf in sorted(partial.cutflows.items()):
        if s == name:
            f = factor(i, pid)
            n_raw += cf.n_raw
            sum_w += f * cf.sum_w
            sum_w2 += f * f * cf.sum_w2
    cutflow = _cutflow(rows, range(plan.common_rows), n_raw, sum_w, sum_w2)
    region_cutflows = {r: _cutflow(rows, idx, n_raw, sum_w, sum_w2)
                       for r, idx in plan.region_rows.items()}
    from evtkin.hists.normalise import shape_fractions
    from evtkin.hists.recipes import bands_for, resolve_recipes

    recipes: list[Any]
    notes: list[str]
    if spec.data:  # counted events: their errors are √N, no bands
        recipes, notes = [], []
    elif records:
        recipes, notes = resolve_recipes(plan.config, name, variations,
                                         [r.info for r in records])
    else:  # e.g. one part of a run split over jobs that holds none of this sample's files
        recipes, notes = [], [f"{name}: no file of this sample was read: no bands"]
    bands = ({h: bands_for(nh.all_rows(), recipes, {v: varied[v][h].values for v in varied})
              for h, nh in normalised.items()} if recipes else {})
    shape_bands = {}
    for h, nh in normalised.items():
        frac = shape_fractions(nh) if recipes else None
        if frac is not None:
            shifted = {}
            for v in varied:
                vf = shape_fractions(varied[v][h])
                if vf is not None:
                    shifted[v] = vf[0]
            shape_bands[h] = bands_for(frac, recipes, shifted)
        # the record carries its bands from here to the output files
        nh.bands = dict(bands.get(h, {}))
        nh.shape_bands = dict(shape_bands.get(h, {}))
    return SampleResult(name, spec.label, spec.luminosity_fb, spec.toy, xsec, variations,
                        normalised, weighted, cutflow, n_events, bands, shape_bands, recipes,
                        notes, varied=varied, region_cutflows=region_cutflows, data=spec.data)


def _cutflow(rows: tuple[str, ...], index: Any, n_raw: np.ndarray, sum_w: np.ndarray,
             sum_w2: np.ndarray) -> list[dict[str, Any]]:
    """The cutflow of the rows ``index`` (in order), efficiencies relative to the row before."""
    out: list[dict[str, Any]] = []
    idx = list(index)
    first = sum_w[idx[0]] if idx else 0.0
    for j, k in enumerate(idx):
        prev = sum_w[idx[j - 1]] if j else first
        out.append({
            "step": rows[k],
            "n_raw": int(n_raw[k]),
            "sum_w": float(sum_w[k]),
            "sum_w2": float(sum_w2[k]),
            "eff_step": float(sum_w[k] / prev) if prev else math.nan,
            "eff_cum": float(sum_w[k] / first) if first else math.nan,
        })
    return out


def _factors(plan: Plan, partial: PartialResult, samples: Mapping[str, SampleResult]
             ) -> dict[str, Callable[[int, int], float]]:
    """Per sample: (file index, process id) → the σ factor of its weights."""
    out: dict[str, Callable[[int, int], float]] = {}
    for name, s in samples.items():
        xs = s.xsec
        if xs is None:
            continue
        files = sorted(i for (smp, i) in partial.files if smp == name)
        position = {i: k for k, i in enumerate(files)}

        def factor(i: int, pid: int, xs: XsecResult = xs,
                   position: dict[int, int] = position) -> float:
            return xs.factor(pid, position[i])

        out[name] = factor
    return out


def finalise(plan: Plan, partial: PartialResult) -> dict[str, SampleResult]:
    """Normalise a merged partial result, sample by sample."""
    samples = {name: _sample_result(plan, spec, partial)
               for name, spec in plan.config.samples.items()}
    if any(h.response for h in plan.config.histograms.values()):
        found = finalise_responses(plan, partial, {n: s.xsec for n, s in samples.items()})
        for sname, responses in found.items():
            samples[sname].responses = responses
    return samples


# --------------------------------------------------------------------------- provenance

def _versions() -> dict[str, str]:
    import awkward
    import numba
    import uproot
    import vector

    return {"evtkin": __version__, "python": platform.python_version(),
            "numpy": np.__version__, "awkward": awkward.__version__,
            "vector": vector.__version__, "numba": numba.__version__,
            "uproot": uproot.__version__}


def _provenance(plan: Plan, partial: PartialResult, samples: Mapping[str, SampleResult],
                started: _dt.datetime, seconds: float) -> dict[str, Any]:
    cfg = plan.config
    inputs = []
    for (sample, index), rec in sorted(partial.files.items()):
        inputs.append({"sample": sample, "index": index, "path": rec.path, "size": rec.size,
                       "sha256": rec.sha256, "events": rec.n_events})
        # what the format adds (ntuples: tree, branches, bytes read)
        inputs[-1].update(input_source(cfg.samples[sample].format).provenance(rec.info))
    return {
        "evtkin_version": _versions()["evtkin"],
        "versions": _versions(),
        "command": " ".join(sys.argv) if sys.argv and sys.argv[0] else None,
        "config": {"source": cfg.source, "sha256": cfg.sha256, "text": cfg.text},
        "analysis": cfg.name,
        "started_utc": started.strftime("%Y-%m-%dT%H:%M:%SZ"),
        "run_seconds": round(seconds, 3),
        "stage_seconds": {k: round(v, 3) for k, v in partial.seconds.items()},
        "step_size": plan.step_size,
        "lenient": plan.lenient,
        "max_events_per_file": plan.max_events,
        "inputs": inputs,
        "cross_sections": {
            name: (s.xsec.to_dict() if s.xsec is not None else None) for name, s in samples.items()
        },
        "uncertainties": {
            name: {"recipes": [r.to_dict() for r in s.recipes], "notes": list(s.uncertainty_notes)}
            for name, s in samples.items()
        },
    }


# --------------------------------------------------------------------------- entry point

def run(
    config: str | Path | Mapping[str, Any] | AnalysisConfig,
    *,
    out: str | Path | None = None,
    jobs: int | None = None,
    dask: str | None = None,
    max_events: int | None = None,
    step_size: int | None = None,
    progress: bool | None = False,
    executor: Executor | None = None,
    skip_bad: bool = False,
    unit_bytes: int | None = None,
    part: tuple[int, int] | None = None,
    lenient: bool = False,
) -> RunResult:
    """Run an analysis and return its normalised histograms (``result[sample][hist]``).

    ``config``: a TOML path, a mapping (relative sample paths against the working
    directory) or an :class:`~evtkin.config.AnalysisConfig`. ``out``: write the results
    folder there (default: the config's ``[output] directory``, else nothing is written).
    ``jobs`` and ``dask`` mean what ``--jobs`` and ``--dask`` mean on the command line:
    ``jobs=1`` runs in this process on one core, ``jobs=N`` in N local worker processes,
    ``dask="local"`` or a scheduler address on a Dask cluster (``jobs``: its number of workers
    with ``"local"``); without either, small inputs run here with the reader's threads and
    larger ones on every core. It works the same from a script (no ``if __name__ ==
    "__main__":`` guard needed), a notebook and the command line. ``max_events``: read at most
    this many events from each input file. ``step_size``: events per chunk (results do not
    depend on it). ``progress``: show a progress bar (``None``: only on a terminal).
    ``executor``: where the work units run, instead of ``jobs``/``dask`` (see
    :mod:`evtkin.run.executors`). ``skip_bad``: a failing unit is skipped and listed in the
    provenance and results (default: the run stops with an error naming its file and range).
    ``unit_bytes``: target size of byte-range units of plain LHE files (default: automatic from
    the number of workers). ``part``: ``(K, N)`` reads only the K-th of N parts of the input
    files (:func:`evtkin.run.parts.split_files`), for jobs whose results folders ``evtkin
    merge`` adds up.
    """
    started = _dt.datetime.now(_dt.timezone.utc)
    t0 = time.perf_counter()
    if executor is not None and (jobs is not None or dask is not None):
        raise ValueError("give either executor or jobs/dask, not both")
    if jobs is not None and (isinstance(jobs, bool) or int(jobs) != jobs or jobs < 1):
        raise ValueError(f"jobs must be a whole number >= 1, got {jobs!r}")
    cfg = config if isinstance(config, AnalysisConfig) else load_config(config)
    plan = build_plan(cfg, step_size=step_size, max_events=max_events)
    if lenient or skip_bad:
        import dataclasses

        # lenient: damaged LHE events are skipped with a warning (read_lhe(strict=False));
        # skip_bad: a unit whose input fails late keeps the events read before
        plan = dataclasses.replace(plan, lenient=lenient, keep_partial=skip_bad)
    target = Path(out) if out is not None else cfg.output.directory
    lock = None
    if target is not None:  # checked and locked before any work
        from evtkin.files import FolderBusy, FolderLock, check_output_folder

        try:
            check_output_folder(target)
            lock = FolderLock(target).acquire()
        except FolderBusy as exc:
            raise ResultsError(str(exc)) from None
    try:
        if cfg.skims:
            if target is None:
                raise ConfigError(f"{cfg.source}: [skims] write event tables into the results "
                                  "folder: give one ([output] directory, or out=...)")
            import dataclasses
            import shutil

            skim_dir = Path(target) / "skims"
            shutil.rmtree(skim_dir, ignore_errors=True)  # parts of an earlier run
            plan = dataclasses.replace(plan, skim_dir=str(skim_dir))
        planned = make_units(plan)  # missing inputs fail before anything else
        only_files = None
        if part is not None:
            from evtkin.run.parts import split_files

            k, n = part
            sizes: dict[tuple[str, int], int] = {}
            for u in planned:
                sizes[(u.sample, u.file_index)] = sizes.get((u.sample, u.file_index), 0) + u.size
            only_files = split_files([(s, i, b) for (s, i), b in sizes.items()], n)[k - 1]
        from evtkin.hists.recipes import check_config_against_files

        check_config_against_files(cfg)  # unknown weight groups/ids fail before reading events
        if executor is None:  # as the command line chooses (workers start in execute())
            input_bytes = sum(f.stat().st_size for s in cfg.samples.values() for f in s.files
                              if f.is_file())
            executor = executor_for(jobs=jobs, dask=dask, input_bytes=input_bytes)
        execution = execute(plan, executor, skip_bad=skip_bad, progress=progress,
                            unit_bytes=unit_bytes, only_files=only_files)
        partial = execution.partial
        samples = finalise(plan, partial)
        seconds = time.perf_counter() - t0
        provenance = _provenance(plan, partial, samples, started, seconds)
        provenance["execution"] = execution.record()
        provenance["skipped"] = list(execution.skipped)
        provenance["config_warnings"] = list(cfg.warnings)
        # the readers' warnings (lenient reading: the damaged parts skipped, with lines)
        provenance["read_warnings"] = list(dict.fromkeys(m for _, m in partial.warnings))
        if part is not None:
            provenance["part"] = {"index": part[0], "of": part[1]}
        result = RunResult(samples, provenance, None, dict(partial.seconds), partial, plan)
        if plan.skim_dir is not None and target is not None:
            from evtkin.run.skims import assemble_skims

            tables = assemble_skims(plan, target, _factors(plan, partial, samples))
            provenance["skims"] = [str(p.relative_to(target)) for p in tables]
        if target is not None:
            from evtkin.run.outputs import write_outputs

            write_outputs(plan, result, target, workers=local_cores(executor))
            result.out = target
        return result
    finally:
        if lock is not None:
            lock.release()
