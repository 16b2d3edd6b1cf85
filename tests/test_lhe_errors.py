"""read_lhe / lhe_info on bad input (issue 2 §4): clear LHEErrors naming file and line."""

from __future__ import annotations

import gzip
from pathlib import Path

import awkward as ak
import pytest

import evtkin
from evtkin.io import lhe as lhe_mod
from evtkin.io.lhe import LHEWarning
from evtkin.io.lhe_fallback import scan_kernel_py
from lhe_textgen import minimal_file

EV = """<event>
 2 1 1.0 91.0 0.0078 0.118
 11 1 0 0 0 0 1.0 2.0 3.0 3.7416573867739413 0.0 0.0 9.0
 -11 1 0 0 0 0 -1.0 -2.0 -3.0 3.7416573867739413 0.0 0.0 9.0
</event>
"""
HEAD_LINES = 5  # '<LesHouchesEvents', '<init>', beam line, process line, '</init>'


@pytest.fixture(params=["numba", "fallback"])
def scanner(request, monkeypatch):
    """Every error test runs with both scanners: they must agree."""
    if request.param == "fallback":
        monkeypatch.setattr(lhe_mod, "_KERNEL", scan_kernel_py)
        monkeypatch.setattr(lhe_mod, "_KIND", "fallback")
    return request.param


def write(tmp_path: Path, text: str, name: str = "bad.lhe") -> Path:
    p = tmp_path / name
    p.write_bytes(text.encode())
    return p


def read(path, **kw):
    return list(evtkin.read_lhe(path, **kw))


def test_lheerror_is_valueerror():
    assert issubclass(evtkin.LHEError, ValueError)


def test_truncated_mid_event_raises_with_count_and_line(tmp_path, scanner):
    text = minimal_file(EV * 5)
    cut = text.index("</event>", text.index("<event>", len(text) // 2))
    path = write(tmp_path, text[: cut - 20])
    n_complete = text[:cut].count("</event>")
    start_line = text[:cut].count("\n") - 3  # <event> is 4 lines above </event>
    with pytest.raises(evtkin.LHEError) as err:
        read(path, step_size=2)
    msg = str(err.value)
    assert str(path) in msg
    assert f"line {start_line}:" in msg
    assert f"{n_complete} complete events precede" in msg


def test_truncated_non_strict_warns_and_delivers(tmp_path, scanner):
    text = minimal_file(EV * 5)
    path = write(tmp_path, text[: text.rindex("-11 1")])
    with pytest.warns(LHEWarning, match="4 complete events"):
        chunks = read(path, step_size=3, strict=False)
    assert [len(c) for c in chunks] == [3, 1]


def test_missing_closing_root_tag(tmp_path, scanner):
    text = minimal_file(EV * 2).replace("</LesHouchesEvents>\n", "")
    path = write(tmp_path, text)
    with pytest.raises(evtkin.LHEError, match="without </LesHouchesEvents> after 2 complete"):
        read(path)
    with pytest.warns(LHEWarning):
        assert len(ak.concatenate(read(path, strict=False))) == 2


def test_truncated_gzip_stream(tmp_path, scanner):
    raw = minimal_file(EV * 50).encode()
    path = tmp_path / "cut.lhe.gz"
    path.write_bytes(gzip.compress(raw)[:-40])
    with pytest.raises(evtkin.LHEError, match=str(path)):
        read(path)


def test_nup_larger_than_particle_lines(tmp_path, scanner):
    body = EV + EV.replace(" 2 1 1.0", " 3 1 1.0")
    path = write(tmp_path, minimal_file(body))
    line = HEAD_LINES + 5 + 5  # the "</event>" where the third particle should be
    with pytest.raises(evtkin.LHEError, match=rf"line {line}: NUP disagrees.*NUP=3 but has 2"):
        read(path)


def test_nup_smaller_than_particle_lines(tmp_path, scanner):
    body = EV.replace(" 2 1 1.0", " 1 1 1.0")
    path = write(tmp_path, minimal_file(body))
    with pytest.raises(evtkin.LHEError, match=rf"line {HEAD_LINES + 4}: NUP disagrees"):
        read(path)


def test_non_numeric_float_token(tmp_path, scanner):
    body = EV + EV.replace("-1.0 -2.0", "-1.0 abc")
    path = write(tmp_path, minimal_file(body))
    with pytest.raises(
        evtkin.LHEError, match=rf"line {HEAD_LINES + 5 + 4}: expected a number, found 'abc'"
    ):
        read(path)


def test_non_numeric_integer_token(tmp_path, scanner):
    body = EV.replace("11 1 0 0", "11 1.5 0 0", 1)
    path = write(tmp_path, minimal_file(body))
    with pytest.raises(
        evtkin.LHEError, match=rf"line {HEAD_LINES + 3}: expected an integer, found '1.5'"
    ):
        read(path)


def test_wrong_field_counts(tmp_path, scanner):
    path = write(tmp_path, minimal_file(EV.replace(" 0.0 0.0 9.0\n -11", " 0.0 9.0\n -11")))
    with pytest.raises(
        evtkin.LHEError, match=rf"line {HEAD_LINES + 3}: expected 13 numbers.*found 12"
    ):
        read(path)
    path = write(tmp_path, minimal_file(EV.replace("0.0078 0.118", "0.0078")))
    with pytest.raises(evtkin.LHEError, match=rf"line {HEAD_LINES + 2}: expected 6 numbers"):
        read(path)


def test_undeclared_weight_id_names_the_line(tmp_path, scanner):
    head = "<header><initrwgt><weight id='w1'>x</weight></initrwgt></header>\n"
    body = EV + EV.replace(
        "</event>", "<rwgt>\n<wgt id='w1'>1</wgt>\n<wgt id='zz'>2</wgt>\n</rwgt>\n</event>"
    )
    path = write(tmp_path, minimal_file(body, head=head))
    line = 1 + 1 + 4 + 5 + 5 + 2
    with pytest.raises(evtkin.LHEError, match=rf"line {line}: <wgt id='zz'> is not declared.*w1"):
        read(path)


def test_rwgt_in_file_without_declarations(tmp_path, scanner):
    body = EV.replace("</event>", "<rwgt><wgt id='1'>2.0</wgt></rwgt>\n</event>")
    path = write(tmp_path, minimal_file(body))
    with pytest.raises(evtkin.LHEError, match="not declared"):
        read(path)


def test_weights_count_mismatch(tmp_path, scanner):
    head = "<header><initrwgt><weight id='a'/><weight id='b'/></initrwgt></header>\n"
    body = EV.replace("</event>", "<weights> 1 2 3 </weights>\n</event>")
    path = write(tmp_path, minimal_file(body, head=head))
    with pytest.raises(evtkin.LHEError, match="<weights> holds 3 values but the file declares 2"):
        read(path)


def test_not_an_lhe_file(tmp_path):
    path = write(tmp_path, "col1,col2\n1,2\n", name="table.csv")
    with pytest.raises(evtkin.LHEError, match=r"table.csv: line 1: not an LHE file"):
        read(path)
    path = write(tmp_path, "<html><body>hi</body></html>\n", name="page.html")
    with pytest.raises(evtkin.LHEError, match=r"not an LHE file.*found '<html'"):
        evtkin.lhe_info(path)


def test_empty_file(tmp_path):
    path = write(tmp_path, "", name="empty.lhe")
    with pytest.raises(evtkin.LHEError, match=r"empty\.lhe: the file is empty"):
        read(path)
    path = tmp_path / "empty.lhe.gz"
    path.write_bytes(gzip.compress(b""))
    with pytest.raises(evtkin.LHEError, match="is empty"):
        read(path)


def test_missing_file(tmp_path):
    with pytest.raises(evtkin.LHEError, match=r"nope\.lhe: cannot open"):
        read(tmp_path / "nope.lhe")


def test_event_before_init(tmp_path):
    path = write(tmp_path, '<LesHouchesEvents version="1.0">\n' + EV + "</LesHouchesEvents>\n")
    with pytest.raises(evtkin.LHEError, match=r"line 2: <event> before the <init> block"):
        read(path)


def test_bad_init_lines(tmp_path):
    init = "<init>\n 2212 2212 6500 6500 0 0 0 0 3 2\n 1.5 0.1 1.5 7\n</init>\n"
    path = write(tmp_path, minimal_file(EV, init=init))
    with pytest.raises(
        evtkin.LHEError, match=r"line 3: <init> declares NPRUP=2 process lines but 1"
    ):
        evtkin.lhe_info(path)
    init = "<init>\n 2212 2212 6500 x 0 0 0 0 3 1\n 1.5 0.1 1.5 7\n</init>\n"
    path = write(tmp_path, minimal_file(EV, init=init))
    with pytest.raises(
        evtkin.LHEError, match=r"line 3: <init> beam line: expected a number, found 'x'"
    ):
        evtkin.lhe_info(path)


def test_step_size_must_be_positive(tmp_path):
    path = write(tmp_path, minimal_file(EV))
    with pytest.raises(ValueError, match="step_size"):
        evtkin.read_lhe(path, step_size=0)
