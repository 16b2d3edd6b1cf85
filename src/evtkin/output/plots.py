"""Publication-quality plots with matplotlib (Agg backend, no display needed).

1-D: one step histogram per sample with MC error bars at the bin centres and, if present, the
bands shaded; axis labels with units; a corner note supplied by the caller (for example
"toy data — not a physics prediction"). 2-D: a colour map of one sample. Each figure is written as
PNG and PDF, through a temporary name and a rename. :func:`write_plots` can draw the figures
in several processes (``workers``): drawing is pure Python and takes ~1–2 s per figure.
"""

from __future__ import annotations

import io
import os
import re
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from evtkin.files import atomic_write_bytes, safe_name
from evtkin.output.drawing import Task, draw_all
from evtkin.output.tables import HistResult, Results

__all__ = ["display_label", "plot_hist1d", "plot_hist2d", "write_plots"]

FORMATS = ("png", "pdf")
#: file metadata: our name; no creation date in PDFs, so the same results give the same bytes
#: (the run's time is in provenance.json)
_METADATA: dict[str, dict[str, Any]] = {
    "png": {"Creator": "evtkin"},
    "pdf": {"Creator": "evtkin", "CreationDate": None},
}

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
        # a combining bar (t̄) becomes mathtext's \bar{t}: a combining mark is lost in math mode
        candidate = "$" + re.sub("(.)[\u0304\u0305]", r"\\bar{\1}", m.group(0)) + "$"
        try:
            parser.parse(candidate)
        except ValueError:
            return m.group(0)
        return candidate

    return _SCRIPTED.sub(wrap, text)


def _bands_to_draw(h: HistResult, requested: Sequence[str] | None) -> list[str]:
    """Bands drawn for ``h``: the requested ones, else ``total`` alone when present, else all."""
    if requested is not None:
        return [b for b in requested if b in h.bands]
    return ["total"] if "total" in h.bands else list(h.bands)


def _pyplot() -> Any:
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


def _save(fig: Any, stem: Path, formats: Sequence[str]) -> list[Path]:
    out = []
    for k, fmt in enumerate(formats):
        if k == 1:
            # the constrained layout placed the axes while the first format was drawn; keep
            # those positions instead of laying out again (a whole extra drawing pass)
            fig.set_layout_engine("none")
        buf = io.BytesIO()
        fig.savefig(buf, format=fmt, dpi=150,
                    metadata=_METADATA.get(fmt))
        out.append(atomic_write_bytes(stem.with_name(f"{stem.name}.{fmt}"), buf.getvalue()))
    return out


def plot_hist1d(
    stem: str | os.PathLike[str],
    series: Sequence[tuple[str, HistResult]],
    *,
    note: str = "",
    logy: bool = False,
    band_names: Sequence[str] | None = None,
    formats: Sequence[str] = FORMATS,
) -> list[Path]:
    """Overlay ``(label, HistResult)`` pairs (same binning); flow bins are not drawn."""
    if not series:
        raise ValueError("plot_hist1d: nothing to plot")
    plt = _pyplot()
    first = series[0][1]
    edges = first.axes[0].edges
    centres = 0.5 * (edges[1:] + edges[:-1])
    fig, ax = plt.subplots(figsize=(6.4, 4.8), constrained_layout=True)
    for i, (label, h) in enumerate(series):
        if h.ndim != 1 or not np.array_equal(h.axes[0].edges, edges):
            raise ValueError(f"plot_hist1d: {h.name!r} of {label!r} has different binning")
        colour = f"C{i}"
        vals = h.inner_values()
        errs = np.sqrt(np.clip(h.inner_variances(), 0.0, None))
        for j, bname in enumerate(_bands_to_draw(h, band_names)):
            b = h.bands[bname]
            ax.fill_between(edges, np.append(b.down[1:-1], b.down[-2]),
                            np.append(b.up[1:-1], b.up[-2]), step="post", color=colour,
                            alpha=0.25 / (1 + j), linewidth=0,
                            label=f"{label}: {bname} unc." if j < 2 else None)
        ax.stairs(vals, edges, color=colour, linewidth=1.5, label=label)
        ax.errorbar(centres, vals, yerr=errs, fmt="none", ecolor=colour, elinewidth=1.0,
                    capsize=0)
    ax.set_xlabel(display_label(first.axes[0].title), fontsize=12)
    ax.set_ylabel(display_label(first.y_title), fontsize=12)
    ax.set_xlim(edges[0], edges[-1])
    if logy:
        ax.set_yscale("log")
    ax.tick_params(direction="in", which="both", top=True, right=True)
    ax.minorticks_on()
    ax.set_title(first.title, fontsize=12)
    ax.legend(frameon=False, fontsize=9)
    if note:
        ax.text(0.02, 0.98, note, transform=ax.transAxes, ha="left", va="top", fontsize=8,
                style="italic", color="0.3")
    try:
        return _save(fig, Path(stem), formats)
    finally:
        plt.close(fig)


def plot_hist2d(
    stem: str | os.PathLike[str],
    h: HistResult,
    *,
    label: str = "",
    note: str = "",
    formats: Sequence[str] = FORMATS,
) -> list[Path]:
    """Colour map of a 2-D histogram (in-range bins)."""
    if h.ndim != 2:
        raise ValueError(f"plot_hist2d: {h.name!r} is not 2-D")
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(6.4, 5.0), constrained_layout=True)
    xe, ye = h.axes[0].edges, h.axes[1].edges
    mesh = ax.pcolormesh(xe, ye, h.inner_values().T, cmap="viridis", shading="flat")
    cb = fig.colorbar(mesh, ax=ax)
    cb.set_label(display_label(h.y_title))
    ax.set_xlabel(display_label(h.axes[0].title), fontsize=12)
    ax.set_ylabel(display_label(h.axes[1].title), fontsize=12)
    ax.set_title(f"{h.title}" + (f" — {label}" if label else ""), fontsize=12)
    ax.tick_params(direction="in", which="both", top=True, right=True)
    if note:
        ax.text(0.02, 0.98, note, transform=ax.transAxes, ha="left", va="top", fontsize=8,
                style="italic", color="white")
    try:
        return _save(fig, Path(stem), formats)
    finally:
        plt.close(fig)


def write_plots(
    folder: str | os.PathLike[str], results: Results, *, note: str = "",
    formats: Sequence[str] = FORMATS, workers: int = 1,
) -> list[Path]:
    """``plots/<hist>.{png,pdf}`` (1-D, samples overlaid) and ``plots/<hist>__<sample>.*`` (2-D).

    ``workers`` > 1 draws the figures in up to that many processes (see
    :func:`evtkin.output.drawing.draw_all`); the files and the order of the returned paths are
    the same either way.
    """
    d = Path(folder) / "plots"
    names: list[str] = []
    for s in results.samples.values():
        names += [n for n in s.histograms if n not in names]
    tasks: list[Task] = []
    for hname in names:
        present = [(s.label or s.name, s.name, s.histograms[hname])
                   for s in results.samples.values() if hname in s.histograms]
        if present[0][2].ndim == 1:
            tasks.append((plot_hist1d, (d / safe_name(hname), [(lab, h) for lab, _n, h in present]),
                          {"note": note, "formats": tuple(formats)}))
        else:
            for lab, sname, h in present:
                tasks.append((plot_hist2d, (d / f"{safe_name(hname)}__{safe_name(sname)}", h),
                              {"label": lab, "note": note, "formats": tuple(formats)}))
    out: list[Path] = []
    for paths in draw_all(tasks, workers):
        out += paths
    return out
