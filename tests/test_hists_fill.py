"""Accumulator: contents and errors vs independent numpy/hist computations, flow, 2-D, merging,
groups, pickling and conversion to hist."""

from __future__ import annotations

import pickle

import boost_histogram as bh
import hist
import numpy as np
import pytest

from evtkin.hists.fill import AxisSpec, HistAccumulator, HistSpec, fill_many

RNG = np.random.default_rng(20240601)


def _np_flow_hist(x: np.ndarray, edges: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Independent reference: np.histogram with infinite outer edges gives flow bins.

    np.histogram's last bin is closed on the right, so values equal to the last finite edge are
    moved to the overflow explicitly (hist convention: upper edge exclusive)."""
    full = np.concatenate([[-np.inf], edges, [np.inf]])
    xx = np.where(x == edges[-1], np.inf, x)
    return np.histogram(xx, bins=full, weights=w)[0]


def test_axis_index_matches_hist_on_edges_and_specials() -> None:
    # boost-histogram is the reference for the bin convention (lower edge inclusive)
    for ax in (
        AxisSpec.regular(7, -1.3, 2.9, name="a"),
        AxisSpec.regular(50, 0.0, 200.0, name="b"),
        AxisSpec.variable(np.geomspace(0.1, 300.0, 41), name="c"),
        AxisSpec.variable([0.0, 1.0, 1.5, 10.0], name="d"),
    ):
        e = ax.edges_array
        x = np.concatenate([
            RNG.normal(0, 100, 20000), e, np.nextafter(e, -np.inf), np.nextafter(e, np.inf),
            [np.nan, np.inf, -np.inf, -0.0],
        ])
        ref = ax.to_hist_axis().index(x) + 1  # boost: -1 = underflow
        assert np.array_equal(ax.index(x), ref)


def test_1d_contents_and_errors_vs_numpy_including_flow() -> None:
    x = RNG.normal(0.0, 3.0, 5000)
    x[:7] = [10.0, -10.0, 5.0, -5.0, 0.0, 4.999999, np.inf]  # edges and flow on purpose
    w = RNG.normal(1.0, 2.0, x.size)  # negative weights included
    spec = HistSpec("x", (AxisSpec.regular(10, -5.0, 5.0, name="x"),))
    acc = HistAccumulator(spec)
    acc.fill(x, weight=w)
    edges = spec.axes[0].edges_array
    # common practice: Σw and Σw² per bin from np.histogram with weights and weights²
    np.testing.assert_allclose(acc.sumw[0], _np_flow_hist(x, edges, w), rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(acc.sumw2[0], _np_flow_hist(x, edges, w * w), rtol=1e-12)
    assert acc.sumw[0][0] != 0
    assert acc.sumw[0][-1] != 0
    assert acc.entries == x.size


def test_variations_match_separate_hist_fills() -> None:
    n, nv = 3000, 5
    x = RNG.exponential(30.0, n)
    w0 = RNG.normal(1.0, 0.5, n)
    wv = w0[:, None] * RNG.normal(1.0, 0.2, (n, nv))
    spec = HistSpec("pt", (AxisSpec.variable([0, 10, 20, 40, 80, 160], name="pt"),))
    acc = HistAccumulator(spec, tuple(f"v{i}" for i in range(nv)))
    acc.fill(x, weight=w0, variations=wv)
    for c in range(1 + nv):
        wc = w0 if c == 0 else wv[:, c - 1]
        h = hist.Hist(hist.axis.Variable([0, 10, 20, 40, 80, 160]), storage=hist.storage.Weight())
        h.fill(x, weight=wc)  # reference library: hist
        np.testing.assert_allclose(acc.sumw[c], h.values(flow=True), rtol=1e-12)
        np.testing.assert_allclose(acc.sumw2[c], h.variances(flow=True), rtol=1e-12)


def test_2d_vs_numpy_histogram2d_with_flow() -> None:
    n = 4000
    x = RNG.uniform(-1, 4, n)
    y = RNG.normal(0, 1.5, n)
    w = RNG.uniform(-0.5, 2.0, n)
    spec = HistSpec("xy", (AxisSpec.regular(3, 0.0, 3.0, name="x"),
                           AxisSpec.variable([-1.0, 0.0, 0.5, 2.0], name="y")))
    acc = HistAccumulator(spec)
    acc.fill(x, y, weight=w)
    ex = np.concatenate([[-np.inf], spec.axes[0].edges_array, [np.inf]])
    ey = np.concatenate([[-np.inf], spec.axes[1].edges_array, [np.inf]])
    ref = np.histogram2d(x, y, bins=[ex, ey], weights=w)[0]  # numpy reference
    ref2 = np.histogram2d(x, y, bins=[ex, ey], weights=w * w)[0]
    assert acc.sumw.shape == (1, 5, 5)
    np.testing.assert_allclose(acc.sumw[0], ref, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(acc.sumw2[0], ref2, rtol=1e-12)
    hh = acc.to_hist()
    np.testing.assert_allclose(hh.values(flow=True), ref, rtol=1e-12, atol=1e-12)


def test_merge_of_split_fills_equals_single_fill() -> None:
    n = 10000
    x = RNG.normal(0, 2, n)
    wi = RNG.integers(-3, 5, n).astype(float)  # integer weights: sums exact
    wf = RNG.normal(1, 1, n)
    spec = HistSpec("x", (AxisSpec.regular(20, -4, 4, name="x"),))
    for w, exact in ((wi, True), (wf, False)):
        one = HistAccumulator(spec, ("a",))
        one.fill(x, weight=w, variations=(2 * w)[:, None])
        parts = []
        for sl in (slice(0, 1234), slice(1234, 7000), slice(7000, n)):
            p = HistAccumulator(spec, ("a",))
            p.fill(x[sl], weight=w[sl], variations=(2 * w[sl])[:, None])
            parts.append(p)
        left = (parts[0] + parts[1]) + parts[2]
        right = parts[0] + (parts[1] + parts[2])
        for merged in (left, right, sum(parts)):
            assert merged.entries == n
            if exact:
                assert np.array_equal(merged.sumw, one.sumw)
                assert np.array_equal(merged.sumw2, one.sumw2)
            else:
                np.testing.assert_allclose(merged.sumw, one.sumw, rtol=1e-12, atol=1e-12)
                np.testing.assert_allclose(merged.sumw2, one.sumw2, rtol=1e-12, atol=1e-12)


def test_merge_rejects_incompatible() -> None:
    a = HistAccumulator(HistSpec("x", (AxisSpec.regular(2, 0, 1, name="x"),)))
    b = HistAccumulator(HistSpec("x", (AxisSpec.regular(3, 0, 1, name="x"),)))
    with pytest.raises(ValueError, match="different specs"):
        _ = a + b
    c = HistAccumulator(a.spec, ("v",))
    with pytest.raises(ValueError, match="variation lists differ"):
        _ = a + c


def test_rows_map_objects_to_event_weights() -> None:
    # three events with 2, 0, 3 jets: each jet carries its event's weights
    counts = np.array([2, 0, 3])
    pt = np.array([15.0, 45.0, 5.0, 25.0, 99.0])
    rows = np.repeat(np.arange(3), counts)
    w = np.array([2.0, 7.0, -1.0])
    wv = np.array([[1.0], [1.0], [3.0]])
    spec = HistSpec("pt", (AxisSpec.regular(2, 10, 50, name="pt"),))
    acc = HistAccumulator(spec, ("v",))
    acc.fill(pt, weight=w, variations=wv, rows=rows)
    # hand computation: bins [<10, 10-30, 30-50, >=50]
    assert acc.sumw[0].tolist() == [-1.0, 2.0 - 1.0, 2.0, -1.0]
    assert acc.sumw2[0].tolist() == [1.0, 5.0, 4.0, 1.0]
    assert acc.sumw[1].tolist() == [3.0, 4.0, 1.0, 3.0]


def test_fill_many_equals_individual_fills() -> None:
    n = 2500
    w = RNG.normal(1, 1, n)
    wv = RNG.normal(1, 1, (n, 3))
    specs = [HistSpec(f"h{i}", (AxisSpec.regular(5 + i, -2, 2, name="x"),)) for i in range(4)]
    vals = [RNG.normal(0, 1, n) for _ in specs]
    many = [HistAccumulator(s, ("a", "b", "c")) for s in specs]
    fill_many([(a, (v,), None) for a, v in zip(many, vals, strict=True)], weight=w,
              variations=wv)
    for a, s, v in zip(many, specs, vals, strict=True):
        single = HistAccumulator(s, ("a", "b", "c"))
        single.fill(v, weight=w, variations=wv)
        np.testing.assert_allclose(a.sumw, single.sumw, rtol=1e-13, atol=1e-13)
        np.testing.assert_allclose(a.sumw2, single.sumw2, rtol=1e-13, atol=1e-13)


def test_groups_sum_before_squaring() -> None:
    # one NLO-like group: event (+5 at x=0.5) with counter-events (-4 at 0.5, -2 at 1.5),
    # plus an independent event (+3 at 0.5). LHEF 2.0 <eventgroup>: one statistical unit.
    x = np.array([0.5, 0.5, 1.5, 0.5])
    w = np.array([5.0, -4.0, -2.0, 3.0])
    g = np.array([7, 7, 7, -1])
    spec = HistSpec("x", (AxisSpec.regular(2, 0, 2, name="x"),))
    acc = HistAccumulator(spec, ("twice",))
    acc.fill(x, weight=w, variations=(2 * w)[:, None], group=g)
    # hand computation: bin 1: Σw = 5-4+3 = 4, Σw² = (5-4)² + 3² = 10; bin 2: -2, 4
    assert acc.sumw[0].tolist() == [0.0, 4.0, -2.0, 0.0]
    assert acc.sumw2[0].tolist() == [0.0, 10.0, 4.0, 0.0]
    assert acc.sumw2[1].tolist() == [0.0, 40.0, 16.0, 0.0]
    # without groups the naive Σw² would be 25 + 16 + 9 = 50
    naive = HistAccumulator(spec, ("twice",))
    naive.fill(x, weight=w, variations=(2 * w)[:, None])
    assert naive.sumw2[0][1] == 50.0
    assert np.array_equal(naive.sumw, acc.sumw)


def test_pickle_and_hist_conversion_keep_flow() -> None:
    spec = HistSpec("m", (AxisSpec.variable([0, 1, 2], name="m", label="m", unit="GeV"),), "t")
    acc = HistAccumulator(spec, ("up", "down"))
    acc.fill([-1.0, 0.5, 1.5, 2.0, 9.0], weight=[1, 2, 3, 4, 5],
             variations=[[1, 1], [2, 2], [3, 3], [4, 4], [5, 50]])
    back = pickle.loads(pickle.dumps(acc))
    assert np.array_equal(back.sumw, acc.sumw)
    assert back.variations == acc.variations
    h = acc.to_hist("down")
    assert h.values(flow=True).tolist() == [1.0, 2.0, 3.0, 54.0]
    assert h.variances(flow=True).tolist() == [1.0, 4.0, 9.0, 16.0 + 2500.0]
    hv = acc.to_hist_with_variation_axis()
    assert list(hv.axes[-1]) == ["nominal", "up", "down"]
    assert hv[:, "nominal"].values(flow=True).tolist() == [1.0, 2.0, 3.0, 9.0]
    assert isinstance(hv.axes[0], hist.axis.Variable)
    assert set(acc.to_hists()) == {"nominal", "up", "down"}


def test_regular_axis_to_hist_is_regular() -> None:
    ax = AxisSpec.regular(4, 0.0, 1.0, name="x")
    assert isinstance(ax.to_hist_axis(), bh.axis.Regular)


def test_bad_input_errors_are_clear() -> None:
    spec = HistSpec("x", (AxisSpec.regular(2, 0, 1, name="x"),))
    acc = HistAccumulator(spec, ("a",))
    with pytest.raises(ValueError, match="declares 1 variations"):
        acc.fill([0.1, 0.2], weight=[1.0, 1.0])
    with pytest.raises(ValueError, match="2 values but 3 weight rows"):
        acc.fill([0.1, 0.2], weight=[1.0, 1.0, 1.0], variations=[[1.0], [1.0], [1.0]])
    with pytest.raises(ValueError, match="strictly increasing"):
        AxisSpec.variable([0, 2, 1], name="bad")


def test_scaled_equals_filling_scaled_weights() -> None:
    # scaling weights by f scales Σw by f and Σw² by f² (definition)
    x = RNG.normal(0, 1, 500)
    w = RNG.normal(1, 1, 500)
    spec = HistSpec("x", (AxisSpec.regular(5, -2, 2, name="x"),))
    a = HistAccumulator(spec)
    a.fill(x, weight=w)
    b = HistAccumulator(spec)
    b.fill(x, weight=w * 0.37)
    s = a.scaled(0.37)
    np.testing.assert_allclose(s.sumw, b.sumw, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(s.sumw2, b.sumw2, rtol=1e-12, atol=1e-15)


def test_add_scaled_merges_parts_with_their_factors() -> None:
    # Σ_parts f_p·Σw_p and Σ f_p²·Σw²_p: filling the parts' weights scaled by f_p (definition)
    x1, x2 = RNG.normal(0, 1, 300), RNG.normal(0, 1, 200)
    w1, w2 = RNG.normal(1, 1, 300), RNG.normal(1, 1, 200)
    v1, v2 = RNG.normal(1, 1, (300, 2)), RNG.normal(1, 1, (200, 2))
    spec = HistSpec("x", (AxisSpec.regular(5, -2, 2, name="x"),))
    p1, p2 = HistAccumulator(spec, ("a", "b")), HistAccumulator(spec, ("a", "b"))
    p1.fill(x1, weight=w1, variations=v1)
    p2.fill(x2, weight=w2, variations=v2)
    ref = HistAccumulator(spec, ("a", "b"))
    ref.fill(np.concatenate([x1, x2]), weight=np.concatenate([w1 * 0.5, w2 * 3.0]),
             variations=np.concatenate([v1 * 0.5, v2 * 3.0]))
    acc = HistAccumulator(spec, ("a", "b"))
    assert acc.add_scaled(p1, 0.5).add_scaled(p2, 3.0) is acc
    np.testing.assert_allclose(acc.sumw, ref.sumw, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(acc.sumw2, ref.sumw2, rtol=1e-12, atol=1e-15)
    assert acc.entries == 500
    other = HistAccumulator(HistSpec("y", (AxisSpec.regular(4, -2, 2, name="x"),)), ("a", "b"))
    with pytest.raises(ValueError, match="different specs"):
        acc.add_scaled(other, 1.0)


def test_many_variations_unordered_rows_and_mixed_items_vs_numpy() -> None:
    # 30 variations (row width padded inside the kernel), rows in random order, and items with
    # and without a row map filled together; reference: numpy.histogram per weight column
    n, nv = 400, 30
    w = RNG.normal(1, 1, n)
    wv = RNG.normal(1, 1, (n, nv))
    rows = RNG.integers(0, n, 900)  # unordered, repeated rows (objects of events)
    x_obj = RNG.uniform(-1, 11, rows.size)
    x_evt = RNG.uniform(-1, 11, n)
    spec = HistSpec("x", (AxisSpec.regular(6, 0, 10, name="x"),))
    names = tuple(f"v{k}" for k in range(nv))
    a_obj, a_evt = HistAccumulator(spec, names), HistAccumulator(spec, names)
    fill_many([(a_obj, (x_obj,), rows), (a_evt, (x_evt,), None)], weight=w, variations=wv)
    edges = np.concatenate([[-np.inf], np.linspace(0, 10, 7), [np.inf]])
    table = np.concatenate([w[:, None], wv], axis=1)
    for acc, x, r in ((a_obj, x_obj, rows), (a_evt, x_evt, np.arange(n))):
        for c in range(1 + nv):
            ref, _ = np.histogram(x, edges, weights=table[r, c])
            ref2, _ = np.histogram(x, edges, weights=table[r, c] ** 2)
            np.testing.assert_allclose(acc.sumw[c], ref, rtol=1e-12, atol=1e-12)
            np.testing.assert_allclose(acc.sumw2[c], ref2, rtol=1e-12, atol=1e-12)
