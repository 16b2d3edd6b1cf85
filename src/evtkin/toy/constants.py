"""Physical constants used by the toy sampler, each with its source.

Masses and widths in GeV. "PDG 2024" is S. Navas et al. (Particle Data Group),
Phys. Rev. D 110, 030001 (2024).
"""

from __future__ import annotations

import math

# --- masses and widths (GeV) ---
M_TOP = 172.57  # PDG 2024, direct measurements average
W_TOP = 1.42  # PDG 2024
M_W = 80.3692  # PDG 2024
W_W = 2.085  # PDG 2024
M_Z = 91.1880  # PDG 2024
W_Z = 2.4955  # PDG 2024
M_B = 4.78  # PDG 2024 quark-mass review: b pole mass 4.78 +- 0.06 GeV (from memory)
M_E = 0.51099895e-3  # PDG 2024
M_MU = 0.1056583755  # PDG 2024
M_TAU = 1.77693  # PDG 2024 (1776.93 +- 0.09 MeV, from memory)

# --- couplings ---
ALPHA_S_MZ = 0.1180  # PDG 2024 world average alpha_s(m_Z) = 0.1180 +- 0.0009
# common practice for LO Drell-Yan; REFERENCES 2.4 test numbers use 1/128
ALPHA_EM_MZ = 1.0 / 128.0
SIN2_THETA_W = 0.23153  # PDG 2024 effective leptonic sin^2(theta_eff) = 0.23153 +- 0.00004
G_FERMI = 1.1663788e-5  # GeV^-2, PDG 2024
HBARC2_PB = 0.3893793721e9  # (hbar c)^2 in GeV^2 pb, PDG 2024 physical constants

# --- W branching ratios: PDG 2024 W summary table (from memory) ---
# e nu 10.71 %, mu nu 10.63 %, tau nu 11.38 %, hadrons 67.41 %; renormalised to sum to 1
_BR_RAW = {"e": 0.1071, "mu": 0.1063, "tau": 0.1138, "had": 0.6741}
_BR_SUM = sum(_BR_RAW.values())
BR_W: dict[str, float] = {k: v / _BR_SUM for k, v in _BR_RAW.items()}

# CKM magnitudes for splitting W -> hadrons: PDG 2024 CKM review (from memory)
V_UD, V_US, V_CD, V_CS = 0.97367, 0.22431, 0.221, 0.975

# hadronic W decays as (up-type, down-type) pairs with relative |V|^2
W_HADRONIC: tuple[tuple[int, int, float], ...] = (
    (2, 1, V_UD**2),
    (2, 3, V_US**2),
    (4, 1, V_CD**2),
    (4, 3, V_CS**2),
)

LEPTON_MASS: dict[int, float] = {11: M_E, 13: M_MU, 15: M_TAU}

# LO W helicity fractions with m_b = 0 (REFERENCES 2.6; textbook):
# F0 = m_t^2/(m_t^2 + 2 m_W^2), F_L = 2 m_W^2/(m_t^2 + 2 m_W^2), F_R = 0


def helicity_fractions(m_top: float | object, m_w: float | object) -> tuple[object, object]:
    """LO (F0, F_L) for t -> W b with massless b (works on floats and numpy arrays)."""
    mt2 = m_top * m_top  # type: ignore[operator]
    mw2 = m_w * m_w  # type: ignore[operator]
    den = mt2 + 2.0 * mw2
    return mt2 / den, 2.0 * mw2 / den


TOY_NOTICE = (
    "evtkin TOY DATA - made by the evtkin toy sampler for demos and tests.\n"
    "It is NOT a physics prediction: leading-order matrix elements, toy parton densities,\n"
    "no parton shower, no higher orders. Never quote numbers derived from it as results."
)

PI = math.pi
