"""evtkin.files: atomic writes and safe file-name parts (the one module every writer uses)."""

from __future__ import annotations

import os
import stat
from pathlib import Path

import pytest

from evtkin.files import atomic_path, atomic_write_bytes, atomic_write_text, safe_name


@pytest.mark.parametrize(("name", "expected"), [
    ("m_tt", "m_tt"),
    ("pt(l) > 20", "pt_l____20"),
    ("a/b", "a_b"),  # no folder separators
    ("..", "_"),  # a name made only of dots would name a folder
    (".", "_"),
    ("", "_"),
    ("é", "_"),  # ASCII only: the same name on every file system
    ("v1.2+x-y", "v1.2+x-y"),
])
def test_safe_name(name: str, expected: str) -> None:
    assert safe_name(name) == expected


def test_atomic_write_replaces_and_leaves_no_temporary(tmp_path: Path) -> None:
    target = tmp_path / "sub" / "out.json"
    atomic_write_text(target, "one")
    atomic_write_bytes(target, b"two")
    assert target.read_bytes() == b"two"
    assert sorted(p.name for p in target.parent.iterdir()) == ["out.json"]


def test_failed_write_keeps_the_old_file(tmp_path: Path) -> None:
    target = tmp_path / "out.png"
    target.write_text("old")
    seen: list[Path] = []

    def failing_writer() -> None:
        with atomic_path(target) as tmp:
            seen.append(tmp)
            tmp.write_text("half")
            raise RuntimeError("the writer failed")

    with pytest.raises(RuntimeError):
        failing_writer()
    assert seen[0].parent == tmp_path
    assert seen[0].suffix == ".png"  # writers such as matplotlib choose the format by suffix
    assert target.read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.png"]


def test_written_files_get_the_mode_open_gives(tmp_path: Path) -> None:
    # a file made by the operating system's own open() is the reference (not 0600 of mkstemp)
    plain = tmp_path / "plain.txt"
    plain.write_text("x")
    made = atomic_write_text(tmp_path / "made.txt", "x")
    assert stat.S_IMODE(made.stat().st_mode) == stat.S_IMODE(plain.stat().st_mode)
    # replacing a file keeps its mode, as writing it with open() would
    os.chmod(made, 0o640)
    atomic_write_text(made, "y")
    assert stat.S_IMODE(made.stat().st_mode) == 0o640
