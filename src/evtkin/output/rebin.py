"""Rebinning stored 1-D results so that they equal a run with the coarser binning.

The stored quantity depends on the normalisation (docs/results-format.md), so merging bins means:

* ``raw``, ``events``: Σw and Σw² (the variance) of the merged bins add;
* ``xsec_per_bin``: values × old widths give Σw per bin, variances × widths² give Σw²; these add
  and are divided by the new width (and its square); the flow bins are stored undivided and stay;
* ``unit_area``: fractions add; the variance is the delta-method one of the merged bin,
  ``Var(p_K) = (1 − 2 p_K) t_K + p_K² T`` with ``t = Σw²/W²`` per bin (recovered from the stored
  variances by solving the same relation for the old bins, REFERENCES §2.11) and ``T = Σ t``
  over the bins in the normalisation; unit area stays unit area.

Band edges (and the shape bands) are moved by the sum of the merged bins' deviations from the
nominal, i.e. the deviations are taken as fully correlated between neighbouring bins. That is exact
for a band made of one variation and an upper bound for an envelope or a quadrature sum of
several (their per-bin maxima may come from different variations).
"""

from __future__ import annotations

import dataclasses
import itertools
from collections.abc import Sequence
from typing import Any

import numpy as np

from evtkin.errors import ResultsError
from evtkin.hists.bands import Band

__all__ = ["groups_for", "merge_bins", "rebin_result"]


def groups_for(edges: np.ndarray, rebin: int | Sequence[float], what: str = "") -> list[list[int]]:
    """Groups of old in-range bin indices for ``rebin``: a factor (every ``n`` bins merged; the
    number of bins must divide) or new edges (a subset of the old ones, first and last kept)."""
    nb = len(edges) - 1
    where = f"{what}: " if what else ""
    if isinstance(rebin, (int, np.integer)) and not isinstance(rebin, bool):
        n = int(rebin)
        if n < 1 or nb % n:
            raise ResultsError(f"{where}rebin {n}: expected a whole number that divides the "
                               f"{nb} bins")
        return [list(range(i, i + n)) for i in range(0, nb, n)]
    new = np.array([float(x) for x in rebin], dtype=np.float64)  # type: ignore[union-attr]
    idx = []
    for e in new:
        hit = np.flatnonzero(np.isclose(edges, e, rtol=1e-9, atol=1e-12 * max(1.0, abs(e))))
        if not hit.size:
            raise ResultsError(f"{where}rebin edge {e:g} is not one of the histogram's edges "
                               f"({', '.join(f'{x:g}' for x in edges)})")
        idx.append(int(hit[0]))
    rising = all(b > a for a, b in itertools.pairwise(idx))
    if len(idx) < 2 or idx[0] != 0 or idx[-1] != nb or not rising:
        raise ResultsError(f"{where}rebin edges must rise and run from the first edge "
                           f"({edges[0]:g}) to the last ({edges[-1]:g})")
    return [list(range(a, b)) for a, b in itertools.pairwise(idx)]


def merge_bins(x: np.ndarray, groups: list[list[int]]) -> np.ndarray:
    """Sum per-bin contents (flow included: index 0 and -1 kept) over ``groups`` of in-range
    bin indices (0-based among the in-range bins)."""
    inner = np.array([x[1:-1][g].sum() for g in groups], dtype=np.float64)
    return np.concatenate([[x[0]], inner, [x[-1]]])


def _unit_area_t(p: np.ndarray, var: np.ndarray, in_sum: np.ndarray, what: str) -> np.ndarray:
    """Solve Var(p_k) = (1 − 2 m_k p_k) t_k + p_k² Σ_{j: m_j} t_j for t."""
    m = in_sum.astype(float)
    a = np.diag(1.0 - 2.0 * m * p) + np.outer(p * p, m)
    t, *_ = np.linalg.lstsq(a, var, rcond=None)
    scale = max(float(np.max(np.abs(var))), 1e-300)
    if not np.all(np.isfinite(t)) or np.any(t < -1e-9 * scale) or not np.allclose(
            a @ t, var, rtol=1e-7, atol=1e-12 * scale):
        raise ResultsError(f"{what}: the unit-area variances do not follow the delta-method "
                           "form; cannot rebin them exactly")
    return np.maximum(t, 0.0)  # type: ignore[no-any-return]


def rebin_result(h: Any, rebin: int | Sequence[float]) -> Any:
    """A copy of the 1-D result ``h`` (a ``HistResult``: arrays with flow) with merged bins."""
    if h.ndim != 1:
        raise ResultsError(f"histogram {h.name!r}: only 1-D histograms can be rebinned")
    ax = h.axes[0]
    edges = np.asarray(ax.edges, dtype=float)
    groups = groups_for(edges, rebin, f"histogram {h.name!r}")
    new_edges = np.array([edges[g[0]] for g in groups] + [edges[-1]])
    old_w = np.concatenate([[1.0], np.diff(edges), [1.0]])
    new_w = np.concatenate([[1.0], np.diff(new_edges), [1.0]])
    norm = h.normalisation

    def per_bin(v: np.ndarray) -> np.ndarray:
        return merge_bins(v * old_w, groups) / new_w if norm == "xsec_per_bin" else \
            merge_bins(v, groups)

    values = per_bin(np.asarray(h.values, dtype=float))
    if norm == "xsec_per_bin":
        variances = merge_bins(np.asarray(h.variances) * old_w**2, groups) / new_w**2
    elif norm == "unit_area":
        in_sum = np.ones(edges.size + 1, dtype=bool)
        if not h.norm_includes_flow:
            in_sum[0] = in_sum[-1] = False
        p = np.asarray(h.values, dtype=float)
        t = merge_bins(_unit_area_t(p, np.asarray(h.variances, dtype=float), in_sum,
                                    f"histogram {h.name!r}"), groups)
        big_t = float(t.sum()) if h.norm_includes_flow else float(t[1:-1].sum())
        m = np.ones(t.size) if h.norm_includes_flow else np.r_[0.0, np.ones(t.size - 2), 0.0]
        variances = (1.0 - 2.0 * m * values) * t + values * values * big_t
    else:
        variances = merge_bins(np.asarray(h.variances, dtype=float), groups)

    nominal = np.asarray(h.values, dtype=float)

    def band(b: Band) -> Band:
        up = values + per_bin(np.asarray(b.up, dtype=float) - nominal)
        down = values + per_bin(np.asarray(b.down, dtype=float) - nominal)
        return Band(b.method, down, up, list(b.members))

    def shape_band(b: Band) -> Band:  # fractions per stored bin: they add
        return Band(b.method, merge_bins(np.asarray(b.down, dtype=float), groups),
                    merge_bins(np.asarray(b.up, dtype=float), groups), list(b.members))

    kind = ax.kind if isinstance(rebin, (int, np.integer)) else "variable"
    new_axis = dataclasses.replace(ax, edges=new_edges, kind=kind)
    extra: dict[str, Any] = {}
    names = {f.name for f in dataclasses.fields(h)}
    if "rows" in names:  # the in-memory rows of every weight are not rebinned: left out
        extra.update(rows=None, row_variances=None)
    if "counts" in names and getattr(h, "counts", None) is not None:
        extra["counts"] = merge_bins(np.asarray(h.counts, dtype=float), groups)
    out = dataclasses.replace(
        h, axes=[new_axis], values=values, variances=np.maximum(variances, 0.0), **extra,
        bands={k: band(b) for k, b in h.bands.items()},
        shape_bands={k: shape_band(b) for k, b in (h.shape_bands or {}).items()},
        variation_values=None if h.variation_values is None else {
            k: per_bin(np.asarray(v, dtype=float)) for k, v in h.variation_values.items()},
    )
    return out
