"""Regions: named selections branching off the common steps, all in one pass. One run with
three regions must equal, bin for bin, three runs that each apply one region's steps as common
steps (the definition of a region, common practice); cutflows and outputs carry region names."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from evtkin.config import load_config
from evtkin.errors import ConfigError
from evtkin.output.rootfile import read_root
from evtkin.output.tables import load_results
from evtkin.run.pipeline import run

REPO = Path(__file__).resolve().parents[1]
DY = REPO / "samples" / "toy_drellyan.lhe.gz"
N = 3000

COMMON = f"""
[samples.dy]
files = ["{DY}"]

[objects.leptons]
particles = ["light_leptons"]
min_pt = 15.0

[[step]]
name = "two leptons"
require = "count(leptons) >= 2"

[[step]]
name = "central"
require = "abs(leptons[0].eta) < 2.0"

[quantities]
mll = "(leptons[0] + leptons[1]).mass"
flavour = "abs(leptons[0].pdgid) + abs(leptons[1].pdgid)"
"""

HISTS = """
[histograms.mll]
x = { value = "mll", bins = 24, range = [60.0, 120.0], unit = "GeV" }
{extra}

[histograms.lep_pt]
x = { value = "leptons.pt", bins = 10, range = [0.0, 100.0], unit = "GeV" }
normalise = "raw"
{extra}
"""

REGIONS = """
[regions.ee]
require = "flavour == 22"

[regions.mumu]
require = "flavour == 26"

[regions.on_z]
after = "two leptons"
steps = [
  { name = "Z window", require = "80 < mll < 100" },
  { name = "hard", require = "leptons[0].pt > 30" },
]

[output]
formats = ["root", "json", "csv", "cutflow"]
"""

# each region as plain common steps: (steps to keep of COMMON, extra steps)
SEPARATE = {
    "ee": (2, [("ee", "flavour == 22")]),
    "mumu": (2, [("mumu", "flavour == 26")]),
    "on_z": (1, [("Z window", "80 < mll < 100"), ("hard", "leptons[0].pt > 30")]),
}


def _separate_config(region: str) -> str:
    keep, extra = SEPARATE[region]
    text = COMMON
    if keep == 1:
        text = text.replace('[[step]]\nname = "central"\nrequire = "abs(leptons[0].eta) < 2.0"\n',
                            "")
    for name, cond in extra:
        text += f'\n[[step]]\nname = "{name}"\nrequire = "{cond}"\n'
    return text + HISTS.replace("{extra}", "")


@pytest.fixture(scope="module")
def one_pass(tmp_path_factory):  # type: ignore[no-untyped-def]
    d = tmp_path_factory.mktemp("regions")
    cfg = d / "regions.toml"
    cfg.write_text(COMMON + HISTS.replace("{extra}", 'regions = "all"') + REGIONS)
    return run(cfg, out=d / "out", max_events=N), d / "out"


@pytest.mark.parametrize("region", sorted(SEPARATE))
def test_one_pass_equals_separate_runs(one_pass, tmp_path, region) -> None:  # type: ignore[no-untyped-def]
    result, _ = one_pass
    cfg = tmp_path / "separate.toml"
    cfg.write_text(_separate_config(region))
    alone = run(cfg, max_events=N)
    for h in ("mll", "lep_pt"):
        got = result["dy"][f"{h}@{region}"]
        want = alone["dy"][h]
        assert np.array_equal(got.values(flow=True), want.values(flow=True)), (h, region)
        assert np.array_equal(got.variances(flow=True), want.variances(flow=True)), (h, region)
        assert got.values(flow=True).sum() > 0
    rows = result.samples["dy"].region_cutflows[region]
    assert [r["step"] for r in rows] == [r["step"] for r in alone.samples["dy"].cutflow]
    for a, b in zip(rows, alone.samples["dy"].cutflow, strict=True):
        assert (a["n_raw"], a["sum_w"], a["sum_w2"]) == (b["n_raw"], b["sum_w"], b["sum_w2"])


def test_regions_are_disjoint_where_their_conditions_are(one_pass) -> None:  # type: ignore[no-untyped-def]
    result, _ = one_pass
    cf = result.samples["dy"].region_cutflows
    common = result.samples["dy"].cutflow[-1]["n_raw"]
    assert cf["ee"][-1]["n_raw"] + cf["mumu"][-1]["n_raw"] <= common
    assert cf["ee"][-1]["n_raw"] > 0
    assert cf["mumu"][-1]["n_raw"] > 0


def test_region_names_reach_every_output(one_pass) -> None:  # type: ignore[no-untyped-def]
    _, out = one_pass
    res = load_results(out)
    hists = res.samples["dy"].histograms
    assert {"mll@ee", "mll@mumu", "mll@on_z", "lep_pt@on_z"} <= set(hists)
    assert "mll" not in hists  # a histogram with regions is filled in the regions only
    assert hists["mll@ee"].region == "ee"
    assert "region ee" in hists["mll@ee"].title
    assert set(res.samples["dy"].region_cutflows) == {"ee", "mumu", "on_z"}
    assert (out / "csv" / "dy" / "mll@mumu.csv").is_file()
    assert (out / "cutflow" / "dy@on_z.txt").read_text().count("Z window") == 1
    keys = read_root(out / "histograms.root")
    assert "dy__mll@on_z" in keys
    doc = json.loads((out / "results.json").read_text())
    assert doc["samples"]["dy"]["region_cutflows"]["on_z"][-1]["step"] == "hard"


def test_region_config_errors_name_the_line(tmp_path) -> None:  # type: ignore[no-untyped-def]
    cfg = tmp_path / "bad.toml"
    cfg.write_text(COMMON + HISTS.replace("{extra}", 'regions = ["ee", "emu"]') + REGIONS)
    with pytest.raises(ConfigError, match=r"bad\.toml:\d+: histograms\.mll\.regions\[1\]: "
                                          r"'emu' is not a defined region"):
        load_config(cfg)
    cfg.write_text(COMMON + REGIONS.replace('after = "two leptons"', 'after = "two lepton"'))
    with pytest.raises(ConfigError,
                       match=r"regions\.on_z\.after: 'two lepton' is not a defined step"):
        load_config(cfg)
    cfg.write_text(COMMON + REGIONS.replace('"flavour == 22"', '"flavor == 22"'))
    with pytest.raises(ConfigError, match=r"regions\.ee\.require: bad expression: unknown name "
                                          r"'flavor'"):
        load_config(cfg)


def test_a_region_condition_that_is_not_true_false_is_an_error(tmp_path) -> None:  # type: ignore[no-untyped-def]
    cfg = tmp_path / "bad.toml"
    cfg.write_text(COMMON + REGIONS.replace('require = "flavour == 22"',
                                            'require = "leptons[0].pt"'))
    with pytest.raises(ConfigError, match=r"bad\.toml:\d+: regions\.ee\.require: .*true/false"):
        load_config(cfg)
    cfg.write_text(COMMON + REGIONS.replace('{ name = "hard", require = "leptons[0].pt > 30" }',
                                            '{ name = "hard", require = "leptons[0]" }'))
    with pytest.raises(ConfigError, match=r"regions\.on_z\.steps\[1\]\.require: .*true/false"):
        load_config(cfg)
