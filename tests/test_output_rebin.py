"""Rebinned stored results equal a run filled with the coarser binning, in every normalisation."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from evtkin.errors import ResultsError
from evtkin.hists.bands import envelope
from evtkin.hists.fill import AxisSpec, HistAccumulator, HistSpec
from evtkin.hists.normalise import normalise
from evtkin.output.rebin import rebin_result
from evtkin.output.tables import hist_result

FINE = np.array([0.0, 10.0, 20.0, 30.0, 40.0, 60.0, 80.0, 100.0, 140.0, 200.0])


def _filled(edges: np.ndarray, mode: str, include_flow: bool = True) -> object:
    # the same weighted events (some negative) and two variations, filled with ``edges``
    rng = np.random.default_rng(11)
    x = rng.exponential(50.0, 4000) - 5.0  # some underflow, some overflow
    w = rng.normal(0.02, 0.015, x.size)
    wv = w[:, None] * (1.0 + np.outer(x / 400.0, [1.0, -1.0]))
    acc = HistAccumulator(HistSpec("x", (AxisSpec.variable(edges, name="x", label="x",
                                                           unit="GeV"),), "toy"), ("up", "dn"))
    acc.fill(x, weight=w, variations=wv)
    nh = normalise(acc, mode, luminosity_fb=140.0, include_flow=include_flow)
    rows = nh.all_rows()  # the nominal and every variation
    band = envelope(rows[0], rows[1:])
    return hist_result(nh, {"scale": band}, keep_variations=True)


@pytest.mark.parametrize(("mode", "flow"), [("raw", True), ("events", True),
                                            ("xsec_per_bin", True), ("unit_area", True),
                                            ("unit_area", False)])
@pytest.mark.parametrize("rebin", [3, [0.0, 20.0, 40.0, 100.0, 200.0]])
def test_rebinned_equals_a_run_with_the_coarser_binning(mode: str, flow: bool,
                                                        rebin: object) -> None:
    coarse_edges = FINE[::3] if rebin == 3 else np.array(rebin)
    fine = _filled(FINE, mode, flow)
    coarse = _filled(coarse_edges, mode, flow)
    got = rebin_result(fine, rebin)  # type: ignore[arg-type]
    np.testing.assert_allclose(got.axes[0].edges, coarse_edges)
    np.testing.assert_allclose(got.values, coarse.values, rtol=1e-10, atol=1e-15)
    np.testing.assert_allclose(got.variances, coarse.variances, rtol=1e-8, atol=1e-18)
    for k in coarse.variation_values:
        np.testing.assert_allclose(got.variation_values[k], coarse.variation_values[k],
                                   rtol=1e-10, atol=1e-15)
    # a two-point band with one variation on each side of the nominal in every bin here is
    # reproduced exactly by moving the edges with the summed deviations
    if mode != "unit_area":
        np.testing.assert_allclose(got.bands["scale"].up, coarse.bands["scale"].up, rtol=1e-10)
    if mode == "unit_area":
        inner = got.values[1:-1].sum() + (got.values[0] + got.values[-1] if flow else 0.0)
        assert inner == pytest.approx(1.0, rel=1e-12)


def test_bad_rebin_requests_are_errors() -> None:
    h = _filled(FINE, "raw")
    with pytest.raises(ResultsError, match="divides the 9 bins"):
        rebin_result(h, 2)
    with pytest.raises(ResultsError, match="15 is not one of the histogram's edges"):
        rebin_result(h, [0.0, 15.0, 200.0])
    with pytest.raises(ResultsError, match="run from the first edge"):
        rebin_result(h, [10.0, 200.0])


def test_evtkin_plot_draws_what_a_coarser_run_gives(tmp_path: Path) -> None:
    # through results.json, as `evtkin plot --rebin 3` reads it: the curves handed to the
    # drawing equal the coarse run's in-range contents and MC errors, in every normalisation
    from evtkin.cli import main
    from evtkin.output.plots import figure_tasks
    from evtkin.output.tables import Results, SampleResult, read_results, write_results

    modes = [("raw", True), ("events", True), ("xsec_per_bin", True), ("unit_area", True),
             ("unit_area", False)]
    fine = {f"{m}_{f}": _filled(FINE, m, f) for m, f in modes}
    coarse = {f"{m}_{f}": _filled(FINE[::3], m, f) for m, f in modes}
    for k, h in fine.items():
        h.name = k  # type: ignore[attr-defined]
    write_results(tmp_path / "res", Results({"s": SampleResult("s", "toy", 140.0,
                                                                histograms=fine)}))  # type: ignore[arg-type]
    res = read_results(tmp_path / "res")
    tasks = figure_tasks(tmp_path / "out", res, overrides={"rebin": 3})
    assert len(tasks) == len(modes)
    for _fn, (stem, curves), _kw in tasks:
        want = coarse[stem.name]
        (c,) = curves
        np.testing.assert_allclose(c.edges, FINE[::3])
        np.testing.assert_allclose(c.values, want.inner_values(), rtol=1e-10, atol=1e-15)
        np.testing.assert_allclose(c.errors, np.sqrt(want.inner_variances()), rtol=1e-8,
                                   atol=1e-15)
    assert main(["plot", str(tmp_path / "res"), "--rebin", "3", "--hists", "raw_True",
                 "--formats", "svg", "--jobs", "1", "--out", str(tmp_path / "o")]) == 0
    assert (tmp_path / "o" / "plots" / "raw_True.svg").stat().st_size > 1000
