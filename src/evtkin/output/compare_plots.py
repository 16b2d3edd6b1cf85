"""Comparison of results folders: pairing, plots (matplotlib Agg), summary tables.

:func:`evtkin.output.compare_run.compare_results` (the driver) loads result folders written by
``evtkin run`` (format in docs/results-format.md), compares every 1-D histogram present in all
of them against the first (the reference) with :func:`evtkin.compare.compare_histograms`, and
writes to ``out``::

    plots/<hist>.png     overlaid distributions, ratio panel (ratio ± MC error, reference band),
                         optional pull panel
    summary.txt|.csv     one row per comparison, sorted by p-value ascending (NaN last)
    summary.json         the same plus per-bin arrays and every note
    report.html          self-contained HTML report (evtkin.output.report)

Stored values are converted to per-bin contents for the tests: ``xsec_per_bin`` values are
multiplied back by the bin widths (flow bins are stored undivided), ``unit_area`` values get their
per-bin Σw²/W² recovered from the delta-method variances; ``raw`` and ``events`` are used as stored.
The ratio and the pull do not depend on that conversion; plots show the stored quantity.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from evtkin.compare import HistComparison, HistData, compare_histograms, p_text
from evtkin.errors import ResultsError
from evtkin.files import atomic_path, atomic_write_text
from evtkin.output.plots import display_label

__all__ = [
    "ComparisonEntry",
    "ComparisonSet",
    "Source",
    "compare_loaded",
    "plot_comparison",
    "summary_rows",
    "write_summary",
]

SUMMARY_COLUMNS = [
    "histogram",
    "reference",
    "other",
    "method",
    "mode",
    "chi2",
    "ndf",
    "p_value",
    "log10_p",
    "p_shape",
    "p_absolute",
    "ks_distance",
    "ks_p_approx",
    "bins_skipped",
    "bins_merged",
    "merged",
    "notes",
]


@dataclass
class Source:
    """One side of a comparison: a sample of a loaded results folder (a ``SampleResult``)."""

    label: str
    folder: str
    sample: Any
    note: str = ""


@dataclass
class ComparisonEntry:
    """All comparisons of one histogram (or one pair) against the reference source."""

    name: str
    reference: HistData
    others: list[HistData]
    comparisons: list[HistComparison]
    display_factor: np.ndarray  # multiply per-bin contents by this to get the stored quantity
    x_label: str = ""
    y_label: str = ""
    title: str = ""
    plot: str | None = None  # path relative to the output folder

    @property
    def min_p(self) -> float:
        ps = [c.chi2.p_value for c in self.comparisons if np.isfinite(c.chi2.p_value)]
        return min(ps) if ps else math.nan


@dataclass
class ComparisonSet:
    """Result of :func:`compare_loaded` / :func:`compare_results`."""

    sources: list[Source]
    entries: list[ComparisonEntry]
    shape_only: bool
    with_bands: bool
    note: str = ""
    skipped: list[str] = field(default_factory=list)
    out: str | None = None
    #: the text above the frame on the right: √s when the inputs give one and agree
    corner: str = ""

    def comparisons(self) -> list[tuple[ComparisonEntry, HistComparison]]:
        """Every (entry, comparison) pair sorted by the headline p-value, smallest first."""
        pairs = [(e, c) for e in self.entries for c in e.comparisons]
        return sorted(pairs, key=lambda ec: _p_key(ec[1].chi2.p_value))


def _p_key(p: float) -> tuple[int, float]:
    return (1, 0.0) if not np.isfinite(p) else (0, p)


# --------------------------------------------------------------------------------------------------
# results-folder histograms -> HistData in per-bin contents


def _unit_area_contents(p: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray, str | None]:
    """Recover t_k = s_k²/W² from Var(p_k) = (1-2p_k) t_k + p_k² Σt (REFERENCES §2.11)."""
    n = len(p)
    mat = np.diag(1.0 - 2.0 * p) + np.outer(p * p, np.ones(n))
    try:
        t = np.linalg.solve(mat, v)
    except np.linalg.LinAlgError:
        t = None
    if t is None or not np.all(np.isfinite(t)) or np.any(t < -1e-12 * max(v.max(), 1e-300)):
        return p, v, "unit-area input: per-bin variances could not be recovered; used as stored"
    return p, np.maximum(t, 0.0), None


def hist_to_data(hr: Any, label: str) -> tuple[HistData, np.ndarray, list[str]]:
    """Convert a documented ``HistResult`` (flow included) to :class:`HistData` in per-bin contents.

    Returns the data, the per-bin display factor (contents x factor = stored quantity) and notes.
    """
    edges = np.asarray(hr.axes[0].edges, dtype=np.float64)
    vals = np.asarray(hr.values, dtype=np.float64)
    var = np.asarray(hr.variances, dtype=np.float64)
    n = len(edges) - 1
    if vals.shape != (n + 2,) or var.shape != (n + 2,):
        raise ResultsError(
            f"histogram {hr.name!r}: {len(edges)} edges need {n + 2} values with flow, "
            f"got {vals.shape[0]}"
        )
    band = _pick_band(hr)
    down = None if band is None else np.asarray(band.down, dtype=np.float64)
    up = None if band is None else np.asarray(band.up, dtype=np.float64)
    notes: list[str] = []
    factor = np.ones(n + 2)
    norm = getattr(hr, "normalisation", "raw")
    if norm == "xsec_per_bin":
        factor[1:-1] = 1.0 / np.diff(edges)
        vals, var = vals / factor, var / factor**2
        down = None if down is None else down / factor
        up = None if up is None else up / factor
    elif norm == "unit_area":
        if getattr(hr, "norm_includes_flow", True):
            vals, var, note = _unit_area_contents(vals, var)
        else:
            inner_p, inner_t, note = _unit_area_contents(vals[1:-1], var[1:-1])
            vals = np.concatenate([[0.0], inner_p, [0.0]])
            var = np.concatenate([[0.0], inner_t, [0.0]])
            note = (note + "; " if note else "") + "unit area without flow: flow bins left out"
        if note:
            notes.append(note)
    shape = _pick_band(hr, "shape_bands")
    hd = HistData(
        edges, vals, var, band_down=down, band_up=up, flow=True, name=hr.name, label=label,
        shape_band_down=None if shape is None else np.asarray(shape.down, dtype=np.float64),
        shape_band_up=None if shape is None else np.asarray(shape.up, dtype=np.float64),
    )
    return hd, factor, notes


def _pick_band(hr: Any, key: str = "bands") -> Any:
    bands = getattr(hr, key, None) or {}
    if not bands:
        return None
    return bands.get("total") or next(iter(bands.values()))


def _axis_label(hr: Any) -> str:
    ax = hr.axes[0]
    text = ax.label or ax.name
    return f"{text} [{ax.unit}]" if getattr(ax, "unit", "") else text


def _y_label(hr: Any, shape_only: bool) -> str:
    if shape_only:
        if hr.normalisation != "xsec_per_bin":
            return "Fraction per bin"
        ax = hr.axes[0]
        return f"Fraction per {ax.unit}" if getattr(ax, "unit", "") else "Fraction per unit"
    text = hr.y_label or ""
    return f"{text} [{hr.y_unit}]" if getattr(hr, "y_unit", "") else text


# --------------------------------------------------------------------------------------------------
# pairing and comparing


def _sources_from(
    results: Sequence[Any], folders: Sequence[str], samples: Sequence[str] | None
) -> list[list[Source]]:
    """Groups of sources to compare (first of each group = reference)."""

    def src(res: Any, folder: str, name: str) -> Source:
        if name not in res.samples:
            raise ResultsError(
                f"{folder}: no sample {name!r}; it holds {', '.join(res.samples) or 'none'}"
            )
        s = res.samples[name]
        label = s.label or name
        if len(folders) > 1 and len({os.path.basename(str(f)) for f in folders}) == len(folders):
            # the folder after a dash: labels often end in a parenthesis of their own
            label = f"{label} — {os.path.basename(str(folder).rstrip('/'))}"
        return Source(label, str(folder), s, str(res.meta.get("note", "") or ""))

    if len(results) == 1:
        res, folder = results[0], folders[0]
        names = list(samples) if samples else list(res.samples)
        return [[src(res, folder, nm) for nm in names]]
    if samples:
        if len(samples) == 1:
            samples = list(samples) * len(results)
        if len(samples) != len(results):
            raise ResultsError(
                f"--samples: give one sample name, or one per folder ({len(results)}), "
                f"got {len(samples)}"
            )
        return [[src(r, f, s) for r, f, s in zip(results, folders, samples, strict=True)]]
    if all(len(r.samples) == 1 for r in results):
        return [[src(r, f, next(iter(r.samples))) for r, f in zip(results, folders, strict=True)]]
    common = [nm for nm in results[0].samples if all(nm in r.samples for r in results[1:])]
    if not common:
        raise ResultsError(
            "the folders hold several samples and none is common to all; choose with --samples "
            "(one name per folder)"
        )
    return [[src(r, f, nm) for r, f in zip(results, folders, strict=True)] for nm in common]


def compare_loaded(
    results: Sequence[Any],
    folders: Sequence[str] | None = None,
    *,
    samples: Sequence[str] | None = None,
    pair: tuple[str, str] | None = None,
    histograms: Sequence[str] | None = None,
    shape_only: bool = False,
    with_bands: bool = False,
    min_entries: float = 5.0,
    low_content: str = "flag",
    with_flow: bool = False,
) -> ComparisonSet:
    """Compare loaded results (objects shaped like ``evtkin.output.tables.Results``).

    ``pair=(x, y)`` compares histogram ``y`` against ``x`` inside each selected sample instead.
    The χ² tests use the in-range bins unless ``with_flow``; low-content bins are kept and
    flagged unless ``low_content="merge"``. No histogram in common is an error.
    """
    folders = (
        list(folders) if folders is not None else [f"input{i + 1}" for i in range(len(results))]
    )
    groups = _sources_from(results, folders, samples)
    kw: dict[str, Any] = {
        "shape_only": shape_only,
        "with_band": with_bands,
        "min_entries": min_entries,
        "low_content": low_content,
        "include_flow": with_flow,
    }
    entries: list[ComparisonEntry] = []
    skipped: list[str] = []
    all_sources: list[Source] = []
    for group in groups:
        all_sources.extend(s for s in group if s not in all_sources)
        prefix = f"{group[0].sample.name}/" if len(groups) > 1 else ""
        if pair is not None:
            for s in group:
                entry = _pair_entry(s, pair, kw, prefix=f"{s.label}: " if len(group) > 1 else "")
                entries.append(entry)
            continue
        if len(group) < 2:
            raise ResultsError(
                f"{group[0].folder}: only one sample ({group[0].sample.name!r}); give a second "
                "folder, or --pair X Y to compare two histograms of this run"
            )
        names = [
            h for h in group[0].sample.histograms if all(h in s.sample.histograms for s in group)
        ]
        if histograms:
            missing = [h for h in histograms if h not in names]
            if missing:
                raise ResultsError(f"histograms not present in every input: {', '.join(missing)}")
            names = list(histograms)
        for other in {h for s in group for h in s.sample.histograms} - set(names):
            if not histograms:
                skipped.append(f"{prefix}{other}: not present in every input")
        for h in names:
            hrs = [s.sample.histograms[h] for s in group]
            why = _incomparable(hrs)
            if why:
                skipped.append(f"{prefix}{h}: {why}")
                continue
            entries.append(_entry(f"{prefix}{h}", group, hrs, kw))
    if not entries:
        why = "; ".join(sorted(skipped)) or "the inputs hold no histograms"
        raise ResultsError(
            f"nothing to compare: no 1-D histogram with the same binning in every input ({why})"
        )
    note = next((s.note for s in all_sources if s.note), "")
    return ComparisonSet(all_sources, entries, shape_only, with_bands, note, sorted(skipped),
                         corner=_sqrt_s_corner(results))


def _sqrt_s_corner(results: Sequence[Any]) -> str:
    """``√s = 13 TeV`` when the inputs that record √s (results.json ``plot.sqrt_s_gev``) agree
    (no luminosity: comparisons are of cross sections or shapes, or of expected events whose
    luminosities may differ)."""
    from evtkin.output.style import sqrt_s_text

    values = []
    for r in results:
        rec = (getattr(r, "meta", None) or {}).get("plot") or {}
        v = rec.get("sqrt_s_gev") if isinstance(rec, Mapping) else None
        if isinstance(v, (int, float)) and v > 0:
            values.append(float(v))
    if values and max(values) - min(values) <= 1e-6 * max(values):
        return sqrt_s_text(values[0], None)
    return ""


def _incomparable(hrs: Sequence[Any]) -> str | None:
    if any(getattr(h, "ndim", len(h.axes)) != 1 for h in hrs):
        return "not 1-D (2-D histograms are not compared)"
    e0 = np.asarray(hrs[0].axes[0].edges, dtype=float)
    for h in hrs[1:]:
        e = np.asarray(h.axes[0].edges, dtype=float)
        if e.shape != e0.shape or not np.allclose(e, e0, rtol=1e-9, atol=0):
            return "different binning"
        if h.normalisation != hrs[0].normalisation:
            return f"different normalisation ({hrs[0].normalisation} vs {h.normalisation})"
    return None


def _entry(name: str, group: list[Source], hrs: list[Any], kw: dict[str, Any]) -> ComparisonEntry:
    datas, factor, notes = [], np.ones(1), []
    for s, hr in zip(group, hrs, strict=True):
        hd, factor, nt = hist_to_data(hr, s.label)
        datas.append(hd)
        notes.extend(nt)
    comps = []
    for hd in datas[1:]:
        c = compare_histograms(datas[0], hd, name=name, labels=(datas[0].label, hd.label), **kw)
        c.notes = (*c.notes, *notes)
        comps.append(c)
    return ComparisonEntry(
        name=name,
        reference=datas[0],
        others=datas[1:],
        comparisons=comps,
        display_factor=factor,
        x_label=_axis_label(hrs[0]),
        y_label=_y_label(hrs[0], bool(kw["shape_only"])),
        title=hrs[0].title or name,
    )


def _pair_entry(
    s: Source, pair: tuple[str, str], kw: dict[str, Any], prefix: str
) -> ComparisonEntry:
    hs = s.sample.histograms
    for h in pair:
        if h not in hs:
            raise ResultsError(
                f"{s.folder}: sample {s.sample.name!r} has no histogram {h!r}; "
                f"it has {', '.join(hs) or 'none'}"
            )
    hrs = [hs[pair[0]], hs[pair[1]]]
    why = _incomparable(hrs)
    if why:
        raise ResultsError(f"--pair {pair[0]} {pair[1]}: {why}")
    pseudo = [
        Source(f"{s.label}: {hrs[0].title or pair[0]}", s.folder, s.sample, s.note),
        Source(f"{s.label}: {hrs[1].title or pair[1]}", s.folder, s.sample, s.note),
    ]
    entry = _entry(f"{prefix}{pair[1]} vs {pair[0]}", pseudo, hrs, kw)
    entry.comparisons[0].notes = (
        *entry.comparisons[0].notes,
        "two histograms of one run: filled from the same events, so they are not independent; "
        "the tests assume independence",
    )
    return entry


# --------------------------------------------------------------------------------------------------
# plots


def plot_comparison(
    entry: ComparisonEntry, path: str | os.PathLike[str], *, pulls: bool = False, note: str = "",
    corner: str = "",
) -> None:
    """Write one PNG: overlaid histograms, ratio panel, optional pull panel, notice above.

    The look is the run plots' (:mod:`evtkin.output.style`): palette, no title, the notice
    above the frame, the legend where it covers no data, error bars of the samples side by side,
    log y when the contents span more than three decades. The ratio panel's range holds every
    finite ratio point and 1; each pull bar spans its bin exactly (several comparisons share
    the bin in equal parts); the x range is the histogram's edges.
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    from evtkin.output.plots import _offsets, _positions, _ratio_limits
    from evtkin.output.style import (
        apply_axes_style,
        auto_logy,
        colour_for,
        corner_texts,
        fold_multiplier,
        place_legend,
    )

    comps = entry.comparisons
    c0 = comps[0]
    sl = c0.inner
    edges = c0.edges
    fac = entry.display_factor[sl]
    nrows = 3 if pulls else 2
    ratios = [3.2, 1.0, 1.0][:nrows]
    fig, axes = plt.subplots(
        nrows, 1, sharex=True, figsize=(6.4, 6.2 + 1.4 * (nrows - 2)), layout="constrained",
        gridspec_kw={"height_ratios": ratios},
    )
    engine: Any = fig.get_layout_engine()
    engine.set(h_pad=0.02, hspace=0.0)
    ax = axes[0]
    fracs = _offsets(len(comps) + 1)

    ref_v = c0.values_a[sl] * fac
    ref_e = np.sqrt(c0.variances_a[sl]) * fac
    logy = auto_logy([ref_v] + [c.values_b[sl] * fac for c in comps])
    if logy:
        ax.set_yscale("log")
    floor = 1e-300 if logy else 0.0
    handles: list[Any] = []
    labels: list[str] = []
    skyline = ref_v + ref_e
    has_band = c0.band_down is not None and c0.band_up is not None
    ref_line = ax.stairs(ref_v, edges, color=colour_for(0), linewidth=1.6, baseline=None)
    if has_band:
        bd, bu = c0.band_down[sl] * fac, c0.band_up[sl] * fac  # type: ignore[index]
        band = ax.stairs(bu, edges, baseline=np.maximum(bd, floor), fill=True,
                         color=colour_for(0), alpha=0.25, linewidth=0)
        handles.append((band, ref_line))
        labels.append(f"Reference: {c0.label_a}, with band")
        skyline = np.maximum(skyline, bu)
    else:
        handles.append(ref_line)
        labels.append(f"Reference: {c0.label_a}")
    ax.errorbar(_positions(edges, fracs[0], False), ref_v, yerr=ref_e, fmt="none",
                ecolor=colour_for(0), elinewidth=1)
    for k, c in enumerate(comps, start=1):
        col = colour_for(k)
        v = c.values_b[sl] * fac
        e = np.sqrt(c.variances_b[sl]) * fac
        chi = c.chi2
        handles.append(ax.stairs(v, edges, color=col, linewidth=1.6, baseline=None))
        labels.append(f"{c.label_b}: χ²/ndf = {chi.statistic:.3g}/{chi.ndf}, p = {chi.p_text}")
        ax.errorbar(_positions(edges, fracs[k], False), v, yerr=e, fmt="none", ecolor=col,
                    elinewidth=1)
        skyline = np.maximum(skyline, v + e)
    shown = np.concatenate([ref_v] + [c.values_b[sl] * fac for c in comps])
    top = float(np.nanmax(skyline)) if np.any(np.isfinite(skyline)) else 1.0
    if logy:
        pos = shown[shown > 0]
        lo = float(pos.min()) if pos.size else 1e-3
        ax.set_ylim(10 ** (math.log10(lo) - 0.3), 10 ** (math.log10(max(top, lo)) + 0.35))
    else:
        ax.set_ylim(min(0.0, float(np.nanmin(shown)) * 1.1), top * 1.08 if top > 0 else 1.0)
    apply_axes_style(ax, ylabel=display_label(entry.y_label))
    ax.tick_params(labelbottom=False)
    corner_texts(ax, note=note, right=corner)

    rx = axes[1]
    with np.errstate(divide="ignore", invalid="ignore"):
        safe = np.where(ref_v != 0, ref_v, np.nan)
        if has_band:
            lo_b, hi_b = bd / safe, bu / safe
        else:
            lo_b, hi_b = (ref_v - ref_e) / safe, (ref_v + ref_e) / safe
    okb = np.isfinite(lo_b) & np.isfinite(hi_b)
    rx.stairs(np.where(okb, hi_b, 1.0), edges, baseline=np.where(okb, lo_b, 1.0), fill=True,
              color=colour_for(0), alpha=0.25, linewidth=0)
    rx.axhline(1.0, color=colour_for(0), linewidth=1)
    points = []
    for k, c in enumerate(comps, start=1):
        r, re_ = c.ratio[sl], c.ratio_err[sl]
        fin = np.isfinite(r)  # a bar only with its point
        rx.errorbar(_positions(edges, fracs[k], False)[fin], r[fin],
                    yerr=np.where(np.isfinite(re_), re_, 0.0)[fin], fmt="o", ms=3,
                    color=colour_for(k), elinewidth=1)
        points.append(r[fin])
    rx.set_ylim(*_ratio_limits(points, [lo_b[okb], hi_b[okb]]))
    rx.set_ylabel("Ratio to ref.", fontsize=10)
    if pulls:
        px = axes[2]
        width = np.diff(edges) / len(comps)
        for k, c in enumerate(comps):
            px.bar(edges[:-1] + k * width, np.nan_to_num(c.pull[sl]), width=width,
                   color=colour_for(k + 1), align="edge", linewidth=0)
        for y in (-2, 2):
            px.axhline(y, color="0.6", linewidth=0.8, linestyle="--")
        px.axhline(0, color="0.3", linewidth=0.8)
        px.set_ylabel("Pull", fontsize=10)
        lim = max(3.0, float(np.nanmax(np.abs(np.concatenate(
            [np.nan_to_num(c.pull[sl]) for c in comps])))) * 1.1)
        px.set_ylim(-lim, lim)
    for a in axes[1:]:
        apply_axes_style(a)
    for a in axes[1:-1]:
        a.tick_params(labelbottom=False)
    axes[-1].set_xlabel(display_label(entry.x_label), fontsize=12)
    axes[-1].set_xlim(edges[0], edges[-1])
    fig.align_ylabels(axes)
    ylab = display_label(entry.y_label)
    fold_multiplier(ax, ylab)
    place_legend(ax, edges, skyline, handles=handles, labels=labels, fontsize=8)
    fold_multiplier(ax, ylab)
    fig.set_layout_engine("none")  # laid out by place_legend
    _save_atomic(fig, Path(path))
    plt.close(fig)


def _save_atomic(fig: Any, path: Path) -> None:
    with atomic_path(path) as tmp:
        fig.savefig(tmp, dpi=110)


# --------------------------------------------------------------------------------------------------
# summary tables


def summary_rows(cs: ComparisonSet) -> list[dict[str, Any]]:
    """One row per comparison, sorted by the headline p-value ascending (NaN last)."""
    rows = []
    for e, c in cs.comparisons():
        chi = c.chi2
        rows.append(
            {
                "histogram": e.name,
                "reference": c.label_a,
                "other": c.label_b,
                "method": chi.method,
                "mode": chi.mode,
                "chi2": chi.statistic,
                "ndf": chi.ndf,
                "p_value": chi.p_value,
                "log10_p": chi.log10_p,
                "p_shape": c.chi2_shape.p_value,
                "p_absolute": c.chi2_absolute.p_value,
                "ks_distance": c.ks.distance,
                "ks_p_approx": c.ks.p_value_approx,
                "bins_skipped": len(chi.skipped_bins),
                "bins_merged": sum(len(g) for g in chi.merged_bins),
                "merged": merged_text(c, chi.merged_bins),
                "notes": "; ".join(dict.fromkeys((*chi.notes, *c.notes))),
            }
        )
    return rows


def merged_text(c: HistComparison, groups: Sequence[Sequence[int]]) -> str:
    """The merged bin groups as x ranges: ``"60-68; 112-120"`` (empty when nothing merged).

    Group indices refer to the bins the test used: the in-range bins, or with the flow bins
    included, index 0 = underflow."""
    if not groups:
        return ""
    with_flow = any("under/overflow" in n for n in c.notes)
    lo = np.concatenate([[-np.inf], c.edges]) if with_flow else c.edges[:-1]
    hi = np.concatenate([c.edges, [np.inf]]) if with_flow else c.edges[1:]
    return "; ".join(f"{lo[g[0]]:g}-{hi[g[-1]]:g}" for g in groups)


def _fmt(v: Any) -> str:
    if isinstance(v, float):
        return "nan" if not np.isfinite(v) else f"{v:.4g}"
    return str(v)


def summary_text(cs: ComparisonSet) -> str:
    """Aligned text table of :func:`summary_rows` (without the notes column)."""
    cols = [c for c in SUMMARY_COLUMNS if c not in ("notes", "log10_p", "merged")]
    rows = [[p_text(r[c], r["log10_p"]) if c == "p_value" else _fmt(r[c]) for c in cols]
            for r in summary_rows(cs)]
    widths = [max([len(c)] + [len(r[i]) for r in rows]) for i, c in enumerate(cols)]
    lines = ["  ".join(c.ljust(w) for c, w in zip(cols, widths, strict=True)).rstrip()]
    lines.append("  ".join("-" * w for w in widths))
    lines += ["  ".join(v.ljust(w) for v, w in zip(r, widths, strict=True)).rstrip() for r in rows]
    mode = "shape-only (unit area)" if cs.shape_only else "absolute (normalisations compared)"
    head = [f"# evtkin comparison, {mode}; reference: {cs.sources[0].label if cs.sources else '-'}"]
    if cs.note:
        head.append(f"# {cs.note}")
    tail = [f"# merged bins of {r['histogram']} ({r['other']}): {r['merged']}"
            for r in summary_rows(cs) if r["merged"]]
    tail += [f"# skipped: {s}" for s in cs.skipped]
    return "\n".join(head + lines + tail) + "\n"


def write_summary(cs: ComparisonSet, out: str | os.PathLike[str]) -> dict[str, Path]:
    """Write summary.txt, summary.csv and summary.json into ``out``; return their paths."""
    outp = Path(out)
    outp.mkdir(parents=True, exist_ok=True)
    rows = summary_rows(cs)
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=SUMMARY_COLUMNS, lineterminator="\n")
    w.writeheader()
    for r in rows:
        w.writerow({k: _fmt(v) for k, v in r.items()})
    doc = {
        "format": "evtkin-comparison",
        "format_version": 1,
        "shape_only": cs.shape_only,
        "with_bands": cs.with_bands,
        "note": cs.note,
        "sources": [
            {"label": s.label, "folder": s.folder, "sample": s.sample.name} for s in cs.sources
        ],
        "skipped": cs.skipped,
        "summary": [
            {k: (None if isinstance(v, float) and not np.isfinite(v) else v) for k, v in r.items()}
            for r in rows
        ],
        "comparisons": [dict(c.to_dict(), plot=e.plot) for e, c in cs.comparisons()],
    }
    paths = {
        "txt": outp / "summary.txt",
        "csv": outp / "summary.csv",
        "json": outp / "summary.json",
    }
    _write_text(paths["txt"], summary_text(cs))
    _write_text(paths["csv"], buf.getvalue())
    _write_text(paths["json"], json.dumps(doc, indent=1, allow_nan=False) + "\n")
    return paths


def _write_text(path: Path, text: str) -> None:
    atomic_write_text(path, text)
