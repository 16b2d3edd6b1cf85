"""Writing files safely: atomic writes (a temporary file beside the target, renamed into place,
so a reader never sees a half-written file) and file-name parts made from user names.

A leaf module (standard library only): every layer that writes a file uses it.
"""

from __future__ import annotations

import os
import re
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

__all__ = ["atomic_path", "atomic_write_bytes", "atomic_write_text", "safe_name"]

_SAFE = re.compile(r"[^A-Za-z0-9_.+@-]")


def safe_name(name: str) -> str:
    """A file-name part: characters outside ``[A-Za-z0-9_.+@-]`` become ``_`` (``@`` joins a
    histogram and its region); a name made only of dots (``.``, ``..``), or empty, becomes
    ``_`` (it would name a folder)."""
    out = _SAFE.sub("_", name)
    return out if out.strip(".") else "_"


@contextmanager
def atomic_path(path: str | os.PathLike[str]) -> Iterator[Path]:
    """A temporary path beside ``path`` (same suffix, hidden name) for a writer that needs a
    path (matplotlib, uproot); renamed onto ``path`` when the block ends without an error,
    removed otherwise. The folder is created if needed."""
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    fd, name = tempfile.mkstemp(prefix=f".{p.name}.", suffix=f".tmp{p.suffix}", dir=p.parent)
    os.close(fd)
    tmp = Path(name)
    try:
        yield tmp
        os.replace(tmp, p)
    finally:
        tmp.unlink(missing_ok=True)


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to a temporary file beside ``path`` and rename it into place."""
    p = Path(path)
    with atomic_path(p) as tmp:
        tmp.write_bytes(data)
    return p


def atomic_write_text(path: str | os.PathLike[str], text: str) -> Path:
    """:func:`atomic_write_bytes` of ``text`` as UTF-8."""
    return atomic_write_bytes(path, text.encode("utf-8"))
