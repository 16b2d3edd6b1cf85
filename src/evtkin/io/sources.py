"""Opening event files as binary streams, whatever their compression.

Compression is detected from the first bytes of the file (never from the name):

=========  ===================  ==========================================
format     magic bytes          decoder
=========  ===================  ==========================================
gzip       ``1f 8b``            ``isal.igzip`` if importable, else ``gzip``
zstd       ``28 b5 2f fd``      ``zstandard`` (multi-frame read as one)
bzip2      ``42 5a 68``         ``bz2``
xz         ``fd 37 7a 58 5a``   ``lzma``
=========  ===================  ==========================================

Multi-member gzip files (``cat a.gz b.gz``) read as one stream. Errors name the file.
"""

from __future__ import annotations

import bz2
import gzip
import io
import lzma
import os
from pathlib import Path
from typing import BinaryIO

from evtkin.errors import LHEError

__all__ = [
    "Source",
    "compressed_size",
    "detect_compression",
    "open_binary",
    "source_name",
]

Source = str | os.PathLike

_MAGIC: tuple[tuple[bytes, str], ...] = (
    (b"\x1f\x8b", "gzip"),
    (b"\x28\xb5\x2f\xfd", "zstd"),
    (b"BZh", "bz2"),
    (b"\xfd7zXZ\x00", "xz"),
)


def source_name(source: Source) -> str:
    """The path as shown in messages."""
    return os.fspath(source) if not isinstance(source, bytes) else source.decode(errors="replace")


def detect_compression(path: Source) -> str | None:
    """``"gzip"``, ``"zstd"``, ``"bz2"``, ``"xz"`` or ``None`` (plain), from the magic bytes."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(6)
    except OSError as exc:
        raise LHEError(f"{source_name(path)}: cannot open: {exc.strerror or exc}") from exc
    for magic, name in _MAGIC:
        if head.startswith(magic):
            return name
    return None


def _open_gzip(path: Source) -> BinaryIO:
    try:
        from isal import igzip  # ISA-L: ~2.5x faster than zlib on this machine

        return igzip.open(path, "rb")  # type: ignore[no-any-return]
    except ImportError:  # pragma: no cover - isal is a dependency
        return gzip.open(path, "rb")  # type: ignore[return-value]


class _ZstdStream(io.RawIOBase):
    """A readable binary stream over a zstd file (all frames, as one stream)."""

    def __init__(self, path: Source) -> None:
        import zstandard

        self._fh = open(path, "rb")  # noqa: SIM115 - closed in close()
        self._reader = zstandard.ZstdDecompressor().stream_reader(self._fh, read_across_frames=True)

    def readable(self) -> bool:
        return True

    def readinto(self, buffer: memoryview | bytearray) -> int:  # type: ignore[override]
        return self._reader.readinto(buffer)  # type: ignore[no-any-return]

    def close(self) -> None:
        if not self.closed:
            self._reader.close()
            self._fh.close()
        super().close()


def open_binary(path: Source) -> BinaryIO:
    """Open ``path`` for reading decompressed bytes (compression detected by magic bytes).

    Raises :class:`~evtkin.errors.LHEError` naming the file if it cannot be opened.
    """
    kind = detect_compression(path)
    try:
        if kind is None:
            return open(path, "rb")
        if kind == "gzip":
            return _open_gzip(path)
        if kind == "zstd":
            return io.BufferedReader(_ZstdStream(path), buffer_size=1 << 20)  # type: ignore[return-value]
        if kind == "bz2":
            return bz2.open(path, "rb")  # type: ignore[return-value]
        return lzma.open(path, "rb")  # type: ignore[return-value]
    except OSError as exc:
        raise LHEError(f"{source_name(path)}: cannot open: {exc.strerror or exc}") from exc


def compressed_size(path: Source) -> int:
    """Size of the file on disk in bytes."""
    try:
        return Path(path).stat().st_size
    except OSError as exc:
        raise LHEError(f"{source_name(path)}: cannot open: {exc.strerror or exc}") from exc


def read_error(path: Source, exc: Exception) -> LHEError:
    """An :class:`LHEError` naming the file, for a decompression or read failure."""
    kind = detect_compression(path) or "plain"
    return LHEError(f"{source_name(path)}: cannot read ({kind} stream is corrupt?): {exc}")
