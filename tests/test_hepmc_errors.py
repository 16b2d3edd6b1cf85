"""Bad HepMC input: HepMCError naming the file and 1-based line (strict), or every intact
event plus a warning with the count and lines skipped (strict=False). Nothing is lost
silently (issue 15 section 3, issue 18)."""

from __future__ import annotations

import gzip
import re
import warnings
from pathlib import Path

import awkward as ak
import pytest

import evtkin
from evtkin.errors import HepMCError
from evtkin.io.hepmc import HepMCWarning
from hepmc_textgen import random_events

GOOD = b"""HepMC::Version 3.02.00
HepMC::Asciiv3-START_EVENT_LISTING
E 1 1 3
U GEV MM
P 1 0 11 0 0 1 1 0 4
P 2 0 -11 0 0 -1 1 0 4
V -1 0 [1,2]
P 3 -1 22 0 0 0 2 0 1
E 2 1 3
U GEV MM
P 1 0 11 0 0 1 1 0 4
P 2 0 -11 0 0 -1 1 0 4
V -1 0 [1,2]
P 3 -1 22 0 0 0 2 0 1
E 3 1 3
U GEV MM
P 1 0 11 0 0 1 1 0 4
P 2 0 -11 0 0 -1 1 0 4
V -1 0 [1,2]
P 3 -1 22 0 0 0 2 0 1
HepMC::Asciiv3-END_EVENT_LISTING
"""
LINES = GOOD.split(b"\n")


def _with(tmp_path: Path, line_no: int, new: bytes | None) -> Path:
    """GOOD with 1-based line ``line_no`` replaced (None: deleted)."""
    lines = list(LINES)
    if new is None:
        del lines[line_no - 1]
    else:
        lines[line_no - 1] = new
    path = tmp_path / "bad.hepmc"
    path.write_bytes(b"\n".join(lines))
    return path


def _read(path: Path, **kw: object) -> list[ak.Array]:
    return list(evtkin.read_hepmc(path, **kw))  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("line_no", "new", "needle"),
    [
        (5, b"P 1 0 11 0 0 x 1 0 4", "malformed P line"),
        (5, b"P 1 0 11 0 0 1 1 0", "malformed P line"),
        (7, b"V -1 0 [1,,2]", "malformed V line"),
        (8, b"P 3 -4 22 0 0 0 2 0 1", "points to vertex -4, which does not exist"),
        (8, b"P 3 9 22 0 0 0 2 0 1", "refers to particle 9"),
        (4, b"U GEV INCH", "expected 'U GEV|MEV MM|CM'"),
        (4, b"Q what", "unexpected line"),
        (6, b"P 1 0 -11 0 0 -1 1 0 4", "id 1 is given twice"),
        # event attributes that are read: their values must parse (the PDF set ids come
        # in pairs); IO_GenEvent's F line has no place in an Asciiv3 file
        (4, b"A 0 signal_process_id 8.1", "malformed A line"),
        (4, b"A 0 GenPdfInfo 21 -2 0.1 0.2 91 1 1 303400", "malformed A line"),
        (4, b"F 21 21 0.1 0.2 91 1 1 0 0", "unexpected line"),
    ],
)
@pytest.mark.parametrize("kind", ["numba", "fallback"])
def test_malformed_line_names_file_and_line(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, line_no: int, new: bytes, needle: str,
    kind: str,
) -> None:  # fmt: skip
    _scanner(monkeypatch, kind)
    path = _with(tmp_path, line_no, new)
    with pytest.raises(HepMCError, match=re.escape(f"{path}: line {line_no}: ")) as err:
        _read(path)
    assert needle in str(err.value)
    assert isinstance(err.value, ValueError)
    # lenient: the two intact events, and a warning naming the lines skipped
    with pytest.warns(HepMCWarning, match=r"skipped 1 damaged event\(s\) \(lines 3-8\)"):
        got = _read(path, strict=False)
    assert ak.concatenate(got).event_number.tolist() == [2, 3]


def _scanner(monkeypatch: pytest.MonkeyPatch, kind: str) -> None:
    from evtkin.io import hepmc, hepmc_scan

    if kind == "fallback":
        from evtkin.io.hepmc_fallback import scan_py

        monkeypatch.setattr(hepmc, "_KERNEL", scan_py)
        monkeypatch.setattr(hepmc, "_KIND", "fallback")
    else:
        kern = hepmc_scan.compiled_kernel()
        assert kern is not None
        monkeypatch.setattr(hepmc, "_KERNEL", kern)
        monkeypatch.setattr(hepmc, "_KIND", "numba")


@pytest.mark.parametrize("kind", ["numba", "fallback"])
def test_counts_that_disagree(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, kind: str) -> None:
    _scanner(monkeypatch, kind)
    path = _with(tmp_path, 9, b"E 2 1 4")  # 4 particles declared, 3 follow
    with pytest.raises(HepMCError, match=r"line 9: the event line declares 4 particles but 3"):
        _read(path)
    path = _with(tmp_path, 9, b"E 2 2 3")
    with pytest.raises(HepMCError, match=r"line 9: the event line declares 2 vertices but"):
        _read(path)
    # a deleted event line merges two events: the counts catch it
    path = _with(tmp_path, 9, None)
    with pytest.raises(HepMCError, match=r"line 3: the event line declares 3 particles but 6"):
        _read(path)
    with pytest.warns(HepMCWarning, match=r"skipped 1 damaged"):
        got = _read(path, strict=False)
    assert ak.concatenate(got).event_number.tolist() == [3]


def test_not_hepmc_and_empty(tmp_path: Path) -> None:
    path = tmp_path / "x.hepmc"
    path.write_bytes(b"<LesHouchesEvents version='3.0'>\n")
    with pytest.raises(HepMCError, match=r"x.hepmc: line 1: not a HepMC ASCII file"):
        _read(path)
    with pytest.raises(HepMCError, match="not a HepMC ASCII file"):
        evtkin.hepmc_info(path)
    path.write_bytes(b"")
    with pytest.raises(HepMCError, match=r"x.hepmc: the file is empty"):
        _read(path)
    with pytest.raises(HepMCError, match="cannot open"):
        _read(tmp_path / "missing.hepmc")


@pytest.mark.parametrize("kind", ["numba", "fallback"])
def test_cut_short_mid_event(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, kind: str) -> None:
    _scanner(monkeypatch, kind)
    path = tmp_path / "cut.hepmc"
    cut = GOOD.index(b"P 2 0 -11", GOOD.index(b"E 3")) + 12  # inside a number
    path.write_bytes(GOOD[:cut])
    with pytest.raises(HepMCError, match=r"line 15: the file is cut short inside the event "
                       r"that starts here; 2 complete events precede it"):  # fmt: skip
        _read(path)
    with pytest.warns(HepMCWarning, match=r"cut short inside its last event \(after 2 complete"):
        got = _read(path, strict=False)
    assert ak.concatenate(got).event_number.tolist() == [1, 2]
    # cut at a line end between events: no END line
    path.write_bytes(GOOD[: GOOD.index(b"E 3")])
    with pytest.raises(HepMCError, match=r"without the END_EVENT_LISTING line after 2 complete"):
        _read(path)


def test_cut_gzip_stream_lenient_delivers(tmp_path: Path) -> None:
    ev = random_events(400, seed=11)
    path = tmp_path / "full.hepmc.gz"
    evtkin.write_hepmc(path, ev, weight_names=("a", "b"))
    data = path.read_bytes()
    cut = tmp_path / "cut.hepmc.gz"
    cut.write_bytes(data[: len(data) // 2])
    with pytest.raises(HepMCError, match="complete events precede it"):
        _read(cut)
    with pytest.warns(HepMCWarning, match="cut short"):
        got = ak.concatenate(_read(cut, strict=False))
    assert 100 < len(got) < 400
    # the delivered events are exactly the first ones of the file
    assert got.event_number.tolist() == list(range(1, len(got) + 1))


def test_text_after_the_end(tmp_path: Path) -> None:
    path = tmp_path / "two.hepmc"
    path.write_bytes(GOOD + GOOD)
    with pytest.raises(HepMCError, match=r"line 22: text after the END_EVENT_LISTING line"):
        _read(path)
    with pytest.warns(HepMCWarning, match="a second file appended"):
        got = _read(path, strict=False)
    assert len(ak.concatenate(got)) == 3


def test_weight_count_disagrees(tmp_path: Path) -> None:
    text = GOOD.replace(b"HepMC::Asciiv3-START_EVENT_LISTING\n",
                        b"HepMC::Asciiv3-START_EVENT_LISTING\nW a b\n")  # fmt: skip
    text = text.replace(b"U GEV MM\n", b"U GEV MM\nW 1 2\n", 2)
    path = tmp_path / "w.hepmc"
    path.write_bytes(text)
    with pytest.raises(HepMCError, match=r"line 18: the event holds 0 weights but the file de"):
        _read(path)
    path.write_bytes(text.replace(b"W 1 2\n", b"W 1 2 3\n", 1))
    with pytest.raises(HepMCError, match=r"line 6: the event holds 3 weights but the file dec"):
        _read(path)


def test_huge_count_allocates_nothing(tmp_path: Path) -> None:
    # a count far beyond the bytes that follow is a disagreement, not an allocation
    path = _with(tmp_path, 3, b"E 1 1 2147483000")
    with pytest.raises(HepMCError, match="declares 2147483000 particles but 3"):
        _read(path)
    text = (b"HepMC::IO_GenEvent-START_EVENT_LISTING\n"
            b"E 1 -1 0 0 0 0 0 1 0 0 2000000000 1 2 3\n")  # fmt: skip
    path.write_bytes(text)
    with pytest.raises(HepMCError, match="line 2: malformed E line"):
        _read(path)


def test_long_tokens_scan_in_linear_time(tmp_path: Path) -> None:
    # not a timing assertion: a 10^5-character token is rejected in one pass
    for n in (10**4, 10**5):
        path = _with(tmp_path, 5, b"P 1 0 11 0 0 " + b"1" * n + b"x 1 0 4")
        with pytest.raises(HepMCError, match="line 5"):
            _read(path)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", HepMCWarning)
            assert len(ak.concatenate(_read(path, strict=False))) == 2


def test_gzip_detected_by_content(tmp_path: Path) -> None:
    path = tmp_path / "looks_plain.hepmc"
    path.write_bytes(gzip.compress(GOOD, mtime=0))
    assert len(ak.concatenate(_read(path))) == 3


@pytest.mark.parametrize("kind", ["numba", "fallback"])
def test_malformed_pdf_line_of_io_genevent(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                           kind: str) -> None:  # fmt: skip
    _scanner(monkeypatch, kind)
    path = tmp_path / "v2.hepmc"
    evtkin.write_hepmc(path, random_events(8, seed=2, grouped=True), form="IO_GenEvent",
                       weight_names=("a", "b"))  # fmt: skip
    lines = path.read_bytes().split(b"\n")
    at = next(i for i, line in enumerate(lines) if line.startswith(b"F "))
    lines[at] = b" ".join(lines[at].split()[:9])  # "F", 7 values and one PDF set id of the pair
    path.write_bytes(b"\n".join(lines))
    with pytest.raises(HepMCError, match=re.escape(f"{path}: line {at + 1}: malformed F line")) \
            as err:
        _read(path)
    assert "expected: F id1 id2 x1 x2 scale xf1 xf2 [pdf_set1 pdf_set2]" in str(err.value)
    with pytest.warns(HepMCWarning, match=r"skipped 1 damaged event"):
        got = _read(path, strict=False)
    assert len(ak.concatenate(got)) == 7
