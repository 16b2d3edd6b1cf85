"""Test helpers: small seeded event samples written as LHE text by the tests themselves.

The writer below formats LHEF lines directly (LHEF 1.0, hep-ph/0609017: event line
``NUP IDPRUP XWGTUP SCALUP AQEDUP AQCDUP``, particle lines ``IDUP ISTUP MOTHUP(1,2)
ICOLUP(1,2) PUP(1..5) VTIMUP SPINUP``; LHEF 3.0, arXiv:1405.1067, ``<initrwgt>`` and
``<rwgt>/<wgt id>``), independently of evtkin's own writer. The kinematics are two-body
decays in the rest frame boosted to the lab (textbook), with PDG 2024 masses.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

# PDG 2024 (Phys. Rev. D 110, 030001): m_Z = 91.1880, m_W = 80.3692, m_t = 172.57 GeV
M_Z, M_W, M_T = 91.1880, 80.3692, 172.57


@dataclass
class Particles:
    """Flat per-event particle table: arrays of shape (n_events, n_particles)."""

    pdgid: np.ndarray
    status: np.ndarray
    mother1: np.ndarray  # 1-based as in the file, 0 = none
    mother2: np.ndarray
    p4: np.ndarray  # (n, k, 4): px, py, pz, E
    mass: np.ndarray


@dataclass
class Sample:
    particles: Particles
    weight: np.ndarray
    process_id: np.ndarray
    variations: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))

    def __len__(self) -> int:
        return len(self.weight)

    def subset(self, sl: slice) -> Sample:
        p = self.particles
        return Sample(
            Particles(p.pdgid[sl], p.status[sl], p.mother1[sl], p.mother2[sl], p.p4[sl],
                      p.mass[sl]),
            self.weight[sl], self.process_id[sl],
            self.variations[sl] if self.variations.size else self.variations,
        )


def _boost(p4: np.ndarray, parent: np.ndarray) -> np.ndarray:
    """Boost p4 (defined in the parent's rest frame) to the frame where the parent has
    four-momentum ``parent`` (textbook Lorentz boost)."""
    m = np.sqrt(np.maximum(parent[..., 3] ** 2 - np.sum(parent[..., :3] ** 2, axis=-1), 0))
    b = parent[..., :3] / parent[..., 3:4]
    gamma = parent[..., 3] / m
    bp = np.sum(b * p4[..., :3], axis=-1)
    b2 = np.sum(b * b, axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        coef = np.where(b2 > 0, (gamma - 1) * bp / b2, 0.0) + gamma * p4[..., 3]
    out = np.empty_like(p4)
    out[..., :3] = p4[..., :3] + coef[..., None] * b
    out[..., 3] = gamma * (p4[..., 3] + bp)
    return out


def two_body(rng: np.random.Generator, parent: np.ndarray, m1: float | np.ndarray,
             m2: float | np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Isotropic two-body decay of ``parent`` (lab four-momenta) into masses m1, m2."""
    n = parent.shape[0]
    big_m = np.sqrt(parent[:, 3] ** 2 - np.sum(parent[:, :3] ** 2, axis=1))
    # PDG kinematics review, two-body decays: p* = sqrt[(M²-(m1+m2)²)(M²-(m1-m2)²)]/(2M)
    pstar = np.sqrt((big_m**2 - (m1 + m2) ** 2) * (big_m**2 - (m1 - m2) ** 2)) / (2 * big_m)
    cos = rng.uniform(-1, 1, n)
    sin = np.sqrt(1 - cos**2)
    phi = rng.uniform(-np.pi, np.pi, n)
    d = np.stack([pstar * sin * np.cos(phi), pstar * sin * np.sin(phi), pstar * cos], axis=1)
    a = np.concatenate([d, np.sqrt(pstar**2 + m1**2)[:, None]], axis=1)
    b = np.concatenate([-d, np.sqrt(pstar**2 + m2**2)[:, None]], axis=1)
    return _boost(a, parent), _boost(b, parent)


def _resonance(rng: np.random.Generator, n: int, mass: np.ndarray, pt_scale: float,
               pz_scale: float) -> np.ndarray:
    px, py = rng.normal(0, pt_scale, n), rng.normal(0, pt_scale, n)
    pz = rng.normal(0, pz_scale, n)
    e = np.sqrt(px**2 + py**2 + pz**2 + mass**2)
    return np.stack([px, py, pz, e], axis=1)


def _incoming(total: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Two massless partons along ±z whose sum has the total's E and pz (pT put on them)."""
    e, pz = total[:, 3], total[:, 2]
    e1, e2 = (e + pz) / 2, (e - pz) / 2
    z = np.zeros_like(e)
    return np.stack([z, z, e1, e1], axis=1), np.stack([z, z, -e2, e2], axis=1)


def drell_yan(n: int, seed: int = 1, *, weights: str = "unit", n_var: int = 0) -> Sample:
    """q q̄ → Z → ℓ⁻ ℓ⁺ (e or μ). Z mass uniform in [60, 120] GeV; ``weights``: "unit" (all 1)
    or "mixed" (positive and negative, varied)."""
    rng = np.random.default_rng(seed)
    mz = rng.uniform(60.0, 120.0, n)
    z = _resonance(rng, n, mz, 15.0, 150.0)
    # put the whole system in pT balance with the incoming partons: drop Z pT in the partons
    q1, q2 = _incoming(z)
    flavour = np.where(rng.uniform(size=n) < 0.5, 11, 13)
    lm, lp = two_body(rng, z, 0.0, 0.0)
    k = 5
    pdg = np.stack([np.full(n, 2), np.full(n, -2), np.full(n, 23), flavour, -flavour], axis=1)
    status = np.tile([-1, -1, 2, 1, 1], (n, 1))
    m1 = np.tile([0, 0, 1, 3, 3], (n, 1))
    m2 = np.tile([0, 0, 2, 3, 3], (n, 1))
    p4 = np.stack([q1, q2, z, lm, lp], axis=1)
    mass = np.zeros((n, k))
    mass[:, 2] = mz
    if weights == "unit":
        w = np.ones(n)
    else:
        w = rng.uniform(0.5, 2.0, n) * np.where(rng.uniform(size=n) < 0.15, -1.0, 1.0)
    var = (w[:, None] * rng.uniform(0.8, 1.2, (n, n_var))) if n_var else np.zeros((n, 0))
    return Sample(Particles(pdg, status, m1, m2, p4, mass), w, np.full(n, 1), var)


def ttbar_lepton_jets(n: int, seed: int = 2) -> Sample:
    """g g → t t̄, t → W⁺ b with W⁺ → ℓ⁺ ν, t̄ → W⁻ b̄ with W⁻ → d ū; on-shell tops and Ws."""
    rng = np.random.default_rng(seed)
    mt = np.full(n, M_T)
    t1 = _resonance(rng, n, mt, 60.0, 250.0)
    t2 = _resonance(rng, n, mt, 60.0, 250.0)
    g1, g2 = _incoming(t1 + t2)
    w1, b1 = two_body(rng, t1, M_W, 0.0)
    w2, b2 = two_body(rng, t2, M_W, 0.0)
    lep, nu = two_body(rng, w1, 0.0, 0.0)
    q, qbar = two_body(rng, w2, 0.0, 0.0)
    flav = np.where(rng.uniform(size=n) < 0.5, 11, 13)
    #          g   g   t   t~   W+  b   W-   b~  l+     nu     d  u~
    pdg = np.stack([np.full(n, 21), np.full(n, 21), np.full(n, 6), np.full(n, -6),
                    np.full(n, 24), np.full(n, 5), np.full(n, -24), np.full(n, -5),
                    -flav, flav + 1, np.full(n, 1), np.full(n, -2)], axis=1)
    status = np.tile([-1, -1, 2, 2, 2, 1, 2, 1, 1, 1, 1, 1], (n, 1))
    m1 = np.tile([0, 0, 1, 1, 3, 3, 4, 4, 5, 5, 7, 7], (n, 1))
    m2 = np.tile([0, 0, 2, 2, 3, 3, 4, 4, 5, 5, 7, 7], (n, 1))
    p4 = np.stack([g1, g2, t1, t2, w1, b1, w2, b2, lep, nu, q, qbar], axis=1)
    mass = np.zeros((n, 12))
    mass[:, [2, 3]] = M_T
    mass[:, [4, 6]] = M_W
    return Sample(Particles(pdg, status, m1, m2, p4, mass), np.ones(n), np.full(n, 1))


def write_lhe(path: Path, sample: Sample, *, idwtup: int = 3, xsec_pb: float = 100.0,
              xerr_pb: float = 1.0, weight_ids: tuple[str, ...] = ()) -> Path:
    """Write ``sample`` as LHE v3 text (gzipped if the name ends in .gz)."""
    p = sample.particles
    lines = ['<LesHouchesEvents version="3.0">', "<header>",
             "<!-- evtkin test sample (toy data) -->"]
    if weight_ids:
        lines.append("<initrwgt>")
        lines.append('<weightgroup name="scale" combine="envelope">')
        lines += [f'<weight id="{w}"> variation {w} </weight>' for w in weight_ids]
        lines += ["</weightgroup>", "</initrwgt>"]
    lines += ["</header>", "<init>",
              f"2212 2212 6500.0 6500.0 -1 -1 -1 -1 {idwtup} 1",
              f"{float(xsec_pb)!r} {float(xerr_pb)!r} 1.0 1", "</init>"]
    n, k = p.pdgid.shape
    for i in range(n):
        lines.append("<event>")
        lines.append(f"{k} {sample.process_id[i]} {float(sample.weight[i])!r} 91.0 0.0078125 0.118")
        for j in range(k):
            px, py, pz, e = (repr(float(x)) for x in p.p4[i, j])
            lines.append(
                f"{p.pdgid[i, j]} {p.status[i, j]} {p.mother1[i, j]} {p.mother2[i, j]} 0 0 "
                f"{px} {py} {pz} {e} {float(p.mass[i, j])!r} 0.0 9.0"
            )
        if weight_ids:
            lines.append("<rwgt>")
            lines += [f'<wgt id="{w}"> {float(sample.variations[i, c])!r} </wgt>'
                      for c, w in enumerate(weight_ids)]
            lines.append("</rwgt>")
        lines.append("</event>")
    lines.append("</LesHouchesEvents>")
    data = ("\n".join(lines) + "\n").encode()
    if path.name.endswith(".gz"):
        import gzip

        data = gzip.compress(data, mtime=0)
    path.write_bytes(data)
    return path


# ---- independent numpy physics used by the checks -------------------------------------------

def pt(p4: np.ndarray) -> np.ndarray:
    return np.hypot(p4[..., 0], p4[..., 1])


def eta(p4: np.ndarray) -> np.ndarray:
    return np.arcsinh(p4[..., 2] / pt(p4))


def inv_mass(*p4s: np.ndarray) -> np.ndarray:
    s = np.sum(p4s, axis=0)
    return np.sqrt(np.maximum(s[..., 3] ** 2 - np.sum(s[..., :3] ** 2, axis=-1), 0))
