"""What a HepMC ASCII file declares before (and in) its first event: ``hepmc_info``.

The two ASCII forms of the HepMC event record (A. Buckley et al., "The HepMC3 event record
library for Monte Carlo event generators", Comput. Phys. Commun. 260 (2021) 107310):

* ``HepMC::Asciiv3-START_EVENT_LISTING`` (HepMC3): run-level ``W`` (weight names), ``T``
  (tools) and ``A name value`` (run attributes) lines before the first event;
* ``HepMC::IO_GenEvent-START_EVENT_LISTING`` (HepMC2): weight names in each event's
  ``N count "name" ...`` line.

Both start with an optional ``HepMC::Version X`` line and end with the matching
``...-END_EVENT_LISTING`` line. The form comes from this content, never from the name.
"""

from __future__ import annotations

import bz2
import contextlib
import dataclasses
import lzma
import re
import zlib
from typing import Any, BinaryIO

from evtkin.errors import HepMCError, LHEError
from evtkin.io import hepmc_scan as c
from evtkin.io.sources import (
    Source,
    compressed_size,
    detect_compression,
    open_binary,
    source_name,
)

__all__ = ["HepMCInfo", "hepmc_info", "open_hepmc"]

FORMS = {b"Asciiv3": c.FORM_V3, b"IO_GenEvent": c.FORM_V2}
FORM_NAMES = {c.FORM_V3: "Asciiv3", c.FORM_V2: "IO_GenEvent"}
_START = re.compile(rb"HepMC::(Asciiv3|IO_GenEvent)-START_EVENT_LISTING[ \t\r]*")
_QUOTED = re.compile(rb'"((?:[^"\\]|\\.)*)"')
_HEAD_LIMIT = 64 << 20  # a header longer than this is not a HepMC header


@dataclasses.dataclass(frozen=True)
class HepMCInfo:
    """What :func:`hepmc_info` found. Units are those of the first event (``U`` line;
    GEV and MM where it has none); ``xsec_pb`` that of the first event that carries a
    cross section within the first few MB (NaN if none)."""

    source: str
    form: str  # "Asciiv3" or "IO_GenEvent"
    version: str
    weight_names: tuple[str, ...]
    momentum_unit: str
    length_unit: str
    xsec_pb: float
    xsec_err_pb: float
    tools: tuple[str, ...]
    attributes: dict[str, str]
    events_offset: int  # decompressed byte offset of the first event line
    n_events: int | None = None

    def to_dict(self) -> dict[str, Any]:
        d = dataclasses.asdict(self)
        d["weight_names"] = list(self.weight_names)
        d["tools"] = list(self.tools)
        for key in ("xsec_pb", "xsec_err_pb"):
            if d[key] != d[key]:  # NaN is not JSON
                d[key] = None
        return d


def _err(source: Source, msg: str) -> HepMCError:
    return HepMCError(f"{source_name(source)}: {msg}")


class TolerantStream:
    """A decompressed stream that survives a cut or corrupt compressed file: when a read
    fails, the bytes that can still be decompressed before the damage are recovered
    (decompressing the file again with the incremental decoder, which keeps what it got)
    and served, then the stream ends and ``error`` says what happened."""

    def __init__(self, raw: BinaryIO, source: Source, kind: str | None) -> None:
        self.raw = raw
        self.source = source
        self.kind = kind
        self.pos = 0
        self.error: HepMCError | None = None
        self.tail: bytes | None = None

    def read(self, n: int) -> bytes:
        if self.tail is None:
            try:
                block = self.raw.read(n)
            except Exception as exc:  # each decoder has its own error types
                kind = self.kind or "plain"
                self.error = _err(self.source, f"cannot read ({kind} stream is corrupt or cut "
                                               f"short?): {exc}")  # fmt: skip
                self.tail = _salvage(self.source, self.pos, self.kind)
            else:
                self.pos += len(block)
                return block
        out = self.tail[:n]
        self.tail = self.tail[n:]
        self.pos += len(out)
        return out

    def readinto(self, buf: memoryview) -> int:
        """Read into ``buf`` (the stream's own ``readinto``, no copy for plain files)."""
        if self.tail is None:
            try:
                got = int(self.raw.readinto(buf))  # type: ignore[attr-defined]
            except Exception as exc:  # each decoder has its own error types
                kind = self.kind or "plain"
                self.error = _err(self.source, f"cannot read ({kind} stream is corrupt or cut "
                                               f"short?): {exc}")  # fmt: skip
                self.tail = _salvage(self.source, self.pos, self.kind)
            else:
                self.pos += got
                return got
        k = min(len(buf), len(self.tail))
        buf[:k] = self.tail[:k]
        self.tail = self.tail[k:]
        self.pos += k
        return k

    def close(self) -> None:
        self.raw.close()

    def __enter__(self) -> TolerantStream:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _decoder(kind: str) -> Any:
    if kind == "gzip":
        return zlib.decompressobj(31)
    if kind == "bz2":
        return bz2.BZ2Decompressor()
    if kind == "xz":
        return lzma.LZMADecompressor()
    import zstandard

    return zstandard.ZstdDecompressor().decompressobj()


def _salvage(source: Source, start: int, kind: str | None, limit: int = 256 << 20) -> bytes:
    """The decompressed bytes from offset ``start`` up to the damage (at most ``limit``)."""
    if kind is None:
        return b""
    out = bytearray()
    done = 0  # decompressed bytes so far
    dec = _decoder(kind)
    with open(source, "rb") as fh:
        while len(out) < limit:
            block = fh.read(1 << 20)
            if not block:
                break
            while block:
                try:
                    got = dec.decompress(block)
                except Exception:
                    return bytes(out)
                if done + len(got) > start:
                    out += got[max(start - done, 0) :]
                done += len(got)
                rest = getattr(dec, "unused_data", b"") if getattr(dec, "eof", False) else b""
                if rest or getattr(dec, "eof", False):
                    dec = _decoder(kind)
                block = rest
    return bytes(out)


def open_stream(source: Source) -> TolerantStream:
    """:func:`evtkin.io.sources.open_binary` as a :class:`TolerantStream`, failing with
    :class:`HepMCError`."""
    try:
        kind = detect_compression(source)
        return TolerantStream(open_binary(source), source, kind)
    except LHEError as exc:
        raise HepMCError(str(exc)) from None


def compression(source: Source) -> str | None:
    """:func:`evtkin.io.sources.detect_compression`, failing with :class:`HepMCError`."""
    try:
        return detect_compression(source)
    except LHEError as exc:
        raise HepMCError(str(exc)) from None


def file_size(source: Source) -> int:
    try:
        return compressed_size(source)
    except LHEError as exc:
        raise HepMCError(str(exc)) from None


def read_block(stream: TolerantStream, size: int, source: Source) -> bytes:
    """Up to ``size`` bytes (b"" at the end of what can be read; see ``stream.error``)."""
    return stream.read(size)


def _header(data: bytes, eof: bool, source: Source) -> tuple[int, str, int, dict[str, Any]] | None:
    """Parse the header in ``data``: (form, version, events offset, run info), or None if
    more bytes are needed."""
    pos = 0
    n = len(data)
    version = ""
    form = 0
    line_no = 0
    names: list[str] = []
    tools: list[str] = []
    attrs: dict[str, str] = {}
    while True:
        if pos >= n:
            if not eof:
                return None
            if not form:
                if not data.strip():
                    raise _err(source, "the file is empty")
                raise _err(source, "not a HepMC ASCII file: no START_EVENT_LISTING line")
            return form, version, n, {"names": names, "tools": tools, "attributes": attrs}
        e = data.find(b"\n", pos)
        if e < 0:
            if not eof:
                return None
            e = n
        line = data[pos:e]
        line_no += 1
        text = line.strip()
        if not text:
            pos = e + 1
            continue
        if not form:
            if text.startswith(b"HepMC::Version"):
                version = text[len(b"HepMC::Version") :].strip().decode("utf-8", "replace")
            else:
                m = _START.fullmatch(line)
                if m is None:
                    shown = text[:60].decode("utf-8", "replace")
                    raise _err(
                        source,
                        f"line {line_no}: not a HepMC ASCII file (expected 'HepMC::Version' "
                        f"or 'HepMC::Asciiv3-START_EVENT_LISTING' / "
                        f"'HepMC::IO_GenEvent-START_EVENT_LISTING', found {shown!r})",
                    )
                form = FORMS[m.group(1)]
            pos = e + 1
            continue
        head = line[:1]
        if head == b"E" or line.startswith(b"HepMC::"):
            return form, version, pos, {"names": names, "tools": tools, "attributes": attrs}
        if form == c.FORM_V3 and head == b"W":
            names = [t.decode("utf-8", "replace") for t in line.split()[1:]]
        elif form == c.FORM_V3 and head == b"N":
            toks = _QUOTED.findall(line)
            names = [t.decode("utf-8", "replace") for t in toks] or [
                t.decode("utf-8", "replace") for t in line.split()[2:]
            ]
        elif form == c.FORM_V3 and head == b"T":
            tools.append(line[1:].strip().replace(b"\\|", b" | ").decode("utf-8", "replace"))
        elif form == c.FORM_V3 and head == b"A":
            parts = line.split(None, 2)
            if len(parts) >= 2:
                attrs[parts[1].decode("utf-8", "replace")] = (
                    parts[2].decode("utf-8", "replace").rstrip() if len(parts) > 2 else ""
                )
        else:
            shown = text[:60].decode("utf-8", "replace")
            raise _err(source, f"line {line_no}: unexpected line before the first event: {shown!r}")
        pos = e + 1


def open_hepmc(source: Source) -> tuple[TolerantStream, bytes, int, str, dict[str, Any]]:
    """Open ``source``: (stream after the returned bytes, bytes from the first event line
    on, form, version, run info). Raises :class:`HepMCError` for a non-HepMC file."""
    stream = open_stream(source)
    data = b""
    eof = False
    try:
        while True:
            block = read_block(stream, 1 << 20, source)
            eof = not block
            data += block
            got = _header(data, eof, source)
            if got is not None:
                form, version, offset, run = got
                break
            if len(data) > _HEAD_LIMIT:
                raise _err(source, "not a HepMC ASCII file: no event after 64 MB of header")
    except BaseException:
        stream.close()
        raise
    run["offset"] = offset
    return stream, data[offset:], form, version, run


def _first_event_facts(form: int, head: bytes) -> tuple[list[str], int, str, str, float, float]:
    """(weight names of an IO_GenEvent N line, weights in the first event, momentum unit,
    length unit, cross section, its error) from the text of the first events."""
    names: list[str] = []
    nw = 0
    mom, length = "GEV", "MM"
    xs, xe = float("nan"), float("nan")
    first_end = head.find(b"\nE ", 1)
    first = head if first_end < 0 else head[: first_end + 1]
    for line in first.split(b"\n"):
        toks = line.split()
        if not toks:
            continue
        if toks[0] == b"U" and len(toks) >= 3:
            mom, length = toks[1].decode("ascii", "replace"), toks[2].decode("ascii", "replace")
        elif toks[0] == b"N" and form == c.FORM_V2:
            names = [t.decode("utf-8", "replace") for t in _QUOTED.findall(line)]
        elif toks[0] == b"W" and form == c.FORM_V3:
            nw = len(toks) - 1
        elif toks[0] == b"E" and form == c.FORM_V2:
            nw = _v2_weight_count(toks)
    m = re.search(rb"(?m)^(?:A[ \t]+0[ \t]+GenCrossSection|C)[ \t]+(\S+)[ \t]+(\S+)", head)
    if m is not None:
        with contextlib.suppress(ValueError):
            xs, xe = float(m.group(1)), float(m.group(2))
    return names, nw, mom, length, xs, xe


def _v2_weight_count(toks: list[bytes]) -> int:
    """Number of weights declared on an IO_GenEvent E line (0 if it is malformed)."""
    try:
        nrand = int(toks[11])
        return max(int(toks[12 + nrand]), 0)
    except (IndexError, ValueError):
        return 0


def count_events(stream: TolerantStream, first: bytes, source: Source) -> int:
    """Lines starting with ``E `` from ``first`` on (a byte count, no parsing)."""
    n = 1 if first.startswith(b"E ") else 0
    n += first.count(b"\nE ")
    tail = first[-2:]
    while True:
        block = read_block(stream, 1 << 23, source)
        if not block:
            break
        joined = tail + block
        n += joined.count(b"\nE ") - tail.count(b"\nE ")
        tail = joined[-2:]
    return n


def hepmc_info(source: Source, *, count: bool = False) -> HepMCInfo:
    """The header facts of a HepMC ASCII file (plain or compressed, either form);
    ``count=True`` also counts the events (reads the whole file)."""
    stream, first, form, version, run = open_hepmc(source)
    try:
        while len(first) < (4 << 20):
            block = read_block(stream, 1 << 20, source)
            if not block:
                break
            first += block
        names, nw, mom, length, xs, xe = _first_event_facts(form, first)
        n_events = count_events(stream, first, source) if count else None
        if count and stream.error is not None:
            raise stream.error
    finally:
        stream.close()
    weight_names = run["names"] if form == c.FORM_V3 else names
    if not weight_names and nw:
        weight_names = [str(i) for i in range(nw)]
    return HepMCInfo(
        source=source_name(source),
        form=FORM_NAMES[form],
        version=version,
        weight_names=tuple(weight_names),
        momentum_unit=mom,
        length_unit=length,
        xsec_pb=xs,
        xsec_err_pb=xe,
        tools=tuple(run["tools"]),
        attributes=dict(run["attributes"]),
        events_offset=int(run["offset"]),
        n_events=n_events,
    )
