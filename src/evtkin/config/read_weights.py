"""``[tables]`` (binned lookup tables from files) and the event-weight expressions
(``[analysis] weight``, ``[samples.NAME] weight``)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from evtkin.config.tables import _Table
from evtkin.errors import ConfigError


def _read_tables(top: _Table, base: Path) -> dict[str, Any]:
    from evtkin.select.lookup import read_table

    t = top.table("tables")
    out: dict[str, Any] = {}
    if t is None:
        return out
    for name in list(t.data):
        files = t.strings(name)
        if len(files) != 1:
            raise t.ctx.error((*t.path, name), "expected one table file (a string)")
        path = Path(files[0]) if Path(files[0]).is_absolute() else base / files[0]
        if not path.is_file():
            raise t.ctx.error((*t.path, name), f"no such table file: {path}")
        try:
            out[name] = read_table(path, name)
        except ConfigError as exc:
            raise t.ctx.error((*t.path, name), str(exc)) from None
    t.done()
    return out
