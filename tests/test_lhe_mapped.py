"""read_lhe on plain files scans views of the memory-mapped file; compressed files (and
``MAP_PLAIN = False``) read into buffers. Both paths must deliver the same events, errors
and warnings, whatever the buffer size and the number of threads: whole files, files cut
short, a last line without its newline, byte ranges, event groups.

The expected event counts and lines come from the text itself (Python's ``str.count``
and ``str.rfind`` on what the test wrote), not from the reader.
"""

from __future__ import annotations

import gzip
import itertools
import re
import warnings
from pathlib import Path
from typing import Any

import awkward as ak
import numpy as np
import pytest

import evtkin
from evtkin.errors import LHEError
from evtkin.io import lhe as lhe_mod
from lhe_textgen import minimal_file, toy_events, toy_file_text


@pytest.fixture(params=[True, False], ids=["mapped", "read"])
def mapped(request: pytest.FixtureRequest, monkeypatch: pytest.MonkeyPatch) -> bool:
    monkeypatch.setattr(lhe_mod, "MAP_PLAIN", request.param)
    return bool(request.param)


def _text(n: int = 90) -> str:
    return toy_file_text(toy_events(n=n, seed=7))


def _events_part(text: str) -> str:
    """The text after ``</init>`` (the header's comments mention event tags)."""
    return text[text.index("</init>") :]


def _outcome(path: Path, exact: bool = True, **kw: Any) -> tuple[str, Any, list[str]]:
    """("error", message, warnings) or ("ok", the concatenated events or None, warnings)."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            chunks = list(evtkin.read_lhe(path, **kw))
        except LHEError as exc:
            return "error", str(exc), [str(w.message) for w in caught]
    for c in chunks[:-1]:  # exactly step_size events (with groups: at least, groups whole)
        n, step = len(c), kw.get("step_size", 100_000)
        assert n == step if exact else n >= step
    got = ak.concatenate(chunks) if chunks else None
    return "ok", got, [str(w.message) for w in caught]


def _same(a: ak.Array | None, b: ak.Array | None) -> bool:
    """Exact equality of every buffer (NaN == NaN) and of the types."""
    if a is None or b is None:
        return a is None and b is None
    if a.type != b.type:
        return False
    ba, bb = ak.to_buffers(ak.to_packed(a)), ak.to_buffers(ak.to_packed(b))
    return ba[:2] == bb[:2] and all(
        np.array_equal(ba[2][k], bb[2][k], equal_nan=True) for k in ba[2]
    )


@pytest.mark.parametrize("buffer", [700, 3000, 4 << 20])
@pytest.mark.parametrize("threads", [0, 2])
def test_plain_file_reads_like_its_gzip(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, mapped: bool, buffer: int, threads: int
) -> None:
    text = _text()
    plain = tmp_path / "e.lhe"
    plain.write_text(text)
    gz = tmp_path / "e.lhe.gz"
    gz.write_bytes(gzip.compress(text.encode()))
    ref = _outcome(gz, step_size=1000)  # (the gzip stream is read into buffers)
    monkeypatch.setattr(lhe_mod, "BUFFER_BYTES", buffer)
    got = _outcome(plain, step_size=13, threads=threads)
    assert got[0] == ref[0] == "ok"
    assert len(got[1]) == _events_part(text).count("</event>")  # Python's str.count
    assert _same(got[1], ref[1])


@pytest.mark.parametrize("buffer", [700, 4 << 20])
@pytest.mark.parametrize("strict", [True, False])
def test_cut_files_fail_alike_on_both_paths(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, mapped: bool, buffer: int, strict: bool
) -> None:
    text = _text(40)
    monkeypatch.setattr(lhe_mod, "BUFFER_BYTES", buffer)
    rng = np.random.default_rng(3)
    first = text.index("</init>") + len("</init>")
    for cut in rng.integers(first + 1, len(text) - 30, size=8).tolist():
        path = tmp_path / "cut.lhe"
        path.write_text(text[:cut])
        cut_text = text[first:cut]
        # the complete events: the '</event>' tags wholly before the cut (str.count)
        whole = cut_text.count("</event>")
        got = _outcome(path, step_size=7, threads=2, strict=strict)
        with monkeypatch.context() as m:  # the buffers read into, in the caller's thread
            m.setattr(lhe_mod, "MAP_PLAIN", False)
            ref = _outcome(path, step_size=7, threads=0, strict=strict)
        if cut_text.rfind("<event") > cut_text.rfind("</event>"):
            # cut inside an event: its line is that of its '<event' tag
            line = text[: first + cut_text.rfind("<event")].count("\n") + 1
            where = f"line {line}: the file is cut short inside an event"
        elif cut_text.endswith(("</event>", "</event>\n")):
            where = "the file ends without </LesHouchesEvents>"
        else:
            where = None  # inside a tag after an event, or at its newline: message varies
        if strict:
            assert got[0] == ref[0] == "error"
            assert got[1] == ref[1]
            if where is not None:
                assert where in got[1], (cut, got[1])
                assert re.search(rf"\b{whole} complete events", got[1]), (cut, got[1])
        else:
            assert got[0] == ref[0] == "ok"
            assert got[2] == ref[2]
            assert len(got[2]) == 1
            assert (0 if got[1] is None else len(got[1])) == whole
            assert _same(got[1], ref[1])


@pytest.mark.parametrize("threads", [0, 1, 2])
def test_last_line_without_newline(tmp_path: Path, mapped: bool, threads: int) -> None:
    text = _text(30)
    path = tmp_path / "nl.lhe"
    path.write_text(text.rstrip("\n"))  # ends with '</LesHouchesEvents>', no newline
    got = _outcome(path, step_size=11, threads=threads)
    assert got[0] == "ok"
    assert got[2] == []
    assert len(got[1]) == 30
    # cut right after the last '</event>' (no newline, no closing tag)
    body = text[: text.rindex("</event>") + len("</event>")]
    path.write_text(body)
    got = _outcome(path, step_size=11, threads=threads)
    assert got[0] == "error"
    assert "ends without </LesHouchesEvents> after 30 complete events" in got[1]
    lenient = _outcome(path, step_size=11, threads=threads, strict=False)
    assert lenient[0] == "ok"
    assert len(lenient[1]) == 30
    assert len(lenient[2]) == 1


@pytest.mark.parametrize("buffer", [500, 2500, 4 << 20])
def test_byte_ranges_tile_the_file_on_both_paths(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, mapped: bool, buffer: int
) -> None:
    text = _text(60)
    path = tmp_path / "r.lhe"
    path.write_text(text)
    whole = _outcome(path, step_size=1000)[1]
    monkeypatch.setattr(lhe_mod, "BUFFER_BYTES", buffer)
    rng = np.random.default_rng(11)
    size = len(text.encode())
    for _ in range(3):
        cuts = sorted(rng.integers(1, size, size=5).tolist())
        parts = []
        for a, b in itertools.pairwise([0, *cuts, size]):
            kind, got, warned = _outcome(path, byte_range=(a, b), step_size=4, threads=2)
            assert kind == "ok"
            assert warned == []
            # exactly the events whose '<event' tag starts in [a, b) (str.find)
            body = text.index("</init>")
            starts = [m.start() for m in re.finditer(r"<event[ >\n]", text)
                      if a <= m.start() < b and m.start() > body]  # fmt: skip
            assert (0 if got is None else len(got)) == len(starts)
            if got is not None:
                parts.append(got)
        assert _same(ak.concatenate(parts), whole)


def test_groups_with_small_buffers_on_both_paths(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, mapped: bool
) -> None:
    one = (
        "<event>\n 2 1 1.0 91.0 0.0078125 0.118\n"
        " 2 -1 0 0 501 0 0.0 0.0 40.0 40.0 0.0 0.0 9.0\n"
        " -2 -1 0 0 0 501 0.0 0.0 -40.0 40.0 0.0 0.0 9.0\n"
        "</event>\n"
    )
    # LHEF 2.0 <eventgroup> blocks (arXiv:1405.1067, from memory) of 1, 3 and 2 events
    body = "".join(f"<eventgroup>\n{one * k}</eventgroup>\n" for k in (1, 3, 2) * 30)
    path = tmp_path / "g.lhe"
    path.write_text(minimal_file(body))
    ref = _outcome(path, step_size=10_000, threads=0)
    for buf in (300, 1000):
        monkeypatch.setattr(lhe_mod, "BUFFER_BYTES", buf)
        for threads in (0, 2):
            got = _outcome(path, exact=False, step_size=4, threads=threads)
            assert got[0] == "ok"
            assert _same(got[1], ref[1])
    # the group index: the first event of each group (from the sizes written above)
    firsts = list(itertools.accumulate([0, *((1, 3, 2) * 30)]))[:-1]
    want = [f for f, k in zip(firsts, (1, 3, 2) * 30, strict=True) for _ in range(k)]
    assert ref[1].group.tolist() == want


def test_empty_event_section(tmp_path: Path, mapped: bool) -> None:
    path = tmp_path / "none.lhe"
    path.write_text(minimal_file(""))
    assert _outcome(path) == ("ok", None, [])
