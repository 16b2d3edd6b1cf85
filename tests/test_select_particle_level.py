"""Decay graph, PDG-id classes and particle-level objects on hand-built HepMC-style events with
known answers (prompt/non-prompt, dressing, missing pT, ghost labels, isolation)."""

from __future__ import annotations

import math

import awkward as ak
import numpy as np
import pytest

import evtkin
from evtkin.select import decay_graph as dg
from evtkin.select import particle_level as pl
from evtkin.select import pdgid as pid


def part(pdgid, status, prod, end, pt=0.0, eta=0.0, phi=0.0, m=0.0, pz=None):
    """A record from (pT, η, φ, m); beams (pt = 0) get pz and E = |pz|."""
    if pz is not None:
        return {"pdgid": pdgid, "status": status, "prod_vertex": prod, "end_vertex": end,
                "px": 0.0, "py": 0.0, "pz": pz, "energy": math.hypot(pz, m), "mass": m}
    p_z = pt * math.sinh(eta)
    return {"pdgid": pdgid, "status": status, "prod_vertex": prod, "end_vertex": end,
            "px": pt * math.cos(phi), "py": pt * math.sin(phi), "pz": p_z,
            "energy": math.sqrt(pt * pt + p_z * p_z + m * m), "mass": m}


def top_like_event():
    """Beams → (W+ → μ+ ν γ γ_far) (b → B+ → e+ ν D0bar(→ K+ π-)) (π0 → γ γ)."""
    return [
        part(2212, 4, -1, 0, pz=6500.0, m=0.938),              # 0 beam
        part(2212, 4, -1, 0, pz=-6500.0, m=0.938),             # 1 beam
        part(24, 2, 0, 1, pt=60.0, eta=0.2, phi=0.5, m=80.4),  # 2 W+
        part(5, 2, 0, 2, pt=50.0, eta=-0.5, phi=2.5, m=4.8),   # 3 b
        part(-13, 1, 1, -1, pt=40.0, eta=0.3, phi=0.4),        # 4 μ+  prompt
        part(14, 1, 1, -1, pt=25.0, eta=0.0, phi=0.9),         # 5 ν   prompt
        part(22, 1, 1, -1, pt=3.0, eta=0.33, phi=0.44),        # 6 γ   ΔR(μ) = 0.05: dresses
        part(22, 1, 1, -1, pt=2.0, eta=0.3, phi=0.7),          # 7 γ   ΔR(μ) = 0.30: does not
        part(521, 2, 2, 3, pt=45.0, eta=-0.5, phi=2.5, m=5.279),  # 8 B+
        part(-11, 1, 3, -1, pt=10.0, eta=-0.45, phi=2.55),     # 9 e+ from the B: not prompt
        part(12, 1, 3, -1, pt=8.0, eta=-0.6, phi=2.4),         # 10 ν from the B: not prompt
        part(-421, 2, 3, 4, pt=27.0, eta=-0.5, phi=2.5, m=1.865),  # 11 D0bar
        part(321, 1, 4, -1, pt=15.0, eta=-0.52, phi=2.48, m=0.494),  # 12 K+
        part(-211, 1, 4, -1, pt=12.0, eta=-0.48, phi=2.52, m=0.1396),  # 13 π-
        part(111, 2, 0, 5, pt=5.0, eta=0.31, phi=0.41, m=0.135),  # 14 π0
        part(22, 1, 5, -1, pt=2.5, eta=0.31, phi=0.42),        # 15 γ from π0 near the μ
        part(22, 1, 5, -1, pt=2.5, eta=0.31, phi=0.40),        # 16 γ from π0
    ]


def test_parents_children_and_ancestry():
    p = ak.Array([top_like_event(), [], [part(11, 1, -1, -1, pt=5.0)]])
    parents = dg.parents(p).tolist()
    children = dg.children(p).tolist()
    assert parents[0][2] == [0, 1]
    assert parents[0][0] == []
    assert parents[0][12] == [11]
    assert parents[0][11] == [8]
    assert children[0][8] == [9, 10, 11]
    assert children[0][0] == [2, 3, 14] == children[0][1]
    assert parents[1] == []
    assert parents[2] == [[]]
    assert children[2] == [[]]
    below_b = dg.has_ancestor(p, p.pdgid == 521).tolist()
    assert [i for i, v in enumerate(below_b[0]) if v] == [9, 10, 11, 12, 13]
    assert below_b[2] == [False]


def test_ancestry_ends_on_a_damaged_record_with_a_loop():
    # particle 0 ends in vertex 0, which produces particle 1, which ends in vertex 0 again
    p = ak.Array([[part(511, 2, 0, 0, pt=5.0), part(211, 2, 0, 0, pt=1.0)]])
    assert dg.has_ancestor(p, p.pdgid == 511).tolist() == [[True, True]]


def test_prompt_and_from_hadron():
    p = ak.Array([top_like_event()])
    prompt = pl.prompt(p).tolist()[0]
    assert [i for i in range(17) if not prompt[i]] == [9, 10, 11, 12, 13, 15, 16]
    # a τ from a D_s decay and its products are not prompt; a τ from a W and its products are
    ev = [
        part(2212, 4, -1, 0, pz=6500.0), part(2212, 4, -1, 0, pz=-6500.0),
        part(431, 2, 0, 1, pt=20.0, m=1.968),      # 2 D_s+
        part(-15, 2, 1, 2, pt=15.0, m=1.777),      # 3 τ+ from the D_s
        part(211, 1, 2, -1, pt=10.0),              # 4 π+ from that τ
        part(24, 2, 0, 3, pt=30.0, m=80.4),        # 5 W+
        part(-15, 2, 3, 4, pt=25.0, m=1.777),      # 6 τ+ from the W
        part(211, 1, 4, -1, pt=20.0),              # 7 π+ from that τ
    ]
    prompt = pl.prompt(ak.Array([ev])).tolist()[0]
    assert prompt == [True, True, True, False, False, True, True, True]


def test_dressing_inside_outside_and_non_prompt_photons():
    p = ak.Array([top_like_event()])
    lep = pl.dressed_leptons(p, radius=0.1)
    assert ak.to_list(ak.num(lep)) == [1]  # the e+ from the B is not prompt
    mu = lep[0, 0]
    assert mu.index == 4
    assert mu.pdgid == -13
    assert mu.charge == 1
    assert list(mu.photons) == [6]
    ev = top_like_event()
    for f in ("px", "py", "pz", "energy"):
        assert mu[f] == pytest.approx(ev[4][f] + ev[6][f], rel=1e-14)
        assert mu[f"bare_{f}"] == ev[4][f]
    assert pl.bare(lep)[0, 0].pt == pytest.approx(40.0)
    assert mu.pt == pytest.approx(math.hypot(ev[4]["px"] + ev[6]["px"], ev[4]["py"] + ev[6]["py"]))
    # all leptons, prompt or not: the e+ appears (and the π0 photons dress the μ too)
    everyone = pl.dressed_leptons(p, radius=0.1, prompt_only=False)
    assert ak.to_list(everyone[0].index) == [4, 9]
    assert ak.to_list(everyone[0, 0].photons) == [6, 15, 16]


def test_photon_near_two_leptons_goes_to_the_nearest_once():
    ev = [
        part(11, 1, -1, -1, pt=30.0, eta=0.0, phi=0.0),     # 0 e-
        part(13, 1, -1, -1, pt=30.0, eta=0.0, phi=0.1),     # 1 μ-
        part(22, 1, -1, -1, pt=4.0, eta=0.0, phi=0.04),     # 2 γ: 0.04 from e, 0.06 from μ
        part(22, 1, -1, -1, pt=2.0, eta=0.0, phi=0.05),     # 3 γ: equally far (mirror in φ)
    ]
    # make photon 3 exactly equidistant: e at φ = -a, μ at φ = +a, photon at φ = 0
    a = 0.05
    ev[0] = part(11, 1, -1, -1, pt=30.0, phi=-a)
    ev[1] = part(13, 1, -1, -1, pt=30.0, phi=a)
    ev[2] = part(22, 1, -1, -1, pt=4.0, phi=-0.01)
    ev[3] = part(22, 1, -1, -1, pt=2.0, phi=0.0)
    ev[3]["py"] = 0.0
    lep = pl.dressed_leptons(ak.Array([ev]), radius=0.1)
    e, mu = lep[0, 0], lep[0, 1]
    assert list(e.photons) == [2, 3]  # the tie goes to the lepton listed first
    assert list(mu.photons) == []
    total = sum(x["px"] for x in ev)
    assert e.px + mu.px == pytest.approx(total, rel=1e-14)  # each photon used once
    assert e.charge == -1
    assert mu.charge == -1


def test_missing_pt_prompt_or_all_and_balance():
    p = ak.Array([top_like_event()])
    ev = top_like_event()
    all_nu = pl.missing_pt(p)
    assert all_nu.px[0] == pytest.approx(ev[5]["px"] + ev[10]["px"], rel=1e-14)
    only_prompt = pl.missing_pt(p, prompt_only=True)
    assert only_prompt.py[0] == pytest.approx(ev[5]["py"], rel=1e-14)
    # a declared invisible id (a toy dark particle, 1000022) counts when named
    extra = ak.Array([[*ev, part(1000022, 1, -1, -1, pt=7.0, phi=-1.0)]])
    with_dark = pl.missing_pt(extra, pdgids=(12, 14, 16, 1000022))
    assert with_dark.px[0] == pytest.approx(all_nu.px[0] + 7.0 * math.cos(-1.0), rel=1e-14)
    # balanced events: missing pT = −(vector sum of the visible stable particles)
    rng = np.random.default_rng(1)
    events = []
    for n in (3, 10, 40):
        vis = [part(211, 1, -1, -1, pt=float(x), eta=float(h), phi=float(f))
               for x, h, f in zip(rng.uniform(1, 30, n), rng.uniform(-3, 3, n),
                                  rng.uniform(-math.pi, math.pi, n), strict=True)]
        sx, sy = sum(v["px"] for v in vis), sum(v["py"] for v in vis)
        nu = part(12, 1, -1, -1, pt=math.hypot(sx, sy), phi=math.atan2(-sy, -sx))
        events.append([*vis, nu])
    met = pl.missing_pt(ak.Array(events))
    for k, ev_ in enumerate(events):
        vis_x = sum(v["px"] for v in ev_[:-1])
        vis_y = sum(v["py"] for v in ev_[:-1])
        assert met.px[k] == pytest.approx(-vis_x, abs=1e-9)
        assert met.py[k] == pytest.approx(-vis_y, abs=1e-9)


def jet_event(b_phi, b_pt=40.0):
    """A spray of stable particles at (η, φ) = (0.5, 1.0) and a B hadron (status 2) at φ = b_phi."""
    rng = np.random.default_rng(5)
    ev = [part(2212, 4, -1, 0, pz=6500.0), part(2212, 4, -1, 0, pz=-6500.0)]
    ev.append(part(523, 2, 0, 1, pt=b_pt + 0.5, eta=0.5, phi=b_phi, m=5.325))  # 2 B*+ → B+ γ
    ev.append(part(521, 2, 1, 2, pt=b_pt, eta=0.5, phi=b_phi, m=5.279))  # 3 B+ (the last B)
    ev.append(part(22, 1, 1, -1, pt=0.5, eta=0.5, phi=b_phi))            # 4
    for _ in range(8):
        ev.append(part(211, 1, 2, -1, pt=float(rng.uniform(2, 8)), eta=0.5 + rng.normal(0, 0.05),
                       phi=1.0 + rng.normal(0, 0.05), m=0.1396))
    for _ in range(6):  # a second, light jet
        ev.append(part(211, 1, 0, -1, pt=float(rng.uniform(3, 9)), eta=-1.0 + rng.normal(0, 0.05),
                       phi=-2.0 + rng.normal(0, 0.05), m=0.1396))
    return ev


def test_ghost_b_label_inside_and_outside_a_jet():
    inside = ak.Array([jet_event(1.0)])
    outside = ak.Array([jet_event(2.5)])
    for p, labelled in ((inside, [True, False]), (outside, [False, False])):
        ghosts = pl.ghost_candidates(p, min_pt=5.0)
        assert ak.to_list(ghosts["b"][0]).index(True) == 3  # the last B, not the B*
        assert sum(ak.to_list(ghosts["b"][0])) == 1
        jets = pl.particle_jets(p, radius=0.4, min_pt=10.0, ghosts=ghosts)
        plain = pl.particle_jets(p, radius=0.4, min_pt=10.0)
        assert ak.to_list(ak.num(jets)) == [2] == ak.to_list(ak.num(plain))
        assert ak.to_list(jets.btag[0]) == labelled
        assert ak.to_list(jets.n_b[0]) == [int(x) for x in labelled]
        assert ak.to_list(jets.constituents) == ak.to_list(plain.constituents)
        for f in ("px", "py", "pz", "energy"):
            a = ak.to_numpy(ak.flatten(jets[f]))
            b = ak.to_numpy(ak.flatten(plain[f]))
            assert np.all(np.abs(a - b) <= 1e-10 * np.abs(b))
    # below the pT threshold there is no ghost
    soft = ak.Array([jet_event(1.0, b_pt=3.0)])
    assert not any(ak.to_list(pl.ghost_candidates(soft, min_pt=5.0)["b"][0]))


def test_jet_constituents_are_particle_indices_and_exclusion_works():
    p = ak.Array([top_like_event()])
    lep = pl.dressed_leptons(p, radius=0.1)
    own = ak.concatenate([ak.unflatten(lep.index, 1, axis=1), lep.photons], axis=2)
    exclude_idx = set(ak.to_list(ak.flatten(own, axis=None)))
    ids = np.abs(ak.to_numpy(ak.flatten(p.pdgid)))
    excl = np.isin(np.arange(len(ids)), list(exclude_idx)) | np.isin(ids, (12, 14, 16))
    jets = pl.particle_jets(p, radius=0.4, exclude=ak.unflatten(excl, [len(ids)]))
    used = sorted(c for j in ak.to_list(jets[0].constituents) for c in j)
    assert used == [7, 9, 12, 13, 15, 16]  # stable, not the dressed μ, its γ or the ν's
    assert ak.all(jets.n_constituents == ak.num(jets.constituents, axis=2))


def test_isolation_of_a_dressed_lepton():
    ev = [
        part(11, 1, -1, -1, pt=40.0, eta=0.0, phi=0.0),       # 0 e-
        part(22, 1, -1, -1, pt=5.0, eta=0.0, phi=0.05),       # 1 γ: dresses the e (own)
        part(211, 1, -1, -1, pt=2.0, eta=0.1, phi=0.1),       # 2 in the cone
        part(211, 1, -1, -1, pt=3.0, eta=-0.2, phi=0.0),      # 3 in the cone
        part(12, 1, -1, -1, pt=9.0, eta=0.0, phi=0.1),        # 4 ν: invisible, not counted
        part(211, 1, -1, -1, pt=7.0, eta=0.5, phi=0.0),       # 5 outside ΔR = 0.3
        part(211, 2, -1, -1, pt=7.0, eta=0.05, phi=0.0),      # 6 not stable
    ]
    p = ak.Array([ev])
    lep = pl.dressed_leptons(p, radius=0.1)
    iso = pl.isolation(lep, p, radius=0.3)
    assert iso[0, 0] == pytest.approx((2.0 + 3.0) / lep[0, 0].pt, rel=1e-12)


def test_pdgid_classes_agree_with_the_particle_package():
    particle = pytest.importorskip("particle")
    from particle import pdgid as ref

    ids = np.array(sorted({int(p.pdgid) for p in particle.Particle.all()}))
    # 9-digit exotic states and nuclei are beyond what the objects need
    ids = ids[np.abs(ids) < 10_000_000]
    assert len(ids) > 500
    mine = pid.is_hadron(ids)
    assert list(ids[mine != np.array([ref.is_hadron(int(i)) for i in ids])]) == []
    hadrons = ids[mine]
    assert all(pid.has_bottom(hadrons) == np.array([ref.has_bottom(int(i)) for i in hadrons]))
    assert all(pid.has_charm(hadrons) == np.array([ref.has_charm(int(i)) for i in hadrons]))
    assert all(pid.is_meson(ids) == np.array([ref.is_meson(int(i)) for i in ids]))
    assert all(pid.is_baryon(ids) == np.array([ref.is_baryon(int(i)) for i in ids]))
    # PDG numbering scheme: B+ 521, Λb 5122, D0 421, K0L 130, K0S 310 are hadrons; quarks,
    # leptons, diquarks (2101) and the gluino (1000021) are not
    assert list(pid.is_hadron([521, 5122, 421, 130, 310, 5, 13, 2101, 1000021])) == \
        [True, True, True, True, True, False, False, False, False]
    assert list(pid.is_c_hadron([421, 541, 511])) == [True, False, False]


def test_jets_have_the_particle_behaviour():
    jets = pl.particle_jets(ak.Array([jet_event(1.0)]), radius=0.4, min_pt=10.0)
    assert ak.all(jets.pt >= 10.0)
    assert isinstance(evtkin.cluster_jets, object)
