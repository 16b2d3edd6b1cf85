"""Generalised-kT clustering against hand-worked configurations, an independent plain-Python
implementation of the algorithm as stated in Cacciari, Salam, Soyez, JHEP 0804 (2008) 063
(REFERENCES 2.10), and infrared/collinear safety."""

from __future__ import annotations

import math

import awkward as ak
import numpy as np
import pytest

from evtkin.select import jets as J
from evtkin.select import kinematics as kin


def particle(pt, y, phi, m=0.0, pdgid=21):
    """A record from (pt, rapidity, φ, m); vector cannot build rapidity-based records itself
    (REFERENCES 3.3), so convert by hand: pz = mT sinh y, E = mT cosh y."""
    mt = math.sqrt(pt * pt + m * m)
    return {
        "px": pt * math.cos(phi),
        "py": pt * math.sin(phi),
        "pz": mt * math.sinh(y),
        "energy": mt * math.cosh(y),
        "mass": m,
        "pdgid": pdgid,
        "status": 1,
    }


def events(*evs):
    return ak.Array([list(ev) for ev in evs])


def test_two_partons_closer_than_r_merge_farther_stay_apart():
    close = [particle(50, 0.0, 0.0), particle(30, 0.2, 0.25)]  # ΔR = 0.320 < 0.4
    far = [particle(50, 0.0, 0.0), particle(30, 0.3, 0.4)]  # ΔR = 0.5 > 0.4
    jets = J.antikt(events(close, far), 0.4)
    assert ak.to_list(ak.num(jets)) == [1, 2]
    # E-scheme: the jet is the four-momentum sum
    s = kin.sum_p4(events(close))
    for f in ("px", "py", "pz", "E"):
        assert jets[0, 0][f] == pytest.approx(s[0][f], rel=1e-12)
    assert jets[0, 0].n_constituents == 2
    # jets come pT ordered
    assert jets[1, 0].pt == pytest.approx(50)
    assert jets[1, 1].pt == pytest.approx(30)


def test_distance_uses_rapidity_not_pseudorapidity():
    # a heavy object at y = 0.35 has η = asinh(√500·sinh 0.35 / 10) = 0.7317 (by hand);
    # anti-kT must use y (REFERENCES 2.10, 3.3)
    a = particle(10, 0.0, 0.0)
    b = particle(10, 0.35, 0.0, m=20.0)
    ev = events([a, b])
    assert kin.eta(ev)[0, 1] == pytest.approx(0.7317, abs=1e-4)
    assert ak.num(J.antikt(ev, 0.4))[0] == 1


def test_delta_phi_is_wrapped():
    ev = events([particle(40, 0.0, 3.0), particle(40, 0.0, -3.0)])  # Δφ = 0.283
    assert ak.num(J.antikt(ev, 0.4))[0] == 1
    assert ak.num(J.antikt(ev, 0.2))[0] == 2


def test_soft_particle_joins_nearer_hard_parton():
    # y–φ distances 0.3 to A and 0.4 to B, both < R = 0.5; A and B are 0.7 apart
    a, b, s = particle(100, 0.0, 0.0), particle(100, 0.0, 0.7), particle(1, 0.0, 0.3)
    jets, idx = J.cluster(events([b, s, a]), 0.5)
    assert ak.to_list(ak.num(jets)) == [2]
    assert ak.to_list(jets.n_constituents[0]) == [2, 1]  # A+s is harder than B
    assert idx[0, 1] == idx[0, 2]  # s ended with A
    assert kin.phi(jets[0, 0]) == pytest.approx(math.atan2(math.sin(0.3), 100 + math.cos(0.3)))


def test_hand_worked_differences_between_antikt_kt_and_ca():
    # A (pT 100, φ 0), s1 (pT 1, φ 0.45), s2 (pT 1, φ 0.85), all at y = 0, R = 0.5. By hand:
    # anti-kT: d(A,s1) = 0.45²/0.25/100² = 8.1e-5 < d_AB = 1e-4 -> merge; then A' is a jet and s2
    #   alone: jets {A+s1} {s2}.
    # kT: d(s1,s2) = 0.4²/0.25 = 0.64 is the smallest -> merge (φ 0.65, pT 2cos0.2);
    #   d(A,s12) = 3.84·0.65²/0.25 = 6.5 > d_B(s12) = 3.84: jets {A} {s1+s2}.
    # C/A: d = ΔR²/R²: s1-s2 (0.64) merge, then A-s12 = 1.69 > 1: jets {A} {s1+s2}.
    ev = events([particle(100, 0, 0.0), particle(1, 0, 0.45), particle(1, 0, 0.85)])
    _, idx_akt = J.cluster(ev, 0.5, p=-1)
    _, idx_kt = J.cluster(ev, 0.5, p=1)
    _, idx_ca = J.cluster(ev, 0.5, p=0)
    assert ak.to_list(idx_akt) == [[0, 0, 1]]
    assert ak.to_list(idx_kt) == [[0, 1, 1]]
    assert ak.to_list(idx_ca) == [[0, 1, 1]]
    jets_kt = J.antikt(ev, 0.5, p=1)
    assert jets_kt[0, 1].pt == pytest.approx(2 * math.cos(0.2))


def test_pt_min_flag_and_empty_events():
    b = particle(60, 0.0, 1.0, pdgid=-5)
    ev = events([], [particle(30, 0, 0), b, particle(2, 2.0, -2.0)], [particle(5, 0, 0)])
    jets, idx = J.cluster(ev, 0.4, pt_min=10.0)
    assert ak.to_list(ak.num(jets)) == [0, 2, 0]
    assert ak.to_list(jets.btag) == [[], [True, False], []]  # b and anti-b both tag
    assert ak.to_list(idx) == [[], [1, 0, -1], [-1]]
    with pytest.raises(ValueError, match="radius"):
        J.antikt(ev, 0.0)


def reference_cluster(parts, radius, p):
    """Plain-Python generalised-kT from the paper's definition, one event at a time (test only)."""
    pj = [list(v) for v in parts]  # px, py, pz, E
    jets = []

    def kt2p(v):
        return (v[0] ** 2 + v[1] ** 2) ** p

    def yphi(v):
        return 0.5 * math.log((v[3] + v[2]) / (v[3] - v[2])), math.atan2(v[1], v[0])

    while pj:
        cands = [(kt2p(v), i, None) for i, v in enumerate(pj)]
        for i in range(len(pj)):
            for j in range(i + 1, len(pj)):
                yi, fi = yphi(pj[i])
                yj, fj = yphi(pj[j])
                dphi = (fi - fj + math.pi) % (2 * math.pi) - math.pi
                d = min(kt2p(pj[i]), kt2p(pj[j])) * ((yi - yj) ** 2 + dphi**2) / radius**2
                cands.append((d, i, j))
        _, i, j = min(cands, key=lambda c: c[0])
        if j is None:
            jets.append(pj.pop(i))
        else:
            merged = [a + b for a, b in zip(pj[i], pj[j], strict=False)]
            pj = [v for k, v in enumerate(pj) if k not in (i, j)] + [merged]
    return sorted(jets, key=lambda v: -math.hypot(v[0], v[1]))


@pytest.mark.parametrize("p", [-1.0, 0.0, 1.0])
def test_random_events_agree_with_plain_reference(p):
    rng = np.random.default_rng(11 + int(p))
    evs = []
    for _ in range(150):
        n = int(rng.integers(0, 9))
        evs.append(
            [
                particle(
                    float(rng.exponential(30) + 1),
                    float(rng.normal(0, 1.2)),
                    float(rng.uniform(-math.pi, math.pi)),
                    float(rng.uniform(0, 5)),
                )
                for _ in range(n)
            ]
        )
    arr = events(*evs)
    jets = J.antikt(arr, 0.6, p=p)
    px, py, pz, e = (ak.to_list(x) for x in kin.components(arr))
    for k in range(len(evs)):
        ref = reference_cluster(list(zip(px[k], py[k], pz[k], e[k], strict=False)), 0.6, p)
        got = [[j["px"], j["py"], j["pz"], j["E"]] for j in ak.to_list(jets[k])]
        assert len(got) == len(ref), k
        np.testing.assert_allclose(
            np.array(got).reshape(-1, 4), np.array(ref).reshape(-1, 4), rtol=1e-9, atol=1e-9
        )


def test_infrared_and_collinear_safety():
    # IRC safety of anti-kT (Cacciari, Salam, Soyez 2008): an extra very soft particle or a
    # collinear split leaves the hard jets unchanged
    rng = np.random.default_rng(12)
    hard, soft, split = [], [], []
    for _ in range(200):
        n = int(rng.integers(2, 7))
        ev = [
            particle(
                float(rng.uniform(20, 200)),
                float(rng.normal(0, 1.5)),
                float(rng.uniform(-math.pi, math.pi)),
            )
            for _ in range(n)
        ]
        hard.append(ev)
        soft.append([*ev, particle(1e-7, float(rng.normal(0, 1.5)), float(rng.uniform(-3, 3)))])
        first = dict(ev[0])
        half = {k: (v / 2 if k in ("px", "py", "pz", "energy") else v) for k, v in first.items()}
        split.append([half, half, *ev[1:]])
    ref = J.antikt(events(*hard), 0.4, pt_min=5.0)
    for other in (
        J.antikt(events(*soft), 0.4, pt_min=5.0),
        J.antikt(events(*split), 0.4, pt_min=5.0),
    ):
        assert ak.to_list(ak.num(other)) == ak.to_list(ak.num(ref))
        for f in ("px", "py", "pz", "E"):
            np.testing.assert_allclose(ak.flatten(other[f]), ak.flatten(ref[f]), atol=1e-6)
