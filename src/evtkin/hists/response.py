"""Response matrices (truth bin × reconstructed bin) with per-bin efficiency and purity.

For a 1-D histogram marked ``response = true`` and a sample whose detector-level events have
generator-level partners (``truth_files``, see :mod:`evtkin.run.inputs.ntuple`), the histogram's
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

from dataclasses import dataclass
from typing import Any

import numpy as np

from evtkin.hists.fill import AxisSpec, HistSpec

__all__ = ["SUFFIXES", "Response", "response_specs"]

SUFFIXES = ("#response", "#truth", "#reco")


def response_specs(spec: HistSpec) -> dict[str, HistSpec]:
    """The three accumulators' specs of 1-D histogram ``spec``: ``#response`` (truth × reco),
    ``#truth`` and ``#reco``, with the histogram's binning."""
    name = spec.name
    ax = spec.axes[0]
    truth = AxisSpec(f"truth_{ax.name}", ax.edges, ax.kind, f"{ax.label} (truth)", ax.unit)
    reco = AxisSpec(f"reco_{ax.name}", ax.edges, ax.kind, f"{ax.label} (reconstructed)",
                    ax.unit)
    title = spec.title
    return {
        "#response": HistSpec(f"{name}#response", (truth, reco), f"{title}: response"),
        "#truth": HistSpec(f"{name}#truth", (truth,), f"{title}: truth"),
        "#reco": HistSpec(f"{name}#reco", (reco,), f"{title}: reconstructed"),
    }


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
        out: np.ndarray = self.truth - self.matrix.sum(axis=1)
        return out

    @property
    def fakes(self) -> np.ndarray:
        """Per reconstructed bin: reconstructed there, not passing at generator level (Σw)."""
        out: np.ndarray = self.reco - self.matrix.sum(axis=0)
        return out

    @property
    def efficiency(self) -> np.ndarray:
        """Per in-range truth bin: Σ_j matrix[i, j] / truth_i (NaN for an empty bin)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            out: np.ndarray = self.matrix.sum(axis=1)[1:-1] / self.truth[1:-1]
            return out

    @property
    def purity(self) -> np.ndarray:
        """Per in-range reconstructed bin: matrix[i, i] / reco_i (NaN for an empty bin)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            out: np.ndarray = np.diagonal(self.matrix)[1:-1] / self.reco[1:-1]
            return out

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
