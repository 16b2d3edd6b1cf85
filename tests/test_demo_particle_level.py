"""The demo's particle-level analysis (configs/ttbar_particle_level.toml on the toy shower
sample): the stable particles balance the beams, the reconstructed W and top masses peak at
the PDG values within the spread of the particle-level objects, the HepMC events pair with
their LHE partners, and the run writes particle ↔ parton response matrices."""

from __future__ import annotations

import json
from pathlib import Path

import awkward as ak
import numpy as np
import pytest

from evtkin.config import load_config
from evtkin.io.hepmc import read_hepmc
from evtkin.io.lhe import read_lhe
from evtkin.io.lhe_header import lhe_info
from evtkin.run.plan import analyse_chunk, build_plan

REPO = Path(__file__).resolve().parents[1]
CONFIG = REPO / "configs" / "ttbar_particle_level.toml"
SHOWER = REPO / "samples" / "toy_ttbar_shower.hepmc.gz"
LHE = REPO / "samples" / "toy_ttbar.lhe.gz"

# PDG 2024 (S. Navas et al., Phys. Rev. D 110, 030001): m_t = 172.57 GeV, Γ_t = 1.42 GeV,
# m_W = 80.369 GeV, Γ_W = 2.085 GeV
M_TOP, G_TOP = 172.57, 1.42
M_W, G_W = 80.369, 2.085


@pytest.fixture(scope="module")
def shower() -> ak.Array:
    return next(iter(read_hepmc(SHOWER)))


@pytest.fixture(scope="module")
def analysed(shower: ak.Array) -> tuple[object, list[np.ndarray]]:
    plan = build_plan(load_config(CONFIG))
    return analyse_chunk(plan, shower)


def test_stable_particles_balance_the_beams(shower: ak.Array) -> None:
    """The toy conserves four-momentum at every vertex, so in every event the stable particles
    (status 1) add up to the two beam protons (status 4), remnants included; the file holds 8
    significant digits, so each component may be off by its rounding, 5e-8 relative."""
    parts = shower["particles"]
    stable = parts[parts.status == 1]
    beams = parts[parts.status == 4]
    assert ak.all(ak.num(beams) == 2)
    # LHEF <init>: EBMUP1 = EBMUP2 = 6500 GeV, the beams the toy shower starts from
    e_beam = lhe_info(LHE).beam_energies
    assert np.allclose(ak.to_numpy(ak.sum(beams.energy, axis=1)), sum(e_beam), rtol=1e-7)
    for f in ("px", "py", "pz", "energy"):
        diff = ak.to_numpy(ak.sum(stable[f], axis=1) - ak.sum(beams[f], axis=1))
        scale = ak.to_numpy(ak.sum(abs(stable[f]), axis=1) + ak.sum(abs(beams[f]), axis=1))
        rounding = 5e-8 * scale + 1e-9
        assert np.all(np.abs(diff) <= 2 * rounding), f
    # and the transverse balance at the object level: visible + invisible pT = 0
    invisible = np.isin(np.abs(ak.to_numpy(ak.flatten(stable.pdgid))), (12, 14, 16))
    counts = ak.to_numpy(ak.num(stable))
    vis_px = ak.sum(ak.unflatten(ak.flatten(stable.px)[~invisible], ak.to_numpy(
        ak.sum(ak.unflatten(~invisible, counts), axis=1))), axis=1)
    inv_px = ak.sum(ak.unflatten(ak.flatten(stable.px)[invisible], ak.to_numpy(
        ak.sum(ak.unflatten(invisible, counts), axis=1))), axis=1)
    assert np.allclose(ak.to_numpy(vis_px), -ak.to_numpy(inv_px), atol=1e-3)


def _masses(view: object, mask: np.ndarray, name: str) -> np.ndarray:
    tt = view.resolve("tt")  # type: ignore[attr-defined]
    return np.asarray(ak.to_numpy(tt[name].mass[mask]), dtype=np.float64)


@pytest.mark.parametrize(("name", "pdg"), [("w_had", M_W), ("top_had", M_TOP),
                                           ("top_lep", M_TOP)])
def test_mass_peaks_at_particle_level(analysed: tuple[object, list[np.ndarray]], name: str,
                                      pdg: float) -> None:
    """Particle-level jets lose the neutrinos of B and charm decays and the radiation out of
    the cone, so the peaks are broader than the Breit–Wigner widths and lie a little low: the
    median of the selected events lies within the spread (half the 16–84 % range) of the PDG
    mass, and that spread is that of jets, not of a flat background."""
    view, masks = analysed
    m = _masses(view, masks[-1], name)
    assert m.size >= 10
    lo, med, hi = np.percentile(m, [16, 50, 84])
    spread = 0.5 * (hi - lo)
    assert 1.0 < spread < 15.0
    assert abs(med - pdg) < spread
    assert np.mean(np.abs(m - pdg) < 25.0) > 0.75


@pytest.mark.parametrize(("name", "pdg", "width"), [("w_had", M_W, G_W),
                                                    ("top_had", M_TOP, G_TOP)])
def test_the_parton_level_reading_peaks_within_the_widths(name: str, pdg: float,
                                                          width: float) -> None:
    """The same config on the LHE partner events (its parton-level reading): jets from the
    decay partons, so the hadronic peaks sit at the PDG masses within the Breit–Wigner widths
    (the quarks are massless or light; radiation is not yet there)."""
    plan = build_plan(load_config(CONFIG))
    lhe = next(iter(read_lhe(LHE, step_size=250)))
    view, masks = analyse_chunk(plan, lhe)
    m = _masses(view, masks[-1], name)
    assert m.size >= 10
    assert abs(np.median(m) - pdg) < width


def test_hepmc_events_pair_with_their_lhe_events(tmp_path: Path) -> None:
    """truth_files: HepMC event N is LHE event N; the toy shower copies the LHE top quarks
    into the record, so the paired events hold the same tops (to the files' 8 digits)."""
    from evtkin.run.inputs import input_source
    from evtkin.run.workunit import WorkUnit

    plan = build_plan(load_config(CONFIG), step_size=70)
    src = input_source("hepmc")
    unit = WorkUnit("ttbar", 0, str(SHOWER), format="hepmc")
    reading = src.open(plan, unit, with_truth=True)
    n = 0
    for chunk in reading.chunks():
        lhe = reading.truth(chunk)
        assert len(lhe) == len(chunk)
        for level in (chunk, lhe):
            tops = level.particles[level.particles.pdgid == 6]
            assert ak.all(ak.num(tops) == 1)
        h = chunk.particles[chunk.particles.pdgid == 6][:, 0]
        t = lhe.particles[lhe.particles.pdgid == 6][:, 0]
        for f in ("px", "py", "pz", "energy"):
            assert np.allclose(ak.to_numpy(h[f]), ak.to_numpy(t[f]), rtol=1e-7, atol=1e-5)
        n += len(chunk)
    reading.close()
    assert n == 250


def test_the_run_writes_particle_parton_responses(tmp_path: Path) -> None:
    from evtkin.run.pipeline import run

    out = tmp_path / "plevel"
    run(CONFIG, out=out)
    doc = json.loads((out / "responses.json").read_text())
    resp = doc["samples"]["ttbar"]
    assert set(resp) == {"m_tt_coarse", "top_pt_coarse"}
    for name in ("m_tt_coarse", "top_pt_coarse"):
        r = resp[name]
        matrix = np.array(r["matrix"], dtype=float)
        truth = np.array(r["truth"], dtype=float)
        reco = np.array(r["reco"], dtype=float)
        # every event in the matrix passed at both levels: rows and columns at most the totals
        assert np.all(matrix.sum(axis=1) <= truth + 1e-9)
        assert np.all(matrix.sum(axis=0) <= reco + 1e-9)
        assert matrix.sum() > 0
        # the same events at two levels: most of the matrix is near its diagonal
        idx = np.arange(len(truth))
        near = np.abs(idx[:, None] - idx[None, :]) <= 1
        assert matrix[near].sum() > 0.7 * matrix.sum()
        assert (out / "plots" / f"response_ttbar_{name}.png").stat().st_size > 10_000


def test_byte_range_units_with_truth_files_give_the_whole_file_responses(tmp_path: Path) -> None:
    """A plain HepMC file with truth_files is split into byte-range units; each unit joins its
    events with their LHE partners from its own first event number on, so the histograms and
    response matrices are those of one whole-file unit (to the summation order)."""
    import gzip

    from evtkin.run.pipeline import run

    plain = tmp_path / "shower.hepmc"
    plain.write_bytes(gzip.decompress(SHOWER.read_bytes()))
    text = CONFIG.read_text(encoding="utf-8")
    for old, new in (('"../samples/toy_ttbar_shower.hepmc.gz"', json.dumps(str(plain))),
                     ('"../samples/toy_ttbar.lhe.gz"', json.dumps(str(LHE))),
                     ('formats = ["root", "json", "csv", "cutflow", "plots"]',
                      'formats = ["json"]')):
        assert old in text
        text = text.replace(old, new)
    cfg = tmp_path / "split.toml"
    cfg.write_text(text, encoding="utf-8")
    whole = run(cfg, out=tmp_path / "whole", step_size=40)
    split = run(cfg, out=tmp_path / "split", step_size=40,
                unit_bytes=plain.stat().st_size // 3 + 1)
    assert whole.provenance["execution"]["units"] == 1
    assert split.provenance["execution"]["units"] == 3
    a, b = whole.samples["ttbar"], split.samples["ttbar"]
    assert [r["n_raw"] for r in a.cutflow] == [r["n_raw"] for r in b.cutflow]
    np.testing.assert_allclose([r["sum_w"] for r in b.cutflow], [r["sum_w"] for r in a.cutflow],
                               rtol=1e-12)
    assert set(a.responses) == set(b.responses) == {"m_tt_coarse", "top_pt_coarse"}
    for name, ra in a.responses.items():
        rb = b.responses[name]
        for field in ("matrix", "truth", "reco", "misses"):
            np.testing.assert_allclose(getattr(rb, field), getattr(ra, field),
                                       rtol=1e-12, atol=1e-300, err_msg=f"{name}.{field}")
        assert np.sum(ra.matrix) > 0
