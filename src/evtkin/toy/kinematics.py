"""Vectorised kinematics for the toy sampler: two-body decays, boosts, Breit-Wigner masses.

Four-vectors are numpy arrays of shape ``(n, 4)`` ordered ``(px, py, pz, E)``.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "boost",
    "decay_in_frame",
    "sample_breit_wigner",
    "two_body_momentum",
]


def two_body_momentum(m: np.ndarray | float, m1: np.ndarray | float, m2: np.ndarray | float
                      ) -> np.ndarray:
    """Momentum of either daughter in the rest frame of ``m -> m1 + m2``.

    PDG review "Kinematics", two-body decays:
    ``p* = sqrt[(M^2 - (m1+m2)^2)(M^2 - (m1-m2)^2)] / (2M)``.
    """
    m, m1, m2 = (np.asarray(v, dtype=np.float64) for v in (m, m1, m2))
    arg = (m * m - (m1 + m2) ** 2) * (m * m - (m1 - m2) ** 2)
    return np.sqrt(np.maximum(arg, 0.0)) / (2.0 * m)


def boost(p: np.ndarray, beta: np.ndarray) -> np.ndarray:
    """Boost four-vectors ``p`` (n, 4) by velocities ``beta`` (n, 3) (pure Lorentz boost)."""
    b2 = np.einsum("ij,ij->i", beta, beta)
    gamma = 1.0 / np.sqrt(1.0 - b2)
    bp = np.einsum("ij,ij->i", beta, p[:, :3])
    # (gamma - 1)/b2 written stably as gamma^2/(gamma + 1)
    coef = gamma * gamma / (gamma + 1.0) * bp + gamma * p[:, 3]
    out = np.empty_like(p)
    out[:, :3] = p[:, :3] + coef[:, None] * beta
    out[:, 3] = gamma * (p[:, 3] + bp)
    return out


def _orthonormal_frame(axis: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Two unit vectors orthogonal to the unit vectors ``axis`` (n, 3) and to each other."""
    helper = np.zeros_like(axis)
    use_x = np.abs(axis[:, 0]) < 0.9
    helper[use_x, 0] = 1.0
    helper[~use_x, 1] = 1.0
    e1 = np.cross(axis, helper)
    e1 /= np.linalg.norm(e1, axis=1)[:, None]
    e2 = np.cross(axis, e1)
    return e1, e2


def decay_in_frame(
    parent: np.ndarray,
    m1: np.ndarray,
    m2: np.ndarray,
    cos_theta: np.ndarray,
    phi: np.ndarray,
    axis: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """Two-body decay of ``parent`` (n, 4) into masses ``m1``, ``m2``.

    Daughter 1 is emitted in the parent rest frame at polar angle ``arccos(cos_theta)`` and
    azimuth ``phi`` around the unit vector ``axis`` (n, 3), which is given in that rest frame
    (the rest frame reached from the frame of ``parent`` by a pure boost). Returns the two
    daughters in the frame of ``parent``.
    """
    p3sq = np.einsum("ij,ij->i", parent[:, :3], parent[:, :3])
    m = np.sqrt(np.maximum(parent[:, 3] ** 2 - p3sq, 0.0))
    p = two_body_momentum(m, m1, m2)
    e1, e2 = _orthonormal_frame(axis)
    sin_theta = np.sqrt(np.maximum(1.0 - cos_theta * cos_theta, 0.0))
    direction = (
        cos_theta[:, None] * axis
        + (sin_theta * np.cos(phi))[:, None] * e1
        + (sin_theta * np.sin(phi))[:, None] * e2
    )
    d1 = np.empty_like(parent)
    d1[:, :3] = p[:, None] * direction
    d1[:, 3] = np.sqrt(p * p + m1 * m1)
    d2 = np.empty_like(parent)
    d2[:, :3] = -d1[:, :3]
    d2[:, 3] = np.sqrt(p * p + m2 * m2)
    beta = parent[:, :3] / parent[:, 3:4]
    return boost(d1, beta), boost(d2, beta)


def sample_breit_wigner(
    rng: np.random.Generator, n: int, mass: float, width: float, lo: np.ndarray | float,
    hi: np.ndarray | float,
) -> np.ndarray:
    """Masses from the relativistic Breit-Wigner truncated to ``[lo, hi]``.

    REFERENCES 2.3: ``BW(s) = (1/pi) M Gamma / ((s - M^2)^2 + M^2 Gamma^2)`` in s = m^2, i.e. a
    Cauchy distribution in s; sampled exactly by inverting its CDF on the allowed range.
    """
    mg = mass * width
    t_lo = np.arctan((np.asarray(lo, dtype=np.float64) ** 2 - mass * mass) / mg)
    t_hi = np.arctan((np.asarray(hi, dtype=np.float64) ** 2 - mass * mass) / mg)
    u = rng.random(n)
    s = mass * mass + mg * np.tan(t_lo + u * (t_hi - t_lo))
    out: np.ndarray = np.sqrt(s)
    return out
