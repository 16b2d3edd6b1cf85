"""``[output]``: the results folder and the formats written."""

from __future__ import annotations

from pathlib import Path

from evtkin.config.schema import OUTPUT_FORMATS, PLOT_FORMATS, OutputSpec
from evtkin.config.tables import _suggest, _Table


def _read_output(top: _Table, base: Path) -> OutputSpec:
    t = top.table("output")
    if t is None:
        return OutputSpec()
    directory = t.string("directory", None)
    formats = t.strings("formats", OUTPUT_FORMATS)
    for i, f in enumerate(formats):
        if f not in OUTPUT_FORMATS:
            raise t.ctx.error((*t.path, "formats", i), f"unknown output format {f!r} "
                              f"(known: {', '.join(OUTPUT_FORMATS)})",
                              suggest=_suggest(f, OUTPUT_FORMATS))
    plots = t.strings("plot_formats", ("png", "pdf"))
    for i, f in enumerate(plots):
        if f not in PLOT_FORMATS:
            raise t.ctx.error((*t.path, "plot_formats", i), f"unknown plot format {f!r} "
                              f"(known: {', '.join(PLOT_FORMATS)})",
                              suggest=_suggest(f, PLOT_FORMATS))
    t.done()
    return OutputSpec(base / directory if directory else None, tuple(formats), tuple(plots))
