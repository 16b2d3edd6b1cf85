"""Streaming reader of Les Houches event files: ``read_lhe(path)`` yields awkward chunks.

Pipeline (one run of :func:`read_lhe`)::

    reader thread          parse workers (1-2)          caller's thread
    read/decompress  --->  byte scanner (nogil)  --->  cut exact step_size chunks,
    8 MB buffers cut       -> flat numpy columns        zero-copy awkward layouts
    after </event>

The scanner is the compiled kernel of :mod:`evtkin.io.lhe_scan`, or the numpy/Python
one of :mod:`evtkin.io.lhe_fallback` when numba is unavailable or ``EVTKIN_NO_NUMBA=1``
is set; both fill the same columns. Each chunk is an awkward Array with one record per
event (see DEVELOPERS.md "LHE chunk"): ``process_id`` (IDPRUP), ``weight`` (XWGTUP),
``scale`` (SCALUP), ``alpha_qed`` (AQEDUP), ``alpha_qcd`` (AQCDUP), ``weights``
(regular ``n x k``; columns in the order of ``lhe_info(path).weight_names``; NaN where
an event lacks a declared weight) and ``particles`` (jagged ``Particle`` records, see
:mod:`evtkin.events`; ``mother1``/``mother2`` 0-based, -1 = none).
"""

from __future__ import annotations

import os
import queue
import threading
import warnings
from collections.abc import Callable, Iterator
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass
from typing import Any, BinaryIO

import awkward as ak
import numpy as np

from evtkin import events as _events
from evtkin.errors import LHEError
from evtkin.io import lhe_scan as c
from evtkin.io.lhe_header import open_lhe
from evtkin.io.lhe_scan import ST_FULL, ST_INCOMPLETE, fix_slow_values
from evtkin.io.sources import Source, compressed_size, open_binary, source_name

__all__ = ["LHEWarning", "read_lhe", "scanner_kind"]

BUFFER_BYTES = 8 << 20  # measured sweet spot (PERFORMANCE-NOTES)
_CLOSE = b"</event>"

_EVENT_FIELDS = ("process_id", "weight", "scale", "alpha_qed", "alpha_qcd")
_PI_FIELDS = _events.PARTICLE_FIELDS[:6]
_PF_FIELDS = _events.PARTICLE_FIELDS[6:]


class LHEWarning(UserWarning):
    """Something in an LHE file was tolerated because ``strict=False``."""


# ------------------------------------------------------------------ scanner choice

_KERNEL: Callable[..., Any] | None = None
_KIND: str | None = None


def _kernel() -> tuple[Callable[..., Any], str]:
    """The scan kernel in use: compiled if possible, else the fallback."""
    global _KERNEL, _KIND
    if _KERNEL is None:
        if c.scan_kernel is not None and os.environ.get("EVTKIN_NO_NUMBA", "") in ("", "0"):
            _KERNEL, _KIND = c.scan_kernel, "numba"
        else:
            from evtkin.io.lhe_fallback import scan_kernel_py

            _KERNEL, _KIND = scan_kernel_py, "fallback"
    assert _KERNEL is not None
    assert _KIND is not None
    return _KERNEL, _KIND


def scanner_kind() -> str:
    """``"numba"`` or ``"fallback"``: which scanner :func:`read_lhe` uses."""
    return _kernel()[1]


# ------------------------------------------------------------------ pieces


@dataclass
class _Piece:
    """Columns of consecutive events parsed from one buffer (owned copies)."""

    pid: np.ndarray  # int32 (n,)
    evf: np.ndarray  # float64 (4, n)
    offsets: np.ndarray  # int64 (n + 1,), starting at 0
    pi: np.ndarray  # int32 (6, np)
    pf: np.ndarray  # float64 (7, np)
    wts: np.ndarray  # float64 (n, k)

    @property
    def n(self) -> int:
        return int(self.pid.shape[0])

    def slice(self, a: int, b: int) -> _Piece:
        o0, o1 = int(self.offsets[a]), int(self.offsets[b])
        return _Piece(
            self.pid[a:b],
            self.evf[:, a:b],
            self.offsets[a : b + 1] - o0,
            self.pi[:, o0:o1],
            self.pf[:, o0:o1],
            self.wts[a:b],
        )


def _concat(pieces: list[_Piece]) -> _Piece:
    if len(pieces) == 1:
        return pieces[0]
    shifts = np.cumsum([0] + [int(p.offsets[-1]) for p in pieces[:-1]])
    offsets = np.concatenate(
        [pieces[0].offsets[:1]] + [p.offsets[1:] + s for p, s in zip(pieces, shifts, strict=True)]
    )
    return _Piece(
        np.concatenate([p.pid for p in pieces]),
        np.concatenate([p.evf for p in pieces], axis=1),
        offsets,
        np.concatenate([p.pi for p in pieces], axis=1),
        np.concatenate([p.pf for p in pieces], axis=1),
        np.concatenate([p.wts for p in pieces], axis=0),
    )


def _to_awkward(p: _Piece) -> ak.Array:
    """Zero-copy awkward layout over the piece's columns."""
    n = p.n
    contents = ak.contents
    pi = np.ascontiguousarray(p.pi)
    pf = np.ascontiguousarray(p.pf)
    fields = [contents.NumpyArray(pi[j]) for j in range(6)]
    fields += [contents.NumpyArray(pf[j]) for j in range(7)]
    particles = contents.ListOffsetArray(
        ak.index.Index64(np.ascontiguousarray(p.offsets)),
        contents.RecordArray(
            fields, list(_events.PARTICLE_FIELDS), parameters={"__record__": "Particle"}
        ),
    )
    evf = np.ascontiguousarray(p.evf)
    k = p.wts.shape[1]
    weights = contents.RegularArray(
        contents.NumpyArray(np.ascontiguousarray(p.wts).reshape(-1)), k, zeros_length=n
    )
    layout = contents.RecordArray(
        [contents.NumpyArray(np.ascontiguousarray(p.pid))]
        + [contents.NumpyArray(evf[j]) for j in range(4)]
        + [weights, particles],
        [*_EVENT_FIELDS, "weights", "particles"],
        length=n,
    )
    return ak.Array(layout)


class _ScanFailure(Exception):
    """A malformed event; ``pos`` is the absolute byte offset in the decompressed stream."""

    def __init__(self, pos: int, message: str) -> None:
        super().__init__(message)
        self.pos = pos
        self.message = message


def _token_at(buf: np.ndarray, pos: int) -> str:
    end = pos
    n = buf.shape[0]
    while end < n and end - pos < 40 and buf[end] not in (32, 9, 10, 13, 60):
        end += 1
    return bytes(buf[pos:end]).decode("utf-8", "replace")


# ------------------------------------------------------------------ one worker's scanner


class _Scanner:
    """Reusable output arrays for one parse thread, sized for one buffer."""

    def __init__(self, nw: int, ids: tuple[str, ...]) -> None:
        self.nw = nw
        self.ids = ids
        enc = [i.encode("utf-8") for i in ids]
        self.wid_bytes = np.frombuffer(b"".join(enc) or b"\0", dtype=np.uint8).copy()
        self.wid_off = np.zeros(len(enc) + 1, dtype=np.int64)
        self.wid_off[1:] = np.cumsum([len(e) for e in enc]) if enc else []
        self.out = np.zeros(16, dtype=np.int64)
        self.tok_f = np.zeros(16, dtype=np.float64)
        self.tok_i = np.zeros((5, 16), dtype=np.int64)
        self._alloc(1 << 14, 1 << 17, 1 << 12)

    def _alloc(self, ev_cap: int, p_cap: int, s_cap: int) -> None:
        self.ev_pid = np.empty(ev_cap, np.int32)
        self.ev_f = np.empty((4, ev_cap), np.float64)
        self.ev_pos = np.empty(ev_cap, np.int64)
        self.offsets = np.empty(ev_cap + 1, np.int64)
        self.p_i = np.empty((6, p_cap), np.int32)
        self.p_f = np.empty((7, p_cap), np.float64)
        self.wts = np.empty((ev_cap, self.nw), np.float64)
        self.slow = np.empty((s_cap, 4), np.int64)

    def parse(self, buf: np.ndarray, base: int) -> tuple[list[_Piece], int, int, bool]:
        """Parse whole events of ``buf``; returns (pieces, status, resume, saw_end_tag).

        ``base`` is the absolute stream offset of ``buf[0]`` (for error positions).
        """
        kernel, _ = _kernel()
        pieces: list[_Piece] = []
        pos = 0
        saw_end = False
        out = self.out
        while True:
            kernel(
                buf, pos, self.wid_bytes, self.wid_off, self.nw, self.ev_pid, self.ev_f,
                self.ev_pos, self.offsets, self.p_i, self.p_f, self.wts, self.slow,
                self.tok_f, self.tok_i, out,
            )  # fmt: skip
            n_ev, n_p, n_slow, status = int(out[0]), int(out[1]), int(out[2]), int(out[3])
            saw_end = saw_end or bool(out[6])
            if status >= 10:
                epos = int(out[4])
                raise _ScanFailure(base + epos, self._message(status, buf, epos, out))
            if n_ev:
                if n_slow:
                    bad = fix_slow_values(
                        buf, self.slow[:n_slow], self.ev_f, self.p_f, self.wts.reshape(-1)
                    )
                    if bad >= 0:
                        tok = _token_at(buf, bad)
                        raise _ScanFailure(base + bad, f"expected a number, found {tok!r}")
                pieces.append(
                    _Piece(
                        self.ev_pid[:n_ev].copy(),
                        self.ev_f[:, :n_ev].copy(),
                        self.offsets[: n_ev + 1].copy(),
                        self.p_i[:, :n_p].copy(),
                        self.p_f[:, :n_p].copy(),
                        self.wts[:n_ev].copy(),
                    )
                )
            if status == ST_FULL:
                if n_ev == 0:  # a single event larger than the arrays: grow them
                    self._alloc(
                        2 * self.ev_pid.shape[0], 2 * self.p_i.shape[1], 2 * self.slow.shape[0]
                    )
                pos = int(out[5])
                continue
            return pieces, status, int(out[5]), saw_end

    def _message(self, status: int, buf: np.ndarray, epos: int, out: np.ndarray) -> str:
        if status == c.ERR_FIELD_COUNT:
            if int(out[9]) == 6:
                return (
                    f"expected 6 numbers on the event line (NUP IDPRUP XWGTUP SCALUP AQEDUP "
                    f"AQCDUP), found {int(out[8])}"
                )
            return (
                "expected 13 numbers on a particle line (IDUP ISTUP MOTHUP1 MOTHUP2 ICOLUP1 "
                f"ICOLUP2 PX PY PZ E M VTIMUP SPINUP), found {int(out[8])}"
            )
        if status == c.ERR_NUMBER:
            return f"expected a number, found {_token_at(buf, epos)!r}"
        if status == c.ERR_INTEGER:
            return f"expected an integer, found {_token_at(buf, epos)!r}"
        if status == c.ERR_NEGATIVE_NUP:
            return f"NUP must not be negative, found {_token_at(buf, epos)!r}"
        if status == c.ERR_FEW_PARTICLES:
            return (
                f"NUP disagrees with the particle lines: the event declares NUP={int(out[8])} "
                f"but has {int(out[9])} particle lines"
            )
        if status == c.ERR_MANY_PARTICLES:
            return (
                f"NUP disagrees with the particle lines: a numeric line follows the "
                f"NUP={int(out[8])} particle lines of this event"
            )
        if status == c.ERR_UNKNOWN_WEIGHT:
            s, e = int(out[8]), int(out[9])
            wid = bytes(buf[s:e]).decode("utf-8", "replace") if 0 <= s <= e else "?"
            declared = ", ".join(self.ids[:8]) + (", ..." if len(self.ids) > 8 else "")
            return (
                f"<wgt id={wid!r}> is not declared in the file's <initrwgt> "
                f"(declared: {declared or 'none'})"
            )
        if status == c.ERR_WEIGHT_COUNT:
            return (
                f"<weights> holds {int(out[8])} values but the file declares {int(out[9])} weights"
            )
        if status == c.ERR_WGT_VALUE:
            return f"<wgt> must hold exactly one number, found {int(out[8])}"
        return c.ERR_MESSAGES.get(status, f"malformed event (code {status})")


# ------------------------------------------------------------------ reader thread


class _Reader:
    """Reads the event part of the stream into buffers cut just after ``</event>``.

    Runs in its own thread; ``get()`` returns ``(base, array, final)`` in file order or
    raises the reader's exception.
    """

    def __init__(self, stream: BinaryIO, first: bytes, name: str, nbuf: int) -> None:
        self.stream = stream
        self.first = first
        self.name = name
        self.q: queue.Queue[Any] = queue.Queue(maxsize=nbuf)
        self.stop = threading.Event()
        self.thread = threading.Thread(target=self._run, name="evtkin-lhe-reader", daemon=True)
        self.thread.start()

    def _fill(self, mv: memoryview, start: int) -> int:
        """readinto ``mv[start:]`` until full or EOF; returns the new fill level."""
        fill = start
        total = len(mv)
        while fill < total:
            try:
                got = self.stream.readinto(mv[fill:])  # type: ignore[attr-defined]
            except Exception as exc:
                raise LHEError(
                    f"{self.name}: cannot read (corrupt compressed stream?): {exc}"
                ) from exc
            if not got:
                break
            fill += got
        return fill

    def _run(self) -> None:
        try:
            carry = self.first
            base = 0
            size = max(BUFFER_BYTES, 2 * len(carry))
            while not self.stop.is_set():
                buf = bytearray(size)
                buf[: len(carry)] = carry
                mv = memoryview(buf)
                fill = self._fill(mv, len(carry))
                eof = fill < size
                cut = buf.rfind(_CLOSE, 0, fill)
                while cut < 0 and not eof:
                    # no complete event yet: grow the buffer
                    size *= 2
                    bigger = bytearray(size)
                    bigger[:fill] = buf[:fill]
                    buf = bigger
                    mv = memoryview(buf)
                    fill = self._fill(mv, fill)
                    eof = fill < size
                    cut = buf.rfind(_CLOSE, 0, fill)
                end = fill if eof or cut < 0 else cut + len(_CLOSE)
                carry = bytes(buf[end:fill])
                arr = np.frombuffer(buf, dtype=np.uint8, count=end)
                self._put((base, arr, eof))
                base += end
                if eof:
                    break
        except BaseException as exc:  # handed to the consumer
            self._put(exc)

    def _put(self, item: Any) -> None:
        while not self.stop.is_set():
            try:
                self.q.put(item, timeout=0.1)
                return
            except queue.Full:
                continue

    def get(self) -> tuple[int, np.ndarray, bool]:
        item = self.q.get()
        if isinstance(item, BaseException):
            raise item
        return item  # type: ignore[no-any-return]

    def close(self) -> None:
        self.stop.set()
        self.thread.join(timeout=5)
        self.stream.close()


# ------------------------------------------------------------------ public API


def _line_at(source: Source, pos: int, events_offset: int) -> int:
    """1-based line number of decompressed byte ``events_offset + pos`` of ``source``."""
    target = events_offset + pos
    lines = 1
    done = 0
    with open_binary(source) as fh:
        while done < target:
            block = fh.read(min(1 << 22, target - done))
            if not block:
                break
            lines += block.count(b"\n")
            done += len(block)
    return lines


def _sniff_weight_count(first: bytes) -> int:
    """Number of values in the first ``<weights>`` block (files that declare none)."""
    i = first.find(b"<weights>")
    if i < 0:
        i = first.find(b"<weights ")
    if i < 0:
        return 0
    j = first.find(b">", i)
    e = first.find(b"</weights", j)
    if j < 0 or e < 0:
        return 0
    return len(first[j + 1 : e].split())


def _default_threads() -> int:
    return 2 if (os.cpu_count() or 1) >= 2 else 1


def read_lhe(
    source: Source,
    *,
    step_size: int = 100_000,
    strict: bool = True,
    threads: int | None = None,
) -> Iterator[ak.Array]:
    """Stream the events of an LHE file as awkward Arrays of ``step_size`` events.

    Every chunk holds exactly ``step_size`` events except the last. ``source`` is a path
    to a plain, gzip (multi-member too), zstd, bz2 or xz file (detected by magic bytes).
    ``threads`` is the number of parse threads (default: 2 on a machine with >= 2 cores;
    a separate thread always reads and decompresses).

    Raises :class:`~evtkin.errors.LHEError` naming the file and 1-based line for
    malformed input. A file cut short (inside an event, or before
    ``</LesHouchesEvents>``) raises after the complete events were yielded when
    ``strict`` is true; with ``strict=False`` it issues an :class:`LHEWarning` instead.
    A valid file without events yields nothing.
    """
    if int(step_size) < 1:
        raise ValueError(f"step_size must be >= 1, got {step_size}")
    return _iterate(source, int(step_size), strict, threads or _default_threads())


def _iterate(source: Source, step: int, strict: bool, threads: int) -> Iterator[ak.Array]:
    name = source_name(source)
    compressed_size(source)
    stream, first, info = open_lhe(source)
    names = info.weight_names
    if not names:
        k = _sniff_weight_count(first[: 1 << 20])
        names = tuple(str(i) for i in range(k))
    nw = len(names)
    reader = _Reader(stream, first, name, nbuf=threads + 1)
    local = threading.local()

    def work(item: tuple[int, np.ndarray, bool]) -> tuple[list[_Piece], int, int, bool]:
        scanner = getattr(local, "scanner", None)
        if scanner is None:
            scanner = local.scanner = _Scanner(nw, names)
        base, arr, _final = item
        return scanner.parse(arr, base)

    pool = ThreadPoolExecutor(max_workers=threads, thread_name_prefix="evtkin-lhe-parse")
    pending: list[tuple[tuple[int, np.ndarray, bool], Future[Any]]] = []
    held: list[_Piece] = []
    held_n = 0
    total = 0
    saw_end = False
    try:
        reader_done = False
        carry: tuple[int, np.ndarray] | None = None
        while True:
            while not reader_done and len(pending) < threads + 1:
                item = reader.get()
                pending.append((item, pool.submit(work, item)))
                reader_done = item[2]
            if not pending:
                break
            item, fut = pending.pop(0)
            try:
                if carry is not None:
                    # the previous buffer ended inside an event: reparse joined
                    fut.cancel()
                    cbase, carr = carry
                    joined = np.concatenate([carr, item[1]])
                    item = (cbase, joined, item[2])
                    carry = None
                    pieces, status, resume, end_tag = _Scanner(nw, names).parse(joined, cbase)
                else:
                    pieces, status, resume, end_tag = fut.result()
            except _ScanFailure as exc:
                line = _line_at(source, exc.pos, info.events_offset)
                raise LHEError(f"{name}: line {line}: {exc.message}") from None
            saw_end = saw_end or end_tag
            for p in pieces:
                held.append(p)
                held_n += p.n
            while held_n >= step:
                chunk, held, held_n = _take(held, held_n, step)
                total += step
                yield _to_awkward(chunk)
            final = item[2]
            if status == ST_INCOMPLETE:
                base, arr = item[0], item[1]
                if not final:
                    carry = (base + resume, arr[resume:].copy())
                    continue
                tail = bytes(arr[resume:])
                n_before = total + held_n
                if b"<event" in tail:
                    line = _line_at(source, base + resume, info.events_offset)
                    msg = (
                        f"{name}: line {line}: the file is cut short inside an event that "
                        f"starts here; {n_before} complete events precede it"
                    )
                else:
                    msg = (
                        f"{name}: the file ends inside a tag after {n_before} complete events "
                        "(cut short?)"
                    )
                _problem(msg, strict, held, held_n)
                saw_end = True  # reported already
        if not saw_end:
            _problem(
                f"{name}: the file ends without </LesHouchesEvents> after "
                f"{total + held_n} complete events (cut short?)",
                strict,
                held,
                held_n,
            )
        if held_n:
            total += held_n
            yield _to_awkward(_concat(held))
    finally:
        reader.close()
        for _, fut in pending:
            fut.cancel()
        pool.shutdown(wait=True)


def _problem(msg: str, strict: bool, held: list[_Piece], held_n: int) -> None:
    if strict:
        raise LHEError(msg + "; use strict=False to read the complete events")
    warnings.warn(msg + "; the complete events are delivered", LHEWarning, stacklevel=4)


def _take(held: list[_Piece], held_n: int, step: int) -> tuple[_Piece, list[_Piece], int]:
    """Split exactly ``step`` events off the front of the held pieces."""
    parts: list[_Piece] = []
    need = step
    i = 0
    while need > 0:
        p = held[i]
        if p.n <= need:
            parts.append(p)
            need -= p.n
            i += 1
        else:
            parts.append(p.slice(0, need))
            held = [p.slice(need, p.n), *held[i + 1 :]]
            i = 0
            need = 0
            return _concat(parts), held, held_n - step
    return _concat(parts), held[i:], held_n - step
