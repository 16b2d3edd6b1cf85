"""``evtkin run`` on the command line."""

from __future__ import annotations

from evtkin.cli import main
from run_helpers import drell_yan, write_lhe

CONFIG = """\
[samples.dy]
files = ["dy.lhe"]

[objects.leptons]
particles = ["light_leptons"]
min_pt = 10

[histograms.n_leptons]
x = {{ value = "count(leptons)", bins = 4, range = [0, 4] }}
normalise = "{norm}"

[output]
formats = ["json", "cutflow"]
"""


def test_cli_run_writes_results(tmp_path, capsys):
    write_lhe(tmp_path / "dy.lhe", drell_yan(200, seed=9), idwtup=3, xsec_pb=50.0)
    cfg = tmp_path / "a.toml"
    cfg.write_text(CONFIG.format(norm="raw"))
    out = tmp_path / "out"
    code = main(["run", str(cfg), "--out", str(out), "--max-events", "120", "--step-size", "50"])
    assert code == 0
    text = capsys.readouterr().out
    assert "dy: 120 events" in text
    assert str(out) in text
    assert (out / "results.json").is_file()
    assert (out / "cutflow" / "dy.txt").is_file()
    assert not (out / "histograms.root").exists()  # not asked for


def test_cli_run_reports_config_errors(tmp_path, capsys):
    cfg = tmp_path / "a.toml"
    cfg.write_text(CONFIG.format(norm="per_bin"))
    assert main(["run", str(cfg)]) == 1
    err = capsys.readouterr().err
    assert "a.toml:10: histograms.n_leptons.normalise" in err
    assert "evtkin: error:" in err
