"""``[histograms.NAME]``: axes, binning, normalisation, step and sample choices."""

from __future__ import annotations

import itertools
from collections.abc import Mapping, Sequence
from typing import Any

from evtkin.config.read_plot import _read_plot_options
from evtkin.config.schema import NORMALISATIONS, AxisDef, HistogramSpec, SampleSpec, StepSpec
from evtkin.config.tables import _check_name, _pair, _Table


def _edges(a: _Table) -> tuple[tuple[float, ...], bool]:
    if a.has("edges"):
        for k in ("bins", "range"):
            if a.has(k):
                raise a.ctx.error((*a.path, k), "give either edges or bins + range, not both")
        v = a.raw("edges")
        if (not isinstance(v, list) or len(v) < 2
                or not all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in v)):
            raise a.ctx.error((*a.path, "edges"), "expected a list of at least two numbers")
        edges = tuple(float(x) for x in v)
        if any(b <= x for x, b in itertools.pairwise(edges)):
            raise a.ctx.error((*a.path, "edges"), "expected strictly increasing bin edges")
        a.known.extend(["bins", "range"])
        return edges, False
    a.known.append("edges")
    n = a.integer("bins", positive=True)
    rng = _pair(a, "range")
    if rng is None:
        a._missing("range", " with bins (or give edges)")
        raise AssertionError  # pragma: no cover
    lo, hi = rng
    return tuple(lo + (hi - lo) * k / n for k in range(n + 1)), True


def _read_histograms(top: _Table, steps: tuple[StepSpec, ...],
                     samples: Mapping[str, SampleSpec],
                     regions: Mapping[str, Any] | None = None,
                     measured: Sequence[str] = ()) -> dict[str, HistogramSpec]:
    t = top.table("histograms")
    out: dict[str, HistogramSpec] = {}
    if t is None:
        return out
    step_names = [s.name for s in steps]
    for name in list(t.data):
        h = t.table(name)
        assert h is not None
        axes = []
        for key in ("x", "y"):
            a = h.table(key, required=(key == "x"))
            if a is None:
                continue
            value = a.expression("value")
            edges, regular = _edges(a)
            axes.append(AxisDef(value, edges, regular, a.string("label", str(value)),
                                 a.string("unit", "")))
            a.done()
        after = h.string("after", None)
        if after is not None:
            _check_name(h.ctx, (*h.path, "after"), after, step_names, "step")
        only = h.strings("samples", None)
        if only is not None:
            for i, s in enumerate(only):
                _check_name(h.ctx, (*h.path, "samples", i), s, samples, "sample")
        in_regions: tuple[str, ...] = h.strings("regions", ())
        known_regions = list(regions or {})
        if in_regions == ("all",) and "all" not in known_regions:
            if not known_regions:
                raise h.ctx.error((*h.path, "regions"), "the config declares no [regions]")
            in_regions = tuple(known_regions)
        listed = isinstance(h.data.get("regions"), list)
        for i, r in enumerate(in_regions):
            _check_name(h.ctx, (*h.path, "regions", *((i,) if listed else ())), r,
                        known_regions, "region")
        if in_regions and after is not None:
            raise h.ctx.error((*h.path, "after"), "a histogram in regions is filled after each "
                              "region's steps: give after or regions, not both")
        if in_regions and h.data.get("response") is True:
            raise h.ctx.error((*h.path, "response"), "response matrices are made for the "
                              "common selection: not together with regions")
        if len(set(in_regions)) != len(in_regions):
            raise h.ctx.error((*h.path, "regions"), "a region is listed twice")
        plot: dict[str, object] = {}
        if h.has("plot"):
            pt = h.table("plot")
            assert pt is not None
            plot = _read_plot_options(pt, list(samples), measured,
                                      axes[0].edges if len(axes) == 1 else None)
            pt.done()
        else:
            h.known.append("plot")
        out[name] = HistogramSpec(
            name=name,
            title=h.string("title", name),
            axes=tuple(axes),
            normalise=h.string("normalise", "xsec_per_bin", choices=NORMALISATIONS),
            after=after,
            samples=only,
            response=h.boolean("response", False),
            regions=in_regions,
            plot=plot,
        )
        h.done()
    t.done()
    return out
