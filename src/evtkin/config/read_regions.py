"""``[regions.NAME]``: named selections branching off the common steps."""

from __future__ import annotations

from evtkin.config.schema import RegionSpec, StepSpec
from evtkin.config.tables import _check_name, _Table


def _read_regions(top: _Table, steps: tuple[StepSpec, ...]) -> dict[str, RegionSpec]:
    t = top.table("regions")
    out: dict[str, RegionSpec] = {}
    if t is None:
        return out
    common = [s.name for s in steps]
    for name in list(t.data):
        r = t.table(name)
        assert r is not None
        after = r.string("after", None)
        if after is not None:
            _check_name(r.ctx, (*r.path, "after"), after, common, "step")
        if r.has("require") and r.has("steps"):
            raise r.ctx.error((*r.path, "steps"), "give require (one condition) or steps "
                              "(a list of {name, require}), not both")
        own: list[StepSpec] = []
        if r.has("steps"):
            items = r.raw("steps")
            if not isinstance(items, list) or not items:
                raise r.ctx.error((*r.path, "steps"), "expected a list of tables "
                                  "{ name = \"...\", require = \"...\" }")
            seen: set[str] = set(common)
            for i, item in enumerate(items):
                st = _Table(r.ctx, (*r.path, "steps", i), item)
                sname = st.string("name")
                if sname in seen or sname == "all events":
                    raise st.ctx.error((*st.path, "name"), f"step name {sname!r} is already "
                                       "used (by a common step or in this region)")
                seen.add(sname)
                own.append(StepSpec(sname, st.expression("require")))
                st.done()
        else:
            r.known.append("steps")
            own.append(StepSpec(name, r.expression("require")))
        out[name] = RegionSpec(name, after, tuple(own))
        r.done()
    t.done()
    return out
