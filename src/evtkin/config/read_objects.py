"""``[classes]``, ``[objects.NAME]``, ``[[overlap_removal]]`` and ``[missing_pt]``."""

from __future__ import annotations

from collections.abc import Mapping

from evtkin.config.keylines import Path_
from evtkin.config.schema import (
    EVENT_FIELDS,
    PARTICLE_CLASSES,
    MissingPtSpec,
    ObjectSpec,
    OverlapSpec,
)
from evtkin.config.tables import _check_name, _int_list, _kind, _particle_ids, _Table


def _read_classes(top: _Table) -> dict[str, tuple[int, ...]]:
    classes = dict(PARTICLE_CLASSES)
    t = top.table("classes")
    if t is None:
        return classes
    for name in list(t.data):
        ids = _int_list(t, name)
        if not ids:
            raise t.ctx.error((*t.path, name), "expected a non-empty list of PDG ids")
        classes[name] = ids
    t.done()
    return classes


def _read_objects(top: _Table, classes: Mapping[str, tuple[int, ...]]) -> dict[str, ObjectSpec]:
    t = top.table("objects")
    out: dict[str, ObjectSpec] = {}
    if t is None:
        return out
    for name in list(t.data):
        if name in EVENT_FIELDS:
            raise t.ctx.error((*t.path, name), f"{name!r} is a reserved event field name")
        o = t.table(name)
        assert o is not None
        source = o.strings("from", None)
        if source is None or o.has("particles"):
            ids, names = _particle_ids(o, "particles", classes)
        else:
            ids, names = (), ()
        require = o.expression("require") if o.has("require") else None
        o.known.append("require")
        status_raw = o.raw("status", 1)
        status_list = status_raw if isinstance(status_raw, list) else [status_raw]
        if not status_list or not all(
            isinstance(x, int) and not isinstance(x, bool) for x in status_list
        ):
            raise o.ctx.error((*o.path, "status"),
                              f"expected a status code or a list of them, got {_kind(status_raw)}")
        iso_ids: tuple[int, ...] = ()
        iso_dr = None
        iso_pt = 0.0
        iso = o.table("isolation")
        iso_objs: tuple[str, ...] = ()
        if iso is not None:
            iso_objs = iso.strings("against_objects", ())
            if not iso_objs or iso.has("against"):
                iso_ids, _ = _particle_ids(iso, "against", classes)
            iso_dr = iso.number("within_dr", positive=True)
            iso_pt = iso.number("min_pt", 0.0, nonnegative=True)
            iso.done()
        radius = None
        clus = o.table("clustering")
        if clus is not None:
            clus.string("algorithm", "anti-kt", choices=("anti-kt",))
            radius = clus.number("radius", positive=True)
            clus.done()
        out[name] = ObjectSpec(
            name=name,
            pdgids=ids,
            classes=names,
            status=tuple(status_list),
            min_pt=o.number("min_pt", None, nonnegative=True),
            max_abs_eta=o.number("max_abs_eta", None, positive=True),
            max_abs_rapidity=o.number("max_abs_rapidity", None, positive=True),
            from_decay_of=_int_list(o, "from_decay_of"),
            isolation_against=iso_ids,
            isolation_dr=iso_dr,
            isolation_min_pt=iso_pt,
            cluster_radius=radius,
            source=source,
            require=require,
            isolation_objects=iso_objs,
        )
        o.done()
    t.done()
    return out


def _read_overlap(top: _Table, objects: Mapping[str, ObjectSpec]) -> tuple[OverlapSpec, ...]:
    v = top.raw("overlap_removal", [])
    path: Path_ = ("overlap_removal",)
    if not isinstance(v, list):
        raise top.ctx.error(path, "expected [[overlap_removal]] entries (a list of tables)")
    out = []
    for i, item in enumerate(v):
        t = _Table(top.ctx, (*path, i), item)
        remove = t.string("remove")
        near = t.string("near")
        _check_name(t.ctx, (*t.path, "remove"), remove, objects, "object collection")
        _check_name(t.ctx, (*t.path, "near"), near, objects, "object collection")
        if remove == near:
            raise t.ctx.error((*t.path, "near"), "cannot remove a collection near itself")
        out.append(OverlapSpec(remove, near, t.number("within_dr", positive=True)))
        t.done()
    return tuple(out)


def _read_missing(top: _Table, classes: Mapping[str, tuple[int, ...]]) -> MissingPtSpec | None:
    t = top.table("missing_pt")
    if t is None:
        return None
    name = t.string("name", "met")
    ids, _ = _particle_ids(t, "particles", classes, default=["neutrinos"])
    source = t.string("from", None)
    t.done()
    return MissingPtSpec(name, ids, source)
