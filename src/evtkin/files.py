"""Writing files safely: atomic writes (a temporary file beside the target, renamed into place,
so a reader never sees a half-written file) and file-name parts made from user names.

A leaf module (standard library only): every layer that writes a file uses it.
"""

from __future__ import annotations

import os
import re
import socket
import stat
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager, suppress
from pathlib import Path

__all__ = [
    "FolderBusy",
    "FolderLock",
    "atomic_path",
    "atomic_write_bytes",
    "atomic_write_text",
    "check_output_folder",
    "safe_name",
]

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
    removed otherwise. The folder is created if needed. A symlinked ``path`` stays a link:
    the file it points to is written (the temporary file beside that one)."""
    p = Path(path)
    if p.is_symlink():  # a rename onto the link would replace it by a plain file
        p = Path(os.path.realpath(p))
    p.parent.mkdir(parents=True, exist_ok=True)
    fd, name = tempfile.mkstemp(prefix=f".{p.name}.", suffix=f".tmp{p.suffix}", dir=p.parent)
    try:
        # mkstemp makes the file private (0600); give it the mode open() would: an existing
        # target's mode, else 0666 less the umask
        os.fchmod(fd, _mode_for(p))
    finally:
        os.close(fd)
    tmp = Path(name)
    try:
        yield tmp
        os.replace(tmp, p)
    finally:
        tmp.unlink(missing_ok=True)


def _umask() -> int:
    try:  # Linux: read it without changing it (os.umask can only set it)
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("Umask:"):
                return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    mask = os.umask(0o022)  # pragma: no cover - systems without /proc
    os.umask(mask)  # pragma: no cover
    return mask  # pragma: no cover


def _mode_for(p: Path) -> int:
    try:
        return stat.S_IMODE(p.stat().st_mode)
    except OSError:
        return 0o666 & ~_umask()


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to a temporary file beside ``path`` and rename it into place."""
    p = Path(path)
    with atomic_path(p) as tmp:
        tmp.write_bytes(data)
    return p


def atomic_write_text(path: str | os.PathLike[str], text: str) -> Path:
    """:func:`atomic_write_bytes` of ``text`` as UTF-8."""
    return atomic_write_bytes(path, text.encode("utf-8"))


class FolderBusy(Exception):
    """The output folder is a file, cannot be made, or another run holds its lock (the
    caller turns this into its own error type)."""


def check_output_folder(path: str | os.PathLike[str]) -> Path:
    """``path`` as a folder that can be written: made if missing; :class:`FolderBusy` if it
    is a file (or a file is in the way) or cannot be made. Checked before any work."""
    p = Path(path)
    if p.exists() and not p.is_dir():
        raise FolderBusy(f"{p}: is a file, not a folder; give another output folder")
    try:
        p.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise FolderBusy(f"{p}: cannot make the output folder: {exc.strerror or exc}") from None
    if not os.access(p, os.W_OK | os.X_OK):
        raise FolderBusy(f"{p}: the output folder is not writable")
    return p


LOCK_NAME = ".evtkin-lock"


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # another user's process
        return True
    return True


class FolderLock:
    """An exclusive lock on an output folder for the duration of a run: the file
    ``.evtkin-lock`` (made with O_EXCL, holding host and pid). A second run on the same
    folder fails at once with :class:`FolderBusy`; a lock left by a process that no longer
    runs on this host is taken over."""

    def __init__(self, folder: str | os.PathLike[str]) -> None:
        self.path = Path(folder) / LOCK_NAME
        self.held = False

    def acquire(self) -> FolderLock:
        me = f"{socket.gethostname()} {os.getpid()}\n"
        for _attempt in range(2):
            try:
                fd = os.open(self.path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
            except FileExistsError:
                owner = self._owner()
                if owner is not None and owner[0] == socket.gethostname() and not _alive(
                    owner[1]
                ):
                    with _suppress_missing():
                        self.path.unlink()  # stale: its process is gone
                    continue
                who = f"process {owner[1]} on {owner[0]}" if owner else "another run"
                raise FolderBusy(
                    f"{self.path.parent}: {who} is writing to this folder (lock file "
                    f"{self.path.name}); wait for it, give another folder, or remove the "
                    "lock file if that run is gone"
                ) from None
            with os.fdopen(fd, "w") as fh:
                fh.write(me)
            self.held = True
            return self
        raise FolderBusy(f"{self.path.parent}: cannot take the folder's lock")  # pragma: no cover

    def _owner(self) -> tuple[str, int] | None:
        try:
            host, pid = self.path.read_text(encoding="utf-8").split()
            return host, int(pid)
        except (OSError, ValueError):
            return None

    def release(self) -> None:
        if self.held:
            self.held = False
            with _suppress_missing():
                self.path.unlink()

    def __enter__(self) -> FolderLock:
        return self.acquire()

    def __exit__(self, *exc: object) -> None:
        self.release()


def _suppress_missing() -> suppress:
    return suppress(FileNotFoundError)
