"""log10 p of the χ² tests where the double underflows, and the comparison defaults."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special, stats

from evtkin.compare import (
    METHOD_NAMES,
    chi2_weighted,
    compare_histograms,
    log10_chi2_sf,
    log10_gammaincc,
    p_text,
)


def _asymptotic_log10_gamma_upper(a: float, x: float) -> float:
    """log10 Q(a, x) from the asymptotic series of Γ(a, x) for large x (Abramowitz & Stegun
    6.5.32): Γ(a, x) ~ x^(a-1) e^(-x) [1 + (a-1)/x + (a-1)(a-2)/x² + ...], summed up to the
    smallest term (written here independently of the code under test)."""
    total, term = 1.0, 1.0
    for k in range(1, 200):
        nxt = term * (a - k) / x
        if abs(nxt) >= abs(term) or nxt == 0.0:
            break
        term = nxt
        total += term
    ln_g = (a - 1.0) * math.log(x) - x + math.log(total)
    return (ln_g - math.lgamma(a)) / math.log(10.0)


@pytest.mark.parametrize(
    ("a", "x"), [(1.0, 800.0), (2.5, 1500.0), (10.0, 3000.0), (25.0, 9000.0), (0.5, 5000.0)]
)
def test_log10_p_against_the_asymptotic_series_where_the_double_underflows(
    a: float, x: float
) -> None:
    # A&S 6.5.32 (asymptotic series for large x) against the continued fraction A&S 6.5.31
    assert special.gammaincc(a, x) == 0.0 or special.gammaincc(a, x) < 1e-300
    assert log10_gammaincc(a, x) == pytest.approx(_asymptotic_log10_gamma_upper(a, x), rel=1e-11)


@pytest.mark.parametrize("a", [0.5, 1.0, 3.0, 7.5, 20.0, 60.0])
def test_log10_p_against_scipy_where_it_does_not_underflow(a: float) -> None:
    # scipy.special.gammaincc is the regularised upper incomplete gamma Q(a, x) (reference library)
    for x in np.concatenate([np.linspace(0.01, a + 1.5, 5), np.geomspace(a + 1.5, 600.0, 12)]):
        ref = special.gammaincc(a, x)
        if ref < 1e-290:
            continue
        assert log10_gammaincc(a, float(x)) == pytest.approx(math.log10(ref), rel=1e-10, abs=1e-12)


def test_chi2_result_carries_log10_p_when_p_underflows() -> None:
    # a big, certain difference: p underflows to 0, log10 p stays finite and matches the χ² law
    a = np.full(20, 1.0e6)
    b = a * 1.2
    r = chi2_weighted(a, a, b, b, mode="absolute", low_content="keep")
    assert r.p_value == 0.0
    assert np.isfinite(r.log10_p)
    assert r.log10_p < -300
    assert r.log10_p == pytest.approx(log10_chi2_sf(r.statistic, r.ndf), rel=1e-12)
    assert "e-" in r.p_text
    assert r.p_text != "0"
    # where the double holds it, log10 p equals log10 of scipy's survival function
    c = chi2_weighted(a, a, a * 1.001, a * 1.001, mode="absolute", low_content="keep")
    assert c.log10_p == pytest.approx(math.log10(stats.chi2.sf(c.statistic, c.ndf)), rel=1e-12)


def test_p_text() -> None:
    assert p_text(0.01234) == "0.0123"
    assert p_text(0.0, -412.3) == "5e-413"
    assert p_text(float("nan")) == "nan"


def test_tests_are_named_in_words() -> None:
    counts = np.array([10.0, 20.0, 30.0])
    weighted = (np.array([1.5, 2.5, 3.5]), np.array([0.3, 0.4, 0.5]))
    names = {
        chi2_weighted(counts, counts, counts + 1, counts + 1).method,
        chi2_weighted(counts, counts, *weighted).method,
        chi2_weighted(*weighted, weighted[0] * 1.1, weighted[1] * 1.21).method,
    }
    assert names == set(METHOD_NAMES.values()) == {
        "weighted vs weighted", "unweighted vs weighted", "unweighted vs unweighted"}


def test_defaults_in_range_bins_and_no_merging() -> None:
    edges = np.linspace(0.0, 1.0, 6)
    # flow bins with a big difference; in-range bins, one of them low in content
    a = np.array([500.0, 100.0, 2.0, 100.0, 100.0, 100.0, 0.0])
    b = np.array([50.0, 100.0, 3.0, 100.0, 100.0, 100.0, 400.0])
    ha = {"edges": edges, "values": a, "variances": a}
    hb = {"edges": edges, "values": b, "variances": b}
    c = compare_histograms(ha, hb)
    assert c.chi2.ndf == 5  # absolute mode: the five in-range bins, none merged
    assert c.chi2.merged_bins == ()
    assert c.chi2.low_content_bins == (1,)
    assert c.chi2.p_value > 0.5
    flow = compare_histograms(ha, hb, include_flow=True)
    assert flow.chi2.ndf == 7
    assert flow.chi2.p_value < 1e-10
    merged = compare_histograms(ha, hb, low_content="merge")
    assert merged.chi2.merged_bins == ((1, 2),)
