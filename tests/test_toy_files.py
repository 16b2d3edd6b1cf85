"""Toy sample files: cross sections read back, weight modes, determinism, ntuple, CLI."""

from __future__ import annotations

import gzip

import awkward as ak
import numpy as np
import pytest
from scipy.special import roots_legendre

import evtkin
from evtkin.cli import main
from evtkin.toy import samples
from evtkin.toy.pdfs import ToyPDF, replica_pdfs


def _read(path):
    return evtkin.lhe_info(path), ak.concatenate(list(evtkin.read_lhe(path)))


@pytest.mark.parametrize("mode", ["unweighted", "weighted", "negative"])
def test_declared_cross_section_matches_weights(tmp_path, mode):
    path = tmp_path / f"dy_{mode}.lhe.gz"
    samples.write_drellyan(path, 3000, seed=12, mode=mode, negative_fraction=0.2,
                           n_integration=100_000)
    info, ev = _read(path)
    sigma = sum(p.xsec_pb for p in info.processes)
    err = np.sqrt(sum(p.xsec_err_pb**2 for p in info.processes))
    w = ak.to_numpy(ev.weight)
    assert len(w) == 3000
    # IDWTUP meaning: hep-ph/0109068 (REFERENCES 1.4): 3 unweighted, 4 weighted, -4 signed
    assert info.weighting == {"unweighted": 3, "weighted": 4, "negative": -4}[mode]
    if mode == "unweighted":
        assert np.all(w == sigma)  # every event carries sigma: mean = sigma_tot
        assert 0 < err < 0.02 * sigma
    elif mode == "weighted":
        # IDWTUP = 4: the average weight is the cross section (here: of exactly these events)
        assert w.mean() == pytest.approx(sigma, rel=1e-9)
        for p in info.processes:
            wp = np.where(ak.to_numpy(ev.process_id) == p.process_id, w, 0.0)
            assert wp.max() == p.max_weight
            assert p.xsec_err_pb == pytest.approx(wp.std() / np.sqrt(len(w)), rel=1e-6)
    else:
        neg = (w < 0).mean()
        assert neg == pytest.approx(0.2, abs=4 * np.sqrt(0.2 * 0.8 / len(w)))
        assert len(np.unique(np.abs(w))) == 1
        assert abs(w.mean() - sigma) < 3 * err  # within the declared (stated) error
    # per-process cross sections: the process mix follows the declared sigma_p
    for p in info.processes:
        frac = (ak.to_numpy(ev.process_id) == p.process_id).mean()
        if mode != "weighted":
            assert frac == pytest.approx(p.xsec_pb / sigma, abs=4 * np.sqrt(0.25 / len(w)))


def test_integration_reproducible_across_seeds(tmp_path):
    """Two independent seeds give cross sections that agree within their errors."""
    a = samples.write_ttbar(tmp_path / "a.lhe", 10, seed=1, n_integration=100_000)
    b = samples.write_ttbar(tmp_path / "b.lhe", 10, seed=2, n_integration=100_000)
    sa, sb = (sum(p.xsec_pb for p in i.processes) for i in (a, b))
    ea, eb = (np.sqrt(sum(p.xsec_err_pb**2 for p in i.processes)) for i in (a, b))
    assert sa != sb
    assert abs(sa - sb) < 4 * np.hypot(ea, eb)


def test_ttbar_file_round_trip_and_toy_header(tmp_path):
    path = tmp_path / "tt.lhe.gz"
    info_w = samples.write_ttbar(path, 400, seed=3, n_integration=50_000)
    info, ev = _read(path)
    with gzip.open(path, "rt") as fh:
        text = fh.read(3000)
    assert "TOY DATA" in text
    assert "NOT a physics prediction" in text
    assert list(info.weight_names) == list(info_w.weight_names)
    assert len(info.weight_names) == 27  # 7 scale points + 20 replicas
    assert set(info.weight_groups) == {"scale_variation", "toy_pdf_replicas"}
    assert ak.to_numpy(ev.weights).shape == (400, 27)
    assert info.beam_energies == pytest.approx((6500.0, 6500.0))  # sqrt(s) = 13 TeV default
    # Bjorken x = E_parton / E_beam within (0, 1) (REFERENCES 1.6)
    x = ak.to_numpy(ev.particles.energy[:, :2]) / 6500.0
    assert np.all((x > 0) & (x < 1))
    # the sample mixes gg (process 1) and q qbar (process 2); gg dominates at 13 TeV
    # (common practice: ~85-90 % gg at LO)
    frac_gg = (ak.to_numpy(ev.process_id) == 1).mean()
    assert 0.7 < frac_gg < 0.95


def test_same_seed_same_bytes(tmp_path):
    a, b, c = (tmp_path / n for n in ("a.lhe.gz", "b.lhe.gz", "c.lhe.gz"))
    samples.write_ttbar(a, 300, seed=9, mode="negative", n_integration=20_000)
    samples.write_ttbar(b, 300, seed=9, mode="negative", n_integration=20_000)
    samples.write_ttbar(c, 300, seed=10, mode="negative", n_integration=20_000)
    assert a.read_bytes() == b.read_bytes()
    assert a.read_bytes() != c.read_bytes()


def test_toy_pdf_sum_rules():
    """Valence number sum rules (2 and 1) and the momentum sum rule (1), integrated numerically;
    textbook parton-model sum rules. Gauss-Legendre in u with x = u^4 (smooth at x -> 0)."""
    u, wu = roots_legendre(600)
    u, wu = (u + 1) / 2, wu / 2
    x, jac = u**4, 4 * u**3 * wu
    for pdf in (ToyPDF(), *replica_pdfs(3)):
        for mu in (20.0, 500.0):
            f = pdf.densities(x, mu)
            uv = np.sum((f[2] - f[-2]) * jac)
            dv = np.sum((f[1] - f[-1]) * jac)
            mom = np.sum(x * sum(f.values()) * jac)
            assert uv == pytest.approx(2.0, abs=2e-3)
            assert dv == pytest.approx(1.0, abs=2e-3)
            assert mom == pytest.approx(1.0, abs=1e-4)


def test_detector_ntuple(tmp_path):
    import uproot

    src = tmp_path / "tt.lhe"
    samples.write_ttbar(src, 3000, seed=21, n_integration=50_000, precision=10)
    out = tmp_path / "reco.root"
    assert samples.write_ntuple_sample(out, 0, seed=21, source=src) == 3000
    with uproot.open(out) as f:
        assert f.classname_of("events") == "TTree"  # not an RNTuple (REFERENCES 3.1)
        assert "TOY DATA" in str(f["README"])
        t = f["events"]
        assert "toy" in t.title
        a = t.arrays()
    assert set(a.fields) >= {"nJet", "Jet_pt", "Jet_btag", "Jet_flavour", "nElectron",
                             "Electron_pt", "nMuon", "Muon_charge", "MET_pt", "MET_phi",
                             "weight", "event"}  # fmt: skip
    assert np.all(ak.to_numpy(a.nJet) == ak.to_numpy(ak.num(a.Jet_pt)))
    _, ev = _read(src)
    np.testing.assert_array_equal(ak.to_numpy(a.weight), ak.to_numpy(ev.weight))
    assert ak.all(a.Jet_pt >= 25)
    assert ak.all(np.abs(a.Jet_eta) < 2.5)
    assert ak.all(a.Jet_pt[:, :-1] >= a.Jet_pt[:, 1:])  # sorted by pT
    flav = ak.to_numpy(ak.flatten(a.Jet_flavour))
    tag = ak.to_numpy(ak.flatten(a.Jet_btag))
    for code, eff in ((5, 0.70), (1, 0.01), (2, 0.01)):
        sel = flav == code
        assert abs(tag[sel].mean() - eff) < 4 * np.sqrt(eff * (1 - eff) / sel.sum()) + 1e-9
    # electrons: charge is minus the sign of the pdg id (e- = 11 has charge -1; PDG numbering)
    assert set(np.unique(ak.to_numpy(ak.flatten(a.Electron_charge)))) <= {-1, 1}
    # MET tracks the neutrinos: events without a leptonic W have smaller MET on average
    p = ev.particles
    n_nu = ak.to_numpy(ak.sum((np.abs(p.pdgid) >= 12) & (np.abs(p.pdgid) <= 16)
                              & (np.abs(p.pdgid) % 2 == 0), axis=1))  # fmt: skip
    met = ak.to_numpy(a.MET_pt)
    assert met[n_nu == 0].mean() < 0.6 * met[n_nu > 0].mean()


def test_cli_writes_sample(tmp_path, capsys):
    out = tmp_path / "cli_dy.lhe"
    rc = main(["toy", "drellyan", "-n", "50", "--seed", "4", "--mll", "80", "100",
               "--weights", "weighted", "--integration-points", "1000",
               "-o", str(out)])  # fmt: skip
    assert rc == 0
    assert "toy data" in capsys.readouterr().out
    info = evtkin.lhe_info(out)
    assert info.weighting == 4
    assert main(["toy", "ttbar", "-n", "0", "-o", str(tmp_path / "x.lhe")]) == 1
