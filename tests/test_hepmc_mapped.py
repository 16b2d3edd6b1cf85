"""read_hepmc on plain files scans views of the memory-mapped file; compressed files (and
``MAP_PLAIN = False``) read into buffers. Both paths must deliver the same events, errors
and warnings, whatever the buffer size: whole files, files cut short, a last line without
its newline, byte ranges.

The expected events and lines come from the text itself (Python's ``bytes.count`` and
``bytes.find`` on what the test wrote), not from the reader.
"""

from __future__ import annotations

import gzip
import itertools
import warnings
from pathlib import Path
from typing import Any

import awkward as ak
import numpy as np
import pytest

import evtkin
from evtkin.errors import HepMCError
from evtkin.io import hepmc
from evtkin.io.hepmc import hepmc_byte_ranges
from hepmc_textgen import random_events

NAMES = ("nominal", "muR2")


def _events_file(tmp_path: Path, n: int = 150, seed: int = 21) -> tuple[Path, bytes]:
    path = tmp_path / "m.hepmc"
    evtkin.write_hepmc(path, random_events(n, seed=seed), weight_names=NAMES)
    return path, path.read_bytes()


def _outcome(path: Path, **kw: Any) -> tuple[str, Any, list[str]]:
    """("error", message, warnings) or ("ok", the concatenated events, warnings)."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            chunks = list(evtkin.read_hepmc(path, **kw))
        except HepMCError as exc:
            return "error", str(exc), [str(w.message) for w in caught]
    got = ak.concatenate(chunks) if chunks else None
    return "ok", got, [str(w.message) for w in caught]


def _same_events(a: ak.Array, b: ak.Array) -> None:
    assert len(a) == len(b)
    for f in a.fields:
        if f in ("particles", "vertices"):
            assert ak.to_list(ak.num(a[f], axis=1)) == ak.to_list(ak.num(b[f], axis=1))
            for g in ak.fields(a[f]):
                np.testing.assert_array_equal(ak.to_numpy(ak.flatten(a[f][g])),
                                              ak.to_numpy(ak.flatten(b[f][g])))  # fmt: skip
        elif f != "named_weights":
            np.testing.assert_array_equal(ak.to_numpy(a[f]), ak.to_numpy(b[f]))


def _event_numbers_before(text: bytes, stop: int) -> list[int]:
    """The numbers of the ``E`` lines that start before offset ``stop`` (Python's split)."""
    out = []
    for line in text[:stop].split(b"\n"):
        if line.startswith(b"E "):
            out.append(int(line.split()[1]))
    return out


@pytest.fixture(params=[True, False], ids=["mapped", "read"])
def mapped(request: pytest.FixtureRequest, monkeypatch: pytest.MonkeyPatch) -> bool:
    monkeypatch.setattr(hepmc, "MAP_PLAIN", request.param)
    return bool(request.param)


@pytest.mark.parametrize("buffer", [700, 3000, 4 << 20])
@pytest.mark.parametrize("threads", [0, 2])
def test_plain_file_reads_like_its_gzip(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, mapped: bool, buffer: int, threads: int
) -> None:
    path, text = _events_file(tmp_path)
    gz = tmp_path / "m.hepmc.gz"
    gz.write_bytes(gzip.compress(text))
    ref = _outcome(gz)  # (read into buffers: never mapped)
    monkeypatch.setattr(hepmc, "BUFFER_BYTES", buffer)  # (700: smaller than some events)
    got = _outcome(path, step_size=7, threads=threads)
    assert got[0] == ref[0] == "ok"
    assert got[2] == ref[2] == []
    _same_events(got[1], ref[1])
    assert got[1].event_number.tolist() == _event_numbers_before(text, len(text))


@pytest.mark.parametrize("buffer", [700, 4 << 20])
def test_cut_short_inside_an_event(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                   mapped: bool, buffer: int) -> None:  # fmt: skip
    path, text = _events_file(tmp_path)
    monkeypatch.setattr(hepmc, "BUFFER_BYTES", buffer)
    e_line = text.index(b"\nE 101 ") + 1
    cut = text.index(b"\nP ", e_line) + 9  # inside the first P line of event 101
    path.write_bytes(text[:cut])
    line = text[:e_line].count(b"\n") + 1  # 1-based line of the cut event's E line
    kind, msg, _ = _outcome(path, threads=2)
    assert kind == "error"
    assert f"line {line}: the file is cut short inside the event" in msg
    assert "100 complete events precede it" in msg
    kind, got, caught = _outcome(path, strict=False, step_size=9)
    assert kind == "ok"
    assert got.event_number.tolist() == list(range(1, 101))
    assert len(caught) == 1
    assert "cut short inside its last event (after 100 complete" in caught[0]


@pytest.mark.parametrize("buffer", [700, 4 << 20])
def test_last_line_without_newline(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                   mapped: bool, buffer: int) -> None:  # fmt: skip
    path, text = _events_file(tmp_path, n=40)
    monkeypatch.setattr(hepmc, "BUFFER_BYTES", buffer)
    assert text.rstrip(b"\n").endswith(b"END_EVENT_LISTING")  # (what write_hepmc ends with)
    ref = _outcome(path)
    # the END line without its newline: the same events, nothing to warn about
    path.write_bytes(text.rstrip(b"\n"))
    got = _outcome(path, threads=2)
    assert got[0] == "ok"
    assert got[2] == []
    _same_events(got[1], ref[1])
    # the last event's last line without its newline, and no END line: that line may be
    # cut short, so the last event counts as cut short (an error, or 39 events and a warning)
    end = text.rindex(b"\nHepMC::")
    path.write_bytes(text[:end])
    line = text[: text.index(b"\nE 40 ") + 1].count(b"\n") + 1
    kind, msg, _ = _outcome(path)
    assert kind == "error"
    assert f"line {line}: the file is cut short inside the event" in msg
    assert "39 complete events precede it" in msg
    kind, got, caught = _outcome(path, strict=False, threads=2)
    assert kind == "ok"
    _same_events(got, ref[1][:39])
    assert len(caught) == 1
    assert "cut short inside its last event (after 39 complete" in caught[0]


@pytest.mark.parametrize("buffer", [700, 4 << 20])
def test_byte_ranges_tile_the_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                   mapped: bool, buffer: int) -> None:  # fmt: skip
    path, text = _events_file(tmp_path)
    ref = _outcome(path)[1]
    monkeypatch.setattr(hepmc, "BUFFER_BYTES", buffer)
    for parts in (2, 5):
        ranges = hepmc_byte_ranges(path, parts)
        pieces = [c for r in ranges for c in evtkin.read_hepmc(path, byte_range=r, threads=2)]
        _same_events(ak.concatenate(pieces), ref)
    # unaligned ranges: each delivers the events whose E line starts inside it
    size = len(text)
    cuts = [0, 4097, 4098, size // 3, size // 2 + 1, size]
    for lo, hi in itertools.pairwise(cuts):
        got = list(evtkin.read_hepmc(path, byte_range=(lo, hi), step_size=4))
        numbers = ak.concatenate(got).event_number.tolist() if got else []
        assert numbers == [n for n in _event_numbers_before(text, hi)
                           if n not in _event_numbers_before(text, lo)]  # fmt: skip


def test_damaged_event_in_a_later_buffer(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                         mapped: bool) -> None:  # fmt: skip
    path, text = _events_file(tmp_path)
    monkeypatch.setattr(hepmc, "BUFFER_BYTES", 2000)
    e_line = text.index(b"\nE 77 ") + 1
    bad = text.index(b"\nP ", e_line) + 1
    end = text.index(b"\n", bad)
    toks = text[bad:end].split()
    toks[4] = b"1.2.3"  # px: not a number
    path.write_bytes(text[:bad] + b" ".join(toks) + text[end:])
    line = text[:bad].count(b"\n") + 1
    kind, msg, _ = _outcome(path, threads=2)
    assert kind == "error"
    assert f"line {line}: malformed P line" in msg
    kind, got, caught = _outcome(path, strict=False, threads=2)
    assert got.event_number.tolist() == [n for n in range(1, 151) if n != 77]
    assert len(caught) == 1
    assert "skipped 1 damaged event(s) (lines" in caught[0]


def _count_fresh_blocks(monkeypatch: pytest.MonkeyPatch) -> list[int]:
    """From now on, the sizes of the fresh blocks the reader makes."""
    made: list[int] = []
    fresh = hepmc._block

    def counting(nbytes: int) -> np.ndarray:
        made.append(nbytes)
        return fresh(nbytes)

    monkeypatch.setattr(hepmc, "_block", counting)
    return made


def test_chunks_dropped_while_streaming_reuse_their_memory(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path, _ = _events_file(tmp_path)
    ref = _outcome(path)[1]
    made = _count_fresh_blocks(monkeypatch)
    px_sums = []
    n_chunks = 0
    for chunk in evtkin.read_hepmc(path, step_size=5, threads=0):
        px_sums.append(float(np.sum(ak.to_numpy(ak.flatten(chunk.particles.px)))))
        n_chunks += 1
    assert n_chunks == 30
    # one scratch, and two chunk blocks taking turns (not one block per chunk)
    assert len(made) <= 4
    want = [float(np.sum(ak.to_numpy(ak.flatten(ref.particles.px[i : i + 5]))))
            for i in range(0, 150, 5)]  # fmt: skip
    assert px_sums == want


def test_later_reads_reuse_memory_but_never_held_chunks(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path, _ = _events_file(tmp_path)
    other = tmp_path / "other.hepmc"
    evtkin.write_hepmc(other, random_events(150, seed=99), weight_names=NAMES)
    monkeypatch.setattr(hepmc._POOL, "blocks", [])
    monkeypatch.setattr(hepmc, "BUFFER_BYTES", 3000)
    held = list(evtkin.read_hepmc(path, step_size=40, threads=0))
    snapshot = [ak.copy(c) for c in held]  # (copies of their buffers)
    made = _count_fresh_blocks(monkeypatch)
    # the chunks of the first read are held: the second read cannot have their blocks
    for chunk in evtkin.read_hepmc(other, step_size=40, threads=0):
        del chunk
    assert all(ak.array_equal(c, s, equal_nan=True) for c, s in zip(held, snapshot, strict=True))
    assert len(made) >= 1  # (a chunk block of its own)
    # with nothing held, a third read takes its scratch and chunk blocks from those kept
    del held
    fresh_takes: list[int] = []
    take = hepmc._take_block

    def spying(nbytes: int, extra: int = 0) -> np.ndarray:
        kept = {id(b) for b in hepmc._POOL.blocks}
        block = take(nbytes, extra)
        if id(block) not in kept:
            fresh_takes.append(nbytes)
        return block

    monkeypatch.setattr(hepmc, "_take_block", spying)
    for step in (40, 7):  # (each chunk dropped before the next: no block is held)
        numbers = [n for c in evtkin.read_hepmc(other, step_size=step, threads=0)
                   for n in c.event_number.tolist()]  # fmt: skip
        assert numbers == list(range(1, 151))
    assert fresh_takes == []


def test_header_only_and_empty_listing(tmp_path: Path, mapped: bool) -> None:
    path = tmp_path / "h.hepmc"
    head = b"HepMC::Version 3.02.00\nHepMC::Asciiv3-START_EVENT_LISTING\nW nominal muR2\n"
    path.write_bytes(head)  # no event and no END line: nothing after the header
    kind, msg, _ = _outcome(path)
    assert kind == "error"
    assert "without the END_EVENT_LISTING line after 0 complete events" in msg
    # an event listing with no events: no chunk, no complaint
    path.write_bytes(head + b"HepMC::Asciiv3-END_EVENT_LISTING\n")
    assert _outcome(path) == ("ok", None, [])


def _overwrite_kept_blocks(queue: Any) -> None:
    """(In a forked child) take every kept block and write 7s into its first page."""
    before = len(hepmc._POOL.blocks)
    for _ in range(before):
        block = hepmc._take_block(1)
        block[:4096] = 7
        del block
    queue.put(before - len(hepmc._POOL.blocks))  # (the kept blocks taken, not fresh ones)


def test_kept_blocks_are_not_shared_with_forked_processes(tmp_path: Path) -> None:
    import multiprocessing

    path, _ = _events_file(tmp_path)
    for _chunk in evtkin.read_hepmc(path, threads=0):
        pass
    del _chunk
    n_kept = len(hepmc._POOL.blocks)
    assert n_kept >= 1
    for i in range(n_kept):  # (by index: a reference held here would keep them from reuse)
        hepmc._POOL.blocks[i][:4096] = 3
    # POSIX fork: private pages are copied on write (MAP_PRIVATE), shared ones are not
    ctx = multiprocessing.get_context("fork")
    queue = ctx.Queue()
    child = ctx.Process(target=_overwrite_kept_blocks, args=(queue,))
    child.start()
    assert queue.get(timeout=60) == n_kept  # the child did take and overwrite them all
    child.join(timeout=60)
    assert child.exitcode == 0
    assert len(hepmc._POOL.blocks) == n_kept
    assert all(int(hepmc._POOL.blocks[i][:4096].max()) == 3 for i in range(n_kept))


def test_large_chunk_blocks_are_not_kept(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    path, _ = _events_file(tmp_path)
    monkeypatch.setattr(hepmc._POOL, "blocks", [])
    monkeypatch.setattr(hepmc, "SPARE_CHUNK_BYTES", 1)  # every chunk block is "large"
    for _chunk in evtkin.read_hepmc(path, threads=0, step_size=10):
        pass
    del _chunk
    # only the scratch (its block is the scan's work memory, not a chunk's) is kept
    assert len(hepmc._POOL.blocks) == 1
    monkeypatch.setattr(hepmc._POOL, "blocks", [])
    monkeypatch.setattr(hepmc, "SPARE_CHUNK_BYTES", 1 << 40)
    for _chunk in evtkin.read_hepmc(path, threads=0, step_size=10):
        pass
    del _chunk
    assert len(hepmc._POOL.blocks) == 3  # and the two chunk blocks taking turns
