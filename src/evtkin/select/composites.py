"""Composite objects: combinations with mass windows and ΔR conditions, best candidates, the
leptonic W with the neutrino pz from the W-mass constraint, and χ² top-pair reconstruction in the
lepton+jets channel.

Candidates are ``vector`` ``Momentum4D`` records ``px, py, pz, E`` (the four-momentum sum) with the
constituent records in fields ``d0``, ``d1``, ... so that both the sum and the parts stay at hand.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any, Literal

import awkward as ak
import numpy as np

from evtkin._jit import kernel, plain
from evtkin.select import kinematics as kin

__all__ = [
    "M_T_PDG2024",
    "M_W_PDG2024",
    "best_by",
    "best_by_mass",
    "cartesian",
    "combinations",
    "hadronic_top",
    "in_mass_window",
    "leptonic_w",
    "neutrino_pz",
    "ttbar_lepton_jets",
]

# PDG 2024 (S. Navas et al., Phys. Rev. D 110, 030001): m_W = 80.3692 GeV, m_t = 172.57 GeV
M_W_PDG2024 = 80.3692
M_T_PDG2024 = 172.57

Array = Any


# ---------- generic candidates


def _build(parts: Sequence[Array]) -> ak.Array:
    px, py, pz, e = kin.components(parts[0])
    for part in parts[1:]:
        qx, qy, qz, qe = kin.components(part)
        px, py, pz, e = px + qx, py + qy, pz + qz, e + qe
    extra = {f"d{i}": part for i, part in enumerate(parts)}
    return kin.make_p4(px, py, pz, e, **extra)


def _apply_conditions(
    cands: ak.Array,
    n: int,
    *,
    mass_window: tuple[float, float] | None,
    dr_min: float | None,
    dr_max: float | None,
    opposite_charge: bool,
) -> ak.Array:
    keep = ak.ones_like(cands["px"], dtype=bool)
    if mass_window is not None:
        keep = keep & in_mass_window(cands, *mass_window)
    if dr_min is not None or dr_max is not None:
        for i in range(n):
            for j in range(i + 1, n):
                d = kin.delta_r(cands[f"d{i}"], cands[f"d{j}"])
                if dr_min is not None:
                    keep = keep & (d >= dr_min)
                if dr_max is not None:
                    keep = keep & (d < dr_max)
    if opposite_charge:
        if n != 2:
            raise ValueError("opposite_charge applies to pairs only")
        q0, q1 = cands["d0"], cands["d1"]
        if "charge" in ak.fields(q0):
            keep = keep & (q0["charge"] * q1["charge"] < 0)
        else:  # sign of the PDG id: negative for antiparticles; leptons with positive id are ℓ⁻
            keep = keep & (q0["pdgid"] * q1["pdgid"] < 0)
    return cands[keep]


def combinations(
    objs: Array,
    n: int = 2,
    *,
    mass_window: tuple[float, float] | None = None,
    dr_min: float | None = None,
    dr_max: float | None = None,
    opposite_charge: bool = False,
) -> ak.Array:
    """All unordered n-tuples of distinct objects within each event as candidates (see module
    docstring), kept when m in [lo, hi) of ``mass_window`` and every constituent pair has
    ``dr_min`` <= ΔR < ``dr_max`` (η-based). ``opposite_charge`` (pairs) uses a ``charge`` field or
    else the sign of ``pdgid``."""
    if n < 2:
        raise ValueError(f"combinations need n >= 2, got {n}")
    combos = ak.combinations(objs, n, axis=1)
    cands = _build([combos[str(i)] for i in range(n)])
    return _apply_conditions(
        cands,
        n,
        mass_window=mass_window,
        dr_min=dr_min,
        dr_max=dr_max,
        opposite_charge=opposite_charge,
    )


def cartesian(
    *collections: Array,
    mass_window: tuple[float, float] | None = None,
    dr_min: float | None = None,
    dr_max: float | None = None,
    opposite_charge: bool = False,
) -> ak.Array:
    """One object from each collection (e.g. a lepton and a jet), as candidates with the same
    conditions as :func:`combinations`. Collections must be distinct (no object used twice)."""
    if len(collections) < 2:
        raise ValueError("cartesian needs at least two collections")
    combos = ak.cartesian(list(collections), axis=1)
    cands = _build([combos[str(i)] for i in range(len(collections))])
    return _apply_conditions(
        cands,
        len(collections),
        mass_window=mass_window,
        dr_min=dr_min,
        dr_max=dr_max,
        opposite_charge=opposite_charge,
    )


def in_mass_window(cands: Array, lo: float, hi: float) -> Array:
    """Mask: lo <= m < hi."""
    m = kin.mass(cands)
    return (m >= lo) & (m < hi)


def best_by(cands: Array, score: Array) -> Array:
    """The candidate with the smallest ``score`` per event (None for events without candidates)."""
    best = ak.argmin(score, axis=-1, keepdims=True)
    return ak.firsts(cands[best], axis=-1)


def best_by_mass(cands: Array, target: float) -> Array:
    """The candidate whose mass is closest to ``target`` per event (None when there is none)."""
    return best_by(cands, np.abs(kin.mass(cands) - target))


# ---------- leptonic W


def neutrino_pz(
    lepton: Array, met_px: Array, met_py: Array, m_w: float = M_W_PDG2024
) -> tuple[Array, Array, Array]:
    """Solve m(ℓν) = ``m_w`` for the pz of a massless neutrino with pT = (met_px, met_py).

    With μ = (m_W² − m_ℓ²)/2 + pT_ℓ·pT_ν, a = E_ℓ² − pz_ℓ², b = −2 μ pz_ℓ, c = E_ℓ² pT_ν² − μ²,
    pz = (−b ± √(b² − 4ac)) / 2a. Returns ``(pz_small, pz_large, is_complex)``: the roots ordered by
    |pz|; when the discriminant is negative (m_T(ℓ, ν) > m_W) both are the real part −b/2a, the
    usual treatment, and ``is_complex`` is True. Roots are computed in the cancellation-free form
    q = −(b + sign(b)√D)/2, pz = q/a and c/q.
    """
    lx, ly, lz, le = kin.components(lepton)
    ml2 = np.maximum(le * le - lx * lx - ly * ly - lz * lz, 0.0)
    mu = 0.5 * (m_w * m_w - ml2) + lx * met_px + ly * met_py
    a = le * le - lz * lz
    b = -2.0 * mu * lz
    c = le * le * (met_px * met_px + met_py * met_py) - mu * mu
    disc = b * b - 4.0 * a * c
    is_complex = disc < 0
    sq = np.sqrt(np.maximum(disc, 0.0))
    sign_b = ak.where(b >= 0, 1.0, -1.0)
    q = -0.5 * (b + sign_b * sq)
    with np.errstate(divide="ignore", invalid="ignore"):
        r1 = q / a
        r2 = ak.where(q != 0, c / q, r1)
    real_part = -b / (2.0 * a)
    r1 = ak.where(is_complex, real_part, r1)
    r2 = ak.where(is_complex, real_part, r2)
    small_first = np.abs(r1) <= np.abs(r2)
    return ak.where(small_first, r1, r2), ak.where(small_first, r2, r1), is_complex


def _pz_roots_numpy(lx: np.ndarray, ly: np.ndarray, lz: np.ndarray, le: np.ndarray,
                    mx: np.ndarray, my: np.ndarray, m_w: float
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`neutrino_pz` on flat numpy columns (same formulas)."""
    ml2 = np.maximum(le * le - lx * lx - ly * ly - lz * lz, 0.0)
    mu = 0.5 * (m_w * m_w - ml2) + lx * mx + ly * my
    a = le * le - lz * lz
    b = -2.0 * mu * lz
    c = le * le * (mx * mx + my * my) - mu * mu
    disc = b * b - 4.0 * a * c
    is_complex = disc < 0
    sq = np.sqrt(np.maximum(disc, 0.0))
    q = -0.5 * (b + np.where(b >= 0, 1.0, -1.0) * sq)
    with np.errstate(divide="ignore", invalid="ignore"):
        r1 = q / a
        r2 = np.where(q != 0, c / q, r1)
        real_part = -b / (2.0 * a)
    r1 = np.where(is_complex, real_part, r1)
    r2 = np.where(is_complex, real_part, r2)
    small_first = np.abs(r1) <= np.abs(r2)
    return np.where(small_first, r1, r2), np.where(small_first, r2, r1), is_complex


def _leptonic_w_flat(lepton: Array, met: Array, m_w: float, choice: str
                     ) -> tuple[ak.Array, ak.Array]:
    """:func:`leptonic_w` for one (possibly missing) lepton and one missing pT per event, on
    flat numpy columns: the awkward arithmetic on option-typed records it replaces cost ~50× more.
    Events without a lepton or missing pT give None (one hypothesis) or an empty list (both)."""
    _, lx, ly, lz, le = kin.flat_components(lepton)
    mfields = ak.fields(met)
    if "px" in mfields or "x" in mfields:
        mx = kin._np(met["px" if "px" in mfields else "x"])
        my = kin._np(met["py" if "py" in mfields else "y"])
    else:
        ptv, ph = kin._np(met["pt" if "pt" in mfields else "rho"]), kin._np(met["phi"])
        mx, my = ptv * np.cos(ph), ptv * np.sin(ph)
    valid = ~(np.isnan(le) | np.isnan(mx) | np.isnan(my))
    small, large, is_complex = _pz_roots_numpy(lx, ly, lz, le, mx, my, m_w)
    if choice == "both":
        take = np.stack([valid, valid & ~is_complex], axis=1)
        counts = take.sum(axis=1)
        pz = np.stack([small, large], axis=1)[take]
        idx = np.repeat(np.arange(len(valid)), counts)
        nx, ny = mx[idx], my[idx]
        ne = np.sqrt(nx * nx + ny * ny + pz * pz)
        nu = ak.unflatten(kin.make_p4(nx, ny, pz, ne), counts)
        w = ak.unflatten(kin.make_p4(lx[idx] + nx, ly[idx] + ny, lz[idx] + pz, le[idx] + ne),
                         counts)
        return nu, w
    pz = small if choice == "smaller_abs_pz" else large
    ne = np.sqrt(mx * mx + my * my + pz * pz)
    nu = ak.mask(kin.make_p4(mx, my, pz, ne), valid)
    w = ak.mask(kin.make_p4(lx + mx, ly + my, lz + pz, le + ne), valid)
    return nu, w


def _neutrino(met_px: Array, met_py: Array, pz: Array) -> ak.Array:
    return kin.make_p4(met_px, met_py, pz, np.sqrt(met_px * met_px + met_py * met_py + pz * pz))


def leptonic_w(
    lepton: Array,
    met: Array,
    *,
    m_w: float = M_W_PDG2024,
    choice: Literal["smaller_abs_pz", "larger_abs_pz", "both"] = "smaller_abs_pz",
) -> tuple[ak.Array, ak.Array]:
    """Reconstruct W → ℓν: returns ``(neutrino, w)`` as ``Momentum4D``.

    The neutrino pT is the missing pT ``met`` (fields px, py or pt, phi) and its pz solves the
    W-mass constraint (:func:`neutrino_pz`). Two real roots: ``choice`` "smaller_abs_pz" (default,
    common practice), "larger_abs_pz", or "both", which adds an inner axis holding both hypotheses
    (one when the roots are complex). Complex roots: the real part (common practice), so m(ℓν) then
    exceeds ``m_w``.
    """
    if choice not in ("smaller_abs_pz", "larger_abs_pz", "both"):
        raise ValueError(
            f"leptonic_w choice must be 'smaller_abs_pz', 'larger_abs_pz' or 'both', got {choice!r}"
        )
    if (isinstance(lepton, ak.Array) and isinstance(met, ak.Array) and lepton.ndim == 1
            and met.ndim == 1 and ak.fields(lepton) and ak.fields(met)):
        return _leptonic_w_flat(lepton, met, m_w, choice)
    mx, my = kin.transverse_components(met)
    small, large, is_complex = neutrino_pz(lepton, mx, my, m_w)
    if choice == "smaller_abs_pz":
        pz = small
    elif choice == "larger_abs_pz":
        pz = large
    elif choice == "both":
        second = ak.mask(large, ~is_complex)
        pz = ak.concatenate(
            [ak.singletons(small, axis=-1), ak.singletons(second, axis=-1)], axis=-1
        )
        mx = ak.broadcast_arrays(mx, pz)[0]
        my = ak.broadcast_arrays(my, pz)[0]
    else:
        raise ValueError(
            f"leptonic_w choice must be 'smaller_abs_pz', 'larger_abs_pz' or 'both', got {choice!r}"
        )
    nu = _neutrino(mx, my, pz)
    return nu, kin.add_p4(lepton, nu)


# ---------- tops


@plain()
def _mass(px: float, py: float, pz: float, e: float) -> float:
    m2 = e * e - px * px - py * py - pz * pz
    return math.sqrt(m2) if m2 >= 0.0 else -math.sqrt(-m2)


@kernel()
def _assign_kernel(
    jet: np.ndarray,
    jet_off: np.ndarray,
    can_b: np.ndarray,
    can_l: np.ndarray,
    lep: np.ndarray,
    nu: np.ndarray,
    nu_off: np.ndarray,
    leptonic: bool,
    max_jets: int,
    m_w: float,
    m_t: float,
    sigma_w: float,
    sigma_t: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Per event, the (b_had, b_lep, j1, j2, nu) assignment with the smallest χ² (local indices,
    -1 when there is none) and that χ² (NaN when there is none). Rows of jet/lep/nu: px py pz E."""
    nev = jet_off.shape[0] - 1
    best_idx = np.full((nev, 5), -1, dtype=np.int64)
    best_chi2 = np.full(nev, np.nan)
    for ev in range(nev):
        o = jet_off[ev]
        nj = jet_off[ev + 1] - o
        if max_jets > 0 and nj > max_jets:
            nj = max_jets
        n0, n1 = nu_off[ev], nu_off[ev + 1]
        if leptonic and (n1 == n0 or lep[ev, 3] != lep[ev, 3]):
            continue
        best = math.inf
        for j1 in range(nj):
            if not can_l[o + j1]:
                continue
            for j2 in range(j1 + 1, nj):
                if not can_l[o + j2]:
                    continue
                wx = jet[o + j1, 0] + jet[o + j2, 0]
                wy = jet[o + j1, 1] + jet[o + j2, 1]
                wz = jet[o + j1, 2] + jet[o + j2, 2]
                we = jet[o + j1, 3] + jet[o + j2, 3]
                cw = ((_mass(wx, wy, wz, we) - m_w) / sigma_w) ** 2
                for bh in range(nj):
                    if bh == j1 or bh == j2 or not can_b[o + bh]:  # noqa: SIM109
                        continue
                    th = _mass(
                        wx + jet[o + bh, 0],
                        wy + jet[o + bh, 1],
                        wz + jet[o + bh, 2],
                        we + jet[o + bh, 3],
                    )
                    ch = cw + ((th - m_t) / sigma_t) ** 2
                    if not leptonic:
                        if ch < best:
                            best = ch
                            best_idx[ev, 0] = bh
                            best_idx[ev, 2] = j1
                            best_idx[ev, 3] = j2
                        continue
                    for bl in range(nj):
                        if bl == bh or bl == j1 or bl == j2 or not can_b[o + bl]:  # noqa: SIM109
                            continue
                        for k in range(n0, n1):
                            tl = _mass(
                                lep[ev, 0] + nu[k, 0] + jet[o + bl, 0],
                                lep[ev, 1] + nu[k, 1] + jet[o + bl, 1],
                                lep[ev, 2] + nu[k, 2] + jet[o + bl, 2],
                                lep[ev, 3] + nu[k, 3] + jet[o + bl, 3],
                            )
                            c = ch + ((tl - m_t) / sigma_t) ** 2
                            if c < best:
                                best = c
                                best_idx[ev, 0] = bh
                                best_idx[ev, 1] = bl
                                best_idx[ev, 2] = j1
                                best_idx[ev, 3] = j2
                                best_idx[ev, 4] = k - n0
        if best < math.inf:
            best_chi2[ev] = best
    return best_idx, best_chi2


def _rows(px: Array, py: Array, pz: Array, e: Array) -> np.ndarray:
    cols = [ak.to_numpy(ak.fill_none(c, np.nan)).astype(np.float64) for c in (px, py, pz, e)]
    return np.ascontiguousarray(np.stack(cols, axis=1))


def _jagged_rows(objs: Array) -> tuple[np.ndarray, np.ndarray]:
    counts, px, py, pz, e = kin.flat_components(objs)
    assert counts is not None
    offsets = np.zeros(counts.size + 1, dtype=np.int64)
    np.cumsum(counts, out=offsets[1:])
    return np.ascontiguousarray(np.stack([px, py, pz, e], axis=1)), offsets


def _role_masks(jets: Array, bjet_mask: Array | None, n: int) -> tuple[np.ndarray, np.ndarray]:
    if bjet_mask is None:
        ones = np.ones(n, dtype=np.bool_)
        return ones, ones
    tag = ak.to_numpy(ak.flatten(ak.fill_none(bjet_mask, False), axis=1)).astype(np.bool_)
    return tag, ~tag


def _p4_at(rows: np.ndarray, idx: np.ndarray, valid: np.ndarray) -> np.ndarray:
    safe = np.where(valid, idx, 0)
    out = rows[safe] if rows.shape[0] else np.zeros((idx.size, 4))
    out[~valid] = np.nan
    return out


def _p4_array(v: np.ndarray, valid: np.ndarray) -> ak.Array:
    return ak.mask(kin.make_p4(v[:, 0], v[:, 1], v[:, 2], v[:, 3]), valid)


def hadronic_top(
    jets: Array,
    bjet_mask: Array | None = None,
    *,
    m_w: float = M_W_PDG2024,
    m_t: float = M_T_PDG2024,
    sigma_w: float = 10.0,
    sigma_t: float = 15.0,
    max_jets: int | None = 6,
) -> ak.Array:
    """Best hadronic top t → bjj per event by χ² = ((m_jj − m_W)/σ_W)² + ((m_jjb − m_t)/σ_t)².

    With ``bjet_mask`` the b comes from the tagged jets and the W jets from the untagged ones;
    without, any distinct jets among the first ``max_jets`` (the leading ones for pT-ordered input)
    are tried. Returns per event a record ``top, w`` (Momentum4D), ``chi2``, ``b_index``,
    ``j1_index``, ``j2_index`` (into ``jets``), or None for events without enough jets.
    """
    rows, off = _jagged_rows(jets)
    can_b, can_l = _role_masks(jets, bjet_mask, rows.shape[0])
    nev = off.size - 1
    idx, chi2 = _assign_kernel(
        rows,
        off,
        can_b,
        can_l,
        np.zeros((nev, 4)),
        np.zeros((0, 4)),
        np.zeros(nev + 1, dtype=np.int64),
        False,
        int(max_jets or 0),
        float(m_w),
        float(m_t),
        float(sigma_w),
        float(sigma_t),
    )
    valid = ~np.isnan(chi2)
    start = off[:-1]
    b = _p4_at(rows, start + idx[:, 0], valid)
    w = _p4_at(rows, start + idx[:, 2], valid) + _p4_at(rows, start + idx[:, 3], valid)
    out = ak.zip(
        {
            "top": kin.make_p4(*(w + b).T),
            "w": kin.make_p4(*w.T),
            "chi2": chi2,
            "b_index": idx[:, 0],
            "j1_index": idx[:, 2],
            "j2_index": idx[:, 3],
        },
        depth_limit=1,
    )
    return ak.mask(out, valid)


def ttbar_lepton_jets(
    lepton: Array,
    neutrino: Array,
    jets: Array,
    bjet_mask: Array | None = None,
    *,
    m_w: float = M_W_PDG2024,
    m_t: float = M_T_PDG2024,
    sigma_w: float = 10.0,
    sigma_t: float = 15.0,
    max_jets: int | None = 6,
) -> ak.Array:
    """Reconstruct tt̄ → (b ℓ ν)(b j j) by the jet assignment minimising, per event,

    χ² = ((m_jj − m_W)/σ_W)² + ((m_jjb_had − m_t)/σ_t)² + ((m_ℓνb_lep − m_t)/σ_t)².

    ``lepton`` holds one record per event (None allowed); ``neutrino`` one per event or a list of
    hypotheses per event (``leptonic_w(..., choice="both")``), which then join the permutations.
    With ``bjet_mask`` (jagged bool over ``jets``) the two b's come from the tagged jets and the two
    W jets from the untagged ones; without, all distinct assignments among the first ``max_jets``
    jets (the leading ones for pT-ordered input; ``None`` for all) are tried. The default σ's
    (10 and 15 GeV) are typical detector-level resolutions; at parton level they only rescale χ².
    The search runs in a compiled kernel over all events (no permutation arrays are built).

    Returns per event a record ``top_had, top_lep, w_had, w_lep, ttbar, neutrino`` (Momentum4D),
    ``chi2`` and the jet indices ``b_had, b_lep, j1, j2`` (into ``jets``), or None when the event
    lacks a lepton, a neutrino or enough jets.
    """
    rows, off = _jagged_rows(jets)
    can_b, can_l = _role_masks(jets, bjet_mask, rows.shape[0])
    lep = np.ascontiguousarray(np.stack(kin.flat_components(lepton)[1:], axis=1))
    nus = neutrino if neutrino.ndim > 1 else ak.singletons(neutrino, axis=0)
    nu_rows, nu_off = _jagged_rows(nus)
    idx, chi2 = _assign_kernel(
        rows,
        off,
        can_b,
        can_l,
        lep,
        nu_rows,
        nu_off,
        True,
        int(max_jets or 0),
        float(m_w),
        float(m_t),
        float(sigma_w),
        float(sigma_t),
    )
    valid = ~np.isnan(chi2)
    start = off[:-1]
    w_had = _p4_at(rows, start + idx[:, 2], valid) + _p4_at(rows, start + idx[:, 3], valid)
    top_had = w_had + _p4_at(rows, start + idx[:, 0], valid)
    nu = _p4_at(nu_rows, nu_off[:-1] + idx[:, 4], valid)
    w_lep = np.where(valid[:, None], lep, np.nan) + nu
    top_lep = w_lep + _p4_at(rows, start + idx[:, 1], valid)
    out = ak.zip(
        {
            "top_had": kin.make_p4(*top_had.T),
            "top_lep": kin.make_p4(*top_lep.T),
            "w_had": kin.make_p4(*w_had.T),
            "w_lep": kin.make_p4(*w_lep.T),
            "ttbar": kin.make_p4(*(top_had + top_lep).T),
            "neutrino": kin.make_p4(*nu.T),
            "chi2": chi2,
            "b_had": idx[:, 0],
            "b_lep": idx[:, 1],
            "j1": idx[:, 2],
            "j2": idx[:, 3],
        },
        depth_limit=1,
    )
    return ak.mask(out, valid)
