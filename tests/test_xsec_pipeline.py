"""Cross-section bookkeeping through the whole pipeline, against hand computations.

Rules: the Les Houches accord hep-ph/0109068 (IDWTUP ±1 … ±4; summary in REFERENCES §1.4):
±1/±4 the mean XWGTUP is σ; ±2 XSECUP(p) is σ of process p, XWGTUP relative within p; ±3
unweighted, σ = Σ XSECUP. LHEF 2.0 (arXiv:1003.1643) ``<xsecinfo totxsec>``. MC error √Σw² and
N_eff = (Σw)²/Σw² from REFERENCES §2.11.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from evtkin.errors import ConfigError
from evtkin.run.outputs import summary_text
from evtkin.run.pipeline import run
from test_bands_pipeline_lhe import config, lhe_text, write

EDGES = (0.0, 20.0, 40.0)


def test_split_sample_equals_one_equivalent_file(tmp_path) -> None:  # type: ignore[no-untyped-def]
    # two files, IDWTUP = 3, different declared σ and event counts
    a = write(tmp_path / "a.lhe", lhe_text([5, 25, 25, 50], [1] * 4, idwtup=3,
                                           processes=[(10.0, 0.3, 1)]))
    b = write(tmp_path / "b.lhe", lhe_text([5, 5, 25, 30, 35, 1], [1] * 6, idwtup=3,
                                           processes=[(20.0, 0.4, 1)]))
    # hand: files weighted by event counts, σ = (4·10 + 6·20)/10 = 16 pb; the single equivalent
    # file holds the same ten events and declares 16 pb
    one = write(tmp_path / "one.lhe", lhe_text([5, 25, 25, 50, 5, 5, 25, 30, 35, 1], [1] * 10,
                                               idwtup=3, processes=[(16.0, 0.25, 1)]))
    split = run(config([a, b], edges=EDGES)).samples["s"]
    single = run(config([one], edges=EDGES)).samples["s"]
    assert split.xsec.sigma_pb == pytest.approx(16.0, rel=1e-12)
    assert single.xsec.sigma_pb == pytest.approx(16.0, rel=1e-12)
    hs, h1 = split.histograms["h"], single.histograms["h"]
    assert hs.rows[0] == pytest.approx(h1.rows[0], rel=1e-12)
    assert hs.row_variances[0] == pytest.approx(h1.row_variances[0], rel=1e-12)
    # hand: every event weighs 1.6 pb; bin [0, 20) holds 4 events, [20, 40) 5, overflow 1
    assert hs.rows[0].tolist() == pytest.approx([0.0, 6.4, 8.0, 1.6])
    assert hs.row_variances[0].tolist() == pytest.approx([0.0, 4 * 1.6**2, 5 * 1.6**2, 1.6**2])
    # per-file record: σ estimates, weights in the combination
    files = split.xsec.to_dict()["files"]
    assert [f["sigma_pb"] for f in files] == pytest.approx([10.0, 20.0])
    assert [f["weight_in_combination"] for f in files] == pytest.approx([0.4, 0.6])
    # the declared error combines like the estimate: sqrt((0.4·0.3)² + (0.6·0.4)²)
    assert split.xsec.declared_err_pb == pytest.approx(math.hypot(0.4 * 0.3, 0.6 * 0.4))


# two processes (NPRUP = 2): ids 1 and 2 declare XSECUP 5 pb and 7 pb
PID = [1, 1, 2, 2, 2]
X = [2.0, 4.0, 1.0, 3.0, 6.0]
SC = [5.0, 25.0, 5.0, 25.0, 25.0]


@pytest.mark.parametrize("idwtup", [1, -1, 2, -2, 3, -3, 4, -4])
def test_every_idwtup_mode_with_two_processes(tmp_path, idwtup) -> None:  # type: ignore[no-untyped-def]
    x = [1.0] * 5 if abs(idwtup) == 3 else X
    f = write(tmp_path / "m.lhe", lhe_text(SC, x, idwtup=idwtup, process_id=PID,
                                           processes=[(5.0, 0.1, 1), (7.0, 0.2, 2)]))
    s = run(config([f], edges=EDGES)).samples["s"]
    if abs(idwtup) in (1, 4):  # hand: w = XWGTUP / N
        w = np.array(x) / 5
    elif abs(idwtup) == 2:  # hand: w = XWGTUP · XSECUP(p) / Σ_p XWGTUP
        w = np.array([2 * 5 / 6, 4 * 5 / 6, 1 * 7 / 10, 3 * 7 / 10, 6 * 7 / 10])
    else:  # hand: unweighted, σ = 12 pb shared by the 5 events
        w = np.full(5, 12 / 5)
    assert s.xsec.sigma_pb == pytest.approx(w.sum(), rel=1e-12)
    assert s.xsec.mode == idwtup
    sel = np.array(SC) < 20
    assert s.histograms["h"].rows[0][1:3] == pytest.approx([w[sel].sum(), w[~sel].sum()])
    assert s.histograms["h"].row_variances[0][1:3] == pytest.approx(
        [(w[sel] ** 2).sum(), (w[~sel] ** 2).sum()])
    if abs(idwtup) in (2, 3):
        assert not s.xsec.warnings  # agrees with Σ XSECUP = 12 pb
    else:  # mean XWGTUP = 3.2 pb ≠ 12 pb declared: the cross-check says so
        assert any("disagrees" in m for m in s.xsec.warnings)


def test_negative_weights_error_is_sqrt_sumw2_and_neff_is_reported(tmp_path) -> None:  # type: ignore[no-untyped-def]
    x = [3.0, -1.0, 4.0, 2.0, -2.0, 1.0]
    sc = [5.0, 5.0, 5.0, 25.0, 25.0, 25.0]
    f = write(tmp_path / "n.lhe", lhe_text(sc, x, idwtup=-4, processes=[(7.0 / 6, 0.5, 1)]))
    out = tmp_path / "out"
    res = run(config([f], edges=EDGES, output={"formats": ["json"]}), out=out)
    s = res.samples["s"]
    w = np.array(x) / 6  # hand: IDWTUP = -4, w = XWGTUP / N
    h = s.histograms["h"]
    # MC error √Σw² per bin, not √N: bin 1 holds +3, -1, +4 → √(9 + 1 + 16)/6
    assert math.sqrt(h.row_variances[0][1]) == pytest.approx(math.sqrt(26) / 6)
    assert math.sqrt(h.row_variances[0][2]) == pytest.approx(math.sqrt(4 + 4 + 1) / 6)
    neff = w.sum() ** 2 / (w**2).sum()  # hand: (7/6)² / (35/36) = 49/35
    assert neff == pytest.approx(49 / 35)
    assert s.xsec.n_eff == pytest.approx(neff)
    doc = json.loads((out / "results.json").read_text())
    xs = doc["samples"]["s"]["xsec"]
    assert xs["n_eff"] == pytest.approx(neff)
    assert xs["sum_w2"] == pytest.approx((w**2).sum())
    assert xs["sum_w"] == pytest.approx(7 / 6)
    assert xs["convention"] == "mean"
    assert xs["files"][0]["n_negative"] == 2
    prov = json.loads((out / "provenance.json").read_text())
    assert prov["cross_sections"]["s"]["n_eff"] == pytest.approx(neff)
    text = summary_text(res)
    assert "N_eff = 1.4" in text
    assert "IDWTUP = -4" in text
    assert "'mean'" in text


def test_no_declared_cross_section(tmp_path) -> None:  # type: ignore[no-untyped-def]
    f = write(tmp_path / "z.lhe", lhe_text([5.0, 25.0, 25.0], [1.0] * 3, idwtup=3,
                                           processes=[(0.0, 0.0, 1)]))
    with pytest.raises(ConfigError, match="cross_section_pb"):
        run(config([f], edges=EDGES))
    s = run(config([f], edges=EDGES, sample={"cross_section_pb": 9.0})).samples["s"]
    assert s.xsec.sigma_pb == pytest.approx(9.0)
    assert s.histograms["h"].rows[0][1:3] == pytest.approx([3.0, 6.0])  # hand: 9 pb / 3 each
    # IDWTUP = -4 with XSECUP = 0: σ from the weights, and no claim of agreeing with "0 pb"
    g = write(tmp_path / "y.lhe", lhe_text([5.0, 25.0], [2.0, 4.0], idwtup=-4,
                                           processes=[(0.0, 0.0, 1)]))
    s = run(config([g], edges=EDGES)).samples["s"]
    assert s.xsec.sigma_pb == pytest.approx(3.0)
    assert not any("agrees" in m for m in s.xsec.log)
    assert any("declares no cross section" in m for m in s.xsec.log)
    assert s.xsec.declared_pb is None


def test_xsecinfo_cross_check_warning_reaches_summary(tmp_path) -> None:  # type: ignore[no-untyped-def]
    # IDWTUP = -4 file that normalises Σ XWGTUP = σ (REFERENCES §1.4 caveat): totxsec = 6 pb
    f = write(tmp_path / "s.lhe", lhe_text([5.0, 25.0, 25.0], [1.0, 2.0, 3.0], idwtup=-4,
                                           processes=[(6.0, 0.01, 1)], totxsec=6.0))
    res = run(config([f], edges=EDGES))
    x = res.samples["s"].xsec
    assert x.sigma_pb == pytest.approx(2.0)  # mean XWGTUP, as the standard says
    assert any("<xsecinfo totxsec>" in w and "'sum' would match" in w for w in x.warnings)
    assert "warning:" in summary_text(res)
