"""Plots are written as valid PNG and PDF files (magic bytes: PNG spec, PDF 1.x header)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from evtkin.hists.bands import envelope
from evtkin.hists.fill import AxisSpec, HistAccumulator, HistSpec
from evtkin.hists.normalise import normalise
from evtkin.output.plots import plot_hist1d, write_plots
from evtkin.output.tables import Results, SampleResult, hist_result

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"  # PNG specification, file signature
PDF_MAGIC = b"%PDF-"  # PDF reference, file header


def _sample(name: str, shift: float) -> SampleResult:
    rng = np.random.default_rng(int(shift * 10))
    x = rng.normal(91.0 + shift, 5.0, 2000)
    y = rng.normal(0, 1, 2000)
    w = np.full(2000, 0.5)
    wv = w[:, None] * rng.uniform(0.9, 1.1, (2000, 2))
    a = HistAccumulator(HistSpec("mll", (AxisSpec.regular(20, 70, 110, name="mll", label="m_ll",
                                                          unit="GeV"),), "Dilepton mass"),
                        ("u", "d"))
    b = HistAccumulator(HistSpec("mll_y", (a.spec.axes[0], AxisSpec.regular(4, -2, 2, name="y")),
                                 "mass vs y"))
    a.fill(x, weight=w, variations=wv)
    b.fill(x, y, weight=w)
    na = normalise(a, "xsec_per_bin")
    return SampleResult(name, name.upper(), histograms={
        "mll": hist_result(na, {"scale": envelope(na.rows[0], na.rows[1:])}),
        "mll_y": hist_result(normalise(b, "xsec_per_bin")),
    })


def test_write_plots(tmp_path: Path) -> None:
    res = Results({"a": _sample("a", 0.0), "b": _sample("b", 1.5)})
    files = write_plots(tmp_path, res, note="toy data — not a physics prediction")
    names = sorted(f.name for f in files)
    assert names == ["mll.pdf", "mll.png", "mll_y__a.pdf", "mll_y__a.png", "mll_y__b.pdf",
                     "mll_y__b.png"]
    for f in files:
        head = f.read_bytes()[:8]
        assert head.startswith(PNG_MAGIC if f.suffix == ".png" else PDF_MAGIC)
        assert f.stat().st_size > 5000
    assert not list((tmp_path / "plots").glob(".*"))


def test_plots_drawn_in_processes_are_the_same_files(tmp_path: Path) -> None:
    # three samples: one overlaid 1-D figure and three 2-D maps, enough for the process pool
    res = Results({k: _sample(k, d) for k, d in (("a", 0.0), ("b", 1.5), ("c", 3.0))})
    one = write_plots(tmp_path / "one", res, note="toy", formats=("png", "pdf"), workers=1)
    two = write_plots(tmp_path / "two", res, note="toy", formats=("png", "pdf"), workers=2)
    assert len(one) == 8
    assert [f.name for f in two] == [f.name for f in one]  # same order
    for a, b in zip(one, two, strict=True):
        assert b.parent == tmp_path / "two" / "plots"
        assert a.read_bytes() == b.read_bytes(), a.name  # PDFs carry no creation date


def test_draw_all_keeps_task_order_and_uses_other_processes() -> None:
    import os

    from evtkin.output.drawing import MIN_FIGURES_FOR_PROCESSES, draw_all

    n = MIN_FIGURES_FOR_PROCESSES + 2
    assert draw_all([(pow, (2, k), {}) for k in range(n)], workers=2) == [2**k for k in range(n)]
    pids = draw_all([(os.getpid, (), {})] * n, workers=2)
    assert os.getpid() not in pids
    assert draw_all([(os.getpid, (), {})] * n, workers=1) == [os.getpid()] * n
    # too few figures to pay for starting processes: drawn here
    few = MIN_FIGURES_FOR_PROCESSES - 1
    assert draw_all([(os.getpid, (), {})] * few, workers=2) == [os.getpid()] * few


def test_plot_cores_follow_the_executor() -> None:
    from evtkin.run.executors import (
        ProcessExecutor,
        SerialExecutor,
        available_cores,
        local_cores,
    )

    assert local_cores(SerialExecutor(read_threads=0)) == 1  # --jobs 1: one core, plots too
    assert local_cores(ProcessExecutor(1)) == 1
    assert local_cores(ProcessExecutor(64)) == available_cores()
    assert local_cores(None) == available_cores()  # the default run uses reader threads
    assert local_cores(object()) == 1


def test_plot_rejects_different_binning(tmp_path: Path) -> None:
    s = _sample("a", 0.0)
    h = s.histograms["mll"]
    other = hist_result(normalise(HistAccumulator(HistSpec("mll", (
        AxisSpec.regular(10, 70, 110, name="mll"),))), "raw"))
    with pytest.raises(ValueError, match="different binning"):
        plot_hist1d(tmp_path / "x", [("a", h), ("b", other)])


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("m_{jjb} [GeV]", "$m_{jjb}$ [GeV]"),
        ("p_T^{t,had} [GeV]", "$p_T^{t,had}$ [GeV]"),
        ("m_{tt̄} [GeV]", r"$m_{t\bar{t}}$ [GeV]"),  # the combining bar survives as \bar
        ("cos θ*", "cos θ*"),  # nothing to render
        ("top_pt", "top_pt"),  # an identifier, not a subscript
        ("$m_{ll}$", "$m_{ll}$"),  # already mathtext
        # the d of a differential stays upright, as in dσ (common practice)
        ("dσ/dm_{ℓℓ} [pb/GeV]", "dσ/d$m_{ℓℓ}$ [pb/GeV]"),
        ("d²σ/(d\u2009m_{ℓℓ} d\u2009cos θ*)", "d²σ/(d\u2009$m_{ℓℓ}$ d\u2009cos θ*)"),
        ("N_{b-tag}", "$N_{b\u2010tag}$"),  # a hyphen, not a minus sign between spaces
    ],
)
def test_display_label_renders_tex_scripts(text: str, expected: str) -> None:
    from evtkin.output.plots import display_label

    assert display_label(text) == expected


def test_display_label_leaves_unparsable_text_alone() -> None:
    from evtkin.output.plots import display_label

    # an unbalanced mathtext command would make matplotlib fail at draw time
    assert display_label(r"m_{\frac}") == r"m_{\frac}"
