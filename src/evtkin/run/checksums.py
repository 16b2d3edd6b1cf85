"""SHA-256 of input files for the provenance, remembered between runs.

Hashing a file costs a full read and ~180-400 MB/s of CPU (SHA-256 without hardware support
runs at about the speed of the LHE parser), so a run over many GB would spend a large share
of its time on provenance. The digest of a file is therefore kept in a small cache entry
keyed by the file's identity as ``stat`` sees it (resolved path, device, inode, size and
modification time in ns), as build tools and file synchronisers do: a rerun over unchanged
files (the usual way of working while tuning an analysis) does not hash them again, and any
write to a file changes its modification time and so its key.

The cache lives in ``$EVTKIN_CACHE_DIR`` (default ``$XDG_CACHE_HOME/evtkin``, else
``~/.cache/evtkin``); ``EVTKIN_CACHE_DIR=off`` disables it. Entries are written atomically
(temporary name, then rename), so concurrent runs and workers share it safely; an unwritable
or damaged cache only means hashing again.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import re
from pathlib import Path

from evtkin.files import atomic_write_text

__all__ = ["cache_dir", "sha256_of"]


def cache_dir() -> Path | None:
    """Where digests are remembered, or None when caching is off."""
    env = os.environ.get("EVTKIN_CACHE_DIR")
    if env is not None:
        return None if env.strip().lower() in ("", "off", "0", "none") else Path(env)
    xdg = os.environ.get("XDG_CACHE_HOME")
    return (Path(xdg) if xdg else Path.home() / ".cache") / "evtkin"


_SHA256 = re.compile(r"[0-9a-f]{64}")


def _identity(path: str | os.PathLike[str]) -> dict[str, int | str]:
    st = os.stat(path)
    return {"path": os.path.realpath(path), "dev": st.st_dev, "ino": st.st_ino,
            "size": st.st_size, "mtime_ns": st.st_mtime_ns}


def _entry(ident: dict[str, int | str], root: Path) -> Path:
    key = hashlib.sha1(json.dumps(ident, sort_keys=True).encode()).hexdigest()
    return root / "sha256" / key[:2] / f"{key}.json"


def _hash(path: str | os.PathLike[str], block: int) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        while chunk := f.read(block):
            h.update(chunk)
    return h.hexdigest()


def sha256_of(path: str | os.PathLike[str], block: int = 1 << 23) -> str:
    """SHA-256 of a file's bytes as stored (compressed files are hashed compressed), from the
    cache when the file is unchanged since it was last hashed."""
    root = cache_dir()
    if root is None:
        return _hash(path, block)
    ident = _identity(path)
    entry = _entry(ident, root)
    with contextlib.suppress(OSError, ValueError):
        rec = json.loads(entry.read_text(encoding="utf-8"))
        # an entry of another shape, or a digest that is not 64 hex digits, is ignored
        # (and rewritten below): nothing unchecked reaches the provenance
        if (
            isinstance(rec, dict)
            and rec.get("identity") == ident
            and isinstance(rec.get("sha256"), str)
            and _SHA256.fullmatch(rec["sha256"]) is not None
        ):
            return str(rec["sha256"])
    digest = _hash(path, block)
    if _identity(path) == ident:  # not changed while it was read
        with contextlib.suppress(OSError):
            atomic_write_text(entry, json.dumps({"identity": ident, "sha256": digest}))
    return digest
