"""Normalisations of filled histograms with propagated MC-statistics variances (REFERENCES §2.11).

Modes (the strings are the ``"normalisation"`` values of docs/results-format.md):

* ``raw``: Σw as filled.
* ``xsec_per_bin``: dσ/dX = Σw / Δx (2-D: / area), variance / Δx². Bins with a flow coordinate have
  infinite width and keep their plain Σw (pb), so Σ_in-range value·Δx + Σ_flow value = σ.
* ``events``: N = L·Σw with L in fb⁻¹ converted to pb⁻¹ (× 1000); variance × L².
* ``unit_area``: p_k = W_k/W with W the sum over **all bins including flow** (default) or over the
  in-range bins (``include_flow=False``). Delta-method variance with independent bins:
  ``Var(p_k) = [(1 − 2 m_k p_k) s_k² + p_k² S] / W²`` with ``S = Σ_{j in W} s_j²`` and ``m_k = 1``
  for bins that enter W (reduces to the binomial p(1−p)/N for unit weights).

Every variation is normalised the same way; for ``unit_area`` each variation is divided by its own
total, so a band built from these is a pure shape uncertainty.
"""

from __future__ import annotations

from typing import Any, Literal

import numpy as np

from evtkin.hists.fill import HistAccumulator, HistSpec
from evtkin.hists.record import HistRecord

__all__ = ["MODES", "NormalisedHist", "bin_volumes", "normalise", "normalise_counts",
           "shape_fractions", "unit_area"]

Mode = Literal["raw", "xsec_per_bin", "events", "unit_area"]
MODES: tuple[str, ...] = ("raw", "xsec_per_bin", "events", "unit_area")
PB_PER_FB = 1000.0  # 1 fb⁻¹ = 1000 pb⁻¹


#: what :func:`normalise` returns: the one histogram record (:mod:`evtkin.hists.record`)
NormalisedHist = HistRecord


def bin_volumes(spec: HistSpec) -> np.ndarray:
    """Bin widths (1-D) or areas (2-D) with flow, flow bins set to ``inf``."""
    per_axis = []
    for a in spec.axes:
        w = np.full(a.nbins + 2, np.inf)
        w[1:-1] = a.widths
        per_axis.append(w)
    if spec.ndim == 1:
        return per_axis[0]
    out: np.ndarray = np.multiply.outer(per_axis[0], per_axis[1])
    return out


def _flow_mask(spec: HistSpec) -> np.ndarray:
    """True for in-range bins (no flow coordinate)."""
    m = np.zeros(spec.shape, dtype=bool)
    m[(slice(1, -1),) * spec.ndim] = True
    return m


def unit_area(
    values: Any, variances: Any, in_sum: np.ndarray | None = None, *,
    empty: Literal["zeros", "error"] = "zeros",
) -> tuple[np.ndarray, np.ndarray]:
    """p = W_k/W and its delta-method variance for one weight (REFERENCES §2.11):
    ``Var(p_k) = [(1 − 2 m_k p_k) s_k² + p_k² S] / W²``, ``S = Σ_{j in W} s_j²``, ``m_k = 1``
    for the bins in W (the binomial p(1−p)/N for unit weights); never negative.

    ``in_sum`` marks the bins that make up W (default: all given bins). A total of zero:
    ``empty="zeros"`` gives zeros (a histogram without selected events), ``empty="error"``
    raises ValueError (also for a non-finite total), for callers that cannot use zeros
    (comparisons of shapes)."""
    w = np.asarray(values, dtype=np.float64)
    s2 = np.asarray(variances, dtype=np.float64)
    if w.shape != s2.shape:
        raise ValueError(f"unit_area: values {w.shape} and variances {s2.shape} differ in shape")
    mask = np.ones(w.shape, dtype=bool) if in_sum is None else np.asarray(in_sum, dtype=bool)
    total = float(np.sum(w[mask]))
    if empty == "error" and (total == 0.0 or not np.isfinite(total)):
        raise ValueError(f"unit_area: total of the bin values is {total}; cannot normalise")
    if total == 0.0:
        return np.zeros_like(w), np.zeros_like(s2)
    s_tot = float(np.sum(s2[mask]))
    p = w / total
    var = ((1.0 - 2.0 * p * mask) * s2 + p * p * s_tot) / (total * total)
    return p, np.maximum(var, 0.0)


def _unit(spec: HistSpec) -> str:
    parts = [a.unit for a in spec.axes if a.unit]
    if not parts:
        return "pb"
    if len(parts) == 1:
        return f"pb/{parts[0]}"
    return "pb/(" + "·".join(parts) + ")"


_record = HistRecord.from_rows


def _second_derivative_label(spec: HistSpec) -> str:
    """``d²σ/(d m d cos θ)`` for a 2-D cross section per bin area (thin spaces after each
    ``d``, so that a drawn label keeps the d upright before a scripted name such as
    ``m_{ℓℓ}``); the unit (``pb/GeV``) is the record's ``y_unit``."""
    xs = [a.label or a.name for a in spec.axes]
    return f"d²σ/(d\u2009{xs[0]} d\u2009{xs[1]})"


def normalise(
    acc: HistAccumulator,
    mode: Mode | str = "raw",
    *,
    luminosity_fb: float | None = None,
    include_flow: bool = True,
    weights_in_pb: bool = True,
) -> HistRecord:
    """Normalise an accumulator (all weights at once) into a :class:`HistRecord` (``rows``:
    every weight, ``values``: the nominal); see the module docstring for the modes. The raw
    entry counts per bin go along unchanged."""
    out = _normalise(acc, mode, luminosity_fb=luminosity_fb, include_flow=include_flow,
                     weights_in_pb=weights_in_pb)
    counts = getattr(acc, "counts", None)
    out.counts = None if counts is None else np.array(counts, dtype=np.int64)
    return out


def _normalise(acc: HistAccumulator, mode: Mode | str, *, luminosity_fb: float | None,
               include_flow: bool, weights_in_pb: bool) -> HistRecord:
    spec = acc.spec
    w = np.array(acc.sumw, dtype=np.float64)
    w2 = np.array(acc.sumw2, dtype=np.float64)
    xlabel = " ".join(a.label or a.name for a in spec.axes)
    if mode == "raw":
        return _record(spec, acc.variations, w, w2, "raw", "pb" if weights_in_pb else "",
                       "Σw per bin", acc.entries, include_flow)
    if mode == "xsec_per_bin":
        vol = bin_volumes(spec)
        inside = np.isfinite(vol)
        div = np.where(inside, vol, 1.0)
        label = f"dσ/d{xlabel}" if spec.ndim == 1 else _second_derivative_label(spec)
        return _record(spec, acc.variations, w / div, w2 / (div * div), "xsec_per_bin",
                       _unit(spec), label, acc.entries, include_flow)
    if mode == "events":
        if luminosity_fb is None or not np.isfinite(luminosity_fb) or luminosity_fb < 0:
            raise ValueError(
                f"histogram {spec.name!r}: normalisation 'events' needs a luminosity in fb⁻¹ "
                f"(>= 0), got {luminosity_fb!r}"
            )
        lum = float(luminosity_fb) * PB_PER_FB
        return _record(spec, acc.variations, w * lum, w2 * lum * lum, "events", "events",
                       "events per bin", acc.entries, include_flow)
    if mode == "unit_area":
        in_sum = np.ones(spec.shape, dtype=bool) if include_flow else _flow_mask(spec)
        vals = np.empty_like(w)
        vars_ = np.empty_like(w2)
        for i in range(w.shape[0]):  # each variation on its own
            vals[i], vars_[i] = unit_area(w[i], w2[i], in_sum)
        return _record(spec, acc.variations, vals, vars_, "unit_area", "",
                       "fraction per bin", acc.entries, include_flow)
    raise ValueError(f"unknown normalisation {mode!r}; expected one of {', '.join(MODES)}")


def normalise_counts(
    acc: HistAccumulator,
    mode: Mode | str = "events",
    *,
    luminosity_fb: float | None = None,
    include_flow: bool = True,
) -> HistRecord:
    """A histogram of counted events (a data sample: every weight 1, so Σw = N and Σw² = N
    per bin) in the histogram's normalisation, without a cross section:

    * ``raw`` and ``events``: the counts N ± √N as they are (``events``: no luminosity factor,
      the counts are already events at the data's luminosity);
    * ``xsec_per_bin``: the measured differential cross section N / (L · Δx) ± √N / (L · Δx)
      (L in pb⁻¹; needs ``luminosity_fb``);
    * ``unit_area``: the fractions N_k / N with the binomial variance (as :func:`normalise`).
    """
    if mode in ("raw", "events"):
        rec = _normalise(acc, "raw", luminosity_fb=None, include_flow=include_flow,
                         weights_in_pb=False)
        rec.normalisation, rec.y_unit, rec.y_label = str(mode), "events", "events per bin"
    elif mode == "xsec_per_bin":
        if luminosity_fb is None or not np.isfinite(luminosity_fb) or luminosity_fb <= 0:
            raise ValueError(
                f"histogram {acc.spec.name!r}: 'xsec_per_bin' of counted events is N / (L · bin "
                f"width) and needs a luminosity in fb⁻¹ (> 0), got {luminosity_fb!r}")
        scaled = acc.scaled(1.0 / (float(luminosity_fb) * PB_PER_FB))
        rec = _normalise(scaled, "xsec_per_bin", luminosity_fb=None, include_flow=include_flow,
                         weights_in_pb=True)
    else:
        rec = _normalise(acc, mode, luminosity_fb=None, include_flow=include_flow,
                         weights_in_pb=False)
    counts = getattr(acc, "counts", None)
    rec.counts = None if counts is None else np.array(counts, dtype=np.int64)
    return rec


def shape_fractions(nh: HistRecord) -> np.ndarray | None:
    """The shape a unit-area comparison sees, for the nominal and every variation: each row of
    ``nh.rows`` as the fraction of its own total in each stored bin (flow bins included;
    for ``xsec_per_bin`` the per-bin quantity value x width; for ``unit_area`` without flow,
    the flow bins left out). Bands formed from these rows normalise each variation on its own,
    as :func:`normalise` does for ``unit_area``. ``None`` for 2-D histograms."""
    if nh.ndim != 1:
        return None
    per_bin = np.array(nh.all_rows(), dtype=np.float64)
    if nh.normalisation == "xsec_per_bin":
        per_bin[:, 1:-1] *= np.diff(nh.axes[0].edges)
    elif nh.normalisation == "unit_area" and not nh.norm_includes_flow:
        per_bin[:, 0] = per_bin[:, -1] = 0.0
    total = per_bin.sum(axis=1, keepdims=True)
    safe = np.where(total != 0.0, total, 1.0)
    return np.where(total != 0.0, per_bin / safe, 0.0)  # type: ignore[no-any-return]
