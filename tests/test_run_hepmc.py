"""HepMC files as a run input (evtkin.run.inputs.hepmc): objects from the particle record,
histogram entries against a numpy count on read_hepmc chunks, σ from the last event's
cross-section record, the same result for every chunk size, unit split and executor."""

from __future__ import annotations

from pathlib import Path

import awkward as ak
import numpy as np
import pytest

from evtkin.config import load_config
from evtkin.errors import ConfigError
from evtkin.io.hepmc import read_hepmc
from evtkin.io.hepmc_header import hepmc_info
from evtkin.io.hepmc_write import write_hepmc
from evtkin.run.pipeline import run

SAMPLE = Path(__file__).resolve().parents[1] / "samples" / "toy_drellyan_shower.hepmc.gz"
#: the parton-level events SAMPLE was showered from (its first 100), with their process ids
LHE_SAMPLE = SAMPLE.parent / "toy_drellyan.lhe.gz"
EDGES = np.linspace(20.0, 120.0, 11)
N_EVENTS = 100


@pytest.fixture(scope="module")
def hepmc_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The shipped toy shower file, plain (byte ranges need it), with varied weights (one in
    five negative) and a running σ estimate that changes from event to event, so that the
    last event's record is the one that counts; the signal process ids of the LHE events."""
    events = ak.concatenate(list(read_hepmc(SAMPLE)))
    assert len(events) == N_EVENTS
    n = len(events)
    scale = np.linspace(0.5, 1.5, n) * np.where(np.arange(n) % 5 == 4, -1.0, 1.0)
    weights = ak.to_numpy(events["weights"]) * scale[:, None]
    xsec = np.linspace(1800.0, 1950.0, n)
    xerr = np.linspace(40.0, 4.0, n)
    events = ak.with_field(events, weights, "weights")
    events = ak.with_field(events, xsec, "xsec_pb")
    events = ak.with_field(events, xerr, "xsec_err_pb")
    events = ak.with_field(events, _lhe_process_ids(), "signal_process_id")
    path = tmp_path_factory.mktemp("hepmc") / "dy_shower.hepmc"
    write_hepmc(path, events, weight_names=hepmc_info(SAMPLE).weight_names)
    return path


def _lhe_process_ids() -> np.ndarray:
    from evtkin.io.lhe import read_lhe

    pid = np.concatenate([ak.to_numpy(c["process_id"]) for c in read_lhe(LHE_SAMPLE)])
    return pid[:N_EVENTS]


def _config(path: Path, **sample: object) -> dict[str, object]:
    return {
        "analysis": {"name": "hepmc test"},
        "samples": {"dy": {"files": [str(path)], **sample}},
        "objects": {"leptons": {"particles": ["light_leptons"], "status": 1, "min_pt": 20.0}},
        "histograms": {
            "lep_pt": {"x": {"value": "leptons.pt", "edges": EDGES.tolist()},
                       "normalise": "xsec_per_bin"},
        },
    }


def _reference(path: Path) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Straight from the reader: status-1 e/μ with pT > 20 GeV, their pT histogram (counts and
    Σw), and the nominal weights of all events."""
    counts = np.zeros(len(EDGES) - 1)
    n_fills = 0
    sumw = np.zeros(len(EDGES) - 1)
    w_all = []
    for chunk in read_hepmc(path, step_size=7):
        p = chunk["particles"]
        pt = np.hypot(p["px"], p["py"])
        keep = (p["status"] == 1) & (abs(p["pdgid"]) >= 11) & (abs(p["pdgid"]) <= 13) \
            & (abs(p["pdgid"]) != 12) & (pt > 20.0)
        w = ak.to_numpy(chunk["weight"])
        w_all.append(w)
        flat_pt = ak.to_numpy(ak.flatten(pt[keep]))
        flat_w = ak.to_numpy(ak.flatten(ak.broadcast_arrays(w, pt)[0][keep]))
        counts += np.histogram(flat_pt, bins=EDGES)[0]
        n_fills += flat_pt.size
        sumw += np.histogram(flat_pt, bins=EDGES, weights=flat_w)[0]
    return counts, sumw, np.concatenate(w_all), n_fills


def test_format_key_and_content_recognition(hepmc_file: Path) -> None:
    assert load_config(_config(hepmc_file, format="hepmc")).samples["dy"].format == "hepmc"
    # no format: the HepMC header line of the (decompressed) first file says it
    assert load_config(_config(hepmc_file)).samples["dy"].format == "hepmc"
    assert load_config(_config(SAMPLE)).samples["dy"].format == "hepmc"
    with pytest.raises(ConfigError, match=r"samples\.dy\.format.*'hepmc'"):
        load_config(_config(hepmc_file, format="hepmcc"))


def test_histogram_matches_numpy_and_is_split_invariant(hepmc_file: Path) -> None:
    counts, sumw, w_all, n_fills = _reference(hepmc_file)
    assert counts.sum() > 50  # the Drell-Yan leptons are there
    # σ: the last event's running estimate (the file writes 1950 ± 4 pb there)
    sigma, sigma_err = 1950.0, 4.0
    res = run(_config(hepmc_file), jobs=1)
    s = res.samples["dy"]
    h = res["dy"]["lep_pt"]
    assert s.xsec.sigma_pb == pytest.approx(sigma, rel=1e-12)
    assert s.xsec.sigma_err_pb == pytest.approx(sigma_err, rel=1e-12)
    # each event weight scaled by σ / Σw (docs/config.md, HepMC samples); the run's mapping
    # holds per-bin contents (evtkin.run.result.RunResult)
    np.testing.assert_allclose(h.values(), sigma * sumw / w_all.sum(), rtol=1e-10)
    acc = s.weighted["lep_pt"]
    assert acc.entries == n_fills  # every lepton is one entry (overflow included)
    np.testing.assert_array_equal(acc.counts[1:-1], counts)
    for kw in ({"step_size": 9, "unit_bytes": 200_000}, {"step_size": 13, "jobs": 2}):
        split = run(_config(hepmc_file), **{"jobs": 1, **kw})  # type: ignore[arg-type]
        acc_s = split.samples["dy"].weighted["lep_pt"]
        assert acc_s.entries == n_fills
        np.testing.assert_array_equal(acc_s.counts, acc.counts)
        hs = split["dy"]["lep_pt"]
        np.testing.assert_allclose(hs.values(), h.values(), rtol=1e-12)
        np.testing.assert_allclose(hs.variances(), h.variances(), rtol=1e-12)
        assert split.samples["dy"].xsec.sigma_pb == pytest.approx(sigma, rel=1e-12)


def test_override_and_missing_record(tmp_path: Path, hepmc_file: Path) -> None:
    res = run(_config(hepmc_file, cross_section_pb=1000.0), jobs=1)
    assert res.samples["dy"].xsec.sigma_pb == pytest.approx(1000.0)
    events = ak.concatenate(list(read_hepmc(hepmc_file)))[:20]
    bare = tmp_path / "bare.hepmc"
    write_hepmc(bare, events[[f for f in ak.fields(events)
                              if f not in ("xsec_pb", "xsec_err_pb", "named_weights")]],
                weight_names=hepmc_info(hepmc_file).weight_names)
    with pytest.raises(ConfigError, match=r"bare\.hepmc: no event carries a cross-section"):
        run(_config(bare), jobs=1)
    res = run(_config(bare, cross_section_pb=500.0), jobs=1)
    assert res.samples["dy"].xsec.sigma_pb == pytest.approx(500.0)


def test_provenance_describes_the_file(hepmc_file: Path) -> None:
    res = run(_config(hepmc_file), jobs=1, unit_bytes=300_000)
    (record,) = [r for r in res.provenance["inputs"] if str(r.get("path", "")).endswith(
        "dy_shower.hepmc")]
    assert record["format"] == "hepmc"
    assert record["hepmc_form"] == "Asciiv3"
    assert record["last_event_xsec_pb"] == pytest.approx(1950.0)


def test_process_id_selects_the_signal_process(hepmc_file: Path) -> None:
    # the toy Drell-Yan processes are ee (11) and μμ (13), both in the file; in expressions
    # process_id is the HepMC event's signal process id, while σ stays the file's
    pid = _lhe_process_ids()
    assert set(pid.tolist()) == {11, 13}
    weights = np.concatenate([ak.to_numpy(c["weight"]) for c in read_hepmc(hepmc_file)])
    cfg = _config(hepmc_file)
    cfg["step"] = [{"name": "mumu", "require": "process_id == 13"}]
    for kw in ({"jobs": 1}, {"jobs": 1, "unit_bytes": 200_000, "step_size": 11}):
        res = run(cfg, **kw)  # type: ignore[arg-type]
        s = res.samples["dy"]
        rows = {r["step"]: r for r in s.cutflow}
        assert rows["mumu"]["n_raw"] == int((pid == 13).sum())
        # the cutflow's Σw is normalised as the histograms are: σ · Σ_sel w / Σ w
        want = 1950.0 * weights[pid == 13].sum() / weights.sum()
        assert rows["mumu"]["sum_w"] == pytest.approx(want, rel=1e-12)
        assert s.xsec.sigma_pb == pytest.approx(1950.0, rel=1e-12)
