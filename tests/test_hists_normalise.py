"""Normalisations and their propagated errors (formulas: REFERENCES §2.11)."""

from __future__ import annotations

import numpy as np
import pytest

from evtkin.hists.fill import AxisSpec, HistAccumulator, HistSpec
from evtkin.hists.normalise import bin_volumes, normalise

RNG = np.random.default_rng(777)


def _filled(ndim: int = 1, n: int = 20000, nvar: int = 2, sigma: float = 42.0):  # type: ignore[no-untyped-def]
    x = RNG.normal(1.0, 1.5, n)
    w = RNG.uniform(0.2, 1.8, n)
    w *= sigma / w.sum()  # normalised so that Σw = σ in pb (REFERENCES §1.4)
    wv = w[:, None] * RNG.uniform(0.8, 1.2, (n, nvar))
    axes = [AxisSpec.variable([-1.0, 0.0, 0.5, 2.0, 3.0], name="x", unit="GeV")]
    vals = [x]
    if ndim == 2:
        axes.append(AxisSpec.regular(3, -1.0, 1.0, name="y", unit="GeV"))
        vals.append(RNG.normal(0, 1, n))
    acc = HistAccumulator(HistSpec("h", tuple(axes)), tuple(f"v{i}" for i in range(nvar)))
    acc.fill(*vals, weight=w, variations=wv)
    return acc, w


@pytest.mark.parametrize("ndim", [1, 2])
def test_integral_of_dsigma_over_all_bins_is_sigma(ndim: int) -> None:
    # dσ/dX = Σw/Δx (REFERENCES §2.11); flow bins keep plain Σw → Σ value·Δx + flow = σ
    acc, _w = _filled(ndim)
    n = normalise(acc, "xsec_per_bin")
    vol = bin_volumes(acc.spec)
    inside = np.isfinite(vol)
    total = np.sum(n.nominal[inside] * vol[inside]) + np.sum(n.nominal[~inside])
    assert total == pytest.approx(42.0, rel=1e-12)
    # errors: sqrt(Σw²)/Δx bin by bin
    np.testing.assert_allclose(n.nominal_variance[inside] * vol[inside] ** 2,
                               acc.sumw2[0][inside], rtol=1e-12)
    assert n.y_unit == ("pb/GeV" if ndim == 1 else "pb/(GeV·GeV)")


def test_expected_events_n_is_sigma_times_l() -> None:
    # N = σ·L with 1 fb⁻¹ = 1000 pb⁻¹: σ = 42 pb, L = 3 fb⁻¹ → 126000 events; variance × L²
    acc, _w = _filled()
    n = normalise(acc, "events", luminosity_fb=3.0)
    assert n.nominal.sum() == pytest.approx(126000.0, rel=1e-12)
    np.testing.assert_allclose(n.nominal_variance, acc.sumw2[0] * 3000.0**2, rtol=1e-12)
    with pytest.raises(ValueError, match="luminosity"):
        normalise(acc, "events")


def test_unit_area_matches_binomial_for_unit_weights() -> None:
    # unit weights: Var(p_k) = p(1−p)/N (binomial, textbook)
    n = 1000
    x = RNG.uniform(0, 4, n)
    acc = HistAccumulator(HistSpec("u", (AxisSpec.regular(4, 0.5, 3.5, name="x"),)))
    acc.fill(x)
    u = normalise(acc, "unit_area")
    p = acc.sumw[0] / n
    np.testing.assert_allclose(u.nominal, p, rtol=1e-12)
    np.testing.assert_allclose(u.nominal_variance, p * (1 - p) / n, rtol=1e-12)
    assert u.nominal.sum() == pytest.approx(1.0)  # flow included by default


def test_unit_area_variance_vs_toy_monte_carlo() -> None:
    # toy MC (common practice): repeat a weighted experiment with Poisson N, compare the spread
    # of p_k with the delta-method prediction
    edges = [0.0, 0.5, 1.0, 2.0]
    spec = HistSpec("t", (AxisSpec.variable(edges, name="x"),))
    ps, preds, naives = [], [], []
    rng = np.random.default_rng(5)
    for _ in range(800):
        n = rng.poisson(400)
        x = rng.exponential(0.8, n)
        w = rng.exponential(1.0, n)
        acc = HistAccumulator(spec)
        acc.fill(x, weight=w)
        u = normalise(acc, "unit_area")
        ps.append(u.nominal)
        preds.append(u.nominal_variance)
        naives.append(acc.sumw2[0] / acc.sumw[0].sum() ** 2)
    spread = np.var(np.array(ps), axis=0, ddof=1)
    pred = np.mean(preds, axis=0)  # the delta-method estimate, averaged over the toys
    # 800 toys: relative precision of a variance ≈ sqrt(2/799) ≈ 5 %; allow 15 %
    np.testing.assert_allclose(spread[1:], pred[1:], rtol=0.15)
    assert spread[0] == pred[0] == 0.0  # nothing below 0 for an exponential
    # and the naive s_k²/W² (ignores the normalisation correlation) is clearly different
    naive = np.mean(naives, axis=0)
    assert abs(naive[1] / spread[1] - 1) > 0.3


def test_unit_area_each_variation_on_its_own() -> None:
    acc, _w = _filled(nvar=3)
    u = normalise(acc, "unit_area")
    np.testing.assert_allclose(u.rows.reshape(4, -1).sum(axis=1), 1.0, rtol=1e-12)


def test_unit_area_in_range_only() -> None:
    acc = HistAccumulator(HistSpec("u", (AxisSpec.regular(2, 0, 2, name="x"),)))
    acc.fill([-1.0, 0.5, 0.5, 1.5, 5.0], weight=[1.0, 1.0, 1.0, 2.0, 1.0])
    u = normalise(acc, "unit_area", include_flow=False)
    # hand computation: W = 4 over the two in-range bins → p = [.25(flow), .5, .5, .25(flow)]
    assert u.nominal.tolist() == pytest.approx([0.25, 0.5, 0.5, 0.25])
    assert not u.norm_includes_flow


def test_raw_keeps_contents_and_unknown_mode_is_an_error() -> None:
    acc, _w = _filled()
    r = normalise(acc, "raw")
    assert np.array_equal(r.rows, acc.sumw)
    assert np.array_equal(r.row_variances, acc.sumw2)
    with pytest.raises(ValueError, match="unknown normalisation"):
        normalise(acc, "per_bin")


def test_one_unit_area_for_histograms_and_comparisons() -> None:
    # compare.unit_area is the same function; a zero total: zeros (a histogram without
    # selected events) or an error where a shape cannot be formed
    from evtkin import compare
    from evtkin.hists.normalise import unit_area as ua

    assert compare.unit_area is ua
    p, v = ua(np.zeros(3), np.zeros(3))
    assert p.tolist() == [0.0, 0.0, 0.0]
    assert v.tolist() == [0.0, 0.0, 0.0]
    with pytest.raises(ValueError, match="cannot normalise"):
        ua(np.zeros(3), np.zeros(3), empty="error")
    with pytest.raises(ValueError, match="cannot normalise"):
        ua(np.array([1.0, np.inf]), np.ones(2), empty="error")
    # REFERENCES §2.11: unit weights give the binomial p(1-p)/N
    n = np.array([10.0, 30.0, 60.0])
    p, v = ua(n, n)
    np.testing.assert_allclose(v, p * (1 - p) / 100, rtol=1e-12)
