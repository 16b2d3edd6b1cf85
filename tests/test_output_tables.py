"""Results JSON / CSV / cutflow writers and the reader (format: docs/results-format.md)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from evtkin.errors import ResultsError
from evtkin.hists.bands import envelope
from evtkin.hists.fill import AxisSpec, HistAccumulator, HistSpec
from evtkin.hists.normalise import normalise
from evtkin.output.tables import (
    Results,
    SampleResult,
    cutflow_text,
    hist_result,
    read_hist_csv,
    read_results,
    write_provenance,
    write_results,
)

RNG = np.random.default_rng(99)


def _results() -> Results:
    n = 3000
    x = RNG.normal(2.0, 2.0, n)
    y = RNG.normal(0.0, 1.0, n)
    w = RNG.normal(0.01, 0.02, n)
    wv = w[:, None] * RNG.normal(1.0, 0.1, (n, 2))
    s1 = HistSpec("mll", (AxisSpec.variable([0, 1, 2.5, 5], name="mll", label="m_ll",
                                            unit="GeV"),), "Dilepton mass")
    s2 = HistSpec("xy", (AxisSpec.regular(3, 0, 3, name="x", unit="GeV"),
                         AxisSpec.regular(2, -1, 1, name="y")), "2-D")
    a1 = HistAccumulator(s1, ("up", "down"))
    a2 = HistAccumulator(s2, ("up", "down"))
    a1.fill(x, weight=w, variations=wv)
    a2.fill(x, y, weight=w, variations=wv)
    n1 = normalise(a1, "xsec_per_bin")
    n2 = normalise(a2, "unit_area")
    h1 = hist_result(n1, {"scale": envelope(n1.rows[0], n1.rows[1:], ["up", "down"])},
                     keep_variations=True)
    h2 = hist_result(n2, {"scale": envelope(n2.rows[0], n2.rows[1:])})
    cut = [{"step": "all", "n_raw": n, "sum_w": 30.0, "sum_w2": 1.5},
           {"step": "two leptons", "n_raw": 1200, "sum_w": 12.0, "sum_w2": 0.6},
           {"step": "mass window", "n_raw": 300, "sum_w": 3.0, "sum_w2": 0.15}]
    s = SampleResult("dy toy", "Drell-Yan (toy)", 139.0, {"sigma_pb": 30.0, "n_eff": 2900.5},
                     ["up", "down"], {"mll": h1, "xy": h2}, cut)
    return Results({"dy toy": s}, {"note": "toy data — not a physics prediction"})


def test_json_round_trip(tmp_path: Path) -> None:
    res = _results()
    write_results(tmp_path, res)
    back = read_results(tmp_path)
    assert back.meta["format"] == "evtkin-results"
    assert back.meta["format_version"] == 1
    assert back.meta["note"] == "toy data — not a physics prediction"
    s = back.samples["dy toy"]
    assert s.label == "Drell-Yan (toy)"
    assert s.luminosity_fb == 139.0
    assert s.xsec["n_eff"] == 2900.5
    for name, h in res.samples["dy toy"].histograms.items():
        b = s.histograms[name]
        assert np.array_equal(b.values, h.values)  # repr round trip of floats is exact
        assert np.array_equal(b.variances, h.variances)
        assert [a.edges.tolist() for a in b.axes] == [a.edges.tolist() for a in h.axes]
        assert b.axes[0].unit == h.axes[0].unit
        assert b.normalisation == h.normalisation
        assert np.array_equal(b.bands["scale"].up, h.bands["scale"].up)
        assert b.values.shape == tuple(a.nbins + 2 for a in b.axes)  # flow included
    assert s.histograms["mll"].variation_values is not None
    assert s.histograms["mll"].y_unit == "pb/GeV"
    # cutflow efficiencies: hand computation 12/30 and 3/12, 3/30
    cf = s.cutflow
    assert [round(r["eff_step"], 12) for r in cf] == [1.0, 0.4, 0.25]
    assert cf[-1]["eff_cum"] == pytest.approx(0.1)


def test_json_is_strict_and_nan_becomes_null(tmp_path: Path) -> None:
    res = _results()
    h = res.samples["dy toy"].histograms["mll"]
    h.values[0] = np.nan
    write_results(tmp_path, res)
    text = (tmp_path / "results.json").read_text(encoding="utf-8")
    json.loads(text, parse_constant=lambda c: pytest.fail(f"non-standard JSON constant {c}"))
    back = read_results(tmp_path)
    assert math.isnan(back.samples["dy toy"].histograms["mll"].values[0])


def test_csv_round_trip(tmp_path: Path) -> None:
    res = _results()
    write_results(tmp_path, res)
    h = res.samples["dy toy"].histograms["mll"]
    cols = read_hist_csv(tmp_path / "csv" / "dy_toy" / "mll.csv")
    assert list(cols) == ["lo", "hi", "value", "error", "entries", "scale_down", "scale_up"]
    assert np.array_equal(cols["entries"], h.counts)  # the raw fills per bin
    assert h.counts is not None
    assert h.counts.sum() == h.entries
    assert cols["lo"][0] == -np.inf
    assert cols["hi"][-1] == np.inf
    assert cols["lo"][1:].tolist() == [0.0, 1.0, 2.5, 5.0]
    assert np.array_equal(cols["value"], h.values)
    assert np.array_equal(cols["error"], np.sqrt(h.variances))
    assert np.array_equal(cols["scale_up"], h.bands["scale"].up)
    c2 = read_hist_csv(tmp_path / "csv" / "dy_toy" / "xy.csv")
    h2 = res.samples["dy toy"].histograms["xy"]
    assert np.array_equal(c2["value"], h2.values.ravel())  # x outer loop
    assert c2["x_lo"][0] == -np.inf
    assert c2["y_hi"][-1] == np.inf


def test_cutflow_files(tmp_path: Path) -> None:
    write_results(tmp_path, _results())
    txt = (tmp_path / "cutflow" / "dy_toy.txt").read_text(encoding="utf-8")
    assert "two leptons" in txt
    assert "0.4000" in txt
    assert "1.22" in txt  # sqrt(1.5) = 1.2247 (√Σw² error)
    lines = (tmp_path / "cutflow" / "dy_toy.csv").read_text(encoding="utf-8").splitlines()
    # the sample has a luminosity: expected events L·Σw and L·√Σw² follow
    assert lines[0] == "step,n_raw,sum_w,sum_w2,eff_step,eff_cum,expected,expected_err"
    assert lines[3].startswith("mass window,300,3.0,0.15,0.25,")
    assert cutflow_text([]).count("\n") == 2  # header + rule only


def test_provenance_and_no_temporary_files_left(tmp_path: Path) -> None:
    p = write_provenance(tmp_path, {"config_sha256": "ab" * 32, "inputs": [{"path": "a.lhe"}]})
    rec = json.loads(p.read_text(encoding="utf-8"))
    assert rec["evtkin_version"]
    assert rec["inputs"][0]["path"] == "a.lhe"
    write_results(tmp_path, _results())
    assert not [f for f in tmp_path.rglob("*") if f.name.endswith(".tmp")]


def test_reader_errors(tmp_path: Path) -> None:
    with pytest.raises(ResultsError, match="no results file"):
        read_results(tmp_path)
    (tmp_path / "results.json").write_text('{"format": "other"}', encoding="utf-8")
    with pytest.raises(ResultsError, match="not an evtkin results file"):
        read_results(tmp_path)
    (tmp_path / "results.json").write_text('{"format": \n oops', encoding="utf-8")
    with pytest.raises(ResultsError, match=r"results.json:2"):
        read_results(tmp_path)
    write_results(tmp_path, _results())
    data = json.loads((tmp_path / "results.json").read_text(encoding="utf-8"))
    data["samples"]["dy toy"]["histograms"]["mll"]["values"] = [1.0, 2.0]
    (tmp_path / "results.json").write_text(json.dumps(data), encoding="utf-8")
    with pytest.raises(ResultsError, match=r"histograms\.mll\.values: expected shape \(5,\)"):
        read_results(tmp_path)


def test_cutflow_in_expected_events_and_as_markdown_and_latex(tmp_path: Path) -> None:
    from evtkin.output.tables import cutflow_latex, cutflow_markdown, write_cutflow

    steps = [{"step": "all events", "n_raw": 1000, "sum_w": 2.0, "sum_w2": 0.004},
             {"step": "two leptons & more", "n_raw": 400, "sum_w": 0.8, "sum_w2": 0.0016}]
    # N = L σ with 1 fb⁻¹ = 1000 pb⁻¹ (common practice); error L √Σw²
    txt = cutflow_text(steps, luminosity_fb=140.0)
    assert "expected events (140 fb⁻¹)" in txt
    assert "280,000" in txt  # 140 × 1000 × 2.0
    assert "8,850" in txt  # 140 × 1000 × √0.004 = 8854.4, to three digits
    md = cutflow_markdown(steps, 140.0)
    rows = [r for r in md.splitlines() if r.startswith("|")]
    assert len(rows) == 4  # header, alignment, two steps
    assert len({r.count("|") for r in rows}) == 1  # every row has the same number of cells
    assert "| 112,000 |" in md  # 140 × 1000 × 0.8
    tex = cutflow_latex(steps, 140.0)
    assert r"\begin{tabular}{lrrrrr}" in tex
    assert r"two leptons \& more" in tex  # LaTeX specials escaped
    assert r"$280{,}000 \pm 8{,}850$" in tex  # {,}: no space after the comma in math
    assert tex.count(r" \\") == 3  # header and two rows
    # without a luminosity: no expected-events column
    assert "expected" not in cutflow_text(steps)
    write_cutflow(tmp_path, "dy", steps, luminosity_fb=140.0)
    assert sorted(p.suffix for p in (tmp_path / "cutflow").iterdir()) == [
        ".csv", ".md", ".tex", ".txt"]
    head = (tmp_path / "cutflow" / "dy.csv").read_text(encoding="utf-8").splitlines()[0]
    assert head.endswith(",expected,expected_err")


@pytest.mark.parametrize(("value", "count", "error"), [
    # rounding to three significant digits by hand (common practice for quoted numbers);
    # thousands separated by commas, plain decimals, no exponent
    (0, "0", "0"),
    (0.0, "0", "0"),
    (0.0123, "0.0123", "0.0123"),
    (0.012345, "0.0123", "0.0123"),
    (1.23456e-5, "0.0000123", "0.0000123"),
    (9.996, "10.0", "10.0"),  # rounds up into the next decade: still three digits
    (12.345, "12.3", "12.3"),  # the double nearest 12.345 is below it (IEEE 754)
    (512.7, "513", "513"),
    (999.6, "1,000", "1,000"),
    (8854.4, "8,854", "8,850"),
    (7.16501e7, "71,650,100", "71,700,000"),  # whole events from 100 up, ≤ 6 digits
    (71_650_123.4, "71,650,100", "71,700,000"),
    (123_456.7, "123,457", "123,000"),
    (-7.16501e7, "-71,650,100", "-71,700,000"),  # negative weights
    (12_345_678, "12,345,678", "12,300,000"),  # an integer count exactly
])
def test_event_counts_print_as_read_out(value: float, count: str, error: str) -> None:
    from evtkin.output.tables import count_error_text, count_text

    assert count_text(value) == count
    assert count_error_text(value) == error


def test_large_expected_events_in_every_cutflow_table(tmp_path: Path) -> None:
    from evtkin.output.report import render_run_report
    from evtkin.output.tables import cutflow_latex, cutflow_markdown

    # σ(tt̄) ≈ 511.8 pb at 140 fb⁻¹: 511.786 × 140 × 1000 = 71,650,040 expected events,
    # shown to six significant digits as Σw (511.786) is
    steps = [{"step": "all", "n_raw": 250_000, "sum_w": 511.786, "sum_w2": 1.0475},
             {"step": "selected", "n_raw": 16, "sum_w": 0.0123, "sum_w2": 1e-5}]
    tables = {"text": cutflow_text(steps, luminosity_fb=140.0),
              "markdown": cutflow_markdown(steps, 140.0)}
    for kind, text in tables.items():
        assert "71,650,000" in text, kind
        assert "250,000" in text, kind
        assert "143,000" in text, kind  # 140e3 × √1.0475 = 143,286.4 to three digits
        assert "1,722" in text, kind  # 0.0123 × 140e3 = 1722
        assert "443" in text, kind  # 140e3 × √1e-5 = 442.7
        assert "e+0" not in text, kind  # no exponent form anywhere
    tex = cutflow_latex(steps, 140.0)
    assert r"$71{,}650{,}000 \pm 143{,}000$" in tex
    r = _results()
    sample = next(iter(r.samples.values()))
    sample.cutflow = steps
    sample.luminosity_fb = 140.0
    page = render_run_report(r, None)
    assert "<td>71,650,000</td>" in page
    assert "<td>143,000</td>" in page
    assert "e+07" not in page
