"""ROOT ntuple samples through the run pipeline: the detector-level lepton+jets config on the
shipped toy ntuple (mass peaks, cutflow against an independent uproot/numpy computation, branches
and bytes read), pT/η/φ/m vs px/py/pz/E mappings, entry-range units, config and input errors."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
import uproot

from evtkin.config import load_config
from evtkin.errors import ConfigError, EvtkinError
from evtkin.run.partial import merge_all
from evtkin.run.pipeline import finalise, run
from evtkin.run.plan import build_plan
from evtkin.run.units import WorkUnit, process_unit

ROOT = Path(__file__).resolve().parents[1]
CONFIG = ROOT / "configs" / "ttbar_reco.toml"
NTUPLE = ROOT / "samples" / "toy_ttbar_reco.root"

# PDG 2024 (Phys. Rev. D 110, 030001): m_W = 80.3692 GeV, m_t = 172.57 GeV
M_W, M_T = 80.3692, 172.57
# PDG 2024: m_e = 0.51099895 MeV, m_μ = 105.6583755 MeV (from memory)
M_E, M_MU = 0.00051099895, 0.1056583755


def _fast_config(folder: Path) -> Path:
    """configs/ttbar_reco.toml with the sample path made absolute and no plots (slow to draw)."""
    text = CONFIG.read_text().replace('"../samples/toy_ttbar_reco.root"', f'"{NTUPLE}"')
    text = text.replace('formats = ["root", "json", "csv", "cutflow", "plots"]',
                        'formats = ["root", "json", "cutflow"]')
    path = folder / "ttbar_reco.toml"
    path.write_text(text)
    return path


@pytest.fixture(scope="module")
def reco_run(tmp_path_factory):
    folder = tmp_path_factory.mktemp("reco")
    out = folder / "out"
    return run(_fast_config(folder), out=out), out


def _peak(h):
    """Iterated truncated mean (±1 RMS) of a peaked histogram and the truncated RMS."""
    c, v = h.axes[0].centers, h.values()
    mu = c[np.argmax(v)]
    s = 0.0
    for _ in range(20):
        s = np.sqrt(np.sum(v * (c - mu) ** 2) / np.sum(v))
        sel = np.abs(c - mu) < s
        mu = np.sum(v[sel] * c[sel]) / np.sum(v[sel])
    return mu, s


def test_w_and_top_peaks_at_pdg_masses_within_the_toy_resolution(reco_run):
    res, _ = reco_run
    # the toy's jet energy resolution (samples/README.md): σ_E/E = 100 %/√E ⊕ 5 %, at the median
    # jet energy of the file; a mass of two (three) jets then has σ_m/m ≈ r/√2 (r/√3)
    # (error propagation, textbook)
    with uproot.open(NTUPLE) as f:
        a = f["events"].arrays(["Jet_pt", "Jet_eta", "Jet_mass"], library="np")
    pt, eta, m = (np.concatenate(a[k]).astype(np.float64) for k in ("Jet_pt", "Jet_eta",
                                                                  "Jet_mass"))
    e = np.median(np.sqrt((pt * np.cosh(eta)) ** 2 + m * m))
    r = np.hypot(1.0 / np.sqrt(e), 0.05)
    expected = {"w_had_mass": (M_W, M_W * r / np.sqrt(2)),
                "top_had_mass": (M_T, M_T * r / np.sqrt(3)),
                "top_lep_mass": (M_T, M_T * r / np.sqrt(3))}
    for name, (mass, sigma) in expected.items():
        mu, width = _peak(res["ttbar_reco"][name])
        assert abs(mu - mass) < 0.5 * sigma, (name, mu, mass, sigma)
        # the core width is of the size the toy smearing implies (not zero, not washed out)
        assert 0.5 * sigma < width < 2.5 * sigma, (name, width, sigma)


def _independent_cutflow():
    """Counts and Σw per step of configs/ttbar_reco.toml from plain uproot/numpy arrays."""
    names = ["Electron_pt", "Electron_eta", "Electron_phi", "Muon_pt", "Muon_eta", "Muon_phi",
             "Jet_pt", "Jet_eta", "Jet_phi", "Jet_btag", "weight"]
    with uproot.open(NTUPLE) as f:
        a = f["events"].arrays(names, library="np")
    n = len(a["weight"])
    w = a["weight"]

    def flat(prefix, fields):
        counts = np.array([len(x) for x in a[f"{prefix}_pt"]])
        cols = {k: np.concatenate(a[f"{prefix}_{k}"]).astype(np.float64) if counts.sum()
                else np.zeros(0) for k in fields}
        return np.repeat(np.arange(n), counts), cols

    # leptons: electrons and muons with pT > 25 GeV, |η| < 2.5
    le_ev, le = flat("Electron", ["pt", "eta", "phi"])
    lm_ev, lm = flat("Muon", ["pt", "eta", "phi"])
    l_ev = np.concatenate([le_ev, lm_ev])
    lcol = {k: np.concatenate([le[k], lm[k]]) for k in ("pt", "eta", "phi")}
    lkeep = (lcol["pt"] > 25) & (np.abs(lcol["eta"]) < 2.5)
    l_ev = l_ev[lkeep]
    lcol = {k: v[lkeep] for k, v in lcol.items()}
    n_lep = np.bincount(l_ev, minlength=n)
    # jets: pT > 25 GeV, |η| < 2.5, none within ΔR < 0.4 of a selected lepton
    j_ev, j = flat("Jet", ["pt", "eta", "phi"])
    btag = np.concatenate(a["Jet_btag"]).astype(bool)
    jkeep = (j["pt"] > 25) & (np.abs(j["eta"]) < 2.5)
    near = np.zeros(len(j_ev), bool)
    order = np.argsort(l_ev, kind="stable")
    starts = np.searchsorted(l_ev[order], np.arange(n))
    for k in range(int(n_lep.max()) if n_lep.size else 0):  # loop over lepton slots, not events
        has = n_lep[j_ev] > k
        li = order[np.minimum(starts[j_ev] + k, len(order) - 1)]
        dphi = np.abs(j["phi"] - lcol["phi"][li])
        dphi = np.where(dphi > np.pi, 2 * np.pi - dphi, dphi)
        dr2 = (j["eta"] - lcol["eta"][li]) ** 2 + dphi**2
        near |= has & (dr2 < 0.16)
    good = jkeep & ~near
    n_jet = np.bincount(j_ev[good], minlength=n)
    n_b = np.bincount(j_ev[good & btag], minlength=n)
    steps = [np.ones(n, bool)]
    steps.append(steps[-1] & (n_lep == 1))
    steps.append(steps[-1] & (n_jet >= 4))
    steps.append(steps[-1] & (n_b >= 2))
    return [(int(s.sum()), float(w[s].sum()), float(w.mean())) for s in steps]


def test_cutflow_matches_an_independent_uproot_numpy_computation(reco_run):
    res, _ = reco_run
    cf = res.samples["ttbar_reco"].cutflow
    ref = _independent_cutflow()
    for row, (count, sum_w, _) in zip(cf, ref, strict=False):
        assert row["n_raw"] == count, row["step"]
        # weights_give = "mean": σ = Σw/N, so every event carries w/N pb
        assert row["sum_w"] == pytest.approx(sum_w / ref[0][0], rel=1e-12)
    assert cf[0]["sum_w"] == pytest.approx(ref[0][2], rel=1e-12)  # σ = mean weight
    # the last step (χ² reconstruction succeeded) keeps a subset of the b-tag step
    assert 0 < cf[4]["n_raw"] <= cf[3]["n_raw"]


def test_only_the_branches_the_config_uses_are_read(reco_run):
    _, out = reco_run
    prov = json.loads((out / "provenance.json").read_text())
    (inp,) = prov["inputs"]
    read = set(inp["branches_read"])
    assert {"Jet_pt", "Jet_btag", "Muon_phi", "MET_pt", "weight"} <= read
    # not used by the config: the jet flavour (truth), lepton charges, the event number
    assert not read & {"Jet_flavour", "Electron_charge", "Muon_charge", "event"}
    assert 0 < inp["bytes_read"] < inp["size"]
    assert inp["tree"] == "events"
    assert inp["entries_in_file"] == 20000
    assert (out / "histograms.root").is_file()


# --------------------------------------------------------------------------- two mappings

def _cartesian_copy(path: Path, n: int) -> None:
    """The first ``n`` toy events with both coordinate systems (float64), written by uproot."""
    with uproot.open(NTUPLE) as f:
        a = f["events"].arrays(["Jet_pt", "Jet_eta", "Jet_phi", "Jet_mass", "Jet_btag",
                                "Muon_pt", "Muon_eta", "Muon_phi", "Electron_pt",
                                "Electron_eta", "Electron_phi", "MET_pt", "MET_phi", "weight"],
                               entry_stop=n)
    import awkward as ak

    def both(prefix, mass):
        pt, eta, phi = (ak.values_astype(a[f"{prefix}_{k}"], np.float64)
                        for k in ("pt", "eta", "phi"))
        m = ak.values_astype(a[f"{prefix}_mass"], np.float64) if mass is None else pt * 0 + mass
        px, py, pz = pt * np.cos(phi), pt * np.sin(phi), pt * np.sinh(eta)
        e = np.sqrt(px * px + py * py + pz * pz + m * m)
        return {"pt": pt, "eta": eta, "phi": phi, "m": m, "px": px, "py": py, "pz": pz, "e": e}

    out = {}
    for prefix, mass in (("Jet", None), ("Muon", M_MU), ("Electron", M_E)):
        rec = both(prefix, mass)
        if prefix == "Jet":
            rec["btag"] = a["Jet_btag"]
        out[prefix] = ak.zip(rec)
    met, mphi = (np.asarray(a[k], np.float64) for k in ("MET_pt", "MET_phi"))
    out.update(MET_pt=met, MET_phi=mphi, MET_px=met * np.cos(mphi), MET_py=met * np.sin(mphi),
               weight=np.asarray(a["weight"]))
    types = {k: (str(v.type.content) if isinstance(v, ak.Array) else v.dtype)
             for k, v in out.items()}
    with uproot.recreate(path) as f:
        f.mktree("events", types).extend(out)  # a TTree (not the RNTuple f[name] = ... makes)


def _mapping_config(path: Path, system: str) -> dict:
    cfg = load_config(CONFIG)
    import tomllib

    data = tomllib.loads(cfg.text)
    sample = data["samples"]["ttbar_reco"]
    sample["files"] = [str(path)]
    coll = sample["input"]["collections"]
    for name, prefix in (("jets", "Jet"), ("electrons", "Electron"), ("muons", "Muon")):
        c = {"fields": {"btag": "Jet_btag"}} if name == "jets" else {}
        if system == "cartesian":
            c.update({k: f"{prefix}_{k}" for k in ("px", "py", "pz")}, energy=f"{prefix}_e")
        else:
            c.update({k: f"{prefix}_{k}" for k in ("pt", "eta", "phi")}, mass=f"{prefix}_m")
        coll[name] = c
    sample["input"]["vectors"]["met"] = (
        {"px": "MET_px", "py": "MET_py"} if system == "cartesian"
        else {"pt": "MET_pt", "phi": "MET_phi"})
    del sample["input"]["event_number"]
    data.pop("output")  # nothing written
    return data


def test_pt_eta_phi_m_and_px_py_pz_e_mappings_give_identical_results(tmp_path):
    path = tmp_path / "both.root"
    _cartesian_copy(path, 6000)
    res = {s: run(_mapping_config(path, s)) for s in ("ptetaphim", "cartesian")}
    a, b = (res[s].samples["ttbar_reco"] for s in ("ptetaphim", "cartesian"))
    assert [r["n_raw"] for r in a.cutflow] == [r["n_raw"] for r in b.cutflow]
    assert a.cutflow[-1]["n_raw"] > 100
    for name in a.histograms:
        ha, hb = a.histograms[name], b.histograms[name]
        assert ha.entries == hb.entries, name
        # same events and objects; values agree to floating-point rounding of the conversion
        np.testing.assert_allclose(ha.values, hb.values, rtol=1e-9, atol=1e-12, err_msg=name)


# --------------------------------------------------------------------------- work units

def test_entry_range_units_merge_to_the_whole_file_result():
    plan = build_plan(load_config(CONFIG), step_size=5000)
    whole = process_unit(plan, WorkUnit("ttbar_reco", 0, str(NTUPLE), format="root"))
    parts = [process_unit(plan, WorkUnit("ttbar_reco", 0, str(NTUPLE), entry_range=r,
                                         part=k, n_parts=3, format="root"))
             for k, r in enumerate([(0, 7001), (7001, 13000), (13000, 20000)])]
    merged = merge_all(parts)
    a, b = finalise(plan, whole)["ttbar_reco"], finalise(plan, merged)["ttbar_reco"]
    assert [r["n_raw"] for r in a.cutflow] == [r["n_raw"] for r in b.cutflow]
    for name in a.histograms:
        np.testing.assert_allclose(a.histograms[name].rows, b.histograms[name].rows,
                                   rtol=1e-12, atol=1e-15)
    rec = merged.files[("ttbar_reco", 0)]
    assert rec.n_events == 20000
    assert rec.sha256 is not None
    assert rec.info.entries_read == 20000
    assert rec.info.bytes_read > whole.files[("ttbar_reco", 0)].info.bytes_read * 0.9


# --------------------------------------------------------------------------- errors

def _text(**replace: str) -> str:
    text = CONFIG.read_text()
    for old, new in replace.items():
        assert old in text
        text = text.replace(old, new, 1)
    return text


@pytest.mark.parametrize(("old", "new", "expect"), [
    ('[objects.jets]\nfrom = "jets"', '[objects.jets]\nfrom = "jest"',
     "objects.jets.from: 'jest' is not a defined collection of samples.ttbar_reco.input"),
    ('[objects.jets]\nfrom = "jets"', '[objects.jets]\nparticles = ["jets"]',
     "is a ROOT ntuple: give from ="),
    ('[missing_pt]\nname = "met"\nfrom = "met"', '[missing_pt]\nname = "met"',
     "missing_pt: sample 'ttbar_reco' is a ROOT ntuple"),
    ('require = "btag == 1"', 'require = "btagg == 1"', "unknown name 'btagg'"),
    ('pt = "Jet_pt"', 'pt = "Jet_pt"\npx = "Jet_px"', "mixes both systems"),
    ('weights_give = "mean"', 'weights_give = "average"', "expected one of 'mean', 'sum'"),
])
def test_config_errors_name_the_key_and_line(tmp_path, old, new, expect):
    cfg = tmp_path / "c.toml"
    cfg.write_text(_text(**{old: new}))
    with pytest.raises(ConfigError, match=r"c\.toml:[0-9]+: ") as err:
        load_config(cfg)
    assert expect in str(err.value)


def test_missing_branch_error_names_file_tree_and_branch(tmp_path):
    shutil.copy(NTUPLE, tmp_path / "toy.root")
    cfg = tmp_path / "c.toml"
    text = _text(**{'mass = "Jet_mass"': 'mass = "Jet_m"',
                    '"../samples/toy_ttbar_reco.root"': '"toy.root"'})
    cfg.write_text(text.replace('directory = "../demo-output/ttbar_reco"\n', ""))
    # the executor may wrap the reader's NtupleError into a per-unit error: check the text
    with pytest.raises(EvtkinError) as err:
        run(cfg)
    msg = str(err.value)
    for part in ("toy.root", "'events'", "'Jet_m'"):
        assert part in msg
