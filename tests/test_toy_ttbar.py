"""Toy top-pair sampler against textbook and PDG results (fixed seeds, small samples)."""

from __future__ import annotations

import awkward as ak
import numpy as np
import pytest
import vector
from scipy import integrate, stats

from evtkin.toy import constants as C
from evtkin.toy.driver import generate
from evtkin.toy.kinematics import two_body_momentum
from evtkin.toy.ttbar import (
    TTbarSampler,
    dsigma_dt_gg,
    dsigma_dt_qq,
    sample_cos_theta_star,
    sigma_gg,
    sigma_qq,
)

vector.register_awkward()
GEV2_PB = 0.3893793721e9  # PDG 2024: (hbar c)^2 = 0.3893793721 GeV^2 mb -> x 1e9 for pb
M_T, G_T = 172.57, 1.42  # PDG 2024
M_W, G_W = 80.3692, 2.085  # PDG 2024


@pytest.fixture(scope="module")
def events() -> ak.Array:
    _info, chunks = generate(TTbarSampler(), 8000, seed=2024, n_integration=100_000)
    return ak.concatenate(list(chunks))


def _p4(p: ak.Array) -> ak.Array:
    return ak.zip({"px": p.px, "py": p.py, "pz": p.pz, "E": p.energy}, with_name="Momentum4D")


# REFERENCES 2.7: alpha_s = 0.1, m_t = 172.57; Glück-Owens-Reya 1978 / Combridge 1979 (pb)
@pytest.mark.parametrize(
    ("rs", "qq", "gg"),
    [(400.0, 15.7127, 9.3510), (500.0, 12.9891, 12.9485), (1000.0, 3.6044, 8.1821)],
)
def test_partonic_cross_sections(rs, qq, gg):
    s = rs * rs
    assert sigma_qq(s, 0.1, 172.57) * GEV2_PB == pytest.approx(qq, abs=6e-4)
    assert sigma_gg(s, 0.1, 172.57) * GEV2_PB == pytest.approx(gg, abs=6e-4)
    # the differential forms used for sampling integrate to the same numbers
    beta = np.sqrt(1 - 4 * 172.57**2 / s)
    t_lo, t_hi = 172.57**2 - s / 2 * (1 + beta), 172.57**2 - s / 2 * (1 - beta)
    iq = integrate.quad(lambda t: dsigma_dt_qq(s, t, 0.1, 172.57), t_lo, t_hi)[0]
    ig = integrate.quad(lambda t: dsigma_dt_gg(s, t, 0.1, 172.57), t_lo, t_hi)[0]
    assert iq * GEV2_PB == pytest.approx(qq, abs=6e-4)
    assert ig * GEV2_PB == pytest.approx(gg, abs=6e-4)


def test_two_body_momentum_worked_numbers():
    # REFERENCES 2.2 (PDG kinematics review formula; worked numbers)
    assert two_body_momentum(172.57, 80.3692, 0.0) == pytest.approx(67.5703, abs=1e-4)
    assert two_body_momentum(172.57, 80.3692, 4.183) == pytest.approx(67.4914, abs=1e-4)
    assert two_body_momentum(91.1880, 0.1056583755, 0.1056583755) == pytest.approx(
        45.59388, abs=1e-5
    )


def test_helicity_fractions_and_angle_sampler():
    # REFERENCES 2.6: LO F0 = 0.6975, F_L = 0.3025 with PDG 2024 masses
    f0, fl = C.helicity_fractions(M_T, M_W)
    assert f0 == pytest.approx(0.6975, abs=1e-4)
    assert fl == pytest.approx(0.3025, abs=1e-4)
    c = sample_cos_theta_star(np.random.default_rng(5), np.full(100_000, f0), np.full(100_000, fl))
    # REFERENCES 2.6: <cos> = (F_R - F_L)/2 = -0.15127; P(cos > 0) = 0.38655
    assert c.mean() == pytest.approx(-0.15127, abs=0.006)
    assert (c > 0).mean() == pytest.approx(0.38655, abs=0.005)


def _w_angle_cdf(c, f0=0.6975, fl=0.3025):
    # integral of (3/4)(1-c^2) F0 + (3/8)(1-c)^2 F_L (F_R = 0), REFERENCES 2.6
    return f0 * (0.5 + 0.75 * (c - c**3 / 3)) + fl * (1 - (1 - c) ** 3 / 8)


def test_record_structure(events):
    p = events.particles
    assert ak.all(ak.num(p) == 12)
    assert np.all(ak.to_numpy(p.status) == np.array([-1, -1, 2, 2, 2, 1, 2, 1, 1, 1, 1, 1]))
    assert ak.all(p.pdgid[:, 2] == 6)
    assert ak.all(p.pdgid[:, 3] == -6)
    assert ak.all(p.pdgid[:, 4] == 24)
    assert ak.all(p.pdgid[:, 6] == -24)
    assert ak.all(p.pdgid[:, 5] == 5)
    assert ak.all(p.pdgid[:, 7] == -5)
    # incoming partons: mothers none; tops from (0, 1); decay products point to their parent
    assert ak.all(p.mother1[:, :2] == -1)
    assert ak.all((p.mother1[:, 2:4] == 0) & (p.mother2[:, 2:4] == 1))
    expected_parent = np.array([2, 2, 3, 3, 4, 4, 6, 6])
    assert np.all(ak.to_numpy(p.mother1)[:, 4:] == expected_parent)
    assert np.all(ak.to_numpy(p.mother2)[:, 4:] == expected_parent)
    # charge conservation at each W vertex (W+ daughters total charge +1), via the particle pkg
    from particle import Particle

    charge = {pid: Particle.from_pdgid(pid).charge for pid in np.unique(ak.flatten(p.pdgid))}
    q = np.vectorize(charge.get, otypes=[float])(ak.to_numpy(p.pdgid))
    np.testing.assert_allclose(q[:, 8] + q[:, 9], 1.0)
    np.testing.assert_allclose(q[:, 10] + q[:, 11], -1.0)


def test_four_momentum_conservation_and_mass_shell(events):
    p = events.particles
    mom = np.stack([ak.to_numpy(p[f]) for f in ("px", "py", "pz", "energy")], axis=-1)
    mass = ak.to_numpy(p.mass)
    scale = mom[:, :, 3].max(axis=1)[:, None]
    # E^2 = p^2 + m^2 (special relativity) within rounding
    e2 = mom[:, :, 3] ** 2
    p2m2 = (mom[:, :, :3] ** 2).sum(-1) + mass**2
    assert np.max(np.abs(e2 - p2m2) / scale**2) < 1e-12
    # incoming = outgoing final state; each resonance = sum of its two daughters
    fin = mom[:, ak.to_numpy(p.status[0]) == 1].sum(axis=1)
    assert np.max(np.abs(mom[:, 0] + mom[:, 1] - fin) / scale) < 1e-12
    for parent, (d1, d2) in {2: (4, 5), 3: (6, 7), 4: (8, 9), 6: (10, 11)}.items():
        assert np.max(np.abs(mom[:, parent] - mom[:, d1] - mom[:, d2]) / scale) < 1e-12
    assert np.max(np.abs(mom[:, 2] + mom[:, 3] - mom[:, 0] - mom[:, 1]) / scale) < 1e-12
    # incoming partons are massless and along the beam axis (LHEF: x = E/E_beam)
    assert np.all(mom[:, :2, :2] == 0)
    assert np.all(mass[:, :2] == 0)


def test_colour_flow(events):
    """Colour conservation: incoming colours + outgoing anticolours equal incoming anticolours
    + outgoing colours (LHEF 1.0: ICOLUP tags); tops hand their colour to the b quarks."""
    p = events.particles
    c1, c2, st = ak.to_numpy(p.color1), ak.to_numpy(p.color2), ak.to_numpy(p.status)
    pid = ak.to_numpy(p.pdgid)
    for i in range(len(c1)):
        inc, out = st[i] == -1, st[i] == 1
        a = sorted(t for t in np.concatenate([c1[i][inc], c2[i][out]]) if t)
        b = sorted(t for t in np.concatenate([c2[i][inc], c1[i][out]]) if t)
        assert a == b, i
        # every tag used exactly twice among incoming + final particles
        tags = [t for t in np.concatenate([c1[i][inc | out], c2[i][inc | out]]) if t]
        assert all(tags.count(t) == 2 for t in tags)
    assert np.all(c1[:, 2] == c1[:, 5])
    assert np.all(c2[:, 3] == c2[:, 7])
    colored = (np.abs(pid) <= 6) | (pid == 21)
    assert np.all((c1 > 0) | (c2 > 0) | ~colored)  # quarks and gluons carry colour
    assert np.all((c1 == 0) & (c2 == 0) | colored)  # W, leptons, neutrinos do not


def test_top_and_w_breit_wigner(events):
    p = events.particles
    x = ak.to_numpy(p.energy[:, 0] + p.energy[:, 1])
    rs = np.sqrt(x**2 - ak.to_numpy(p.pz[:, 0] + p.pz[:, 1]) ** 2)
    free = rs > 2 * (M_T + 15 * G_T)  # no phase-space truncation of the mass window
    for idx, (m0, g0) in {2: (M_T, G_T), 3: (M_T, G_T), 4: (M_W, G_W), 6: (M_W, G_W)}.items():
        m = ak.to_numpy(p.mass[:, idx])[free]
        # the mass column equals the invariant mass of the four-momentum
        inv = np.sqrt(ak.to_numpy(p.energy[:, idx]) ** 2 - ak.to_numpy(
            p.px[:, idx] ** 2 + p.py[:, idx] ** 2 + p.pz[:, idx] ** 2))[free]  # fmt: skip
        np.testing.assert_allclose(inv, m, rtol=1e-9)
        # REFERENCES 2.3: relativistic Breit-Wigner = Cauchy in s = m^2, truncated to m0 +- 15 g0
        cauchy = stats.cauchy(loc=m0**2, scale=m0 * g0)
        lo, hi = cauchy.cdf((m0 - 15 * g0) ** 2), cauchy.cdf((m0 + 15 * g0) ** 2)
        res = stats.kstest(m**2, lambda s, c=cauchy, lo=lo, hi=hi: (c.cdf(s) - lo) / (hi - lo))
        assert res.pvalue > 1e-3, (idx, res)
        # a non-relativistic Gaussian of the same width must be rejected (test has power)
        wrong = stats.kstest(m, stats.norm(m0, g0 / 2.355).cdf)
        assert wrong.pvalue < 1e-6


def test_w_decay_angle_and_two_body_momentum(events):
    p = events.particles
    v = _p4(p)
    cosines = []
    for top, w, b, da in ((2, 4, 5, 8), (3, 6, 7, 10)):
        # down-type fermion of the W decay: negative pdg id for W+ (l+, dbar), positive for W-
        d1, d2 = v[:, da], v[:, da + 1]
        # W+ -> l+ nu / u dbar: the down-type one has a negative id; W-: a positive id
        is_down = (p.pdgid[:, da] < 0) if top == 2 else (p.pdgid[:, da] > 0)
        down = ak.where(is_down, d1, d2)
        # theta*: angle of the down-type fermion w.r.t. the W direction in the top frame, in the
        # W rest frame, i.e. opposite to the b direction seen from the W (frame-independent)
        f_w = down.boostCM_of_p4(v[:, w])
        b_w = v[:, b].boostCM_of_p4(v[:, w])
        cosines.append(-ak.to_numpy(f_w.to_Vector3D().unit().dot(b_w.to_Vector3D().unit())))
        # PDG two-body formula for t -> W b in the top rest frame, with the event's masses
        w_t = v[:, w].boostCM_of_p4(v[:, top])
        expect = two_body_momentum(ak.to_numpy(p.mass[:, top]), ak.to_numpy(p.mass[:, w]), 4.78)
        np.testing.assert_allclose(ak.to_numpy(w_t.p), expect, rtol=1e-8)
    c = np.concatenate(cosines)
    res = stats.kstest(c, _w_angle_cdf)
    assert res.pvalue > 1e-3, res
    assert stats.kstest(c, stats.uniform(-1, 2).cdf).pvalue < 1e-6  # isotropy is rejected


def test_w_branching_ratios(events):
    # PDG 2024: BR(W -> e nu) = 10.71 %, hadrons 67.41 % (renormalised to 100.13 %)
    p = events.particles
    ids = np.abs(ak.to_numpy(p.pdgid))
    pairs = np.concatenate([ids[:, 8:10], ids[:, 10:12]])  # the two daughters of each W
    n = len(pairs)
    for codes, br in (((11,), 0.1071 / 1.0013), ((1, 2, 3, 4), 0.6741 / 1.0013)):
        frac = np.isin(pairs, codes).any(axis=1).mean()
        assert abs(frac - br) < 4 * np.sqrt(br * (1 - br) / n)


def test_scale_variation_weights(events):
    # one-loop running (PDG QCD review): 1/a(mu) = 1/a(mZ) + b0 ln(mu^2/mZ^2), b0 = 23/(12 pi)
    def a_s(mu):
        return 1 / (1 / 0.1180 + 23 / (12 * np.pi) * np.log(mu**2 / 91.188**2))

    w = ak.to_numpy(events.weights)
    nominal = ak.to_numpy(events.weight)
    mu = ak.to_numpy(events.scale)
    np.testing.assert_array_equal(w[:, 0], nominal)  # muR = muF = 1
    np.testing.assert_allclose(events.alpha_qcd, a_s(mu), rtol=1e-6)
    # muR = 2 (id 1002) at fixed muF: (alpha_s(2 mu)/alpha_s(mu))^2 for an LO alpha_s^2 process
    np.testing.assert_allclose(w[:, 1] / nominal, (a_s(2 * mu) / a_s(mu)) ** 2, rtol=1e-6)
    np.testing.assert_allclose(w[:, 2] / nominal, (a_s(0.5 * mu) / a_s(mu)) ** 2, rtol=1e-6)
    # the usual LO picture (common practice): higher scales lower the cross section
    assert w[:, 5].mean() < nominal.mean() < w[:, 6].mean()
    replicas = w[:, 7:] / nominal[:, None]
    assert replicas.shape[1] == 20
    assert 0.0005 < np.std(replicas.mean(axis=0)) < 0.2  # replicas differ, but not wildly


def test_deformation_enhances_the_tail():
    from evtkin.toy.ttbar import Deformation

    rng = np.random.default_rng(77)
    plain = TTbarSampler().trials(rng, 50_000)
    rng = np.random.default_rng(77)
    deformed = TTbarSampler(deformation=Deformation(1.0, 3000.0)).trials(rng, 50_000)
    shat = (plain.data["x1"] * plain.data["x2"]) * 13000.0**2
    # same points; weights differ exactly by the documented factor 1 + c s^/Lambda^2
    np.testing.assert_allclose(deformed.weight / plain.weight, 1 + shat / 3000.0**2, rtol=1e-12)
