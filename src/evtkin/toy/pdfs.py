"""A toy parton-density model and a running alpha_s (for the demo sampler only).

**This is a toy, not a fit to data.** Each density has the textbook-like shape
``f(x, mu) = A x^a (1 - x)^b`` whose exponents drift logarithmically with the scale to
mimic the qualitative behaviour of scale evolution (valence quarks soften at large x, gluon
and sea rise at small x as mu grows). It is not a solution of the evolution equations.
At every scale the normalisations satisfy

* the valence number sum rules: int u_v dx = 2, int d_v dx = 1;
* the momentum sum rule: int x (sum of all partons) dx = 1, with a fixed share ``GLUON_SHARE``
  of the non-valence momentum carried by gluons and the rest by the sea,

using ``int_0^1 x^a (1-x)^b dx = B(a+1, b+1)`` (Euler beta function). Sea flavours u, d, s, c
carry fixed relative weights; quark and antiquark seas are equal.

"PDF replicas" are the same model with its ten shape parameters shifted by fixed
pseudo-random amounts (seed ``REPLICA_SEED``), so every run declares the same replicas.

Running coupling: one-loop alpha_s with five flavours from alpha_s(m_Z) (PDG 2024 value in
:mod:`evtkin.toy.constants`): ``alpha_s(mu) = alpha_s(mZ) / (1 + alpha_s(mZ) b0 ln(mu^2/mZ^2))``
with ``b0 = (33 - 2 n_f)/(12 pi)`` (textbook one-loop beta function).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy.special import beta as beta_fn

from evtkin.toy.constants import ALPHA_S_MZ, M_Z

__all__ = ["ToyPDF", "alpha_s", "replica_pdfs"]

MU0 = 10.0  # GeV, reference scale of the toy shapes
LAMBDA_EVOL = 0.25  # GeV, sets the speed of the toy drift: t = ln(ln(mu^2/L^2)/ln(mu0^2/L^2))
GLUON_SHARE = 0.62  # share of the non-valence momentum carried by gluons (toy choice)
SEA_WEIGHTS = {1: 1.1, 2: 1.0, 3: 0.55, 4: 0.2}  # relative sea per flavour d, u, s, c (toy)
REPLICA_SEED = 20240601
N_REPLICAS = 20


def alpha_s(mu: np.ndarray | float, nf: int = 5) -> np.ndarray:
    """One-loop running alpha_s(mu) from alpha_s(m_Z) (textbook one-loop beta function)."""
    b0 = (33.0 - 2.0 * nf) / (12.0 * np.pi)
    mu = np.asarray(mu, dtype=np.float64)
    out: np.ndarray = ALPHA_S_MZ / (1.0 + ALPHA_S_MZ * b0 * np.log(mu * mu / (M_Z * M_Z)))
    return out


@dataclass(frozen=True)
class ToyPDF:
    """Toy densities ``x^a (1-x)^b`` with scale drift (see module docstring)."""

    a_val: float = -0.45  # valence small-x exponent (x f ~ x^0.55)
    b_uv: float = 3.0  # u-valence large-x exponent at MU0
    b_dv: float = 4.0  # d-valence large-x exponent at MU0
    a_sea: float = -1.15  # sea small-x exponent
    b_sea: float = 7.0
    a_g: float = -1.20  # gluon small-x exponent
    b_g: float = 5.0
    drift_b: float = 0.8  # d b / d t for all large-x exponents (softening)
    drift_a: float = 0.12  # -d a / d t for sea and gluon (steepening at small x)
    gluon_share: float = GLUON_SHARE

    def _shape(self, mu: np.ndarray) -> dict[str, np.ndarray]:
        t = np.log(np.log(mu * mu / LAMBDA_EVOL**2) / np.log(MU0 * MU0 / LAMBDA_EVOL**2))
        b_uv = self.b_uv + self.drift_b * t
        b_dv = self.b_dv + self.drift_b * t
        a_s = self.a_sea - self.drift_a * t
        b_s = self.b_sea + self.drift_b * t
        a_g = self.a_g - self.drift_a * t
        b_g = self.b_g + self.drift_b * t
        av = self.a_val
        # number sum rules for the valence quarks
        n_uv = 2.0 / beta_fn(av + 1.0, b_uv + 1.0)
        n_dv = 1.0 / beta_fn(av + 1.0, b_dv + 1.0)
        mom_val = n_uv * beta_fn(av + 2.0, b_uv + 1.0) + n_dv * beta_fn(av + 2.0, b_dv + 1.0)
        rest = 1.0 - mom_val
        n_g = self.gluon_share * rest / beta_fn(a_g + 2.0, b_g + 1.0)
        sea_total = 2.0 * sum(SEA_WEIGHTS.values())  # quarks and antiquarks
        n_s = (1.0 - self.gluon_share) * rest / (sea_total * beta_fn(a_s + 2.0, b_s + 1.0))
        return {
            "n_uv": n_uv, "b_uv": b_uv, "n_dv": n_dv, "b_dv": b_dv,
            "n_s": n_s, "a_s": a_s, "b_s": b_s, "n_g": n_g, "a_g": a_g, "b_g": b_g,
        }  # fmt: skip

    def densities(self, x: np.ndarray, mu: np.ndarray | float) -> dict[int, np.ndarray]:
        """f_i(x, mu) for i in {21, +-1, +-2, +-3, +-4} (PDG codes; number densities)."""
        x = np.asarray(x, dtype=np.float64)
        mu = np.broadcast_to(np.asarray(mu, dtype=np.float64), x.shape)
        s = self._shape(mu)
        lx, l1x = np.log(x), np.log1p(-x)
        av = self.a_val
        sea1 = s["n_s"] * np.exp(s["a_s"] * lx + s["b_s"] * l1x)
        out: dict[int, np.ndarray] = {
            21: s["n_g"] * np.exp(s["a_g"] * lx + s["b_g"] * l1x),
        }
        for q, w in SEA_WEIGHTS.items():
            out[q] = w * sea1
            out[-q] = w * sea1
        out[2] = out[2] + s["n_uv"] * np.exp(av * lx + s["b_uv"] * l1x)
        out[1] = out[1] + s["n_dv"] * np.exp(av * lx + s["b_dv"] * l1x)
        return out

    def momentum_sum(self, mu: float) -> float:
        """int_0^1 x sum_i f_i(x, mu) dx computed analytically (should be 1)."""
        s = self._shape(np.asarray(mu, dtype=np.float64))
        av = self.a_val
        total = s["n_uv"] * beta_fn(av + 2, s["b_uv"] + 1)
        total += s["n_dv"] * beta_fn(av + 2, s["b_dv"] + 1)
        total += s["n_g"] * beta_fn(s["a_g"] + 2, s["b_g"] + 1)
        total += 2 * sum(SEA_WEIGHTS.values()) * s["n_s"] * beta_fn(s["a_s"] + 2, s["b_s"] + 1)
        return float(total)


_SHIFTS = {  # 1-sigma size of the replica shifts per parameter (toy choice)
    "a_val": 0.02, "b_uv": 0.15, "b_dv": 0.25, "a_sea": 0.03, "b_sea": 0.4,
    "a_g": 0.03, "b_g": 0.3, "drift_b": 0.05, "drift_a": 0.01, "gluon_share": 0.01,
}  # fmt: skip


def replica_pdfs(n: int = N_REPLICAS, base: ToyPDF | None = None) -> list[ToyPDF]:
    """``n`` toy 'replicas': ``base`` with Gaussian parameter shifts from a fixed seed."""
    base = base or ToyPDF()
    rng = np.random.default_rng(REPLICA_SEED)
    keys = sorted(_SHIFTS)
    z = rng.standard_normal((n, len(keys)))
    return [
        replace(base, **{k: getattr(base, k) + _SHIFTS[k] * float(z[i, j])
                         for j, k in enumerate(keys)})
        for i in range(n)
    ]
