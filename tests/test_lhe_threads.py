"""The reader gives the same events whatever its threading: ``threads=0`` (everything in the
caller's thread), 1 or 2 parse threads; errors and truncation are reported the same way."""

from __future__ import annotations

import gzip
from pathlib import Path

import awkward as ak
import pytest

import evtkin
from evtkin import read_lhe
from evtkin.io.lhe import LHEWarning
from lhe_textgen import minimal_file, toy_events, toy_file_text

TOY = Path(__file__).parent / "data" / "lhe" / "aurora_toy.lhe"


@pytest.mark.parametrize("step", [1, 5, 1000])
def test_threads_give_identical_chunks(tmp_path, step) -> None:
    plain = tmp_path / "many.lhe"
    plain.write_text(toy_file_text(toy_events(n=90)))
    packed = tmp_path / "many.lhe.gz"
    packed.write_bytes(gzip.compress(plain.read_bytes()))
    for path in (TOY, plain, packed):
        runs = {th: list(read_lhe(path, step_size=step, threads=th)) for th in (0, 1, 2)}
        assert [len(c) for c in runs[0]] == [len(c) for c in runs[2]]
        for th in (1, 2):
            for a, b in zip(runs[0], runs[th], strict=True):
                assert ak.array_equal(a, b)


def test_inline_reading_of_a_byte_range_equals_threaded(tmp_path) -> None:
    path = tmp_path / "range.lhe"
    path.write_text(toy_file_text(toy_events(n=40)))
    size = path.stat().st_size
    for lo, hi in [(0, size // 2), (size // 2, size)]:
        a = list(read_lhe(path, byte_range=(lo, hi), threads=0))
        b = list(read_lhe(path, byte_range=(lo, hi), threads=2))
        assert ak.array_equal(ak.concatenate(a), ak.concatenate(b))


EV = """<event>
 2 1 1.0 91.0 0.0078 0.118
 -11 1 0 0 0 0 0.0 0.0 45.0 45.0 0.0 0.0 9.0
 11 1 0 0 0 0 0.0 0.0 -45.0 45.0 0.0 0.0 9.0
</event>
"""


def test_inline_truncation_error_and_warning(tmp_path) -> None:
    text = minimal_file(EV * 5)
    path = tmp_path / "cut.lhe"
    path.write_text(text[: text.rindex(" 11 1")])
    with pytest.raises(evtkin.LHEError, match="4 complete events precede"):
        list(read_lhe(path, threads=0))
    with pytest.warns(LHEWarning, match="4 complete events"):
        chunks = list(read_lhe(path, step_size=3, threads=0, strict=False))
    assert [len(c) for c in chunks] == [3, 1]


def test_negative_threads_rejected() -> None:
    with pytest.raises(ValueError, match="threads must be >= 0"):
        read_lhe(TOY, threads=-1)
