"""Truth navigation through the mother indices of the event record.

Particles carry ``mother1`` and ``mother2``: 0-based indices into the same event, -1 for none (the
LHE reader subtracts 1 from the file's 1-based MOTHUP). A particle's mothers are the index range
``mother1 .. mother2`` (LHEF: "first and last mother"): the products of a 2 → n hard process point
to (0, 1), i.e. both incoming partons; the decay products of a resonance at index j carry (j, j) or,
with some writers, (j, -1). Both conventions are accepted; ``mother2 < mother1`` means a single
mother.

Everything is vectorised over all events at once: mother ranges are tested against a parent mask
with prefix sums over the flattened particles, and ancestry is followed one generation per step
(the number of steps is the depth of the decay chain, not the number of events).
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

import awkward as ak
import numpy as np

from evtkin.select.objects import match_pdgid

__all__ = [
    "children_of",
    "daughters",
    "descendants",
    "descends_from",
    "mother_field",
    "resonance",
]

Array = Any


def _flat_layout(particles: Array) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Counts, start offset per particle, and flat ``mother1``/``mother2`` as int64 numpy arrays."""
    m1 = particles["mother1"]
    counts = ak.to_numpy(ak.num(m1, axis=1)).astype(np.int64)
    starts = np.repeat(np.cumsum(counts) - counts, counts)
    f1 = ak.to_numpy(ak.flatten(m1, axis=1)).astype(np.int64)
    f2 = ak.to_numpy(ak.flatten(particles["mother2"], axis=1)).astype(np.int64)
    return counts, starts, f1, f2


def _mother_range(
    counts: np.ndarray, starts: np.ndarray, m1: np.ndarray, m2: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Global ``[lo, hi]`` of each particle's mothers and whether it has any valid mother."""
    n_in_event = np.repeat(counts, counts)
    lo = np.where(m1 >= 0, m1, m2)
    hi = np.where(m2 >= lo, m2, lo)
    valid = (lo >= 0) & (hi < n_in_event)
    lo = np.where(valid, lo, 0) + starts
    hi = np.where(valid, hi, 0) + starts
    return lo, hi, valid


def _children_flat(pm: np.ndarray, lo: np.ndarray, hi: np.ndarray, valid: np.ndarray) -> np.ndarray:
    """Flat: some mother in [lo, hi] is selected by the int mask ``pm`` (prefix-sum test)."""
    csum = np.zeros(pm.shape[0] + 1, dtype=np.int64)
    np.cumsum(pm, out=csum[1:])
    out: np.ndarray = valid & (csum[hi + 1] - csum[lo] > 0)
    return out


def _flat_mask(mask: Array, n: int) -> np.ndarray:
    pm = ak.to_numpy(ak.flatten(ak.fill_none(mask, False), axis=1)).astype(np.int64)
    if pm.shape[0] != n:
        raise ValueError("the mask must have the same shape as the particles")
    out: np.ndarray = pm
    return out


def children_of(particles: Array, parent_mask: Array) -> ak.Array:
    """Jagged boolean mask: the particle has at least one mother selected by ``parent_mask``
    (a jagged boolean array of the same shape as ``particles``)."""
    counts, starts, m1, m2 = _flat_layout(particles)
    pm = _flat_mask(parent_mask, m1.shape[0])
    lo, hi, valid = _mother_range(counts, starts, m1, m2)
    return ak.unflatten(_children_flat(pm, lo, hi, valid), counts)


def _as_mask(
    particles: Array, which: Array | str | Iterable[int], status: int | None, signed: bool
) -> Array:
    if isinstance(which, (str, int, np.integer)) or (
        not isinstance(which, ak.Array) and isinstance(which, Iterable)
    ):
        ids = (int(which),) if isinstance(which, (int, np.integer)) else which
        mask = match_pdgid(particles["pdgid"], ids, signed=signed)
        if status is not None:
            mask = mask & (particles["status"] == status)
        return mask
    return which


def descendants(
    particles: Array, ancestor_mask: Array, *, max_depth: int | None = None
) -> ak.Array:
    """Jagged boolean mask of all descendants (children, grandchildren, ...) of the particles
    selected by ``ancestor_mask``; the ancestors themselves are not included unless they descend
    from another selected ancestor. ``max_depth`` limits the number of generations."""
    counts, starts, m1, m2 = _flat_layout(particles)
    lo, hi, valid = _mother_range(counts, starts, m1, m2)
    current = _children_flat(_flat_mask(ancestor_mask, m1.shape[0]), lo, hi, valid)
    result = current.copy()
    limit = int(counts.max()) if counts.size else 0  # no chain is longer than an event
    if max_depth is not None:
        limit = min(limit, max_depth)
    for _ in range(1, limit):
        nxt = _children_flat(current.astype(np.int64), lo, hi, valid) & ~result
        if not nxt.any():
            break
        result |= nxt
        current = nxt
    return ak.unflatten(result, counts)


def descends_from(
    particles: Array,
    ancestors: Array | str | Iterable[int],
    *,
    status: int | None = None,
    signed: bool = False,
    max_depth: int | None = None,
) -> ak.Array:
    """Jagged boolean mask: the particle descends from an ancestor given as a PDG class name, id or
    ids (|id| unless ``signed``, optionally of one ``status``) or as a jagged boolean mask."""
    mask = _as_mask(particles, ancestors, status, signed)
    return descendants(particles, mask, max_depth=max_depth)


def daughters(
    particles: Array,
    parents: Array | str | Iterable[int],
    *,
    status: int | None = None,
    signed: bool = False,
) -> Array:
    """The direct decay products of the parents (PDG class name, id(s) or a jagged mask), in
    event-record order. E.g. ``daughters(p, 6)`` gives the W and b of t and t̄;
    ``daughters(p, [24], signed=True)`` those of the W⁺ only."""
    return particles[children_of(particles, _as_mask(particles, parents, status, signed))]


def resonance(
    particles: Array,
    pdgid: int | str | Iterable[int],
    *,
    status: int | None = 2,
    signed: bool = False,
) -> Array:
    """Resonance records (LHEF ISTUP = 2 by default, ``status=None`` for any) matching ``pdgid``, in
    event-record order, jagged. ``ak.firsts(...)`` gives one per event (None when absent)."""
    return particles[_as_mask(particles, pdgid, status, signed)]


def mother_field(particles: Array, field: str = "pdgid", *, fill: Any = 0) -> ak.Array:
    """The value of ``field`` of each particle's first mother (``fill`` when there is none), e.g.
    the mother's PDG id to select leptons coming from a W."""
    counts, starts, m1, m2 = _flat_layout(particles)
    lo, _, valid = _mother_range(counts, starts, m1, m2)
    values = ak.to_numpy(ak.flatten(particles[field], axis=1))
    out = np.where(valid, values[np.where(valid, lo, 0)] if values.size else values, fill)
    return ak.unflatten(out, counts)
