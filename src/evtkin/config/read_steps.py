"""``[[step]]`` (the ordered event selection) and ``[quantities]``."""

from __future__ import annotations

from evtkin.config.keylines import Path_
from evtkin.config.schema import StepSpec
from evtkin.config.tables import _Table
from evtkin.expr import Expression


def _read_steps(top: _Table) -> tuple[StepSpec, ...]:
    v = top.raw("step", [])
    path: Path_ = ("step",)
    if not isinstance(v, list):
        raise top.ctx.error(path, "expected [[step]] entries (a list of tables)")
    out: list[StepSpec] = []
    seen: set[str] = set()
    for i, item in enumerate(v):
        t = _Table(top.ctx, (*path, i), item)
        name = t.string("name")
        if name in seen or name == "all events":
            raise t.ctx.error((*t.path, "name"), f"step name {name!r} is used twice")
        seen.add(name)
        out.append(StepSpec(name, t.expression("require")))
        t.done()
    return tuple(out)


def _read_quantities(top: _Table) -> dict[str, Expression]:
    t = top.table("quantities")
    out: dict[str, Expression] = {}
    if t is None:
        return out
    for name in list(t.data):
        t.known.append(name)
        out[name] = t.ctx.expr((*t.path, name), t.data[name])
    return out
