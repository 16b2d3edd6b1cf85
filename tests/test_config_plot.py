"""Config keys of the plots: [plot], a histogram's plot table, [measured.NAME]."""

from __future__ import annotations

from pathlib import Path

import pytest

from evtkin.config import load_config
from evtkin.errors import ConfigError

REPO = Path(__file__).resolve().parents[1]

BASE = """
[analysis]
luminosity_fb = 140.0

[samples.ttbar]
files = ["samples/toy_ttbar.lhe.gz"]

[samples.dy]
files = ["samples/toy_drellyan.lhe.gz"]

[objects.leptons]
particles = ["light_leptons"]

[[step]]
name = "two leptons"
require = "count(leptons) >= 2"

[histograms.mll]
x = { value = "leptons[0].pt", bins = 30, range = [60.0, 120.0], unit = "GeV" }
normalise = "events"
"""


def _load(tmp_path: Path, extra: str) -> object:
    p = tmp_path / "c.toml"
    p.write_text(BASE + extra, encoding="utf-8")
    return load_config(p, base_dir=REPO)


def test_plot_options_are_read(tmp_path: Path) -> None:
    cfg = _load(tmp_path, """plot = { logy = false, rebin = [60.0, 80.0, 90.0, 120.0] }

[plot]
stack = ["ttbar", "dy"]
data = ["points"]
colours = { dy = "#56B4E9" }
figsize = [7.0, 6.0]
sqrt_s_gev = 13000.0

[measured.points]
label = "toy points"
toy = true
tables = { mll = "samples/toy_measured_mll.csv" }
""")
    assert cfg.plot.options == {"stack": ["ttbar", "dy"], "data": ["points"],  # type: ignore[attr-defined]
                                "colours": {"dy": "#56B4E9"}, "figsize": [7.0, 6.0]}
    assert cfg.plot.sqrt_s_gev == 13000.0  # type: ignore[attr-defined]
    assert cfg.histograms["mll"].plot == {"logy": False,  # type: ignore[attr-defined]
                                          "rebin": [60.0, 80.0, 90.0, 120.0]}
    m = cfg.plot.measured["points"]  # type: ignore[attr-defined]
    assert m.toy
    assert m.tables["mll"] == REPO / "samples" / "toy_measured_mll.csv"


@pytest.mark.parametrize(("extra", "message"), [
    ('[plot]\nstack = ["ttbar", "dyy"]\n', r"c\.toml:\d+: plot\.stack\[1\]: .*'dyy'.*'dy'"),
    ('[plot]\nlogy = "yes"\n', r"plot\.logy: expected true or false"),
    ('[plot]\nformats = ["png", "jpg"]\n', r"unknown plot format 'jpg'"),
    ('[plot]\nxrange = [5.0, 1.0]\n', r"plot\.xrange: expected low < high"),
    ('[plot]\nstyle = "dark"\n', r"plot\.style"),
    ('plot = { rebin = 7 }\n', r"histograms\.mll\.plot\.rebin: rebin 7 does not divide the 30"),
    ('plot = { rebin = [60.0, 75.5, 120.0] }\n', r"edge 75\.5 is not one of the histogram"),
    ('[measured.p]\ntables = { mll = "samples/nothing.csv" }\n', r"no such file"),
    ('[measured.p]\ntables = { mlll = "samples/toy_measured_mll.csv" }\n',
     r"measured\.p\.tables\.mlll: .*'mll'"),
])
def test_plot_config_errors_name_the_key_and_line(tmp_path: Path, extra: str,
                                                  message: str) -> None:
    with pytest.raises(ConfigError, match=message):
        _load(tmp_path, extra)



def _sqrt_s(tmp_path: Path, text: str) -> object:
    from evtkin.run.result import plot_meta

    p = tmp_path / "s.toml"
    p.write_text(text, encoding="utf-8")
    return plot_meta(load_config(p, base_dir=REPO)).get("plot", {}).get("sqrt_s_gev")


def test_sqrt_s_from_the_beams_of_lhe_and_hepmc_files(tmp_path: Path) -> None:
    # LHE <init>: EBMUP 6500 + 6500 GeV; the HepMC shower sample's first event: two 6500 GeV
    # protons head on (status 4); √s = E1 + E2 for head-on beams (common practice)
    assert _sqrt_s(tmp_path, BASE) == pytest.approx(13000.0)
    hepmc = BASE.replace('files = ["samples/toy_drellyan.lhe.gz"]',
                         'files = ["samples/toy_drellyan_shower.hepmc.gz"]')
    hepmc = hepmc.replace('[samples.ttbar]\nfiles = ["samples/toy_ttbar.lhe.gz"]\n', "")
    assert "lhe" not in hepmc
    assert _sqrt_s(tmp_path, hepmc) == pytest.approx(13000.0, rel=1e-9)
