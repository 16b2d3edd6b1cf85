"""Histograms as ``hist.Hist`` objects that mean what hist users expect, and their density view.

A results record stores each histogram in its normalisation's *quantity* (docs/results-format.md):
dσ/dX per bin for ``xsec_per_bin`` (flow bins as plain σ), σ·L per bin for ``events``, fractions
for ``unit_area``, Σw for ``raw``. :func:`make_hist` turns that into a ``hist.Hist`` with Weight
storage holding the **per-bin content** (Σw and Σw² scaled to the normalisation: σ per bin in pb,
expected events, fractions), so ``h.sum()`` is the σ (events, fraction) of the selected events in
range, ``h.sum(flow=True)`` includes the flow bins and ``h[::hist.rebin(2)]`` adds bins correctly.

What the object carries (all preserved by hist's slicing, projections and copies):

* ``h.name``: the histogram's name in the config; ``h.label``: its title;
* ``h.axes[i].name``: the quantity the axis shows (the config's ``value``, e.g. ``"mll"`` or
  ``"z.pt"``); ``h.axes[i].label``: its label without the unit; ``h.axes[i].metadata``:
  ``{"unit": "GeV"}`` (``""`` for a dimensionless quantity);
* ``h.metadata``: ``normalisation`` (as chosen in the config), ``unit`` and ``label`` of the
  per-bin content (``"pb"`` / ``"σ per bin"``, ``"events"``, ``""`` / ``"fraction per bin"``),
  ``density_unit`` and ``density_label`` (e.g. ``"pb/GeV"`` / ``"dσ/dm_{ℓℓ}"``),
  ``norm_includes_flow`` (unit area: were the flow bins part of the total), ``entries`` (raw fill
  count) and ``sample``.

:func:`density` is the per-bin density view (contents divided by the bin widths, or areas in
2-D): what the plots show for ``xsec_per_bin`` (dσ/dX).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any, NamedTuple, Protocol

import numpy as np

__all__ = ["AxisLike", "Density", "density", "make_hist", "per_bin_factor", "per_unit"]


class AxisLike(Protocol):
    """What :func:`make_hist` needs of an axis (``AxisSpec`` and the results ``AxisInfo``)."""

    name: str
    label: str
    unit: str
    kind: str

    @property
    def edges(self) -> Any: ...  # pragma: no cover


def per_unit(unit: str, axis_units: Sequence[str]) -> str:
    """``unit`` per the axes' units: ``pb`` and ``("GeV",)`` → ``pb/GeV``; 2-D ``pb/(GeV·GeV)``;
    a dimensionless content gives ``1/GeV``; no axis unit leaves ``unit`` as it is."""
    parts = [u for u in axis_units if u]
    if not parts:
        return unit
    per = parts[0] if len(parts) == 1 else "(" + "·".join(parts) + ")"
    return f"{unit or '1'}/{per}"


def per_bin_factor(edges: Sequence[Any], normalisation: str) -> np.ndarray:
    """Flow-inclusive factors that turn the stored quantity of a normalisation into per-bin
    contents: the bin width (2-D: area) of in-range bins for ``xsec_per_bin`` (flow bins are
    stored undivided), 1 everywhere else."""
    shape = tuple(len(e) + 1 for e in edges)
    if normalisation != "xsec_per_bin":
        return np.ones(shape)
    per_axis = []
    for e in edges:
        w = np.ones(len(e) + 1)
        w[1:-1] = np.diff(np.asarray(e, dtype=np.float64))
        per_axis.append(w)
    if len(per_axis) == 1:
        return per_axis[0]
    return np.multiply.outer(per_axis[0], per_axis[1])  # type: ignore[no-any-return]


def _hist_axis(a: AxisLike, quantity: str) -> Any:
    import hist

    meta = {"unit": a.unit}
    edges = [float(e) for e in a.edges]
    if a.kind == "regular":
        return hist.axis.Regular(len(edges) - 1, edges[0], edges[-1], name=quantity,
                                 label=a.label or quantity, metadata=meta)
    return hist.axis.Variable(edges, name=quantity, label=a.label or quantity, metadata=meta)


def _per_bin_label(normalisation: str, y_label: str, y_unit: str) -> tuple[str, str]:
    if normalisation == "xsec_per_bin":
        return "σ per bin", "pb"
    return y_label, y_unit


def make_hist(
    *,
    name: str,
    title: str,
    axes: Sequence[AxisLike],
    quantities: Sequence[str],
    values: np.ndarray,
    variances: np.ndarray | None,
    normalisation: str,
    y_label: str,
    y_unit: str,
    entries: int = 0,
    norm_includes_flow: bool = True,
    sample: str = "",
    storage: str = "weight",
) -> Any:
    """A ``hist.Hist`` of per-bin contents from contents stored in the normalisation's quantity
    (flow included, as in a results record); see the module docstring for what it carries.
    ``storage="double"`` (``variances=None``): plain values, e.g. a band edge."""
    import hist

    factor = per_bin_factor([a.edges for a in axes], normalisation)
    label, unit = _per_bin_label(normalisation, y_label, y_unit)
    axis_units = [a.unit for a in axes]
    if normalisation == "xsec_per_bin":
        d_label, d_unit = y_label, y_unit
    else:
        d_label, d_unit = f"{label} / bin size", per_unit(unit, axis_units)
    meta = {"normalisation": normalisation, "unit": unit, "label": label,
            "density_unit": d_unit, "density_label": d_label,
            "norm_includes_flow": bool(norm_includes_flow), "entries": int(entries),
            "sample": sample}
    hax = [_hist_axis(a, q) for a, q in zip(axes, quantities, strict=True)]
    vals = np.asarray(values, dtype=np.float64) * factor
    if storage == "double":
        plain: Any = hist.Hist(*hax, storage=hist.storage.Double(), name=name, label=title,
                               metadata=meta)
        plain.view(flow=True)[...] = vals
        return plain
    h: Any = hist.Hist(*hax, storage=hist.storage.Weight(), name=name, label=title,
                       metadata=meta)
    view: Any = h.view(flow=True)
    view["value"] = vals
    assert variances is not None
    view["variance"] = np.asarray(variances, dtype=np.float64) * (factor * factor)
    return h


class Density(NamedTuple):
    """The per-bin density view of a histogram: contents / bin width (2-D: area)."""

    values: np.ndarray
    variances: np.ndarray | None
    label: str
    unit: str


def density(h: Any, *, flow: bool = False) -> Density:
    """The density view of a ``hist.Hist`` (e.g. dσ/dX in pb/GeV of a cross-section
    histogram): values and variances divided by the bin widths (2-D: areas), with the label
    and unit from ``h.metadata`` (``density_label``/``density_unit``; a histogram made
    elsewhere gets ``""``). ``flow=True`` includes the flow bins, whose width is infinite:
    they keep their per-bin content, as the results file stores them."""
    widths = [np.diff(ax.edges) for ax in h.axes]
    vol = widths[0] if len(widths) == 1 else np.multiply.outer(*widths)
    if flow:
        full = np.ones(tuple(len(w) + 2 for w in widths))
        full[(slice(1, -1),) * len(widths)] = vol
        vol = full
    variances = h.variances(flow=flow)
    meta: Mapping[str, Any] = getattr(h, "metadata", None) or {}
    return Density(
        h.values(flow=flow) / vol,
        None if variances is None else variances / (vol * vol),
        str(meta.get("density_label", "")),
        str(meta.get("density_unit", "")),
    )
