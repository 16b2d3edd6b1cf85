"""Header values and character references (issue 18 §2): only LHEError, naming file and line."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import evtkin
from evtkin.cli import main
from lhe_textgen import minimal_file

EV = (
    "<event>\n 1 1 1.0 91.0 0.0078125 0.118\n"
    " 11 1 0 0 0 0 1.0 2.0 3.0 3.7416573867739413 0.0 0.0 9.0\n</event>\n"
)


def write(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "h.lhe"
    p.write_bytes(text.encode())
    return p


def with_init(tmp_path: Path, beam_line: str, process_line: str = " 1.5 0.1 1.5 7") -> Path:
    init = f"<init>\n{beam_line}\n{process_line}\n</init>\n"
    return write(tmp_path, minimal_file(EV, init=init))


@pytest.mark.parametrize("energy", ["-6500", "nan", "1e999"])
def test_bad_beam_energy_is_a_clear_error(tmp_path, energy, capsys):
    # LHEF 1.0 / Les Houches accord: EBMUP is the beam energy in GeV (>= 0)
    path = with_init(tmp_path, f" 2212 2212 {energy} 6500 0 0 0 0 3 1")
    with pytest.raises(evtkin.LHEError, match=rf"{path}: line 3: .*EBMUP1 must be a non-negative"):
        evtkin.lhe_info(path)
    # the command line reports it as an error, no traceback
    assert main(["info", str(path), "--json"]) == 1
    assert "EBMUP1 must be a non-negative beam energy" in capsys.readouterr().err


def test_valid_header_to_dict_is_json(tmp_path):
    path = with_init(tmp_path, " 2212 2212 6500 7000 0 0 0 0 3 1")
    d = evtkin.lhe_info(path).to_dict()
    json.dumps(d)
    assert d["sqrt_s"] == pytest.approx(2 * (6500 * 7000) ** 0.5)  # sqrt(4 E1 E2), head-on beams


@pytest.mark.parametrize(
    "line",
    [" 1.5 -0.1 1.5 7", " nan 0.1 1.5 7", " 1.5 0.1 1.5 99999999999", " 1.5 0.1 1.5 " + "7" * 5000],
)
def test_bad_process_lines(tmp_path, line):
    path = with_init(tmp_path, " 2212 2212 6500 6500 0 0 0 0 3 1", line)
    with pytest.raises(evtkin.LHEError, match=rf"{path}: line 4: <init> process line"):
        evtkin.lhe_info(path)


def test_huge_integer_in_beam_line(tmp_path):
    path = with_init(tmp_path, " " + "2" * 5000 + " 2212 6500 6500 0 0 0 0 3 1")
    with pytest.raises(evtkin.LHEError, match=r"line 3: <init> beam line: expected an integer"):
        evtkin.lhe_info(path)


def weight_head(wid: str) -> str:
    return f"<header><initrwgt><weight id='{wid}'>x</weight></initrwgt></header>\n"


@pytest.mark.parametrize("ref", ["&#xD800;", "&#55296;", "&#0;", "&#x110000;", "&#xFFFE;"])
def test_character_reference_to_a_non_character(tmp_path, ref):
    # XML 1.0 sec. 2.2: surrogates, NUL, U+FFFE/FFFF and code points beyond U+10FFFF are no
    # characters; a reference to one is an error of the file
    path = write(tmp_path, minimal_file(EV, head=weight_head("w" + ref)))
    with pytest.raises(evtkin.LHEError, match=rf"{path}: the character reference .* is not"):
        evtkin.lhe_info(path)
    with pytest.raises(evtkin.LHEError):
        list(evtkin.read_lhe(path))


def test_overlong_character_reference_stays_text(tmp_path):
    # 5000 digits cannot name a code point: the text is kept as it is (no conversion)
    wid = "w&#" + "1" * 5000 + ";"
    path = write(tmp_path, minimal_file(EV, head=weight_head(wid)))
    assert evtkin.lhe_info(path).weight_names == (wid,)
    assert len(next(iter(evtkin.read_lhe(path)))) == 1


def test_valid_references_still_resolve(tmp_path):
    path = write(tmp_path, minimal_file(EV, head=weight_head("&#x1F600;&#955;")))
    assert evtkin.lhe_info(path).weight_names == ("\U0001f600\u03bb",)


def test_surrogate_in_root_tag(tmp_path):
    path = write(tmp_path, minimal_file(EV, version="3.0&#xDFFF;"))
    with pytest.raises(evtkin.LHEError, match=rf"{path}: line 1: the character reference"):
        evtkin.lhe_info(path)
