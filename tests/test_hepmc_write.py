"""write_hepmc writes atomically: a write that fails midway leaves no file behind (and keeps an
existing one), plain and gzipped."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import awkward as ak
import pytest

import evtkin
from hepmc_textgen import random_events

NAMES = ("nominal", "muR2")


@pytest.mark.parametrize("name", ["cut.hepmc", "cut.hepmc.gz"])
@pytest.mark.parametrize("form", ["Asciiv3", "IO_GenEvent"])
def test_failed_write_leaves_no_file(tmp_path: Path, name: str, form: str) -> None:
    target = tmp_path / name
    seen_while_writing: list[list[str]] = []

    def chunks() -> Iterator[ak.Array]:
        yield random_events(30, seed=4, grouped=form == "IO_GenEvent")
        seen_while_writing.append(sorted(p.name for p in tmp_path.iterdir()))
        raise RuntimeError("the event source broke")

    with pytest.raises(RuntimeError, match="event source broke"):
        evtkin.write_hepmc(target, chunks(), form=form, weight_names=NAMES)
    # the first chunk went to a hidden temporary file beside the target, not to the target
    assert len(seen_while_writing[0]) == 1
    assert seen_while_writing[0][0].startswith(f".{name}.")
    assert list(tmp_path.iterdir()) == []  # neither a half file nor the temporary one


def test_failed_write_keeps_an_existing_file(tmp_path: Path) -> None:
    target = tmp_path / "old.hepmc"
    assert evtkin.write_hepmc(target, random_events(5, seed=1), weight_names=NAMES) == 5
    before = target.read_bytes()

    def chunks() -> Iterator[ak.Array]:
        yield random_events(20, seed=2)
        raise RuntimeError("the event source broke")

    with pytest.raises(RuntimeError):
        evtkin.write_hepmc(target, chunks(), weight_names=NAMES)
    assert target.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["old.hepmc"]
    # and a complete write still reads back
    assert len(ak.concatenate(list(evtkin.read_hepmc(target)))) == 5
