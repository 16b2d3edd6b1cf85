"""Toy Drell-Yan sampler: q qbar -> Z/gamma* -> l+ l- (l = e, mu) at leading order.

Physics (REFERENCES 2.4, textbook LO form):
``dsigma/dOmega = alpha^2/(4 s^) (1/N_c) [A0 (1 + cos^2) + A1 cos]`` with

* ``A0 = Q_q^2 - 2 Q_q V_l V_q chi1 + (A_l^2 + V_l^2)(A_q^2 + V_q^2) chi2``,
* ``A1 = -4 Q_q A_l A_q chi1 + 8 A_l V_l A_q V_q chi2``,
* ``chi1 = kappa s^ (s^ - M_Z^2)/((s^ - M_Z^2)^2 + Gamma_Z^2 M_Z^2)``,
  ``chi2 = kappa^2 s^2/((s^ - M_Z^2)^2 + Gamma_Z^2 M_Z^2)``,
  ``kappa = sqrt2 G_F M_Z^2/(4 pi alpha)``,
* ``V_f = T3_f - 2 Q_f sin^2(theta_W)``, ``A_f = T3_f``; theta = angle between l- and the
  incoming quark in the dilepton rest frame.

So the Z line shape is the relativistic Breit-Wigner (fixed width) of the propagator,
interfering with the photon, times the toy parton luminosity. Quarks d, u, s, c from the toy
densities of :mod:`evtkin.toy.pdfs`; scale mu_R = mu_F = m_ll (the LO cross section has no
alpha_s, so mu_R variations give ratio 1 and mu_F variations move the densities).
Process id 11: e+ e-; 13: mu+ mu- (equal shares).

Record (5 particles, 0-based mothers): 0, 1 incoming quark/antiquark (status -1; colour tag
501 flows from the quark to the antiquark); 2 the Z/gamma* (pdg 23, status 2, mothers 0, 1,
mass m_ll); 3 l- and 4 l+ (status 1, mothers 2, 2).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import awkward as ak
import numpy as np

from evtkin.toy import constants as C
from evtkin.toy.driver import Trials
from evtkin.toy.kinematics import decay_in_frame
from evtkin.toy.pdfs import ToyPDF, alpha_s
from evtkin.toy.record import Variations, make_events

__all__ = ["DrellYanSampler", "angular_coefficients"]

# (charge, weak isospin T3) per PDG code (textbook)
_QUARKS = {1: (-1.0 / 3.0, -0.5), 2: (2.0 / 3.0, 0.5), 3: (-1.0 / 3.0, -0.5), 4: (2.0 / 3.0, 0.5)}
_LEPTON = (-1.0, -0.5)


def angular_coefficients(
    shat: np.ndarray, quark: int, alpha: float = C.ALPHA_EM_MZ, sin2w: float = C.SIN2_THETA_W
) -> tuple[np.ndarray, np.ndarray]:
    """(A0, A1) of the LO q qbar -> gamma*/Z -> l+ l- angular distribution (REFERENCES 2.4)."""
    qq, t3q = _QUARKS[quark]
    ql, t3l = _LEPTON
    vq, aq = t3q - 2.0 * qq * sin2w, t3q
    vl, al = t3l - 2.0 * ql * sin2w, t3l
    kappa = np.sqrt(2.0) * C.G_FERMI * C.M_Z**2 / (4.0 * np.pi * alpha)
    den = (shat - C.M_Z**2) ** 2 + (C.W_Z * C.M_Z) ** 2
    chi1 = kappa * shat * (shat - C.M_Z**2) / den
    chi2 = kappa**2 * shat**2 / den
    a0 = qq**2 - 2.0 * qq * vl * vq * chi1 + (al**2 + vl**2) * (aq**2 + vq**2) * chi2
    a1 = -4.0 * qq * al * aq * chi1 + 8.0 * al * vl * aq * vq * chi2
    return a0, a1


@dataclass
class DrellYanSampler:
    """LO q qbar -> Z/gamma* -> l+ l- in a dilepton mass window (see module docstring)."""

    sqrt_s: float = 13000.0
    m_low: float = 60.0
    m_high: float = 120.0
    pdf: ToyPDF = field(default_factory=ToyPDF)
    process_ids: tuple[int, ...] = (11, 13)

    def __post_init__(self) -> None:
        if not 0 < self.m_low < self.m_high < self.sqrt_s:
            raise ValueError("need 0 < m_low < m_high < sqrt_s")
        self.beam_energy = self.sqrt_s / 2.0
        self.variations = Variations.default(alpha_s_power=0, pdf=self.pdf)

    def trials(self, rng: np.random.Generator, n: int) -> Trials:
        s = self.sqrt_s**2
        s_lo, s_hi = self.m_low**2, self.m_high**2
        mg = C.M_Z * C.W_Z
        t_lo, t_hi = np.arctan((s_lo - C.M_Z**2) / mg), np.arctan((s_hi - C.M_Z**2) / mg)
        # importance density for s^: half Breit-Wigner, half 1/s^ (photon)
        use_bw = rng.random(n) < 0.5
        u = rng.random(n)
        shat = np.where(
            use_bw, C.M_Z**2 + mg * np.tan(t_lo + u * (t_hi - t_lo)), s_lo * (s_hi / s_lo) ** u
        )
        p_s = 0.5 * mg / (((shat - C.M_Z**2) ** 2 + mg * mg) * (t_hi - t_lo)) + 0.5 / (
            shat * np.log(s_hi / s_lo)
        )
        tau = shat / s
        ymax = -0.5 * np.log(tau)
        y = (2.0 * rng.random(n) - 1.0) * ymax
        cos = 2.0 * rng.random(n) - 1.0  # l- direction w.r.t. beam 1 in the dilepton frame
        x1, x2 = np.sqrt(tau) * np.exp(y), np.sqrt(tau) * np.exp(-y)
        mu = np.sqrt(shat)
        f1, f2 = self.pdf.densities(x1, mu), self.pdf.densities(x2, mu)
        norm = np.pi * C.ALPHA_EM_MZ**2 / (2.0 * shat * 3.0)  # dsigma/dcos prefactor, N_c = 3
        parts = []
        for q in _QUARKS:
            a0, a1 = angular_coefficients(shat, q)
            parts.append(f1[q] * f2[-q] * norm * (a0 * (1 + cos**2) + a1 * cos))  # q from beam 1
            parts.append(f1[-q] * f2[q] * norm * (a0 * (1 + cos**2) - a1 * cos))  # q from beam 2
        stack = np.stack(parts, axis=1)
        total = stack.sum(axis=1)
        # d x1 d x2 = d tau d y; tau = s^/s; two lepton flavours (factor 2)
        weight = 2.0 * total * C.HBARC2_PB / (p_s * s * (1.0 / (2.0 * ymax)) * 0.5)
        cum = np.cumsum(stack, axis=1)
        channel = np.minimum((rng.random(n)[:, None] * total[:, None] > cum).sum(axis=1),
                             stack.shape[1] - 1)  # fmt: skip
        quark = np.asarray(list(_QUARKS))[channel // 2]
        id1 = np.where(channel % 2 == 0, quark, -quark)
        lepton = np.where(rng.random(n) < 0.5, 11, 13)
        return Trials(weight, lepton, {"x1": x1, "x2": x2, "cos": cos, "mu": mu,
                                       "id1": id1, "id2": -id1})  # fmt: skip

    def build(self, tr: Trials, rng: np.random.Generator, weight: np.ndarray) -> ak.Array:
        d = tr.data
        n = len(weight)
        eb = self.beam_energy
        x1, x2 = d["x1"], d["x2"]
        p = np.zeros((n, 5, 4))
        p[:, 0, 2], p[:, 0, 3] = x1 * eb, x1 * eb
        p[:, 1, 2], p[:, 1, 3] = -x2 * eb, x2 * eb
        p[:, 2] = p[:, 0] + p[:, 1]
        lep = tr.process_id
        m_l = np.where(lep == 11, C.M_E, C.M_MU)
        phi = rng.uniform(0.0, 2.0 * np.pi, n)
        zaxis = np.tile([0.0, 0.0, 1.0], (n, 1))
        p[:, 3], p[:, 4] = decay_in_frame(p[:, 2], m_l, m_l, d["cos"], phi, zaxis)
        pdg = np.stack([d["id1"], d["id2"], np.full(n, 23), lep, -lep], axis=1)
        masses = np.stack([0 * m_l, 0 * m_l, d["mu"], m_l, m_l], axis=1)
        status = np.tile(np.array([-1, -1, 2, 1, 1]), (n, 1))
        mothers = np.tile(np.array([[-1, -1], [-1, -1], [0, 1], [2, 2], [2, 2]]), (n, 1, 1))
        colors = np.zeros((n, 5, 2), dtype=np.int64)
        q1 = d["id1"] > 0
        colors[:, 0] = np.where(q1[:, None], [501, 0], [0, 501])
        colors[:, 1] = np.where(q1[:, None], [0, 501], [501, 0])
        ratios = self.variations.ratios(x1, x2, d["id1"], d["id2"], d["mu"])
        return make_events(
            pdgid=pdg, status=status, mothers=mothers, colors=colors, momenta=p, masses=masses,
            process_id=lep, weight=weight, scale=d["mu"], alpha_qed=C.ALPHA_EM_MZ,
            alpha_qcd=alpha_s(d["mu"]), weights=weight[:, None] * ratios,
        )  # fmt: skip
