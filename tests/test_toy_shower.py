"""The shipped toy shower samples checked against outside facts (each source named), and
``evtkin toy shower`` itself."""

from __future__ import annotations

from fractions import Fraction
from pathlib import Path

import awkward as ak
import numpy as np
import pytest
from particle import Particle

import evtkin
from evtkin.cli import main

SAMPLES = Path(__file__).resolve().parent.parent / "samples"
TTBAR = SAMPLES / "toy_ttbar_shower.hepmc.gz"
DY = SAMPLES / "toy_drellyan_shower.hepmc.gz"
PRECISION = 8  # significant digits the samples are written with (Makefile `samples`)


class Flat:
    """The particles and vertices of a file as flat arrays with global vertex indices."""

    def __init__(self, path: Path) -> None:
        ev = ak.concatenate(list(evtkin.read_hepmc(path)))
        self.ev = ev
        p, v = ev.particles, ev.vertices
        nv = ak.to_numpy(ak.num(v, axis=1))
        self.n_vertices = int(nv.sum())
        first_v = np.repeat(np.concatenate([[0], np.cumsum(nv)[:-1]]), ak.num(p, axis=1))
        prod = ak.to_numpy(ak.flatten(p.prod_vertex)).astype(np.int64)
        end = ak.to_numpy(ak.flatten(p.end_vertex)).astype(np.int64)
        self.prod = np.where(prod >= 0, prod + first_v, -1)
        self.end = np.where(end >= 0, end + first_v, -1)
        self.p4 = np.column_stack([ak.to_numpy(ak.flatten(p[f]))
                                   for f in ("px", "py", "pz", "energy")])  # fmt: skip
        self.mass = ak.to_numpy(ak.flatten(p["mass"]))
        self.pdg = ak.to_numpy(ak.flatten(p.pdgid))
        self.status = ak.to_numpy(ak.flatten(p.status))
        self.event = np.repeat(np.arange(len(ev)), ak.num(p, axis=1))
        self.vpos = np.column_stack([ak.to_numpy(ak.flatten(v[f])) for f in "xyzt"])


@pytest.fixture(scope="module", params=[TTBAR, DY], ids=["ttbar", "drellyan"])
def flat(request: pytest.FixtureRequest) -> Flat:
    return Flat(request.param)


@pytest.fixture(scope="module")
def ttbar() -> Flat:
    return Flat(TTBAR)


def test_header_says_toy_data() -> None:
    info = evtkin.hepmc_info(TTBAR, count=True)
    assert info.form == "Asciiv3"
    assert any("TOY DATA" in t for t in info.tools)
    assert info.attributes["toy_data"] == "true"
    assert info.n_events == 250
    assert len(info.weight_names) == 27  # the input LHE file's variation weights


def test_four_momentum_conserved_at_every_vertex(flat: Flat) -> None:
    # conservation of four-momentum at every interaction vertex (special relativity),
    # within the rounding of numbers printed with PRECISION significant digits
    sin = np.zeros((flat.n_vertices, 4))
    sout = np.zeros((flat.n_vertices, 4))
    scale = np.zeros(flat.n_vertices)
    into, outof = flat.end >= 0, flat.prod >= 0
    np.add.at(sin, flat.end[into], flat.p4[into])
    np.add.at(sout, flat.prod[outof], flat.p4[outof])
    np.maximum.at(scale, flat.end[into], np.abs(flat.p4[into]).max(axis=1))
    has_in = np.zeros(flat.n_vertices, bool)
    has_in[flat.end[into]] = True
    counts = np.bincount(flat.prod[outof], minlength=flat.n_vertices) + 2
    tol = counts * 10.0 ** (1 - PRECISION) * scale
    assert has_in.all()  # every vertex has incoming particles
    assert np.all(np.abs(sin - sout).max(axis=1) <= tol)


def test_mass_shell_within_print_precision(flat: Flat) -> None:
    # E^2 = p^2 + m^2 (special relativity), to the rounding of the printed numbers
    e2 = flat.p4[:, 3] ** 2
    p2 = np.sum(flat.p4[:, :3] ** 2, axis=1)
    m2 = np.sign(flat.mass) * flat.mass**2
    assert np.all(np.abs(e2 - p2 - m2) <= 4 * 10.0 ** (1 - PRECISION) * np.maximum(e2, 1e-6))


def test_hadron_masses_are_pdg(flat: Flat) -> None:
    # PDG 2024 masses through the particle package
    hadrons = (flat.status <= 2) & (np.abs(flat.pdg) > 100)
    for pdg in np.unique(flat.pdg[hadrons]):
        pdg_mass = Particle.from_pdgid(int(pdg)).mass / 1000.0
        got = flat.mass[flat.pdg == pdg]
        np.testing.assert_allclose(got, pdg_mass, rtol=10.0 ** (1 - PRECISION), err_msg=str(pdg))


def test_b_hadrons_fly_with_pdg_lifetime(ttbar: Flat) -> None:
    # proper decay length L m/|p| is exponential with mean c tau (PDG 2024 through the
    # particle package: B0 0.455 mm, B+ 0.491 mm); the sample mean within 4 standard errors
    f = ttbar
    b = (np.isin(np.abs(f.pdg), [511, 521, 531, 5122])) & (f.status == 2)
    assert b.sum() >= 2 * len(f.ev) * 0.9  # two b quarks per top pair
    d = f.vpos[f.end[b]] - f.vpos[f.prod[b]]
    pmag = np.linalg.norm(f.p4[b, :3], axis=1)
    proper = np.linalg.norm(d[:, :3], axis=1) * f.mass[b] / pmag
    ctau = np.array([Particle.from_pdgid(int(x)).ctau for x in f.pdg[b]])
    ratio = proper / ctau  # Exp(1) each
    assert abs(ratio.mean() - 1.0) < 4.0 / np.sqrt(b.sum())
    # c t = E/m L (time dilation): the vertex times agree with the flight distance
    np.testing.assert_allclose(d[:, 3], np.linalg.norm(d[:, :3], axis=1) * f.p4[b, 3] / pmag,
                               rtol=1e-5)  # fmt: skip
    # non-prompt leptons: semileptonic B decays give electrons and muons
    kids_of_b = np.isin(f.prod, f.end[b])
    assert np.any(kids_of_b & np.isin(np.abs(f.pdg), [11, 13]))


def test_pi0_to_two_photons_branching_fraction(flat: Flat) -> None:
    # PDG 2024: B(pi0 -> gamma gamma) = (98.823 +- 0.034) %
    pi0 = np.flatnonzero((flat.pdg == 111) & (flat.status == 2))
    photons = np.bincount(flat.prod[(flat.pdg == 22) & (flat.prod >= 0)],
                          minlength=flat.n_vertices)  # fmt: skip
    products = np.bincount(flat.prod[flat.prod >= 0], minlength=flat.n_vertices)
    vtx = flat.end[pi0]
    two_gamma = (photons[vtx] == 2) & (products[vtx] == 2)
    frac = two_gamma.mean()
    br = 0.98823
    assert abs(frac - br) < 4 * np.sqrt(br * (1 - br) / len(pi0))
    # every pi0 decays: none is left stable (c tau = 25 nm)
    assert not np.any((flat.pdg == 111) & (flat.status == 1))


def test_charge_conserved_per_event(flat: Flat) -> None:
    # electric charge conservation: the stable particles carry the charge of the two
    # protons, +2 (charges from the particle package)
    stable = flat.status == 1
    charges = {int(x): Fraction(Particle.from_pdgid(int(x)).charge)
               for x in np.unique(flat.pdg[stable])}  # fmt: skip
    q = np.zeros(len(flat.ev), dtype=object)
    for i in np.flatnonzero(stable):
        q[flat.event[i]] += charges[int(flat.pdg[i])]
    assert set(q.tolist()) == {2}


def test_status_codes_and_multiplicity(flat: Flat) -> None:
    # HepMC status codes (Buckley et al. 2021, # from memory): 1 stable, 2 decayed, 4 beam
    assert set(np.unique(flat.status)) <= {1, 2, 3, 4, 11}
    beams = flat.status == 4
    assert np.all(flat.pdg[beams] == 2212)
    assert np.all(flat.prod[beams] == -1)  # beam particles have no production vertex
    assert np.all(flat.end[flat.status == 1] == -1)
    assert np.all(flat.end[flat.status == 2] >= 0)
    assert np.bincount(flat.event[beams]).tolist() == [2] * len(flat.ev)


def test_ttbar_has_200_to_600_stable_particles(ttbar: Flat) -> None:
    n = np.bincount(ttbar.event[ttbar.status == 1])
    assert n.min() >= 200
    assert n.max() <= 600
    # photons radiated off charged leptons (dressing): some leptons share a vertex with one
    lep = np.isin(np.abs(ttbar.pdg), [11, 13]) & (ttbar.status == 1) & (ttbar.prod >= 0)
    gamma_vertices = set(ttbar.prod[(ttbar.pdg == 22) & (ttbar.prod >= 0)].tolist())
    assert any(v in gamma_vertices for v in ttbar.prod[lep].tolist())


def test_toy_shower_command_is_deterministic(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    lhe = SAMPLES / "toy_drellyan.lhe.gz"
    a, b = tmp_path / "a.hepmc.gz", tmp_path / "b.hepmc.gz"
    for out in (a, b):
        assert main(["toy", "shower", str(lhe), "-o", str(out), "-n", "3", "--seed", "9"]) == 0
    assert "wrote 3 particle-level events" in capsys.readouterr().out
    assert a.read_bytes() == b.read_bytes()
    # each event keeps its LHE process id (IDPRUP) as the HepMC signal process id
    lhe_ids = ak.to_numpy(next(evtkin.read_lhe(lhe, step_size=3))["process_id"])
    got = ak.concatenate(list(evtkin.read_hepmc(a)))
    np.testing.assert_array_equal(ak.to_numpy(got.signal_process_id), lhe_ids)
    assert main(["toy", "shower", "-o", str(a)]) == 1
    assert "needs an input LHE file" in capsys.readouterr().err
