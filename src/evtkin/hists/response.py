"""Response matrices (truth bin × reconstructed bin) with per-bin efficiency and purity.

For a 1-D histogram marked ``response = true`` and a sample whose detector-level events have
generator-level partners (``truth_files``, see :mod:`evtkin.run.ntuple_input`), the histogram's
value is computed at both levels with the *same* config: objects, selection steps, composites
and quantities are evaluated once on the generator-level event record and once on the
reconstructed collections. The selection row is the histogram's ``after`` step (default: all
steps) at each level. Per event (one value per event is required) with the detector-level
event weight w:

* ``truth``  — events passing the selection at generator level, filled at the truth value;
* ``reco``   — events passing at detector level, filled at the reconstructed value (the same
  contents as the ordinary histogram);
* ``matrix`` — events passing at both levels, filled at (truth value, reconstructed value).

A missing value (``None``, e.g. no reconstructed top) counts as failing at that level. All
arrays include the under- and overflow bins (index 0 and -1), so that for every truth bin
``matrix.sum(axis=1) + misses = truth`` and for every reconstructed bin
``matrix.sum(axis=0) + fakes = reco`` hold exactly, with ``misses`` (truth only) and ``fakes``
(reconstructed only) ≥ 0 for non-negative weights. Per in-range bin i:

* efficiency_i = Σ_j matrix[i, j] / truth_i (reconstructed anywhere, flow included);
* purity_i     = matrix[i, i] / reco_i (reconstructed in bin i and generated in bin i).

Contents are in pb (each file's weights times the sample's σ factor, as for the ``raw``
cross-section bookkeeping before any per-bin-width normalisation); Σw² comes along.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError
from evtkin.hists.fill import AxisSpec, HistAccumulator, HistSpec, fill_many

__all__ = ["Response", "fill_responses", "finalise_responses", "response_names",
           "write_responses"]

SUFFIXES = ("#response", "#truth", "#reco")


def response_names(plan: Any, sample: str) -> list[str]:
    """The histograms of ``sample`` that get a response matrix."""
    return [n for n in plan.histograms_for(sample) if plan.config.histograms[n].response]


def _specs(plan: Any, name: str) -> dict[str, HistSpec]:
    ax = plan.hist_specs[name].axes[0]
    truth = AxisSpec(f"truth_{ax.name}", ax.edges, ax.kind, f"{ax.label} (truth)", ax.unit)
    reco = AxisSpec(f"reco_{ax.name}", ax.edges, ax.kind, f"{ax.label} (reconstructed)",
                    ax.unit)
    title = plan.hist_specs[name].title
    return {
        "#response": HistSpec(f"{name}#response", (truth, reco), f"{title}: response"),
        "#truth": HistSpec(f"{name}#truth", (truth,), f"{title}: truth"),
        "#reco": HistSpec(f"{name}#reco", (reco,), f"{title}: reconstructed"),
    }


def _per_event(view: Any, name: str, n: int) -> np.ndarray:
    spec = view.plan.config.histograms[name]
    v = view.evaluate(spec.axes[0].value, f"histograms.{name}.x")
    if not isinstance(v, ak.Array):
        return np.broadcast_to(np.asarray(v, dtype=np.float64), (n,)).copy()
    if v.ndim != 1 or ak.fields(v):
        raise ConfigError(
            f"{view.plan.config.source}: histograms.{name}.response: {spec.axes[0].value.text!r}"
            " must give one number per event for a response matrix (e.g. leptons[0].pt)")
    return np.asarray(ak.to_numpy(ak.fill_none(v, np.nan)), dtype=np.float64)


def fill_responses(plan: Any, result: Any, key: tuple[str, int, int], names: list[str],
                   reco: tuple[Any, list[np.ndarray]], truth: tuple[Any, list[np.ndarray]],
                   weight: np.ndarray, in_p: np.ndarray | None) -> None:
    """Fill the truth, reco and response accumulators of one chunk into ``result.hists`` under
    ``(sample, NAME#response|#truth|#reco, file index, process id)``; no variation weights."""
    sample, index, pid = key
    steps = {s.name: i + 1 for i, s in enumerate(plan.config.steps)}
    rview, rmasks = reco
    tview, tmasks = truth
    n = len(weight)
    novar = np.zeros((n, 0))
    items = []
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
        specs = _specs(plan, name)
        accs = {}
        for suffix, spec in specs.items():
            k = (sample, spec.name, index, pid)
            if k not in result.hists:
                result.hists[k] = HistAccumulator(spec, ())
            accs[suffix] = result.hists[k]
        rows_t, rows_r = np.flatnonzero(t_ok), np.flatnonzero(r_ok)
        items += [(accs["#response"], [t[both], r[both]], both),
                  (accs["#truth"], [t[rows_t]], rows_t),
                  (accs["#reco"], [r[rows_r]], rows_r)]
    fill_many(items, weight=weight, variations=novar)


@dataclass
class Response:
    """A finished response matrix of one sample (see the module docstring)."""

    name: str
    edges: np.ndarray
    label: str
    unit: str
    matrix: np.ndarray  # (n+2, n+2): [truth bin, reco bin], flow included
    matrix_w2: np.ndarray
    truth: np.ndarray  # (n+2,)
    truth_w2: np.ndarray
    reco: np.ndarray  # (n+2,)
    reco_w2: np.ndarray

    @property
    def misses(self) -> np.ndarray:
        """Per truth bin: generated there, not reconstructed (Σw)."""
        return self.truth - self.matrix.sum(axis=1)

    @property
    def fakes(self) -> np.ndarray:
        """Per reconstructed bin: reconstructed there, not passing at generator level (Σw)."""
        return self.reco - self.matrix.sum(axis=0)

    @property
    def efficiency(self) -> np.ndarray:
        """Per in-range truth bin: Σ_j matrix[i, j] / truth_i (NaN for an empty bin)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.matrix.sum(axis=1)[1:-1] / self.truth[1:-1]

    @property
    def purity(self) -> np.ndarray:
        """Per in-range reconstructed bin: matrix[i, i] / reco_i (NaN for an empty bin)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.diagonal(self.matrix)[1:-1] / self.reco[1:-1]

    def to_dict(self) -> dict[str, Any]:
        def clean(a: np.ndarray) -> list[Any]:
            return [None if not np.isfinite(x) else float(x) for x in np.ravel(a)]

        n = len(self.edges) + 1
        return {
            "name": self.name, "label": self.label, "unit": self.unit,
            "edges": [float(e) for e in self.edges],
            "flow": "index 0 = underflow, last = overflow",
            "matrix_rows": "truth bin", "matrix_columns": "reconstructed bin",
            "matrix": [clean(r) for r in self.matrix.reshape(n, n)],
            "matrix_sumw2": [clean(r) for r in self.matrix_w2.reshape(n, n)],
            "truth": clean(self.truth), "truth_sumw2": clean(self.truth_w2),
            "reco": clean(self.reco), "reco_sumw2": clean(self.reco_w2),
            "efficiency": clean(self.efficiency), "purity": clean(self.purity),
        }


def finalise_responses(plan: Any, partial: Any, samples: dict[str, Any]) -> None:
    """Scale each file's response accumulators by the sample's σ factors and attach
    ``{histogram: Response}`` as ``responses`` to every sample result that has any."""
    for sname, sres in samples.items():
        names = response_names(plan, sname)
        xs = getattr(sres, "xsec", None)
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
                    spec = _specs(plan, name)[suffix]
                    w = np.zeros(spec.shape)
                    w2 = np.zeros(spec.shape)
                parts[suffix] = [w, np.asarray(w2)]
            ax = plan.hist_specs[name].axes[0]
            out[name] = Response(name, np.asarray(ax.edges, dtype=np.float64), ax.label, ax.unit,
                                 *parts["#response"], *parts["#truth"], *parts["#reco"])
        sres.responses = out


def write_responses(folder: str | Path, result: Any) -> Path | None:
    """``responses.json``: per sample and histogram the matrix, truth and reco histograms,
    efficiency and purity (see :meth:`Response.to_dict`). Nothing is written without any."""
    data = {s: {h: r.to_dict() for h, r in getattr(res, "responses", {}).items()}
            for s, res in result.samples.items()}
    data = {s: d for s, d in data.items() if d}
    if not data:
        return None
    target = Path(folder) / "responses.json"
    doc = {"about": "response matrices: rows = truth bin, columns = reconstructed bin, flow "
                    "bins included; contents in pb (σ-normalised Σw); efficiency and purity per "
                    "in-range bin", "samples": data}
    target.write_text(json.dumps(doc, indent=1, allow_nan=False) + "\n", encoding="utf-8")
    return target
