"""Build event records in the ``read_lhe`` layout from fixed-multiplicity numpy blocks.

Also holds the parts shared by the samplers: the variation-weight bookkeeping (7-point
scale variations and toy PDF replicas), the unweighting and the weight modes.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import awkward as ak
import numpy as np

from evtkin.toy.pdfs import ToyPDF, alpha_s, replica_pdfs

__all__ = [
    "SCALE_POINTS",
    "WEIGHT_MODES",
    "Variations",
    "make_events",
]

# 7-point (muR, muF) factors, nominal first (common practice)
SCALE_POINTS: tuple[tuple[float, float], ...] = (
    (1.0, 1.0), (2.0, 1.0), (0.5, 1.0), (1.0, 2.0), (1.0, 0.5), (2.0, 2.0), (0.5, 0.5),
)  # fmt: skip
# weight mode -> IDWTUP (REFERENCES 1.4 / hep-ph/0109068)
WEIGHT_MODES: dict[str, int] = {"unweighted": 3, "weighted": 4, "negative": -4}


def make_events(
    *,
    pdgid: np.ndarray,
    status: np.ndarray,
    mothers: np.ndarray,
    colors: np.ndarray,
    momenta: np.ndarray,
    masses: np.ndarray,
    process_id: np.ndarray,
    weight: np.ndarray,
    scale: np.ndarray,
    alpha_qed: np.ndarray | float,
    alpha_qcd: np.ndarray,
    weights: np.ndarray,
) -> ak.Array:
    """Events with ``k`` particles each: ``pdgid``/``status`` (n, k), ``mothers``/``colors``
    (n, k, 2), ``momenta`` (n, k, 4) as (px, py, pz, E), ``masses`` (n, k), ``weights`` (n, m)."""
    n, k = pdgid.shape
    flat = {
        "pdgid": pdgid.astype(np.int32).ravel(),
        "status": status.astype(np.int32).ravel(),
        "mother1": mothers[:, :, 0].astype(np.int32).ravel(),
        "mother2": mothers[:, :, 1].astype(np.int32).ravel(),
        "color1": colors[:, :, 0].astype(np.int32).ravel(),
        "color2": colors[:, :, 1].astype(np.int32).ravel(),
        "px": momenta[:, :, 0].ravel(),
        "py": momenta[:, :, 1].ravel(),
        "pz": momenta[:, :, 2].ravel(),
        "energy": momenta[:, :, 3].ravel(),
        "mass": masses.astype(np.float64).ravel(),
        "lifetime": np.zeros(n * k),
        "spin": np.full(n * k, 9.0),
    }
    particles = ak.unflatten(ak.zip(flat), np.full(n, k, dtype=np.int64))
    return ak.zip(
        {
            "process_id": process_id.astype(np.int32),
            "weight": np.asarray(weight, dtype=np.float64),
            "scale": np.asarray(scale, dtype=np.float64),
            "alpha_qed": np.broadcast_to(np.asarray(alpha_qed, dtype=np.float64), (n,)).copy(),
            "alpha_qcd": np.asarray(alpha_qcd, dtype=np.float64),
            "weights": weights,
            "particles": particles,
        },
        depth_limit=1,
    )


def _pick(dens: dict[int, np.ndarray], pid: np.ndarray) -> np.ndarray:
    out = np.zeros(pid.shape, dtype=np.float64)
    for code, values in dens.items():
        sel = pid == code
        out[sel] = values[sel]
    return out


@dataclass(frozen=True)
class Variations:
    """Variation-weight declarations and their per-event ratios to the nominal weight.

    Scale variations: ``(alpha_s(xR mu)/alpha_s(mu))^p x f_a(x1, xF mu) f_b(x2, xF mu) /
    (f_a(x1, mu) f_b(x2, mu))`` with ``p`` the power of alpha_s at LO (2 for top pairs, 0 for
    Drell-Yan). PDF replicas: the same density ratio with replica densities at mu.
    """

    alpha_s_power: int
    pdf: ToyPDF
    replicas: Sequence[ToyPDF]

    @classmethod
    def default(cls, alpha_s_power: int, pdf: ToyPDF) -> Variations:
        return cls(alpha_s_power, pdf, tuple(replica_pdfs(base=pdf)))

    @property
    def scale_ids(self) -> list[str]:
        return [f"{1001 + i}" for i in range(len(SCALE_POINTS))]

    @property
    def replica_ids(self) -> list[str]:
        return [f"{2001 + i}" for i in range(len(self.replicas))]

    @property
    def names(self) -> list[str]:
        return self.scale_ids + self.replica_ids

    @property
    def groups(self) -> dict[str, list[str]]:
        return {"scale_variation": self.scale_ids, "toy_pdf_replicas": self.replica_ids}

    @property
    def combine(self) -> dict[str, str]:
        return {"scale_variation": "envelope", "toy_pdf_replicas": "replicas"}

    @property
    def text(self) -> dict[str, str]:
        pairs = zip(self.scale_ids, SCALE_POINTS, strict=True)
        out = {i: f"muR={r} muF={f}" for i, (r, f) in pairs}
        out.update({i: f"toy PDF replica {j + 1}" for j, i in enumerate(self.replica_ids)})
        return out

    def ratios(
        self, x1: np.ndarray, x2: np.ndarray, id1: np.ndarray, id2: np.ndarray, mu: np.ndarray
    ) -> np.ndarray:
        """(n, 7 + n_replicas) ratios of the variation weights to the nominal weight."""
        n = len(x1)
        out = np.empty((n, len(SCALE_POINTS) + len(self.replicas)))
        nominal = _pick(self.pdf.densities(x1, mu), id1) * _pick(self.pdf.densities(x2, mu), id2)
        a0 = alpha_s(mu)
        for j, (xr, xf) in enumerate(SCALE_POINTS):
            if xf == 1.0:
                lum = nominal
            else:
                muf = xf * mu
                lum = _pick(self.pdf.densities(x1, muf), id1) * _pick(
                    self.pdf.densities(x2, muf), id2
                )
            out[:, j] = (alpha_s(xr * mu) / a0) ** self.alpha_s_power * lum / nominal
        out[:, 0] = 1.0  # nominal point: exactly the nominal weight
        for j, rep in enumerate(self.replicas):
            lum = _pick(rep.densities(x1, mu), id1) * _pick(rep.densities(x2, mu), id2)
            out[:, len(SCALE_POINTS) + j] = lum / nominal
        return out
