"""Structural validation of the event stream (issue 18 §1-3): both scanners, same verdicts.

LHEF 1.0 (hep-ph/0609017) and 3.0 (arXiv:1405.1067): every event is one ``<event>``
element; its optional blocks (``<rwgt>`` with its ``<wgt>`` tags, ``<weights>``,
``<scales>``, ...) are elements inside it; XML 1.0 (sec. 2.5): a comment ends at the first
``-->`` and holds no markup. A damaged event is an LHEError naming file and line; with
``strict=False`` it is skipped (reading resumes at the next event) and one LHEWarning
gives the count and lines of what was skipped, while every intact event is delivered.
"""

from __future__ import annotations

import gzip
import re
import warnings
from pathlib import Path

import awkward as ak
import numpy as np
import pytest

import evtkin
from evtkin.cli.info import count_events
from evtkin.io import lhe as lhe_mod
from evtkin.io.lhe import LHEWarning
from evtkin.io.lhe_fallback import scan_kernel_py
from lhe_textgen import minimal_file

HEAD = "<header><initrwgt><weight id='a'>x</weight><weight id='b'>y</weight></initrwgt></header>\n"
HEAD_LINES = 6  # root, header, <init>, beam line, process line, </init>


def ev(k: int, extra: str = "") -> str:
    """A valid event whose XWGTUP (k) identifies it, with two rwgt weights."""
    return (
        f"<event>\n 2 {k} {k}.0 91.0 0.0078 0.118\n"
        " 11 1 0 0 0 0 1.0 2.0 3.0 3.7416573867739413 0.0 0.0 9.0\n"
        " -11 1 0 0 0 0 -1.0 -2.0 -3.0 3.7416573867739413 0.0 0.0 9.0\n"
        f"{extra}<rwgt>\n<wgt id='a'>{k}.5</wgt>\n<wgt id='b'>{k}.25</wgt>\n</rwgt>\n</event>\n"
    )


EV_LINES = 8


@pytest.fixture(params=["numba", "fallback"])
def scanner(request, monkeypatch):
    if request.param == "fallback":
        monkeypatch.setattr(lhe_mod, "_KERNEL", scan_kernel_py)
        monkeypatch.setattr(lhe_mod, "_KIND", "fallback")
    return request.param


def write(tmp_path: Path, body: str, name: str = "bad.lhe") -> Path:
    p = tmp_path / name
    p.write_bytes(minimal_file(body, head=HEAD).encode())
    return p


def weights_of(path: Path, **kw) -> list[float]:
    return ak.to_list(ak.concatenate(list(evtkin.read_lhe(path, **kw))).weight)


def lenient(path: Path) -> tuple[list[float], str]:
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        got = weights_of(path, strict=False)
    msgs = [str(w.message) for w in rec if issubclass(w.category, LHEWarning)]
    assert len(msgs) == 1, msgs
    return got, msgs[0]


def line_of(text: str, needle: str) -> int:
    return text[: text.index(needle)].count("\n") + 1


# each case: the damaged body, the expected message (regex) and the needle on its line
CASES = {
    "unclosed optional block": (
        ev(1) + ev(2, "<scales pt_clust_1='10'>\n") + ev(3),
        r"<scales> is not closed inside its event", "<scales",
    ),
    "deleted <event> line": (
        ev(1) + ev(2).replace("<event>\n", "", 1) + ev(3),
        r"</event> without an open <event>", "</event>\n<event>\n 2 3",
    ),
    "<rwgt> not closed": (
        ev(1) + ev(2).replace("</rwgt>\n", "") + ev(3),
        r"</event> before </rwgt>", "</event>\n<event>\n 2 3",
    ),
    "moved </rwgt> line": (
        ev(1) + ev(2).replace("</rwgt>\n</event>\n", "</event>\n") + "</rwgt>\n" + ev(3),
        r"</event> before </rwgt>", "</event>\n</rwgt>",
    ),
    "comment opened in a <wgt> value": (
        ev(1) + ev(2).replace("<wgt id='a'>2.5</wgt>", "<wgt id='a'>2.5<!-- </wgt>") + ev(3),
        r"expected </wgt> right after the value", "<!-- </wgt>",
    ),
    "comment opened in an event": (
        ev(1) + ev(2).replace("</rwgt>\n", "</rwgt>\n<!-- note\n") + ev(3) + "-->\n" + ev(4),
        r"a comment opened inside an event does not close inside it", "<!-- note",
    ),
    "weight id twice": (
        ev(1) + ev(2).replace("<wgt id='b'>", "<wgt id='a'>") + ev(3),
        r"weight 'a' is given twice in one event", "<wgt id='a'>2.25",
    ),
    "<weights> and <rwgt> both": (
        ev(1) + ev(2, "<weights> 1 2 </weights>\n") + ev(3),
        r"weight 'a' is given twice in one event", "<wgt id='a'>2.5",
    ),
    "IDPRUP beyond 32 bits": (
        ev(1) + ev(2).replace(" 2 2 2.0", " 2 4294967297 2.0") + ev(3),
        r"expected an integer, found '4294967297'", " 2 4294967297",
    ),
    "NUP beyond the following bytes": (
        ev(1) + ev(2).replace(" 2 2 2.0", " 900000000 2 2.0") + ev(3),
        r"NUP=900000000 particle lines cannot fit", " 900000000",
    ),
    "NUP beyond 32 bits": (
        ev(1) + ev(2).replace(" 2 2 2.0", " 99999999999999 2 2.0") + ev(3),
        r"expected an integer, found '99999999999999'", " 99999999999999",
    ),
    "a quote that never closes in a tag": (
        ev(1) + ev(2, "<scales a='1>\n") + ev(3),
        r"malformed tag: a '<' before its closing '>'", "<scales a=",
    ),
    "comment left open inside a skipped block": (
        ev(1) + ev(2, "<mgrwt>\n<!--<rscale> 2 0.1 </rscale>\n<</mgrwt>\n") + ev(3),
        r"<mgrwt> is not closed inside its event", "<mgrwt>",
    ),
    "an event inside an event": (
        ev(1) + ev(2).replace("</event>\n", "") + ev(3),
        r"<event> inside an event: the event is not closed", "<event>\n 2 3",
    ),
}


@pytest.mark.parametrize("case", sorted(CASES))
def test_damage_is_an_error_naming_the_line(tmp_path, scanner, case):
    body, message, needle = CASES[case]
    path = write(tmp_path, body)
    text = path.read_text()
    line = line_of(text, needle)
    with pytest.raises(evtkin.LHEError) as err:
        weights_of(path)
    msg = str(err.value)
    assert re.search(message, msg), msg
    assert f"{path}: line {line}:" in msg


@pytest.mark.parametrize("case", sorted(CASES))
def test_lenient_skips_the_damage_and_delivers_every_intact_event(tmp_path, scanner, case):
    body, message, needle = CASES[case]
    path = write(tmp_path, body)
    intact = [float(k) for k in range(1, 5) if ev(k) in body]
    got, warning = lenient(path)
    assert got == intact
    assert "skipped 1 damaged part(s)" in warning
    assert f"line(s) {line_of(path.read_text(), needle)};" in warning
    assert re.search(message, warning)


def test_intact_events_keep_their_own_weights(tmp_path, scanner):
    # the event after an unclosed <scales> must not give its weights to the damaged one
    path = write(tmp_path, ev(1) + ev(2, "<scales>\n") + ev(3))
    with pytest.warns(LHEWarning):
        arr = ak.concatenate(list(evtkin.read_lhe(path, strict=False)))
    assert ak.to_list(arr.weight) == [1.0, 3.0]
    assert ak.to_list(arr.weights) == [[1.5, 1.25], [3.5, 3.25]]


def test_commented_out_events_are_no_events(tmp_path, scanner):
    # XML 1.0 sec. 2.5: a comment between events is not markup; both counts skip it
    body = ev(1) + "<!--\n" + ev(2) + "-->\n" + ev(3)
    path = write(tmp_path, body)
    assert weights_of(path) == [1.0, 3.0]
    assert count_events(str(path)) == 2


def test_count_agrees_with_reader_on_event_like_text(tmp_path):
    body = ev(1) + "<!-- </event> -->\n" + ev(2) + "<!-- an <event> -->\n" + ev(3)
    path = write(tmp_path, body)
    assert count_events(str(path)) == len(weights_of(path)) == 3


def test_leading_zeros_in_integer_fields_agree(tmp_path, scanner):
    # Fortran I-format fields may be zero-padded; the value counts, not the digits
    path = write(tmp_path, ev(1).replace(" 11 1 0 0", " 00000000011 1 0 0"))
    arr = ak.concatenate(list(evtkin.read_lhe(path)))
    assert ak.to_list(arr.particles.pdgid) == [[11, -11]]


def test_second_header_in_one_gzip_stream(tmp_path, scanner):
    # two files joined as gzip members (RFC 1952 sec. 2.2: a gzip file is a series of members)
    one = minimal_file(ev(1) + ev(2), head=HEAD).encode()
    two = minimal_file(ev(3), head=HEAD).encode()
    path = tmp_path / "joined.lhe.gz"
    path.write_bytes(gzip.compress(one) + gzip.compress(two))
    second = one.count(b"\n") + 1
    with pytest.raises(evtkin.LHEError, match=rf"line {second}: a second LHE header"):
        weights_of(path)
    got, warning = lenient(path)
    assert got == [1.0, 2.0, 3.0]
    assert f"line(s) {second};" in warning
    assert "second LHE header" in warning


def test_only_intact_events_many_damages(tmp_path, scanner):
    rng = np.random.default_rng(5)
    events = [ev(k) for k in range(1, 41)]
    damaged = sorted(rng.choice(40, size=6, replace=False).tolist())
    for i in damaged:
        events[i] = events[i].replace("</rwgt>\n", "", 1)
    path = write(tmp_path, "".join(events))
    got, warning = lenient(path)
    assert got == [float(k + 1) for k in range(40) if k not in damaged]
    assert "skipped 6 damaged part(s)" in warning


@pytest.mark.parametrize("where", ["particle", "wgt"])
def test_a_million_character_bad_token_is_diagnosed(tmp_path, scanner, where):
    # quadratic scanning of a bad token took 13 s for 2*10^4 characters, so it would take
    # about a day for 10^6; linear scanning takes milliseconds (bench/bench_lhe_token.py
    # prints the growth from 10^4 to 10^6)
    tok = "1" * 1_000_000 + "x"
    if where == "particle":
        body = ev(1).replace(" 1.0 2.0 3.0", f" {tok} 2.0 3.0", 1)
    else:
        body = ev(1).replace("<wgt id='a'>1.5", f"<wgt id='a'>{tok}", 1)
    path = write(tmp_path, body)
    with pytest.raises(evtkin.LHEError, match="expected a number, found '1111"):
        weights_of(path)


# XML 1.0 sec. 3.1: a close tag is '</' Name S? '>': white space may precede the '>'
SPACED_CLOSES = ["</event\t>", "</event >", "</event\n  >", "</event\r\n>"]


@pytest.mark.parametrize("close", SPACED_CLOSES)
def test_close_tag_with_white_space_is_read_and_counted(tmp_path, scanner, close):
    body = ev(1) + ev(2).replace("</event>", close) + ev(3)
    path = write(tmp_path, body)
    assert weights_of(path) == [1.0, 2.0, 3.0]
    assert count_events(str(path)) == 3
    assert evtkin.lhe_info(path, count=True).n_events == 3
    assert evtkin.lhe_info(path).n_events is None  # only the start of the file is read


def test_count_is_the_same_for_every_read_block_size(tmp_path, monkeypatch):
    # marks (a comment start or end, a spaced close tag) cut by a block boundary count once
    from evtkin.io import lhe_header

    body = (ev(1).replace("</event>", "</event \t\n >") + "<!-->\n" + ev(2) + "-->\n"
            + ev(3).replace("</event>", "</event\t>") + "<!-- </event\t> -->" + ev(4))
    path = write(tmp_path, body)
    expected = len(weights_of(path))
    assert expected == 3  # the event inside the comment is no event
    for block in range(1, 40):
        monkeypatch.setattr(lhe_header, "_COUNT_BLOCK", block)
        assert count_events(str(path)) == expected, block


def test_gzip_count_with_spaced_close_tags(tmp_path):
    body = "".join(ev(k).replace("</event>", "</event\t>") for k in range(1, 6))
    path = tmp_path / "spaced.lhe.gz"
    path.write_bytes(gzip.compress(minimal_file(body, head=HEAD).encode()))
    assert count_events(str(path)) == len(weights_of(path)) == 5


@pytest.mark.parametrize("markup", ["</event>", "<event>", "<!-- open"])
def test_hash_line_does_not_hide_event_markup(tmp_path, scanner, markup):
    # '#' lines inside an event are text, but '<' always starts markup in XML (1.0 sec. 2.4):
    # an event tag or a comment start in such a line is read as one, as evtkin info does
    body = ev(1) + ev(2, f"# note {markup}\n") + ev(3)
    path = write(tmp_path, body)
    text = path.read_text()
    hash_line = line_of(text, "# note")
    # a close tag there closes the event: the event's own </event> is then the stray one
    line = hash_line + 5 if markup == "</event>" else hash_line
    assert text.splitlines()[line - 1] in ("</event>", f"# note {markup}")
    with pytest.raises(evtkin.LHEError, match=f"line {line}:"):
        weights_of(path)
    got, warning = lenient(path)
    # a close tag ended event 2 early (before its weights): it is delivered, the stray
    # </event> after it is skipped; an open tag or comment damages event 2 itself
    assert got == ([1.0, 2.0, 3.0] if markup == "</event>" else [1.0, 3.0])
    assert f"the first: line {line}:" in warning


def test_hash_line_with_a_closed_comment_is_fine(tmp_path, scanner):
    body = ev(1) + ev(2, "# note <!-- x --> text\n# <b>text <events> </eventual>\n") + ev(3)
    path = write(tmp_path, body)
    assert weights_of(path) == [1.0, 2.0, 3.0]
    assert count_events(str(path)) == 3


def test_byte_ranges_skip_an_event_inside_a_comment_opened_by_a_bare_arrow(tmp_path, scanner):
    # XML 1.0 sec. 2.5: '<!-->' opens a comment that the '-->' after it closes; the event
    # between is commented out, also for a byte range that starts right before it
    body = ev(1) + "<!-->\n" + ev(2) + "-->\n" + ev(3)
    path = write(tmp_path, body)
    assert weights_of(path) == [1.0, 3.0]
    raw = path.read_bytes()
    size = len(raw)
    for cut in sorted({m.start() for m in re.finditer(rb"<event>", raw)}):
        for shift in (0, -1, 1):
            got = [w for rng in ((0, cut + shift), (cut + shift, size))
                   for arr in evtkin.read_lhe(path, byte_range=rng) for w in ak.to_list(arr.weight)]
            assert got == [1.0, 3.0], (cut, shift)


@pytest.mark.parametrize("threads", [0, 2])
@pytest.mark.parametrize("damage", ["number", "cut"])
def test_strict_read_yields_every_complete_event_before_raising(tmp_path, scanner, threads,
                                                                 damage):
    # the error comes after the events before the damage, also those of the chunk (and
    # buffer) the damage falls in
    body = "".join(ev(k) for k in range(1, 41))
    text = minimal_file(body, head=HEAD)
    if damage == "number":
        text = text.replace(" 2 27 27.0 ", " 2 27 2x7.0 ", 1)
        line = line_of(text, " 2 27 2x7.0 ")
    else:
        text = text[: text.index("<event>\n 2 27 ") + 40]
        line = line_of(text, "<event>\n 2 27 ")
    path = tmp_path / "damaged.lhe"
    path.write_text(text)
    got: list[float] = []

    def read_all() -> None:
        for arr in evtkin.read_lhe(path, step_size=10, threads=threads):
            got.extend(ak.to_list(arr.weight))

    with pytest.raises(evtkin.LHEError, match=f"line {line}:"):
        read_all()
    assert got == [float(k) for k in range(1, 27)]
