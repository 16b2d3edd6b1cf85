"""Sequential-recombination jet clustering (anti-kT, kT, Cambridge/Aachen), columnar over events.

The generalised-kT distances (Cacciari, Salam, Soyez, JHEP 0804 (2008) 063, arXiv:0802.1189):

    d_ij = min(kt_i^(2p), kt_j^(2p)) · ΔR_ij² / R²,   ΔR_ij² = (y_i − y_j)² + (φ_i − φ_j)²,
    d_iB = kt_i^(2p),

with p = −1 (anti-kT), 0 (Cambridge/Aachen) or 1 (kT), y the rapidity and Δφ wrapped into [0, π].
Repeatedly take the smallest distance: a d_ij merges i and j by adding four-momenta (E-scheme), a
d_iB makes i a jet. Parton-level events hold a handful of particles, so a direct O(N³) search per
event is used, compiled with numba and run over flat arrays with event offsets (no Python loop over
events).
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any

import awkward as ak
import numpy as np

from evtkin._jit import kernel, plain
from evtkin.select import kinematics as kin
from evtkin.select.clustering import momentum_buffers

__all__ = ["antikt", "cluster"]

_RAPIDITY_CAP = 1.0e5  # rapidity given to particles with E <= |pz| (e.g. massless along the beam)

Array = Any


@plain()
def _kt2p(px: float, py: float, p: float) -> float:
    pt2 = px * px + py * py
    if pt2 == 0.0:
        if p < 0.0:
            return math.inf
        if p > 0.0:
            return 0.0
        return 1.0
    out: float = pt2**p
    return out


@plain()
def _rap_phi(px: float, py: float, pz: float, e: float) -> tuple[float, float]:
    if e > abs(pz):
        y = 0.5 * math.log((e + pz) / (e - pz))
    else:
        y = _RAPIDITY_CAP if pz >= 0.0 else -_RAPIDITY_CAP
    return y, math.atan2(py, px)


@kernel()
def _cluster_kernel(
    px: np.ndarray,
    py: np.ndarray,
    pz: np.ndarray,
    e: np.ndarray,
    flag: np.ndarray,
    offsets: np.ndarray,
    radius: float,
    p: float,
    pt_min: float,
) -> tuple[
    np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray
]:
    """Cluster every event; jets of event k go to slots offsets[k] .. offsets[k] + njets[k]."""
    nev = offsets.shape[0] - 1
    # jet columns and work buffers (reused by every event: no allocation inside the event loop)
    out_px, out_py, out_pz, out_e, jx, jy, jz, je, njets = momentum_buffers(offsets)
    ntot = out_px.shape[0]
    maxn = jx.shape[0]
    out_ncon = np.zeros(ntot, dtype=np.int64)
    out_flag = np.zeros(ntot, dtype=np.int64)
    jet_of = np.full(ntot, -1, dtype=np.int64)
    r2 = radius * radius
    jf = np.empty(maxn, dtype=np.int64)
    jn = np.empty(maxn, dtype=np.int64)
    kt = np.empty(maxn)
    rap = np.empty(maxn)
    az = np.empty(maxn)
    active = np.empty(maxn, dtype=np.bool_)
    owner = np.empty(maxn, dtype=np.int64)  # pseudojet holding each particle
    order = np.empty(maxn, dtype=np.int64)  # pseudojets that became jets, in pT order
    rank = np.empty(maxn, dtype=np.int64)
    for ev in range(nev):
        start = offsets[ev]
        n = offsets[ev + 1] - start
        for i in range(n):
            jx[i] = px[start + i]
            jy[i] = py[start + i]
            jz[i] = pz[start + i]
            je[i] = e[start + i]
            jf[i] = flag[start + i]
            jn[i] = 1
            kt[i] = _kt2p(jx[i], jy[i], p)
            rap[i], az[i] = _rap_phi(jx[i], jy[i], jz[i], je[i])
            active[i] = True
            owner[i] = i
            rank[i] = -1
        nfound = 0
        for _step in range(n):
            best = math.inf
            bi = -1
            bj = -1
            for i in range(n):
                if not active[i]:
                    continue
                if bi < 0 or kt[i] < best:
                    best = kt[i]
                    bi = i
                    bj = -1
                for j in range(i + 1, n):
                    if not active[j]:
                        continue
                    dphi = abs(az[i] - az[j])
                    if dphi > math.pi:
                        dphi = 2.0 * math.pi - dphi
                    dy = rap[i] - rap[j]
                    dij = min(kt[i], kt[j]) * (dy * dy + dphi * dphi) / r2
                    if dij < best:
                        best = dij
                        bi = i
                        bj = j
            if bj >= 0:  # merge j into i (E-scheme)
                jx[bi] += jx[bj]
                jy[bi] += jy[bj]
                jz[bi] += jz[bj]
                je[bi] += je[bj]
                jf[bi] += jf[bj]
                jn[bi] += jn[bj]
                kt[bi] = _kt2p(jx[bi], jy[bi], p)
                rap[bi], az[bi] = _rap_phi(jx[bi], jy[bi], jz[bi], je[bi])
                active[bj] = False
                for k in range(n):
                    if owner[k] == bj:
                        owner[k] = bi
            else:  # bi becomes a jet: insert it into the pT-ordered list (stable)
                active[bi] = False
                pti = jx[bi] * jx[bi] + jy[bi] * jy[bi]
                pos = nfound
                while pos > 0:
                    prev = order[pos - 1]
                    if jx[prev] * jx[prev] + jy[prev] * jy[prev] >= pti:
                        break
                    order[pos] = prev
                    pos -= 1
                order[pos] = bi
                nfound += 1
        nkeep = 0
        for r in range(nfound):
            i = order[r]
            if math.sqrt(jx[i] * jx[i] + jy[i] * jy[i]) < pt_min:
                break  # pT ordered: the rest are softer
            slot = start + nkeep
            out_px[slot] = jx[i]
            out_py[slot] = jy[i]
            out_pz[slot] = jz[i]
            out_e[slot] = je[i]
            out_ncon[slot] = jn[i]
            out_flag[slot] = jf[i]
            rank[i] = nkeep
            nkeep += 1
        njets[ev] = nkeep
        for k in range(n):
            jet_of[start + k] = rank[owner[k]]
    return out_px, out_py, out_pz, out_e, out_ncon, out_flag, njets, jet_of


def cluster(
    particles: Array,
    radius: float,
    *,
    p: float = -1.0,
    pt_min: float = 0.0,
    btag_pdgids: Iterable[int] = (5,),
) -> tuple[ak.Array, ak.Array]:
    """Cluster each event's ``particles`` with the generalised-kT algorithm.

    ``particles`` is a jagged ``[event][particle]`` array of four-momentum records (select the
    final-state particles first). Returns ``(jets, jet_index)``:

    * ``jets``: jagged ``Momentum4D`` records ``px, py, pz, E, n_constituents, btag`` ordered by
      decreasing pT, only jets with pT >= ``pt_min``; ``btag`` is True when a constituent has
      |pdgid| in ``btag_pdgids`` (parton-level flavour tag; False when there is no ``pdgid`` field);
    * ``jet_index``: jagged int, same shape as ``particles``: the index of the jet each particle
      ended in, -1 if that jet failed ``pt_min``.

    ``p`` = -1 anti-kT, 0 Cambridge/Aachen, 1 kT; ``radius`` is R (> 0).
    """
    if not radius > 0.0:
        raise ValueError(f"jet radius must be positive, got {radius!r}")
    counts_or_none, fx, fy, fz, fe = kin.flat_components(particles)
    if counts_or_none is None:
        raise ValueError("cluster needs a jagged [event][particle] array of four-momenta")
    counts = counts_or_none
    offsets = np.zeros(len(counts) + 1, dtype=np.int64)
    np.cumsum(counts, out=offsets[1:])

    def flat(x: np.ndarray) -> np.ndarray:
        return np.ascontiguousarray(x, dtype=np.float64)

    if "pdgid" in ak.fields(particles):
        from evtkin.select.objects import _int_column, _isin

        ids = _int_column(ak.flatten(particles["pdgid"], axis=1))
        wanted = np.abs(np.array(tuple(btag_pdgids), dtype=np.int64))
        flag = _isin(np.abs(ids), wanted).astype(np.int64)
    else:
        flag = np.zeros(int(offsets[-1]), dtype=np.int64)
    jx, jy, jz, je, ncon, nflag, njets, jet_of = _cluster_kernel(
        flat(fx),
        flat(fy),
        flat(fz),
        flat(fe),
        flag,
        offsets,
        float(radius),
        float(p),
        float(pt_min),
    )
    slot = np.arange(int(offsets[-1])) - np.repeat(offsets[:-1], counts)
    used = slot < np.repeat(njets, counts)
    jets = ak.unflatten(
        kin.make_p4(
            jx[used], jy[used], jz[used], je[used], n_constituents=ncon[used], btag=nflag[used] > 0
        ),
        njets,
    )
    return jets, ak.unflatten(jet_of, counts)


def antikt(
    particles: Array,
    radius: float,
    *,
    pt_min: float = 0.0,
    p: float = -1.0,
    btag_pdgids: Iterable[int] = (5,),
) -> ak.Array:
    """Anti-kT jets (``p = -1``; 0 gives Cambridge/Aachen, 1 gives kT) of radius ``radius``:
    pT-ordered jagged ``Momentum4D`` records, see :func:`cluster`."""
    return cluster(particles, radius, p=p, pt_min=pt_min, btag_pdgids=btag_pdgids)[0]
