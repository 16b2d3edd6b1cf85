"""A sample marked as data (``[samples.NAME] data = true``): counted events, weight 1.

Worked example: the events of a data sample count once each whatever weights the file carries,
so a bin holding N selected events shows N ± √N (Poisson counting, common practice), the
cutflow counts events, no cross section, variation weight, object-level variation or band
applies, and the plots draw the sample as points.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from evtkin.config import load_config
from evtkin.errors import ConfigError
from evtkin.output.plots import figure_tasks
from evtkin.output.tables import cutflow_latex, cutflow_markdown, read_results
from evtkin.run.pipeline import run
from run_helpers import drell_yan, eta, inv_mass, pt, write_lhe

N = 900
EDGES = np.linspace(70.0, 110.0, 9)


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("data")
    # the "data" file carries weights that are not 1 and three variation weights: all ignored
    data = drell_yan(N, seed=21, weights="mixed", n_var=3)
    mc = drell_yan(2000, seed=22, weights="mixed", n_var=3)
    ids = ("up", "down", "alt")
    return (write_lhe(d / "data.lhe", data, idwtup=-4, xsec_pb=0.0, weight_ids=ids), data,
            write_lhe(d / "mc.lhe", mc, idwtup=-4, xsec_pb=0.0, weight_ids=ids))


def config(data_file, mc_file, out=None, **data_keys):
    cfg = {
        # an analysis weight (e.g. a scale factor) applies to the simulation only
        "analysis": {"name": "data test", "luminosity_fb": 2.0, "weight": "2.0"},
        "samples": {"dy": {"files": [str(mc_file)]},
                    "observed": {"files": [str(data_file)], "data": True, **data_keys}},
        "objects": {"leptons": {"particles": ["charged_leptons"], "min_pt": 20.0,
                                "max_abs_eta": 2.4}},
        "step": [{"name": "two leptons", "require": "count(leptons) >= 2"},
                 {"name": "window", "require": "70 < mass(leptons[0] + leptons[1]) < 110"}],
        "quantities": {"mll": "mass(leptons[0] + leptons[1])"},
        "histograms": {
            "mll": {"x": {"value": "mll", "bins": 8, "range": [70, 110], "unit": "GeV"},
                    "normalise": "events"},
            "mll_raw": {"x": {"value": "mll", "bins": 8, "range": [70, 110]},
                        "normalise": "raw"},
            "mll_xs": {"x": {"value": "mll", "bins": 8, "range": [70, 110], "unit": "GeV"},
                       "normalise": "xsec_per_bin"},
            "mll_shape": {"x": {"value": "mll", "bins": 8, "range": [70, 110]},
                          "normalise": "unit_area"},
        },
        "uncertainties": {"scale": {"ids": ["up", "down"], "method": "envelope"}},
        "systematics": {"lep_scale": {"objects": "leptons", "kind": "energy_scale",
                                      "shift": 0.05}},
    }
    if out is not None:
        cfg["output"] = {"directory": str(out), "formats": ["json", "cutflow", "plots"]}
    return cfg


def _selected_mll(sample):
    """Independent numpy selection of the mll of the selected events."""
    p4 = sample.particles.p4[:, 3:5]
    ok = ((pt(p4) > 20) & (np.abs(eta(p4)) < 2.4)).all(axis=1)
    m = inv_mass(p4[:, 0], p4[:, 1])
    return m[ok & (m > 70) & (m < 110)], int(ok.sum())


def test_data_events_count_once_with_sqrt_n_errors(files, tmp_path):
    data_file, data, mc_file = files
    res = run(config(data_file, mc_file, out=tmp_path / "out"))
    m, n_two = _selected_mll(data)
    counts, _ = np.histogram(m, bins=EDGES)  # plain counts: every event once
    assert counts.sum() > 100
    s = res.samples["observed"]
    assert s.data
    assert s.xsec is None
    assert s.variations == ()
    for hname in ("mll", "mll_raw"):
        h = s.histograms[hname]
        np.testing.assert_array_equal(h.inner_values(), counts)
        # Poisson counting: variance N, error √N per bin (common practice)
        np.testing.assert_array_equal(h.inner_variances(), counts)
        assert h.y_unit == "events"
        assert h.bands == {}
        assert h.shape_bands == {}
    # xsec_per_bin of counts: N / (L Δx), L = 2 fb⁻¹ = 2000 pb⁻¹ (1 fb⁻¹ = 1000 pb⁻¹, common
    # practice), Δx = 5 GeV
    xs = s.histograms["mll_xs"]
    np.testing.assert_allclose(xs.inner_values(), counts / (2000.0 * 5.0), rtol=1e-12)
    np.testing.assert_allclose(xs.inner_variances(), counts / (2000.0 * 5.0) ** 2, rtol=1e-12)
    assert xs.y_unit == "pb/GeV"
    # unit area: binomial fractions N_k/N with p(1-p)/N (flow bins are empty here)
    sh = s.histograms["mll_shape"]
    p = counts / counts.sum()
    np.testing.assert_allclose(sh.inner_values(), p, rtol=1e-12)
    np.testing.assert_allclose(sh.inner_variances(), p * (1 - p) / counts.sum(), rtol=1e-9)
    # no object-level variation and no band for data; the simulated sample has both
    assert s.varied == {}
    assert s.bands == {}
    assert res.samples["dy"].varied
    assert res.samples["dy"].bands
    # the cutflow counts events: Σw = Σw² = N
    cf = s.cutflow
    assert [r["n_raw"] for r in cf] == [N, n_two, int(m.size)]
    assert [r["sum_w"] for r in cf] == [N, n_two, int(m.size)]
    assert [r["sum_w2"] for r in cf] == [N, n_two, int(m.size)]


def test_data_flag_in_results_cutflows_and_plots(files, tmp_path):
    data_file, data, mc_file = files
    out = tmp_path / "out"
    run(config(data_file, mc_file, out=out))
    raw = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert raw["samples"]["observed"]["data"] is True
    assert "data" not in raw["samples"]["dy"]
    assert raw["samples"]["observed"]["xsec"] == {}
    back = read_results(out)
    assert back.samples["observed"].data
    assert not back.samples["dy"].data
    m, _ = _selected_mll(data)
    # counted events in the cutflow files: N ± √N, no pb and no expected events
    txt = (out / "cutflow" / "observed.txt").read_text(encoding="utf-8")
    assert "± √N" in txt
    assert "[pb]" not in txt
    assert "expected" not in txt
    assert f"{m.size}" in txt
    assert f"{np.sqrt(m.size):.3g}" in txt
    md = cutflow_markdown(back.samples["observed"].cutflow, 2.0, data=True)
    assert md.splitlines()[0] == "| step | events | ± √N | eff. step | eff. cumul. |"
    tex = cutflow_latex(back.samples["observed"].cutflow, 2.0, data=True)
    assert f"${m.size} \\pm {np.sqrt(m.size):.3g}$" in tex
    # the simulated sample keeps Σw in pb and the expected events at 2 fb⁻¹
    assert "expected events (2 fb⁻¹)" in (out / "cutflow" / "dy.txt").read_text(encoding="utf-8")
    # plots: the data sample is drawn as points by default, the simulation as a line
    tasks = figure_tasks(out, back, hists=["mll"])
    curves = tasks[0][1][1]
    kinds = {c.name: c.kind for c in curves}
    assert kinds == {"dy": "line", "observed": "points"}
    pts = next(c for c in curves if c.name == "observed")
    np.testing.assert_array_equal(pts.errors, np.sqrt(np.histogram(m, bins=EDGES)[0]))
    # the HTML report: the data sample's events counted, its cutflow N ± √N; the simulated
    # sample's cutflow with the expected events at the luminosity
    from evtkin.output.report import render_run_report

    page = render_run_report(back, out)
    assert "data (counted events)" in page
    assert f"<td>{N}</td>" in page
    assert "± √N" in page
    assert "expected events (2 fb⁻¹)" in page
    # without a plots folder the report draws the run plots' own figures (one per histogram)
    assert render_run_report(back).count("<img") == 4
    # above the frame: √s from the LHE beams (6500 + 6500 GeV head on: √s = 13 TeV, common
    # practice) and, for expected events, the luminosity
    assert raw["plot"]["sqrt_s_gev"] == pytest.approx(13000.0)
    corners = {t[1][0].name: t[2]["corner"] for t in figure_tasks(out, back)}
    assert corners["mll"] == "√s = 13 TeV, 2 fb⁻¹"
    assert corners["mll_xs"] == "√s = 13 TeV"
    # a data sample cannot be stacked (evtkin plot)
    from evtkin.errors import ResultsError

    with pytest.raises(ResultsError, match="'observed' is a data sample"):
        figure_tasks(out, back, hists=["mll"], overrides={"stack": ["dy", "observed"]})


def test_data_sample_config_errors(files, tmp_path):
    data_file, _data, mc_file = files
    with pytest.raises(ConfigError, match=r"samples\.observed\.cross_section_pb.*no cross section"):
        load_config(config(data_file, mc_file, cross_section_pb=5.0))
    with pytest.raises(ConfigError, match=r"samples\.observed\.weight.*no event weight"):
        load_config(config(data_file, mc_file, weight="2"))
    with pytest.raises(ConfigError, match=r"samples\.observed\.truth_files.*no generator-level"):
        load_config(config(data_file, mc_file, truth_files=[str(mc_file)]))
    cfg = config(data_file, mc_file)
    cfg["plot"] = {"stack": ["dy", "observed"]}
    with pytest.raises(ConfigError, match=r"plot\.stack\[1\].*data sample"):
        load_config(cfg)
    cfg = config(data_file, mc_file)
    del cfg["analysis"]["luminosity_fb"]
    cfg["histograms"] = {"mll_xs": cfg["histograms"]["mll_xs"]}
    with pytest.raises(ConfigError, match=r"histograms\.mll_xs\.normalise.*data sample"):
        load_config(cfg)
    # 'events' needs no luminosity for counted events
    cfg["histograms"] = {"mll": config(data_file, mc_file)["histograms"]["mll"]}
    cfg["samples"] = {"observed": cfg["samples"]["observed"]}
    del cfg["systematics"], cfg["uncertainties"]
    load_config(cfg)
