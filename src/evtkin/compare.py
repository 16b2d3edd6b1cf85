"""Bin-by-bin comparison of histograms: ratios, pulls, χ² homogeneity tests, a Kolmogorov distance.

Everything here works on plain numpy arrays of bin contents (Σw) and variances (Σw²); no I/O.

χ² tests (N. D. Gagunashvili, "Chi-square tests for comparing weighted histograms",
NIM A 614 (2010) 287, arXiv:0905.4221; formulas as in the project's REFERENCES §2.9):

* "weighted vs weighted" (code ``WW``) two weighted histograms, "unweighted vs weighted" (``UW``)
  one unweighted (counts) against one weighted, "unweighted vs unweighted" (``UU``) two unweighted
  (Pearson's test of a 2 x m contingency table). Results and every output name the test in
  words (:data:`METHOD_NAMES`); the codes are accepted as input.

Two modes:

* ``"shape"`` (shape-only, the homogeneity test of the paper): H0 says both histograms sample the
  same *distribution*; each histogram's total is free (the test is invariant under scaling either
  histogram). ndf = (number of bins used) - 1.
* ``"absolute"`` (normalisations compared): H0 says both histograms have the same *expected
  content* in every bin, normalisation included. With a common expectation μ_i per bin fitted by
  least squares, the minimum of Σ (A_i-μ_i)²/σ²_Ai + (B_i-μ_i)²/σ²_Bi is
  ``X² = Σ_i (A_i - B_i)² / (σ²_Ai + σ²_Bi)``, with σ² = Σw² (for counts σ² = n, for which this is
  the usual test of two equal Poisson means). Nothing is fitted globally, so ndf = bins used.
  The variances are the observed ones (Neyman form), so this needs enough content per bin.

Bin handling (the tests assume enough content per bin; the χ² distribution is asymptotic):

1. bins empty in *both* histograms are skipped, each reducing ndf by one;
2. with ``low_content="merge"`` adjacent bins are merged, left to right, until every group
   holds at least ``min_entries`` effective entries in *both* histograms (effective entries
   (Σw)²/Σw² for weighted, n for counts; common practice, after Cochran's rule of thumb of at least
   five expected entries per class); an unfinished last group joins the previous one;
3. with ``low_content="flag"`` (default) bins are kept as they are and the low ones are listed in
   the result;
   an empty bin of a weighted histogram facing content in the other one then gets the variance of
   one event of typical weight (Σw²/Σw of that histogram), said in the notes.
``low_content="keep"`` does the same as ``flag`` without the listing in the notes.

p-values: ``P(χ² ≥ X² | ndf) = Q(ndf/2, X²/2)``, the regularised upper incomplete gamma function.
Where it is below the smallest positive double, :attr:`Chi2Result.p_value` is 0 and
:attr:`Chi2Result.log10_p` still holds log10 p, from the continued fraction of Γ(a, x)
(Abramowitz & Stegun 6.5.31), see :func:`log10_chi2_sf`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import stats

from evtkin.hists.normalise import unit_area  # the one implementation (re-exported)

__all__ = [
    "Chi2Result",
    "HistComparison",
    "HistData",
    "KSResult",
    "as_hist_data",
    "chi2_weighted",
    "compare_histograms",
    "is_unweighted",
    "kolmogorov_distance",
    "log10_chi2_sf",
    "log10_gammaincc",
    "p_text",
    "pull",
    "ratio",
    "unit_area",
]

Mode = Literal["shape", "absolute"]
Method = Literal["auto", "WW", "UW", "UU"]
LowContent = Literal["merge", "flag", "keep"]

#: the three homogeneity tests in words, as every output names them
METHOD_NAMES: dict[str, str] = {
    "WW": "weighted vs weighted",
    "UW": "unweighted vs weighted",
    "UU": "unweighted vs unweighted",
}
_METHOD_CODES = {v: k for k, v in METHOD_NAMES.items()}

FArray = NDArray[np.float64]


def _arr(x: ArrayLike, name: str) -> FArray:
    a = np.asarray(x, dtype=np.float64)
    if a.ndim != 1:
        raise ValueError(f"{name}: expected a 1-D array of bin values, got shape {a.shape}")
    return a


def _same_len(**arrays: FArray) -> None:
    lengths = {k: len(v) for k, v in arrays.items()}
    if len(set(lengths.values())) > 1:
        raise ValueError(f"bin arrays differ in length: {lengths}")


# --------------------------------------------------------------------------------------------------
# ratio and pull


def ratio(a: ArrayLike, va: ArrayLike, b: ArrayLike, vb: ArrayLike) -> tuple[FArray, FArray]:
    """Bin-by-bin ratio ``a/b`` of two independent histograms and its propagated error.

    σ_R² = R² (va/a² + vb/b²), written as (va + R² vb)/b² so that a = 0 gives a finite error.
    Bins with b == 0 give NaN for both.
    """
    a_, va_, b_, vb_ = _arr(a, "a"), _arr(va, "va"), _arr(b, "b"), _arr(vb, "vb")
    _same_len(a=a_, va=va_, b=b_, vb=vb_)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.where(b_ != 0, a_ / np.where(b_ != 0, b_, 1.0), np.nan)
        err = np.sqrt(np.maximum(va_ + r * r * vb_, 0.0)) / np.abs(b_)
    err = np.where(b_ != 0, err, np.nan)
    return r, err


def _band_arrays(
    band: ArrayLike | tuple[ArrayLike, ArrayLike] | None, n: int
) -> tuple[FArray, FArray] | None:
    if band is None:
        return None
    if isinstance(band, tuple):
        up, down = _arr(band[0], "band up"), _arr(band[1], "band down")
    else:
        up = down = _arr(band, "band")
    if len(up) != n or len(down) != n:
        raise ValueError(f"band: expected {n} bins, got {len(up)} / {len(down)}")
    if np.any(up < 0) or np.any(down < 0):
        raise ValueError("band: expected non-negative deviations from the reference")
    return up, down


def pull(
    a: ArrayLike,
    va: ArrayLike,
    b: ArrayLike,
    vb: ArrayLike,
    band: ArrayLike | tuple[ArrayLike, ArrayLike] | None = None,
) -> FArray:
    """Pull ``(a - b) / sqrt(va + vb [+ δ_band²])`` of ``a`` against the reference ``b``.

    ``band`` is an optional theory uncertainty of the reference, added in quadrature: either one
    array of symmetric deviations, or a tuple ``(up, down)`` of non-negative deviations from ``b``;
    the side facing ``a`` is used (``up`` where a >= b, else ``down``). Bins with zero combined
    error give NaN.
    """
    a_, va_, b_, vb_ = _arr(a, "a"), _arr(va, "va"), _arr(b, "b"), _arr(vb, "vb")
    _same_len(a=a_, va=va_, b=b_, vb=vb_)
    var = va_ + vb_
    dev = _band_arrays(band, len(a_))
    if dev is not None:
        side = np.where(a_ >= b_, dev[0], dev[1])
        var = var + side * side
    with np.errstate(divide="ignore", invalid="ignore"):
        out = (a_ - b_) / np.sqrt(var)
    return np.where(var > 0, out, np.nan)


# --------------------------------------------------------------------------------------------------
# χ² tests


@dataclass(frozen=True)
class Chi2Result:
    """Outcome of a χ² comparison of two histograms.

    ``skipped_bins``: input indices empty in both histograms; ``merged_bins``: groups of input
    indices that were merged (only groups of two or more); ``low_content_bins``: indices under
    ``min_entries`` kept as they are (``flag`` mode). ``n_used``: (merged) bins in the statistic.
    ``method``: the test in words (:data:`METHOD_NAMES`). ``log10_p``: log10 of the p-value, finite
    also where ``p_value`` underflows to 0.
    """

    statistic: float
    ndf: int
    p_value: float
    mode: str
    method: str
    n_used: int
    skipped_bins: tuple[int, ...] = ()
    merged_bins: tuple[tuple[int, ...], ...] = ()
    low_content_bins: tuple[int, ...] = ()
    notes: tuple[str, ...] = ()
    log10_p: float = float("nan")

    @property
    def p_text(self) -> str:
        """The p-value for people: ``0.0123``, or ``10^-412.3`` where the double underflows."""
        return p_text(self.p_value, self.log10_p)

    def to_dict(self) -> dict[str, Any]:
        return {
            "statistic": _num(self.statistic),
            "ndf": self.ndf,
            "p_value": _num(self.p_value),
            "log10_p": _num(self.log10_p),
            "mode": self.mode,
            "method": self.method,
            "n_used": self.n_used,
            "skipped_bins": list(self.skipped_bins),
            "merged_bins": [list(g) for g in self.merged_bins],
            "low_content_bins": list(self.low_content_bins),
            "notes": list(self.notes),
        }


def _num(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None


_TINY = 1e-300


def log10_gammaincc(a: float, x: float) -> float:
    """log10 Q(a, x) = log10 [Γ(a, x)/Γ(a)], finite far below the smallest double.

    For x > a + 1: Γ(a, x) = e^(-x) x^a · 1/(x+ (1-a)/(1+ 1/(x+ (2-a)/(1+ 2/(x+ ...)))))
    (Abramowitz & Stegun 6.5.31), evaluated in its even contraction
    1/(x+1-a - 1(1-a)/(x+3-a - 2(2-a)/(x+5-a - ...))) by the modified Lentz method. Below, Q is
    not small (no underflow) and scipy's ``gammaincc`` is used.
    """
    from scipy import special

    if not (a > 0 and x >= 0) or not (math.isfinite(a) and math.isfinite(x)):
        return float("nan")
    if x < a + 1.0:
        return math.log10(float(special.gammaincc(a, x)))
    b = x + 1.0 - a
    c = 1.0 / _TINY
    d = 1.0 / b
    h = d
    for i in range(1, 100_000):
        an = -i * (i - a)
        b += 2.0
        d = an * d + b
        d = _TINY if abs(d) < _TINY else d
        c = b + an / c
        c = _TINY if abs(c) < _TINY else c
        d = 1.0 / d
        delta = d * c
        h *= delta
        if abs(delta - 1.0) < 1e-16:
            break
    ln_q = -x + a * math.log(x) + math.log(h) - math.lgamma(a)
    return ln_q / math.log(10.0)


def log10_chi2_sf(statistic: float, ndf: int) -> float:
    """log10 P(χ²_ndf ≥ statistic) = log10 Q(ndf/2, statistic/2) (:func:`log10_gammaincc`)."""
    if ndf <= 0 or not math.isfinite(statistic):
        return float("nan")
    if statistic <= 0:
        return 0.0
    return log10_gammaincc(0.5 * ndf, 0.5 * statistic)


def p_text(p: float, log10_p: float = float("nan")) -> str:
    """A p-value as text: ``0.0123``, or ``5e-413`` from log10 p where the double is 0."""
    if math.isfinite(p) and p > 0:
        return f"{p:.3g}"
    if math.isfinite(log10_p):
        e = math.floor(log10_p)
        m = 10.0 ** (log10_p - e)
        if round(m, 1) >= 10.0:
            m, e = m / 10.0, e + 1
        return f"{m:.2g}e{e}"
    return "nan" if not math.isfinite(p) else f"{p:.3g}"


def is_unweighted(values: ArrayLike, variances: ArrayLike) -> bool:
    """True if the histogram looks like plain counts: non-negative integers, variance == value."""
    w, s2 = _arr(values, "values"), _arr(variances, "variances")
    return bool(
        np.all(w >= 0) and np.all(w == np.round(w)) and np.allclose(s2, w, rtol=1e-12, atol=0)
    )


def _n_eff(w: FArray, s2: FArray, counts: bool) -> FArray:
    if counts:
        out: np.ndarray = w.copy()
        return out
    with np.errstate(divide="ignore", invalid="ignore"):
        ne = np.where((s2 > 0) & (w > 0), w * w / np.where(s2 > 0, s2, 1.0), 0.0)
    return ne


def _groups(ne1: FArray, ne2: FArray, used: NDArray[np.intp], threshold: float) -> list[list[int]]:
    """Greedy left-to-right merging of the used bins until both sides reach ``threshold``."""
    groups: list[list[int]] = []
    cur: list[int] = []
    s1 = s2 = 0.0
    for i in used.tolist():
        cur.append(i)
        s1 += ne1[i]
        s2 += ne2[i]
        if s1 >= threshold and s2 >= threshold:
            groups.append(cur)
            cur, s1, s2 = [], 0.0, 0.0
    if cur:
        if groups:
            groups[-1].extend(cur)
        else:
            groups.append(cur)
    return groups


def _sum_groups(x: FArray, groups: list[list[int]]) -> FArray:
    return np.array([x[g].sum() for g in groups], dtype=np.float64)


def _stat_ww(w1: FArray, s1: FArray, w2: FArray, s2: FArray) -> FArray:
    t1, t2 = w1.sum(), w2.sum()
    # closed form of the minimisation over p_i, Gagunashvili 2010 / REFERENCES §2.9
    out: np.ndarray = (t1 * w2 - t2 * w1) ** 2 / (t1 * t1 * s2 + t2 * t2 * s1)
    return out


def _stat_uw(n: FArray, w: FArray, s2: FArray) -> FArray:
    big_n, big_w = n.sum(), w.sum()
    x = big_w * w - big_n * s2
    p = (x + np.sqrt(x * x + 4.0 * big_w * big_w * s2 * n)) / (2.0 * big_w * big_w)
    with np.errstate(divide="ignore", invalid="ignore"):
        # (n - N p)²/(N p); for n = 0 its limit is N p (finite also when p = 0)
        t1 = np.where(n > 0, (n - big_n * p) ** 2 / (big_n * p), big_n * p)
    t2 = (w - big_w * p) ** 2 / s2
    out: np.ndarray = t1 + t2
    return out


def _stat_uu(n: FArray, m: FArray) -> FArray:
    big_n, big_m = n.sum(), m.sum()
    out: np.ndarray = (big_m * n - big_n * m) ** 2 / (n + m) / (big_n * big_m)
    return out


def chi2_weighted(
    w1: ArrayLike,
    s1: ArrayLike,
    w2: ArrayLike,
    s2: ArrayLike,
    *,
    mode: Mode = "shape",
    method: Method = "auto",
    low_content: LowContent = "flag",
    min_entries: float = 5.0,
) -> Chi2Result:
    """χ² comparison of two histograms given bin contents ``w`` (Σw) and variances ``s`` (Σw²).

    ``method="auto"`` picks UU when both histograms are plain counts (see :func:`is_unweighted`),
    UW when one is, WW otherwise. Forcing ``UW`` uses histogram 1 as the unweighted one if it is
    counts, else histogram 2. See the module docstring for the modes and the low-content policy.
    Degenerate input (non-positive totals, nothing left to test) gives NaN with a note.
    """
    a1, v1, a2, v2 = _arr(w1, "w1"), _arr(s1, "s1"), _arr(w2, "w2"), _arr(s2, "s2")
    _same_len(w1=a1, s1=v1, w2=a2, s2=v2)
    if mode not in ("shape", "absolute"):
        raise ValueError(f"mode: expected 'shape' or 'absolute', got {mode!r}")
    if low_content not in ("merge", "flag", "keep"):
        raise ValueError(f"low_content: expected 'merge', 'flag' or 'keep', got {low_content!r}")
    finite = np.all(np.isfinite(v1)) and np.all(np.isfinite(v2))
    if np.any(v1 < 0) or np.any(v2 < 0) or not finite:
        raise ValueError("variances must be finite and non-negative")
    if not (np.all(np.isfinite(a1)) and np.all(np.isfinite(a2))):
        raise ValueError("bin values must be finite")

    u1, u2 = is_unweighted(a1, v1), is_unweighted(a2, v2)
    method = _METHOD_CODES.get(method, method)  # type: ignore[assignment]
    if method == "auto":
        method = "UU" if (u1 and u2) else ("UW" if (u1 or u2) else "WW")
    if method not in ("WW", "UW", "UU"):
        raise ValueError(f"method: expected 'auto', 'WW', 'UW' or 'UU' (or the test's name in "
                         f"words), got {method!r}")
    swapped = False
    if method == "UW" and not u1:
        # the statistic is symmetric in the roles; put the counts first
        a1, v1, a2, v2 = a2, v2, a1, v1
        u1, u2 = u2, u1
        swapped = True
    c1 = method in ("UW", "UU")  # histogram 1 treated as counts
    c2 = method == "UU"

    notes: list[str] = []
    if swapped:
        notes.append("unweighted vs weighted: the second histogram is the unweighted one")
    if mode == "shape":
        notes.append("shape-only: homogeneity test, totals free (ndf = bins used - 1)")
    else:
        notes.append("absolute: equal expected content per bin, X² = Σ (A-B)²/(σ²A+σ²B)")

    empty = (a1 == 0) & (v1 == 0) & (a2 == 0) & (v2 == 0)
    skipped = tuple(int(i) for i in np.flatnonzero(empty))
    if skipped:
        notes.append(f"{len(skipped)} bin(s) empty in both histograms skipped")
    used = np.flatnonzero(~empty)

    ne1, ne2 = _n_eff(a1, v1, c1), _n_eff(a2, v2, c2)
    merged: tuple[tuple[int, ...], ...] = ()
    low: tuple[int, ...] = ()
    if low_content == "merge":
        groups = _groups(ne1, ne2, used, min_entries)
        merged = tuple(tuple(g) for g in groups if len(g) > 1)
        if merged:
            notes.append(
                f"low content: {sum(len(g) for g in merged)} bins merged into {len(merged)} "
                f"group(s) to reach {min_entries:g} effective entries per histogram"
            )
    else:
        groups = [[int(i)] for i in used]
        low = tuple(int(i) for i in used if ne1[i] < min_entries or ne2[i] < min_entries)
        if low and low_content == "flag":
            notes.append(
                f"low content: {len(low)} bin(s) under {min_entries:g} effective entries kept; "
                "the χ² approximation may be poor"
            )
        if low_content == "keep":
            low = ()

    g1, g2 = _sum_groups(a1, groups), _sum_groups(a2, groups)
    gv1, gv2 = _sum_groups(v1, groups), _sum_groups(v2, groups)
    n_used = len(groups)
    ndf = n_used - 1 if mode == "shape" else n_used

    def result(stat: float, extra: str | None = None) -> Chi2Result:
        if extra:
            notes.append(extra)
        ok = ndf > 0 and np.isfinite(stat)
        p = float(stats.chi2.sf(stat, ndf)) if ok else float("nan")
        if ok and p >= 1e-300:
            lp = math.log10(p)
        else:
            lp = log10_chi2_sf(stat, ndf) if ok else float("nan")
        return Chi2Result(
            statistic=float(stat) if ndf > 0 else float("nan"),
            ndf=ndf,
            p_value=p,
            mode=mode,
            method=METHOD_NAMES[method],
            n_used=n_used,
            skipped_bins=skipped,
            merged_bins=merged,
            low_content_bins=low,
            notes=tuple(notes),
            log10_p=lp,
        )

    if ndf <= 0:
        return result(float("nan"), "not enough bins with content to test")
    if np.any(g1 < 0) or np.any(g2 < 0):
        notes.append("some bins have negative content; the test assumes non-negative contents")

    # variance floor for empty weighted bins facing content on the other side (flag/keep modes)
    for gv, side, counts, a, v in ((gv1, 1, c1, a1, v1), (gv2, 2, c2, a2, v2)):
        zero = gv == 0
        if counts or not np.any(zero):
            continue
        total_w = float(a.sum())
        floor = float(v.sum()) / total_w if total_w > 0 else 0.0
        gv[zero] = floor * floor
        notes.append(
            f"histogram {side}: {int(zero.sum())} empty bin(s) given the variance of one event "
            f"of typical weight (Σw²/Σw = {floor:.4g})"
        )

    if mode == "absolute":
        with np.errstate(divide="ignore", invalid="ignore"):
            terms = (g1 - g2) ** 2 / (gv1 + gv2)
        return result(float(np.sum(terms)))

    t1, t2 = float(g1.sum()), float(g2.sum())
    if t1 <= 0 or t2 <= 0:
        return result(float("nan"), "a histogram has a non-positive total; shape test undefined")
    with np.errstate(divide="ignore", invalid="ignore"):
        if method == "WW":
            terms = _stat_ww(g1, gv1, g2, gv2)
        elif method == "UW":
            terms = _stat_uw(g1, g2, gv2)
        else:
            terms = _stat_uu(g1, g2)
    return result(float(np.sum(terms)))


# --------------------------------------------------------------------------------------------------
# Kolmogorov-type distance


@dataclass(frozen=True)
class KSResult:
    """Max |ΔCDF| of the two normalised cumulative histograms.

    ``p_value_approx`` is APPROXIMATE: the Kolmogorov distribution for n = round(N_e) samples
    evaluated at D, with N_e = n1 n2/(n1 + n2) from the effective entries n = (Σw)²/Σw².
    Binning makes it conservative (too large) for continuous data; weights make it approximate.
    """

    distance: float
    n_eff: float
    p_value_approx: float
    notes: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {
            "distance": _num(self.distance),
            "n_eff": _num(self.n_eff),
            "p_value_approx": _num(self.p_value_approx),
            "notes": list(self.notes),
        }


def kolmogorov_distance(w1: ArrayLike, s1: ArrayLike, w2: ArrayLike, s2: ArrayLike) -> KSResult:
    """Kolmogorov-type distance between two binned distributions (weighted or not)."""
    a1, v1, a2, v2 = _arr(w1, "w1"), _arr(s1, "s1"), _arr(w2, "w2"), _arr(s2, "s2")
    _same_len(w1=a1, s1=v1, w2=a2, s2=v2)
    t1, t2 = a1.sum(), a2.sum()
    notes = ["approximate p-value: asymptotic Kolmogorov law with effective entries; binned"]
    if t1 <= 0 or t2 <= 0 or v1.sum() <= 0 or v2.sum() <= 0:
        return KSResult(float("nan"), float("nan"), float("nan"), (*notes, "empty histogram"))
    d = float(np.max(np.abs(np.cumsum(a1) / t1 - np.cumsum(a2) / t2)))
    n1, n2 = t1 * t1 / v1.sum(), t2 * t2 / v2.sum()
    ne = float(n1 * n2 / (n1 + n2))
    # the one-sample Kolmogorov law at n = round(N_e) (as scipy's asymptotic two-sample mode)
    p = float(stats.kstwo.sf(d, max(1, round(ne))))
    if np.any(a1 < 0) or np.any(a2 < 0):
        notes.append("negative bin contents: the cumulative distributions are not monotonic")
    return KSResult(d, ne, p, tuple(notes))


# --------------------------------------------------------------------------------------------------
# histogram objects


@dataclass
class HistData:
    """A 1-D histogram as plain arrays: ``edges`` (n+1), ``values``/``variances`` (n, or n+2 with
    ``flow=True``: index 0 underflow, n+1 overflow), optional absolute band edges, same shape.

    ``shape_band_down``/``shape_band_up``: optionally, the band of the unit-area shape (absolute
    edges in fractions per stored bin, each variation normalised to its own total), which a
    shape-only comparison uses; without it the band is scaled by the nominal total."""

    edges: FArray
    values: FArray
    variances: FArray
    band_down: FArray | None = None
    band_up: FArray | None = None
    flow: bool = False
    name: str = ""
    label: str = ""
    meta: dict[str, Any] = field(default_factory=dict)
    shape_band_down: FArray | None = None
    shape_band_up: FArray | None = None

    def __post_init__(self) -> None:
        self.edges = _arr(self.edges, "edges")
        self.values = _arr(self.values, "values")
        self.variances = _arr(self.variances, "variances")
        n = len(self.edges) - 1
        want = n + 2 if self.flow else n
        if n < 1 or len(self.values) != want or len(self.variances) != want:
            raise ValueError(
                f"histogram {self.name!r}: {len(self.edges)} edges need {want} values and "
                f"variances (flow={self.flow}), got {len(self.values)} and {len(self.variances)}"
            )
        for attr in ("band_down", "band_up", "shape_band_down", "shape_band_up"):
            b = getattr(self, attr)
            if b is not None:
                b = _arr(b, attr)
                if len(b) != want:
                    raise ValueError(
                        f"histogram {self.name!r}: {attr} has {len(b)} bins, not {want}"
                    )
                setattr(self, attr, b)

    @property
    def inner(self) -> slice:
        """Slice of the in-range bins in the stored arrays."""
        return slice(1, -1) if self.flow else slice(None)


def as_hist_data(obj: Any, *, name: str = "", label: str = "") -> HistData:
    """Adapt a :class:`HistData`, a 1-D ``hist.Hist`` with Weight storage, a mapping or an object
    with ``edges``/``values``/``variances`` (attributes or methods) to :class:`HistData`."""
    if isinstance(obj, HistData):
        return obj
    if hasattr(obj, "axes") and hasattr(obj, "view") and callable(obj.values):
        if len(obj.axes) != 1:
            raise ValueError(f"histogram {name!r}: only 1-D histograms can be compared")
        var = obj.variances(flow=True)
        if var is None:
            raise ValueError(f"histogram {name!r}: no variances (use Weight storage)")
        edges = np.asarray(obj.axes[0].edges, dtype=np.float64)
        vals = np.asarray(obj.values(flow=True), dtype=np.float64)
        var = np.asarray(var, dtype=np.float64)
        flow = len(vals) == len(edges) + 1
        return HistData(edges, vals, var, flow=flow, name=name, label=label)

    def get(key: str) -> Any:
        v = obj.get(key) if isinstance(obj, dict) else getattr(obj, key, None)
        return v() if callable(v) else v

    edges, vals, var = get("edges"), get("values"), get("variances")
    if edges is None or vals is None or var is None:
        raise ValueError(f"histogram {name!r}: expected edges, values and variances")
    flow = len(vals) == len(edges) + 1
    return HistData(
        np.asarray(edges, float),
        np.asarray(vals, float),
        np.asarray(var, float),
        band_down=get("band_down"),
        band_up=get("band_up"),
        flow=flow,
        name=name or str(get("name") or ""),
        label=label or str(get("label") or ""),
    )


@dataclass
class HistComparison:
    """Per-bin ratio and pull of ``b`` against the reference ``a`` and the tests.

    Arrays cover the stored bins of the inputs (flow included when ``flow``). When ``shape_only``
    both histograms (and the reference band) are normalised to unit area first. ``ratio = b/a``.
    """

    name: str
    label_a: str
    label_b: str
    edges: FArray
    flow: bool
    shape_only: bool
    values_a: FArray
    variances_a: FArray
    values_b: FArray
    variances_b: FArray
    ratio: FArray
    ratio_err: FArray
    pull: FArray
    band_down: FArray | None
    band_up: FArray | None
    chi2_shape: Chi2Result
    chi2_absolute: Chi2Result
    ks: KSResult
    notes: tuple[str, ...] = ()

    @property
    def chi2(self) -> Chi2Result:
        """The test of the chosen mode (shape if ``shape_only`` else absolute)."""
        return self.chi2_shape if self.shape_only else self.chi2_absolute

    @property
    def inner(self) -> slice:
        return slice(1, -1) if self.flow else slice(None)

    def to_dict(self, *, arrays: bool = True) -> dict[str, Any]:
        d: dict[str, Any] = {
            "name": self.name,
            "reference": self.label_a,
            "other": self.label_b,
            "shape_only": self.shape_only,
            "flow": self.flow,
            "chi2": self.chi2.to_dict(),
            "chi2_shape": self.chi2_shape.to_dict(),
            "chi2_absolute": self.chi2_absolute.to_dict(),
            "ks": self.ks.to_dict(),
            "notes": list(self.notes),
        }
        if arrays:

            def lst(x: FArray | None) -> list[float | None] | None:
                return None if x is None else [_num(v) for v in x]

            d.update(
                edges=lst(self.edges),
                values_a=lst(self.values_a),
                variances_a=lst(self.variances_a),
                values_b=lst(self.values_b),
                variances_b=lst(self.variances_b),
                ratio=lst(self.ratio),
                ratio_err=lst(self.ratio_err),
                pull=lst(self.pull),
                band_down=lst(self.band_down),
                band_up=lst(self.band_up),
            )
        return d


def compare_histograms(
    h_a: Any,
    h_b: Any,
    *,
    shape_only: bool = False,
    with_band: bool = False,
    include_flow: bool = False,
    method: Method = "auto",
    low_content: LowContent = "flag",
    min_entries: float = 5.0,
    name: str = "",
    labels: Sequence[str] = ("A", "B"),
) -> HistComparison:
    """Compare ``h_b`` with the reference ``h_a`` (any input :func:`as_hist_data` accepts).

    Both χ² modes and the Kolmogorov distance are always computed; ``shape_only`` selects which χ²
    is the headline (:attr:`HistComparison.chi2`) and whether the per-bin arrays are unit-area
    normalised. ``with_band`` adds the reference's band (if any) to the pull in quadrature.
    ``include_flow`` puts under/overflow bins (when stored) into the tests (default: the in-range
    bins only).
    """
    a = as_hist_data(h_a, name=name, label=labels[0])
    b = as_hist_data(h_b, name=name, label=labels[1])
    if a.flow != b.flow and len(a.edges) == len(b.edges):
        raise ValueError(f"histogram {name!r}: one input has flow bins and the other not")
    if len(a.edges) != len(b.edges) or not np.allclose(a.edges, b.edges, rtol=1e-9, atol=0):
        raise ValueError(f"histogram {name!r}: the two histograms have different binning")
    notes: list[str] = []
    va, sa, vb, sb = a.values, a.variances, b.values, b.variances
    band_dn, band_up = a.band_down, a.band_up
    if shape_only:
        total_a = float(va.sum())
        va, sa = unit_area(va, sa, empty="error")
        vb, sb = unit_area(vb, sb, empty="error")
        if a.shape_band_down is not None and a.shape_band_up is not None:
            band_dn, band_up = a.shape_band_down, a.shape_band_up
            notes.append("band of the shape: each variation normalised to its own total")
        elif band_dn is not None and band_up is not None:
            band_dn, band_up = band_dn / total_a, band_up / total_a
            notes.append("band scaled by the nominal total (variation shapes not available)")
        notes.append("shape-only: both normalised to unit area over all stored bins")
    r, rerr = ratio(vb, sb, va, sa)
    band = None
    if with_band and band_dn is not None and band_up is not None:
        band = (np.maximum(band_up - va, 0.0), np.maximum(va - band_dn, 0.0))
        notes.append("pull includes the reference band in quadrature")
    pl = pull(vb, sb, va, sa, band=band)

    sel = slice(None) if (include_flow or not a.flow) else a.inner
    if a.flow and include_flow:
        notes.append("tests include the under/overflow bins")
    kw: dict[str, Any] = {"method": method, "low_content": low_content, "min_entries": min_entries}
    # tests on the contents as given (they are scale invariant in shape mode)
    chi_s = chi2_weighted(
        a.values[sel], a.variances[sel], b.values[sel], b.variances[sel], mode="shape", **kw
    )
    chi_a = chi2_weighted(
        a.values[sel], a.variances[sel], b.values[sel], b.variances[sel], mode="absolute", **kw
    )
    ks = kolmogorov_distance(a.values[sel], a.variances[sel], b.values[sel], b.variances[sel])
    return HistComparison(
        name=name or a.name,
        label_a=a.label or labels[0],
        label_b=b.label or labels[1],
        edges=a.edges,
        flow=a.flow,
        shape_only=shape_only,
        values_a=va,
        variances_a=sa,
        values_b=vb,
        variances_b=sb,
        ratio=r,
        ratio_err=rerr,
        pull=pl,
        band_down=band_dn,
        band_up=band_up,
        chi2_shape=chi_s,
        chi2_absolute=chi_a,
        ks=ks,
        notes=tuple(notes),
    )
