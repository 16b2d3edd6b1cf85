"""ROOT round trip through uproot (REFERENCES §3.1): values, variances (fSumw2), flow, edges."""

from __future__ import annotations

from pathlib import Path

import hist
import numpy as np
import uproot

from evtkin.hists.bands import hessian_symmetric
from evtkin.hists.fill import AxisSpec, HistAccumulator, HistSpec
from evtkin.hists.normalise import normalise
from evtkin.output.rootfile import read_root, root_key, write_results_root, write_root
from evtkin.output.tables import Results, SampleResult, hist_result

RNG = np.random.default_rng(4)


def _hr(ndim: int, variable: bool):  # type: ignore[no-untyped-def]
    n = 2000
    ax = (AxisSpec.variable([0.0, 0.5, 2.0, 2.2, 6.0], name="pt", label="p_T", unit="GeV")
          if variable else AxisSpec.regular(4, 0.0, 6.0, name="pt", label="p_T", unit="GeV"))
    axes = [ax]
    vals = [RNG.exponential(2.0, n)]
    if ndim == 2:
        axes.append(AxisSpec.regular(3, -2.0, 2.0, name="eta", label="eta"))
        vals.append(RNG.normal(0, 1.5, n))
    w = RNG.normal(1.0, 1.0, n)
    acc = HistAccumulator(HistSpec(f"h{ndim}", tuple(axes), "test"), ("a", "b"))
    acc.fill(*vals, weight=w, variations=w[:, None] * RNG.normal(1, 0.1, (n, 2)))
    nh = normalise(acc, "xsec_per_bin")
    return hist_result(nh, {"pdf": hessian_symmetric(nh.rows[0], nh.rows[1:])}), acc


def test_th1d_and_th2d_round_trip(tmp_path: Path) -> None:
    objs = {}
    for ndim in (1, 2):
        for variable in (False, True):
            objs[f"h{ndim}{'v' if variable else 'r'}"] = _hr(ndim, variable)[0]
    path = write_root(tmp_path / "out.root", objs)
    back = read_root(path)
    for key, h in objs.items():
        r = back[key]
        assert r["classname"] == ("TH1D" if h.ndim == 1 else "TH2D")
        np.testing.assert_array_equal(r["values"], h.values)  # flow included
        np.testing.assert_array_equal(r["variances"], h.variances)
        for e_back, a in zip(r["edges"], h.axes, strict=True):
            np.testing.assert_allclose(e_back, a.edges, rtol=1e-15)
        assert r["axis_titles"][0] == "p_T [GeV]"
        up = back[f"{key}__pdf_up"]
        np.testing.assert_array_equal(up["values"], h.bands["pdf"].up)
        np.testing.assert_array_equal(back[f"{key}__pdf_down"]["values"], h.bands["pdf"].down)


def test_root_matches_hist_written_by_uproot(tmp_path: Path) -> None:
    # reference: uproot's own conversion of a hist.Hist with Weight storage (REFERENCES §3.1)
    _h, acc = _hr(1, True)
    raw = hist_result(normalise(acc, "raw"))
    write_root(tmp_path / "a.root", {"ours": raw})
    with uproot.recreate(tmp_path / "b.root") as f:
        f["ref"] = acc.to_hist()
    ours = uproot.open(tmp_path / "a.root")["ours"]
    ref = uproot.open(tmp_path / "b.root")["ref"]
    np.testing.assert_array_equal(ours.values(flow=True), ref.values(flow=True))
    np.testing.assert_array_equal(ours.variances(flow=True), ref.variances(flow=True))
    back = ours.to_hist()
    assert isinstance(back, hist.Hist)
    np.testing.assert_array_equal(back.variances(flow=True), acc.sumw2[0])


def test_results_root_keys(tmp_path: Path) -> None:
    h, _acc = _hr(1, False)
    res = Results({"tt toy": SampleResult("tt toy", histograms={"top pt": h})})
    path = write_results_root(tmp_path, res)
    keys = set(read_root(path))
    assert root_key("tt toy", "top pt") == "tt_toy__top_pt"
    assert keys == {"tt_toy__top_pt", "tt_toy__top_pt__pdf_up", "tt_toy__top_pt__pdf_down",
                    "tt_toy__top_pt__entries"}  # the raw fills per bin
    assert not list(tmp_path.glob(".*.tmp"))


def test_2d_cross_section_label_is_stored_with_its_ds(tmp_path: Path) -> None:
    # d²σ/(dx dy): a cross section per bin area names both differentials (common practice);
    # the label is made where the histogram is normalised, so results.json, the CSV table and
    # the ROOT z axis (and a plot re-drawn from them) carry the same text
    import json

    from evtkin.output.tables import read_results, write_results

    acc = HistAccumulator(HistSpec("m_cos", (
        AxisSpec.regular(4, 60.0, 120.0, name="m", label="m_{ℓℓ}", unit="GeV"),
        AxisSpec.regular(2, -1.0, 1.0, name="cos", label="cos θ*")), "test"), ())
    acc.fill(RNG.uniform(60, 120, 500), RNG.uniform(-1, 1, 500), weight=np.ones(500))
    nh = normalise(acc, "xsec_per_bin")
    label = "d²σ/(d\u2009m_{ℓℓ} d\u2009cos θ*)"
    assert (nh.y_label, nh.y_unit) == (label, "pb/GeV")
    res = Results(samples={"s": SampleResult("s", histograms={"m_cos": hist_result(nh)})})
    write_results(tmp_path, res)
    write_results_root(tmp_path, res)
    stored = json.loads((tmp_path / "results.json").read_text(encoding="utf-8"))
    assert stored["samples"]["s"]["histograms"]["m_cos"]["y_label"] == label
    assert read_results(tmp_path).samples["s"].histograms["m_cos"].y_title == f"{label} [pb/GeV]"
    csv_text = (tmp_path / "csv" / "s" / "m_cos.csv").read_text(encoding="utf-8")
    assert f"y: {label} [pb/GeV]" in csv_text
    th2 = uproot.open(tmp_path / "histograms.root")[root_key("s", "m_cos")]
    assert th2.member("fZaxis").member("fTitle") == f"{label} [pb/GeV]"
