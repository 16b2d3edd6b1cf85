"""Comparison of results folders: conversion, pairing, summary tables, plots, driver and command.

The inputs are built here in the shape documented in docs/results-format.md (the reader's
dataclasses, duck-typed), from an invented toy scenario: a "standard" and a "deformed" sample whose
weights differ only in the tail of a mass-like variable.
"""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import numpy as np
import pytest

from evtkin.compare import chi2_weighted
from evtkin.output.compare_plots import (
    compare_loaded,
    hist_to_data,
    plot_comparison,
    summary_rows,
    summary_text,
    write_summary,
)

NOTE = "toy data — not a physics prediction"
MASS_EDGES = np.linspace(350.0, 1500.0, 24)
PT_EDGES = np.linspace(0.0, 300.0, 16)


def _flow_hist(x: np.ndarray, w: np.ndarray, edges: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    full = np.concatenate([[-np.inf], edges, [np.inf]])
    return np.histogram(x, full, weights=w)[0], np.histogram(x, full, weights=w * w)[0]


def make_hist(
    name: str,
    x: np.ndarray,
    w: np.ndarray,
    edges: np.ndarray,
    *,
    norm: str = "xsec_per_bin",
    band: float | None = None,
) -> SimpleNamespace:
    """A ``HistResult`` as documented: flow included, values after normalisation."""
    v, v2 = _flow_hist(x, w, edges)
    bands: dict[str, Any] = {}
    if norm == "xsec_per_bin":
        width = np.concatenate([[1.0], np.diff(edges), [1.0]])
        v, v2 = v / width, v2 / width**2
    if band is not None:
        bands["scale"] = SimpleNamespace(
            method="envelope7", members=[], down=v * (1 - band), up=v * (1 + band)
        )
    axis = SimpleNamespace(name=name, label=name, unit="GeV", kind="regular", edges=edges)
    return SimpleNamespace(
        name=name,
        title=f"toy {name}",
        ndim=1,
        axes=[axis],
        normalisation=norm,
        y_label=f"dσ/d{name}",
        y_unit="pb/GeV",
        entries=len(x),
        values=v,
        variances=v2,
        bands=bands,
        norm_includes_flow=True,
        variation_values=None,
    )


def make_sample(name: str, seed: int, deform: float, n: int = 20000) -> SimpleNamespace:
    rng = np.random.default_rng(seed)
    m = 350.0 + rng.exponential(180.0, n)
    pt = rng.gamma(3.0, 25.0, n)
    w = np.full(n, 800.0 / n) * rng.uniform(0.5, 1.5, n)  # pb per event, varying weights
    w_m = w * (1.0 + deform * ((m - 350.0) / 600.0) ** 2)  # deformation grows in the tail
    h = {
        "m_pair": make_hist("m_pair", m, w_m, MASS_EDGES, band=0.1),
        "pt_lep": make_hist("pt_lep", pt, w, PT_EDGES, band=0.1),
    }
    h2 = SimpleNamespace(name="map2d", ndim=2, axes=[h["pt_lep"].axes[0]] * 2, title="2-D")
    h["map2d"] = h2
    cut = [
        {
            "step": "all events",
            "n_raw": n,
            "sum_w": float(w.sum()),
            "sum_w2": float((w**2).sum()),
            "eff_step": 1.0,
            "eff_cum": 1.0,
        },
        {
            "step": "m_pair > 400",
            "n_raw": int((m > 400).sum()),
            "sum_w": float(w[m > 400].sum()),
            "sum_w2": float((w[m > 400] ** 2).sum()),
            "eff_step": 0.8,
            "eff_cum": 0.8,
        },
    ]
    return SimpleNamespace(
        name=name,
        label=f"{name} toy",
        luminosity_fb=None,
        xsec={
            "sigma_pb": float(w.sum()),
            "sigma_err_pb": float(np.sqrt((w**2).sum())),
            "n_events": n,
            "n_eff": float(w.sum() ** 2 / (w**2).sum()),
        },
        variations=[],
        histograms=h,
        cutflow=cut,
    )


def make_results(*samples: SimpleNamespace) -> SimpleNamespace:
    return SimpleNamespace(
        meta={"format": "evtkin-results", "format_version": 1, "note": NOTE},
        samples={s.name: s for s in samples},
    )


def test_xsec_per_bin_converted_back_to_contents() -> None:
    # docs/results-format.md: xsec_per_bin stores Σw/width in range and plain Σw in the flow bins
    rng = np.random.default_rng(1)
    x = rng.uniform(300, 1600, 500)
    w = rng.uniform(0.1, 2.0, 500)
    hd, factor, notes = hist_to_data(make_hist("m", x, w, MASS_EDGES), "A")
    sw, sw2 = _flow_hist(x, w, MASS_EDGES)
    np.testing.assert_allclose(hd.values, sw, rtol=1e-12)
    np.testing.assert_allclose(hd.variances, sw2, rtol=1e-12)
    np.testing.assert_allclose(factor[1:-1], 1 / np.diff(MASS_EDGES))
    assert factor[0] == factor[-1] == 1.0
    assert notes == []


def test_unit_area_variances_recovered_for_the_tests() -> None:
    # unit_area stores p_k and Var(p_k) = [(1-2p_k)s_k² + p_k² S]/W² (REFERENCES §2.11); the
    # per-bin s_k²/W² must come back, so that the WW shape test equals the one on raw Σw, Σw²
    rng = np.random.default_rng(2)
    x1, w1 = rng.exponential(1.0, 3000), rng.uniform(0.2, 1.8, 3000)
    x2, w2 = rng.exponential(1.1, 2000), rng.uniform(0.2, 1.8, 2000)
    edges = np.linspace(0.0, 4.0, 9)
    raw = [_flow_hist(x1, w1, edges), _flow_hist(x2, w2, edges)]
    hds = []
    for (sw, sw2), lab in zip(raw, "AB", strict=True):
        total, big_s = sw.sum(), sw2.sum()
        p = sw / total
        var = ((1 - 2 * p) * sw2 + p * p * big_s) / total**2
        h = make_hist("x", x1, w1, edges, norm="raw")
        h.normalisation, h.values, h.variances = "unit_area", p, var
        hd, _, notes = hist_to_data(h, lab)
        assert notes == []
        np.testing.assert_allclose(hd.variances, sw2 / total**2, rtol=1e-8)
        hds.append(hd)
    direct = chi2_weighted(*raw[0], *raw[1], mode="shape")
    recovered = chi2_weighted(
        hds[0].values, hds[0].variances, hds[1].values, hds[1].variances, mode="shape"
    )
    assert recovered.statistic == pytest.approx(direct.statistic, rel=1e-7)


def test_deformed_tail_detected_and_unchanged_distribution_not() -> None:
    std = make_results(make_sample("standard", 10, 0.0))
    dfm = make_results(make_sample("standard", 11, 0.6))  # same sample name, another folder
    cs = compare_loaded([std, dfm], ["run_std", "run_dfm"], shape_only=True)
    names = [e.name for e in cs.entries]
    assert names == ["m_pair", "pt_lep"]
    assert any("map2d" in s and "2-D" in s for s in cs.skipped)
    rows = summary_rows(cs)
    # sorted by p-value: the deformed mass comes first and is rejected, pt_lep is compatible
    assert rows[0]["histogram"] == "m_pair"
    assert rows[0]["p_value"] < 1e-4
    assert rows[1]["histogram"] == "pt_lep"
    assert rows[1]["p_value"] > 0.01
    assert rows[0]["method"] == "weighted vs weighted"
    assert rows[0]["mode"] == "shape"
    # ratio in the last bins is above one (the deformation grows with the mass)
    c = cs.entries[0].comparisons[0]
    assert np.nanmean(c.ratio[-6:-1]) > 1.2
    assert cs.note == NOTE
    # absolute mode sees the overall rise of the cross section too
    cs_abs = compare_loaded([std, dfm], ["run_std", "run_dfm"])
    assert cs_abs.entries[0].comparisons[0].chi2.mode == "absolute"
    assert summary_rows(cs_abs)[0]["p_value"] < 1e-4


def test_same_distribution_two_folders_compatible_in_both_modes() -> None:
    a = make_results(make_sample("standard", 20, 0.0))
    b = make_results(make_sample("standard", 21, 0.0))
    for shape in (False, True):
        rows = summary_rows(compare_loaded([a, b], ["a", "b"], shape_only=shape))
        assert all(r["p_value"] > 1e-3 for r in rows), rows


def test_samples_of_one_folder_and_pair_mode() -> None:
    res = make_results(make_sample("standard", 30, 0.0), make_sample("deformed", 31, 0.6))
    cs = compare_loaded([res], ["run"])
    assert [s.label for s in cs.sources] == ["standard toy", "deformed toy"]
    assert summary_rows(cs)[0]["histogram"] == "m_pair"
    # two histograms of one run (here: two histograms with the same binning)
    sample = res.samples["standard"]
    sample.histograms["m_reco"] = make_hist(
        "m_reco",
        350 + np.random.default_rng(5).exponential(180.0, 20000),
        np.full(20000, 0.04),
        MASS_EDGES,
    )
    pcs = compare_loaded([res], ["run"], samples=["standard"], pair=("m_pair", "m_reco"))
    assert len(pcs.entries) == 1
    assert pcs.entries[0].name == "m_reco vs m_pair"
    assert any("not independent" in n for n in pcs.entries[0].comparisons[0].notes)
    from evtkin.errors import ResultsError

    with pytest.raises(ResultsError, match="no histogram 'nope'"):
        compare_loaded([res], ["run"], pair=("m_pair", "nope"))
    with pytest.raises(ResultsError, match="only one sample"):
        compare_loaded([make_results(make_sample("standard", 1, 0.0))], ["run"])


def test_summary_files_sorted_and_valid(tmp_path: Path) -> None:
    std = make_results(make_sample("standard", 40, 0.0))
    dfm = make_results(make_sample("standard", 41, 0.6))
    cs = compare_loaded([std, dfm], ["s", "d"], shape_only=True)
    paths = write_summary(cs, tmp_path)
    with open(paths["csv"], newline="") as fh:
        rows = list(csv.DictReader(fh))
    ps = [float(r["p_value"]) for r in rows]
    assert ps == sorted(ps)
    assert rows[0]["histogram"] == "m_pair"
    doc = json.loads(paths["json"].read_text())  # strict JSON: NaN written as null
    assert doc["format"] == "evtkin-comparison"
    assert doc["summary"][0]["histogram"] == "m_pair"
    assert len(doc["comparisons"][0]["ratio"]) == len(MASS_EDGES) + 1
    text = paths["txt"].read_text()
    assert text == summary_text(cs)
    assert text.index("m_pair") < text.index("pt_lep")
    assert NOTE in text


def test_plot_png_written(tmp_path: Path) -> None:
    mpimg = pytest.importorskip("matplotlib.image")
    std = make_results(make_sample("standard", 50, 0.0))
    dfm = make_results(make_sample("standard", 51, 0.6))
    cs = compare_loaded([std, dfm], ["s", "d"], with_bands=True)
    out = tmp_path / "p.png"
    plot_comparison(cs.entries[0], out, pulls=True, note=NOTE)
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    img = mpimg.imread(out)
    assert img.shape[0] > 500  # three stacked panels
    assert img.shape[1] > 300


def _write_results_folder(folder: Path, results: SimpleNamespace) -> None:
    """Write results.json and provenance.json by the schema of docs/results-format.md."""

    def lst(a: Any) -> list[float | None]:
        return [None if not math.isfinite(float(v)) else float(v) for v in np.asarray(a)]

    samples: dict[str, Any] = {}
    for sn, s in results.samples.items():
        hs = {}
        for hn, h in s.histograms.items():
            if h.ndim != 1:
                continue
            hs[hn] = {
                "title": h.title,
                "ndim": 1,
                "axes": [
                    {
                        "name": a.name,
                        "label": a.label,
                        "unit": a.unit,
                        "kind": a.kind,
                        "edges": lst(a.edges),
                    }
                    for a in h.axes
                ],
                "normalisation": h.normalisation,
                "norm_includes_flow": True,
                "y_label": h.y_label,
                "y_unit": h.y_unit,
                "entries": h.entries,
                "values": lst(h.values),
                "variances": lst(h.variances),
                "bands": {
                    bn: {
                        "method": b.method,
                        "members": b.members,
                        "down": lst(b.down),
                        "up": lst(b.up),
                    }
                    for bn, b in h.bands.items()
                },
                "variation_values": None,
            }
        samples[sn] = {
            "label": s.label,
            "luminosity_fb": None,
            "xsec": s.xsec,
            "variations": [],
            "histograms": hs,
            "cutflow": s.cutflow,
        }
    folder.mkdir(parents=True)
    doc = {
        "format": "evtkin-results",
        "format_version": 1,
        "evtkin_version": "0.1.0",
        "created_utc": "2025-01-01T12:00:00Z",
        "note": NOTE,
        "samples": samples,
    }
    (folder / "results.json").write_text(json.dumps(doc))
    (folder / "provenance.json").write_text(json.dumps({"evtkin_version": "0.1.0"}))


def test_compare_results_and_command_on_folders(tmp_path: Path) -> None:
    from evtkin.cli import main
    from evtkin.output.compare_run import compare_results

    a, b = tmp_path / "run_std", tmp_path / "run_dfm"
    _write_results_folder(a, make_results(make_sample("standard", 60, 0.0)))
    _write_results_folder(b, make_results(make_sample("standard", 61, 0.6)))
    cs = compare_results([a, b], out=tmp_path / "cmp", shape_only=True, pulls=True)
    assert summary_rows(cs)[0]["histogram"] == "m_pair"
    for f in ("summary.txt", "summary.csv", "summary.json", "report.html", "plots/m_pair.png"):
        assert (tmp_path / "cmp" / f).is_file(), f
    out = tmp_path / "cli"
    rc = main(["compare", str(a), str(b), "--out", str(out), "--hists", "pt_lep", "--no-report"])
    assert rc == 0
    assert (out / "plots" / "pt_lep.png").is_file()
    assert not (out / "report.html").exists()
    assert json.loads((out / "summary.json").read_text())["summary"][0]["mode"] == "absolute"


def test_no_histogram_in_common_is_an_error() -> None:
    from evtkin.errors import ResultsError

    a = make_results(make_sample("standard", 30, 0.0))
    b = make_results(make_sample("standard", 31, 0.0))
    b.samples["standard"].histograms = {"other": b.samples["standard"].histograms["pt_lep"]}
    with pytest.raises(ResultsError, match="nothing to compare"):
        compare_loaded([a, b], ["a", "b"])


def test_report_says_each_note_once_and_lists_merged_bins() -> None:
    from evtkin.output.report import render_compare_report

    a = make_results(make_sample("standard", 40, 0.0, n=600))
    b = make_results(make_sample("standard", 41, 0.0, n=600))
    cs = compare_loaded([a, b], ["a", "b"], low_content="merge", min_entries=40)
    rows = summary_rows(cs)
    assert all(r["method"] == "weighted vs weighted" for r in rows)
    merged = [r for r in rows if r["bins_merged"]]
    assert merged
    assert all(r["merged"] for r in merged)
    # the merged ranges are x ranges of the histogram's own edges
    lo, hi = merged[0]["merged"].split(";")[0].split("-")
    assert float(lo) in MASS_EDGES.tolist() + PT_EDGES.tolist()
    assert float(hi) in MASS_EDGES.tolist() + PT_EDGES.tolist()
    assert "merged bins of" in summary_text(cs)
    page = render_compare_report(cs)
    shared = "absolute: equal expected content per bin, X² = Σ (A-B)²/(σ²A+σ²B)"
    assert all(shared in r["notes"] for r in rows)
    assert len(rows) > 1
    assert page.count(shared) == 1
    assert "weighted vs weighted" in page
    assert ">WW<" not in page


def test_comparison_plot_geometry(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # read back from the figure: pull bars span exactly their bins, every finite ratio point
    # lies inside the ratio panel (with 1), the x range is the histogram's edges, no title
    import evtkin.output.compare_plots as cp

    figs: list[Any] = []
    monkeypatch.setattr(cp, "_save_atomic", lambda fig, path: figs.append(fig))
    std = make_results(make_sample("standard", 50, 0.0))
    dfm = make_results(make_sample("standard", 51, 0.6))
    cs = compare_loaded([std, dfm], ["a", "b"], shape_only=True)
    entry = next(e for e in cs.entries if e.name == "m_pair")
    monkeypatch.setattr("matplotlib.pyplot.close", lambda fig: None)
    plot_comparison(entry, tmp_path / "x.png", pulls=True, note=NOTE)
    fig = figs[0]
    ax, rx, px = fig.axes
    assert ax.get_title() == ""
    assert ax.get_xlim() == (MASS_EDGES[0], MASS_EDGES[-1])
    bars = sorted(px.patches, key=lambda p: p.get_x())
    lefts = np.array([b.get_x() for b in bars])
    rights = np.array([b.get_x() + b.get_width() for b in bars])
    np.testing.assert_allclose(lefts, MASS_EDGES[:-1], rtol=1e-12)
    np.testing.assert_allclose(rights, MASS_EDGES[1:], rtol=1e-12)
    r = entry.comparisons[0].ratio[1:-1]
    lo, hi = rx.get_ylim()
    assert lo < 1.0 < hi
    fin = r[np.isfinite(r)]
    assert fin.size > 10
    assert np.all((fin > lo) & (fin < hi))
    import matplotlib.pyplot as plt

    plt.close(fig)


def test_no_histogram_in_common_fails_the_command(tmp_path: Path,
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    # not an exit 0 with an empty plots folder: the command fails and says why
    from evtkin.cli import main

    a, b = tmp_path / "a", tmp_path / "b"
    _write_results_folder(a, make_results(make_sample("standard", 32, 0.0)))
    other = make_results(make_sample("standard", 33, 0.0))
    other.samples["standard"].histograms = {"other": other.samples["standard"].histograms["pt_lep"]}
    _write_results_folder(b, other)
    rc = main(["compare", str(a), str(b), "--out", str(tmp_path / "cmp")])
    assert rc != 0
    assert "nothing to compare" in capsys.readouterr().err
    assert not list((tmp_path / "cmp").glob("plots/*.png"))


def test_comparison_says_sqrt_s_when_the_inputs_agree() -> None:
    a = make_results(make_sample("standard", 34, 0.0))
    b = make_results(make_sample("standard", 35, 0.0))
    assert compare_loaded([a, b], ["a", "b"]).corner == ""
    for r in (a, b):
        r.meta["plot"] = {"sqrt_s_gev": 13000.0}
    assert compare_loaded([a, b], ["a", "b"]).corner == "√s = 13 TeV"
    b.meta["plot"] = {"sqrt_s_gev": 8000.0}  # different energies: none is written
    assert compare_loaded([a, b], ["a", "b"]).corner == ""
