"""Generalised-kT jet clustering for events of hundreds to thousands of particles.

``cluster_jets(particles, radius=0.4, algorithm="anti-kt", min_pt=0.0)`` runs the exact clustering
sequence of the generalised-kT family (M. Cacciari, G. P. Salam, G. Soyez, "The anti-kt jet
clustering algorithm", JHEP 04 (2008) 063) on every event of a chunk, in one compiled kernel over
flat arrays with event offsets::

    d_ij = min(kt_i^2p, kt_j^2p) · ΔR_ij² / R²,   ΔR_ij² = (y_i − y_j)² + Δφ_ij²,   d_iB = kt_i^2p

with p = −1 (anti-kT), 0 (Cambridge/Aachen), 1 (kT), y the rapidity and Δφ wrapped into [0, π].
The smallest of all d_ij and d_iB is taken: a d_ij merges i and j by adding their four-momenta
(E-scheme), a d_iB makes i a jet. kt^2p is 1/pT², 1 or pT² (no ``pow``); a particle with pT = 0 has
kt^-2 = ∞ (and a pair whose smaller kt^2p is ∞ has d = ∞).

The exact order (the tie-breaking rule)
---------------------------------------
Every candidate has a key, compared lexicographically; the smallest key is taken at each step:

* a beam candidate of pseudojet i: ``(d_iB, 0, 0, i, i)``;
* a pair candidate i < j: ``(d_ij, 1, ΔR²_ij, i, j)``,

so at equal d a beam step comes before a merge (two particles exactly R apart stay apart), equal
merges go to the geometrically closer pair, and the rest is decided by the pseudojet labels. The
label of an input particle is its index in the event; a merged pseudojet takes the smaller label
of the two it came from (hence the smallest index of its constituents). The arithmetic is fixed as
well: ΔR² = dy·dy + dφ·dφ with dy = y_i − y_j, dφ = |φ_i − φ_j| (2π − dφ when above π),
d_ij = min(kt_i^2p, kt_j^2p) · (ΔR² / R²), R² = R·R, y = ½ log((E + pz)/(E − pz)) (±1e5 when
E ≤ |pz|), φ = atan2(py, px). Jets come sorted by decreasing pT² = px² + py², ties by the smallest
constituent index; constituents are listed in increasing index.

How the sequence is found without N³ work
-----------------------------------------
Each pseudojet keeps its nearest neighbour in ΔR² (ties: the smaller label) among those closer than
R. If the best pair is (a, b) with kt_a^2p ≤ kt_b^2p, then b is a's nearest neighbour: a nearer c
would give d_ac ≤ d_ab with a smaller ΔR², an earlier key (the rounding of ΔR²/R² and of the
product is monotone, so this holds in floating point too, ties included). A pair at ΔR ≥ R never
wins: its ΔR²/R² ≥ 1, so its d is at least the softer member's d_iB, which comes first. So the best
candidate of the step is the smallest of the per-pseudojet candidates min(beam, pair with the
nearest neighbour), kept in an indexed binary heap.

Neighbours are searched in a grid of tiles in (y, φ), φ wrapping around, of side s ≤ R chosen from
the event's particle density (about two particles per tile); a search visits rings of tiles around
the pseudojet's own and stops when the ring is farther than the best distance so far. Each pseudojet
lists the pseudojets whose nearest neighbour it is, so a merge or a new jet re-searches only those;
a new pseudojet is offered as neighbour to the pseudojets near it, skipping tiles whose members'
nearest neighbours are all closer than the tile (a per-tile upper bound, refreshed when the tile is
walked).
"""

from __future__ import annotations

import math
from typing import Any

import awkward as ak
import numpy as np

from evtkin._jit import kernel, plain
from evtkin.select import kinematics as kin

__all__ = ["ALGORITHMS", "cluster_flat", "cluster_jets", "momentum_buffers"]

#: algorithm name -> the exponent p of the generalised-kT family
ALGORITHMS: dict[str, int] = {"anti-kt": -1, "cambridge": 0, "kt": 1}

_RAPIDITY_CAP = 1.0e5  # rapidity given to particles with E <= |pz| (e.g. massless along the beam)
_GRID_RAPIDITY = 8.0  # tile rows span at most |y| <= this; rows at the edges are open-ended
_TILE_OCCUPANCY = 2.0  # aimed-at mean number of particles per tile
_MARGIN = 1.0e-9  # absolute slack on tile-distance bounds (tile indices are computed with rounding)
_TWO_PI = 2.0 * math.pi

Array = Any


@plain()
def _kt2p(px: float, py: float, p: int) -> float:
    pt2 = px * px + py * py
    if p == 0:
        return 1.0
    if p > 0:
        return pt2
    if pt2 == 0.0:
        return math.inf
    return 1.0 / pt2


@plain()
def _rapidity(pz: float, e: float) -> float:
    if e > abs(pz):
        return 0.5 * math.log((e + pz) / (e - pz))
    return _RAPIDITY_CAP if pz >= 0.0 else -_RAPIDITY_CAP


@plain()
def _dist2(y: np.ndarray, phi: np.ndarray, a: int, b: int) -> float:
    dy = y[a] - y[b]
    dphi = abs(phi[a] - phi[b])
    if dphi > math.pi:
        dphi = _TWO_PI - dphi
    out: float = dy * dy + dphi * dphi
    return out


@plain()
def _less(kd: np.ndarray, kk: np.ndarray, kr: np.ndarray, klo: np.ndarray, khi: np.ndarray,
          a: int, b: int) -> bool:
    """Key of slot a before key of slot b (lexicographic: d, kind, ΔR², lo, hi)."""
    if kd[a] != kd[b]:
        return bool(kd[a] < kd[b])
    if kk[a] != kk[b]:
        return bool(kk[a] < kk[b])
    if kr[a] != kr[b]:
        return bool(kr[a] < kr[b])
    if klo[a] != klo[b]:
        return bool(klo[a] < klo[b])
    return bool(khi[a] < khi[b])


@plain()
def _sift(heap: np.ndarray, hpos: np.ndarray, size: int, pos: int, kd: np.ndarray,
          kk: np.ndarray, kr: np.ndarray, klo: np.ndarray, khi: np.ndarray) -> None:
    """Restore the heap order around position ``pos`` (moves the entry up or down)."""
    m = heap[pos]
    while pos > 0:
        parent = (pos - 1) >> 1
        q = heap[parent]
        if not _less(kd, kk, kr, klo, khi, m, q):
            break
        heap[pos] = q
        hpos[q] = pos
        pos = parent
    while True:
        child = 2 * pos + 1
        if child >= size:
            break
        c = heap[child]
        if child + 1 < size:
            c2 = heap[child + 1]
            if _less(kd, kk, kr, klo, khi, c2, c):
                child += 1
                c = c2
        if not _less(kd, kk, kr, klo, khi, c, m):
            break
        heap[pos] = c
        hpos[c] = pos
        pos = child
    heap[pos] = m
    hpos[m] = pos


@plain()
def _set_key(m: int, nn: np.ndarray, nnd: np.ndarray, kt: np.ndarray, r2: float,
             kd: np.ndarray, kk: np.ndarray, kr: np.ndarray, klo: np.ndarray,
             khi: np.ndarray) -> None:
    """The candidate of slot m: the earlier of its beam step and the pair with its neighbour."""
    j = nn[m]
    if j >= 0:
        mk = min(kt[m], kt[j])
        d = math.inf if mk == math.inf else mk * (nnd[m] / r2)
        if d < kt[m]:
            kd[m] = d
            kk[m] = 1
            kr[m] = nnd[m]
            klo[m] = min(m, j)
            khi[m] = max(m, j)
            return
    kd[m] = kt[m]
    kk[m] = 0
    kr[m] = 0.0
    klo[m] = m
    khi[m] = m


@plain()
def _nn_search(m: int, y: np.ndarray, phi: np.ndarray, tile_of: np.ndarray,
               thead: np.ndarray, tnext: np.ndarray, nphi: int, ny: int, s: float, rmax: int,
               r2: float) -> tuple[int, float]:
    """Nearest neighbour of slot m among the pseudojets in the tiles, closer than R:
    ``(label, ΔR²)``, or ``(-1, R²)`` when there is none. Ties go to the smaller label."""
    best = r2
    bj = -1
    home = tile_of[m]
    iy = home // nphi
    ix = home - iy * nphi
    hl = (nphi - 1) // 2
    hr = nphi - 1 - hl
    for r in range(rmax + 1):
        if r >= 2:
            lb = (r - 1) * s - _MARGIN
            if lb > 0.0 and lb * lb > best:
                break
        cl = min(r, hl)
        cr = min(r, hr)
        for dr in range(-r, r + 1):
            row = iy + dr
            if row < 0 or row >= ny:
                continue
            full = dr == r or dr == -r
            dc = -cl
            while dc <= cr:
                if not full and dc != -r and dc != r:
                    dc = cr if r <= hr else cr + 1  # only the ring's two side columns
                    continue
                col = ix + dc
                if col < 0:
                    col += nphi
                elif col >= nphi:
                    col -= nphi
                q = thead[row * nphi + col]
                while q >= 0:
                    if q != m:
                        d2 = _dist2(y, phi, m, q)
                        if d2 < best or (d2 == best and q < bj):
                            best = d2
                            bj = q
                    q = tnext[q]
                dc += 1
    return bj, best


@plain()
def momentum_buffers(offsets: np.ndarray) -> tuple[
    np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray,
    np.ndarray, np.ndarray
]:
    """The set-up shared by the clustering kernels (this module's and :mod:`evtkin.select.jets`')
    for events whose particles are the flat entries ``offsets[k] .. offsets[k + 1]``: flat jet
    columns ``px, py, pz, E`` with one slot per particle (an event has at most as many jets as
    particles; the callers read only the slots they fill), ``px, py, pz, E`` work columns of the
    largest event's size (at least 1) and the number of jets per event (zeros)."""
    nev = offsets.shape[0] - 1
    ntot = offsets[nev]
    maxn = 1
    for ev in range(nev):
        maxn = max(maxn, offsets[ev + 1] - offsets[ev])
    return (np.empty(ntot), np.empty(ntot), np.empty(ntot), np.empty(ntot),
            np.empty(maxn), np.empty(maxn), np.empty(maxn), np.empty(maxn),
            np.zeros(nev, dtype=np.int64))


@kernel()
def _cluster_kernel(
    px: np.ndarray,
    py: np.ndarray,
    pz: np.ndarray,
    e: np.ndarray,
    offsets: np.ndarray,
    radius: float,
    p: int,
    min_pt: float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Cluster every event. Returns flat jet columns ``(px, py, pz, E)``, jets per event, the
    flat constituent indices (per event) and constituents per jet."""
    nev = offsets.shape[0] - 1
    out_px, out_py, out_pz, out_e, jx, jy, jz, je, njets = momentum_buffers(offsets)
    ntot = out_px.shape[0]
    maxn = jx.shape[0]
    out_cons = np.empty(ntot, dtype=np.int64)
    out_ncon = np.empty(ntot, dtype=np.int64)
    r2 = radius * radius
    kt = np.empty(maxn)
    y = np.empty(maxn)
    phi = np.empty(maxn)
    isjet = np.zeros(maxn, dtype=np.bool_)
    tile_of = np.empty(maxn, dtype=np.int64)
    tnext = np.empty(maxn, dtype=np.int64)
    tprev = np.empty(maxn, dtype=np.int64)
    nn = np.empty(maxn, dtype=np.int64)
    nnd = np.empty(maxn)
    rhead = np.empty(maxn, dtype=np.int64)
    rnext = np.empty(maxn, dtype=np.int64)
    rprev = np.empty(maxn, dtype=np.int64)
    heap = np.empty(maxn, dtype=np.int64)
    hpos = np.empty(maxn, dtype=np.int64)
    kd = np.empty(maxn)
    kk = np.empty(maxn, dtype=np.int64)
    kr = np.empty(maxn)
    klo = np.empty(maxn, dtype=np.int64)
    khi = np.empty(maxn, dtype=np.int64)
    chead = np.empty(maxn, dtype=np.int64)
    ctail = np.empty(maxn, dtype=np.int64)
    cnext = np.empty(maxn, dtype=np.int64)
    todo = np.empty(maxn, dtype=np.int64)
    rank = np.empty(maxn, dtype=np.int64)
    crank = np.empty(maxn, dtype=np.int64)
    cfill = np.empty(maxn + 1, dtype=np.int64)
    jet_slots = np.empty(maxn, dtype=np.int64)
    jet_pt2 = np.empty(maxn)
    thead = np.empty(16, dtype=np.int64)
    tmax = np.empty(16)
    jet_out = 0
    con_out = 0
    for ev in range(nev):
        start = offsets[ev]
        n = offsets[ev + 1] - start
        if n == 0:
            continue
        ylo = math.inf
        yhi = -math.inf
        for i in range(n):
            jx[i] = px[start + i]
            jy[i] = py[start + i]
            jz[i] = pz[start + i]
            je[i] = e[start + i]
            kt[i] = _kt2p(jx[i], jy[i], p)
            y[i] = _rapidity(jz[i], je[i])
            phi[i] = math.atan2(jy[i], jx[i])
            ylo = min(ylo, y[i])
            yhi = max(yhi, y[i])
            isjet[i] = False
            chead[i] = i
            ctail[i] = i
            cnext[i] = -1
            rhead[i] = -1
        # the grid: rows of height s over [ylo, yhi] (clamped), columns of width >= s over φ
        ylo = max(ylo, -_GRID_RAPIDITY)
        yhi = min(yhi, _GRID_RAPIDITY)
        if yhi < ylo:
            yhi = ylo
        span = max(yhi - ylo, radius)
        s = math.sqrt(span * _TWO_PI * _TILE_OCCUPANCY / n)
        # R/k for a whole k in 1..6, a little wider so that ring k + 1 is certainly beyond R
        s = radius / min(max(math.ceil(radius / s), 1), 6) * (1.0 + 1.0e-6)
        ny = int((yhi - ylo) / s) + 1
        nphi = max(1, int(_TWO_PI / s))
        sphi = _TWO_PI / nphi
        rmax = math.ceil(radius / s) + 1
        ntiles = ny * nphi
        if ntiles > thead.shape[0]:
            thead = np.empty(ntiles, dtype=np.int64)
            tmax = np.empty(ntiles)
        for t in range(ntiles):
            thead[t] = -1
            tmax[t] = 0.0
        for i in range(n):
            row = int((y[i] - ylo) / s) if y[i] > ylo else 0
            row = min(row, ny - 1)
            col = int((phi[i] + math.pi) / sphi)
            if col >= nphi:
                col -= nphi
            elif col < 0:
                col = 0
            t = row * nphi + col
            tile_of[i] = t
            h = thead[t]
            tnext[i] = h
            tprev[i] = -1
            if h >= 0:
                tprev[h] = i
            thead[t] = i
        for i in range(n):
            j, d2 = _nn_search(i, y, phi, tile_of, thead, tnext, nphi, ny, s, rmax, r2)
            nn[i] = j
            nnd[i] = d2
            if j >= 0:
                rprev[i] = -1
                h = rhead[j]
                rnext[i] = h
                if h >= 0:
                    rprev[h] = i
                rhead[j] = i
            t = tile_of[i]
            if d2 > tmax[t]:
                tmax[t] = d2
            _set_key(i, nn, nnd, kt, r2, kd, kk, kr, klo, khi)
        for i in range(n):  # (sifting up one insertion at a time)
            heap[i] = i
            hpos[i] = i
            _sift(heap, hpos, i + 1, i, kd, kk, kr, klo, khi)
        size = n
        while size > 0:
            top = heap[0]
            if kk[top] == 0:
                a = top
                b = -1
            else:
                a = klo[top]
                b = khi[top]
            # take a (and b) out of the heap, the tiles and the neighbour lists
            for which in range(2):
                m = a if which == 0 else b
                if m < 0:
                    continue
                if which == 1 or b < 0:
                    pos = hpos[m]
                    size -= 1
                    if pos != size:
                        last = heap[size]
                        heap[pos] = last
                        hpos[last] = pos
                        _sift(heap, hpos, size, pos, kd, kk, kr, klo, khi)
                    hpos[m] = -1
                t = tile_of[m]
                if tprev[m] >= 0:
                    tnext[tprev[m]] = tnext[m]
                else:
                    thead[t] = tnext[m]
                if tnext[m] >= 0:
                    tprev[tnext[m]] = tprev[m]
                j = nn[m]
                if j >= 0:
                    if rprev[m] >= 0:
                        rnext[rprev[m]] = rnext[m]
                    else:
                        rhead[j] = rnext[m]
                    if rnext[m] >= 0:
                        rprev[rnext[m]] = rprev[m]
            ntodo = 0
            for which in range(2):
                m = a if which == 0 else b
                if m < 0:
                    continue
                q = rhead[m]
                while q >= 0:
                    todo[ntodo] = q
                    ntodo += 1
                    q = rnext[q]
                rhead[m] = -1
            if b < 0:
                isjet[a] = True
            else:
                # E-scheme merge into slot a (the smaller label)
                jx[a] = jx[a] + jx[b]
                jy[a] = jy[a] + jy[b]
                jz[a] = jz[a] + jz[b]
                je[a] = je[a] + je[b]
                cnext[ctail[a]] = chead[b]
                ctail[a] = ctail[b]
                kt[a] = _kt2p(jx[a], jy[a], p)
                y[a] = _rapidity(jz[a], je[a])
                phi[a] = math.atan2(jy[a], jx[a])
                row = int((y[a] - ylo) / s) if y[a] > ylo else 0
                row = min(row, ny - 1)
                col = int((phi[a] + math.pi) / sphi)
                if col >= nphi:
                    col -= nphi
                elif col < 0:
                    col = 0
                t = row * nphi + col
                tile_of[a] = t
                h = thead[t]
                tnext[a] = h
                tprev[a] = -1
                if h >= 0:
                    tprev[h] = a
                thead[t] = a
                todo[ntodo] = a
                ntodo += 1
            # new neighbours for those that pointed at a or b (and for the new pseudojet)
            for k in range(ntodo):
                m = todo[k]
                j, d2 = _nn_search(m, y, phi, tile_of, thead, tnext, nphi, ny, s, rmax, r2)
                nn[m] = j
                nnd[m] = d2
                if j >= 0:
                    rprev[m] = -1
                    h = rhead[j]
                    rnext[m] = h
                    if h >= 0:
                        rprev[h] = m
                    rhead[j] = m
                t = tile_of[m]
                if d2 > tmax[t]:
                    tmax[t] = d2
                _set_key(m, nn, nnd, kt, r2, kd, kk, kr, klo, khi)
                _sift(heap, hpos, size, hpos[m], kd, kk, kr, klo, khi)
            if b < 0:
                continue
            # offer the new pseudojet a as neighbour to those near it
            home = tile_of[a]
            iy = home // nphi
            ix = home - iy * nphi
            hl = (nphi - 1) // 2
            hr = nphi - 1 - hl
            for r in range(rmax + 1):
                lb = 0.0
                if r >= 2:
                    lb = (r - 1) * s - _MARGIN
                    if lb > 0.0 and lb * lb > r2:
                        break
                cl = min(r, hl)
                cr = min(r, hr)
                for dr in range(-r, r + 1):
                    row = iy + dr
                    if row < 0 or row >= ny:
                        continue
                    full = dr == r or dr == -r
                    dc = -cl
                    while dc <= cr:
                        if not full and dc != -r and dc != r:
                            dc = cr if r <= hr else cr + 1
                            continue
                        col = ix + dc
                        if col < 0:
                            col += nphi
                        elif col >= nphi:
                            col -= nphi
                        dc += 1
                        t = row * nphi + col
                        if lb > 0.0 and lb * lb > tmax[t]:
                            continue
                        top_d = 0.0
                        q = thead[t]
                        while q >= 0:
                            if q != a:
                                d2 = _dist2(y, phi, q, a)
                                if d2 < nnd[q] or (d2 == nnd[q] and a < nn[q]):
                                    j = nn[q]
                                    if j >= 0:
                                        if rprev[q] >= 0:
                                            rnext[rprev[q]] = rnext[q]
                                        else:
                                            rhead[j] = rnext[q]
                                        if rnext[q] >= 0:
                                            rprev[rnext[q]] = rprev[q]
                                    nn[q] = a
                                    nnd[q] = d2
                                    rprev[q] = -1
                                    h = rhead[a]
                                    rnext[q] = h
                                    if h >= 0:
                                        rprev[h] = q
                                    rhead[a] = q
                                    _set_key(q, nn, nnd, kt, r2, kd, kk, kr, klo, khi)
                                    _sift(heap, hpos, size, hpos[q], kd, kk, kr, klo, khi)
                            if nnd[q] > top_d:
                                top_d = nnd[q]
                            q = tnext[q]
                        tmax[t] = top_d
        # the event's jets: pT ordered (stable over labels), the pT cut, constituents
        nj = 0
        for i in range(n):
            if isjet[i]:
                jet_slots[nj] = i
                jet_pt2[nj] = -(jx[i] * jx[i] + jy[i] * jy[i])
                nj += 1
        order = np.argsort(jet_pt2[:nj], kind="mergesort")
        nkeep = 0
        for r in range(nj):
            i = jet_slots[order[r]]
            if math.sqrt(-jet_pt2[order[r]]) < min_pt:
                break
            rank[nkeep] = i
            nkeep += 1
        for i in range(n):
            crank[i] = -1
        for r in range(nkeep):
            i = rank[r]
            slot = jet_out + r
            out_px[slot] = jx[i]
            out_py[slot] = jy[i]
            out_pz[slot] = jz[i]
            out_e[slot] = je[i]
            out_ncon[slot] = 0
            c = chead[i]
            while c >= 0:
                crank[c] = r
                out_ncon[slot] += 1
                c = cnext[c]
        cfill[0] = con_out
        for r in range(nkeep):
            cfill[r + 1] = cfill[r] + out_ncon[jet_out + r]
        for c in range(n):
            r = crank[c]
            if r >= 0:
                out_cons[cfill[r]] = c
                cfill[r] += 1
        con_out = cfill[nkeep] if nkeep > 0 else con_out
        njets[ev] = nkeep
        jet_out += nkeep
    return (out_px[:jet_out], out_py[:jet_out], out_pz[:jet_out], out_e[:jet_out], njets,
            out_cons[:con_out], out_ncon[:jet_out])


def _exponent(algorithm: str) -> int:
    try:
        return ALGORITHMS[algorithm]
    except (KeyError, TypeError):
        raise ValueError(
            f"unknown jet algorithm {algorithm!r}; expected one of {sorted(ALGORITHMS)}"
        ) from None


def cluster_flat(
    px: np.ndarray,
    py: np.ndarray,
    pz: np.ndarray,
    energy: np.ndarray,
    counts: np.ndarray,
    *,
    radius: float = 0.4,
    algorithm: str = "anti-kt",
    min_pt: float = 0.0,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The kernel on flat columns: particles of event k are ``counts[k]`` consecutive entries.

    Returns ``(px, py, pz, energy, jets_per_event, constituents, constituents_per_jet)``, all
    flat: jets event after event in decreasing pT, constituent indices (counted within the event)
    jet after jet in increasing order."""
    p = _exponent(algorithm)
    if not (isinstance(radius, (int, float)) and math.isfinite(radius) and radius > 0.0):
        raise ValueError(f"jet radius must be a positive finite number, got {radius!r}")
    if not (isinstance(min_pt, (int, float)) and math.isfinite(min_pt) and min_pt >= 0.0):
        raise ValueError(f"min_pt must be a finite number >= 0, got {min_pt!r}")
    cols = [np.ascontiguousarray(c, dtype=np.float64) for c in (px, py, pz, energy)]
    for name, col in zip(("px", "py", "pz", "energy"), cols, strict=True):
        bad = ~np.isfinite(col)
        if bad.any():
            raise ValueError(
                f"cluster_jets: {int(bad.sum())} particle(s) with a non-finite {name} "
                f"(first at flat index {int(np.argmax(bad))}); expected finite four-momenta"
            )
    counts = np.asarray(counts, dtype=np.int64)
    offsets = np.zeros(len(counts) + 1, dtype=np.int64)
    np.cumsum(counts, out=offsets[1:])
    sizes = {len(c) for c in cols}
    if len(sizes) != 1 or (counts < 0).any() or int(offsets[-1]) != len(cols[0]):
        held = ", ".join(str(len(c)) for c in cols)
        raise ValueError(
            f"cluster_flat: counts must be >= 0 and add up to the particles given (counts add "
            f"up to {int(offsets[-1])}; px, py, pz, energy hold {held})"
        )
    fx, fy, fz, fe = cols
    out = _cluster_kernel(fx, fy, fz, fe, offsets, float(radius), int(p), float(min_pt))
    return out  # type: ignore[no-any-return]


def cluster_jets(
    particles: Array,
    *,
    radius: float = 0.4,
    algorithm: str = "anti-kt",
    min_pt: float = 0.0,
) -> ak.Array:
    """Jets of every event of ``particles`` (a jagged ``[event][particle]`` array of records with
    ``px, py, pz, energy``) by the generalised-kT ``algorithm`` ("anti-kt", "kt" or "cambridge")
    of radius ``radius``, E-scheme, rapidity–φ distance; jets with pT < ``min_pt`` are dropped.

    Returns a jagged array of ``Particle`` records ``px, py, pz, energy, constituents`` (the
    indices of the jet's particles within its event, increasing), jets in decreasing pT (ties: the
    smallest constituent index first). The sequence and its tie-breaking are described in the
    module docstring of :mod:`evtkin.select.clustering`."""
    import evtkin.events  # noqa: F401  (registers the Particle behaviour)

    _exponent(algorithm)
    if not isinstance(particles, ak.Array) or particles.ndim != 2:
        raise ValueError("cluster_jets needs a jagged [event][particle] awkward array of records")
    if not ak.fields(particles) and ak.sum(ak.num(particles, axis=1)) == 0:
        # events without particles (and so without record fields): no jets
        counts = ak.to_numpy(ak.num(particles, axis=1)).astype(np.int64)
        fx = fy = fz = fe = np.zeros(0)
    else:
        counts_or_none, fx, fy, fz, fe = kin.flat_components(particles)
        assert counts_or_none is not None
        counts = counts_or_none
    jx, jy, jz, je, njets, cons, ncon = cluster_flat(
        fx, fy, fz, fe, counts, radius=radius, algorithm=algorithm, min_pt=min_pt
    )
    jets = ak.zip(
        {
            "px": jx,
            "py": jy,
            "pz": jz,
            "energy": je,
            "constituents": ak.unflatten(cons, ncon),
        },
        depth_limit=1,
        with_name="Particle",
    )
    return ak.unflatten(jets, njets)
