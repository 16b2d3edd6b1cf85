"""Kinematic helpers against analytic results, PDG formulas and the vector library."""

from __future__ import annotations

import awkward as ak
import numpy as np
import pytest
import vector

from evtkin.select import kinematics as kin

vector.register_awkward()

# PDG 2024 (Phys. Rev. D 110, 030001): masses in GeV
M_W = 80.3692
M_T = 172.57
M_Z = 91.1880
M_MU = 0.1056583755  # from memory (PDG)


def lhe_like(px, py, pz, e, **extra):
    """Plain records like the LHE reader's (both energy and mass fields, no vector behaviour)."""
    px, py, pz, e = (np.asarray(v, dtype=float) for v in (px, py, pz, e))
    m2 = e * e - px * px - py * py - pz * pz
    fields = {"px": px, "py": py, "pz": pz, "energy": e, "mass": np.sqrt(np.abs(m2))}
    fields.update(extra)
    return ak.zip(fields)


def random_p4(rng, n, mass_scale=20.0):
    px, py, pz = rng.normal(0, 50, (3, n))
    m = rng.uniform(0, mass_scale, n)
    return px, py, pz, np.sqrt(px**2 + py**2 + pz**2 + m**2)


def two_body(m_parent, m1, m2, cos_t, phi_):
    """Momenta of a two-body decay in the parent rest frame (PDG review "Kinematics", two-body)."""
    pstar = np.sqrt((m_parent**2 - (m1 + m2) ** 2) * (m_parent**2 - (m1 - m2) ** 2)) / (
        2 * m_parent
    )
    sin_t = np.sqrt(1 - cos_t**2)
    d = np.stack([sin_t * np.cos(phi_), sin_t * np.sin(phi_), cos_t]) * pstar
    e1 = np.full(np.shape(cos_t), np.sqrt(pstar**2 + m1**2))
    e2 = np.full(np.shape(cos_t), np.sqrt(pstar**2 + m2**2))
    return (d[0], d[1], d[2], e1), (-d[0], -d[1], -d[2], e2)


def vec(px, py, pz, e):
    return vector.array({"px": px, "py": py, "pz": pz, "E": e})


def test_two_body_top_decay_matches_pdg_formula():
    # REFERENCES 2.2 (PDG "Kinematics"): t -> W b with m_b = 0: p* = 67.5703 GeV, E_W = 104.9997 GeV
    rng = np.random.default_rng(1)
    n = 50
    w, b = two_body(M_T, M_W, 0.0, rng.uniform(-1, 1, n), rng.uniform(-np.pi, np.pi, n))
    beta = rng.uniform(-0.6, 0.6, (n, 3))
    wl = vec(*w).boost_beta3(vector.array({"x": beta[:, 0], "y": beta[:, 1], "z": beta[:, 2]}))
    bl = vec(*b).boost_beta3(vector.array({"x": beta[:, 0], "y": beta[:, 1], "z": beta[:, 2]}))
    W = lhe_like(wl.px, wl.py, wl.pz, wl.E)
    B = lhe_like(bl.px, bl.py, bl.pz, bl.E)
    np.testing.assert_allclose(kin.invariant_mass(W, B), M_T, rtol=1e-10)
    np.testing.assert_allclose(kin.mass(W), M_W, rtol=1e-10)
    top = kin.add_p4(W, B)
    w_rest = kin.boost_to_rest_frame(W, top)
    np.testing.assert_allclose(kin.p(w_rest), 67.5703, atol=1e-4)
    np.testing.assert_allclose(kin.energy(w_rest), 104.9997, atol=1e-4)


def test_z_to_mumu_pstar():
    # REFERENCES 2.2: Z -> mu mu with m_Z = 91.1880 has p* = 45.59388 GeV
    mu1, mu2 = two_body(M_Z, M_MU, M_MU, np.array([0.3]), np.array([1.0]))
    np.testing.assert_allclose(kin.p(lhe_like(*mu1)), 45.59388, atol=1e-5)
    np.testing.assert_allclose(kin.invariant_mass(lhe_like(*mu1), lhe_like(*mu2)), M_Z, rtol=1e-12)


def test_coordinates_pt_eta_phi_mass_equal_cartesian():
    # cross-check against vector's own coordinate conversions
    rng = np.random.default_rng(2)
    px, py, pz, e = random_p4(rng, 40)
    v = vec(px, py, pz, e)
    ptetaphim = ak.zip(
        {"pt": v.pt, "eta": v.eta, "phi": v.phi, "mass": v.mass}, with_name="Momentum4D"
    )
    plain = lhe_like(px, py, pz, e)
    for f in (kin.mass, kin.pt, kin.eta, kin.phi, kin.rapidity, kin.energy):
        np.testing.assert_allclose(f(ptetaphim), f(plain), rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(kin.mass(plain), v.mass, rtol=1e-9)
    np.testing.assert_allclose(kin.rapidity(plain), v.rapidity, rtol=1e-9)
    np.testing.assert_allclose(kin.eta(plain), v.eta, rtol=1e-9)


def test_unknown_coordinates_raise_clear_error():
    with pytest.raises(TypeError, match="px, py, pz"):
        kin.mass(ak.zip({"a": [1.0], "b": [2.0]}))


def test_delta_phi_wraps_around_pi():
    # Δφ between φ = 3.0 and φ = -3.0 is 6 - 2π = -0.28319 (wrap into (-π, π]), from memory
    a = ak.zip({"pt": [10.0], "eta": [0.5], "phi": [3.0], "mass": [0.0]})
    b = ak.zip({"pt": [20.0], "eta": [0.5], "phi": [-3.0], "mass": [0.0]})
    np.testing.assert_allclose(kin.delta_phi(a, b), 6.0 - 2 * np.pi)
    np.testing.assert_allclose(kin.delta_phi(b, a), 2 * np.pi - 6.0)
    np.testing.assert_allclose(kin.delta_r(a, b), 2 * np.pi - 6.0)
    # exactly opposite: +π, not -π
    c = ak.zip({"pt": [1.0], "eta": [0.0], "phi": [0.0], "mass": [0.0]})
    d = ak.zip({"pt": [1.0], "eta": [0.0], "phi": [np.pi], "mass": [0.0]})
    assert kin.delta_phi(c, d)[0] == pytest.approx(np.pi)
    assert kin.delta_phi(d, c)[0] == pytest.approx(np.pi)


def test_delta_r_eta_and_rapidity_match_vector():
    # vector 1.9: deltaR uses η, deltaRapidityPhi uses y (REFERENCES 3.3)
    rng = np.random.default_rng(3)
    a, b = vec(*random_p4(rng, 100, 50)), vec(*random_p4(rng, 100, 50))
    la, lb = lhe_like(a.px, a.py, a.pz, a.E), lhe_like(b.px, b.py, b.pz, b.E)
    np.testing.assert_allclose(kin.delta_r(la, lb), a.deltaR(b), rtol=1e-9)
    np.testing.assert_allclose(kin.delta_r_rapidity(la, lb), a.deltaRapidityPhi(b), rtol=1e-9)
    np.testing.assert_allclose(np.abs(kin.delta_phi(la, lb)), np.abs(a.deltaphi(b)), rtol=1e-9)
    assert np.max(np.abs(kin.delta_r(la, lb) - kin.delta_r_rapidity(la, lb))) > 0.01


def test_jagged_broadcasting_per_event_against_objects():
    jets = ak.Array(
        [
            [
                {"pt": 30.0, "eta": 0.0, "phi": 0.0, "mass": 0.0},
                {"pt": 20.0, "eta": 1.0, "phi": 0.0, "mass": 0.0},
            ],
            [],
        ]
    )
    lep = ak.Array(
        [
            {"pt": 25.0, "eta": 0.0, "phi": 0.5, "mass": 0.0},
            {"pt": 25.0, "eta": 0.0, "phi": 0.5, "mass": 0.0},
        ]
    )
    out = ak.to_list(kin.delta_r(jets, lep))
    assert out[0] == pytest.approx([0.5, np.hypot(1.0, 0.5)])
    assert out[1] == []


def test_boost_matches_vector_boostcm():
    # REFERENCES 3.3: v.boostCM_of_p4(parent) goes to the parent rest frame
    rng = np.random.default_rng(4)
    d = vec(*random_p4(rng, 200, 5))
    par = vec(*random_p4(rng, 200, 150))
    ours = kin.boost_to_rest_frame(
        lhe_like(d.px, d.py, d.pz, d.E), lhe_like(par.px, par.py, par.pz, par.E)
    )
    ref = d.boostCM_of_p4(par)
    for a, b in ((ours.px, ref.px), (ours.py, ref.py), (ours.pz, ref.pz), (ours.E, ref.E)):
        np.testing.assert_allclose(a, b, rtol=1e-8, atol=1e-8)
    # the parent itself ends at rest
    rest = kin.boost_to_rest_frame(
        lhe_like(par.px, par.py, par.pz, par.E), lhe_like(par.px, par.py, par.pz, par.E)
    )
    np.testing.assert_allclose(kin.p(rest), 0.0, atol=1e-9)


def test_cos_theta_star_analytic_and_vs_vector():
    rng = np.random.default_rng(5)
    n = 300
    cos_true = rng.uniform(-1, 1, n)
    phi_ = rng.uniform(-np.pi, np.pi, n)
    # analytic: Z -> mu mu at angle θ to the z axis, then boost along +z: the helicity axis is z
    mu1, mu2 = two_body(M_Z, M_MU, M_MU, cos_true, phi_)
    bz = rng.uniform(0.05, 0.9, n)
    boost = vector.array({"x": np.zeros(n), "y": np.zeros(n), "z": bz})
    l1, l2 = vec(*mu1).boost_beta3(boost), vec(*mu2).boost_beta3(boost)
    a, b = lhe_like(l1.px, l1.py, l1.pz, l1.E), lhe_like(l2.px, l2.py, l2.pz, l2.E)
    z = kin.add_p4(a, b)
    np.testing.assert_allclose(kin.cos_theta_star(a, z), cos_true, atol=1e-9)
    # general direction: compare with vector's boostCM_of_p4 and the lab direction of the parent
    d = vec(*random_p4(rng, n, 1))
    par = d + vec(*random_p4(rng, n, 1))
    ref_rest = d.boostCM_of_p4(par)
    ref = ref_rest.to_Vector3D().unit().dot(par.to_Vector3D().unit())
    ours = kin.cos_theta_star(
        lhe_like(d.px, d.py, d.pz, d.E), lhe_like(par.px, par.py, par.pz, par.E)
    )
    np.testing.assert_allclose(ours, ref, atol=1e-9)


def _top_decay_chain(rng, cos_star, boost_lab: bool):
    """t -> W b, W -> l nu with θ* between l (W frame) and the W direction (t frame), analytic."""
    n = cos_star.size
    # W direction in the top frame: random
    ct = rng.uniform(-1, 1, n)
    ph = rng.uniform(-np.pi, np.pi, n)
    w_t, b_t = two_body(M_T, M_W, 0.0, ct, ph)
    nhat = np.stack(w_t[:3]) / np.linalg.norm(np.stack(w_t[:3]), axis=0)
    # lepton in the W frame at angle θ* to nhat: build a perpendicular unit vector
    helper = np.where(
        np.abs(nhat[2]) < 0.9, np.array([[0.0], [0.0], [1.0]]), np.array([[1.0], [0.0], [0.0]])
    )
    e1 = np.cross(nhat.T, helper.T).T
    e1 /= np.linalg.norm(e1, axis=0)
    e2 = np.cross(nhat.T, e1.T).T
    az = rng.uniform(-np.pi, np.pi, n)
    sin_star = np.sqrt(1 - cos_star**2)
    direction = cos_star * nhat + sin_star * (np.cos(az) * e1 + np.sin(az) * e2)
    pl = M_W / 2  # REFERENCES 2.2: W -> l nu at rest, p* = m_W/2
    lep_w = vec(*(pl * direction), np.full(n, pl))
    nu_w = vec(*(-pl * direction), np.full(n, pl))
    beta_w = np.stack(w_t[:3]) / w_t[3]
    bw = vector.array({"x": beta_w[0], "y": beta_w[1], "z": beta_w[2]})
    lep_t, nu_t = lep_w.boost_beta3(bw), nu_w.boost_beta3(bw)
    W_t, B_t = vec(*w_t), vec(*b_t)
    parts = [lep_t, nu_t, W_t, B_t]
    if boost_lab:
        bl = rng.uniform(-0.5, 0.5, (3, n))
        blab = vector.array({"x": bl[0], "y": bl[1], "z": bl[2]})
        parts = [v.boost_beta3(blab) for v in parts]
    lep, nu, W, B = (lhe_like(v.px, v.py, v.pz, v.E) for v in parts)
    return lep, nu, W, kin.add_p4(W, B)


def test_helicity_angle_recovers_generated_angle():
    rng = np.random.default_rng(6)
    cos_star = rng.uniform(-1, 1, 500)
    lep, _, W, top = _top_decay_chain(rng, cos_star, boost_lab=True)
    np.testing.assert_allclose(kin.helicity_angle(lep, W, top), cos_star, atol=1e-8)
    np.testing.assert_allclose(kin.cos_theta_star(lep, W, top), cos_star, atol=1e-8)
    # top at rest in the lab: the vector recipe of REFERENCES 2.6 gives the same number
    lep0, _, W0, top0 = _top_decay_chain(rng, cos_star, boost_lab=False)
    lv = vector.zip({"px": lep0.px, "py": lep0.py, "pz": lep0.pz, "E": lep0.energy})
    wv = vector.zip({"px": W0.px, "py": W0.py, "pz": W0.pz, "E": W0.energy})
    tv = vector.zip({"px": top0.px, "py": top0.py, "pz": top0.pz, "E": top0.E})
    ref = lv.boostCM_of_p4(wv).to_Vector3D().unit().dot(wv.boostCM_of_p4(tv).to_Vector3D().unit())
    np.testing.assert_allclose(kin.helicity_angle(lep0, W0, top0), ref, atol=1e-8)


def test_helicity_angle_mean_matches_w_helicity_fractions():
    # REFERENCES 2.6: LO with m_b = 0: F0 = m_t²/(m_t² + 2 m_W²), F_L = 2 m_W²/(...), F_R = 0;
    # <cos θ*> = (F_R - F_L)/2 = -0.15127 and P(cos θ* > 0) = 0.38655 with PDG 2024 masses
    f0 = M_T**2 / (M_T**2 + 2 * M_W**2)
    fl = 1 - f0
    rng = np.random.default_rng(7)
    n_try = 400_000
    x = rng.uniform(-1, 1, n_try)
    dens = 0.75 * (1 - x**2) * f0 + 0.375 * (1 - x) ** 2 * fl
    keep = rng.uniform(0, 1.5 * fl + 0.75 * f0, n_try) < dens  # envelope >= max density
    cos_star = x[keep][:150_000]
    lep, _, W, top = _top_decay_chain(rng, cos_star, boost_lab=True)
    c = ak.to_numpy(kin.helicity_angle(lep, W, top))
    err = np.std(c) / np.sqrt(c.size)
    assert np.mean(c) == pytest.approx(-0.15127, abs=4 * err)
    assert np.mean(c > 0) == pytest.approx(0.38655, abs=4 * np.sqrt(0.25 / c.size))


def test_collins_soper_angle_for_pair_along_beam():
    # with no pair pT the Collins–Soper axis is the beam axis, oriented along the pair's pz
    # (Collins, Soper, PRD 16 (1977) 2219; common practice at pp colliders)
    rng = np.random.default_rng(8)
    n = 200
    cos_true = rng.uniform(-1, 1, n)
    lm, lp = two_body(M_Z, M_MU, M_MU, cos_true, rng.uniform(-np.pi, np.pi, n))
    for bz, sign in ((0.4, 1.0), (-0.7, -1.0)):
        b = vector.array({"x": np.zeros(n), "y": np.zeros(n), "z": np.full(n, bz)})
        a1, a2 = vec(*lm).boost_beta3(b), vec(*lp).boost_beta3(b)
        got = kin.collins_soper_cos_theta(
            lhe_like(a1.px, a1.py, a1.pz, a1.E), lhe_like(a2.px, a2.py, a2.pz, a2.E)
        )
        np.testing.assert_allclose(got, sign * cos_true, atol=1e-9)


def test_transverse_mass_reference_values():
    # REFERENCES 2.5: lepton (60, 0, 20) and MET (-70, 0) have m_T = 129.61 GeV
    lep = lhe_like([60.0], [0.0], [20.0], [np.sqrt(60.0**2 + 20.0**2)])
    met = ak.zip({"px": [-70.0], "py": [0.0]}, with_name="Momentum2D")
    assert kin.transverse_mass(lep, met)[0] == pytest.approx(129.61, abs=0.005)
    # W -> l nu at rest, decay perpendicular to the beam: m_T at its endpoint m_W (Jacobian peak)
    lw, nw = two_body(M_W, 0.0, 0.0, np.array([0.0]), np.array([0.7]))
    assert kin.transverse_mass(lhe_like(*lw), lhe_like(*nw))[0] == pytest.approx(M_W, rel=1e-12)


def test_ht_and_sum_p4_per_event():
    objs = ak.Array(
        [
            [
                {"px": 3.0, "py": 4.0, "pz": 1.0, "E": 10.0},
                {"px": -6.0, "py": 8.0, "pz": -2.0, "E": 20.0},
            ],
            [],
            [{"px": 0.0, "py": -2.0, "pz": 5.0, "E": 6.0}],
        ]
    )
    assert ak.to_list(kin.ht(objs)) == pytest.approx([15.0, 0.0, 2.0])
    s = kin.sum_p4(objs)
    assert ak.to_list(s.px) == [-3.0, 0.0, 0.0]
    assert ak.to_list(s.E) == [30.0, 0.0, 6.0]
    # vector's own ak.sum on Momentum4D records agrees (REFERENCES 3.3)
    ref = ak.sum(ak.with_name(objs, "Momentum4D"), axis=1)
    np.testing.assert_allclose(kin.mass(s), ref.mass)
    assert s.mass[0] == pytest.approx(np.sqrt(900 - 9 - 144 - 1))


def test_collins_soper_massless_closed_form_with_pair_pt():
    # Collins, Soper, PRD 16 (1977) 2219, massless leptons (from memory):
    # cos θ_CS = sign(Q_z) 2 (l1+ l2- - l1- l2+) / (Q sqrt(Q² + Q_T²)), l± = (E ± pz)/√2, 1 = l-
    rng = np.random.default_rng(9)
    n = 300
    lm = random_p4(rng, n, 0.0)
    lp = random_p4(rng, n, 0.0)
    q = [a + b for a, b in zip(lm, lp, strict=False)]
    q2 = q[3] ** 2 - q[0] ** 2 - q[1] ** 2 - q[2] ** 2
    qt2 = q[0] ** 2 + q[1] ** 2
    p1p, p1m = (lm[3] + lm[2]) / np.sqrt(2), (lm[3] - lm[2]) / np.sqrt(2)
    p2p, p2m = (lp[3] + lp[2]) / np.sqrt(2), (lp[3] - lp[2]) / np.sqrt(2)
    ref = np.sign(q[2]) * 2 * (p1p * p2m - p1m * p2p) / np.sqrt(q2 * (q2 + qt2))
    got = kin.collins_soper_cos_theta(lhe_like(*lm), lhe_like(*lp))
    np.testing.assert_allclose(got, ref, atol=1e-9)
