"""``[classes]``, ``[objects.NAME]``, ``[[overlap_removal]]`` and ``[missing_pt]``."""

from __future__ import annotations

from collections.abc import Mapping

from evtkin.config.keylines import Path_
from evtkin.config.schema import (
    CLUSTER_ALGORITHMS,
    CLUSTER_INPUTS,
    EVENT_FIELDS,
    EXCLUDE_INVISIBLES,
    GHOST_LABELS,
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
        clus_raw = o.data.get("clustering")
        all_stable = isinstance(clus_raw, dict) and clus_raw.get("inputs") == "stable"
        if o.has("particles") or (source is None and not all_stable):
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
        iso_rel = None
        if iso is not None:
            iso_rel = iso.number("max_relative_pt", None, positive=True)
            if iso_rel is not None:
                for key in ("against", "against_objects", "min_pt"):
                    if iso.has(key):
                        raise iso.ctx.error(
                            (*iso.path, key),
                            "not with max_relative_pt (relative isolation sums the pT of every "
                            "stable visible particle in the cone)")
            else:
                iso_objs = iso.strings("against_objects", ())
                if not iso_objs or iso.has("against"):
                    iso_ids, _ = _particle_ids(iso, "against", classes)
            iso_dr = iso.number("within_dr", positive=True)
            iso_pt = iso.number("min_pt", 0.0, nonnegative=True)
            iso.done()
        radius = None
        algorithm = "anti-kt"
        inputs = "selected"
        exclude: tuple[str, ...] = ()
        ghosts: tuple[str, ...] = ()
        ghost_pt = 5.0  # common practice: B hadrons above 5 GeV
        clus = o.table("clustering")
        if clus is not None:
            algorithm = clus.string("algorithm", "anti-kt", choices=CLUSTER_ALGORITHMS)
            radius = clus.number("radius", positive=True)
            inputs = clus.string("inputs", "selected", choices=CLUSTER_INPUTS)
            exclude = clus.strings("exclude", ())
            for k, ex in enumerate(exclude):
                if ex == name:
                    raise clus.ctx.error(_item(clus.path, "exclude", k, len(exclude)),
                                         "a collection cannot be left out of itself")
                if ex != EXCLUDE_INVISIBLES and ex not in t.data:
                    _check_name(clus.ctx, _item(clus.path, "exclude", k, len(exclude)), ex,
                                [*[n for n in t.data if n != name], EXCLUDE_INVISIBLES],
                                "object collection (or 'invisibles')")
            ghosts = clus.strings("ghosts", ())
            for k, g in enumerate(ghosts):
                if g not in GHOST_LABELS:
                    raise clus.ctx.error(
                        _item(clus.path, "ghosts", k, len(ghosts)),
                        f"expected one of {', '.join(map(repr, GHOST_LABELS))}, got {g!r}")
            ghost_pt = clus.number("ghost_min_pt", 5.0, nonnegative=True)
            if clus.has("ghost_min_pt") and not ghosts:
                raise clus.ctx.error((*clus.path, "ghost_min_pt"), "needs ghosts = [...]")
            clus.done()
        dressing = None
        dress = o.table("dressing")
        if dress is not None:
            dressing = dress.number("radius", positive=True)
            dress.done()
            if clus is not None:
                raise o.ctx.error((*o.path, "dressing"), "dressed leptons are not clustered: "
                                  "give dressing or clustering, not both")
        prompt = o.boolean("prompt", False)
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
            cluster_algorithm=algorithm,
            isolation_max_relative=iso_rel,
            prompt=prompt,
            dressing_radius=dressing,
            cluster_inputs=inputs,
            cluster_exclude=exclude,
            ghosts=ghosts,
            ghost_min_pt=ghost_pt,
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
    prompt = t.boolean("prompt", False)
    t.done()
    return MissingPtSpec(name, ids, source, prompt)


def _item(path: Path_, key: str, k: int, n: int) -> Path_:
    """The path of entry ``k`` of the list ``key`` (of ``n`` entries; a lone string: the key)."""
    return (*path, key, k) if n > 1 else (*path, key)
