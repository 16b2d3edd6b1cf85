"""``[skims.NAME]``: event tables of declared quantities for the selected events."""

from __future__ import annotations

import re
from collections.abc import Mapping

from evtkin.config.schema import SKIM_FORMATS, RegionSpec, SampleSpec, SkimSpec, StepSpec
from evtkin.config.tables import _check_name, _Table
from evtkin.expr import Expression

_COLUMN = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")
_RESERVED = ("weight", "sample", "file_index", "process_id")


def _read_skims(top: _Table, steps: tuple[StepSpec, ...], regions: Mapping[str, RegionSpec],
                samples: Mapping[str, SampleSpec]) -> dict[str, SkimSpec]:
    t = top.table("skims")
    out: dict[str, SkimSpec] = {}
    if t is None:
        return out
    for name in list(t.data):
        s = t.table(name)
        assert s is not None
        after = s.string("after", None)
        region = s.string("region", None)
        if after is not None and region is not None:
            raise s.ctx.error((*s.path, "region"), "give after (a step) or region, not both")
        if after is not None:
            _check_name(s.ctx, (*s.path, "after"), after, [x.name for x in steps], "step")
        if region is not None:
            _check_name(s.ctx, (*s.path, "region"), region, regions, "region")
        c = s.table("columns", required=True)
        assert c is not None
        if not c.data:
            raise c.ctx.error(c.path, "declare at least one column: NAME = \"expression\"")
        columns: dict[str, Expression] = {}
        for col in list(c.data):
            if not _COLUMN.match(col) or col in _RESERVED or col.startswith("weight_"):
                raise c.ctx.error((*c.path, col), f"{col!r} cannot be a column name (letters, "
                                  "digits and _; weight, weight_*, sample, file_index and "
                                  "process_id are written by evtkin)")
            c.known.append(col)
            columns[col] = c.ctx.expr((*c.path, col), c.data[col])
        formats = s.strings("formats", SKIM_FORMATS)
        for i, f in enumerate(formats):
            if f not in SKIM_FORMATS:
                raise s.ctx.error((*s.path, "formats", i), f"expected one of "
                                  f"{', '.join(map(repr, SKIM_FORMATS))}, got {f!r}")
        only = s.strings("samples", None)
        if only is not None:
            for i, x in enumerate(only):
                _check_name(s.ctx, (*s.path, "samples", i), x, samples, "sample")
        out[name] = SkimSpec(name, columns, after, region, tuple(dict.fromkeys(formats)), only,
                             s.boolean("variation_weights", True))
        s.done()
    t.done()
    return out
