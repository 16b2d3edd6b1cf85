"""Response matrices in a run: which histograms get one, filling them from a chunk's
detector-level and generator-level analysis, and scaling the merged accumulators by the
sample's σ factors (the matrix arithmetic is in :mod:`evtkin.hists.response`)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError
from evtkin.hists.fill import HistAccumulator, fill_many
from evtkin.hists.response import SUFFIXES, Response, response_specs
from evtkin.run.partial import PartialResult
from evtkin.run.plan import ChunkView, Plan

__all__ = ["fill_responses", "finalise_responses", "response_names"]


def response_names(plan: Plan, sample: str) -> list[str]:
    """The histograms of ``sample`` that get a response matrix."""
    return [n for n in plan.histograms_for(sample) if plan.histogram(n).response]


def _per_event(view: ChunkView, name: str, n: int) -> np.ndarray:
    spec = view.plan.config.histograms[name]
    v = view.evaluate(spec.axes[0].value, f"histograms.{name}.x")
    if not isinstance(v, ak.Array):
        out: np.ndarray = np.broadcast_to(np.asarray(v, dtype=np.float64), (n,)).copy()
        return out
    if v.ndim != 1 or ak.fields(v):
        raise ConfigError(
            f"{view.plan.config.source}: histograms.{name}.response: {spec.axes[0].value.text!r}"
            " must give one number per event for a response matrix (e.g. leptons[0].pt)")
    return np.asarray(ak.to_numpy(ak.fill_none(v, np.nan)), dtype=np.float64)


def fill_responses(plan: Plan, result: PartialResult, key: tuple[str, int, int],
                   names: list[str], reco: tuple[ChunkView, list[np.ndarray]],
                   truth: tuple[ChunkView, list[np.ndarray]], weight: np.ndarray,
                   in_p: np.ndarray | None) -> None:
    """Fill the truth, reco and response accumulators of one chunk into ``result.hists`` under
    ``(sample, NAME#response|#truth|#reco, file index, process id)``; no variation weights."""
    sample, index, pid = key
    steps = {s.name: i + 1 for i, s in enumerate(plan.config.steps)}
    rview, rmasks = reco
    tview, tmasks = truth
    n = len(weight)
    novar = np.zeros((n, 0))
    items: list[tuple[HistAccumulator, list[np.ndarray], np.ndarray]] = []
    for name in names:
        h = plan.config.histograms[name]
        row = steps[h.after] if h.after is not None else len(steps)
        r = _per_event(rview, name, n)
        t = _per_event(tview, name, n)
        r_ok = rmasks[row] & ~np.isnan(r)
        t_ok = tmasks[row] & ~np.isnan(t)
        if in_p is not None:
            r_ok, t_ok = r_ok & in_p, t_ok & in_p
        both = np.flatnonzero(r_ok & t_ok)
        accs = {}
        for suffix, spec in response_specs(plan.hist_specs[name]).items():
            k = (sample, spec.name, index, pid)
            if k not in result.hists:
                result.hists[k] = HistAccumulator(spec, ())
            accs[suffix] = result.hists[k]
        rows_t, rows_r = np.flatnonzero(t_ok), np.flatnonzero(r_ok)
        items += [(accs["#response"], [t[both], r[both]], both),
                  (accs["#truth"], [t[rows_t]], rows_t),
                  (accs["#reco"], [r[rows_r]], rows_r)]
    fill_many(items, weight=weight, variations=novar)


def finalise_responses(plan: Plan, partial: PartialResult, xsecs: Mapping[str, Any]
                       ) -> dict[str, dict[str, Response]]:
    """Per sample with any: ``{histogram: Response}``, each file's accumulators scaled by the
    sample's σ factors (``xsecs``: sample → :class:`~evtkin.hists.xsec.XsecResult` or None)."""
    found: dict[str, dict[str, Response]] = {}
    for sname, xs in xsecs.items():
        names = response_names(plan, sname)
        if not names or xs is None or not plan.config.samples[sname].truth_files:
            continue
        files = sorted(i for (s, i) in partial.files if s == sname)
        position = {i: k for k, i in enumerate(files)}
        out: dict[str, Response] = {}
        for name in names:
            parts: dict[str, list[np.ndarray]] = {}
            for suffix in SUFFIXES:
                w = w2 = None
                for (s, h, i, pid), acc in sorted(partial.hists.items()):
                    if s != sname or h != name + suffix:
                        continue
                    f = xs.factor(pid, position[i])
                    w = f * acc.sumw[0] if w is None else w + f * acc.sumw[0]
                    w2 = f * f * acc.sumw2[0] if w2 is None else w2 + f * f * acc.sumw2[0]
                if w is None:
                    spec = response_specs(plan.hist_specs[name])[suffix]
                    w = np.zeros(spec.shape)
                    w2 = np.zeros(spec.shape)
                parts[suffix] = [w, np.asarray(w2)]
            ax = plan.hist_specs[name].axes[0]
            out[name] = Response(name, np.asarray(ax.edges, dtype=np.float64), ax.label, ax.unit,
                                 *parts["#response"], *parts["#truth"], *parts["#reco"])
        found[sname] = out
    return found
