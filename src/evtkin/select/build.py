"""The objects of an event from object definitions: built from the event record's particles
(generator files: LHE, showered events) or from reconstructed collections (ROOT ntuples).

A definition is anything with the attributes of :class:`ObjectDefinition` (the config's
``[objects.NAME]`` specs are); the functions apply thresholds, the ``require`` condition on the
objects' fields, isolation (against particles or against other defined objects), anti-kT
clustering, pT ordering and overlap removal in the declared order, on whole arrays.
"""

from __future__ import annotations

from collections.abc import Callable, Collection, Mapping, Sequence
from typing import Any, Protocol

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError
from evtkin.expr import ATTRIBUTES, Expression, ExpressionError, evaluate
from evtkin.select import decay_graph as dg
from evtkin.select import jets as jetalg
from evtkin.select import kinematics as kin
from evtkin.select import objects as obj
from evtkin.select import particle_level as pl
from evtkin.select import pdgid as pid
from evtkin.select import truth

__all__ = [
    "MissingPtDefinition",
    "ObjectDefinition",
    "OverlapDefinition",
    "collection_objects",
    "isolate_against_objects",
    "merged_collection",
    "object_mask",
    "particle_object",
    "particle_objects",
    "showered_object",
    "showered_objects",
]


class ObjectDefinition(Protocol):
    """What building one collection of objects needs (see :class:`evtkin.config.ObjectSpec`)."""

    @property
    def name(self) -> str: ...
    @property
    def pdgids(self) -> tuple[int, ...]: ...
    @property
    def status(self) -> tuple[int, ...]: ...
    @property
    def min_pt(self) -> float | None: ...
    @property
    def max_abs_eta(self) -> float | None: ...
    @property
    def max_abs_rapidity(self) -> float | None: ...
    @property
    def from_decay_of(self) -> tuple[int, ...]: ...
    @property
    def isolation_against(self) -> tuple[int, ...]: ...
    @property
    def isolation_dr(self) -> float | None: ...
    @property
    def isolation_min_pt(self) -> float: ...
    @property
    def cluster_radius(self) -> float | None: ...
    @property
    def isolation_objects(self) -> tuple[str, ...]: ...
    @property
    def source(self) -> tuple[str, ...] | None: ...
    @property
    def require(self) -> Expression | None: ...
    @property
    def cluster_algorithm(self) -> str: ...
    @property
    def isolation_max_relative(self) -> float | None: ...
    @property
    def prompt(self) -> bool: ...
    @property
    def dressing_radius(self) -> float | None: ...
    @property
    def cluster_inputs(self) -> str: ...
    @property
    def cluster_exclude(self) -> tuple[str, ...]: ...
    @property
    def ghosts(self) -> tuple[str, ...]: ...
    @property
    def ghost_min_pt(self) -> float: ...


class OverlapDefinition(Protocol):
    """One overlap-removal rule: drop ``remove`` objects within ``within_dr`` of ``near``."""

    @property
    def remove(self) -> str: ...
    @property
    def near(self) -> str: ...
    @property
    def within_dr(self) -> float: ...


class MissingPtDefinition(Protocol):
    """The missing pT: from invisible particles (``pdgids``) or a collection (``source``)."""

    @property
    def name(self) -> str: ...
    @property
    def pdgids(self) -> tuple[int, ...]: ...
    @property
    def source(self) -> str | None: ...
    @property
    def prompt(self) -> bool: ...


def object_mask(spec: ObjectDefinition, objs: Any, source: str) -> Any:
    """Jagged boolean mask of ``objs`` from the object's ``require`` condition: names are the
    objects' fields (``btag``, ``iso``, ``pdgid``, ...) or kinematic attributes (``pt``)."""
    assert spec.require is not None
    fields = ak.fields(objs)

    def resolve(name: str) -> Any:
        if name in fields:
            return objs[name]
        if name in ATTRIBUTES:
            return ATTRIBUTES[name](objs)
        raise KeyError(name)

    try:
        value = evaluate(spec.require, resolve)
    except ExpressionError as exc:
        raise ConfigError(exc.render(f"{source}: objects.{spec.name}.require: ")) from None
    if not isinstance(value, ak.Array) or value.ndim != 2:
        raise ConfigError(f"{source}: objects.{spec.name}.require: {spec.require.text!r} must "
                          "give one true/false per object")
    return ak.fill_none(ak.values_astype(value, bool), False)


def isolate_against_objects(objects: Mapping[str, ObjectDefinition],
                            objs: dict[str, Any]) -> dict[str, Any]:
    """Isolation against other defined objects (``against_objects``), on the objects as built."""
    out = dict(objs)
    for name, spec in objects.items():
        if spec.isolation_objects:
            others = ak.concatenate([objs[o] for o in spec.isolation_objects], axis=1) \
                if len(spec.isolation_objects) > 1 else objs[spec.isolation_objects[0]]
            if spec.isolation_min_pt:
                others = others[kin.pt(others) > spec.isolation_min_pt]
            assert spec.isolation_dr is not None
            out[name] = out[name][obj.isolated(out[name], others, spec.isolation_dr)]
    return out


def _overlap(objs: dict[str, Any], overlap: Sequence[OverlapDefinition]) -> dict[str, Any]:
    return obj.apply_overlap_removal(objs, [(o.remove, o.near, o.within_dr) for o in overlap])


# --------------------------------------------------------------------------- from particles

def particle_object(spec: ObjectDefinition, particles: Any,
                    vary: Callable[[Any], Any] | None = None) -> Any:
    """One collection from the event record's particles: PDG ids, status, thresholds, decay
    ancestry, anti-kT clustering, ``require`` and isolation against particles. ``vary``: a
    function applied to the candidates (clustered jets, selected particles) before the
    thresholds and ``require`` (an object-level systematic variation)."""
    mask = None
    if spec.from_decay_of:
        mask = truth.descends_from(particles, spec.from_decay_of)
    if spec.cluster_radius is not None:
        inputs = obj.select(particles, pdgids=spec.pdgids, status=spec.status, mask=mask,
                            sort=False)
        jets = jetalg.antikt(inputs, spec.cluster_radius,
                             p=CLUSTER_EXPONENT[spec.cluster_algorithm])
        if vary is not None:
            jets = vary(jets)
        out = obj.select(jets, pt_min=spec.min_pt, abs_eta_max=spec.max_abs_eta,
                         abs_rapidity_max=spec.max_abs_rapidity)
    elif vary is not None:
        cands = vary(obj.select(particles, pdgids=spec.pdgids, status=spec.status, mask=mask,
                                sort=False))
        out = obj.select(cands, pt_min=spec.min_pt, abs_eta_max=spec.max_abs_eta,
                         abs_rapidity_max=spec.max_abs_rapidity)
    else:
        out = obj.select(particles, pdgids=spec.pdgids, status=spec.status, pt_min=spec.min_pt,
                         abs_eta_max=spec.max_abs_eta, abs_rapidity_max=spec.max_abs_rapidity,
                         mask=mask)
    if spec.require is not None:
        out = out[object_mask(spec, out, "config")]
    return _isolate(spec, out, particles)


def _isolate(spec: ObjectDefinition, out: Any, particles: Any) -> Any:
    """Isolation against particles: none within ΔR (``against``) or relative (the scalar pT
    sum of the stable visible particles in the cone over the object's pT)."""
    if spec.isolation_against:
        others = obj.select(particles, pdgids=spec.isolation_against, status=1,
                            pt_min=spec.isolation_min_pt or None, sort=False)
        assert spec.isolation_dr is not None
        out = out[obj.isolated(out, others, spec.isolation_dr)]
    if spec.isolation_max_relative is not None:
        assert spec.isolation_dr is not None
        rel = pl.isolation(out, particles, radius=spec.isolation_dr)
        out = out[rel < spec.isolation_max_relative]
    return out


def particle_objects(particles: Any, objects: Mapping[str, ObjectDefinition],
                     overlap: Sequence[OverlapDefinition],
                     missing: MissingPtDefinition | None, *,
                     vary: Callable[[Any], Any] | None = None,
                     varied: Collection[str] = ()) -> dict[str, Any]:
    """Every defined collection (and the missing pT) from the event record's particles;
    ``vary`` is applied to the candidates of the collections named in ``varied``.

    Showered events (particles with ``prod_vertex``/``end_vertex``, i.e. HepMC) get the
    particle-level recipes (:func:`showered_objects`); generator-level records (LHE) the
    parton-level reading, in which the particle-level keys are not applied."""
    if "prod_vertex" in ak.fields(particles) and "end_vertex" in ak.fields(particles):
        return showered_objects(particles, objects, overlap, missing, vary=vary, varied=varied)
    if any(o.isolation_max_relative is not None for o in objects.values()):
        particles = _with_index(particles)
    objs = {name: particle_object(spec, particles, vary if name in varied else None)
            for name, spec in objects.items()}
    if any(o.isolation_objects for o in objects.values()):
        objs = isolate_against_objects(objects, objs)
    if overlap:
        objs = _overlap(objs, overlap)
    # one gather per field now instead of one per use: selection, overlap removal and
    # slicing leave chains of index nodes that every later field access would resolve again
    out = {name: ak.to_packed(o) for name, o in objs.items()}
    if missing is not None:
        invisible = obj.select(particles, pdgids=missing.pdgids, status=1, sort=False)
        out[missing.name] = obj.missing_pt(invisible)
    return out


# --------------------------------------------------------------------------- particle level

#: the generalised-kT exponent p of each clustering algorithm
CLUSTER_EXPONENT = {"anti-kt": -1.0, "kt": 1.0, "cambridge": 0.0}


def _with_index(particles: Any) -> Any:
    """The particles with their event-local position as field ``index`` (so that objects made
    from them know their particle: isolation leaves it out, clustering can exclude it)."""
    if "index" in ak.fields(particles):
        return particles
    return ak.with_field(particles, ak.local_index(particles, axis=1), "index")


class _Showered:
    """One chunk of showered events: flat columns and the decay graph, computed once."""

    def __init__(self, particles: Any) -> None:
        self.particles = _with_index(particles)
        self.counts = np.asarray(ak.to_numpy(ak.num(particles, axis=1)), dtype=np.int64)
        self.offsets = np.zeros(len(self.counts) + 1, dtype=np.int64)
        np.cumsum(self.counts, out=self.offsets[1:])
        self.ids = np.asarray(ak.to_numpy(ak.flatten(particles["pdgid"], axis=1)),
                              dtype=np.int64)
        self.status = np.asarray(ak.to_numpy(ak.flatten(particles["status"], axis=1)),
                                 dtype=np.int64)
        self._graph: dg.DecayGraph | None = None
        self._prompt: np.ndarray | None = None

    @property
    def graph(self) -> dg.DecayGraph:
        if self._graph is None:
            self._graph = dg.decay_graph(self.particles)
        return self._graph

    @property
    def prompt(self) -> np.ndarray:
        """Flat bool: not descended from a hadron (beam particles excepted)."""
        if self._prompt is None:
            hadron = pid.is_hadron(self.ids) & (self.status != 4)
            self._prompt = ~dg.has_ancestor_flat(hadron, self.graph)
        return self._prompt

    def jagged(self, flat: np.ndarray) -> ak.Array:
        return ak.unflatten(flat, self.counts)

    def selected(self, spec: ObjectDefinition) -> np.ndarray:
        """Flat bool: the particles of the definition's ids and status (prompt, from the
        decay of ...)."""
        keep = np.isin(np.abs(self.ids), np.asarray(spec.pdgids, dtype=np.int64))
        keep &= np.isin(self.status, np.asarray(spec.status, dtype=np.int64))
        if spec.prompt:
            keep &= self.prompt
        if spec.from_decay_of:
            parent = np.isin(np.abs(self.ids), np.asarray(spec.from_decay_of, dtype=np.int64))
            keep &= dg.has_ancestor_flat(parent, self.graph)
        return keep

    def missing_pt(self, pdgids: Sequence[int], prompt: bool) -> ak.Array:
        """The vector pT sum of the stable particles with these |PDG ids| (prompt ones only,
        or all), as :func:`evtkin.select.particle_level.missing_pt` gives it."""
        take = np.isin(np.abs(self.ids), np.asarray(pdgids, dtype=np.int64))
        take &= self.status == 1
        if prompt:
            take &= self.prompt
        where = np.flatnonzero(take)
        event_of = np.repeat(np.arange(len(self.counts)), self.counts)[where]
        sums = []
        for f in ("px", "py"):
            col = np.asarray(ak.to_numpy(ak.flatten(self.particles[f], axis=1)),
                             dtype=np.float64)
            sums.append(np.bincount(event_of, weights=col[where], minlength=len(self.counts)))
        return ak.zip({"px": sums[0], "py": sums[1]}, with_name="Momentum2D")

    def members(self, objs: Any) -> np.ndarray:
        """Flat bool: the particles the objects are made of (``index``, a dressed lepton's
        ``photons``, a jet's ``constituents``)."""
        out = np.zeros(int(self.offsets[-1]), dtype=np.bool_)
        fields = ak.fields(objs)
        per_object = np.asarray(ak.to_numpy(ak.num(objs, axis=1)), dtype=np.int64)
        base = np.repeat(self.offsets[:-1], per_object)
        if "index" in fields:
            local = np.asarray(ak.to_numpy(ak.flatten(objs["index"], axis=1)), dtype=np.int64)
            out[local + base] = True
        for name in ("photons", "constituents"):
            if name in fields:
                lists = ak.flatten(objs[name], axis=1)
                n = np.asarray(ak.to_numpy(ak.num(lists, axis=1)), dtype=np.int64)
                local = np.asarray(ak.to_numpy(ak.flatten(lists, axis=1)), dtype=np.int64)
                out[local + np.repeat(base, n)] = True
        return out


def _showered_order(objects: Mapping[str, ObjectDefinition]) -> list[str]:
    """The collections in an order where every excluded collection comes before the
    clustering that leaves it out (the config rejects circles)."""
    done: list[str] = []

    def visit(name: str) -> None:
        if name in done:
            return
        for other in objects[name].cluster_exclude:
            if other in objects:
                visit(other)
        done.append(name)

    for name in objects:
        visit(name)
    return done


def showered_object(spec: ObjectDefinition, ev: _Showered, built: Mapping[str, Any],
                    invisible: Sequence[int], vary: Callable[[Any], Any] | None = None) -> Any:
    """One collection from the stable particles of showered events: dressed leptons, jets
    (from the selected or all stable particles, less excluded collections and invisibles,
    with ghost labels) or particles (prompt, ids, status), then thresholds, ``require`` and
    isolation, as at parton level."""
    particles = ev.particles
    if spec.dressing_radius is not None:
        cands = pl.dressed_leptons(particles, radius=spec.dressing_radius, pdgids=spec.pdgids,
                                   prompt_only=spec.prompt,
                                   graph=ev.graph if spec.prompt else None)
    elif spec.cluster_radius is not None:
        take = ev.status == 1 if spec.cluster_inputs == "stable" else ev.selected(spec)
        if spec.cluster_inputs == "stable" and spec.prompt:
            take &= ev.prompt
        for name in spec.cluster_exclude:
            if name == "invisibles":
                take &= ~np.isin(np.abs(ev.ids), np.asarray(invisible, dtype=np.int64))
            else:
                take &= ~ev.members(built[name])
        ghosts = (pl.ghost_candidates(particles, min_pt=spec.ghost_min_pt, labels=spec.ghosts,
                                      graph=ev.graph) if spec.ghosts else None)
        cands = pl.particle_jets(particles, radius=spec.cluster_radius,
                                 algorithm=spec.cluster_algorithm, exclude=ev.jagged(~take),
                                 ghosts=ghosts)
    else:
        cands = particles[ev.jagged(ev.selected(spec))]
    if vary is not None:
        cands = vary(cands)
    out = obj.select(cands, pt_min=spec.min_pt, abs_eta_max=spec.max_abs_eta,
                     abs_rapidity_max=spec.max_abs_rapidity)
    if spec.require is not None:
        out = out[object_mask(spec, out, "config")]
    return _isolate(spec, out, particles)


def showered_objects(particles: Any, objects: Mapping[str, ObjectDefinition],
                     overlap: Sequence[OverlapDefinition],
                     missing: MissingPtDefinition | None, *,
                     vary: Callable[[Any], Any] | None = None,
                     varied: Collection[str] = ()) -> dict[str, Any]:
    """Every defined collection and the missing pT of showered events (HepMC chunks): the
    particle-level recipes of :mod:`evtkin.select.particle_level`; overlap removal, isolation
    against objects and pT ordering as for :func:`particle_objects`. The invisibles (left out
    of clusterings by ``exclude = ["invisibles"]``) are the missing pT's particles, else the
    neutrinos."""
    ev = _Showered(particles)
    invisible = tuple(missing.pdgids) if missing is not None else pl.INVISIBLE_PDGIDS
    built: dict[str, Any] = {}
    for name in _showered_order(objects):
        built[name] = showered_object(objects[name], ev, built, invisible,
                                      vary if name in varied else None)
    objs = {name: built[name] for name in objects}
    if any(o.isolation_objects for o in objects.values()):
        objs = isolate_against_objects(objects, objs)
    if overlap:
        objs = _overlap(objs, overlap)
    out = {name: ak.to_packed(o) for name, o in objs.items()}
    if missing is not None:
        out[missing.name] = ev.missing_pt(missing.pdgids, missing.prompt)
    return out


# --------------------------------------------------------------------------- from collections

def merged_collection(chunk: Any, sources: Sequence[str]) -> Any:
    """One collection, or several merged per event (e.g. electrons and muons as leptons),
    keeping the fields they have in common (in the first one's order)."""
    if len(sources) == 1:
        return chunk[sources[0]]
    parts = [chunk[s] for s in sources]
    common = [f for f in ak.fields(parts[0]) if all(f in ak.fields(p) for p in parts[1:])]
    merged = ak.concatenate([p[common] for p in parts], axis=1)
    return ak.zip({f: merged[f] for f in common}, with_name="Momentum4D")


def collection_objects(chunk: Any, objects: Mapping[str, ObjectDefinition],
                       overlap: Sequence[OverlapDefinition],
                       missing: MissingPtDefinition | None, where: str, *,
                       vary: Callable[[Any], Any] | None = None,
                       varied: Collection[str] = ()) -> dict[str, Any]:
    """The defined objects (and missing pT) of a chunk of reconstructed collections:
    thresholds, ``require``, pT ordering, isolation against objects and overlap removal in the
    declared order. ``where`` names the config in error messages. ``vary`` is applied to the
    collection of every object named in ``varied`` before its cuts."""
    out: dict[str, Any] = {}
    for name, spec in objects.items():
        assert spec.source is not None
        coll = merged_collection(chunk, spec.source)
        if vary is not None and name in varied:
            coll = vary(coll)
        if spec.require is not None:
            coll = coll[object_mask(spec, coll, where)]
        out[name] = obj.select(coll, pt_min=spec.min_pt, abs_eta_max=spec.max_abs_eta,
                               abs_rapidity_max=spec.max_abs_rapidity)
    out = isolate_against_objects(objects, out)
    if overlap:
        out = _overlap(out, overlap)
    if missing is not None:
        assert missing.source is not None
        out[missing.name] = chunk[missing.source]
    return out
