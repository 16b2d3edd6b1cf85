"""Merging the results folders of separate jobs of one config (``evtkin merge``).

Each folder's ``partial.npz`` (:mod:`evtkin.run.partial_store`) holds the sums of the files it
read, per normalisation group and with the weights as written. The merge checks that every
folder was made by the same config (its sha256), that no input file was read by two folders
and that the runs read their files alike (the same ``--max-events``), adds the sums, and
finalises them exactly as :func:`evtkin.run.pipeline.run` finalises one run: cross sections
from all files together, normalisation, bands, cutflows. The merged folder's provenance lists
every input of every folder, the folders merged and all their reader warnings.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import os
import tempfile
import time
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from evtkin.config import AnalysisConfig, load_config
from evtkin.errors import ResultsError
from evtkin.hists.fill import HistSpec
from evtkin.run.partial import PartialResult, merge_all
from evtkin.run.partial_store import load_partial
from evtkin.run.pipeline import _provenance, finalise
from evtkin.run.plan import Plan, build_plan
from evtkin.run.result import RunResult

__all__ = ["merge_results"]


def _provenance_of(folder: Path) -> dict[str, Any]:
    path = folder / "provenance.json"
    if not folder.is_dir():
        raise ResultsError(f"{folder}: no such results folder")
    if not path.is_file():
        raise ResultsError(f"{folder}: no provenance.json: not a finished results folder "
                           "(an interrupted run leaves none)")
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise ResultsError(f"{path}: cannot read: {exc}") from None
    cfg = data.get("config") if isinstance(data, dict) else None
    if not isinstance(cfg, dict) or not isinstance(cfg.get("text"), str):
        raise ResultsError(f"{path}: holds no config text")
    out: dict[str, Any] = data
    return out


def _config(prov: dict[str, Any]) -> AnalysisConfig:
    """The config a folder was made with: its file if it is still there unchanged, else its
    text from the provenance with paths relative to the file's original folder."""
    rec = prov["config"]
    text: str = rec["text"]
    source = Path(str(rec.get("source") or "config.toml"))
    try:
        if source.is_file() and hashlib.sha256(source.read_bytes()).hexdigest() == rec["sha256"]:
            return load_config(source)
    except OSError:
        pass
    with tempfile.TemporaryDirectory(prefix="evtkin-merge-") as tmp:
        path = Path(tmp) / source.name
        path.write_text(text, encoding="utf-8")
        return load_config(path, base_dir=source.resolve().parent)


def _specs(plan: Plan) -> dict[str, HistSpec]:
    specs: dict[str, HistSpec] = dict(plan.hist_specs)
    if any(h.response for h in plan.config.histograms.values()):
        from evtkin.hists.response import response_specs

        for name, h in plan.config.histograms.items():
            if h.response:
                for suffix, spec in response_specs(plan.hist_specs[name]).items():
                    specs[name + suffix] = spec
    from evtkin.run.chunkfill import varied_name

    for vname, _sys, _sign in plan.variations:  # object-level systematics
        for name, spec in plan.hist_specs.items():
            specs[varied_name(name, vname)] = spec
    return specs


def merge_results(out: str | os.PathLike[str], folders: Sequence[str | os.PathLike[str]], *,
                  write: bool = True) -> RunResult:
    """Merge the results folders ``folders`` (runs of one config over different input files)
    into the results of one run, written to ``out`` (unless ``write`` is false)."""
    started = _dt.datetime.now(_dt.timezone.utc)
    t0 = time.perf_counter()
    paths = [Path(f) for f in folders]
    if not paths:
        raise ResultsError("merge: give at least one results folder")
    if len({p.resolve() for p in paths}) != len(paths):
        raise ResultsError("merge: a results folder is given twice")
    provs = [_provenance_of(p) for p in paths]
    shas = [str(p["config"].get("sha256")) for p in provs]
    if len(set(shas)) > 1:
        listing = "; ".join(f"{p}: {s[:12]}" for p, s in zip(paths, shas, strict=False))
        raise ResultsError("merge: the folders were made by different configs (config "
                           f"sha256 {listing}); only runs of the same config can be merged")
    limits = {json.dumps([p.get("max_events_per_file")]) for p in provs}
    if len(limits) > 1:
        raise ResultsError("merge: the runs read different numbers of events per file "
                           "(--max-events differs); they cannot be merged")
    cfg = _config(provs[0])
    if cfg.sha256 != shas[0]:
        raise ResultsError(f"{paths[0]}: the config text does not match its recorded sha256")
    plan = build_plan(cfg, step_size=provs[0].get("step_size"),
                      max_events=provs[0].get("max_events_per_file"))
    specs = _specs(plan)
    parts: list[PartialResult] = []
    seen: dict[tuple[str, int], Path] = {}
    for p in paths:
        partial, sha = load_partial(p, specs)
        if sha != shas[0]:
            raise ResultsError(f"{p}: partial.npz was made by another config than its "
                               "provenance.json names")
        for key, rec in partial.files.items():
            if key in seen:
                raise ResultsError(
                    f"merge: input {rec.path} (samples.{key[0]}.files[{key[1]}]) was read by "
                    f"both {seen[key]} and {p}; each input may be merged once")
            seen[key] = p
        parts.append(partial)
    partial = merge_all(parts)
    samples = finalise(plan, partial)
    provenance = _provenance(plan, partial, samples, started, time.perf_counter() - t0)
    warnings = _completeness(cfg, provs, set(seen))
    provenance["merged_from"] = [
        {"folder": str(p), "started_utc": pv.get("started_utc"), "command": pv.get("command"),
         "part": pv.get("part"), "inputs": len(pv.get("inputs") or []),
         "read_warnings": _read_warnings(pv)}
        for p, pv in zip(paths, provs, strict=False)]
    provenance["execution"] = {"kind": "merge", "folders": len(paths)}
    provenance["skipped"] = [s for pv in provs for s in (pv.get("skipped") or [])]
    # as one run lists them (each names its file); which folder gave which: merged_from
    provenance["read_warnings"] = list(dict.fromkeys(m for pv in provs
                                                     for m in _read_warnings(pv)))
    provenance["merge_warnings"] = warnings
    result = RunResult(samples, provenance, None, dict(partial.seconds), partial, plan)
    if write:
        from evtkin.run.outputs import write_outputs

        write_outputs(plan, result, Path(out))
        result.out = Path(out)
    return result


def _read_warnings(prov: dict[str, Any]) -> list[str]:
    """A folder's reader warnings (``read_warnings`` of its provenance; none before they were
    recorded)."""
    return [str(m) for m in prov.get("read_warnings") or []]


def _completeness(cfg: AnalysisConfig, provs: Sequence[dict[str, Any]],
                  read: set[tuple[str, int]]) -> list[str]:
    """Warnings about inputs of the config that none of the folders read."""
    missing = [f"samples.{name}.files[{i}] ({path})"
               for name, s in cfg.samples.items() for i, path in enumerate(s.files)
               if (name, i) not in read]
    out = []
    if missing:
        out.append(f"{len(missing)} input file(s) of the config were read by none of the "
                   f"folders: {', '.join(missing[:5])}{' ...' if len(missing) > 5 else ''}")
    if cfg.skims:
        out.append("event tables ([skims]) are not merged: each folder keeps its own, with "
                   "weights normalised within its job; rerun one job over all inputs for one "
                   "table")
    of = {pv["part"]["of"] for pv in provs if isinstance(pv.get("part"), dict)}
    if len(of) == 1:
        n = of.pop()
        have = {pv["part"]["index"] for pv in provs if isinstance(pv.get("part"), dict)}
        lack = sorted(set(range(1, n + 1)) - have)
        if lack:
            out.append(f"parts {', '.join(map(str, lack))} of {n} are not among the folders")
    return out
