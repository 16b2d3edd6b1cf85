"""Opening event files as binary streams, whatever their compression.

Compression is detected from the first bytes of the file (never from the name):

=========  ===================  ==========================================
format     magic bytes          decoder
=========  ===================  ==========================================
gzip       ``1f 8b``            ``isal.isal_zlib`` if importable, else ``zlib``
zstd       ``28 b5 2f fd``      ``zstandard``
bzip2      ``42 5a 68``         ``bz2``
xz         ``fd 37 7a 58 5a``   ``lzma``
=========  ===================  ==========================================

Every format is decoded by its incremental decoder object (:class:`_Decompressing`), so
that nothing decoded is lost at damage: a file cut short delivers every byte before the
cut, and the next read raises an :class:`~evtkin.errors.LHEError` that says whether the
stream was cut short (the input ends inside a member or frame) or is corrupt. Multi-member
gzip files (``cat a.gz b.gz``), multi-stream bzip2/xz and multi-frame zstd files read as
one stream. Pipes and FIFOs are refused at once (every reader opens its input more than
once). Errors name the file.
"""

from __future__ import annotations

import bz2
import io
import lzma
import mmap
import os
import stat
import zlib
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import TYPE_CHECKING, Any, BinaryIO, cast

from evtkin.errors import EvtkinError, LHEError

if TYPE_CHECKING:
    import numpy as np

__all__ = [
    "Source",
    "compressed_size",
    "default_threads",
    "detect_compression",
    "map_window",
    "mapped_windows",
    "open_binary",
    "reader_options",
    "source_name",
]

Source = str | os.PathLike[str]

_MAGIC: tuple[tuple[bytes, str], ...] = (
    (b"\x1f\x8b", "gzip"),
    (b"\x28\xb5\x2f\xfd", "zstd"),
    (b"BZh", "bz2"),
    (b"\xfd7zXZ\x00", "xz"),
)


def source_name(source: Source) -> str:
    """The path as shown in messages."""
    return os.fspath(source) if not isinstance(source, bytes) else source.decode(errors="replace")


_SEQUENTIAL = getattr(mmap, "MADV_SEQUENTIAL", None)


def map_window(fd: int, lo: int, length: int, size: int, name: str,
               error: type[EvtkinError]) -> mmap.mmap:
    """``length`` bytes of the open file ``fd`` from offset ``lo`` mapped into memory
    (private, so that views are writable; marked sequential, so that the kernel reads
    ahead), once the file is seen to still hold the ``size`` bytes it had when reading
    began.

    A file rewritten in place while it is read shrinks under the reader: mapping past its
    new end fails with a bare ``ValueError`` that names no file, so the size is checked
    before every window and a shrunk file raises ``error`` naming it and what was read.
    (Touching the pages of a window mapped before the file was cut inside it kills the
    process with SIGBUS, which Python cannot catch: ``MAP_PLAIN = False`` in the reader
    reads into buffers instead, for files that may change while they are read.)"""
    now = os.fstat(fd).st_size
    if now < size:
        raise error(f"{name}: the file shrank from {size:,} to {now:,} bytes while it was "
                    f"read (rewritten in place?); read up to byte {lo:,}, nothing after; "
                    "read it again once it is complete")  # fmt: skip
    mm = mmap.mmap(fd, length, access=mmap.ACCESS_COPY, offset=lo)
    if _SEQUENTIAL is not None:
        mm.madvise(_SEQUENTIAL)
    return mm


def mapped_windows(fd: int, pos: int, size: int, window: int, name: str,
                   error: type[EvtkinError], cut: Callable[[mmap.mmap, int, int], int],
                   ) -> Iterator[tuple[int, np.ndarray, bool]]:  # fmt: skip
    """The bytes ``[pos, size)`` of the open file ``fd`` as views of maps of the file,
    ``(offset, view, at_end)`` in order, each about ``window`` bytes and ending where
    ``cut(map, start, stop)`` says: the offset in the map just after the last whole record
    that starts at or after ``start`` and ends before ``stop``, or -1 if none does (the
    window is then mapped again twice as large). The last view ends at ``size`` (one empty
    view if there is nothing to read). The kernel is told that the file is read
    sequentially (read-ahead); each map is checked by :func:`map_window`."""
    # numpy only here: `evtkin run --jobs` imports this module (through the CLI) before it
    # starts the workers' forkserver, which must come before numpy's import
    import numpy as np

    advise = getattr(os, "posix_fadvise", None)
    if advise is not None:
        advise(fd, pos, 0, os.POSIX_FADV_SEQUENTIAL)
    want = window
    while True:
        end = min(pos + want, size)
        if end <= pos:
            yield pos, np.zeros(0, np.uint8), True
            return
        lo = pos - pos % mmap.ALLOCATIONGRANULARITY
        mm = map_window(fd, lo, end - lo, size, name, error)
        at_end = end >= size
        stop = end - lo if at_end else cut(mm, pos - lo, end - lo)
        if stop < 0:
            want *= 2
            continue
        want = window
        yield pos, np.frombuffer(mm, np.uint8, count=stop - (pos - lo), offset=pos - lo), at_end
        if at_end:
            return
        pos = lo + stop


def check_regular(path: Source) -> None:
    """Raise a clear :class:`LHEError` unless ``path`` is a regular file (or a link to
    one): a FIFO, pipe or device cannot be read more than once, and every reader opens
    its input several times (header, events, line numbers, checksums)."""
    try:
        mode = os.stat(path).st_mode
    except OSError:
        return  # the opening reports it
    if not stat.S_ISREG(mode):
        what = "a FIFO or pipe" if stat.S_ISFIFO(mode) else "not a regular file"
        raise LHEError(
            f"{source_name(path)}: {what}; evtkin reads its inputs more than once, so "
            "write the events to a file first"
        )


def detect_compression(path: Source) -> str | None:
    """``"gzip"``, ``"zstd"``, ``"bz2"``, ``"xz"`` or ``None`` (plain), from the magic bytes."""
    check_regular(path)
    try:
        with open(path, "rb") as fh:
            head = fh.read(6)
    except OSError as exc:
        raise LHEError(f"{source_name(path)}: cannot open: {exc.strerror or exc}") from exc
    for magic, name in _MAGIC:
        if head.startswith(magic):
            return name
    return None


# compressed bytes fed per step: enough that one step of gzip fills a 4 MB read (ISA-L
# decompression through this stream measured 478 MB/s with 1 MB steps, 599 with 2 MB, as
# fast as isal.igzip's own readinto)
_CHUNK = 1 << 21
_ZSTD_CHUNK = 1 << 12  # zstd's decoder has no output limit: small steps bound its output


def _zlib() -> Any:
    try:
        from isal import isal_zlib  # ISA-L: faster than zlib on this machine

        return isal_zlib
    except ImportError:  # pragma: no cover - isal is a dependency
        return zlib


class _Decompressing(io.RawIOBase):
    """Decompressed bytes of a gzip / bz2 / xz / zstd file through the format's incremental
    decoder. Members (frames, streams) follow each other as one stream. All bytes decoded
    before damage are returned; the read after them raises :class:`LHEError`."""

    def __init__(self, path: Source, kind: str) -> None:
        self._name = source_name(path)
        self._kind = kind
        self._fh = open(path, "rb")  # noqa: SIM115 - closed in close()
        self._zlib = _zlib() if kind == "gzip" else None
        self._dec = self._new()
        self._input = b""  # compressed bytes not yet given to the decoder (zlib, zstd)
        self._out = b""  # decoded bytes not yet returned
        self._opos = 0
        self._total = 0  # decoded bytes returned so far
        self._skip = 0  # decoded bytes to drop (after a restart)
        self._exact = False  # decoding again in small steps after an error
        self._end = False
        self._error: LHEError | None = None

    def _new(self) -> Any:
        if self._kind == "gzip":
            return self._zlib.decompressobj(31)  # type: ignore[union-attr]
        if self._kind == "bz2":
            return bz2.BZ2Decompressor()
        if self._kind == "xz":
            return lzma.LZMADecompressor()
        import zstandard

        return zstandard.ZstdDecompressor().decompressobj()

    def readable(self) -> bool:
        return True

    def _fail(self, what: str, exc: Exception | None = None) -> LHEError:
        detail = f": {exc}" if exc is not None else ""
        self._error = LHEError(
            f"{self._name}: the {self._kind} stream {what} after {self._total} decompressed "
            f"bytes{detail}"
        )
        return self._error

    def _decode(self, want: int) -> bytes:
        """The next decoded bytes (at most about ``want``), b"" at the clean end."""
        while True:
            dec = self._dec
            if dec.eof:
                rest = dec.unused_data or self._input or self._fh.read(_CHUNK)
                if not rest:
                    return b""
                self._dec = dec = self._new()
                self._input = rest
            needs = not self._input
            if self._kind in ("bz2", "xz"):
                needs = needs and dec.needs_input
            if needs:
                self._input = self._fh.read(_ZSTD_CHUNK if self._kind == "zstd" else _CHUNK)
                if not self._input:
                    if self._kind in ("bz2", "xz") and not dec.needs_input:
                        pass  # output is still buffered in the decoder
                    else:
                        raise self._fail("is cut short (the file ends inside a compressed block)")
            data, self._input = self._input, b""
            if self._kind == "zstd" and len(data) > _ZSTD_CHUNK:
                data, self._input = data[:_ZSTD_CHUNK], data[_ZSTD_CHUNK:]
            try:
                if self._kind == "gzip":
                    out = dec.decompress(data, min(want, 4096) if self._exact else want)
                    self._input = dec.unconsumed_tail
                elif self._kind == "zstd":
                    out = dec.decompress(data)
                else:
                    out = dec.decompress(data, max_length=want)
            except Exception as exc:  # each decoder has its own error types
                if self._zlib is not None and not self._exact:
                    # an error drops the output of the whole call (and ISA-L decodes
                    # ahead): decode again with zlib in small steps, skipping what was
                    # returned, so that only the last few kB before the damage are lost
                    self._restart_exact()
                    continue
                raise self._fail("is corrupt", exc) from None
            if dec.eof and self._kind != "bz2" and self._kind != "xz":
                self._input = dec.unused_data + self._input if dec.unused_data else self._input
            if out and self._skip:
                drop = min(self._skip, len(out))
                self._skip -= drop
                out = out[drop:]
            if out:
                return bytes(out)

    def _restart_exact(self) -> None:
        self._fh.seek(0)
        self._zlib = zlib
        self._exact = True
        self._dec = self._new()
        self._input = b""
        self._skip = self._total + len(self._out) - self._opos

    def readinto(self, buffer: Any) -> int:  # type: ignore[override]
        if self._error is not None:
            raise self._error
        if self._opos >= len(self._out):
            if self._end:
                return 0
            self._out = self._decode(max(len(buffer), 1 << 16))
            self._opos = 0
            if not self._out:
                self._end = True
                return 0
        k = min(len(buffer), len(self._out) - self._opos)
        with memoryview(self._out) as out:  # (no copy of the slice before the copy)
            buffer[:k] = out[self._opos : self._opos + k]
        self._opos += k
        self._total += k
        return k

    def close(self) -> None:
        if not self.closed:
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
        return cast(BinaryIO, _Decompressing(path, kind))
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


def default_threads(compressed: bool) -> int:
    """A streaming reader's default parse threads: 2 where there are cores for them; with a
    compressed input the reader thread's decompression keeps a core busy too (on 2 cores,
    2 parse threads measured slower than 1 for gzip)."""
    cores = os.cpu_count() or 1
    return max(1, min(2, cores - 1 if compressed else cores))


def reader_options(
    source: Source,
    step_size: int | None,
    threads: int | None,
    byte_range: tuple[int, int] | None,
    error: type[EvtkinError],
) -> tuple[int | None, int, tuple[int, int] | None]:
    """The checked options of a streaming reader (``read_lhe``, ``read_hepmc``): (step size,
    parse threads, byte range). A step size < 1, a byte range that is not ``0 <= start <=
    stop`` and negative threads are a :class:`ValueError`; a byte range of a compressed
    file (and a file that cannot be opened) is ``error``, the reader's error class.
    ``threads=None`` is :func:`default_threads` for the file's compression."""

    def compression() -> str | None:
        try:
            return detect_compression(source)
        except LHEError as exc:
            if issubclass(LHEError, error):
                raise
            raise error(str(exc)) from None

    if step_size is not None and int(step_size) < 1:
        raise ValueError(f"step_size must be >= 1, got {step_size}")
    if byte_range is not None:
        start, stop = (int(x) for x in byte_range)
        if start < 0 or stop < start:
            raise ValueError(
                f"byte_range must be (start, stop) with 0 <= start <= stop, got {byte_range}"
            )
        kind = compression()
        if kind is not None:
            raise error(
                f"{source_name(source)}: byte_range needs an uncompressed file, this one is "
                f"{kind}-compressed"
            )
        byte_range = (start, stop)
    nthreads = default_threads(compression() is not None) if threads is None else int(threads)
    if nthreads < 0:
        raise ValueError(f"threads must be >= 0, got {threads}")
    return (None if step_size is None else int(step_size)), nthreads, byte_range
