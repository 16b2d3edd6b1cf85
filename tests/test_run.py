"""The run pipeline end to end on small LHE files written by the tests (see run_helpers)."""

from __future__ import annotations

import json
import pickle
import sys
from pathlib import Path

import numpy as np
import pytest

import evtkin
from evtkin.config import load_config
from evtkin.errors import ConfigError
from evtkin.run.partial import merge_all
from evtkin.run.pipeline import run
from evtkin.run.plan import build_plan
from evtkin.run.units import make_units, process_unit
from run_helpers import M_T, M_W, drell_yan, eta, inv_mass, pt, ttbar_lepton_jets, write_lhe

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

ROOT = Path(__file__).resolve().parents[1]
N_DY = 1500
XSEC_DY = 1234.5


@pytest.fixture(scope="module")
def dy_sample():
    return drell_yan(N_DY, seed=11, weights="mixed", n_var=3)


@pytest.fixture(scope="module")
def dy_file(tmp_path_factory, dy_sample):
    d = tmp_path_factory.mktemp("dy")
    return write_lhe(d / "dy.lhe.gz", dy_sample, idwtup=-4, xsec_pb=0.0,
                     weight_ids=("up", "down", "alt"))


def dy_config(files, **extra):
    cfg = {
        "analysis": {"name": "dy test"},
        "samples": {"dy": {"files": [str(f) for f in files], "luminosity_fb": 3.0}},
        "objects": {"leptons": {"particles": ["charged_leptons"], "min_pt": 20.0,
                                "max_abs_eta": 2.4}},
        "step": [{"name": "two leptons", "require": "count(leptons) >= 2"},
                 {"name": "window", "require": "70 < mass(leptons[0] + leptons[1]) < 110"}],
        "quantities": {"mll": "mass(leptons[0] + leptons[1])"},
        "histograms": {
            "mll": {"x": {"value": "mll", "bins": 8, "range": [70, 110]}, "normalise": "raw"},
            "lep_pt": {"x": {"value": "leptons.pt", "edges": [0, 20, 30, 45, 70, 120]},
                       "normalise": "raw", "after": "two leptons"},
            "pt_eta": {"x": {"value": "leptons[0].pt", "bins": 4, "range": [20, 100]},
                       "y": {"value": "leptons[0].eta", "bins": 3, "range": [-2.4, 2.4]},
                       "normalise": "raw"},
        },
    }
    cfg.update(extra)
    return cfg


def _reference(sample, first=0, last=None):
    """Independent numpy selection: leptons with pT > 20, |η| < 2.4, ordered by pT."""
    s = sample.subset(slice(first, last))
    p4 = s.particles.p4[:, 3:5]  # the two leptons of the DY record
    lpt, leta = pt(p4), eta(p4)
    ok = (lpt > 20) & (np.abs(leta) < 2.4)
    order = np.argsort(-lpt, axis=1, kind="stable")
    two = ok.all(axis=1)
    m = inv_mass(p4[:, 0], p4[:, 1])
    window = two & (m > 70) & (m < 110)
    return s, lpt, leta, ok, order, two, m, window


def test_histograms_match_independent_numpy(dy_file, dy_sample):
    res = run(dy_config([dy_file]))
    s, lpt, leta, ok, order, two, m, window = _reference(dy_sample)
    # IDWTUP = -4: per-event weight XWGTUP / N (LHEF accord, REFERENCES §1.4)
    w = s.weight / len(s)
    # mll after both steps
    h = res["dy"]["mll"]
    ref, _ = np.histogram(m[window], bins=np.linspace(70, 110, 9), weights=w[window])
    ref2, _ = np.histogram(m[window], bins=np.linspace(70, 110, 9), weights=w[window] ** 2)
    np.testing.assert_allclose(h.values(), ref, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(h.variances(), ref2, rtol=1e-12, atol=1e-18)
    # every selected lepton after the first step, with flow bins
    h = res["dy"]["lep_pt"]
    sel = ok & two[:, None]
    vals = lpt[sel]
    ww = np.broadcast_to(w[:, None], lpt.shape)[sel]
    edges = np.array([-np.inf, 0, 20, 30, 45, 70, 120, np.inf])
    ref, _ = np.histogram(vals, bins=edges, weights=ww)
    np.testing.assert_allclose(h.values(flow=True), ref, rtol=1e-12, atol=1e-15)
    # 2-D: leading lepton pT vs η
    lead = np.take_along_axis(lpt, order, 1)[:, 0]
    lead_eta = np.take_along_axis(leta, order, 1)[:, 0]
    ref2d, _, _ = np.histogram2d(lead[window], lead_eta[window],
                                 bins=[np.linspace(20, 100, 5), np.linspace(-2.4, 2.4, 4)],
                                 weights=w[window])
    np.testing.assert_allclose(res["dy"]["pt_eta"].values(), ref2d, rtol=1e-12, atol=1e-15)
    # cutflow: raw counts exact, Σw and √Σw² vs numpy
    cf = res.samples["dy"].cutflow
    assert [r["n_raw"] for r in cf] == [len(s), int(two.sum()), int(window.sum())]
    assert cf[2]["sum_w"] == pytest.approx(w[window].sum(), rel=1e-12)
    assert cf[2]["sum_w2"] == pytest.approx((w[window] ** 2).sum(), rel=1e-12)
    assert cf[1]["eff_step"] == pytest.approx(w[two].sum() / w.sum(), rel=1e-12)


def test_variation_weights_are_filled_with_the_same_factor(dy_file, dy_sample):
    res = run(dy_config([dy_file]))
    acc = res.samples["dy"].weighted["mll"]
    assert acc.variations == ("up", "down", "alt")
    s, *_, m, window = _reference(dy_sample)
    for k in range(3):
        wv = s.variations[:, k] / len(s)  # same IDWTUP factor as the nominal (LHEF 3.0)
        ref, _ = np.histogram(m[window], bins=np.linspace(70, 110, 9), weights=wv[window])
        np.testing.assert_allclose(acc.sumw[k + 1][1:-1], ref, rtol=1e-12, atol=1e-15)


def test_normalisations_integrate_to_sigma_and_sigma_times_lumi(tmp_path):
    sample = drell_yan(800, seed=5)
    f = write_lhe(tmp_path / "u.lhe", sample, idwtup=3, xsec_pb=XSEC_DY, xerr_pb=2.0)
    cfg = dy_config([f])
    cfg["step"] = []
    cfg["histograms"] = {
        "dsig": {"x": {"value": "mll", "bins": 10, "range": [75, 105]},
                 "normalise": "xsec_per_bin"},
        "nev": {"x": {"value": "mll", "edges": [60, 80, 90, 100, 120]}, "normalise": "events"},
        "shape": {"x": {"value": "mll", "bins": 5, "range": [80, 100]}, "normalise": "unit_area"},
    }
    res = run(cfg)
    h = res["dy"]["dsig"]
    total = h.sum(flow=True).value  # σ per bin (pb), flow bins included
    # the stored density (results.json, plots): Σ dσ/dx·Δx over the range + the flow bins
    dens = res.samples["dy"].histograms["dsig"].rows[0]
    widths = np.diff(h.axes[0].edges)
    assert np.sum(dens[1:-1] * widths) + dens[0] + dens[-1] == pytest.approx(total, rel=1e-12)
    # IDWTUP = 3 with unit weights: Σw = Σ XSECUP (LHEF accord); events with < 2 leptons give
    # no entry, so compare with the fraction of events with two leptons in acceptance
    s, *_ = _reference(sample)
    p4 = s.particles.p4[:, 3:5]
    ok = ((pt(p4) > 20) & (np.abs(eta(p4)) < 2.4)).all(axis=1)
    assert total == pytest.approx(XSEC_DY * ok.mean(), rel=1e-12)
    # N = σ·L with L in fb⁻¹ → ×1000 pb⁻¹ (1 fb⁻¹ = 1000 pb⁻¹)
    n = res["dy"]["nev"].values(flow=True).sum()
    assert n == pytest.approx(XSEC_DY * ok.mean() * 3.0 * 1000.0, rel=1e-12)
    # unit area over all bins incl. flow
    assert res["dy"]["shape"].values(flow=True).sum() == pytest.approx(1.0, rel=1e-12)
    assert res.samples["dy"].xsec.sigma_pb == pytest.approx(XSEC_DY, rel=1e-12)


def _flat(res, sample="dy"):
    out = {}
    for name, acc in res.samples[sample].weighted.items():
        out[name] = (acc.sumw.copy(), acc.sumw2.copy(), acc.entries)
    return out, [r["n_raw"] for r in res.samples[sample].cutflow]


def test_step_size_and_file_split_do_not_change_results(tmp_path, dy_file, dy_sample):
    a, cf_a = _flat(run(dy_config([dy_file]), step_size=1000))
    b, cf_b = _flat(run(dy_config([dy_file]), step_size=100_000))
    c, cf_c = _flat(run(dy_config([dy_file]), step_size=333))
    half = N_DY // 3
    f1 = write_lhe(tmp_path / "p1.lhe", dy_sample.subset(slice(0, half)), idwtup=-4, xsec_pb=0.0,
                   weight_ids=("up", "down", "alt"))
    f2 = write_lhe(tmp_path / "p2.lhe", dy_sample.subset(slice(half, None)), idwtup=-4,
                   xsec_pb=0.0, weight_ids=("up", "down", "alt"))
    d, cf_d = _flat(run(dy_config([f1, f2]), step_size=500))
    assert cf_a == cf_b == cf_c == cf_d
    for other in (b, c, d):
        for name, (w, w2, n) in a.items():
            assert other[name][2] == n
            np.testing.assert_allclose(other[name][0], w, rtol=1e-12, atol=1e-16)
            np.testing.assert_allclose(other[name][1], w2, rtol=1e-12, atol=1e-18)


def test_partial_results_pickle_and_merge_in_any_order(dy_file, tmp_path, dy_sample):
    half = N_DY // 2
    files = [write_lhe(tmp_path / f"q{i}.lhe", dy_sample.subset(sl), idwtup=-4, xsec_pb=0.0,
                       weight_ids=("up", "down", "alt"))
             for i, sl in enumerate([slice(0, half), slice(half, None)])]
    plan = build_plan(load_config(dy_config(files)), step_size=400)
    plan = pickle.loads(pickle.dumps(plan))  # a plan travels to workers
    parts = [pickle.loads(pickle.dumps(process_unit(plan, u))) for u in make_units(plan)]
    ab = merge_all(parts)
    ba = merge_all(parts[::-1])
    for key, acc in ab.hists.items():
        np.testing.assert_allclose(ba.hists[key].sumw, acc.sumw, rtol=1e-12)
    assert {k: v.n_raw.tolist() for k, v in ab.cutflows.items()} == \
        {k: v.n_raw.tolist() for k, v in ba.cutflows.items()}
    assert ab.n_events() == N_DY


def test_max_events_and_outputs(tmp_path, dy_file):
    out = tmp_path / "out"
    cfg = dy_config([dy_file], output={"plot_formats": ["png"]})
    del cfg["histograms"]["lep_pt"]
    res = evtkin.run(cfg, out=out, max_events=300)
    assert res.samples["dy"].cutflow[0]["n_raw"] == 300
    assert (out / "results.json").is_file()
    assert (out / "histograms.root").is_file()
    assert (out / "cutflow" / "dy.txt").is_file()
    assert (out / "csv" / "dy" / "mll.csv").is_file()
    assert (out / "plots" / "mll.png").is_file()
    assert (out / "plots" / "pt_eta__dy.png").is_file()
    prov = json.loads((out / "provenance.json").read_text())
    assert prov["evtkin_version"] == evtkin.__version__
    import hashlib

    assert prov["inputs"][0]["sha256"] == hashlib.sha256(dy_file.read_bytes()).hexdigest()
    assert prov["inputs"][0]["size"] == dy_file.stat().st_size
    assert prov["inputs"][0]["events"] == 300
    assert prov["config"]["sha256"] == hashlib.sha256(prov["config"]["text"].encode()).hexdigest()
    from evtkin.output.tables import load_results

    back = load_results(out)
    np.testing.assert_allclose(back.samples["dy"].histograms["mll"].values,
                               res["dy"]["mll"].values(flow=True), rtol=1e-12)


def test_run_time_errors_are_config_errors(tmp_path, dy_file):
    cfg = dy_config([tmp_path / "missing.lhe"])
    with pytest.raises(ConfigError, match=r"samples\.dy\.files\[0\]: no such file"):
        run(cfg)
    cfg = dy_config([dy_file])
    cfg["histograms"] = {"bad": {"x": {"value": "leptons", "bins": 2, "range": [0, 1]}}}
    with pytest.raises(ConfigError, match="gives objects"):
        run(cfg)
    cfg["histograms"] = {"bad": {"x": {"value": "leptons[0].ptt", "bins": 2, "range": [0, 1]}}}
    with pytest.raises(ConfigError, match="did you mean 'pt'"):
        run(cfg)


# --------------------------------------------------------------------------- example configs

def _example(name: str, files: dict[str, list[Path]]) -> dict:
    data = tomllib.loads((ROOT / "configs" / name).read_text(encoding="utf-8"))
    for sample in list(data["samples"]):
        if sample in files:
            data["samples"][sample]["files"] = [str(f) for f in files[sample]]
        else:
            del data["samples"][sample]
    data.pop("output", None)
    for h in data.get("histograms", {}).values():
        if "samples" in h:
            h["samples"] = [s for s in h["samples"] if s in files]
    return data


def test_lepton_jets_example_reconstructs_w_and_top_masses(tmp_path):
    f = write_lhe(tmp_path / "tt.lhe", ttbar_lepton_jets(600, seed=3), idwtup=3, xsec_pb=830.0)
    cfg = _example("ttbar_lepton_jets.toml", {"ttbar": [f]})
    res = run(cfg)
    hs = res.samples["ttbar"].histograms
    for name, mass in (("w_had_mass", M_W), ("top_had_mass", M_T), ("top_lep_mass", M_T)):
        nh = hs[name]
        vals = nh.nominal[1:-1]
        centres = 0.5 * (nh.spec.axes[0].edges_array[1:] + nh.spec.axes[0].edges_array[:-1])
        peak = centres[np.argmax(vals)]
        width = np.diff(nh.spec.axes[0].edges_array)[0]
        # PDG 2024: m_W = 80.3692, m_t = 172.57 GeV; parton-level on-shell decays
        assert abs(peak - mass) <= width, (name, peak)
    assert res.samples["ttbar"].cutflow[-1]["n_raw"] > 0


def test_drell_yan_example_runs(tmp_path):
    f = write_lhe(tmp_path / "dy.lhe", drell_yan(600, seed=4), idwtup=3, xsec_pb=2000.0)
    cfg = _example("drell_yan.toml", {"dy": [f]})
    res = run(cfg)
    nh = res.samples["dy"].histograms["mll"]
    assert nh.entries > 0
    assert "cos_theta_cs" in res.samples["dy"].histograms


def test_a_unit_reuses_the_memory_of_its_previous_chunk(dy_file, monkeypatch):
    # process_unit lets go of a chunk (and what it computed from it) before the next one
    # is read, so the reader refills the same memory: one chunk's worth per worker, not two
    from evtkin.io import lhe

    fresh = []
    real = lhe._fresh_block

    def counting(nbytes):
        fresh.append(nbytes)
        return real(nbytes)

    monkeypatch.setattr(lhe, "_fresh_block", counting)
    monkeypatch.setattr(lhe._POOL, "blocks", [])  # no slab kept from an earlier read
    plan = build_plan(load_config(dy_config([dy_file])), step_size=200)
    (unit,) = make_units(plan, workers=1)
    res = process_unit(plan, unit, read_threads=0)
    assert res.n_events() == N_DY  # 8 chunks
    assert len(fresh) == 1, fresh
