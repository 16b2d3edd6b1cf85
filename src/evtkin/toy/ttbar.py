"""Toy top-pair sampler: p p -> t tbar at leading order, tops decayed to W b, W to leptons/quarks.

Physics (all leading order; see REFERENCES 2.2, 2.3, 2.6, 2.7):

* Hard process g g -> t tbar (process id 1) and q qbar -> t tbar (process id 2, q = d, u, s, c)
  with the textbook differential cross sections dsigma/dt of Glück, Owens, Reya, PRD 17 (1978)
  2324 and Combridge, NPB 151 (1979) 429; their integrals reproduce the closed forms
  ``sigma_qq = 8 pi as^2/(27 s) beta (1 + rho/2)`` and
  ``sigma_gg = pi as^2/(3 s) [(1 + rho + rho^2/16) ln((1+beta)/(1-beta))
  - beta (7/4 + 31 rho/16)]``.
* Toy parton densities and one-loop alpha_s from :mod:`evtkin.toy.pdfs`; central scale
  ``mu_R = mu_F = m_T(top) = sqrt(m_t^2 + pT^2)``.
* Narrow-width approximation: the hard process is computed with on-shell tops; each top then
  gets a mass from the relativistic Breit-Wigner (REFERENCES 2.3) in ``m_t +- 15 Gamma_t``
  (with m1 + m2 < sqrt(s^)), and the pair is rebuilt in the parton rest frame with the same
  direction (momentum reshuffling). Top spins are not correlated (each decays isotropically).
* t -> W+ b: W mass from the Breit-Wigner in ``m_W +- 15 Gamma_W`` (below m_t - m_b), two-body
  kinematics (PDG "Kinematics" review). W decay angle theta* of the down-type fermion (l+, or
  dbar-type antiquark; l- or d-type quark for W-) in the W rest frame w.r.t. the W direction
  in the top rest frame: ``(3/4) sin^2 F0 + (3/8)(1 - cos)^2 F_L + (3/8)(1 + cos)^2 F_R`` with LO
  fractions F0 = m_t^2/(m_t^2 + 2 m_W^2), F_L = 1 - F0, F_R = 0 (REFERENCES 2.6).
* W branching ratios from PDG 2024 (see :mod:`evtkin.toy.constants`); hadronic decays split by
  |V_CKM|^2.
* Optional "deformation": every weight times ``1 + c s^/Lambda^2`` (a contact-interaction-like
  enhancement of the high-mass tail), for comparison demos.

Record (12 particles, 0-based mothers): 0, 1 incoming partons (status -1); 2 t, 3 tbar (status 2,
mothers 0, 1); 4 W+ (2, mother 2); 5 b (1, mother 2); 6 W- (2, mother 3); 7 bbar (1, mother 3);
8, 9 W+ daughters (mother 4); 10, 11 W- daughters (mother 6). Colour tags start at 501.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import awkward as ak
import numpy as np

from evtkin.toy import constants as C
from evtkin.toy.driver import Trials
from evtkin.toy.kinematics import boost, decay_in_frame, sample_breit_wigner, two_body_momentum
from evtkin.toy.pdfs import ToyPDF, alpha_s
from evtkin.toy.record import Variations, make_events

__all__ = [
    "TTbarSampler",
    "dsigma_dt_gg",
    "dsigma_dt_qq",
    "sigma_gg",
    "sigma_qq",
]

PROC_GG, PROC_QQ = 1, 2
QUARKS = (1, 2, 3, 4)
N_WINDOW = 15.0  # Breit-Wigner window in units of the width
TAU_POWER = 1.6  # importance sampling of tau = x1 x2 with density ~ tau^-TAU_POWER


def sigma_qq(shat: np.ndarray, a_s: np.ndarray | float, m: float = C.M_TOP) -> np.ndarray:
    """sigma(q qbar -> Q Qbar) in GeV^-2 (Glück-Owens-Reya 1978; Combridge 1979)."""
    rho = 4.0 * m * m / shat
    beta = np.sqrt(np.maximum(1.0 - rho, 0.0))
    return 8.0 * np.pi * a_s**2 / (27.0 * shat) * beta * (1.0 + rho / 2.0)


def sigma_gg(shat: np.ndarray, a_s: np.ndarray | float, m: float = C.M_TOP) -> np.ndarray:
    """sigma(g g -> Q Qbar) in GeV^-2 (Glück-Owens-Reya 1978; Combridge 1979)."""
    rho = 4.0 * m * m / shat
    beta = np.sqrt(np.maximum(1.0 - rho, 0.0))
    log = np.log((1.0 + beta) / (1.0 - beta))
    return np.pi * a_s**2 / (3.0 * shat) * (
        (1.0 + rho + rho * rho / 16.0) * log - beta * (7.0 / 4.0 + 31.0 * rho / 16.0)
    )


def dsigma_dt_qq(s: np.ndarray, t: np.ndarray, a_s: np.ndarray | float, m: float = C.M_TOP
                 ) -> np.ndarray:
    """dsigma/dt(q qbar -> Q Qbar) in GeV^-4 (Combridge 1979)."""
    m2 = m * m
    u = 2.0 * m2 - s - t
    out: np.ndarray = 4.0 * np.pi * a_s**2 / (9.0 * s * s) * (
        ((m2 - t) ** 2 + (m2 - u) ** 2 + 2.0 * m2 * s) / (s * s)
    )
    return out


def dsigma_dt_gg(s: np.ndarray, t: np.ndarray, a_s: np.ndarray | float, m: float = C.M_TOP
                 ) -> np.ndarray:
    """dsigma/dt(g g -> Q Qbar) in GeV^-4 (Combridge 1979)."""
    m2 = m * m
    u = 2.0 * m2 - s - t
    t1, u1 = m2 - t, m2 - u
    out: np.ndarray = np.pi * a_s**2 / (8.0 * s * s) * (
        6.0 * t1 * u1 / (s * s)
        - m2 * (s - 4.0 * m2) / (3.0 * t1 * u1)
        + 4.0 / 3.0 * (t1 * u1 - 2.0 * m2 * (m2 + t)) / (t1 * t1)
        + 4.0 / 3.0 * (t1 * u1 - 2.0 * m2 * (m2 + u)) / (u1 * u1)
        - 3.0 * (t1 * u1 + m2 * (u - t)) / (s * t1)
        - 3.0 * (t1 * u1 + m2 * (t - u)) / (s * u1)
    )
    return out


@dataclass(frozen=True)
class Deformation:
    """Weight factor ``1 + c s^/Lambda^2`` (s^ = parton-pair invariant mass squared)."""

    c: float = 1.0
    lam: float = 3000.0  # GeV

    def factor(self, shat: np.ndarray) -> np.ndarray:
        return 1.0 + self.c * shat / (self.lam * self.lam)


@dataclass
class TTbarSampler:
    """LO top-pair production and decay (see module docstring)."""

    sqrt_s: float = 13000.0
    pdf: ToyPDF = field(default_factory=ToyPDF)
    deformation: Deformation | None = None
    process_ids: tuple[int, ...] = (PROC_GG, PROC_QQ)

    def __post_init__(self) -> None:
        self.beam_energy = self.sqrt_s / 2.0
        self.variations = Variations.default(alpha_s_power=2, pdf=self.pdf)

    # ---- hard process -------------------------------------------------------------------
    def trials(self, rng: np.random.Generator, n: int) -> Trials:
        s = self.sqrt_s**2
        m = C.M_TOP
        tau_min = 4.0 * m * m / s
        a1 = 1.0 - TAU_POWER
        lo = tau_min**a1
        tau = (lo + rng.random(n) * (1.0 - lo)) ** (1.0 / a1)
        p_tau = a1 * tau**-TAU_POWER / (1.0 - lo)
        ymax = -0.5 * np.log(tau)
        y = (2.0 * rng.random(n) - 1.0) * ymax
        cos = 2.0 * rng.random(n) - 1.0
        x1, x2 = np.sqrt(tau) * np.exp(y), np.sqrt(tau) * np.exp(-y)
        shat = tau * s
        beta = np.sqrt(1.0 - 4.0 * m * m / shat)
        pt = 0.5 * np.sqrt(shat) * beta * np.sqrt(1.0 - cos * cos)
        mu = np.sqrt(m * m + pt * pt)
        a_s = alpha_s(mu)
        t = m * m - 0.5 * shat * (1.0 - beta * cos)
        jac = 0.5 * shat * beta  # dt/dcos
        f1, f2 = self.pdf.densities(x1, mu), self.pdf.densities(x2, mu)
        # channel contributions (d sigma / d cos, GeV^-2), order: gg, then q from beam 1 / 2
        parts = [f1[21] * f2[21] * dsigma_dt_gg(shat, t, a_s) * jac]
        dqq = dsigma_dt_qq(shat, t, a_s) * jac
        for q in QUARKS:
            parts.append(f1[q] * f2[-q] * dqq)
            parts.append(f1[-q] * f2[q] * dqq)
        stack = np.stack(parts, axis=1)
        total = stack.sum(axis=1)
        weight = total * C.HBARC2_PB / (p_tau * (1.0 / (2.0 * ymax)) * 0.5)
        if self.deformation is not None:
            weight = weight * self.deformation.factor(shat)
        cum = np.cumsum(stack, axis=1)
        channel = (rng.random(n)[:, None] * total[:, None] > cum).sum(axis=1)
        channel = np.minimum(channel, stack.shape[1] - 1)
        quark = np.where(channel == 0, 0, np.asarray(QUARKS)[np.maximum(channel - 1, 0) // 2])
        from_beam1 = (channel % 2) == 1  # quark (not antiquark) from beam 1
        id1 = np.where(channel == 0, 21, np.where(from_beam1, quark, -quark))
        id2 = np.where(channel == 0, 21, -id1)
        proc = np.where(channel == 0, PROC_GG, PROC_QQ)
        return Trials(weight, proc, {"x1": x1, "x2": x2, "cos": cos, "mu": mu, "a_s": a_s,
                                     "id1": id1, "id2": id2})  # fmt: skip

    # ---- full events --------------------------------------------------------------------
    def build(self, tr: Trials, rng: np.random.Generator, weight: np.ndarray) -> ak.Array:
        d = tr.data
        n = len(weight)
        eb = self.beam_energy
        x1, x2 = d["x1"], d["x2"]
        p = np.zeros((n, 12, 4))
        p[:, 0] = np.stack([0 * x1, 0 * x1, x1 * eb, x1 * eb], axis=1)
        p[:, 1] = np.stack([0 * x2, 0 * x2, -x2 * eb, x2 * eb], axis=1)
        total = p[:, 0] + p[:, 1]
        rs = np.sqrt(x1 * x2) * 2.0 * eb
        m_t, m_tb = _top_masses(rng, rs)
        phi = rng.uniform(0.0, 2.0 * np.pi, n)
        zaxis = np.tile([0.0, 0.0, 1.0], (n, 1))
        p[:, 2], p[:, 3] = decay_in_frame(total, m_t, m_tb, d["cos"], phi, zaxis)

        masses = np.zeros((n, 12))
        masses[:, 2], masses[:, 3] = m_t, m_tb
        pdg = np.zeros((n, 12), dtype=np.int64)
        pdg[:, 0], pdg[:, 1] = d["id1"], d["id2"]
        pdg[:, 2], pdg[:, 3] = 6, -6
        pdg[:, 5], pdg[:, 7] = 5, -5
        masses[:, 5] = masses[:, 7] = C.M_B
        for top, w_i, b_i, da, sign in ((2, 4, 5, 8, +1), (3, 6, 7, 10, -1)):
            pdg[:, w_i] = 24 * sign
            m_w, w, b, f_down, f_up, id_down, id_up, m_down, m_up = _decay_top(
                rng, p[:, top], masses[:, top], sign
            )
            p[:, w_i], p[:, b_i] = w, b
            masses[:, w_i] = m_w
            # particle (positive id) first
            first_down = id_down > 0
            p[:, da] = np.where(first_down[:, None], f_down, f_up)
            p[:, da + 1] = np.where(first_down[:, None], f_up, f_down)
            pdg[:, da] = np.where(first_down, id_down, id_up)
            pdg[:, da + 1] = np.where(first_down, id_up, id_down)
            masses[:, da] = np.where(first_down, m_down, m_up)
            masses[:, da + 1] = np.where(first_down, m_up, m_down)

        status = np.tile(np.array([-1, -1, 2, 2, 2, 1, 2, 1, 1, 1, 1, 1]), (n, 1))
        mothers = np.tile(
            np.array([[-1, -1], [-1, -1], [0, 1], [0, 1], [2, 2], [2, 2], [3, 3], [3, 3],
                      [4, 4], [4, 4], [6, 6], [6, 6]]), (n, 1, 1))  # fmt: skip
        colors = _colors(rng, pdg)
        ratios = self.variations.ratios(x1, x2, d["id1"], d["id2"], d["mu"])
        return make_events(
            pdgid=pdg, status=status, mothers=mothers, colors=colors, momenta=p, masses=masses,
            process_id=tr.process_id, weight=weight, scale=d["mu"], alpha_qed=C.ALPHA_EM_MZ,
            alpha_qcd=d["a_s"], weights=weight[:, None] * ratios,
        )  # fmt: skip


def _top_masses(rng: np.random.Generator, rs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Breit-Wigner masses for t and tbar with m1 + m2 < sqrt(s^) (resampled until true)."""
    n = len(rs)
    lo, hi = C.M_TOP - N_WINDOW * C.W_TOP, C.M_TOP + N_WINDOW * C.W_TOP
    m1 = sample_breit_wigner(rng, n, C.M_TOP, C.W_TOP, lo, hi)
    m2 = sample_breit_wigner(rng, n, C.M_TOP, C.W_TOP, lo, hi)
    for _ in range(100):
        bad = np.flatnonzero(m1 + m2 >= rs)
        if len(bad) == 0:
            break
        m1[bad] = sample_breit_wigner(rng, len(bad), C.M_TOP, C.W_TOP, lo, hi)
        m2[bad] = sample_breit_wigner(rng, len(bad), C.M_TOP, C.W_TOP, lo, hi)
    else:  # pragma: no cover - pole masses always fit since sqrt(s^) >= 2 m_t
        bad = m1 + m2 >= rs
        m1[bad] = m2[bad] = C.M_TOP
    return m1, m2


def sample_cos_theta_star(rng: np.random.Generator, f0: np.ndarray, fl: np.ndarray) -> np.ndarray:
    """cos(theta*) from (3/4)(1-c^2) F0 + (3/8)(1-c)^2 F_L + (3/8)(1+c)^2 F_R (F_R = 1-F0-F_L)."""
    n = len(f0)
    u, v = rng.random(n), rng.random(n)
    c_left = 1.0 - 2.0 * np.cbrt(v)  # inverse CDF of (3/8)(1-c)^2
    c_right = 2.0 * np.cbrt(v) - 1.0  # inverse CDF of (3/8)(1+c)^2
    # inverse CDF of (3/4)(1-c^2): root in [-1, 1] of c^3 - 3c + 2 - 4v = 0
    c_long = 2.0 * np.cos((np.arccos(1.0 - 2.0 * v) + 4.0 * np.pi) / 3.0)
    return np.where(u < f0, c_long, np.where(u < f0 + fl, c_left, c_right))


def _decay_top(rng: np.random.Generator, top: np.ndarray, m_top: np.ndarray, sign: int
               ) -> tuple[Any, ...]:
    """t -> W b, W -> f fbar' for t (sign +1) or tbar (sign -1); returns lab four-vectors."""
    n = len(m_top)
    w_hi = np.minimum(C.M_W + N_WINDOW * C.W_W, m_top - C.M_B - 1e-6)
    m_w = sample_breit_wigner(rng, n, C.M_W, C.W_W, C.M_W - N_WINDOW * C.W_W, w_hi)
    # W direction in the top rest frame: isotropic
    cos = 2.0 * rng.random(n) - 1.0
    phi = rng.uniform(0.0, 2.0 * np.pi, n)
    sin = np.sqrt(1.0 - cos * cos)
    axis = np.stack([sin * np.cos(phi), sin * np.sin(phi), cos], axis=1)
    pstar = two_body_momentum(m_top, m_w, C.M_B)
    w_rest = np.concatenate([pstar[:, None] * axis, np.sqrt(pstar**2 + m_w**2)[:, None]], axis=1)
    b_rest = np.concatenate([-pstar[:, None] * axis, np.sqrt(pstar**2 + C.M_B**2)[:, None]], axis=1)
    id_down, id_up, m_down, m_up = _w_decay_mode(rng, n, sign)
    f0, fl = C.helicity_fractions(m_top, m_w)
    cstar = sample_cos_theta_star(rng, np.asarray(f0), np.asarray(fl))
    phistar = rng.uniform(0.0, 2.0 * np.pi, n)
    # decay the W in the top rest frame, with the angle measured in the W frame reached from it
    f_down, f_up = decay_in_frame(w_rest, m_down, m_up, cstar, phistar, axis)
    beta = top[:, :3] / top[:, 3:4]
    return (m_w, boost(w_rest, beta), boost(b_rest, beta), boost(f_down, beta), boost(f_up, beta),
            id_down, id_up, m_down, m_up)  # fmt: skip


def _w_decay_mode(rng: np.random.Generator, n: int, sign: int
                  ) -> tuple[Any, Any, Any, np.ndarray]:
    """Pick the W decay (PDG 2024 branching ratios). Returns ids and masses of the down-type
    fermion (charged lepton / down-type quark, as antiparticle for W+) and its partner."""
    modes: list[tuple[int, int, float, float]] = []  # (down id for W-, up id for W-, m_d, prob)
    for lep, br_key in ((11, "e"), (13, "mu"), (15, "tau")):
        modes.append((lep, -(lep + 1), C.LEPTON_MASS[lep], C.BR_W[br_key]))
    had_total = sum(v for _, _, v in C.W_HADRONIC)
    for up, down, v2 in C.W_HADRONIC:
        modes.append((down, -up, 0.0, C.BR_W["had"] * v2 / had_total))
    probs = np.array([m[3] for m in modes])
    pick = np.searchsorted(np.cumsum(probs) / probs.sum(), rng.random(n), side="right")
    pick = np.minimum(pick, len(modes) - 1)
    down_id = np.array([m[0] for m in modes])[pick]
    up_id = np.array([m[1] for m in modes])[pick]
    m_down = np.array([m[2] for m in modes])[pick]
    # W- -> (down, anti-up); W+ -> charge conjugates
    return -sign * down_id, -sign * up_id, m_down, np.zeros(n)


def _colors(rng: np.random.Generator, pdg: np.ndarray) -> np.ndarray:
    """Colour tags (large-N_c flows; the two g g flows are chosen with probability 1/2)."""
    n = len(pdg)
    col = np.zeros((n, 12, 2), dtype=np.int64)
    gg = pdg[:, 0] == 21
    q1 = pdg[:, 0] > 0  # quark from beam 1 (qqbar channel)
    flow_a = rng.random(n) < 0.5
    # q qbar: quark colour 501 -> top, antiquark anticolour 502 -> tbar
    col[:, 0] = np.where(q1[:, None], [501, 0], [0, 502])
    col[:, 1] = np.where(q1[:, None], [0, 502], [501, 0])
    top_c = np.full(n, 501)
    tbar_a = np.full(n, 502)
    # g g flow A: g1 (501, 502), g2 (502, 503) -> t 501, tbar 503
    # g g flow B: g1 (501, 502), g2 (503, 501) -> t 503, tbar 502
    col[gg, 0] = [501, 502]
    col[gg & flow_a, 1] = [502, 503]
    col[gg & ~flow_a, 1] = [503, 501]
    top_c[gg & flow_a], tbar_a[gg & flow_a] = 501, 503
    top_c[gg & ~flow_a], tbar_a[gg & ~flow_a] = 503, 502
    col[:, 2, 0] = top_c
    col[:, 5, 0] = top_c  # b inherits the top colour
    col[:, 3, 1] = tbar_a
    col[:, 7, 1] = tbar_a
    for da, tag in ((8, 504), (10, 505)):  # hadronic W: a new colour singlet pair
        for j in (da, da + 1):
            is_q = np.abs(pdg[:, j]) < 10
            col[is_q & (pdg[:, j] > 0), j, 0] = tag
            col[is_q & (pdg[:, j] < 0), j, 1] = tag
    return col
