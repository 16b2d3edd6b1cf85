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

from evtkin.errors import ConfigError
from evtkin.expr import ATTRIBUTES, Expression, ExpressionError, evaluate
from evtkin.select import jets as jetalg
from evtkin.select import kinematics as kin
from evtkin.select import objects as obj
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
        jets = jetalg.antikt(inputs, spec.cluster_radius)
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
    if spec.isolation_against:
        others = obj.select(particles, pdgids=spec.isolation_against, status=1,
                            pt_min=spec.isolation_min_pt or None, sort=False)
        assert spec.isolation_dr is not None
        out = out[obj.isolated(out, others, spec.isolation_dr)]
    return out


def particle_objects(particles: Any, objects: Mapping[str, ObjectDefinition],
                     overlap: Sequence[OverlapDefinition],
                     missing: MissingPtDefinition | None, *,
                     vary: Callable[[Any], Any] | None = None,
                     varied: Collection[str] = ()) -> dict[str, Any]:
    """Every defined collection (and the missing pT) from the event record's particles;
    ``vary`` is applied to the candidates of the collections named in ``varied``."""
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
