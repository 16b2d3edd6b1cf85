"""``[plot]``, a histogram's ``plot`` table and ``[measured.NAME]``: how the run's plots look.

The option names are those of ``evtkin plot`` (docs/plots.md); they are checked here (types,
sample and table names, rebinning against the histogram's edges) so that a typo stops the run
before it starts, with the key and its line.
"""

from __future__ import annotations

import itertools
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from evtkin.config.schema import PLOT_FORMATS, PLOT_KEYS, MeasuredSpec, PlotSpec
from evtkin.config.tables import _check_name, _kind, _pair, _suggest, _Table

__all__ = ["_read_plot", "_read_plot_options"]


def _read_plot_options(t: _Table, names: Sequence[str], measured: Sequence[str],
                       edges: Sequence[float] | None = None) -> dict[str, Any]:
    """The plot options of table ``t`` (``[plot]`` or ``[histograms.NAME] plot``)."""
    out: dict[str, Any] = {}
    for key in ("logy", "logx", "title", "ratio"):
        v = t.boolean(key, None)
        if v is not None:
            out[key] = v
    for key, allowed in (("stack", names), ("overlay", names), ("data", (*names, *measured))):
        v = t.strings(key, None)
        if v is None:
            continue
        for i, n in enumerate(v):
            _check_name(t.ctx, (*t.path, key, i), n, allowed,
                        "sample" if key != "data" else "sample or measured table")
        out[key] = list(v)
    if t.has("colours"):
        c = t.table("colours")
        assert c is not None
        colours = {}
        for n in list(c.data):
            _check_name(c.ctx, (*c.path, n), n, (*names, *measured), "sample or measured table")
            colours[n] = c.string(n)
        c.done()
        out["colours"] = colours
    else:
        t.known.append("colours")
    for key in ("xrange", "yrange"):
        r = _pair(t, key)
        if r is not None:
            out[key] = list(r)
    size = t.raw("figsize")
    if size is not None:
        if (not isinstance(size, list) or len(size) != 2 or not all(
                isinstance(x, (int, float)) and not isinstance(x, bool) and x > 0 for x in size)):
            raise t.ctx.error((*t.path, "figsize"), f"expected [width, height] in inches, both "
                              f"> 0, got {_kind(size) if not isinstance(size, list) else size}")
        out["figsize"] = [float(x) for x in size]
    formats = t.strings("formats", None)
    if formats is not None:
        for i, f in enumerate(formats):
            if f not in PLOT_FORMATS:
                raise t.ctx.error((*t.path, "formats", i), f"unknown plot format {f!r} "
                                  f"(known: {', '.join(PLOT_FORMATS)})",
                                  suggest=_suggest(f, PLOT_FORMATS))
        out["formats"] = list(formats)
    if t.has("rebin"):
        out["rebin"] = _rebin(t, edges)
    else:
        t.known.append("rebin")
    return out


def _rebin(t: _Table, edges: Sequence[float] | None) -> Any:
    v = t.raw("rebin")
    path = (*t.path, "rebin")
    if isinstance(v, int) and not isinstance(v, bool):
        if v < 1:
            raise t.ctx.error(path, f"expected a whole number > 0, got {v}")
        if edges is not None and (len(edges) - 1) % v:
            raise t.ctx.error(path, f"rebin {v} does not divide the {len(edges) - 1} bins")
        return v
    if (not isinstance(v, list) or len(v) < 2
            or not all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in v)):
        raise t.ctx.error(path, f"expected a whole number (merge every n bins) or a list of "
                          f"bin edges, got {_kind(v)}")
    new = [float(x) for x in v]
    if edges is not None:
        for e in new:
            if not any(abs(e - x) <= 1e-9 * max(1.0, abs(x)) for x in edges):
                raise t.ctx.error(path, f"edge {e:g} is not one of the histogram's edges")
        if abs(new[0] - edges[0]) > 1e-9 * max(1.0, abs(edges[0])) or \
                abs(new[-1] - edges[-1]) > 1e-9 * max(1.0, abs(edges[-1])):
            raise t.ctx.error(path, f"the edges must run from {edges[0]:g} to {edges[-1]:g}")
    if any(b <= a for a, b in itertools.pairwise(new)):
        raise t.ctx.error(path, "expected rising bin edges")
    return new


def _read_measured(top: _Table, base: Path, histograms: Sequence[str]) -> dict[str, MeasuredSpec]:
    t = top.table("measured")
    out: dict[str, MeasuredSpec] = {}
    if t is None:
        return out
    for name in list(t.data):
        m = t.table(name)
        assert m is not None
        tab = m.table("tables", required=True)
        assert tab is not None
        files: dict[str, Path] = {}
        for h in list(tab.data):
            _check_name(tab.ctx, (*tab.path, h), h, histograms, "histogram")
            f = Path(tab.string(h))
            files[h] = f if f.is_absolute() else base / f
            if not files[h].is_file():
                raise tab.ctx.error((*tab.path, h), f"no such file: {files[h]}")
        tab.done()
        if not files:
            raise m.ctx.error((*m.path, "tables"), "give at least one table: HIST = \"FILE\"")
        out[name] = MeasuredSpec(name, m.string("label", name), files, m.boolean("toy", False))
        m.done()
    t.done()
    return out


def _read_plot(top: _Table, base: Path, samples: Sequence[str],
               histograms: Mapping[str, Any]) -> PlotSpec:
    measured = _read_measured(top, base, list(histograms))
    t = top.table("plot")
    if t is None:
        return PlotSpec(measured=measured)
    options = _read_plot_options(t, samples, list(measured))
    sqrt_s = t.number("sqrt_s_gev", None, positive=True)
    t.done()
    unused = [k for k in options if k not in PLOT_KEYS]
    assert not unused, unused
    return PlotSpec(options=options, sqrt_s_gev=sqrt_s, measured=measured)
