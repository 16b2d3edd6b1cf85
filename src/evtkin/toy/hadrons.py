"""Particle data for the toy shower: masses, proper decay lengths, charges and the toy
decay tables. Masses and lifetimes are PDG 2024 values (S. Navas et al. (Particle Data
Group), Phys. Rev. D 110, 030001 (2024)) as tabulated by the ``particle`` package 1.1
(copied here: the package is not a run-time dependency); tests check them against it.
The decay tables are the toy model's own, charge-conserving, with a few PDG branching
fractions where a test uses them (named beside each).
"""

from __future__ import annotations

#: mass in GeV
MASS: dict[int, float] = {
    22: 0.0, 11: 0.51099895069e-3, 13: 0.1056583755, 15: 1.77693,
    12: 0.0, 14: 0.0, 16: 0.0, 21: 0.0,
    111: 0.1349768, 211: 0.13957039, 130: 0.497611, 310: 0.497611, 321: 0.493677,
    2212: 0.93827208943, 2112: 0.9395654219,
    411: 1.86966, 421: 1.86484, 431: 1.96835, 4122: 2.28646,
    511: 5.27972, 521: 5.27941, 531: 5.36693, 5122: 5.61957,
}  # fmt: skip

#: c tau in mm of the particles the toy decays (everything else is stable)
CTAU_MM: dict[int, float] = {
    111: 2.5266e-5,  # tau = 8.43e-17 s
    310: 26.844,  # K0S
    15: 0.087043,  # tau lepton, 290.3 fs
    411: 0.30978, 421: 0.12302, 431: 0.15029, 4122: 0.060753,
    511: 0.45310, 521: 0.49074, 531: 0.45415, 5122: 0.43919,
}  # fmt: skip

#: electric charge in units of e of the particle (the antiparticle has the opposite)
CHARGE: dict[int, int] = {
    22: 0, 11: -1, 13: -1, 15: -1, 12: 0, 14: 0, 16: 0,
    111: 0, 211: 1, 130: 0, 310: 0, 321: 1, 2212: 1, 2112: 0,
    411: 1, 421: 0, 431: 1, 4122: 1, 511: 0, 521: 1, 531: 0, 5122: 0,
}  # fmt: skip

SELF_CONJUGATE = frozenset((22, 111, 130, 310, 21, 23))


def conj(pdg: int) -> int:
    return pdg if pdg in SELF_CONJUGATE else -pdg


def mass(pdg: int) -> float:
    return MASS[abs(pdg)]


def charge(pdg: int) -> int:
    q = CHARGE.get(abs(pdg), 0)
    return q if pdg > 0 else -q


def unstable(pdg: int) -> bool:
    return abs(pdg) in CTAU_MM


def ctau(pdg: int) -> float:
    return CTAU_MM[abs(pdg)]


# pi0 -> gamma gamma: PDG 2024 98.823 %; the Dalitz decay e+ e- gamma 1.174 % (the rest,
# 0.003 %, folded into the Dalitz channel here)
BR_PI0_GG = 0.98823

#: toy decay channels (branching fraction, products) for the particle with this pdg id;
#: the antiparticle decays into the conjugate products
DECAYS: dict[int, list[tuple[float, tuple[int, ...]]]] = {
    111: [(BR_PI0_GG, (22, 22)), (1.0 - BR_PI0_GG, (11, -11, 22))],
    # K0S -> pi+ pi- 69.20 %, pi0 pi0 30.69 % (PDG 2024), renormalised
    310: [(0.6920, (211, -211)), (0.3080, (111, 111))],
    # tau-: leptonic 17.8 % + 17.4 % (PDG 2024), the hadronic modes lumped (toy)
    15: [(0.178, (16, 11, -12)), (0.174, (16, 13, -14)), (0.108, (16, -211)),
         (0.255, (16, -211, 111)), (0.095, (16, -211, 111, 111)),
         (0.190, (16, -211, 211, -211))],
    # charm hadrons (toy)
    421: [(0.30, (-321, 211)), (0.35, (-321, 211, 111)), (0.20, (-321, 211, 211, -211)),
          (0.15, (-321, -11, 12))],
    411: [(0.50, (-321, 211, 211)), (0.20, (310, 211)), (0.30, (-321, 211, 211, 111))],
    431: [(0.50, (321, -321, 211)), (0.20, (211, 211, -211)), (0.30, (310, 321))],
    4122: [(0.60, (2212, -321, 211)), (0.20, (2212, 310)), (0.20, (2212, -321, 211, 111))],
}  # fmt: skip

# b hadrons, given for the b-quark states (B0bar, B-, Bs0bar, Lambda_b0): a charm hadron,
# and semileptonically (10.5 % per light lepton flavour, toy; PDG 2024 inclusive
# B -> X l nu ~ 10.5 %) a lepton and an antineutrino, else pions
_B_TO_C = {-511: 411, -521: 421, -531: 431, 5122: 4122}
BR_SEMILEPTONIC = 0.105


def b_decays(pdg: int) -> list[tuple[float, tuple[int, ...]]]:
    """Channels of a b hadron (pdg of the b-quark state or its conjugate)."""
    own = pdg in _B_TO_C
    b = pdg if own else conj(pdg)
    cc = _B_TO_C[b]
    q = charge(b) - charge(cc)  # charge the rest must carry (0 or -1)
    pion = -211 if q == -1 else 111
    chans: list[tuple[float, tuple[int, ...]]] = [
        (BR_SEMILEPTONIC, (cc, 11, -12)),
        (BR_SEMILEPTONIC, (cc, 13, -14)),
    ]
    rest = 1.0 - 2 * BR_SEMILEPTONIC
    for frac, extra in ((0.35, ()), (0.35, (111,)), (0.30, (211, -211))):
        chans.append((rest * frac, (cc, pion, *extra)))
    return chans if own else [(f, tuple(conj(x) for x in prods)) for f, prods in chans]


B_HADRONS = (511, 521, 531, 5122)
# b-quark hadronisation fractions (toy, close to the measured f_u = f_d ~ 0.40, f_s ~ 0.10,
# baryons ~ 0.10 at high energy: common practice values)
B_FRACTIONS = (0.40, 0.40, 0.10, 0.10)

#: light hadrons made in fragmentation and the underlying event, with toy fractions
LIGHT: tuple[tuple[int, float], ...] = (
    (211, 0.27), (-211, 0.27), (111, 0.28), (321, 0.035), (-321, 0.035), (130, 0.03),
    (310, 0.03), (2212, 0.012), (-2212, 0.012), (2112, 0.0095), (-2112, 0.0095),
)  # fmt: skip
