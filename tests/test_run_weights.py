"""Event weights: a weight expression per analysis or sample multiplies the generator weight
(histograms, bands, cutflows; σ from the generator weights alone); binned scale-factor tables;
mapped ntuple scalars in expressions; the raw entry count per bin beside Σw and Σw²."""

from __future__ import annotations

from pathlib import Path

import awkward as ak
import numpy as np
import pytest

from evtkin.errors import ConfigError
from evtkin.run.pipeline import run
from ntuple_events import config, events, write
from test_ntuple_helpers import write_tree


@pytest.fixture(scope="module")
def ntuple(tmp_path_factory):  # type: ignore[no-untyped-def]
    d = tmp_path_factory.mktemp("weights")
    return write(d / "s.root", events(1500))


def test_a_constant_weight_scales_every_histogram(ntuple) -> None:  # type: ignore[no-untyped-def]
    plain = run(config([ntuple]))
    scaled = run(config([ntuple], analysis={"weight": "0.7"}))
    both = run(config([ntuple], analysis={"weight": "0.5"},
                      samples={"s": {**config([ntuple])["samples"]["s"], "weight": "4"}}))
    for h in ("ht", "jet_pt", "n_jets"):
        a, b, c = plain["s"][h], scaled["s"][h], both["s"][h]
        assert a.values(flow=True).sum() > 0
        np.testing.assert_allclose(b.values(flow=True), 0.7 * a.values(flow=True), rtol=1e-13)
        np.testing.assert_allclose(b.variances(flow=True), 0.49 * a.variances(flow=True),
                                   rtol=1e-13)
        np.testing.assert_allclose(c.values(flow=True), 2.0 * a.values(flow=True), rtol=1e-13)
    # σ comes from the generator weights: unchanged
    assert scaled.samples["s"].xsec.sigma_pb == plain.samples["s"].xsec.sigma_pb
    for r0, r1 in zip(plain.samples["s"].cutflow, scaled.samples["s"].cutflow, strict=True):
        assert r1["n_raw"] == r0["n_raw"]
        assert r1["sum_w"] == pytest.approx(0.7 * r0["sum_w"], rel=1e-13)


SF_TABLE = """
format = "evtkin-table"
axes = [{ name = "pt", edges = [20.0, 30.0, 50.0] },
        { name = "abs_eta", edges = [0.0, 1.2, 2.4] }]
values = [[0.9, 0.8], [0.95, 0.85]]
"""


def test_a_binned_scale_factor_table_reproduces_a_hand_calculation(tmp_path: Path) -> None:
    mu = ak.Array([
        [{"pt": 25.0, "eta": 0.5, "phi": 0.0}, {"pt": 40.0, "eta": 1.5, "phi": 1.0}],
        [{"pt": 60.0, "eta": 0.1, "phi": 0.0}],
        [],
        [{"pt": 35.0, "eta": -2.0, "phi": 2.0}, {"pt": 22.0, "eta": 2.3, "phi": -1.0}],
    ])
    path = write_tree(tmp_path / "mu.root",
                      {"Mu": "var * {pt: float64, eta: float64, phi: float64}", "w": "float64"},
                      [{"Mu": mu, "w": np.array([1.0, 2.0, 0.5, 1.5])}])
    (tmp_path / "sf.toml").write_text(SF_TABLE)
    cfg = {"samples": {"m": {"format": "root", "files": [str(path)], "weights_give": "sum",
                             "input": {"weight": "w", "collections": {"muons": {
                                 "pt": "Mu_pt", "eta": "Mu_eta", "phi": "Mu_phi",
                                 "mass": 0.1056583755}}},  # PDG 2024: m_μ
                             "weight": "prod(lookup(sf, mu.pt, abs(mu.eta)))"}},
           "tables": {"sf": str(tmp_path / "sf.toml")},
           "objects": {"mu": {"from": "muons"}},
           "histograms": {"n": {"x": {"value": "count(mu)", "bins": 3, "range": [-0.5, 2.5]},
                                "normalise": "raw"}}}
    h = run(cfg)["m"]["n"]
    # by hand: event 0: 0.9 (25 GeV, |η| 0.5) × 0.85 (40 GeV, |η| 1.5) = 0.765, weight 1;
    # event 1: 60 GeV is above the last edge, so the nearest bin: 0.95, weight 2 → 1.9;
    # event 2: no muon, the empty product is 1, weight 0.5; event 3: 0.85 × 0.8 = 0.68,
    # weight 1.5 → 1.02. Bins of count(mu): 0 → 0.5; 1 → 1.9; 2 → 0.765 + 1.02
    np.testing.assert_allclose(h.values(), [0.5, 1.9, 0.765 + 1.02], rtol=1e-14)
    np.testing.assert_allclose(h.variances(), [0.25, 3.61, 0.765**2 + 1.02**2], rtol=1e-14)


def test_ntuple_scalars_work_in_expressions_and_histograms(ntuple) -> None:  # type: ignore[no-untyped-def]
    import uproot

    cfg = config([ntuple], step=[{"name": "quiet", "require": "n_vertices < 30"}],
                 histograms={"npv": {"x": {"value": "n_vertices", "bins": 60,
                                           "range": [0.5, 60.5]}, "normalise": "raw"}})
    res = run(cfg)
    npv = uproot.open(ntuple)["events"]["nPV"].array(library="np")
    w = uproot.open(ntuple)["events"]["w"].array(library="np")
    sel = npv < 30
    want = np.bincount(npv[sel], weights=w[sel], minlength=61)[1:61]
    np.testing.assert_allclose(res["s"]["npv"].values(), want, rtol=1e-12)
    assert res.samples["s"].cutflow[1]["n_raw"] == int(sel.sum())


def test_bad_weight_expressions_name_the_line(tmp_path: Path, ntuple) -> None:  # type: ignore[no-untyped-def]
    cfg = tmp_path / "c.toml"
    cfg.write_text(f'[analysis]\nweight = "jets.pt * 2"\n\n[samples.s]\nformat = "root"\n'
                   f'files = ["{ntuple}"]\nweights_give = "sum"\n'
                   '[samples.s.input.collections.jets]\npt = "Jet_pt"\neta = "Jet_eta"\n'
                   'phi = "Jet_phi"\nmass = "Jet_mass"\n\n[objects.jets]\nfrom = "jets"\n\n'
                   '[histograms.n]\nx = { value = "count(jets)", bins = 3, range = [0, 3] }\n')
    with pytest.raises(ConfigError, match=r"c\.toml:2: analysis\.weight: .*one number per event"):
        run(cfg)


def test_every_histogram_counts_its_raw_entries_per_bin(ntuple, tmp_path) -> None:  # type: ignore[no-untyped-def]
    from evtkin.output.tables import load_results

    res = run(config([ntuple], analysis={"weight": "0.3"}, output={"formats": ["json", "root"]}),
              out=tmp_path / "out")
    h = load_results(tmp_path / "out").samples["s"].histograms["n_jets"]
    nominal = res["s"]["n_jets"]
    assert h.counts is not None
    assert int(h.counts.sum()) == h.entries == res.samples["s"].cutflow[-1]["n_raw"]
    # every count is a whole number of fills, whatever the weights
    assert np.all((h.counts > 0) == (nominal.values(flow=True) != 0))
    from evtkin.output.rootfile import read_root

    root = read_root(tmp_path / "out" / "histograms.root")["s__n_jets__entries"]
    assert np.array_equal(root["values"], h.counts)
