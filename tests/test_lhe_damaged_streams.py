"""Cut and corrupt compressed inputs, pipes (issue 18 §4): lenient reading delivers.

Formats: gzip (RFC 1952), bzip2, xz and zstd (RFC 8878). Each decoder is used
incrementally, so every byte before a cut is decoded; a cut stream ends the events with
an LHEError (strict) or an LHEWarning (strict=False) that says the stream is cut short.
"""

from __future__ import annotations

import bz2
import gzip
import lzma
import os
import random
import warnings
from pathlib import Path

import awkward as ak
import pytest
import zstandard

import evtkin
from evtkin.cli.info import count_events
from evtkin.io.lhe import LHEWarning
from lhe_textgen import minimal_file


def body(n: int, seed: int = 3) -> str:
    rng = random.Random(seed)
    out = []
    for k in range(n):
        px, py = rng.uniform(-100, 100), rng.uniform(-100, 100)
        out.append(
            f"<event>\n 1 1 {k + 1}.0 91.0 0.0078125 0.118\n"
            f" 11 1 0 0 0 0 {px!r} {py!r} {rng.uniform(-300, 300)!r} 500.0 0.0 0.0 9.0\n"
            "</event>\n"
        )
    return "".join(out)


RAW = minimal_file(body(5000)).encode()  # ~650 kB: several blocks in every format
COMPRESS = {
    "gzip": gzip.compress,
    "bz2": lambda b: bz2.compress(b, compresslevel=1),  # 100 kB blocks
    "xz": lambda b: lzma.compress(b, preset=0),
    "zstd": lambda b: zstandard.ZstdCompressor(level=1).compress(b),
}


def read(path: Path, **kw) -> list[float]:
    return ak.to_list(ak.concatenate(list(evtkin.read_lhe(path, **kw))).weight)


@pytest.mark.parametrize("kind", sorted(COMPRESS))
def test_cut_stream_lenient_delivers_the_complete_events(tmp_path, kind):
    data = COMPRESS[kind](RAW)
    path = tmp_path / f"cut.{kind}"
    path.write_bytes(data[: len(data) * 2 // 3])
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        got = read(path, strict=False)
    msgs = [str(w.message) for w in rec if issubclass(w.category, LHEWarning)]
    assert len(msgs) == 1
    assert f"the {kind} stream is cut short" in msgs[0]
    assert str(path) in msgs[0]
    # the events are 1, 2, ... in order: all complete ones before the cut, nothing else
    assert got == [float(k) for k in range(1, len(got) + 1)]
    assert len(got) > 1000
    assert f"{len(got)} complete events precede" in msgs[0]
    with pytest.raises(evtkin.LHEError, match=f"the {kind} stream is cut short"):
        read(path)


@pytest.mark.parametrize("kind", sorted(COMPRESS))
def test_stream_cut_inside_the_header(tmp_path, kind):
    data = COMPRESS[kind](RAW)
    path = tmp_path / f"head.{kind}"
    path.write_bytes(data[:40])
    with pytest.raises(evtkin.LHEError, match=rf"{path}: the {kind} stream is cut short"):
        evtkin.lhe_info(path)


def test_corrupt_gzip_says_corrupt(tmp_path):
    data = bytearray(gzip.compress(RAW))
    for i in range(len(data) // 2, len(data) // 2 + 64):
        data[i] ^= 0x5A
    path = tmp_path / "bad.lhe.gz"
    path.write_bytes(bytes(data))
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        got = read(path, strict=False)
    msgs = " | ".join(str(w.message) for w in rec)
    # the damaged deflate data decodes to garbage (skipped) or fails; the CRC-32 of the
    # member (RFC 1952 sec. 2.3.1) catches it at the latest at the member's end
    assert "the gzip stream is corrupt" in msgs
    # (damaged deflate data can decode to copies of earlier text: such events parse, and
    # the warning says that the stream is corrupt)
    assert got[:1000] == [float(k) for k in range(1, 1001)]


def test_multi_member_gzip_reads_as_one(tmp_path):
    # RFC 1952 sec. 2.2: a gzip file is a series of members
    half = len(RAW) // 2
    cut = RAW.index(b"<event>", half)
    path = tmp_path / "two.lhe.gz"
    path.write_bytes(gzip.compress(RAW[:cut]) + gzip.compress(RAW[cut:]))
    assert read(path) == [float(k) for k in range(1, 5001)]
    assert count_events(str(path)) == 5000


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs on this system")
def test_fifo_is_refused_at_once(tmp_path):
    fifo = tmp_path / "events.fifo"
    os.mkfifo(fifo)  # nobody writes to it: opening it for reading would block forever
    for call in (evtkin.lhe_info, lambda p: list(evtkin.read_lhe(p))):
        with pytest.raises(evtkin.LHEError, match=r"events.fifo: a FIFO or pipe; .*to a file"):
            call(fifo)
