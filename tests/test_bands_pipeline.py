"""Uncertainty bands through the whole pipeline vs hand computations on invented weight tables.

Formula sources: scale envelope over the 7-point (muR, muF) set without (0.5, 2) and (2, 0.5) —
common practice (REFERENCES §2.11); PDF replicas (standard deviation, 68 % interval) and Hessian
symmetric / asymmetric master formulas — PDF4LHC15 recommendations, arXiv:1510.03865;
unit-area shapes: each variation divided by its own total (REFERENCES §2.11). Per-event weights
for IDWTUP = -4 are XWGTUP / N (Les Houches accord hep-ph/0109068, REFERENCES §1.4).
"""

from __future__ import annotations

import math
import statistics

import numpy as np
import pytest

from evtkin.errors import ConfigError
from evtkin.output.rootfile import read_root
from evtkin.output.tables import load_results, read_hist_csv
from evtkin.run.pipeline import run
from test_bands_pipeline_lhe import config, lhe_text, write

# six events: three in bin [0, 20), two in [20, 40), one in the overflow
SCALE = [10.0, 12.0, 15.0, 25.0, 31.0, 55.0]
BINS = [[0, 1, 2], [3, 4], [5]]  # event indices of flow-index bins 1, 2, 3
N = len(SCALE)
POINTS = [(1, 1), (2, 1), (0.5, 1), (1, 2), (1, 0.5), (2, 2), (0.5, 0.5), (0.5, 2), (2, 0.5)]
SCALE_IDS = [(f"s{k}", f"muR={r} muF={f}") for k, (r, f) in enumerate(POINTS)]
PDF_IDS = [(f"p{k}", f"replica {k + 1}") for k in range(5)]
HESS_IDS = [(f"h{k}", f"eigenvector {k // 2 + 1}{'+' if k % 2 == 0 else '-'}") for k in range(4)]
GROUPS = [("scale_variation", "envelope", SCALE_IDS), ("pdf_replicas", "replicas", PDF_IDS),
          ("pdf_hessian", "hessian", HESS_IDS)]


def _table() -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(7)
    x = np.array([1.0, 2.0, -0.5, 1.5, 1.0, 3.0])
    var = x[:, None] * rng.uniform(0.7, 1.3, (N, 18))
    var[:, 7] = 3.0 * np.abs(x)  # (0.5, 2): an anti-correlated extreme, far outside the others
    var[:, 8] = 0.05 * x  # (2, 0.5)
    return x, var


@pytest.fixture(scope="module")
def lhe(tmp_path_factory):  # type: ignore[no-untyped-def]
    x, var = _table()
    d = tmp_path_factory.mktemp("bands")
    return write(d / "w.lhe", lhe_text(SCALE, x, idwtup=-4, groups=GROUPS, variations=var))


RECIPES = {
    "scale": {"group": "scale_variation", "method": "envelope", "drop_anticorrelated": True},
    "scale9": {"group": "scale_variation", "method": "envelope"},
    "pdf": {"group": "pdf_replicas", "method": "replicas_std"},
    "pdf68": {"group": "pdf_replicas", "method": "replicas_68"},
    "hs": {"ids": ["h0", "h1", "h2", "h3"], "method": "hessian_symmetric"},
    "ha": {"group": "pdf_hessian", "method": "hessian_asymmetric"},
    "total": {"method": "quadrature", "of": ["scale", "pdf", "ha"]},
}


def _bin_sums(col: np.ndarray) -> list[float]:
    """Σ w per flow-index bin 1..3 with w = XWGTUP / N (hand)."""
    return [sum(col[i] for i in b) / N for b in BINS]


def _hand(unit_area: bool = False) -> dict[str, tuple[list[float], list[float]]]:
    x, var = _table()
    x0 = _bin_sums(x)
    m = [_bin_sums(var[:, c]) for c in range(var.shape[1])]
    if unit_area:  # every weight normalised by its own total (all events are in bins 1..3)
        x0 = [v / sum(x0) for v in x0]
        m = [[v / sum(row) for v in row] for row in m]
    out: dict[str, tuple[list[float], list[float]]] = {}
    sc7 = m[0:7]
    out["scale"] = ([min([x0[k]] + [r[k] for r in sc7]) for k in range(3)],
                    [max([x0[k]] + [r[k] for r in sc7]) for k in range(3)])
    sc9 = m[0:9]
    out["scale9"] = ([min([x0[k]] + [r[k] for r in sc9]) for k in range(3)],
                     [max([x0[k]] + [r[k] for r in sc9]) for k in range(3)])
    reps = m[9:14]
    sd = [statistics.stdev([r[k] for r in reps]) for k in range(3)]  # 1/(N-1)
    out["pdf"] = ([x0[k] - sd[k] for k in range(3)], [x0[k] + sd[k] for k in range(3)])
    # 68 % interval: the 15.87th and 84.13th percentiles (Gaussian ±1σ: Φ(±1), scipy.stats.norm)
    from scipy.stats import norm

    lo_q, hi_q = norm.cdf(-1.0), norm.cdf(1.0)
    q = [np.quantile([r[k] for r in reps], [lo_q, hi_q]) for k in range(3)]
    out["pdf68"] = ([min(q[k][0], x0[k]) for k in range(3)],
                    [max(q[k][1], x0[k]) for k in range(3)])
    hs = m[14:18]
    d = [math.sqrt(sum((r[k] - x0[k]) ** 2 for r in hs)) for k in range(3)]
    out["hs"] = ([x0[k] - d[k] for k in range(3)], [x0[k] + d[k] for k in range(3)])
    up, dn = [], []
    for k in range(3):
        pairs = [(hs[0][k] - x0[k], hs[1][k] - x0[k]), (hs[2][k] - x0[k], hs[3][k] - x0[k])]
        up.append(math.sqrt(sum(max(a, b, 0.0) ** 2 for a, b in pairs)))
        dn.append(math.sqrt(sum(max(-a, -b, 0.0) ** 2 for a, b in pairs)))
    out["ha"] = ([x0[k] - dn[k] for k in range(3)], [x0[k] + up[k] for k in range(3)])
    tu = [math.sqrt(sum((out[b][1][k] - x0[k]) ** 2 for b in ("scale", "pdf", "ha")))
          for k in range(3)]
    td = [math.sqrt(sum((x0[k] - out[b][0][k]) ** 2 for b in ("scale", "pdf", "ha")))
          for k in range(3)]
    out["total"] = ([x0[k] - td[k] for k in range(3)], [x0[k] + tu[k] for k in range(3)])
    out["nominal"] = (x0, x0)
    return out


@pytest.mark.parametrize("normalise", ["raw", "unit_area"])
def test_every_recipe_matches_the_hand_computation(lhe, normalise) -> None:  # type: ignore[no-untyped-def]
    res = run(config([lhe], edges=(0.0, 20.0, 40.0), normalise=normalise,
                     uncertainties=RECIPES))
    s = res.samples["s"]
    hand = _hand(unit_area=normalise == "unit_area")
    nh = s.histograms["h"]
    assert nh.rows[0][1:4] == pytest.approx(hand["nominal"][0], rel=1e-12)
    bands = s.bands["h"]
    assert set(bands) == set(RECIPES)  # automatic bands are off once recipes are given
    for name in RECIPES:
        down, up = hand[name]
        assert bands[name].down[1:4] == pytest.approx(down, rel=1e-9, abs=1e-15), name
        assert bands[name].up[1:4] == pytest.approx(up, rel=1e-9, abs=1e-15), name
    assert bands["scale"].method == "envelope7"
    assert bands["scale"].members == [w for w, _d in SCALE_IDS[:7]]
    assert bands["ha"].method == "hessian_asym"
    assert bands["hs"].method == "hessian_sym"
    # dropping the anti-correlated points matters for this table
    assert np.any(bands["scale9"].up[1:4] > bands["scale"].up[1:4] * (1 + 1e-6))


def test_unit_area_band_is_a_shape_band(lhe) -> None:  # type: ignore[no-untyped-def]
    raw = run(config([lhe], uncertainties={"pdf": RECIPES["pdf"]})).samples["s"]
    unit = run(config([lhe], normalise="unit_area",
                      uncertainties={"pdf": RECIPES["pdf"]})).samples["s"]
    w0 = raw.histograms["h"].rows[0].sum()
    scaled = raw.bands["h"]["pdf"].up / w0  # what scaling the cross-section band would give
    assert not np.allclose(unit.bands["h"]["pdf"].up, scaled)
    # every variation sums to one on its own, so the band edges of all bins are shape deviations
    assert np.allclose(unit.histograms["h"].rows.sum(axis=1), 1.0)


def test_automatic_bands_from_the_files_combine_attributes(lhe) -> None:  # type: ignore[no-untyped-def]
    s = run(config([lhe])).samples["s"]
    b = s.bands["h"]
    assert {k: v.method for k, v in b.items()} == {
        "scale_variation": "envelope7", "pdf_replicas": "replicas_std",
        "pdf_hessian": "hessian_asym", "total": "quadrature"}
    hand = _hand()
    assert b["scale_variation"].up[1:4] == pytest.approx(hand["scale"][1], rel=1e-9)
    assert b["pdf_hessian"].down[1:4] == pytest.approx(hand["ha"][0], rel=1e-9)
    off = run(config([lhe], uncertainties={"automatic": False})).samples["s"]
    assert off.bands == {}


def test_bands_reach_json_csv_root_and_plots(lhe, tmp_path) -> None:  # type: ignore[no-untyped-def]
    out = tmp_path / "out"
    run(config([lhe], uncertainties={"scale": RECIPES["scale"], "pdf": RECIPES["pdf"]},
               output={"formats": ["root", "json", "csv", "plots"], "plot_formats": ["png"]}),
        out=out)
    hand = _hand()
    h = load_results(out).samples["s"].histograms["h"]
    assert h.bands["scale"].up[1:4] == pytest.approx(hand["scale"][1], rel=1e-9)
    cols = read_hist_csv(out / "csv" / "s" / "h.csv")
    assert cols["pdf_down"][1:4] == pytest.approx(hand["pdf"][0], rel=1e-9)
    assert cols["scale_up"][1:4] == pytest.approx(hand["scale"][1], rel=1e-9)
    root = read_root(out / "histograms.root")
    assert {"s__h", "s__h__scale_up", "s__h__scale_down", "s__h__pdf_up", "s__h__pdf_down"} <= set(
        root)
    assert root["s__h__scale_down"]["values"][1:4] == pytest.approx(hand["scale"][0], rel=1e-9)
    assert (out / "plots" / "h.png").stat().st_size > 0


def _toml(tmp_path, lhe, body: str):  # type: ignore[no-untyped-def]
    p = tmp_path / "c.toml"
    p.write_text(
        f'[samples.s]\nfiles = ["{lhe}"]\n\n[histograms.h]\n'
        'x = { value = "scale", edges = [0.0, 20.0, 40.0] }\n\n' + body, encoding="utf-8")
    return p


def test_unknown_group_is_a_config_error_with_line_and_suggestion(lhe, tmp_path) -> None:  # type: ignore[no-untyped-def]
    cfg = _toml(tmp_path, lhe, '[uncertainties.scale]\nmethod = "envelope"\n'
                'group = "scale_variaton"\n')
    with pytest.raises(ConfigError) as err:
        run(cfg)
    msg = str(err.value)
    assert f"{cfg}:9:" in msg
    assert "uncertainties.scale.group" in msg
    assert "did you mean 'scale_variation'" in msg


def test_unknown_id_and_bad_recipes_are_config_errors(lhe, tmp_path) -> None:  # type: ignore[no-untyped-def]
    cfg = _toml(tmp_path, lhe, '[uncertainties.pdf]\nmethod = "replicas_std"\n'
                'ids = ["p0", "p1", "p9"]\n')
    with pytest.raises(ConfigError, match=r"c\.toml:9: uncertainties\.pdf\.ids\[2\].*'p9'"):
        run(cfg)
    # descriptions without muR/muF cannot give a 7-point set
    cfg = _toml(tmp_path, lhe, '[uncertainties.pdf]\nmethod = "envelope"\n'
                'group = "pdf_replicas"\ndrop_anticorrelated = true\n')
    with pytest.raises(ConfigError, match=r"c\.toml:10: .*drop_anticorrelated.*muR/muF"):
        run(cfg)
    cfg = _toml(tmp_path, lhe, '[uncertainties.total]\nmethod = "quadrature"\nof = ["scal"]\n')
    with pytest.raises(ConfigError, match=r"c\.toml:9: uncertainties\.total\.of\[0\]"):
        run(cfg)
    cfg = _toml(tmp_path, lhe, '[uncertainties.x]\nmethod = "envelop"\ngroup = "a"\n')
    with pytest.raises(ConfigError, match=r"c\.toml:8: .*did you mean 'envelope'"):
        run(cfg)
    cfg = _toml(tmp_path, lhe, '[uncertainties.x]\nmethod = "hessian_asymmetric"\n'
                'ids = ["h0", "h1", "h2"]\n')
    with pytest.raises(ConfigError, match=r"pairs"):
        run(cfg)


def test_shape_bands_normalise_each_variation_and_reach_shape_only_comparisons(
    lhe, tmp_path
) -> None:  # type: ignore[no-untyped-def]
    from evtkin.compare import compare_histograms
    from evtkin.output.compare_plots import hist_to_data

    out = tmp_path / "shape"
    res = run(config([lhe], uncertainties={"scale": RECIPES["scale"], "pdf": RECIPES["pdf"]}),
              out=out)
    s = res.samples["s"]
    hand = _hand(unit_area=True)  # each variation divided by its own total (REFERENCES §2.11)
    for name in ("scale", "pdf"):
        sb = s.shape_bands["h"][name]
        assert sb.down[1:4] == pytest.approx(hand[name][0], rel=1e-9, abs=1e-15)
        assert sb.up[1:4] == pytest.approx(hand[name][1], rel=1e-9, abs=1e-15)
    h = load_results(out).samples["s"].histograms["h"]
    assert h.shape_bands["scale"].up[1:4] == pytest.approx(hand["scale"][1], rel=1e-9)
    a, _factor, _notes = hist_to_data(h, "s")
    cmp = compare_histograms(a, a, shape_only=True, name="h")
    # the comparison draws the shape band of the first band (no "total" here: "scale")
    assert cmp.band_up[1:4] == pytest.approx(hand["scale"][1], rel=1e-9)
    assert cmp.band_down[1:4] == pytest.approx(hand["scale"][0], rel=1e-9)
    # scaling the cross-section band by the nominal total would be a different band
    x0 = h.values.sum()
    assert not np.allclose(h.bands["scale"].up[1:4] / x0, hand["scale"][1], rtol=1e-6)
