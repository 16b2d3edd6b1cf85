"""read_lhe byte ranges and <eventgroup> blocks (issue 2 reader contracts)."""

from __future__ import annotations

import gzip
import itertools
import subprocess
import sys
from pathlib import Path

import awkward as ak
import numpy as np
import pytest

import evtkin
from evtkin.io import lhe as lhe_mod
from evtkin.io.lhe_fallback import scan_kernel_py
from lhe_textgen import minimal_file, toy_file_text

FIXTURE = Path(__file__).parent / "data" / "lhe" / "aurora_toy.lhe"


@pytest.fixture(params=["numba", "fallback"])
def scanner(request, monkeypatch):
    if request.param == "fallback":
        monkeypatch.setattr(lhe_mod, "_KERNEL", scan_kernel_py)
        monkeypatch.setattr(lhe_mod, "_KIND", "fallback")
    return request.param


def read_all(path, **kw) -> ak.Array | None:
    chunks = list(evtkin.read_lhe(path, **kw))
    return ak.concatenate(chunks) if chunks else None


def without_group(a: ak.Array) -> ak.Array:
    return a[[f for f in ak.fields(a) if f != "group"]]


def same(a: ak.Array, b: ak.Array) -> bool:
    """Exact equality, NaN == NaN, including the types."""
    if a.type != b.type:
        return False
    ba, bb = ak.to_buffers(ak.to_packed(a)), ak.to_buffers(ak.to_packed(b))
    if ba[0] != bb[0] or ba[1] != bb[1]:
        return False
    return all(np.array_equal(ba[2][k], bb[2][k], equal_nan=True) for k in ba[2])


def ev(pid: int, weight: float) -> str:
    """One event with two particles; ``pid`` (IDPRUP) and ``weight`` label it."""
    return (
        f"<event>\n 2 {pid} {weight} 91.0 0.0078125 0.118\n"
        " 2 -1 0 0 501 0 0.0 0.0 40.0 40.0 0.0 0.0 9.0\n"
        " -2 -1 0 0 0 501 0.0 0.0 -40.0 40.0 0.0 0.0 9.0\n"
        "</event>\n"
    )


# LHEF 2.0 (described with 3.0 in arXiv:1405.1067; from memory): <eventgroup> encloses
# correlated events (an NLO event and its counter-events) that form one statistical unit.
# Here: 1 single, a group of 3, 1 single, a group of 2, 1 single; IDPRUP numbers the events.
GROUPED_BODY = (
    ev(0, 1.0)
    + "<eventgroup nreal='1' ncounter='2'>\n"
    + ev(1, 2.0)
    + ev(2, -1.0)
    + ev(3, -0.5)
    + "</eventgroup>\n"
    + "<!-- a comment between events: <event> 9 9 9 </event> -->\n"
    + ev(4, 1.5)
    + "<eventgroup>\n"
    + ev(5, 3.0)
    + ev(6, -2.0)
    + "</eventgroup>\n"
    + ev(7, 0.25)
)
# index of the first event of each event's group (an event outside groups: itself)
GROUP_OF = [0, 1, 1, 1, 4, 5, 5, 7]


def grouped_file(tmp_path: Path, repeat: int = 1) -> Path:
    p = tmp_path / "grouped.lhe"
    p.write_text(minimal_file(GROUPED_BODY * repeat))
    return p


# ------------------------------------------------------------------ event groups


def test_group_ids_follow_the_eventgroup_blocks(tmp_path, scanner):
    got = read_all(grouped_file(tmp_path))
    assert got.process_id.tolist() == list(range(8))
    assert got.group.tolist() == GROUP_OF
    assert str(got.type.content).count("group: int64") == 1


def test_group_ids_are_global_over_chunks(tmp_path, scanner):
    got = read_all(grouped_file(tmp_path, repeat=3), step_size=2)
    expect = [g + 8 * k for k in range(3) for g in GROUP_OF]
    assert got.group.tolist() == expect


@pytest.mark.parametrize("step", [1, 2, 3, 4, 5, 100])
def test_chunks_never_split_a_group(tmp_path, scanner, step):
    path = grouped_file(tmp_path, repeat=2)
    ref = read_all(path, step_size=1000)
    chunks = list(evtkin.read_lhe(path, step_size=step))
    assert same(ak.concatenate(chunks), ref)
    start = 0
    for k, chunk in enumerate(chunks):
        g = chunk.group.to_numpy()
        n = len(chunk)
        # each chunk starts at a group boundary and ends with a whole group
        assert g[0] == start
        assert np.all(g >= start)
        end = start + n
        assert (end == len(ref)) or (ref.group[end] == end)
        if k < len(chunks) - 1:
            # at least step events; more only to finish the group at position step
            assert n >= step
            if n > step:
                assert ref.group[start + step] < start + step
        start = end


def test_files_without_groups_have_no_group_field():
    chunk = next(iter(evtkin.read_lhe(FIXTURE)))
    assert "group" not in ak.fields(chunk)


def test_groups_with_small_buffers_and_threads(tmp_path, monkeypatch):
    path = grouped_file(tmp_path, repeat=40)
    ref = read_all(path, threads=1)
    for buf in (300, 1000, 5000):
        monkeypatch.setattr(lhe_mod, "BUFFER_BYTES", buf)
        for threads in (1, 2):
            assert same(read_all(path, step_size=7, threads=threads), ref)
    assert ref.group.tolist() == [g + 8 * k for k in range(40) for g in GROUP_OF]


# ------------------------------------------------------------------ byte ranges


def tiled(path: Path, cuts: list[int], **kw) -> list[ak.Array]:
    size = path.stat().st_size
    edges = [0, *sorted(cuts), size]
    parts = []
    for a, b in itertools.pairwise(edges):
        got = read_all(path, byte_range=(a, b), **kw)
        if got is not None:
            parts.append(got)
    return parts


def test_byte_ranges_at_random_offsets_tile_the_file(tmp_path):
    text = toy_file_text(None)
    head, rest = text.split("</init>\n", 1)
    events = rest.rsplit("</LesHouchesEvents>", 1)[0]
    path = tmp_path / "many.lhe"
    path.write_text(head + "</init>\n" + events * 5 + "</LesHouchesEvents>\n")
    ref = read_all(path)
    size = path.stat().st_size
    rng = np.random.default_rng(5)
    for n_cuts in (1, 3, 17, 60):
        cuts = rng.integers(0, size, size=n_cuts).tolist()
        parts = tiled(path, cuts, step_size=13)
        assert same(ak.concatenate(parts), ref)


def test_byte_range_selects_events_by_tag_offset(tmp_path, scanner):
    path = tmp_path / "f.lhe"
    path.write_text(minimal_file("".join(ev(i, 1.0) for i in range(6))))
    data = path.read_bytes()
    tags = [i for i in range(len(data)) if data.startswith(b"<event>", i)]
    # a range that starts exactly at the third tag and stops one byte after the fifth
    got = read_all(path, byte_range=(tags[2], tags[4] + 1))
    assert got.process_id.tolist() == [2, 3, 4]
    # a range starting one byte after a tag excludes that event
    got = read_all(path, byte_range=(tags[2] + 1, tags[4]))
    assert got.process_id.tolist() == [3]
    # offsets before the first event are clipped; an empty range yields nothing
    assert read_all(path, byte_range=(0, tags[1])).process_id.tolist() == [0]
    assert read_all(path, byte_range=(tags[1] + 3, tags[2])) is None
    assert read_all(path, byte_range=(0, len(data))).process_id.tolist() == list(range(6))


def test_byte_ranges_keep_groups_whole(tmp_path, scanner):
    path = grouped_file(tmp_path, repeat=2)
    ref = read_all(path)
    data = path.read_bytes()
    size = len(data)
    rng = np.random.default_rng(3)
    cuts = set(rng.integers(0, size, size=12).tolist())
    for tag in (b"<eventgroup", b"</eventgroup>", b"<event>"):  # on and around tags
        i = data.find(tag, len(data) // 3)
        cuts |= {i - 1, i, i + 1}
    for cut in sorted(cuts):
        parts = tiled(path, [cut])
        got = ak.concatenate(parts)
        assert same(without_group(got), without_group(ref))
        for part in parts:  # group ids count from the range's first event, groups whole
            g = part.group.to_numpy()
            assert g[0] == 0
            assert np.all(g <= np.arange(len(g)))


def test_byte_range_needs_an_uncompressed_file(tmp_path):
    path = tmp_path / "f.lhe.gz"
    path.write_bytes(gzip.compress(FIXTURE.read_bytes()))
    with pytest.raises(evtkin.LHEError, match="byte_range needs an uncompressed file"):
        list(evtkin.read_lhe(path, byte_range=(0, 100)))
    with pytest.raises(ValueError, match="byte_range"):
        list(evtkin.read_lhe(FIXTURE, byte_range=(10, 5)))


def test_byte_range_offsets_match_lhe_info(tmp_path):
    info = evtkin.lhe_info(FIXTURE)
    data = FIXTURE.read_bytes()
    first = data.index(b"<event", info.events_offset)
    assert data[: info.events_offset].endswith(b"</init>")
    assert len(read_all(FIXTURE, byte_range=(0, first + 1))) == 1
    assert read_all(FIXTURE, byte_range=(0, first)) is None


# ------------------------------------------------------------------ start-up


def test_import_does_not_load_numba():
    code = (
        "import sys, evtkin, evtkin.io.lhe\n"
        "evtkin.read_lhe\n"
        "assert 'numba' not in sys.modules, 'numba imported at import time'\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True)
