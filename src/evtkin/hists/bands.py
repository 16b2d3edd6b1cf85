"""Uncertainty bands from variation histograms (REFERENCES §2.11).

Variations come from the same events as the nominal, so they are fully correlated with it: every
band is formed bin by bin from the varied contents directly (no MC errors added). Arrays have the
variation index first: ``nominal`` has shape ``S`` and ``members`` shape ``(K, *S)``.

A :class:`Band` stores absolute edges ``down <= nominal <= up``.

* Scale envelope: min/max over the members and the nominal; with ``drop_anticorrelated`` the
  7-point set (muR, muF) ∈ {0.5, 1, 2}² without (0.5, 2) and (2, 0.5) is used (common practice).
* PDF replicas: standard deviation with 1/(N−1) around the nominal, or the 68 % interval (16th and
  84th percentiles) — PDF4LHC15 recommendations, arXiv:1510.03865.
* Hessian symmetric: δ = sqrt(Σ_k (X_k − X_0)²); asymmetric pairs:
  δ± = sqrt(Σ_k max(±(X_k⁺ − X_0), ±(X_k⁻ − X_0), 0)²) — arXiv:1510.03865.
* Quadrature: δ_up = sqrt(Σ_b (up_b − X_0)²), δ_down likewise.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = [
    "Band",
    "envelope",
    "hessian_asymmetric",
    "hessian_symmetric",
    "parse_scale_factors",
    "quadrature",
    "replicas_68",
    "replicas_std",
    "scale_envelope",
    "seven_point_members",
]


@dataclass
class Band:
    """Absolute lower/upper edges of an uncertainty band, same shape as the nominal."""

    method: str
    down: np.ndarray
    up: np.ndarray
    members: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        return {"method": self.method, "members": list(self.members),
                "down": self.down.tolist(), "up": self.up.tolist()}


def _stack(nominal: Any, members: Any) -> tuple[np.ndarray, np.ndarray]:
    x0 = np.asarray(nominal, dtype=np.float64)
    xs = np.asarray(members, dtype=np.float64)
    if xs.ndim == x0.ndim:
        xs = xs[None]
    if xs.shape[1:] != x0.shape:
        raise ValueError(f"variation shape {xs.shape[1:]} differs from nominal shape {x0.shape}")
    return x0, xs


_NUM = r"([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)"
_MUR = re.compile(r"mu_?r\s*[=:]\s*[\"']?\s*" + _NUM, re.IGNORECASE)
_MUF = re.compile(r"mu_?f\s*[=:]\s*[\"']?\s*" + _NUM, re.IGNORECASE)


def parse_scale_factors(text: str) -> tuple[float, float] | None:
    """(muR, muF) factors from a weight name/description such as ``"muR=2.0 muF=0.5"``,
    ``"MUR=0.5_MUF=1.0"`` or ``'mur="2" muf="1"'``; ``None`` if either is missing."""
    r = _MUR.search(text)
    f = _MUF.search(text)
    if r is None or f is None:
        return None
    return float(r.group(1)), float(f.group(1))


def seven_point_members(
    factors: Sequence[tuple[float, float] | None], drop_anticorrelated: bool = True
) -> list[int]:
    """Indices of the members that form the (7- or 9-point) scale set."""
    keep = []
    for i, fr in enumerate(factors):
        if fr is None:
            continue
        r, f = fr
        if not all(any(np.isclose(v, c) for c in (0.5, 1.0, 2.0)) for v in (r, f)):
            continue
        if drop_anticorrelated and (
            (np.isclose(r, 0.5) and np.isclose(f, 2.0))
            or (np.isclose(r, 2.0) and np.isclose(f, 0.5))
        ):
            continue
        keep.append(i)
    return keep


def envelope(nominal: Any, members: Any, names: Sequence[str] = ()) -> Band:
    """Bin-by-bin minimum and maximum over the members and the nominal."""
    x0, xs = _stack(nominal, members)
    return Band("envelope", np.minimum(x0, xs.min(axis=0)), np.maximum(x0, xs.max(axis=0)),
                list(names))


def scale_envelope(
    nominal: Any,
    members: Any,
    factors: Sequence[tuple[float, float] | None],
    names: Sequence[str] = (),
    drop_anticorrelated: bool = True,
) -> Band:
    """Envelope over the scale set; ``factors[i]`` is (muR, muF) of member i (see
    :func:`parse_scale_factors`). Members without factors or outside {0.5, 1, 2} are ignored."""
    x0, xs = _stack(nominal, members)
    if len(factors) != xs.shape[0]:
        raise ValueError(f"{len(factors)} scale factors given for {xs.shape[0]} members")
    keep = seven_point_members(factors, drop_anticorrelated)
    if not keep:
        raise ValueError("no member with recognisable (muR, muF) factors in {0.5, 1, 2}")
    band = envelope(x0, xs[keep], [names[i] for i in keep] if names else [])
    band.method = "envelope7" if drop_anticorrelated else "envelope"
    return band


def replicas_std(nominal: Any, members: Any, names: Sequence[str] = ()) -> Band:
    """X_0 ± the standard deviation (1/(N−1)) of the replicas (PDF4LHC15, arXiv:1510.03865)."""
    x0, xs = _stack(nominal, members)
    if xs.shape[0] < 2:
        raise ValueError("the replica standard deviation needs at least two replicas")
    d = xs.std(axis=0, ddof=1)
    return Band("replicas_std", x0 - d, x0 + d, list(names))


def replicas_68(nominal: Any, members: Any, names: Sequence[str] = ()) -> Band:
    """68 % interval of the replicas: 16th to 84th percentile (PDF4LHC15), widened to hold X_0."""
    x0, xs = _stack(nominal, members)
    lo, hi = np.percentile(xs, [15.865525393145708, 84.13447460685429], axis=0)
    return Band("replicas_68", np.minimum(lo, x0), np.maximum(hi, x0), list(names))


def hessian_symmetric(nominal: Any, members: Any, names: Sequence[str] = ()) -> Band:
    """δ = sqrt(Σ_k (X_k − X_0)²) over the eigenvector members (arXiv:1510.03865)."""
    x0, xs = _stack(nominal, members)
    d = np.sqrt(np.sum((xs - x0) ** 2, axis=0))
    return Band("hessian_sym", x0 - d, x0 + d, list(names))


def hessian_asymmetric(nominal: Any, members: Any, names: Sequence[str] = ()) -> Band:
    """Asymmetric master formula; members are ordered as pairs (1+, 1−, 2+, 2−, ...)."""
    x0, xs = _stack(nominal, members)
    if xs.shape[0] % 2:
        raise ValueError(f"asymmetric Hessian needs pairs of members, got {xs.shape[0]}")
    plus = xs[0::2] - x0
    minus = xs[1::2] - x0
    zero = np.zeros_like(plus)
    dup = np.sqrt(np.sum(np.maximum(np.maximum(plus, minus), zero) ** 2, axis=0))
    ddn = np.sqrt(np.sum(np.maximum(np.maximum(-plus, -minus), zero) ** 2, axis=0))
    return Band("hessian_asym", x0 - ddn, x0 + dup, list(names))


def quadrature(nominal: Any, bands: Sequence[Band], names: Sequence[str] = ()) -> Band:
    """Add the upward and downward deviations of several bands in quadrature."""
    x0 = np.asarray(nominal, dtype=np.float64)
    if not bands:
        return Band("quadrature", x0.copy(), x0.copy(), list(names))
    up = np.sqrt(sum((b.up - x0) ** 2 for b in bands))
    dn = np.sqrt(sum((x0 - b.down) ** 2 for b in bands))
    return Band("quadrature", x0 - dn, x0 + up, list(names))
