"""Statistics of evtkin.compare checked against worked numbers, scipy and independent numpy code."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize, stats

from evtkin.compare import (
    HistData,
    chi2_weighted,
    compare_histograms,
    is_unweighted,
    kolmogorov_distance,
    pull,
    ratio,
    unit_area,
)

# Worked test vectors: REFERENCES §2.9 (computed by hand from the formulas of N. D. Gagunashvili,
# "Chi-square tests for comparing weighted histograms", NIM A 614 (2010) 287, arXiv:0905.4221)
W1 = np.array([10.0, 20.0, 30.0, 40.0])
S1 = np.array([5.0, 8.0, 12.0, 20.0])
W2 = np.array([12.0, 18.0, 33.0, 37.0])
S2 = np.array([6.0, 9.0, 10.0, 15.0])
N_ = np.array([15.0, 22.0, 28.0, 35.0])
M_ = np.array([12.0, 25.0, 30.0, 31.0])


def test_ww_worked_example() -> None:
    # REFERENCES §2.9 / Gagunashvili 2010: X² = 1.2651642475, ndf = 3, p = 0.73742
    r = chi2_weighted(W1, S1, W2, S2, mode="shape")
    assert r.method == "weighted vs weighted"
    assert r.statistic == pytest.approx(1.2651642475, rel=1e-9)
    assert r.ndf == 3
    assert r.p_value == pytest.approx(0.73742, abs=5e-6)
    assert r.skipped_bins == ()
    assert r.merged_bins == ()


def test_uw_worked_example_both_orders() -> None:
    # REFERENCES §2.9 / Gagunashvili 2010: X² = 1.7166681274, ndf = 3, p = 0.63323
    for r in (
        chi2_weighted(N_, N_, W2, S2, mode="shape"),
        chi2_weighted(W2, S2, N_, N_, mode="shape"),
    ):
        assert r.method == "unweighted vs weighted"
        assert r.statistic == pytest.approx(1.7166681274, rel=1e-9)
        assert r.ndf == 3
        assert r.p_value == pytest.approx(0.63323, abs=5e-6)


def test_uu_worked_example() -> None:
    # REFERENCES §2.9 / Gagunashvili 2010 (Pearson): X² = 0.8160937009, ndf = 3, p = 0.84561
    r = chi2_weighted(N_, N_, M_, M_, mode="shape")
    assert r.method == "unweighted vs unweighted"
    assert r.statistic == pytest.approx(0.8160937009, rel=1e-9)
    assert r.ndf == 3
    assert r.p_value == pytest.approx(0.84561, abs=5e-6)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_uu_equals_scipy_contingency(seed: int) -> None:
    # scipy.stats.chi2_contingency without Yates correction is Pearson's test of homogeneity
    rng = np.random.default_rng(seed)
    n = rng.poisson(rng.uniform(20, 200, 12)).astype(float)
    m = rng.poisson(rng.uniform(20, 200, 12)).astype(float)
    ref = stats.chi2_contingency(np.vstack([n, m]), correction=False)
    r = chi2_weighted(n, n, m, m, low_content="keep")
    assert r.method == "unweighted vs unweighted"
    assert r.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert r.ndf == ref.dof
    assert r.p_value == pytest.approx(ref.pvalue, rel=1e-9)


def test_empty_in_both_skipped_and_ndf_reduced() -> None:
    # REFERENCES §2.9: bins empty in both histograms are skipped, each reducing ndf by one;
    # the rest must agree with scipy's Pearson test on the table without that column
    n = np.array([30.0, 0.0, 40.0, 25.0, 0.0])
    m = np.array([28.0, 0.0, 45.0, 20.0, 0.0])
    r = chi2_weighted(n, n, m, m)
    ref = stats.chi2_contingency(np.vstack([n[[0, 2, 3]], m[[0, 2, 3]]]), correction=False)
    assert r.skipped_bins == (1, 4)
    assert r.ndf == ref.dof == 2
    assert r.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert any("empty in both" in note for note in r.notes)


def test_low_content_merge_matches_pearson_on_merged_table() -> None:
    # merging adjacent low-content classes is the common practice for Pearson's test (Cochran);
    # check the merged statistic against scipy on the table merged by hand
    n = np.array([50.0, 2.0, 1.0, 3.0, 40.0, 60.0, 1.0])
    m = np.array([45.0, 1.0, 3.0, 2.0, 50.0, 55.0, 2.0])
    r = chi2_weighted(n, n, m, m, min_entries=5, low_content="merge")
    # bins 1..3 reach 6 / 6 entries together; bin 6 is left over and joins bin 5
    assert r.merged_bins == ((1, 2, 3), (5, 6))
    groups = [[0], [1, 2, 3], [4], [5, 6]]
    table = np.array([[n[g].sum() for g in groups], [m[g].sum() for g in groups]])
    ref = stats.chi2_contingency(table, correction=False)
    assert r.ndf == ref.dof == 3
    assert r.statistic == pytest.approx(ref.statistic, rel=1e-12)
    flagged = chi2_weighted(n, n, m, m, min_entries=5, low_content="flag")
    assert flagged.low_content_bins == (1, 2, 3, 6)
    assert flagged.ndf == 6
    assert any("low content" in note for note in flagged.notes)


def test_ww_closed_form_equals_minimisation_form() -> None:
    # REFERENCES §2.9: p̂_i minimises Σ_j (W_ji - W_j p)²/s_ji² per bin; X² is the value at p̂.
    # Here the minimum is found numerically (scipy) and summed; it must equal the closed form.
    rng = np.random.default_rng(7)
    w1 = rng.uniform(5, 50, 8)
    s1 = w1 * rng.uniform(0.2, 3.0, 8)
    w2 = rng.uniform(5, 50, 8)
    s2 = w2 * rng.uniform(0.2, 3.0, 8)
    t1, t2 = w1.sum(), w2.sum()
    total = 0.0
    for i in range(8):
        res = optimize.minimize_scalar(
            lambda p, i=i: (w1[i] - t1 * p) ** 2 / s1[i] + (w2[i] - t2 * p) ** 2 / s2[i],
            bounds=(0.0, 1.0),
            method="bounded",
            options={"xatol": 1e-13},
        )
        total += res.fun
    r = chi2_weighted(w1, s1, w2, s2, low_content="keep")
    assert r.method == "weighted vs weighted"
    assert r.statistic == pytest.approx(total, rel=1e-8)


def test_uw_estimate_is_the_likelihood_maximum_including_an_empty_unweighted_bin() -> None:
    # p̂ of the UW test (REFERENCES §2.9) is the root of W²p² - (W W_i - N s_i²)p - s_i² n_i = 0,
    # i.e. the maximum of the per-bin log-likelihood n log(Np) - Np - (W_i - W p)²/(2 s_i²)
    # [from memory, checked algebraically]. For n_i = 0 the Pearson term tends to N p̂.
    n = np.array([20.0, 0.0, 35.0, 44.0, 18.0])
    w = np.array([8.0, 1.5, 14.0, 20.0, 6.0])
    s2 = np.array([4.0, 0.5, 6.0, 9.0, 3.5])
    big_n, big_w = n.sum(), w.sum()
    total = 0.0
    for i in range(5):

        def nll(p: float, i: int = i) -> float:
            lp = n[i] * np.log(big_n * p) if n[i] > 0 else 0.0
            return -(lp - big_n * p - (w[i] - big_w * p) ** 2 / (2 * s2[i]))

        p = optimize.minimize_scalar(
            nll, bounds=(1e-15, 1.0), method="bounded", options={"xatol": 1e-14}
        ).x
        pearson = (n[i] - big_n * p) ** 2 / (big_n * p) if n[i] > 0 else big_n * p
        total += pearson + (w[i] - big_w * p) ** 2 / s2[i]
    r = chi2_weighted(n, n, w, s2, low_content="keep")
    assert r.method == "unweighted vs weighted"
    assert r.statistic == pytest.approx(total, rel=1e-6)


def test_shape_mode_is_scale_invariant_absolute_mode_is_not() -> None:
    # the homogeneity test leaves each total free (Gagunashvili 2010), so scaling a histogram by c
    # (values by c, variances by c²) must not change it; the absolute test must see the change
    base = chi2_weighted(W1, S1, W2, S2, mode="shape")
    scaled = chi2_weighted(W1, S1, 1.3 * W2, 1.69 * S2, mode="shape")
    assert scaled.statistic == pytest.approx(base.statistic, rel=1e-12)
    rng = np.random.default_rng(3)
    a = rng.poisson(400, 10).astype(float)
    b = rng.poisson(400, 10).astype(float)
    same = chi2_weighted(a, a, b, b, mode="absolute")
    assert same.ndf == 10
    # absolute mode for counts is Σ (n-m)²/(n+m) (test of equal Poisson means, from memory)
    assert same.statistic == pytest.approx(np.sum((a - b) ** 2 / (a + b)), rel=1e-12)
    shifted = chi2_weighted(a, a, 1.2 * b, 1.44 * b, mode="absolute")
    assert shifted.p_value < 1e-6
    assert chi2_weighted(a, a, 1.2 * b, 1.44 * b, mode="shape").p_value > 1e-3


# --- p-values uniform under H0 -----------------------------------------------------------------

EDGES = np.linspace(0.0, 5.0, 11)


def _sample(rng: np.random.Generator, kind: str) -> tuple[np.ndarray, np.ndarray]:
    """A histogram of the exponential law on [0, 5): counts, or weighted by importance sampling."""
    n = rng.poisson(2000)  # Poisson totals: the bins are independent, as the absolute test assumes
    if kind == "counts":
        x = rng.exponential(1.0, n)
        w = np.ones_like(x)
    elif kind == "flat":  # uniform proposal, weight f/g
        x = rng.uniform(0.0, 5.0, n)
        w = 5.0 * np.exp(-x)
    else:  # steeper exponential proposal, weight f/g
        x = rng.exponential(0.7, n)
        w = 0.7 * np.exp(-x + x / 0.7)
    keep = x < 5.0
    h, _ = np.histogram(x[keep], EDGES, weights=w[keep])
    h2, _ = np.histogram(x[keep], EDGES, weights=w[keep] ** 2)
    return h, h2


@pytest.mark.parametrize(
    ("kinds", "method"),
    [(("flat", "steep"), "weighted vs weighted"), (("counts", "flat"), "unweighted vs weighted"),
     (("counts", "counts"), "unweighted vs unweighted")],
)
@pytest.mark.parametrize("mode", ["shape", "absolute"])
def test_pvalues_uniform_for_same_distribution(
    kinds: tuple[str, str], method: str, mode: str
) -> None:
    # under H0 a valid test has uniform p-values (common practice: KS test of 300 p-values from
    # fixed seeds against U(0, 1))
    pvals, stat, ndf = [], [], []
    for seed in range(300):
        rng = np.random.default_rng(1000 + seed)
        a, b = _sample(rng, kinds[0]), _sample(rng, kinds[1])
        # low-content bins merged (the tests' asymptotic law needs enough entries per bin)
        r = chi2_weighted(*a, *b, mode=mode, low_content="merge")  # type: ignore[arg-type]
        assert r.method == method
        pvals.append(r.p_value)
        stat.append(r.statistic)
        ndf.append(r.ndf)
    assert stats.kstest(pvals, "uniform").pvalue > 0.01
    # the check has teeth: the same criterion rejects p-values with one degree of freedom too many
    wrong = stats.chi2.sf(stat, np.asarray(ndf) + 1)
    assert stats.kstest(wrong, "uniform").pvalue < 0.01


def test_power_against_a_different_shape() -> None:
    # a 10% slope difference with ~2000 events per sample must be detected most of the time
    pvals = []
    for seed in range(50):
        rng = np.random.default_rng(seed)
        a = _sample(rng, "flat")
        x = rng.uniform(0.0, 5.0, rng.poisson(2000))
        w = 5.0 * np.exp(-x) * (0.8 + 0.08 * x)
        b = np.histogram(x, EDGES, weights=w)[0], np.histogram(x, EDGES, weights=w**2)[0]
        pvals.append(chi2_weighted(*a, *b).p_value)
    assert np.median(pvals) < 0.01


# --- Kolmogorov distance -----------------------------------------------------------------------


def test_kolmogorov_distance_matches_scipy_on_exact_binning() -> None:
    # integer data with one bin per integer: the binned CDFs are the empirical CDFs, so D must equal
    # scipy.stats.ks_2samp's statistic, and the approximate p-value its asymptotic one
    rng = np.random.default_rng(11)
    x, y = rng.poisson(5.0, 400), rng.poisson(5.4, 300)
    e = np.arange(-0.5, 40.5)
    a, b = np.histogram(x, e)[0].astype(float), np.histogram(y, e)[0].astype(float)
    ref = stats.ks_2samp(x, y, method="asymp")
    r = kolmogorov_distance(a, a, b, b)
    assert r.distance == pytest.approx(ref.statistic, rel=1e-12)
    assert r.n_eff == pytest.approx(400 * 300 / 700)
    assert r.p_value_approx == pytest.approx(ref.pvalue, rel=1e-9)
    assert any("approximate" in note for note in r.notes)


def test_kolmogorov_effective_entries_for_weights() -> None:
    # N_eff = (Σw)²/Σw² (REFERENCES §2.11); constant weights c give the event count back
    a = np.array([10.0, 20.0, 30.0])
    r = kolmogorov_distance(2.5 * a, 6.25 * a, a, a)
    assert r.distance == pytest.approx(0.0, abs=1e-15)
    assert r.n_eff == pytest.approx(60 * 60 / 120)


# --- ratio, pull, unit area --------------------------------------------------------------------


def test_ratio_error_formula_and_monte_carlo() -> None:
    # REFERENCES §2.11: σ_R² = R² (sA²/A² + sB²/B²) for independent A, B
    rng = np.random.default_rng(5)
    a, b = rng.uniform(50, 100, 6), rng.uniform(50, 100, 6)
    va, vb = (0.01 * a) ** 2, (0.015 * b) ** 2
    r, err = ratio(a, va, b, vb)
    np.testing.assert_allclose(r, a / b, rtol=1e-14)
    np.testing.assert_allclose(err, (a / b) * np.sqrt(va / a**2 + vb / b**2), rtol=1e-12)
    # independent check: spread of a/b over Gaussian draws (small errors, linearisation holds)
    da = rng.normal(a, np.sqrt(va), (200_000, 6))
    db = rng.normal(b, np.sqrt(vb), (200_000, 6))
    np.testing.assert_allclose(np.std(da / db, axis=0), err, rtol=0.02)
    # a = 0 keeps a finite error sqrt(va)/b; b = 0 gives NaN
    r0, e0 = ratio([0.0, 1.0], [4.0, 1.0], [2.0, 0.0], [1.0, 1.0])
    assert r0[0] == 0.0
    assert e0[0] == pytest.approx(1.0)
    assert np.isnan(r0[1])
    assert np.isnan(e0[1])


def test_pull_with_and_without_band() -> None:
    # REFERENCES §2.11: pull = (A - B)/sqrt(sA² + sB²); band deviations added in quadrature
    a = np.array([10.0, 5.0, 7.0, 0.0])
    b = np.array([8.0, 6.0, 7.0, 0.0])
    va = np.array([4.0, 1.0, 2.0, 0.0])
    vb = np.array([1.0, 3.0, 2.0, 0.0])
    p = pull(a, va, b, vb)
    np.testing.assert_allclose(p[:3], [2 / np.sqrt(5), -1 / 2, 0.0])
    assert np.isnan(p[3])
    up, dn = np.array([3.0, 3.0, 3.0, 0.0]), np.array([1.0, 2.0, 1.0, 0.0])
    pb = pull(a, va, b, vb, band=(up, dn))
    # bin 0: a above b -> up side (3); bin 1: a below -> down side (2)
    np.testing.assert_allclose(pb[:2], [2 / np.sqrt(5 + 9), -1 / np.sqrt(4 + 4)])
    # pulls of two samples with the same mean have unit spread (Monte Carlo)
    rng = np.random.default_rng(2)
    x = rng.normal(100, 3, 100_000)
    y = rng.normal(100, 4, 100_000)
    assert np.std(pull(x, np.full_like(x, 9.0), y, np.full_like(y, 16.0))) == pytest.approx(
        1.0, abs=0.01
    )


def test_unit_area_variance_binomial_and_monte_carlo() -> None:
    # REFERENCES §2.11: for unit weights Var(p_k) reduces to the binomial p(1-p)/N
    n = np.array([10.0, 30.0, 60.0])
    p, var = unit_area(n, n)
    np.testing.assert_allclose(p, n / 100)
    np.testing.assert_allclose(var, p * (1 - p) / 100, rtol=1e-12)
    # weighted: compare with the spread over pseudo-experiments (Poisson counts, weights 1 or 3)
    rng = np.random.default_rng(9)
    mu1, mu3 = np.array([200.0, 400.0, 100.0]), np.array([50.0, 20.0, 80.0])
    k1 = rng.poisson(mu1, (40_000, 3))
    k3 = rng.poisson(mu3, (40_000, 3))
    w = k1 + 3.0 * k3
    frac = w / w.sum(axis=1, keepdims=True)
    _, var_w = unit_area(mu1 + 3 * mu3, mu1 + 9 * mu3)
    np.testing.assert_allclose(frac.var(axis=0), var_w, rtol=0.05)


def test_is_unweighted() -> None:
    assert is_unweighted([1.0, 0.0, 5.0], [1.0, 0.0, 5.0])
    assert not is_unweighted([1.5, 2.0], [1.5, 2.0])
    assert not is_unweighted([2.0, 4.0], [4.0, 8.0])


def test_bad_input_raises() -> None:
    with pytest.raises(ValueError, match="differ in length"):
        chi2_weighted([1.0, 2.0], [1.0, 2.0], [1.0], [1.0])
    with pytest.raises(ValueError, match="mode"):
        chi2_weighted(W1, S1, W2, S2, mode="both")  # type: ignore[arg-type]
    with pytest.raises(ValueError, match="non-negative"):
        chi2_weighted(W1, -S1, W2, S2)


def test_degenerate_input_gives_nan_with_note() -> None:
    r = chi2_weighted([0.0, 0.0, 3.0], [0.0, 0.0, 3.0], [0.0, 0.0, 4.0], [0.0, 0.0, 4.0])
    assert r.ndf == 0
    assert np.isnan(r.p_value)
    assert any("not enough" in note for note in r.notes)


# --- compare_histograms -------------------------------------------------------------------------


def test_compare_histograms_on_hist_objects_and_shape_mode() -> None:
    hist = pytest.importorskip("hist")
    rng = np.random.default_rng(4)
    ha = hist.Hist.new.Reg(8, 0, 4, name="x").Weight()
    hb = hist.Hist.new.Reg(8, 0, 4, name="x").Weight()
    xa, xb = rng.exponential(1.0, 5000), rng.exponential(1.0, 3000)
    ha.fill(x=xa, weight=np.full_like(xa, 0.5))
    hb.fill(x=xb, weight=rng.uniform(0.5, 1.5, xb.size))
    c = compare_histograms(ha, hb, name="x", labels=("ref", "other"))
    assert c.flow
    assert c.values_a.shape == (10,)
    np.testing.assert_allclose(c.values_a, ha.values(flow=True))
    # per-bin ratio and error, independent numpy computation of REFERENCES §2.11
    va, sa = ha.values(flow=True), ha.variances(flow=True)
    vb, sb = hb.values(flow=True), hb.variances(flow=True)
    inner = slice(1, -1)
    np.testing.assert_allclose(c.ratio[inner], vb[inner] / va[inner])
    np.testing.assert_allclose(
        c.ratio_err[inner],
        vb[inner] / va[inner] * np.sqrt(sa[inner] / va[inner] ** 2 + sb[inner] / vb[inner] ** 2),
    )
    assert c.chi2 is c.chi2_absolute
    # absolute: totals differ (2500 vs ~3000) -> rejected; shape: same law -> not rejected
    assert c.chi2_absolute.p_value < 1e-6
    assert c.chi2_shape.p_value > 1e-3
    s = compare_histograms(ha, hb, shape_only=True)
    assert s.chi2 is s.chi2_shape
    assert s.values_a.sum() == pytest.approx(1.0)
    assert s.values_b.sum() == pytest.approx(1.0)
    d = s.to_dict()
    assert d["chi2"]["mode"] == "shape"
    assert len(d["ratio"]) == 10


def test_compare_histograms_band_enters_pull() -> None:
    e = np.array([0.0, 1.0, 2.0])
    a = HistData(e, [100.0, 50.0], [100.0, 50.0], band_down=[90.0, 45.0], band_up=[120.0, 60.0])
    b = HistData(e, [130.0, 40.0], [130.0, 40.0])
    plain = compare_histograms(a, b)
    banded = compare_histograms(a, b, with_band=True)
    np.testing.assert_allclose(plain.pull, [30 / np.sqrt(230), -10 / np.sqrt(90)])
    np.testing.assert_allclose(banded.pull, [30 / np.sqrt(230 + 400), -10 / np.sqrt(90 + 25)])
    with pytest.raises(ValueError, match="different binning"):
        compare_histograms(a, HistData(np.array([0.0, 1.0, 3.0]), [1.0, 1.0], [1.0, 1.0]))
