"""``[uncertainties]``: ``automatic`` and one recipe per sub-table."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from evtkin.config.schema import UNCERTAINTY_METHODS, SampleSpec, UncertaintySpec
from evtkin.config.tables import _check_name, _kind, _Table


def _read_uncertainties(top: _Table, samples: Mapping[str, SampleSpec],
                        systematics: Mapping[str, Any] | None = None,
                        ) -> tuple[tuple[UncertaintySpec, ...], bool]:
    """``[uncertainties]``: ``automatic = bool`` and one sub-table per recipe (see
    :mod:`evtkin.hists.recipes` for the meaning; names are checked against the files there)."""
    t = top.table("uncertainties")
    if t is None:
        return (), True
    lines = t.ctx.lines
    out: list[UncertaintySpec] = []
    for name in list(t.data):
        if name == "automatic":
            continue
        u = t.table(name)
        assert u is not None
        method = u.string("method", choices=UNCERTAINTY_METHODS)
        at = {k: (lines.line((*u.path, k)) if lines is not None else None)
              for k in ("", "group", "ids", "of", "method", "samples", "drop_anticorrelated")}
        group = u.string("group", None)
        ids_raw = u.raw("ids")
        ids: tuple[str, ...] = ()
        if ids_raw is not None:
            ok = isinstance(ids_raw, list) and all(
                isinstance(x, (str, int)) and not isinstance(x, bool) for x in ids_raw)
            if not ok or not ids_raw:
                raise u.ctx.error((*u.path, "ids"), "expected a list of weight ids (strings or "
                                  f"whole numbers), got {_kind(ids_raw)}")
            ids = tuple(str(x) for x in ids_raw)
        of = u.strings("of", ())
        systematic = u.string("systematic", None)
        if method == "updown":
            if group is not None or ids or of:
                key = "group" if group is not None else ("ids" if ids else "of")
                raise u.ctx.error((*u.path, key), "an updown band comes from an object-level "
                                  "systematic: give systematic = \"NAME\" only")
            if systematic is None:
                u._missing("systematic", " for method = 'updown' (a [systematics] name)")
            assert systematic is not None
            _check_name(u.ctx, (*u.path, "systematic"), systematic, systematics or {},
                        "object-level systematic ([systematics])")
        elif systematic is not None:
            raise u.ctx.error((*u.path, "systematic"), "only method = 'updown' takes systematic")
        elif method == "quadrature":
            if group is not None or ids:
                raise u.ctx.error((*u.path, "group" if group is not None else "ids"),
                                  "a quadrature combines other recipes: give of = [...] only")
            if not of:
                raise u.ctx.error((*u.path, "of"), "expected the names of the recipes to combine")
            for i, o in enumerate(of):
                before = [x.name for x in out if x.method != "quadrature"]
                _check_name(u.ctx, (*u.path, "of", i), o, before, "recipe declared above")
        else:
            if of:
                raise u.ctx.error((*u.path, "of"), "only method = 'quadrature' takes of = [...]")
            if (group is None) == (not ids):
                raise u.ctx.error((*u.path, "group"), "give exactly one of group = \"NAME\" (a "
                                  "weight group declared in the files) or ids = [...]")
        drop = u.boolean("drop_anticorrelated", False)
        if drop and method != "envelope":
            raise u.ctx.error((*u.path, "drop_anticorrelated"), "only for method = 'envelope'")
        only = u.strings("samples", None)
        if only is not None:
            for i, s in enumerate(only):
                _check_name(u.ctx, (*u.path, "samples", i), s, samples, "sample")
        u.done()
        out.append(UncertaintySpec(name, method, group, ids, drop, tuple(of), only, at,
                                   systematic))
    automatic = t.boolean("automatic", not out)
    t.done()
    return tuple(out), automatic
