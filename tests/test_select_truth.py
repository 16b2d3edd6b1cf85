"""Truth navigation on hand-made LHEF-style records of g g -> t t~ -> (W+ b)(W- b~)."""

from __future__ import annotations

import awkward as ak
import numpy as np
import pytest

from evtkin.select import kinematics as kin
from evtkin.select import truth

# One event written as the file would hold it: (pdgid, status, MOTHUP1, MOTHUP2) with 1-based
# mothers. LHEF 1.0 (hep-ph/0609017), REFERENCES 1.6: incoming partons (0, 0) and status -1; the
# hard-process products point to (1, 2); resonance decay products to (j, j) or, for some writers,
# (j, 0); status 2 marks resonances whose mass is kept, 1 final state.
TTBAR_LINES = [
    (21, -1, 0, 0),  # 1 g
    (21, -1, 0, 0),  # 2 g
    (6, 2, 1, 2),  # 3 t
    (-6, 2, 1, 2),  # 4 t~
    (24, 2, 3, 3),  # 5 W+
    (5, 1, 3, 3),  # 6 b
    (-24, 2, 4, 0),  # 7 W-   (j, 0) convention
    (-5, 1, 4, 4),  # 8 b~
    (-11, 1, 5, 5),  # 9 e+
    (12, 1, 5, 5),  # 10 nu_e
    (1, 1, 7, 7),  # 11 d
    (-2, 1, 7, 0),  # 12 u~  (j, 0) convention
]


def build(lines, momenta):
    """Records as the LHE reader delivers them: mothers 0-based, -1 for none."""
    return [
        {
            "pdgid": pid,
            "status": st,
            "mother1": m1 - 1,
            "mother2": m2 - 1,
            "px": v[0],
            "py": v[1],
            "pz": v[2],
            "energy": v[3],
            "mass": 0.0,
        }
        for (pid, st, m1, m2), v in zip(lines, momenta, strict=False)
    ]


def consistent_momenta(lines, rng):
    """Random final-state momenta; resonances get the sum of their decay products, so the record
    is consistent and a wrong selection of daughters shows up in the sums."""
    n = len(lines)
    mom = [None] * n
    for i, (_, st, _, _) in enumerate(lines):
        if st == 1:
            p3 = rng.normal(0, 40, 3)
            mom[i] = np.array([*p3, np.linalg.norm(p3)])
    for i in reversed(range(n)):  # resonances after their products in this record
        if lines[i][1] == 2:
            kids = [k for k, line in enumerate(lines) if line[2] - 1 == i]
            mom[i] = sum(mom[k] for k in kids)
    mom[0] = np.array([0.0, 0.0, 500.0, 500.0])
    mom[1] = np.array([0.0, 0.0, -500.0, 500.0])
    return mom


@pytest.fixture
def record():
    rng = np.random.default_rng(21)
    ev1 = build(TTBAR_LINES, consistent_momenta(TTBAR_LINES, rng))
    # second event: same physics, decay lines listed in another order
    order = [0, 1, 3, 2, 6, 7, 4, 5, 10, 11, 8, 9]
    remap = {old + 1: new + 1 for new, old in enumerate(order)}
    lines2 = [
        (
            TTBAR_LINES[o][0],
            TTBAR_LINES[o][1],
            remap.get(TTBAR_LINES[o][2], 0),
            remap.get(TTBAR_LINES[o][3], 0),
        )
        for o in order
    ]
    ev2 = build(lines2, consistent_momenta(lines2, rng))
    # third: Drell–Yan-like event without tops; fourth: empty
    ev3 = build(
        [(2, -1, 0, 0), (-2, -1, 0, 0), (13, 1, 1, 2), (-13, 1, 1, 2)],
        [
            np.array([0, 0, 50.0, 50]),
            np.array([0, 0, -40.0, 40]),
            np.array([30.0, 0, 10, np.hypot(30, 10)]),
            np.array([-30.0, 0, 0, 30]),
        ],
    )
    return ak.Array([ev1, ev2, ev3, []])


def test_daughters_of_top_and_antitop(record):
    top_kids = truth.daughters(record, 6, signed=True)
    assert ak.to_list(top_kids.pdgid) == [[24, 5], [24, 5], [], []]
    both = truth.daughters(record, 6)  # |id|: t and t~
    assert ak.to_list(both.pdgid) == [[24, 5, -24, -5], [-24, -5, 24, 5], [], []]
    # the b from the top: W and b momenta add up to the top (four-momentum conservation)
    tops = truth.resonance(record, 6, signed=True)
    s = kin.sum_p4(top_kids)
    np.testing.assert_allclose(ak.flatten(tops.px), s.px[:2])
    np.testing.assert_allclose(ak.flatten(tops.energy), s.E[:2])


def test_both_mother_conventions_and_hard_process_range(record):
    w_kids = truth.daughters(record, [24])
    assert ak.to_list(w_kids.pdgid) == [[-11, 12, 1, -2], [1, -2, -11, 12], [], []]
    # products of the 2 -> n process point to both incoming partons (range 1..2)
    incoming = record.status == -1
    assert ak.to_list(record[truth.children_of(record, incoming)].pdgid) == [
        [6, -6],
        [-6, 6],
        [13, -13],
        [],
    ]


def test_descends_from_follows_chains(record):
    from_top = truth.descends_from(record, [6], signed=True)
    assert ak.to_list(record[from_top].pdgid) == [[24, 5, -11, 12], [24, 5, -11, 12], [], []]
    leptons_from_w = record[truth.descends_from(record, "w_bosons") & (np.abs(record.pdgid) == 11)]
    assert ak.to_list(leptons_from_w.pdgid) == [[-11], [-11], [], []]
    # everything descends from the incoming gluons except the gluons themselves
    assert ak.to_list(ak.sum(truth.descends_from(record, record.status == -1), axis=1)) == [
        10,
        10,
        2,
        0,
    ]
    # one generation only
    assert ak.to_list(ak.sum(truth.descends_from(record, 6, max_depth=1), axis=1)) == [4, 4, 0, 0]


def test_resonance_reads_four_momenta(record):
    w = truth.resonance(record, 24)
    assert ak.to_list(ak.num(w)) == [2, 2, 0, 0]
    wplus = ak.firsts(truth.resonance(record, 24, signed=True))
    lep_nu = truth.daughters(record, 24, signed=True)
    np.testing.assert_allclose(kin.mass(wplus)[:2], kin.mass(kin.sum_p4(lep_nu))[:2], rtol=1e-12)
    assert wplus[2] is None
    assert ak.to_list(ak.num(truth.resonance(record, 24, status=1))) == [0, 0, 0, 0]


def test_mother_field(record):
    mothers = truth.mother_field(record, "pdgid")
    assert ak.to_list(mothers[0]) == [0, 0, 21, 21, 6, 6, -6, -6, 24, 24, -24, -24]
    assert ak.to_list(mothers[2]) == [0, 0, 2, 2]
