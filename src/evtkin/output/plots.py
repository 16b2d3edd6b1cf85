"""Plots of a results folder with matplotlib (Agg backend, no display needed).

1-D figures: samples stacked (filled, in the declared order, bottom first) with the total MC
uncertainty hatched on the stack total, samples overlaid as lines with their MC error bars (and
bands, shaded), measured points or event samples marked as data drawn as black points (never
stacked), and a ratio panel below: data and the overlays over the stack total, or over the first
sample when nothing is stacked; its range always includes 1. 2-D figures: a colour map of one
sample. The look (palette, labels, legend placement, corner texts) is :mod:`evtkin.output.style`.

What is drawn and how is a :class:`PlotOptions`: from the config (``[plot]`` and each histogram's
``plot`` table, stored in results.json under ``plot``), overridden by ``evtkin plot``'s options.
Each figure is written in every requested format (png, pdf, svg) through a temporary name and a
rename. :func:`write_plots` can draw the figures in several processes (``workers``).

The total MC uncertainty of the stack in each bin is
``sqrt(Σ_s σ²_stat,s + Σ_s δ²_band,s)`` (upper and lower side apart): the samples' MC statistics
and their bands (each sample's ``total`` band, or its only band) added in quadrature, the samples
taken as independent.
"""

from __future__ import annotations

import dataclasses
import io
import math
import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from evtkin.errors import ResultsError
from evtkin.files import atomic_write_bytes, safe_name
from evtkin.output.drawing import Task, draw_all
from evtkin.output.measured import MeasuredTable
from evtkin.output.style import (
    DATA_COLOUR,
    apply_axes_style,
    auto_logy,
    colour_for,
    corner_texts,
    display_label,
    fold_multiplier,
    place_legend,
    sqrt_s_text,
)
from evtkin.output.tables import HistResult, Results

__all__ = [
    "FORMATS",
    "OPTION_KEYS",
    "Curve",
    "PlotOptions",
    "display_label",
    "draw_hist1d",
    "figure_hist1d",
    "options_for",
    "plot_hist1d",
    "plot_hist2d",
    "rebin_measured",
    "stack_total",
    "write_plots",
]

FORMATS = ("png", "pdf")
ALL_FORMATS = ("png", "pdf", "svg")
#: file metadata: our name; no creation date in PDFs and SVGs, so the same results give the
#: same bytes (the run's time is in provenance.json)
_METADATA: dict[str, dict[str, Any]] = {
    "png": {"Creator": "evtkin"},
    "pdf": {"Creator": "evtkin", "CreationDate": None},
    "svg": {"Creator": "evtkin", "Date": None},
}


# --------------------------------------------------------------------------------------------------
# options


@dataclass(frozen=True)
class PlotOptions:
    """How a histogram is drawn; the same names are config keys and ``evtkin plot`` options.

    ``logy``: ``None`` = automatic (log when the non-zero contents span more than three decades).
    ``stack``: samples stacked, bottom first; ``overlay``: samples drawn as lines (``None``: every
    sample neither stacked nor data); ``data``: samples or measured tables drawn as points.
    ``rebin``: merge every n bins, or new edges (a subset of the old ones). ``ratio``: ``None``
    = a ratio panel when there is something to compare.
    """

    logy: bool | None = None
    logx: bool = False
    stack: tuple[str, ...] = ()
    overlay: tuple[str, ...] | None = None
    data: tuple[str, ...] = ()
    colours: tuple[tuple[str, str], ...] = ()
    xrange: tuple[float, float] | None = None
    yrange: tuple[float, float] | None = None
    rebin: int | tuple[float, ...] | None = None
    formats: tuple[str, ...] = FORMATS
    figsize: tuple[float, float] | None = None
    title: bool = False
    ratio: bool | None = None

    def colour(self, name: str) -> str | None:
        return dict(self.colours).get(name)

    def updated(self, changes: Mapping[str, Any]) -> PlotOptions:
        """A copy with ``changes`` (keys as in :data:`OPTION_KEYS`; ``None`` values ignored)."""
        kw: dict[str, Any] = {}
        for k, v in changes.items():
            if v is None:
                continue
            if k not in OPTION_KEYS:
                raise ResultsError(f"plot option {k!r}: unknown; expected one of "
                                   f"{', '.join(OPTION_KEYS)}")
            kw[k] = _coerce(k, v)
        return dataclasses.replace(self, **kw)


OPTION_KEYS: tuple[str, ...] = tuple(f.name for f in dataclasses.fields(PlotOptions))


def _coerce(key: str, v: Any) -> Any:
    if key in ("stack", "data", "formats") or (key == "overlay" and v is not None):
        return tuple(str(x) for x in v)
    if key == "colours":
        return tuple(sorted((str(a), str(b)) for a, b in dict(v).items()))
    if key in ("xrange", "yrange", "figsize"):
        a, b = (float(x) for x in v)
        return (a, b)
    if key == "rebin":
        return int(v) if isinstance(v, (int, np.integer)) else tuple(float(x) for x in v)
    return v


def options_for(hname: str, meta: Mapping[str, Any], overrides: Mapping[str, Any] | None = None,
                base: PlotOptions | None = None) -> PlotOptions:
    """Options for histogram ``hname``: defaults ← the run's ``[plot]`` ← its ``plot`` table
    for the histogram ← ``overrides`` (the command line). ``meta["plot"]`` is results.json's
    ``plot`` record."""
    rec = dict(meta.get("plot") or {})
    hists = rec.pop("histograms", None) or {}
    # a region's copy NAME@REGION is drawn like NAME unless it has options of its own
    per_hist = dict(hists.get(hname) or hists.get(hname.split("@", 1)[0]) or {})
    opts = base or PlotOptions()
    opts = opts.updated({k: v for k, v in rec.items() if k in OPTION_KEYS})
    opts = opts.updated({k: v for k, v in per_hist.items() if k in OPTION_KEYS})
    return opts.updated(dict(overrides or {}))


# --------------------------------------------------------------------------------------------------
# what is drawn


@dataclass
class Curve:
    """One thing drawn on a 1-D figure, in the displayed quantity, in-range bins only.

    ``kind``: ``"stack"`` (filled, stacked), ``"line"`` (overlaid step line with error bars) or
    ``"points"`` (markers with error bars: measured points or a sample marked as data).
    ``band_down``/``band_up``: absolute band edges (or ``None``); ``syst``: the systematic part
    of a measured point's error (``errors`` is then the statistical part).
    """

    label: str
    edges: np.ndarray
    values: np.ndarray
    errors: np.ndarray
    kind: str = "line"
    colour: str | None = None
    band_down: np.ndarray | None = None
    band_up: np.ndarray | None = None
    band_label: str = ""
    syst: np.ndarray | None = None
    name: str = ""

    @property
    def total_errors(self) -> np.ndarray:
        if self.syst is None:
            return self.errors
        return np.sqrt(self.errors**2 + self.syst**2)  # type: ignore[no-any-return]


def _chosen_band(h: HistResult) -> tuple[np.ndarray, np.ndarray, str] | None:
    """The band shown for ``h`` (in-range): ``total`` if present, the only one, else all added
    in quadrature (upper and lower side apart)."""
    if not h.bands:
        return None
    nominal = h.inner_values()
    if "total" in h.bands or len(h.bands) == 1:
        name = "total" if "total" in h.bands else next(iter(h.bands))
        b = h.bands[name]
        return b.down[1:-1], b.up[1:-1], name
    up = np.sqrt(sum((np.maximum(b.up[1:-1] - nominal, 0.0) ** 2 for b in h.bands.values()),
                     np.zeros_like(nominal)))
    dn = np.sqrt(sum((np.maximum(nominal - b.down[1:-1], 0.0) ** 2 for b in h.bands.values()),
                     np.zeros_like(nominal)))
    return nominal - dn, nominal + up, " ⊕ ".join(h.bands)


def curve_from_result(h: HistResult, label: str, kind: str, colour: str | None,
                      name: str = "") -> Curve:
    band = _chosen_band(h) if kind != "points" else None
    return Curve(label=label, edges=np.asarray(h.axes[0].edges, dtype=float),
                 values=np.asarray(h.inner_values(), dtype=float),
                 errors=np.sqrt(np.clip(h.inner_variances(), 0.0, None)), kind=kind,
                 colour=colour, band_down=None if band is None else band[0],
                 band_up=None if band is None else band[1],
                 band_label="" if band is None else band[2], name=name)


def stack_total(stacked: Sequence[Curve]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Total of the stacked curves per bin and its lower and upper MC uncertainty (MC
    statistics and bands of every sample in quadrature; see the module docstring)."""
    total = np.sum([c.values for c in stacked], axis=0)
    var_up = np.sum([c.errors**2 for c in stacked], axis=0)
    var_dn = var_up.copy()
    for c in stacked:
        if c.band_up is not None and c.band_down is not None:
            var_up = var_up + np.maximum(c.band_up - c.values, 0.0) ** 2
            var_dn = var_dn + np.maximum(c.values - c.band_down, 0.0) ** 2
    return total, np.sqrt(var_dn), np.sqrt(var_up)


def rebin_measured(t: MeasuredTable, edges: np.ndarray, normalisation: str) -> MeasuredTable:
    """The table on the coarser ``edges`` (a subset of its own): per-bin contents (value × width
    for per-bin densities) add, statistical errors in quadrature, systematic errors linearly
    (taken as fully correlated between neighbouring bins; an upper bound otherwise)."""
    from evtkin.output.rebin import groups_for

    groups = groups_for(t.edges, list(edges), f"measured table {t.source or t.label}")
    w = np.diff(t.edges) if normalisation == "xsec_per_bin" else np.ones(t.values.size)
    nw = np.diff(edges) if normalisation == "xsec_per_bin" else np.ones(len(groups))
    vals = np.array([np.sum((t.values * w)[g]) for g in groups]) / nw
    stat = np.sqrt(np.array([np.sum(((t.stat * w) ** 2)[g]) for g in groups])) / nw
    syst = np.array([np.sum((t.syst * w)[g]) for g in groups]) / nw
    return dataclasses.replace(t, edges=np.asarray(edges, float), values=vals, stat=stat,
                               syst=syst)


# --------------------------------------------------------------------------------------------------
# drawing


def _pyplot() -> Any:
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


def _save(fig: Any, stem: Path, formats: Sequence[str]) -> list[Path]:
    out = []
    for k, fmt in enumerate(formats):
        if fmt not in ALL_FORMATS:
            raise ResultsError(f"plot format {fmt!r}: expected one of {', '.join(ALL_FORMATS)}")
        if k == 1:
            # the constrained layout placed the axes while the first format was drawn; keep
            # those positions instead of laying out again (a whole extra drawing pass)
            fig.set_layout_engine("none")
        buf = io.BytesIO()
        fig.savefig(buf, format=fmt, dpi=150, metadata=_METADATA.get(fmt))
        out.append(atomic_write_bytes(stem.with_name(f"{stem.name}.{fmt}"), buf.getvalue()))
    return out


def _positions(edges: np.ndarray, frac: float, logx: bool) -> np.ndarray:
    """x at fraction ``frac`` of each bin (0.5 = the centre; geometric on a log axis)."""
    lo, hi = edges[:-1], edges[1:]
    if logx:
        return 10 ** (np.log10(lo) + frac * (np.log10(hi) - np.log10(lo)))  # type: ignore[no-any-return]
    return lo + frac * (hi - lo)  # type: ignore[no-any-return]


def _offsets(n: int) -> list[float]:
    """Fractions of the bin width for ``n`` sets of error bars side by side (0.5 for one)."""
    if n <= 1:
        return [0.5] * n
    step = min(0.12, 0.6 / (n - 1))
    return [0.5 + (k - (n - 1) / 2) * step for k in range(n)]


def _ratio_limits(values: list[np.ndarray], band: list[np.ndarray]) -> tuple[float, float]:
    """A range holding every finite ratio point, the band and 1, with some margin."""
    pts = np.concatenate([v[np.isfinite(v)] for v in values + band] + [np.array([1.0])])
    lo, hi = float(pts.min()), float(pts.max())
    lo, hi = min(lo, 0.9), max(hi, 1.1)
    pad = 0.08 * (hi - lo)
    lo, hi = lo - pad, hi + pad
    if min(v.min() for v in [*values, np.array([1.0])] if v.size) >= 0:
        lo = max(lo, 0.0)
    return lo, hi


def draw_hist1d(
    stem: str | os.PathLike[str],
    curves: Sequence[Curve],
    *,
    x_label: str,
    y_label: str,
    title: str = "",
    note: str = "",
    corner: str = "",
    options: PlotOptions | None = None,
) -> list[Path]:
    """Draw one 1-D figure of ``curves`` (same binning) and write it in ``options.formats``."""
    opts = options or PlotOptions()
    plt = _pyplot()
    fig = figure_hist1d(curves, x_label=x_label, y_label=y_label, title=title, note=note,
                        corner=corner, options=opts, name=Path(stem).name)
    try:
        return _save(fig, Path(stem), opts.formats)
    finally:
        plt.close(fig)


def figure_hist1d(
    curves: Sequence[Curve],
    *,
    x_label: str,
    y_label: str,
    title: str = "",
    note: str = "",
    corner: str = "",
    options: PlotOptions | None = None,
    name: str = "",
) -> Any:
    """The matplotlib figure of :func:`draw_hist1d` (the caller closes it)."""
    opts = options or PlotOptions()
    if not curves:
        raise ValueError("draw_hist1d: nothing to plot")
    edges = curves[0].edges
    for c in curves:
        if c.values.shape != (edges.size - 1,) or not np.allclose(c.edges, edges, rtol=1e-9):
            raise ValueError(f"plot {name}: {c.label!r} has different binning")
    if opts.logx and edges[0] <= 0:
        raise ResultsError(f"plot {name}: log x needs edges > 0; the first edge is "
                           f"{edges[0]:g} (set an x range above 0)")
    plt = _pyplot()
    stacked = [c for c in curves if c.kind == "stack"]
    lines = [c for c in curves if c.kind == "line"]
    points = [c for c in curves if c.kind == "points"]
    ref: Curve | None = None
    if stacked:
        total, tot_dn, tot_up = stack_total(stacked)
    elif lines:
        ref = lines[0]
    compare_to = bool(points or (stacked and lines) or len(lines) > 1)
    want_ratio = compare_to if opts.ratio is None else (opts.ratio and compare_to)
    size = opts.figsize or ((6.4, 6.2) if want_ratio else (6.4, 4.8))
    if want_ratio:
        fig, (ax, rx) = plt.subplots(2, 1, sharex=True, figsize=size, layout="constrained",
                                     gridspec_kw={"height_ratios": [3.2, 1.0]})
        fig.get_layout_engine().set(h_pad=0.02, hspace=0.0)
    else:
        fig, ax = plt.subplots(figsize=size, layout="constrained")
        rx = None
    try:
        if opts.logx:
            ax.set_xscale("log")
        everything = [c.values for c in curves]
        logy = opts.logy if opts.logy is not None else auto_logy(
            [total, *everything] if stacked else everything)
        if logy:
            ax.set_yscale("log")
        skyline = np.full(edges.size - 1, -np.inf)
        floor = 1e-300 if logy else 0.0
        # legend entries in the order shown: points, the stack from its top down, the stack's
        # uncertainty, the lines (a line with a band: one entry, the band behind the line)
        entries: dict[str, list[tuple[Any, str]]] = {"points": [], "stack": [], "band": [],
                                                     "line": []}

        # stack, bottom first, and its hatched total uncertainty
        if stacked:
            bottom = np.zeros(edges.size - 1)
            for i, c in enumerate(stacked):
                top = bottom + c.values
                art = ax.stairs(top, edges,
                                baseline=np.maximum(bottom, floor) if logy else bottom,
                                fill=True, color=colour_for(i, c.colour), linewidth=0)
                entries["stack"].insert(0, (art, c.label))
                bottom = top
            ax.stairs(total, edges, color="0.15", linewidth=0.8)
            art = ax.stairs(total + tot_up, edges, baseline=np.maximum(total - tot_dn, floor),
                            fill=True, facecolor="none", edgecolor="0.25", hatch="////",
                            linewidth=0)
            entries["band"].append((art, "MC uncertainty"))
            skyline = np.maximum(skyline, total + tot_up)
        # overlays: lines with their bands and MC error bars
        n_err = len(lines) + len(points)
        fracs = _offsets(n_err)
        k0 = len(stacked)
        for j, c in enumerate(lines):
            col = colour_for(k0 + j, c.colour)
            band_art = None
            if c.band_down is not None and c.band_up is not None:
                band_art = ax.stairs(c.band_up, edges, baseline=np.maximum(c.band_down, floor),
                                     fill=True, color=col, alpha=0.25, linewidth=0)
                skyline = np.maximum(skyline, c.band_up)
            line_art = ax.stairs(c.values, edges, color=col, linewidth=1.6, baseline=None)
            if band_art is not None:
                entries["line"].append(((band_art, line_art),
                                        f"{c.label}, {c.band_label} unc."))
            else:
                entries["line"].append((line_art, c.label))
            ax.errorbar(_positions(edges, fracs[j], opts.logx), c.values, yerr=c.errors,
                        fmt="none", ecolor=col, elinewidth=1.0, capsize=0)
            skyline = np.maximum(skyline, c.values + c.errors)
        # measured points / data, black markers
        for j, c in enumerate(points):
            xs = _positions(edges, fracs[len(lines) + j], opts.logx)
            col = c.colour or DATA_COLOUR
            good = c.values != 0 if c.syst is None else np.ones(c.values.size, dtype=bool)
            if c.syst is not None and np.any(c.syst > 0):
                ax.errorbar(xs[good], c.values[good], yerr=c.total_errors[good], fmt="none",
                            ecolor=col, elinewidth=1.0, capsize=2.5)
                label = f"{c.label} (stat ⊕ syst)"
            else:
                label = c.label
            art = ax.errorbar(xs[good], c.values[good], yerr=c.errors[good], fmt="o", ms=4.5,
                              color=col, ecolor=col, elinewidth=1.2, capsize=0, zorder=5)
            entries["points"].append((art, label))
            skyline = np.maximum(skyline, np.where(good, c.values + c.total_errors, -np.inf))

        # ranges
        ax.set_xlim(*(opts.xrange or (edges[0], edges[-1])))
        shown = [v for v in ([total] if stacked else []) + [c.values for c in lines + points]]
        if opts.yrange:
            ax.set_ylim(*opts.yrange)
        elif logy:
            # the smallest sample of the stack shows too, within six decades of the top
            pos = np.concatenate([v[v > 0] for v in shown + [c.values for c in stacked]]
                                 + [np.array([])])
            hi = float(np.max(skyline[np.isfinite(skyline)])) if np.any(np.isfinite(skyline)) \
                else 1.0
            lo = max(float(pos.min()), hi * 1e-6) if pos.size else 1e-3
            ax.set_ylim(10 ** (math.log10(lo) - 0.3), 10 ** (math.log10(max(hi, lo)) + 0.35))
        else:
            low = min(0.0, min(float(np.min(v)) for v in shown))
            hi = float(np.max(skyline[np.isfinite(skyline)])) if np.any(np.isfinite(skyline)) \
                else 1.0
            ax.set_ylim(low * 1.1, hi * 1.08 if hi > 0 else 1.0)

        apply_axes_style(ax, ylabel=display_label(y_label))
        if rx is None:
            ax.set_xlabel(display_label(x_label), fontsize=12)
        if title and opts.title:
            fig.suptitle(title, fontsize=12)
        corner_texts(ax, note=note, right=corner)

        if rx is not None:
            _ratio_panel(rx, edges, stacked, lines, points, ref, fracs, opts,
                         (total, tot_dn, tot_up) if stacked else None)
            apply_axes_style(rx, xlabel=display_label(x_label))
            ax.tick_params(labelbottom=False)
            fig.align_ylabels([ax, rx])
        shown_entries = [e for k in ("points", "stack", "band", "line") for e in entries[k]]
        ylab = display_label(y_label)
        fold_multiplier(ax, ylab)
        place_legend(ax, edges, skyline, handles=[h for h, _ in shown_entries],
                     labels=[lab for _, lab in shown_entries],
                     ncol=2 if len(shown_entries) > 5 else 1, max_tries=1 if opts.yrange else 6)
        fold_multiplier(ax, ylab)  # the limits may have grown
        # place_legend laid the figure out; keep that layout (no second layout pass on saving)
        fig.set_layout_engine("none")
    except BaseException:
        plt.close(fig)
        raise
    return fig


def _ratio_panel(rx: Any, edges: np.ndarray, stacked: list[Curve], lines: list[Curve],
                 points: list[Curve], ref: Curve | None, fracs: list[float], opts: PlotOptions,
                 tot: tuple[np.ndarray, np.ndarray, np.ndarray] | None) -> None:
    """Data and overlays over the stack total (or over the reference line); the denominator's
    uncertainty as a band around 1."""
    if tot is not None:
        den, dn, up = tot
        name = "MC"
    else:
        assert ref is not None
        den = ref.values
        dn = up = ref.errors
        if ref.band_down is not None and ref.band_up is not None:
            dn, up = ref.values - ref.band_down, ref.band_up - ref.values
        name = "ref."
    with np.errstate(divide="ignore", invalid="ignore"):
        safe = np.where(den != 0, den, np.nan)
        b_lo, b_hi = (den - dn) / safe, (den + up) / safe
    ok = np.isfinite(b_lo) & np.isfinite(b_hi)
    if tot is not None:
        rx.stairs(np.where(ok, b_hi, 1.0), edges, baseline=np.where(ok, b_lo, 1.0), fill=True,
                  facecolor="none", edgecolor="0.25", hatch="////", linewidth=0)
    else:
        rx.stairs(np.where(ok, b_hi, 1.0), edges, baseline=np.where(ok, b_lo, 1.0), fill=True,
                  color=colour_for(0, ref.colour if ref else None), alpha=0.25, linewidth=0)
    rx.axhline(1.0, color="0.15", linewidth=0.8)
    values: list[np.ndarray] = []
    k0 = len(stacked)
    for j, c in enumerate(lines):
        if c is ref:
            continue
        col = colour_for(k0 + j, c.colour)
        with np.errstate(divide="ignore", invalid="ignore"):
            r, e = c.values / safe, c.errors / np.abs(safe)
        rx.stairs(np.where(np.isfinite(r), r, np.nan), edges, color=col, linewidth=1.4,
                  baseline=None)
        fin = np.isfinite(r)
        rx.errorbar(_positions(edges, fracs[j], opts.logx)[fin], r[fin], yerr=e[fin], fmt="none",
                    ecolor=col, elinewidth=1.0)
        values.append(r[fin])
    for j, c in enumerate(points):
        col = c.colour or DATA_COLOUR
        with np.errstate(divide="ignore", invalid="ignore"):
            r, e = c.values / safe, c.total_errors / np.abs(safe)
        fin = np.isfinite(r) & (c.values != 0 if c.syst is None else True)
        rx.errorbar(_positions(edges, fracs[len(lines) + j], opts.logx)[fin], r[fin],
                    yerr=e[fin], fmt="o", ms=3.5, color=col, elinewidth=1.0, zorder=5)
        values.append(r[fin])
    rx.set_ylim(*_ratio_limits(values, [b_lo[ok], b_hi[ok]]))
    if points and tot is not None:
        label = "Data / MC"
    elif tot is None and ref is not None and 0 < len(ref.label) <= 18:
        label = display_label(f"Ratio to {ref.label}")  # which line is the reference
    else:
        label = f"Ratio to {name}"
    rx.set_ylabel(label, fontsize=10)


def _y_label(h: HistResult, edges: np.ndarray) -> str:
    """The y-axis label for people: ``Events / 2 GeV`` for expected events in equal bins, else
    the stored label with its unit."""
    widths = np.diff(edges)
    unit = h.axes[0].unit
    equal = bool(np.allclose(widths, widths[0], rtol=1e-9))
    per = f" / {widths[0]:.4g} {unit}".rstrip() if equal else " per bin"
    if equal and not unit and abs(widths[0] - 1.0) < 1e-9:
        per = ""  # a count (jets, leptons) in bins of one: "Events"
    if h.normalisation == "events":
        return "Events" + per
    if h.normalisation == "unit_area":
        return "Fraction" + per
    return h.y_title


# --------------------------------------------------------------------------------------------------
# the simple entry points


def plot_hist1d(
    stem: str | os.PathLike[str],
    series: Sequence[tuple[str, HistResult]],
    *,
    note: str = "",
    logy: bool | None = None,
    band_names: Sequence[str] | None = None,
    formats: Sequence[str] = FORMATS,
) -> list[Path]:
    """Overlay ``(label, HistResult)`` pairs (same binning) as lines; flow bins are not drawn."""
    if not series:
        raise ValueError("plot_hist1d: nothing to plot")
    first = series[0][1]
    curves = []
    for i, (label, h) in enumerate(series):
        if h.ndim != 1 or not np.array_equal(h.axes[0].edges, first.axes[0].edges):
            raise ValueError(f"plot_hist1d: {h.name!r} of {label!r} has different binning")
        if band_names is not None:
            h = dataclasses.replace(h, bands={k: b for k, b in h.bands.items()
                                              if k in band_names})
        curves.append(curve_from_result(h, label, "line", colour_for(i)))
    return draw_hist1d(stem, curves, x_label=first.axes[0].title,
                       y_label=_y_label(first, first.axes[0].edges), title=first.title, note=note,
                       options=PlotOptions(logy=logy, formats=tuple(formats)))


def _colourbar_label(h: HistResult) -> str:
    """The stored label with its unit (``d²σ/(d m d cos θ) [pb/GeV]`` for cross sections per
    bin area); results written before the label was stored in that form
    (``d²σ/(m)(cos θ)``) get it here."""
    if h.normalisation == "xsec_per_bin" and not h.y_label.startswith("d²σ/(d"):
        xs = [a.label or a.name for a in h.axes]
        text = f"d²σ/(d\u2009{xs[0]} d\u2009{xs[1]})"  # thin spaces: d stays upright
        return f"{text} [{h.y_unit}]" if h.y_unit else text
    return h.y_title


def plot_hist2d(
    stem: str | os.PathLike[str],
    h: HistResult,
    *,
    label: str = "",
    note: str = "",
    corner: str = "",
    formats: Sequence[str] = FORMATS,
    title: bool = False,
) -> list[Path]:
    """Colour map of a 2-D histogram (in-range bins); the sample's label in the corner."""
    if h.ndim != 2:
        raise ValueError(f"plot_hist2d: {h.name!r} is not 2-D")
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(6.4, 5.0), layout="constrained")
    try:
        xe, ye = h.axes[0].edges, h.axes[1].edges
        vals = h.inner_values().T
        pos = vals[vals > 0]
        norm = None
        if pos.size and auto_logy(pos):
            from matplotlib.colors import LogNorm

            norm = LogNorm(vmin=float(pos.min()), vmax=float(pos.max()))
            vals = np.where(vals > 0, vals, np.nan)
        mesh = ax.pcolormesh(xe, ye, vals, cmap="viridis", shading="flat", norm=norm)
        cb = fig.colorbar(mesh, ax=ax)
        cb.set_label(display_label(_colourbar_label(h)), fontsize=11)
        apply_axes_style(ax, xlabel=display_label(h.axes[0].title),
                         ylabel=display_label(h.axes[1].title))
        ax.set_xlim(xe[0], xe[-1])
        ax.set_ylim(ye[0], ye[-1])
        if title:
            fig.suptitle(h.title, fontsize=12)
        corner_texts(ax, note=note, right=", ".join(x for x in (label, corner) if x))
        fold_multiplier(ax)
        return _save(fig, Path(stem), formats)
    finally:
        plt.close(fig)


# --------------------------------------------------------------------------------------------------
# a results folder


@dataclass
class FigurePlan:
    """One figure to draw: a picklable task for :func:`evtkin.output.drawing.draw_all`."""

    task: Task
    name: str
    notes: list[str] = field(default_factory=list)


def _measured(meta: Mapping[str, Any]) -> dict[str, dict[str, Any]]:
    return dict(meta.get("measured") or {})


def _corner(meta: Mapping[str, Any], h: HistResult, lumi: float | None) -> str:
    rec = meta.get("plot") or {}
    sqrt_s = rec.get("sqrt_s_gev") if isinstance(rec, Mapping) else None
    return sqrt_s_text(sqrt_s, lumi if h.normalisation == "events" else None)


def figure_tasks(
    folder: str | os.PathLike[str], results: Results, *, note: str = "",
    overrides: Mapping[str, Any] | None = None, hists: Sequence[str] | None = None,
    base: PlotOptions | None = None,
) -> list[Task]:
    """The drawing tasks for the results' histograms (all, or ``hists``) with their options."""
    d = Path(folder) / "plots"
    names: list[str] = []
    for s in results.samples.values():
        names += [n for n in s.histograms if n not in names]
    if hists:
        missing = [h for h in hists if h not in names]
        if missing:
            raise ResultsError(f"no histogram {', '.join(map(repr, missing))} in the results; "
                               f"they hold {', '.join(names) or 'none'}")
        names = [n for n in names if n in hists]
    measured = _measured(results.meta)
    tasks: list[Task] = []
    for hname in names:
        opts = options_for(hname, results.meta, overrides, base)
        present = [s for s in results.samples.values() if hname in s.histograms]
        first = present[0].histograms[hname]
        if first.ndim != 1:
            for s in present:
                tasks.append((plot_hist2d, (d / f"{safe_name(hname)}__{safe_name(s.name)}",
                                            s.histograms[hname]),
                              {"label": s.label or s.name, "note": note,
                               "corner": _corner(results.meta, first, None),
                               "formats": opts.formats, "title": opts.title}))
            continue
        tasks.append((draw_hist1d, (d / safe_name(hname), _curves(hname, present, measured,
                                                                    opts, results)),
                      _figure_kwargs(hname, first, present, opts, note, results)))
    return tasks


def _figure_kwargs(hname: str, first: HistResult, present: list[Any], opts: PlotOptions,
                   note: str, results: Results) -> dict[str, Any]:
    from evtkin.output.rebin import rebin_result

    h = rebin_result(first, opts.rebin) if opts.rebin is not None else first
    lumi = next((s.luminosity_fb for s in present if s.luminosity_fb), None)
    return {"x_label": h.axes[0].title, "y_label": _y_label(h, h.axes[0].edges),
            "title": h.title, "note": note, "corner": _corner(results.meta, h, lumi),
            "options": opts}


def _curves(hname: str, present: list[Any], measured: Mapping[str, Any], opts: PlotOptions,
            results: Results) -> list[Curve]:
    from evtkin.output.rebin import rebin_result

    by_name = {s.name: s for s in present}
    known = set(results.samples) | set(measured)
    for role in ("stack", "data"):
        for n in getattr(opts, role):
            if n not in known:
                raise ResultsError(f"plot {role}: no sample or measured table {n!r}; the results "
                                   f"hold {', '.join(sorted(known)) or 'none'}")
    for n in opts.overlay or ():
        if n not in results.samples:
            raise ResultsError(f"plot overlay: no sample {n!r}; the results hold "
                               f"{', '.join(results.samples) or 'none'}")
    # data samples (counted events) are always points: after the listed ones, never stacked
    counted = [n for n, s in results.samples.items() if getattr(s, "data", False)]
    for role in ("stack", "overlay"):
        for n in getattr(opts, role) or ():
            if n in counted:
                raise ResultsError(f"plot {role}: {n!r} is a data sample (counted events); it "
                                   "is drawn as points, never stacked or overlaid")
    as_points = (*opts.data, *(n for n in counted if n not in opts.data))

    def hist_of(s: Any) -> HistResult:
        h = s.histograms[hname]
        return rebin_result(h, opts.rebin) if opts.rebin is not None else h  # type: ignore[no-any-return]

    out: list[Curve] = []
    k = 0
    for n in opts.stack:
        if n in by_name:
            s = by_name[n]
            out.append(curve_from_result(hist_of(s), s.label or n, "stack",
                                         opts.colour(n) or colour_for(k), n))
            k += 1
    overlay = opts.overlay if opts.overlay is not None else tuple(
        s.name for s in present if s.name not in opts.stack and s.name not in as_points)
    for n in overlay:
        if n in by_name:
            s = by_name[n]
            out.append(curve_from_result(hist_of(s), s.label or n, "line",
                                         opts.colour(n) or colour_for(k), n))
            k += 1
    edges = (out[0].edges if out else
             np.asarray(hist_of(present[0]).axes[0].edges, dtype=float))
    first = hist_of(present[0])
    for n in as_points:
        if n in by_name:
            s = by_name[n]
            out.append(curve_from_result(hist_of(s), s.label or n, "points", opts.colour(n), n))
        elif n in measured and hname in (measured[n].get("tables") or {}):
            # (a region's copy NAME@REGION has its own selection: only its own table is drawn)
            t = MeasuredTable.from_dict(measured[n]["tables"][hname], f"measured {n}.{hname}")
            if t.y_unit != first.y_unit:
                raise ResultsError(
                    f"measured table {t.source or n} for {hname!r}: values in {t.y_unit!r}, but "
                    f"the histogram is in {first.y_unit!r} (normalisation {first.normalisation})")
            if t.edges.size != edges.size or not np.allclose(t.edges, edges, rtol=1e-9):
                try:
                    t = rebin_measured(t, edges, first.normalisation)
                except ResultsError:
                    raise ResultsError(
                        f"measured table {t.source or n} for {hname!r}: its bin edges "
                        f"({', '.join(f'{x:g}' for x in t.edges)}) do not match the "
                        f"histogram's ({', '.join(f'{x:g}' for x in edges)})") from None
            label = measured[n].get("label") or t.label or n
            out.append(Curve(label=label, edges=edges, values=t.values, errors=t.stat,
                             kind="points", colour=opts.colour(n), syst=t.syst, name=n))
    if not out:
        raise ResultsError(f"plot {hname!r}: nothing to draw (no sample of the results is "
                           "stacked, overlaid or drawn as data)")
    return out


def write_plots(
    folder: str | os.PathLike[str], results: Results, *, note: str = "",
    formats: Sequence[str] | None = None, workers: int = 1,
    overrides: Mapping[str, Any] | None = None, hists: Sequence[str] | None = None,
) -> list[Path]:
    """``plots/<hist>.<fmt>`` (1-D: stacks, overlays, points, ratio panel) and
    ``plots/<hist>__<sample>.<fmt>`` (2-D), for every histogram (or ``hists``).

    ``formats`` (if given) is the default for histograms that do not set their own; options
    from ``results.meta["plot"]`` apply, then ``overrides``. ``workers`` > 1 draws the figures
    in up to that many processes (see :func:`evtkin.output.drawing.draw_all`); the files and
    the order of the returned paths are the same either way.
    """
    base = PlotOptions(formats=tuple(formats)) if formats is not None else None
    tasks = figure_tasks(folder, results, note=note, overrides=overrides, hists=hists, base=base)
    out: list[Path] = []
    for paths in draw_all(tasks, workers):
        out += paths
    return out
