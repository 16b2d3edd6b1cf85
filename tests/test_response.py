"""Response matrices: an LHE file joined with a detector-level ntuple by event number, checked
against an independent numpy computation; row/column sums against the truth/reco histograms."""

from __future__ import annotations

import json
from pathlib import Path

import awkward as ak
import numpy as np
import pytest
import uproot

from evtkin.config import load_config
from evtkin.errors import ConfigError, EvtkinError
from evtkin.run.pipeline import run
from run_helpers import eta, pt, ttbar_lepton_jets, write_lhe

N = 1500
XSEC = 250.0
EDGES = [25.0, 50.0, 75.0, 100.0, 150.0, 250.0]


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """An LHE file of top pairs and a toy ntuple of the same events: the charged lepton kept with
    probability 0.85, its pT smeared by 8 % (Gaussian), η and φ kept; ``event`` = LHE index."""
    folder = tmp_path_factory.mktemp("resp")
    sample = ttbar_lepton_jets(N, seed=11)
    lhe = write_lhe(folder / "tt.lhe", sample, idwtup=3, xsec_pb=XSEC)
    rng = np.random.default_rng(3)
    lep = sample.particles.p4[:, 8]
    t_pt, t_eta = pt(lep), eta(lep)
    phi = np.arctan2(lep[:, 1], lep[:, 0])
    found = rng.uniform(size=N) < 0.85
    r_pt = t_pt * (1.0 + 0.08 * rng.standard_normal(N))
    counts = found.astype(np.int64)
    cols = {"pt": r_pt[found], "eta": t_eta[found], "phi": phi[found]}
    tree = {"Lep": ak.unflatten(ak.zip(cols), counts), "weight": np.ones(N),
            "event": np.arange(N, dtype=np.int64)}
    root = folder / "tt.root"
    with uproot.recreate(root) as f:
        f.mktree("events", {"Lep": "var * {pt: float64, eta: float64, phi: float64}",
                            "weight": np.float64, "event": np.int64}).extend(tree)
    return folder, lhe, root, (t_pt, t_eta, r_pt, found)


def _config(lhe: Path, root: Path, **extra) -> dict:
    cfg = {
        "samples": {"tt": {
            "format": "root", "files": [str(root)], "truth_files": [str(lhe)],
            "cross_section_pb": XSEC,
            "input": {"weight": "weight", "event_number": "event",
                      "collections": {"leptons": {"pt": "Lep_pt", "eta": "Lep_eta",
                                                  "phi": "Lep_phi", "mass": 0.0}}},
        }},
        "objects": {"leptons": {"particles": ["light_leptons"], "from": "leptons",
                                "min_pt": 25.0, "max_abs_eta": 2.5}},
        "step": [{"name": "one lepton", "require": "count(leptons) == 1"}],
        "histograms": {"lep_pt": {"x": {"value": "leptons[0].pt", "edges": EDGES},
                                  "normalise": "raw", "response": True}},
    }
    cfg.update(extra)
    return cfg


def test_response_matrix_matches_independent_numpy(files):
    folder, lhe, root, (t_pt, t_eta, r_pt, found) = files
    res = run(_config(lhe, root, output={"formats": ["json"]}), out=folder / "out")
    resp = res.samples["tt"].responses["lep_pt"]
    # independent: unit weights, σ = XSEC → each event carries XSEC/N pb
    w = np.full(N, XSEC / N)
    t_ok = (t_pt > 25) & (np.abs(t_eta) < 2.5)
    r_ok = found & (r_pt > 25) & (np.abs(t_eta) < 2.5)
    flow = np.array([-np.inf, *EDGES, np.inf])
    both = t_ok & r_ok
    ref, _, _ = np.histogram2d(t_pt[both], r_pt[both], bins=[flow, flow], weights=w[both])
    np.testing.assert_allclose(resp.matrix, ref, rtol=1e-12, atol=1e-12)
    ref_t, _ = np.histogram(t_pt[t_ok], bins=flow, weights=w[t_ok])
    ref_r, _ = np.histogram(r_pt[r_ok], bins=flow, weights=w[r_ok])
    np.testing.assert_allclose(resp.truth, ref_t, rtol=1e-12)
    np.testing.assert_allclose(resp.reco, ref_r, rtol=1e-12)
    # the reconstructed histogram is the ordinary (raw) histogram of the run
    np.testing.assert_allclose(resp.reco, res.samples["tt"].histograms["lep_pt"].rows[0],
                               rtol=1e-12)
    # rows/columns: matched + truth-only = truth, matched + reco-only = reco, both ≥ 0
    np.testing.assert_allclose(resp.matrix.sum(axis=1) + resp.misses, resp.truth, rtol=1e-12)
    np.testing.assert_allclose(resp.matrix.sum(axis=0) + resp.fakes, resp.reco, rtol=1e-12)
    assert np.all(resp.misses >= -1e-12)
    assert np.all(resp.fakes >= -1e-12)
    # efficiency per truth bin ≈ the 85 % lepton-finding probability (binomial, ~3σ band)
    n_t = ref_t[1:-1] / (XSEC / N)
    eff = resp.efficiency
    assert np.all(np.abs(eff - 0.85) < 3 * np.sqrt(0.85 * 0.15 / n_t) + 0.05)
    pur = resp.purity
    np.testing.assert_allclose(pur, np.diagonal(ref)[1:-1] / ref_r[1:-1], rtol=1e-12)
    doc = json.loads((folder / "out" / "responses.json").read_text())
    assert doc["samples"]["tt"]["lep_pt"]["matrix"][3][3] == pytest.approx(ref[3, 3])


def test_truth_histogram_equals_the_same_config_on_the_lhe_file(files):
    _, lhe, root, _ = files
    res = run(_config(lhe, root))
    lhe_cfg = _config(lhe, root)
    lhe_cfg["samples"] = {"gen": {"files": [str(lhe)]}}
    lhe_cfg["objects"]["leptons"].pop("from")
    lhe_cfg["histograms"]["lep_pt"].pop("response")
    gen = run(lhe_cfg)
    # IDWTUP = 3 with XSECUP = σ (LHEF accord) vs the ntuple's σ override: the same event weights
    np.testing.assert_allclose(res.samples["tt"].responses["lep_pt"].truth,
                               gen.samples["gen"].histograms["lep_pt"].rows[0], rtol=1e-12)


def test_entry_range_units_join_from_their_own_event_numbers(files, tmp_path):
    """An ntuple with truth_files split into entry ranges: each unit skips the LHE events
    before its first event number, and the matrices are those of one whole-file unit."""
    _, lhe, root, _ = files
    whole = run(_config(lhe, root))
    split = run(_config(lhe, root), unit_bytes=root.stat().st_size // 3 + 1, step_size=200)
    assert split.provenance["execution"]["units"] == 3
    ra, rb = whole.samples["tt"].responses["lep_pt"], split.samples["tt"].responses["lep_pt"]
    for field in ("matrix", "truth", "reco", "misses"):
        np.testing.assert_allclose(getattr(rb, field), getattr(ra, field), rtol=1e-12,
                                   err_msg=field)


def test_truth_join_far_into_the_files_keeps_a_few_chunks(files):
    from evtkin.run.inputs.ntuple import TruthJoin

    _, lhe, _, (t_pt, *_) = files
    join = TruthJoin([str(lhe)], 50, "test")
    held: list[int] = []  # chunks held each time the join reads the next one
    chunks = join._readers
    join._readers = (c for c in chunks if not held.append(len(join._buffer)))
    numbers = np.arange(N - 120, N - 3)
    got = join.take(numbers)
    assert len(held) == N // 50  # every chunk read once
    assert max(held) <= 4  # not the 1380 events before the first one asked for
    lep = got.particles[:, 8]
    np.testing.assert_allclose(ak.to_numpy(lep.pt), t_pt[numbers], rtol=1e-12)


def test_truth_join_errors(files, tmp_path):
    _, lhe, root, _ = files
    short = tmp_path / "short.lhe"
    parts = lhe.read_text().split("<event>")  # header, then one piece per event
    short.write_text("<event>".join(parts[:101]) + "</LesHouchesEvents>\n")  # 100 events
    with pytest.raises(EvtkinError, match=r"event number .* has no generator-level event"):
        run(_config(short, root))


def test_response_config_errors():
    base = _config(Path("a.lhe"), Path("b.root"))
    two_d = json.loads(json.dumps(base))
    two_d["histograms"]["lep_pt"]["y"] = {"value": "leptons[0].eta", "bins": 2, "range": [0, 1]}
    with pytest.raises(ConfigError, match="1-D histograms only"):
        load_config(two_d)
    no_truth = json.loads(json.dumps(base))
    del no_truth["samples"]["tt"]["truth_files"]
    with pytest.raises(ConfigError, match="no sample of this histogram has truth_files"):
        load_config(no_truth)


def test_response_plot_names_the_sample_by_its_label(tmp_path):
    import matplotlib

    from evtkin.hists.response import Response
    from evtkin.output.responses import plot_responses

    n = 3
    m = np.zeros((n + 2, n + 2))
    m[1:-1, 1:-1] = [[8.0, 2.0, 0.0], [1.0, 6.0, 1.0], [0.0, 1.0, 5.0]]
    truth = m.sum(axis=1) + 1.0
    reco = m.sum(axis=0) + 0.5
    r = Response("m_tt", np.array([300.0, 450.0, 600.0, 800.0]), "m_{tt̄}", "GeV", m, m,
                 truth, truth, reco, reco)
    # SVG with text kept as text (matplotlib's svg.fonttype "none"): the words can be read back
    with matplotlib.rc_context({"svg.fonttype": "none"}):
        (path,) = plot_responses(tmp_path, {"tt_cfg": {"m_tt": r}}, formats=("svg",),
                                 labels={"tt_cfg": "Top pairs (toy)"}, corner="√s = 13 TeV",
                                 levels={"tt_cfg": ("parton level", "particle level")})
    assert path.name == "response_tt_cfg_m_tt.svg"  # the file keeps the config name
    svg = path.read_text(encoding="utf-8")
    # the corner shows the label as the 2-D plots do (plots.plot_hist2d), not the config name
    assert "Top pairs (toy), √s = 13 TeV" in svg
    assert "tt_cfg" not in svg
    # axis titles and legend entries capitalised like the other plots' ("Events", "Fraction")
    for word in ("Fraction", "Efficiency", "Purity"):
        assert f">{word}<" in svg
    assert ">fraction<" not in svg
