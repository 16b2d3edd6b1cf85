"""What the 1-D figures show, read back from matplotlib's own geometry.

The stack's top is the bin-by-bin sum of its samples; the legend's box (``get_window_extent``)
overlaps no drawn bar, band, error bar or point (their data transformed to display
coordinates); the notice above the frame does not meet the legend; two samples' error bars sit
side by side; the ratio panel's range includes 1; log y is chosen for > 3 decades.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import matplotlib
import numpy as np
import pytest

from evtkin.output.plots import Curve, PlotOptions, figure_hist1d, stack_total

matplotlib.use("Agg", force=True)
import matplotlib.pyplot as plt
from matplotlib.collections import LineCollection
from matplotlib.patches import StepPatch

EDGES = np.linspace(60.0, 120.0, 31)
CENTRES = 0.5 * (EDGES[1:] + EDGES[:-1])
NOTE = "toy data — not a physics prediction"


def _curve(label: str, values: np.ndarray, kind: str, rel_band: float = 0.0,
           syst: np.ndarray | None = None) -> Curve:
    err = np.sqrt(np.abs(values)) * 0.5
    band = (values * (1 - rel_band), values * (1 + rel_band)) if rel_band else (None, None)
    return Curve(label, EDGES, values.astype(float), err, kind=kind, band_down=band[0],
                 band_up=band[1], band_label="total" if rel_band else "", syst=syst)


def _peak(scale: float) -> np.ndarray:
    return scale * (20.0 + 1000.0 / (1.0 + ((CENTRES - 91.0) / 3.0) ** 2))


def _falling(scale: float) -> np.ndarray:
    return scale * 1e5 * np.exp(-(CENTRES - 60.0) / 5.0)


def _flat(scale: float) -> np.ndarray:
    return scale * np.full(CENTRES.size, 100.0)


CASES: dict[str, tuple[list[Curve], PlotOptions]] = {
    "stack + points, peaked": ([
        _curve("tt̄ (toy)", _flat(0.3), "stack", 0.1),
        _curve("Drell–Yan (toy)", _peak(1.0), "stack", 0.05),
        _curve("toy measured", np.round(_peak(1.0) + _flat(0.3)), "points",
               syst=0.03 * (_peak(1.0) + _flat(0.3)))], PlotOptions()),
    "stack + points, falling, log y": ([
        _curve("background", _falling(0.2), "stack", 0.1),
        _curve("signal", _falling(1.0), "stack"),
        _curve("toy measured", np.round(_falling(1.2)), "points")], PlotOptions()),
    "two flat overlays (legend needs headroom)": ([
        _curve("sample A", _flat(1.0), "line", 0.1),
        _curve("sample B", _flat(1.05), "line")], PlotOptions(logy=False)),
    "rising overlays": ([
        _curve("sample A", _flat(1.0) * np.linspace(0.2, 3.0, CENTRES.size), "line"),
        _curve("sample B", _flat(1.0) * np.linspace(0.25, 3.1, CENTRES.size), "line"),
        _curve("sample C", _flat(1.0) * np.linspace(0.3, 2.8, CENTRES.size), "line")],
        PlotOptions()),
}


def _figure(name: str) -> Any:
    curves, opts = CASES[name]
    return figure_hist1d(curves, x_label="m_{ℓℓ} [GeV]", y_label="Events / 2 GeV",
                         note=NOTE, corner="√s = 13 TeV, 140 fb⁻¹", options=opts)


def _rects_of(ax: Any) -> Iterator[tuple[float, float, float, float]]:
    """Display-space rectangles covering everything drawn on ``ax``: each bin of a step patch
    from its baseline (0 for lines) to its top, each error-bar segment, each marker."""
    to_disp = ax.transData.transform
    for p in ax.patches:
        if not isinstance(p, StepPatch):
            continue
        values, edges, baseline = p.get_data()
        base = np.broadcast_to(0.0 if baseline is None else baseline, values.shape)
        for lo, hi, v, b in zip(edges[:-1], edges[1:], values, base, strict=True):
            if not np.isfinite(v):
                continue
            (x0, y0), (x1, y1) = to_disp([[lo, max(min(v, b), 1e-300)], [hi, max(v, b)]])
            yield x0, x1, min(y0, y1), max(y0, y1)
    for coll in ax.collections:
        if isinstance(coll, LineCollection):
            for seg in coll.get_segments():
                d = to_disp(seg)
                yield d[:, 0].min(), d[:, 0].max(), d[:, 1].min(), d[:, 1].max()
    for line in ax.lines:
        if line.get_marker() not in (None, "None", "", " "):
            r = line.get_markersize() / 2 * ax.figure.dpi / 72
            for x, y in to_disp(line.get_xydata()):
                yield x - r, x + r, y - r, y + r


def _overlaps(a: tuple[float, float, float, float], b: Any) -> bool:
    return a[0] < b.x1 and a[1] > b.x0 and a[2] < b.y1 and a[3] > b.y0


@pytest.mark.parametrize("name", list(CASES))
def test_legend_covers_nothing_drawn_and_not_the_notice(name: str) -> None:
    fig = _figure(name)
    try:
        fig.draw_without_rendering()
        ax = fig.axes[0]
        leg = ax.get_legend()
        assert leg is not None
        box = leg.get_window_extent()
        rects = list(_rects_of(ax))
        assert len(rects) > 30  # the check sees the drawn bins
        hits = [r for r in rects if _overlaps(r, box)]
        assert hits == [], f"{name}: legend overlaps {len(hits)} drawn pieces"
        notice = [t for t in ax.texts if t.get_text() == NOTE]
        assert len(notice) == 1
        nb = notice[0].get_window_extent()
        assert not (nb.x0 < box.x1 and nb.x1 > box.x0 and nb.y0 < box.y1 and nb.y1 > box.y0)
        # the legend lies inside the frame
        frame = ax.get_window_extent()
        assert frame.x0 <= box.x0
        assert box.x1 <= frame.x1
        assert frame.y0 <= box.y0
        assert box.y1 <= frame.y1
    finally:
        plt.close(fig)


def test_stacked_total_is_the_sum_of_its_samples() -> None:
    curves = CASES["stack + points, peaked"][0]
    stacked = [c for c in curves if c.kind == "stack"]
    total, dn, up = stack_total(stacked)
    np.testing.assert_array_equal(total, stacked[0].values + stacked[1].values)
    # MC statistics and bands of the samples in quadrature (independent samples)
    expect = np.sqrt(sum(c.errors**2 + (c.band_up - c.values) ** 2 for c in stacked))
    np.testing.assert_allclose(up, expect, rtol=1e-12)
    np.testing.assert_allclose(dn, expect, rtol=1e-12)
    fig = _figure("stack + points, peaked")
    try:
        filled = [p for p in fig.axes[0].patches if isinstance(p, StepPatch) and p.get_fill()
                  and p.get_hatch() is None]
        # drawn bottom first: the second sample sits on the first, its top is the sum
        low, high = filled[0].get_data(), filled[1].get_data()
        np.testing.assert_allclose(low.values, stacked[0].values, rtol=1e-12)
        np.testing.assert_allclose(high.baseline, stacked[0].values, rtol=1e-12)
        np.testing.assert_allclose(high.values, total, rtol=1e-12)
        hatched = [p for p in fig.axes[0].patches if isinstance(p, StepPatch) and p.get_hatch()]
        np.testing.assert_allclose(hatched[0].get_data().values, total + up, rtol=1e-12)
    finally:
        plt.close(fig)


def test_error_bars_of_two_samples_sit_side_by_side_and_ratio_range_has_one() -> None:
    fig = _figure("two flat overlays (legend needs headroom)")
    try:
        ax, rx = fig.axes[0], fig.axes[1]
        xs = [np.array([seg[0][0] for seg in c.get_segments()]) for c in ax.collections
              if isinstance(c, LineCollection)]
        assert len(xs) == 2
        assert np.all(xs[0] < xs[1])  # in every bin, the first sample's bar left of the second's
        assert np.all((xs[0] > EDGES[:-1]) & (xs[1] < EDGES[1:]))  # both inside their bin
        lo, hi = rx.get_ylim()
        assert lo < 1.0 < hi
        assert ax.get_xlim() == (EDGES[0], EDGES[-1])
        assert ax.get_yscale() == "linear"
    finally:
        plt.close(fig)


def test_log_y_when_the_contents_span_more_than_three_decades() -> None:
    fig = _figure("stack + points, falling, log y")
    try:
        assert fig.axes[0].get_yscale() == "log"
    finally:
        plt.close(fig)
    fig = _figure("stack + points, peaked")  # 20 .. 1000: under three decades
    try:
        assert fig.axes[0].get_yscale() == "linear"
    finally:
        plt.close(fig)


def test_multiplier_is_written_into_the_axis_label_and_no_title_by_default() -> None:
    big = [_curve("sample A", _flat(3.0e5), "line"), _curve("sample B", _flat(3.1e5), "line")]
    fig = figure_hist1d(big, x_label="m [GeV]", y_label="Events / 2 GeV", title="Some title",
                        note=NOTE, options=PlotOptions(logy=False))
    try:
        fig.draw_without_rendering()
        ax = fig.axes[0]
        # 3·10⁷ per bin on a linear axis: the ticks read 0 .. 4 and the label says ×10⁷; no
        # offset text "1e7" above the frame, where the notice is
        off = ax.yaxis.get_offset_text()
        assert not (off.get_visible() and off.get_text())
        assert ax.get_ylabel().startswith("Events / 2 GeV  (")
        assert "times" in ax.get_ylabel()
        assert "10^{7}" in ax.get_ylabel()
        # the report's caption carries the title: none in the figure unless asked for
        assert ax.get_title() == ""
        assert fig._suptitle is None or fig._suptitle.get_text() == ""
    finally:
        plt.close(fig)
    fig = figure_hist1d(big, x_label="m [GeV]", y_label="Events", title="Some title",
                        options=PlotOptions(title=True))
    try:
        texts = [fig._suptitle.get_text() if fig._suptitle else "", fig.axes[0].get_title()]
        assert "Some title" in texts
    finally:
        plt.close(fig)


def test_corner_text_sits_above_the_frame_on_the_right() -> None:
    fig = _figure("stack + points, peaked")
    try:
        fig.draw_without_rendering()
        ax = fig.axes[0]
        (corner,) = [t for t in ax.texts if t.get_text() == "√s = 13 TeV, 140 fb⁻¹"]
        box, frame = corner.get_window_extent(), ax.get_window_extent()
        assert box.y0 >= frame.y1 - 1  # above the frame: it covers no data and no legend
        assert abs(box.x1 - frame.x1) < 2  # right-aligned with the frame
    finally:
        plt.close(fig)


@pytest.mark.parametrize("label", [
    "tt̄ (toy)",
    "tt̄ + jets, toy shower, dressed leptons (5.2 M events)",  # beside the note: too long
    "tt̄ + jets, toy shower with dressed leptons and B hadrons, 5.2 M events, √s = 13.6 TeV",
])
def test_corner_texts_never_touch_and_stay_in_the_figure(label: str) -> None:
    from evtkin.output.style import corner_texts

    fig, ax = plt.subplots(figsize=(6.4, 5.0), layout="constrained")
    try:
        mesh = ax.pcolormesh(np.arange(4.0), np.arange(3.0), np.ones((2, 3)))
        fig.colorbar(mesh, ax=ax)
        ax.set_xlabel("x")
        ax.set_ylabel("y")
        corner_texts(ax, note=NOTE, right=label)
        fig.draw_without_rendering()
        note_t, right_t = ax.texts
        a, b = note_t.get_window_extent(), right_t.get_window_extent()
        frame, page = ax.get_window_extent(), fig.bbox
        overlap_x = min(a.x1, b.x1) - max(a.x0, b.x0)
        overlap_y = min(a.y1, b.y1) - max(a.y0, b.y0)
        assert overlap_x <= 0 or overlap_y <= 0  # common practice: texts never overprint
        for box in (a, b):
            assert box.y0 >= frame.y1 - 1  # above the frame
            assert page.x0 <= box.x0
            assert box.x1 <= page.x1 + 1
            assert box.y1 <= page.y1 + 1  # inside the page
        if len(label) < 20:  # room for both: on one line
            assert abs(a.y0 - b.y0) < 1
        else:  # the note one line higher, still left-aligned with the frame
            assert a.y0 >= b.y1 - 1
            assert abs(a.x0 - frame.x0) < 2
    finally:
        plt.close(fig)
