"""evtkin as a library: the README's example in a script without a main guard and in a
notebook-like exec, the result as mappings of hist.Hist objects with per-bin contents, the
density view, bands, and load_results giving equal objects back."""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import hist
import numpy as np
import pytest

import evtkin
from evtkin.run.pipeline import run
from run_helpers import drell_yan, eta, inv_mass, pt, write_lhe

ROOT = Path(__file__).resolve().parents[1]


# --------------------------------------------------------------------------- the README example

def _readme_code() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    code = next(b for b in blocks if "evtkin.run(" in b)
    assert "__main__" not in code  # the point: no main guard
    return code


@pytest.fixture
def readme_dir(tmp_path: Path) -> Path:
    """A folder where the README's relative paths work: the shipped samples, and the
    Drell-Yan config with lighter outputs (PNG plots only; still enough figures for the plot
    process pool, whose start re-ran unguarded scripts)."""
    (tmp_path / "samples").symlink_to(ROOT / "samples")
    (tmp_path / "configs").mkdir()
    cfg = (ROOT / "configs" / "drell_yan.toml").read_text(encoding="utf-8")
    cfg = re.sub(r"(?m)^formats = .*$", 'formats = ["json", "plots"]', cfg)
    cfg = re.sub(r"(?m)^plot_formats = .*$", 'plot_formats = ["png"]', cfg)
    assert 'plot_formats = ["png"]' in cfg
    (tmp_path / "configs" / "drell_yan.toml").write_text(cfg, encoding="utf-8")
    return tmp_path


def _python(args: list[str], cwd: Path) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "MPLBACKEND": "Agg"}
    return subprocess.run([sys.executable, *args], cwd=cwd, capture_output=True, text=True,
                          timeout=600, env=env)


def test_readme_example_runs_as_a_plain_script_without_main_guard(readme_dir: Path) -> None:
    (readme_dir / "example.py").write_text(_readme_code(), encoding="utf-8")
    done = _python(["example.py"], readme_dir)
    assert done.returncode == 0, done.stderr[-3000:]
    assert "bootstrapping" not in done.stderr
    # the script ran once: one listing of the samples, not one per worker process
    assert done.stdout.count("['dy'] ['mll', ") == 1
    assert (readme_dir / "dy-results" / "plots" / "mll.png").is_file()


def test_readme_example_runs_in_a_notebook_like_exec(readme_dir: Path) -> None:
    # a notebook cell: code exec'd in a fresh namespace, __main__ without a file
    cell = ("import sys\nns = {'__name__': '__main__'}\n"
            "exec(compile(sys.stdin.read(), '<cell>', 'exec'), ns)\n"
            "print('cell done', type(ns['result']).__name__)\n")
    env = {**os.environ, "MPLBACKEND": "Agg"}
    done = subprocess.run([sys.executable, "-c", cell], cwd=readme_dir, input=_readme_code(),
                          capture_output=True, text=True, timeout=600, env=env)
    assert done.returncode == 0, done.stderr[-3000:]
    assert "cell done RunResult" in done.stdout
    assert done.stdout.count("['dy'] ['mll', ") == 1


# --------------------------------------------------------------------------- small samples

N = 1200


@pytest.fixture(scope="module")
def sample():
    return drell_yan(N, seed=23, weights="mixed", n_var=2)


@pytest.fixture(scope="module")
def lhe_file(tmp_path_factory, sample):
    d = tmp_path_factory.mktemp("lib")
    return write_lhe(d / "dy.lhe", sample, idwtup=-4, xsec_pb=0.0, weight_ids=("up", "down"))


def config(f: Path, bins: int = 8, **hist_extra: object) -> dict:
    return {
        "analysis": {"name": "library test"},
        "samples": {"dy": {"files": [str(f)], "luminosity_fb": 2.0}},
        "objects": {"leptons": {"particles": ["charged_leptons"], "min_pt": 20.0,
                                "max_abs_eta": 2.4}},
        "step": [{"name": "two leptons", "require": "count(leptons) >= 2"},
                 {"name": "window", "require": "70 < mass(leptons[0] + leptons[1]) < 110"}],
        "quantities": {"mll": "mass(leptons[0] + leptons[1])"},
        "histograms": {
            "mll": {"x": {"value": "mll", "bins": bins, "range": [70, 110], "label": "m_{ℓℓ}",
                          "unit": "GeV"}, "normalise": "xsec_per_bin", **hist_extra},
            "lead_pt": {"x": {"value": "leptons[0].pt", "edges": [20, 30, 45, 70, 120]},
                        "normalise": "events"},
        },
        "uncertainties": {"scale": {"method": "envelope", "ids": ["up", "down"]}},
    }


def _selected_sigma(sample) -> float:
    """σ of the events passing both steps, from the input weights with numpy: IDWTUP = -4
    gives each event XWGTUP / N in pb (Les Houches accord, hep-ph/0109068; from memory)."""
    p4 = sample.particles.p4[:, 3:5]  # the two leptons of the record
    ok = ((pt(p4) > 20) & (np.abs(eta(p4)) < 2.4)).all(axis=1)
    m = inv_mass(p4[:, 0], p4[:, 1])
    sel = ok & (m > 70) & (m < 110)
    return float(np.sum(sample.weight[sel]) / len(sample))


def test_sum_of_a_cross_section_histogram_is_the_selected_sigma(lhe_file, sample):
    res = run(config(lhe_file))
    h = res["dy"]["mll"]
    assert isinstance(h, hist.Hist)
    assert h.metadata["normalisation"] == "xsec_per_bin"
    assert h.metadata["unit"] == "pb"
    # the window step equals the axis range: nothing in the flow bins
    assert h.sum().value == pytest.approx(_selected_sigma(sample), rel=1e-12)
    assert h.sum(flow=True).value == pytest.approx(_selected_sigma(sample), rel=1e-12)
    # Σw² per bin: the MC variance of σ per bin, (XWGTUP / N)² summed
    assert h.sum().variance == pytest.approx(
        res.samples["dy"].cutflow[-1]["sum_w2"], rel=1e-12)
    # the density view divides by the widths (5 GeV): dσ/dm in pb/GeV
    d = evtkin.density(h)
    np.testing.assert_allclose(d.values * 5.0, h.values(), rtol=1e-14)
    np.testing.assert_allclose(d.variances * 25.0, h.variances(), rtol=1e-14)
    assert (d.unit, d.label) == ("pb/GeV", "dσ/dm_{ℓℓ}")
    # the stored density (what results.json and the plots hold) agrees
    np.testing.assert_allclose(d.values, res.samples["dy"].histograms["mll"].rows[0][1:-1],
                               rtol=1e-14)
    # axes: the quantity as name, the label without unit, the unit in the metadata
    ax = h.axes[0]
    assert (ax.name, ax.label, ax.metadata["unit"]) == ("mll", "m_{ℓℓ}", "GeV")
    assert res["dy"]["lead_pt"].axes[0].name == "leptons[0].pt"
    # events: N = σ·L per bin, L = 2 fb⁻¹ = 2000 pb⁻¹ (1 fb⁻¹ = 1000 pb⁻¹)
    ev = res["dy"]["lead_pt"]
    assert ev.metadata["unit"] == "events"
    assert ev.sum(flow=True).value == pytest.approx(_selected_sigma(sample) * 2000.0, rel=1e-12)


def test_rebinning_equals_a_run_with_half_as_many_bins(lhe_file):
    fine = run(config(lhe_file, bins=8))["dy"]["mll"]
    coarse = run(config(lhe_file, bins=4))["dy"]["mll"]
    merged = fine[::hist.rebin(2)]
    np.testing.assert_allclose(merged.axes[0].edges, coarse.axes[0].edges, rtol=0, atol=0)
    np.testing.assert_allclose(merged.values(flow=True), coarse.values(flow=True), rtol=1e-12)
    np.testing.assert_allclose(merged.variances(flow=True), coarse.variances(flow=True),
                               rtol=1e-12)


def test_result_is_a_mapping_of_samples_of_histograms(lhe_file):
    res = run(config(lhe_file))
    assert list(res) == ["dy"]
    assert list(res.keys()) == ["dy"]
    assert len(res) == 1
    assert "dy" in res
    assert "other" not in res
    [(name, s)] = list(res.items())
    assert name == "dy"
    assert s is res["dy"]
    assert list(res.values()) == [s]
    assert list(s) == ["mll", "lead_pt"]
    assert len(s) == 2
    assert "mll" in s
    assert all(isinstance(h, hist.Hist) for h in s.values())
    with pytest.raises(KeyError, match="no sample 'other'"):
        res["other"]
    with pytest.raises(KeyError, match="no histogram 'nope'"):
        s["nope"]
    # bands: hist objects with the histogram's axes, around the nominal
    band = s.bands["mll"]["scale"]
    assert band.members == ("up", "down")
    assert band.down.axes == s["mll"].axes
    assert np.all(band.down.values() <= s["mll"].values() + 1e-15)
    assert np.all(band.up.values() >= s["mll"].values() - 1e-15)
    # the sample's bookkeeping
    assert s.variations == ("up", "down")
    assert s.cutflow[-1]["step"] == "window"
    assert s.xsec["sigma_pb"] == pytest.approx(res.samples["dy"].xsec.sigma_pb, rel=0)


def test_load_results_gives_equal_objects_back(lhe_file, tmp_path):
    res = run(config(lhe_file), out=tmp_path / "out")
    back = evtkin.load_results(tmp_path / "out")
    assert isinstance(back, evtkin.Results)
    assert isinstance(res, evtkin.Results)
    assert type(back["dy"]) is type(res["dy"])
    assert back == res
    for name, h in res["dy"].items():
        assert back["dy"][name] == h
        assert back["dy"][name].metadata == h.metadata
        assert len(back["dy"][name].values()) == h.axes[0].size  # no flow bins unless asked
    assert back["dy"].bands == res["dy"].bands
    # a changed bin is noticed
    other = evtkin.load_results(tmp_path / "out")
    other["dy"]["mll"][2] = hist.accumulators.WeightedSum(1.0, 1.0)
    assert other != res


def test_one_histogram_record_from_normalisation_to_the_files(lhe_file, tmp_path):
    from evtkin.hists.record import HistRecord
    from evtkin.output.tables import read_results

    res = run(config(lhe_file), out=tmp_path / "out")
    rec = res.samples["dy"].histograms["mll"]
    assert isinstance(rec, HistRecord)
    assert rec.rows is not None
    assert rec.rows.shape == (3, 10)  # nominal + 2 variations, 8 bins + flow
    assert np.array_equal(rec.values, rec.rows[0])
    assert rec.bands == res.samples["dy"].bands["mll"]  # the record carries its bands
    back = read_results(tmp_path / "out").samples["dy"].histograms["mll"]
    assert type(back) is HistRecord
    assert back.rows is None  # every weight's contents stay in memory
    np.testing.assert_array_equal(back.values, rec.values)
    np.testing.assert_array_equal(back.variances, rec.variances)
    np.testing.assert_array_equal(back.bands["scale"].up, rec.bands["scale"].up)


def test_command_line_and_library_give_equal_results(lhe_file, tmp_path):
    # the same config as TOML for `evtkin run --jobs 2` and as a mapping for evtkin.run(jobs=2)
    toml = f"""
[analysis]
name = "library test"
[samples.dy]
files = ["{lhe_file}"]
luminosity_fb = 2.0
[objects.leptons]
particles = ["charged_leptons"]
min_pt = 20.0
max_abs_eta = 2.4
[[step]]
name = "two leptons"
require = "count(leptons) >= 2"
[[step]]
name = "window"
require = "70 < mass(leptons[0] + leptons[1]) < 110"
[quantities]
mll = "mass(leptons[0] + leptons[1])"
[histograms.mll]
x = {{ value = "mll", bins = 8, range = [70, 110], label = "m_{{ℓℓ}}", unit = "GeV" }}
normalise = "xsec_per_bin"
[histograms.lead_pt]
x = {{ value = "leptons[0].pt", edges = [20, 30, 45, 70, 120] }}
normalise = "events"
[uncertainties.scale]
method = "envelope"
ids = ["up", "down"]
[output]
formats = ["json", "cutflow"]
"""
    cfg = tmp_path / "lib.toml"
    cfg.write_text(toml, encoding="utf-8")
    done = _python(["-m", "evtkin", "run", str(cfg), "--out", str(tmp_path / "cli"),
                    "--jobs", "2"], tmp_path)
    assert done.returncode == 0, done.stderr[-3000:]
    from_cli = evtkin.load_results(tmp_path / "cli")
    in_process = evtkin.run(cfg, jobs=2)
    assert from_cli == in_process
    assert in_process == run(config(lhe_file))  # a mapping config: the same histograms
