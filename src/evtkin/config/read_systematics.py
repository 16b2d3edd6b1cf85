"""``[systematics.NAME]``: object-level variations (energy scale, smearing, efficiency)."""

from __future__ import annotations

from collections.abc import Mapping

from evtkin.config.schema import SYSTEMATIC_KINDS, ObjectSpec, SystematicSpec
from evtkin.config.tables import _check_name, _Table


def _read_systematics(top: _Table, objects: Mapping[str, ObjectSpec]
                      ) -> dict[str, SystematicSpec]:
    t = top.table("systematics")
    out: dict[str, SystematicSpec] = {}
    if t is None:
        return out
    for name in list(t.data):
        s = t.table(name)
        assert s is not None
        target = s.strings("objects")
        if not target:
            raise s.ctx.error((*s.path, "objects"), "expected at least one object collection")
        for i, o in enumerate(target):
            _check_name(s.ctx, (*s.path, "objects", *((i,) if len(target) > 1 else ())), o,
                        objects, "object collection")
        kind = s.string("kind", choices=tuple(SYSTEMATIC_KINDS))
        key = SYSTEMATIC_KINDS[kind]
        for other in SYSTEMATIC_KINDS.values():
            if other != key and s.has(other):
                raise s.ctx.error((*s.path, other), f"not for kind = {kind!r} (it takes {key})")
            s.known.append(other)
        if kind == "energy_scale":
            size = s.number(key, nonnegative=True)
        else:
            size = s.number(key, positive=True)
        if kind == "efficiency" and size >= 1.0:
            raise s.ctx.error((*s.path, key), f"expected a probability below 1, got {size}")
        if kind == "energy_scale":
            if s.has("seed"):
                raise s.ctx.error((*s.path, "seed"), "an energy-scale shift is not random")
            seed = 0
        else:
            seed = s.integer("seed")
            if seed < 0:
                raise s.ctx.error((*s.path, "seed"), f"expected a whole number >= 0, got {seed}")
        s.known.append("seed")
        out[name] = SystematicSpec(name, target, kind, float(size), int(seed))
        s.done()
    t.done()
    return out
