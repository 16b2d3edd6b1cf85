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


def test_a_symlinked_target_stays_a_link(tmp_path: Path) -> None:
    # POSIX rename(2) replaces the link itself, so the write has to go to what it points to
    data = tmp_path / "data"
    data.mkdir()
    real = data / "out.json"
    real.write_text("old")
    os.chmod(real, 0o640)
    link = tmp_path / "out.json"
    link.symlink_to(os.path.relpath(real, tmp_path))  # relative, as users often make them
    assert atomic_write_text(link, "new") == link
    assert link.is_symlink()
    assert real.read_text() == "new"
    assert stat.S_IMODE(real.stat().st_mode) == 0o640  # the target's mode, as open() keeps it
    assert sorted(p.name for p in data.iterdir()) == ["out.json"]  # no temporary left
    assert sorted(p.name for p in tmp_path.iterdir()) == ["data", "out.json"]
    # a chain of links, and a link whose target does not exist yet (open() would create it)
    chain = tmp_path / "chain.json"
    chain.symlink_to(link)
    atomic_write_bytes(chain, b"third")
    assert chain.is_symlink()
    assert link.is_symlink()
    assert real.read_bytes() == b"third"
    dangling = tmp_path / "later.json"
    dangling.symlink_to(data / "later.json")
    atomic_write_text(dangling, "made")
    assert dangling.is_symlink()
    assert (data / "later.json").read_text() == "made"
