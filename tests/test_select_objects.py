"""Object selection, isolation, overlap removal and missing pT on small hand-made events."""

from __future__ import annotations

import math

import awkward as ak
import numpy as np
import pytest
from particle import Particle

from evtkin.errors import ConfigError
from evtkin.select import kinematics as kin
from evtkin.select import objects as O


def obj(pt, eta, phi, pdgid, status=1, m=0.0):
    px, py, pz = pt * math.cos(phi), pt * math.sin(phi), pt * math.sinh(eta)
    return {
        "px": px,
        "py": py,
        "pz": pz,
        "energy": math.sqrt(px**2 + py**2 + pz**2 + m**2),
        "mass": m,
        "pdgid": pdgid,
        "status": status,
    }


def test_pdg_classes_agree_with_particle_package():
    # PDG Monte Carlo numbering, through the `particle` package's tables
    names = {
        pid: Particle.from_pdgid(pid).name
        for c in ("charged_leptons", "neutrinos")
        for pid in O.PDG_CLASSES[c]
    }
    assert names == {11: "e-", 13: "mu-", 15: "tau-", 12: "nu(e)", 14: "nu(mu)", 16: "nu(tau)"}
    assert Particle.from_pdgid(O.PDG_CLASSES["b_quarks"][0]).name == "b"
    assert Particle.from_pdgid(O.PDG_CLASSES["gluons"][0]).name == "g"
    assert Particle.from_pdgid(O.PDG_CLASSES["photons"][0]).name == "gamma"
    assert {Particle.from_pdgid(i).name for i in O.PDG_CLASSES["light_quarks"]} == {
        "d",
        "u",
        "s",
        "c",
    }
    assert all(Particle.from_pdgid(i).charge != 0 for i in O.PDG_CLASSES["charged_leptons"])
    assert all(Particle.from_pdgid(i).charge == 0 for i in O.PDG_CLASSES["neutrinos"])


def test_select_by_class_status_and_thresholds():
    ev = ak.Array(
        [
            [
                obj(20, 0.5, 0.0, 11),
                obj(40, -1.0, 1.0, -13),
                obj(8, 0.0, 2.0, 13),
                obj(60, 2.8, -1.0, -11),
                obj(90, 0.0, 0.0, 6, status=2),
                obj(30, 0.1, 3.0, 12),
                obj(25, 0.2, 0.5, 11, status=-1),
            ],
            [],
        ]
    )
    lep = O.select(ev, pdgids="charged_leptons", status=1, pt_min=10.0, abs_eta_max=2.5)
    assert ak.to_list(lep.pdgid) == [[-13, 11], []]  # pT ordered, both signs, status 1 only
    assert ak.to_list(O.select(ev, pdgids=[-11], signed=True).pdgid) == [[-11], []]
    assert ak.to_list(O.select(ev, pdgids="charged_leptons", status=[1, -1], sort=False).pdgid) == [
        [11, -13, 13, -11, 11],
        [],
    ]
    # |y| cut on a massive object differs from |η|: y < η for m > 0
    heavy = ak.Array([[obj(20, 2.4, 0.0, 23, m=90.0)]])
    assert kin.rapidity(heavy)[0, 0] < 2.0
    assert ak.num(O.select(heavy, abs_rapidity_max=2.0))[0] == 1
    assert ak.num(O.select(heavy, abs_eta_max=2.0))[0] == 0
    with pytest.raises(ConfigError, match="unknown particle class 'leptonz'"):
        O.select(ev, pdgids="leptonz")


def test_select_with_pt_eta_phi_mass_records_and_sort():
    ev = ak.zip(
        {
            "pt": [[5.0, 50.0, 20.0]],
            "eta": [[0.0, 1.0, -1.0]],
            "phi": [[0.0, 1.0, 2.0]],
            "mass": [[0.0, 4.0, 0.0]],
        },
        with_name="Momentum4D",
    )
    assert ak.to_list(O.select(ev, pt_min=10.0).pt) == [[50.0, 20.0]]
    assert ak.to_list(O.sort_by_pt(ev, ascending=True).pt) == [[5.0, 20.0, 50.0]]


def test_isolation_with_self_exclusion_and_phi_wrap():
    lep = [obj(30, 0.0, 3.1, 11), obj(25, 1.5, 0.0, 13)]
    others = [obj(10, 0.0, -3.1, 21), obj(10, 0.0, 0.0, 21)]  # first one is ΔR 0.083 away (wrap)
    ev_lep = ak.Array([lep])
    ev_all = ak.Array([lep + others])
    assert ak.to_list(O.isolated(ev_lep, ak.Array([others]), 0.4)) == [[False, True]]
    # the collection itself contains the leptons: they must not veto themselves
    assert ak.to_list(O.isolated(ev_lep, ev_all, 0.4)) == [[False, True]]
    assert ak.to_list(O.isolated(ev_lep, ev_lep, 1.6)) == [[True, True]]  # ΔR(e, μ) = 3.44
    assert ak.to_list(O.isolated(ev_lep, ev_all, 1.6)) == [
        [False, False]
    ]  # μ has the φ=0 gluon at 1.5
    assert ak.to_list(O.isolated(ev_lep, ev_all, 0.05)) == [[True, True]]


def test_remove_overlaps_in_declared_order():
    # hand-made: e at (0, 0); μ at (0, 0.3); jets at (0, 0.1), (0, 0.65), (2, 2)
    ev = {
        "electrons": ak.Array([[obj(30, 0.0, 0.0, 11)], []]),
        "muons": ak.Array([[obj(30, 0.0, 0.3, 13)], [obj(30, 0.0, 0.3, 13)]]),
        "jets": ak.Array(
            [
                [obj(40, 0.0, 0.1, 21), obj(40, 0.0, 0.65, 1), obj(40, 2.0, 2.0, 2)],
                [obj(40, 0.0, 0.1, 21)],
            ]
        ),
    }
    cleaned = O.remove_overlaps(ev["jets"], ev["muons"], 0.4)
    assert ak.to_list(cleaned.pdgid) == [[2], []]
    # order 1: electrons near muons are dropped first, so jets are only cleaned against the muon
    a = O.apply_overlap_removal(ev, [("electrons", "muons", 0.4), ("jets", "electrons", 0.4)])
    assert ak.to_list(ak.num(a["electrons"])) == [0, 0]
    assert ak.to_list(a["jets"].pdgid) == [[21, 1, 2], [21]]
    # order 2: jets cleaned against the electron first
    b = O.apply_overlap_removal(ev, [("jets", "electrons", 0.4), ("electrons", "muons", 0.4)])
    assert ak.to_list(b["jets"].pdgid) == [[1, 2], [21]]
    assert ak.to_list(ev["jets"].pdgid[0]) == [21, 1, 2]  # inputs untouched
    with pytest.raises(ConfigError, match="step 1: unknown collection 'taus'"):
        O.apply_overlap_removal(ev, [("taus", "jets", 0.4)])


def test_missing_pt_from_neutrinos():
    nus = ak.Array(
        [[obj(30, 0.5, 0.0, 12), obj(40, -1.0, math.pi / 2, -14)], [], [obj(10, 0, -1.0, 16)]]
    )
    met = O.missing_pt(nus)
    # vector sum (30, 40) -> 50 GeV at φ = atan2(40, 30) (3-4-5 triangle)
    assert ak.to_list(met.pt) == pytest.approx([50.0, 0.0, 10.0])
    assert met.phi[0] == pytest.approx(math.atan2(40, 30))
    assert met.phi[2] == pytest.approx(-1.0)
    np.testing.assert_allclose(kin.pt(met), met.pt)
