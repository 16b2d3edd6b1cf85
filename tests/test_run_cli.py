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


EARLY_START = r"""
import sys
import evtkin.run.forkserver as fs
heavy = ("numpy", "awkward", "numba", "evtkin.run.executors")
seen = []
fs.start_forkserver = lambda preload=None: seen.append([m for m in heavy if m in sys.modules])
from evtkin.cli import main
main(["run", sys.argv[1], "--jobs", "2"])
print(seen)
"""


def test_cli_jobs_starts_the_forkserver_before_the_heavy_imports(tmp_path):
    # the workers' forkserver imports evtkin while this process does: started first thing
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-c", EARLY_START, str(tmp_path / "missing.toml")],
                         capture_output=True, text=True, check=True).stdout
    calls = out.strip().splitlines()[-1]
    # the first start (later ones are no-ops) came before any of them was imported
    assert calls.startswith("[[], "), calls
