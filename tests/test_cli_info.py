"""``evtkin info FILE [--json]``."""

from __future__ import annotations

import gzip
import json
from pathlib import Path

from evtkin.cli import main

FIXTURE = Path(__file__).parent / "data" / "lhe" / "aurora_toy.lhe"


def test_info_human(capsys):
    assert main(["info", str(FIXTURE)]) == 0
    out = capsys.readouterr().out
    # sqrt(s) = 2 * 6800 GeV for head-on proton beams (fixture: 6.8 TeV each)
    assert "sqrt(s) = 13600 GeV" in out
    assert "2212 (6800 GeV) + 2212 (6800 GeV)" in out
    assert "sigma = 812.5 ± 2.5 pb" in out
    assert "sigma = 61.25 ± 0.4 pb" in out
    assert "IDWTUP = -4" in out
    assert "scale_variation: 2" in out
    assert "pdf_members: 1" in out
    assert "events      24" in out
    assert "36.2 kB" in out


def test_info_json_on_gzip(tmp_path, capsys):
    gz = tmp_path / "toy.lhe.gz"
    gz.write_bytes(gzip.compress(FIXTURE.read_bytes()))
    assert main(["info", str(gz), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["compression"] == "gzip"
    assert d["n_events"] == 24  # the fixture holds 24 <event> blocks
    assert d["file_bytes"] == gz.stat().st_size
    assert d["beams"] == [2212, 2212]
    assert d["weighting"] == -4
    assert d["n_weights_by_group"] == {"scale_variation": 2, "pdf_members": 1}
    assert [p["process_id"] for p in d["processes"]] == [1, 2]
    assert d["total_xsec_pb"] == 873.75


def test_info_on_bad_file_is_a_clean_error(tmp_path, capsys):
    bad = tmp_path / "notes.txt"
    bad.write_text("hello\n")
    assert main(["info", str(bad)]) == 1
    err = capsys.readouterr().err
    assert "notes.txt" in err
    assert "not an LHE file" in err


HEPMC = b"""HepMC::Version 3.02.00
HepMC::Asciiv3-START_EVENT_LISTING
W nominal muR2
T toygen\\|1.0\\|toy data
E 1 1 3
U MEV MM
W 1 2
A 0 GenCrossSection 12.5 0.5
P 1 0 11 0 0 1 1 0 4
P 2 0 -11 0 0 -1 1 0 4
V -1 0 [1,2]
P 3 -1 22 0 0 0 2 0 1
HepMC::Asciiv3-END_EVENT_LISTING
"""


def test_info_hepmc(tmp_path, capsys):
    path = tmp_path / "ev.dat"  # the format comes from the content
    path.write_bytes(gzip.compress(HEPMC))
    assert main(["info", str(path)]) == 0
    out = capsys.readouterr().out
    assert "HepMC       Asciiv3 (version 3.02.00)" in out
    assert "units       MEV, MM" in out
    assert "12.5 ± 0.5 pb" in out
    assert "weights     2: nominal, muR2" in out
    assert "events      1" in out
    assert main(["info", str(path), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["form"] == "Asciiv3"
    assert d["n_events"] == 1
    assert d["compression"] == "gzip"
    assert d["tools"] == ["toygen | 1.0 | toy data"]
