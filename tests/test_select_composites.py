"""Composites: combinations, best candidates, the neutrino pz from the W-mass constraint and χ²
top-pair reconstruction, on worked examples and analytically built events."""

from __future__ import annotations

import math

import awkward as ak
import numpy as np
import pytest
import vector

from evtkin.select import composites as C
from evtkin.select import kinematics as kin

vector.register_awkward()

# PDG 2024 (Phys. Rev. D 110, 030001), GeV
M_W = 80.3692
M_T = 172.57
M_Z = 91.1880
M_MU = 0.1056583755  # from memory (PDG)


def rec(px, py, pz, m=0.0, **extra):
    return {
        "px": px,
        "py": py,
        "pz": pz,
        "energy": math.sqrt(px * px + py * py + pz * pz + m * m),
        "mass": m,
        **extra,
    }


def test_pdg_constants():
    # PDG 2024: m_W = 80.3692 GeV, m_t = 172.57 GeV (REFERENCES 2.1)
    assert C.M_W_PDG2024 == 80.3692
    assert C.M_T_PDG2024 == 172.57


def test_neutrino_pz_worked_example_two_real_roots():
    # REFERENCES 2.5: lepton (40, 10, 30) massless, MET (-25, 20), m_W = 80.3692:
    # pz = -18.30461 or +104.05534, both giving m(l nu) = 80.3692
    lep = ak.Array([rec(40.0, 10.0, 30.0)])
    small, large, cplx = C.neutrino_pz(lep, -25.0, 20.0, m_w=M_W)
    assert small[0] == pytest.approx(-18.30461, abs=1e-5)
    assert large[0] == pytest.approx(104.05534, abs=1e-5)
    assert not cplx[0]
    met = ak.zip({"px": [-25.0], "py": [20.0]}, with_name="Momentum2D")
    for choice, expected in (("smaller_abs_pz", -18.30461), ("larger_abs_pz", 104.05534)):
        nu, w = C.leptonic_w(lep, met, m_w=M_W, choice=choice)
        assert nu.pz[0] == pytest.approx(expected, abs=1e-5)
        assert kin.mass(w)[0] == pytest.approx(M_W, rel=1e-10)
        assert kin.mass(nu)[0] == pytest.approx(0.0, abs=1e-5)
    nu, w = C.leptonic_w(lep, met, m_w=M_W, choice="both")
    assert ak.to_list(nu.pz) == [
        [pytest.approx(-18.30461, abs=1e-5), pytest.approx(104.05534, abs=1e-5)]
    ]
    with pytest.raises(ValueError, match="choice"):
        C.leptonic_w(lep, met, choice="closest")


def test_neutrino_pz_complex_case_takes_real_part():
    # REFERENCES 2.5: lepton (60, 0, 20), MET (-70, 0): m_T = 129.61 > m_W, real part -5.39109
    lep = ak.Array([rec(60.0, 0.0, 20.0)])
    small, large, cplx = C.neutrino_pz(lep, -70.0, 0.0, m_w=M_W)
    assert bool(cplx[0])
    assert small[0] == pytest.approx(-5.39109, abs=1e-5)
    assert large[0] == pytest.approx(-5.39109, abs=1e-5)
    met = ak.zip({"px": [-70.0], "py": [0.0]}, with_name="Momentum2D")
    nu, w = C.leptonic_w(lep, met, m_w=M_W, choice="both")
    assert ak.to_list(ak.num(nu)) == [1]  # one hypothesis only
    # the mass then exceeds m_W and is at least m_T (m >= m_T always; from memory)
    assert kin.mass(w)[0, 0] >= kin.transverse_mass(lep, met)[0] - 1e-9 > M_W


@pytest.mark.parametrize("m_lep", [0.0, M_MU])
def test_neutrino_pz_reproduces_generated_on_shell_w(m_lep):
    # W at the pole mass decays isotropically to l nu (two-body, PDG "Kinematics"), then boosted:
    # one root must equal the generated neutrino pz and m(l nu) must equal m_W
    rng = np.random.default_rng(31)
    n = 2000
    cos_t, phi_ = rng.uniform(-1, 1, n), rng.uniform(-np.pi, np.pi, n)
    pstar = (M_W**2 - m_lep**2) / (2 * M_W)
    d = np.stack(
        [np.sqrt(1 - cos_t**2) * np.cos(phi_), np.sqrt(1 - cos_t**2) * np.sin(phi_), cos_t]
    )
    lw = vector.array(
        {
            "px": pstar * d[0],
            "py": pstar * d[1],
            "pz": pstar * d[2],
            "E": np.full(n, np.hypot(pstar, m_lep)),
        }
    )
    nw = vector.array(
        {"px": -pstar * d[0], "py": -pstar * d[1], "pz": -pstar * d[2], "E": np.full(n, pstar)}
    )
    beta = rng.uniform(-0.55, 0.55, (3, n))
    b = vector.array({"x": beta[0], "y": beta[1], "z": beta[2]})
    lab_l, lab_n = lw.boost_beta3(b), nw.boost_beta3(b)
    lep = ak.zip(
        {
            "px": lab_l.px,
            "py": lab_l.py,
            "pz": lab_l.pz,
            "energy": lab_l.E,
            "mass": np.full(n, m_lep),
        }
    )
    small, large, cplx = C.neutrino_pz(lep, lab_n.px, lab_n.py, m_w=M_W)
    small, large, truth = ak.to_numpy(small), ak.to_numpy(large), lab_n.pz
    scale = np.maximum(np.abs(truth), 1.0)
    best = np.minimum(np.abs(small - truth), np.abs(large - truth)) / scale
    # on shell the discriminant is >= 0 up to rounding (it vanishes when the roots coincide)
    assert np.max(best) < 1e-6
    assert np.median(best) < 1e-11
    assert np.mean(ak.to_numpy(cplx)) < 0.01
    _nu, w = C.leptonic_w(lep, ak.zip({"px": lab_n.px, "py": lab_n.py}), m_w=M_W, choice="both")
    np.testing.assert_allclose(
        ak.flatten(kin.mass(w))[~np.repeat(ak.to_numpy(cplx), ak.to_numpy(ak.num(w)))],
        M_W,
        rtol=1e-7,
    )


def z_to_mumu_event(rng, bz):
    # REFERENCES 2.2: Z -> mu mu at m_Z = 91.1880: p* = 45.59388 GeV
    pstar = math.sqrt(M_Z**2 / 4 - M_MU**2)
    ct, ph = rng.uniform(-1, 1), rng.uniform(-math.pi, math.pi)
    d = (
        np.array([math.sqrt(1 - ct**2) * math.cos(ph), math.sqrt(1 - ct**2) * math.sin(ph), ct])
        * pstar
    )
    e = math.hypot(pstar, M_MU)
    g = 1 / math.sqrt(1 - bz**2)
    out = []
    for sign, pid in ((1, 13), (-1, -13)):
        pz = g * (sign * d[2] + bz * e)
        out.append(rec(sign * d[0], sign * d[1], pz, M_MU, pdgid=pid, charge=-np.sign(pid)))
    return out


def test_pair_masses_windows_and_best_candidate():
    rng = np.random.default_rng(32)
    zmm = z_to_mumu_event(rng, 0.3)
    extra = rec(-5.0, 25.0, 3.0, M_MU, pdgid=13, charge=-1)
    events = ak.Array([[*zmm, extra], [zmm[0]], []])
    pairs = C.combinations(events, 2)
    assert ak.to_list(ak.num(pairs)) == [3, 0, 0]
    assert kin.mass(pairs)[0, 0] == pytest.approx(M_Z, rel=1e-12)
    win = C.combinations(events, 2, mass_window=(80.0, 100.0))
    assert ak.to_list(ak.num(win)) == [1, 0, 0]
    assert win[0, 0].d0.pdgid == 13
    assert win[0, 0].d1.pdgid == -13
    os_pairs = C.combinations(events, 2, opposite_charge=True)
    assert ak.to_list(ak.num(os_pairs)) == [2, 0, 0]
    best = C.best_by_mass(os_pairs, M_Z)
    assert kin.mass(best)[0] == pytest.approx(M_Z, rel=1e-12)
    assert best[1] is None
    # ΔR conditions on the constituents
    dr = kin.delta_r(pairs.d0, pairs.d1)
    assert ak.to_list(ak.num(C.combinations(events, 2, dr_min=float(ak.min(dr)) + 1e-9))) == [
        2,
        0,
        0,
    ]
    assert ak.to_list(ak.num(C.combinations(events, 2, dr_max=float(ak.min(dr)) + 1e-9))) == [
        1,
        0,
        0,
    ]
    triplets = C.combinations(events, 3)
    assert ak.to_list(ak.num(triplets)) == [1, 0, 0]
    np.testing.assert_allclose(kin.mass(triplets)[0], kin.mass(kin.sum_p4(events))[0])
    mixed = C.cartesian(events[:, :1], events[:, 1:], mass_window=(80.0, 100.0))
    assert ak.to_list(ak.num(mixed)) == [1, 0, 0]


def ttbar_events(rng, n):
    """Analytic t t~ -> (b l nu)(b q q~) at the pole masses, m_b = 0, boosted, jets shuffled.

    Two-body momenta from the PDG "Kinematics" formula (t -> W b: p* = 67.5703 GeV, REFERENCES 2.2).
    """
    evs, truth_perm, truth_nu_pz, lepton = [], [], [], []
    for _ in range(n):

        def decay(parent, m1, m2):
            M = math.sqrt(max(parent.mass2, 0.0))
            ps = math.sqrt((M**2 - (m1 + m2) ** 2) * (M**2 - (m1 - m2) ** 2)) / (2 * M)
            ct, ph = rng.uniform(-1, 1), rng.uniform(-math.pi, math.pi)
            st = math.sqrt(1 - ct**2)
            a = vector.obj(
                px=ps * st * math.cos(ph),
                py=ps * st * math.sin(ph),
                pz=ps * ct,
                E=math.hypot(ps, m1),
            )
            b = vector.obj(px=-a.px, py=-a.py, pz=-a.pz, E=math.hypot(ps, m2))
            beta = parent.to_beta3()
            return a.boost_beta3(beta), b.boost_beta3(beta)

        mtt = rng.uniform(360, 800)
        ttbar = vector.obj(
            px=rng.normal(0, 30), py=rng.normal(0, 30), pz=rng.normal(0, 300), mass=mtt
        )
        ttbar = vector.obj(px=ttbar.px, py=ttbar.py, pz=ttbar.pz, E=ttbar.E)
        t_had, t_lep = decay(ttbar, M_T, M_T)
        w_had, b_had = decay(t_had, M_W, 0.0)
        w_lep, b_lep = decay(t_lep, M_W, 0.0)
        q1, q2 = decay(w_had, 0.0, 0.0)
        lep, nu = decay(w_lep, 0.0, 0.0)
        jets = [("bh", b_had, True), ("bl", b_lep, True), ("q1", q1, False), ("q2", q2, False)]
        if rng.uniform() < 0.5:  # an extra soft light jet
            jets.append(
                (
                    "x",
                    vector.obj(
                        pt=rng.uniform(5, 30),
                        eta=rng.normal(0, 2),
                        phi=rng.uniform(-3, 3),
                        mass=0.0,
                    ),
                    False,
                )
            )
        order = rng.permutation(len(jets))
        jets = [jets[i] for i in order]
        evs.append(
            [{"px": j.px, "py": j.py, "pz": j.pz, "E": j.E, "btag": tag} for _, j, tag in jets]
        )
        names = [name for name, _, _ in jets]
        truth_perm.append(
            (names.index("bh"), names.index("bl"), sorted((names.index("q1"), names.index("q2"))))
        )
        truth_nu_pz.append(nu.pz)
        lepton.append(
            {"px": lep.px, "py": lep.py, "pz": lep.pz, "E": lep.E, "truth_nu": (nu.px, nu.py)}
        )
    return evs, truth_perm, truth_nu_pz, lepton


def test_ttbar_lepton_jets_finds_the_generated_assignment():
    rng = np.random.default_rng(33)
    evs, perm, nu_pz, leps = ttbar_events(rng, 60)
    jets = ak.Array([*evs, [evs[0][0], evs[0][1]]])  # last event: too few jets
    lep = ak.Array([{k: v for k, v in lp.items() if k != "truth_nu"} for lp in leps] + [None])
    met = ak.zip(
        {
            "px": [lp["truth_nu"][0] for lp in leps] + [0.0],
            "py": [lp["truth_nu"][1] for lp in leps] + [0.0],
        }
    )
    nu, _ = C.leptonic_w(lep, met, m_w=M_W, choice="both")
    for mask in (jets.btag, None):
        res = C.ttbar_lepton_jets(lep, nu, jets, mask, m_w=M_W, m_t=M_T, sigma_w=10.0, sigma_t=15.0)
        assert res[-1] is None
        got = [(r["b_had"], r["b_lep"], sorted((r["j1"], r["j2"]))) for r in ak.to_list(res[:-1])]
        assert got == [(bh, bl, list(q)) for bh, bl, q in perm]
        np.testing.assert_allclose(res.chi2[:-1], 0.0, atol=1e-8)
        np.testing.assert_allclose(kin.mass(res.top_had)[:-1], M_T, rtol=1e-9)
        np.testing.assert_allclose(kin.mass(res.top_lep)[:-1], M_T, rtol=1e-9)
        np.testing.assert_allclose(kin.mass(res.w_had)[:-1], M_W, rtol=1e-9)
        np.testing.assert_allclose(res.neutrino.pz[:-1], nu_pz, rtol=1e-7, atol=1e-7)
        ttbar = kin.add_p4(res.top_had, res.top_lep)
        np.testing.assert_allclose(kin.mass(res.ttbar)[:-1], kin.mass(ttbar)[:-1])
    had = C.hadronic_top(jets, jets.btag, m_w=M_W, m_t=M_T)
    np.testing.assert_allclose(kin.mass(had.top)[:-1], M_T, rtol=1e-9)
    assert had[-1] is None
    assert [r["b_index"] for r in ak.to_list(had[:-1])] == [bh for bh, _, _ in perm]
