"""The decay graph of HepMC-style events, columnar over a chunk.

Particles carry ``prod_vertex`` and ``end_vertex``: 0-based indices into the same event's vertices,
-1 for none (see ``evtkin.read_hepmc``). The parents of a particle are the particles ending in its
production vertex, its children the particles produced in its end vertex. Everything here works on
the flattened particles of the whole chunk at once: vertices get chunk-wide numbers, the particles
are sorted by vertex once, and a vertex's incoming or outgoing particles are then a contiguous
range. "Has an ancestor that ..." is a breadth-first walk down the child edges from every matching
particle in one compiled kernel (each particle visited once, so damaged records with loops end).

All index lists are local to the event (0-based positions in the event's ``particles``), in
increasing order.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import awkward as ak
import numpy as np

from evtkin._jit import kernel

__all__ = ["DecayGraph", "children", "decay_graph", "has_ancestor", "parents"]

Array = Any


@dataclass(frozen=True)
class DecayGraph:
    """Flat adjacency of a chunk's particles (chunk-wide particle numbers).

    ``parent_start[i] .. parent_start[i + 1]`` index ``parent_index`` for the parents of flat
    particle i, and likewise for the children; ``counts`` are the particles per event and
    ``offsets`` their cumulative sum (the flat number of each event's first particle)."""

    counts: np.ndarray
    offsets: np.ndarray
    parent_start: np.ndarray
    parent_index: np.ndarray
    child_start: np.ndarray
    child_index: np.ndarray

    def local(self, flat: np.ndarray, start: np.ndarray) -> ak.Array:
        """Jagged ``[event][particle][k]`` event-local indices from a flat adjacency."""
        n = len(start) - 1
        per = np.diff(start)
        event_of = np.repeat(np.arange(len(self.counts)), self.counts)
        base = np.repeat(self.offsets[:-1][event_of], per) if n else np.zeros(0, np.int64)
        inner = ak.unflatten(flat - base, per)
        return ak.unflatten(inner, self.counts)


def _int(a: Array) -> np.ndarray:
    return np.asarray(ak.to_numpy(a), dtype=np.int64)


def _adjacency(key_from: np.ndarray, key_to: np.ndarray, nkeys: int) -> tuple[np.ndarray,
                                                                             np.ndarray]:
    """For every particle i the particles j with ``key_from[j] == key_to[i]`` (keys >= 0):
    CSR ``(start, index)``, indices increasing within a list."""
    order = np.argsort(key_from, kind="stable")
    sorted_keys = key_from[order]
    # one extra key so that the lookups below are always in range
    first = np.searchsorted(sorted_keys, np.arange(nkeys + 1), side="left")
    last = np.searchsorted(sorted_keys, np.arange(nkeys + 1), side="right")
    valid = key_to >= 0
    lo = np.where(valid, first[np.where(valid, key_to, 0)], 0)
    hi = np.where(valid, last[np.where(valid, key_to, 0)], 0)
    per = hi - lo
    start = np.zeros(len(key_to) + 1, dtype=np.int64)
    np.cumsum(per, out=start[1:])
    pos = np.arange(start[-1]) - np.repeat(start[:-1] - lo, per)
    return start, order[pos].astype(np.int64)


def decay_graph(particles: Array) -> DecayGraph:
    """The parent and child lists of every particle of a jagged ``[event][particle]`` array with
    ``prod_vertex`` and ``end_vertex`` fields."""
    fields = ak.fields(particles)
    for name in ("prod_vertex", "end_vertex"):
        if name not in fields:
            raise ValueError(f"the decay graph needs the particle field {name!r}; got {fields}")
    counts = _int(ak.num(particles, axis=1))
    offsets = np.zeros(len(counts) + 1, dtype=np.int64)
    np.cumsum(counts, out=offsets[1:])
    prod = _int(ak.flatten(particles["prod_vertex"], axis=1))
    end = _int(ak.flatten(particles["end_vertex"], axis=1))
    event_of = np.repeat(np.arange(len(counts)), counts)
    top = np.maximum(prod, end)
    nv = np.zeros(len(counts), dtype=np.int64)
    if len(top):
        np.maximum.at(nv, event_of, top + 1)
    vbase = np.zeros(len(counts) + 1, dtype=np.int64)
    np.cumsum(nv, out=vbase[1:])
    gprod = np.where(prod >= 0, prod + vbase[:-1][event_of], -1)
    gend = np.where(end >= 0, end + vbase[:-1][event_of], -1)
    nkeys = int(vbase[-1])
    # parents of i: particles ending where i is produced; children: produced where i ends
    pstart, pindex = _adjacency(np.where(gend >= 0, gend, nkeys), gprod, nkeys)
    cstart, cindex = _adjacency(np.where(gprod >= 0, gprod, nkeys), gend, nkeys)
    return DecayGraph(counts, offsets, pstart, pindex, cstart, cindex)


def parents(particles: Array, graph: DecayGraph | None = None) -> ak.Array:
    """Jagged ``[event][particle][k]``: the indices of each particle's parents."""
    g = graph if graph is not None else decay_graph(particles)
    return g.local(g.parent_index, g.parent_start)


def children(particles: Array, graph: DecayGraph | None = None) -> ak.Array:
    """Jagged ``[event][particle][k]``: the indices of each particle's children."""
    g = graph if graph is not None else decay_graph(particles)
    return g.local(g.child_index, g.child_start)


@kernel()
def _descendants_of(seed: np.ndarray, child_start: np.ndarray,
                    child_index: np.ndarray) -> np.ndarray:
    """True for every particle reachable through one or more child edges from a seed."""
    n = seed.shape[0]
    out = np.zeros(n, dtype=np.bool_)
    queue = np.empty(n, dtype=np.int64)
    head = 0
    tail = 0
    for i in range(n):
        if seed[i]:
            for k in range(child_start[i], child_start[i + 1]):
                c = child_index[k]
                if not out[c]:
                    out[c] = True
                    queue[tail] = c
                    tail += 1
    while head < tail:
        i = queue[head]
        head += 1
        for k in range(child_start[i], child_start[i + 1]):
            c = child_index[k]
            if not out[c]:
                out[c] = True
                queue[tail] = c
                tail += 1
    return out


def has_ancestor_flat(condition: np.ndarray, graph: DecayGraph) -> np.ndarray:
    """Flat form of :func:`has_ancestor`: ``condition`` is a flat bool array over the chunk."""
    cond = np.ascontiguousarray(condition, dtype=np.bool_)
    if cond.shape != (int(graph.offsets[-1]),):
        raise ValueError(f"condition has {cond.shape} entries, the graph {graph.offsets[-1]}")
    return _descendants_of(cond, graph.child_start, graph.child_index)  # type: ignore[no-any-return]


def has_ancestor(particles: Array, condition: Array, graph: DecayGraph | None = None) -> ak.Array:
    """Jagged bool ``[event][particle]``: True where some ancestor (parent, grandparent, ...)
    satisfies ``condition`` (a jagged bool array of the particles' shape, e.g.
    ``is_hadron(particles.pdgid) & (particles.status == 2)``). A particle is not its own
    ancestor."""
    g = graph if graph is not None else decay_graph(particles)
    flat = ak.to_numpy(ak.flatten(condition, axis=1)).astype(np.bool_)
    return ak.unflatten(has_ancestor_flat(flat, g), g.counts)
