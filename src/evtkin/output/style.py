"""The one look of evtkin's figures: palette, axes, labels, legend placement, the corner texts.

Run plots (:mod:`evtkin.output.plots`) and comparison plots (:mod:`evtkin.output.compare_plots`)
use these helpers, so both look the same:

* colours from :data:`PALETTE`, eight colours chosen from the Okabe–Ito set, which stays
  distinguishable under the common colour-vision deficiencies (M. Okabe, K. Ito, "Color Universal
  Design", 2008); measured points are black;
* no title inside the figure (the report's caption carries it) unless asked for;
* ticks inside on all four sides, minor ticks, a multiplier written ×10ⁿ (not an offset "1e8");
* above the frame: the notice (for example "toy data — not a physics prediction") on the left and
  √s with the luminosity on the right, so neither can cover the data or the legend;
* the legend where it covers no drawn point, bar or band (:func:`place_legend`), with headroom
  added above the data when no corner is free.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from typing import Any

import numpy as np

__all__ = [
    "DATA_COLOUR",
    "PALETTE",
    "apply_axes_style",
    "auto_logy",
    "colour_for",
    "corner_texts",
    "display_label",
    "fold_multiplier",
    "place_legend",
    "sqrt_s_text",
]

#: colour-blind safe, from the Okabe–Ito set in an order of our own: blue, orange, bluish green,
#: vermillion, sky blue, reddish purple, yellow, grey
PALETTE: tuple[str, ...] = (
    "#0072B2", "#E69F00", "#009E73", "#D55E00", "#56B4E9", "#CC79A7", "#F0E442", "#999999",
)
DATA_COLOUR = "#000000"


def colour_for(index: int, explicit: str | None = None) -> str:
    """``explicit`` if given, else the ``index``-th palette colour (cycling)."""
    return explicit if explicit else PALETTE[index % len(PALETTE)]


def auto_logy(values: Sequence[np.ndarray] | np.ndarray, decades: float = 3.0) -> bool:
    """True when the positive values span more than ``decades`` decades."""
    arrs = [np.asarray(values, dtype=float)] if isinstance(values, np.ndarray) else [
        np.asarray(v, dtype=float) for v in values]
    pos = np.concatenate([a[np.isfinite(a) & (a > 0)].ravel() for a in arrs]) if arrs else \
        np.array([])
    if pos.size < 2:
        return False
    return bool(math.log10(pos.max() / pos.min()) > decades)


def sqrt_s_text(sqrt_s_gev: float | None, luminosity_fb: float | None) -> str:
    """``"√s = 13 TeV, 140 fb⁻¹"`` (either part alone; empty when neither is known)."""
    parts = []
    if sqrt_s_gev:
        tev = sqrt_s_gev / 1000.0
        parts.append(f"√s = {tev:.4g} TeV" if tev >= 1 else f"√s = {sqrt_s_gev:.4g} GeV")
    if luminosity_fb:
        parts.append(f"{luminosity_fb:.4g} fb⁻¹")
    return ", ".join(parts)


def apply_axes_style(ax: Any, *, xlabel: str = "", ylabel: str = "", fontsize: float = 12) -> None:
    """Ticks inside on four sides, minor ticks, ×10ⁿ multiplier, axis labels."""
    from matplotlib.ticker import ScalarFormatter

    ax.tick_params(direction="in", which="both", top=True, right=True, labelsize=fontsize - 2)
    ax.minorticks_on()
    for axis in (ax.xaxis, ax.yaxis):
        if axis.get_scale() == "linear":
            fmt = ScalarFormatter(useMathText=True)
            fmt.set_powerlimits((-3, 4))
            axis.set_major_formatter(fmt)
    if xlabel:
        ax.set_xlabel(xlabel, fontsize=fontsize)
    if ylabel:
        ax.set_ylabel(ylabel, fontsize=fontsize)


def fold_multiplier(ax: Any, label: str | None = None) -> None:
    """Move the y axis' ×10ⁿ multiplier from above the frame (where the notice is) into the
    axis label: ``Events / 2 GeV (×10⁷)``, for the current limits. ``label``: the label without
    a multiplier (default: the axis' label now); call again after the limits change."""
    base = ax.get_ylabel() if label is None else label
    ax.set_ylabel(base)
    if ax.yaxis.get_scale() != "linear":
        return
    fmt = ax.yaxis.get_major_formatter()
    if not hasattr(fmt, "get_offset"):
        return
    lo, hi = ax.get_ylim()
    fmt.set_locs([t for t in ax.yaxis.get_majorticklocs() if lo <= t <= hi])
    text = fmt.get_offset()
    if text:
        ax.yaxis.get_offset_text().set_visible(False)
        ax.set_ylabel(f"{base}  ({text})")


def corner_texts(ax: Any, *, note: str = "", right: str = "", fontsize: float = 9) -> None:
    """``note`` above the frame on the left (italic), ``right`` above it on the right. When
    the two would touch (a long sample label), the note goes one line higher, over the
    right-hand text; a right-hand text wider than the frame is wrapped at spaces."""
    left_t = right_t = None
    if note:
        left_t = ax.text(0.0, 1.015, note, transform=ax.transAxes, ha="left", va="bottom",
                         fontsize=fontsize - 1, style="italic", color="0.3")
    if right:
        right_t = ax.text(1.0, 1.015, right, transform=ax.transAxes, ha="right",
                          va="bottom", fontsize=fontsize, multialignment="right")
    if right_t is None:
        return
    fig = ax.figure
    renderer = fig.canvas.get_renderer()
    b = right_t.get_window_extent(renderer)
    a_width = left_t.get_window_extent(renderer).width if left_t is not None else 0.0
    gap = 0.6 * fontsize * fig.dpi / 72  # pixels
    if a_width + b.width + gap < 0.8 * ax.get_window_extent(renderer).width:
        return  # apart whatever the layout makes of the axes' width
    engine = fig.get_layout_engine()
    if engine is not None:
        engine.execute(fig)  # the axes' final width
    width = ax.get_window_extent(renderer).width
    if b.width > width:
        import textwrap

        chars = max(10, int(len(right) * width / b.width * 0.95))
        right_t.set_text(textwrap.fill(right, chars, break_long_words=False))
        b = right_t.get_window_extent(renderer)
    if left_t is None or left_t.get_window_extent(renderer).x1 + gap <= b.x0:
        return
    from matplotlib.transforms import offset_copy

    rise = b.height * 72 / fig.dpi + 1  # points
    left_t.set_transform(offset_copy(ax.transAxes, fig=fig, y=rise, units="points"))


# a word with TeX-style sub/superscripts: m_{jj}, p_T^{t,had}, E_T
_SCRIPTED = re.compile(r"(?<!\w)[^\W_]+(?:[_^](?:\{[^{}$]*\}|[^\W_]))+(?!\w)")


def display_label(text: str) -> str:
    """Render TeX-style scripts in a label (``m_{jj}`` → ``$m_{jj}$``) for matplotlib.

    Labels that already contain ``$`` are left alone; a word that matplotlib's mathtext
    cannot parse is shown as typed.
    """
    if "$" in text or not _SCRIPTED.search(text):
        return text
    from matplotlib.mathtext import MathTextParser

    parser = MathTextParser("path")

    def wrap(m: re.Match[str]) -> str:
        word = m.group(0)
        # the differential's d of dσ/dm_{ℓℓ} stays upright, like the d of dσ
        lead = ""
        if (word.startswith("d") and m.start() > 0 and text[m.start() - 1] == "/"
                and _SCRIPTED.fullmatch(word[1:])):
            lead, word = "d", word[1:]
        # a combining bar (t̄) becomes mathtext's \bar{t}: a combining mark is lost in math mode;
        # a hyphen between letters (N_{b-tag}) stays a hyphen, not a spaced minus sign
        math = re.sub("(.)[\u0304\u0305]", r"\\bar{\1}", word)
        math = re.sub(r"(?<=[^\W\d_])-(?=[^\W\d_])", "\u2010", math)
        candidate = "$" + math + "$"
        try:
            parser.parse(candidate)
        except ValueError:
            return lead + word
        return lead + candidate

    return _SCRIPTED.sub(wrap, text)


# --------------------------------------------------------------------------------------------------
# the legend where it covers no data


_LOCATIONS = ("upper right", "upper left", "upper center", "center right", "center left")


def place_legend(
    ax: Any, edges: np.ndarray, skyline: np.ndarray, *, fontsize: float = 9, ncol: int = 1,
    max_tries: int = 6, handles: Sequence[Any] | None = None, labels: Sequence[str] | None = None,
) -> Any:
    """Put the legend where it covers nothing drawn, adding headroom when needed.

    ``skyline[i]`` is the highest drawn y (bar tops, error bars, bands, points) in bin
    ``[edges[i], edges[i+1])``: everything drawn in that bin lies at or below it. A place is free
    when the legend's box lies above the skyline of every bin it spans horizontally, with a
    margin of 2 % of the axes height. The box's size comes from matplotlib's own layout (one
    drawing pass); the corners are tried first, and if none is free the top of the y axis is
    raised (linear: by 25 % of the range, log: half a decade) and the corners tried again.
    Returns the legend (``None`` when there is nothing to label). ``handles``/``labels``: the
    entries in this order (default: the axes' own).
    """
    if handles is None or labels is None:
        handles, labels = ax.get_legend_handles_labels()
    if not handles:
        return None
    fig = ax.figure
    sky = np.where(np.isfinite(skyline), skyline, -np.inf)
    leg = ax.legend(handles, labels, loc="upper right", frameon=False, fontsize=fontsize,
                    ncol=ncol, borderaxespad=0.6)
    fig.draw_without_rendering()
    renderer = fig.canvas.get_renderer()
    bb = leg.get_window_extent(renderer)
    w, h = bb.width, bb.height
    pad = renderer.points_to_pixels(leg.borderaxespad * leg.prop.get_size_in_points())
    for _ in range(max_tries):
        frame = ax.get_window_extent(renderer)
        for loc in _LOCATIONS:
            box = _candidate(loc, frame, w, h, pad)
            if _box_is_free(ax, box, edges, sky):
                leg.set_loc(loc)
                return leg
        _raise_top(ax, sky)
    return leg


def _candidate(loc: str, f: Any, w: float, h: float, pad: float
               ) -> tuple[float, float, float, float]:
    """Display box ``(x0, x1, y0, y1)`` of a ``w`` x ``h`` legend at ``loc`` in frame ``f``."""
    vert, _, horiz = loc.partition(" ")
    if horiz == "right":
        x0 = f.x1 - pad - w
    elif horiz == "left":
        x0 = f.x0 + pad
    else:
        x0 = 0.5 * (f.x0 + f.x1) - 0.5 * w
    y0 = f.y1 - pad - h if vert == "upper" else 0.5 * (f.y0 + f.y1) - 0.5 * h
    return x0, x0 + w, y0, y0 + h


def legend_box_data(fig: Any, ax: Any, leg: Any) -> tuple[float, float, float, float]:
    """The legend's box in data coordinates ``(x0, x1, y0, y1)`` (after a layout pass)."""
    bb = leg.get_window_extent(fig.canvas.get_renderer())
    return _to_data(ax, (bb.x0, bb.x1, bb.y0, bb.y1))


def _to_data(ax: Any, box: tuple[float, float, float, float]
             ) -> tuple[float, float, float, float]:
    inv = ax.transData.inverted()
    (x0, y0), (x1, y1) = inv.transform([[box[0], box[2]], [box[1], box[3]]])
    return float(x0), float(x1), float(y0), float(y1)


def _box_is_free(ax: Any, box: tuple[float, float, float, float], edges: np.ndarray,
                 sky: np.ndarray) -> bool:
    x0, x1, _y0, _y1 = _to_data(ax, box)
    # the data y of the box's bottom edge less the margin, in display space first
    frame = ax.get_window_extent()
    _a, _b, y0, _c = _to_data(ax, (box[0], box[1], box[2] - 0.02 * frame.height, box[3]))
    lo, hi = edges[:-1], edges[1:]
    under = (hi > x0) & (lo < x1)
    if not np.any(under):
        return True
    return bool(np.all(sky[under] < y0))


def _raise_top(ax: Any, sky: np.ndarray) -> None:
    ylo, yhi = ax.get_ylim()
    if ax.get_yscale() == "log":
        ax.set_ylim(ylo, yhi * 10 ** 0.5)
    else:
        ax.set_ylim(ylo, yhi + 0.25 * (yhi - ylo))
