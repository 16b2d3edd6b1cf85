"""Streaming reader of Les Houches event files: ``read_lhe(path)`` yields awkward chunks.

Pipeline (one run of :func:`read_lhe`)::

    ~4 MB buffers cut        parse workers (1-2, nogil)      caller's thread
    after </event>   ---->   byte scanner -> per-buffer  --> copy into the chunk's
    plain file: mapped views columns (reused)                preallocated columns,
    compressed: a reader                                     zero-copy awkward layout
    thread decompresses

A plain file (or a byte range of one) is never read into buffers: each buffer is a view
of a window of the file mapped into memory (:class:`_MappedReader`), made in the caller's
thread; a compressed file is decompressed by a reader thread into reused buffers.

The scanner is the compiled kernel of :mod:`evtkin.io.lhe_scan`, or the numpy/Python
one of :mod:`evtkin.io.lhe_fallback` when numba is unavailable or ``EVTKIN_NO_NUMBA=1``
is set; both fill the same columns. Each chunk is an awkward Array with one record per
event (see DEVELOPERS.md "LHE chunk"): ``process_id`` (IDPRUP), ``weight`` (XWGTUP),
``scale`` (SCALUP), ``alpha_qed`` (AQEDUP), ``alpha_qcd`` (AQCDUP), ``weights``
(regular ``n x k``; columns in the order of ``lhe_info(path).weight_names``; NaN where
an event lacks a declared weight), ``named_weights`` (the same weights as a record with one
field per weight id, ``chunk.named_weights["id"]``; files whose ``<weights>`` blocks declare
no ids: ``"0"``, ``"1"``, ...), ``particles`` (jagged ``Particle`` records, see
:mod:`evtkin.events`; ``mother1``/``mother2`` 0-based, -1 = none) and, for files with
``<eventgroup>`` blocks (LHEF 2.0), ``group``: int64 index of the first event of the
event's group (an event outside any group: its own index).

Memory: the parse workers write into buffer-sized columns that are reused; the caller's
thread copies them into one chunk's columns, carved from one block per chunk (with room
for the particles estimated from the events read so far, grown if needed); the block of a
chunk the caller has dropped is reused (no fresh pages to fault in). Peak memory is
therefore about the interpreter + libraries + a few 4 MB buffers + two chunks (the one
being filled and the one the caller holds), independent of the file size. The free chunk
memory and scratch columns of a finished read are kept for the next read in the process
(:data:`SPARE_BLOCKS`, :data:`SPARE_SCRATCH`). ``threads=0`` reads, parses and copies in
the caller's thread.
"""

from __future__ import annotations

import mmap
import os
import queue
import re
import sys
import threading
from collections import deque
from collections.abc import Callable, Generator, Iterator
from concurrent.futures import Future, ThreadPoolExecutor
from typing import Any, BinaryIO

import awkward as ak
import numpy as np

from evtkin import events as _events
from evtkin.errors import LHEError, warn_reading
from evtkin.io import lhe_scan as c
from evtkin.io.blocks import SparePool, fresh_block
from evtkin.io.lhe_header import lhe_info, open_lhe, xml_escape
from evtkin.io.sources import (
    Source,
    compressed_size,
    detect_compression,
    mapped_windows,
    open_binary,
    reader_options,
    source_name,
)

__all__ = ["LHEWarning", "read_lhe", "scanner_kind"]

BUFFER_BYTES = 4 << 20  # measured: 4 MB beat 8 MB (faster, ~20 MB less memory) and 2 MB
MAP_PLAIN = True  # plain files: scan views of the mapped file (False: read into buffers)
_CLOSE = b"</event>"
_GROUP_OPEN = b"<eventgroup"
_GROUP_CLOSE = b"</eventgroup>"

_EVENT_FIELDS = ("process_id", "weight", "scale", "alpha_qed", "alpha_qcd")


class LHEWarning(UserWarning):
    """Something in an LHE file was tolerated because ``strict=False``."""


# ------------------------------------------------------------------ scanner choice

_KERNEL: Callable[..., Any] | None = None
_KIND: str | None = None


def _kernel() -> tuple[Callable[..., Any], str]:
    """The scan kernel in use: compiled if possible, else the fallback."""
    global _KERNEL, _KIND
    if _KERNEL is None:
        compiled = c.compiled_kernel()
        if compiled is not None:  # loaded already, with numba's extensions deferred
            _KERNEL, _KIND = compiled, "numba"
        else:
            from evtkin.io.lhe_fallback import scan_kernel_py

            _KERNEL, _KIND = scan_kernel_py, "fallback"
    assert _KERNEL is not None
    assert _KIND is not None
    return _KERNEL, _KIND


def scanner_kind() -> str:
    """``"numba"`` or ``"fallback"``: which scanner :func:`read_lhe` uses."""
    return _kernel()[1]


# ------------------------------------------------------------------ errors


class _ScanFailure(Exception):
    """A malformed event; ``pos`` is the absolute byte offset in the decompressed stream."""

    def __init__(self, pos: int, message: str, scratch: _Scratch | None = None) -> None:
        super().__init__(message)
        self.pos = pos
        self.message = message
        #: the parse whose whole events before the damage are in its columns, if any
        self.scratch = scratch


def _token_at(buf: np.ndarray, pos: int) -> str:
    end = pos
    n = buf.shape[0]
    while end < n and end - pos < 40 and buf[end] not in (32, 9, 10, 13, 60):
        end += 1
    return bytes(buf[pos:end]).decode("utf-8", "replace")


def _tag_at(buf: np.ndarray, pos: int) -> str:
    """The tag (at most 40 bytes) starting at ``buf[pos]``."""
    end = pos + 1
    n = buf.shape[0]
    while end < n and end - pos < 40 and buf[end] not in (62, 60, 10):
        end += 1
    if end < n and buf[end] == 62:
        end += 1
    return bytes(buf[pos:end]).decode("utf-8", "replace")


def _name_at(buf: np.ndarray, a: int, b: int) -> str:
    return bytes(buf[a : min(b, a + 40)]).decode("utf-8", "replace") if 0 <= a <= b else "?"


def _message(
    status: int, buf: np.ndarray, epos: int, a: int, b: int, ids: tuple[str, ...]
) -> tuple[int, str]:
    """(error position, message) for a kernel error status."""
    if status == c.ERR_LINE:
        status, epos, a, b = c.diagnose_line(buf, epos, b)
    if status == c.ERR_FIELD_COUNT:
        if b == 6:
            return epos, (
                "expected 6 numbers on the event line (NUP IDPRUP XWGTUP SCALUP AQEDUP "
                f"AQCDUP), found {a}"
            )
        return epos, (
            "expected 13 numbers on a particle line (IDUP ISTUP MOTHUP1 MOTHUP2 ICOLUP1 "
            f"ICOLUP2 PX PY PZ E M VTIMUP SPINUP), found {a}"
        )
    if status == c.ERR_NUMBER:
        return epos, f"expected a number, found {_token_at(buf, epos)!r}"
    if status == c.ERR_INTEGER:
        return epos, f"expected an integer, found {_token_at(buf, epos)!r}"
    if status == c.ERR_NEGATIVE_NUP:
        return epos, f"NUP must not be negative, found {_token_at(buf, epos)!r}"
    if status == c.ERR_FEW_PARTICLES:
        return epos, (
            f"NUP disagrees with the particle lines: the event declares NUP={a} "
            f"but has {b} particle lines"
        )
    if status == c.ERR_MANY_PARTICLES:
        return epos, (
            f"NUP disagrees with the particle lines: a numeric line follows the "
            f"NUP={a} particle lines of this event"
        )
    if status == c.ERR_UNKNOWN_WEIGHT:
        wid = bytes(buf[a:b]).decode("utf-8", "replace") if 0 <= a <= b else "?"
        declared = ", ".join(ids[:8]) + (", ..." if len(ids) > 8 else "")
        return epos, (
            f"<wgt id={wid!r}> is not declared in the file's <initrwgt> "
            f"(declared: {declared or 'none'})"
        )
    if status == c.ERR_WEIGHT_COUNT:
        return epos, f"<weights> holds {a} values but the file declares {b} weights"
    if status == c.ERR_WGT_VALUE:
        return epos, f"<wgt> must hold exactly one number, found {a}"
    if status == c.ERR_EVENT_OPEN:
        return epos, (
            f"{_tag_at(buf, epos)} inside an event: the event is not closed "
            "(expected </event> first)"
        )
    if status == c.ERR_STRAY_CLOSE:
        return epos, "</event> without an open <event> (a missing or damaged <event> line?)"
    if status == c.ERR_UNCLOSED:
        tag = _name_at(buf, a, b)
        return epos, (
            f"<{tag}> is not closed inside its event (no </{tag}> before the next event tag)"
        )
    if status == c.ERR_RWGT_OPEN:
        return epos, "</event> before </rwgt>: the <rwgt> block is not closed inside its event"
    if status == c.ERR_COMMENT:
        return epos, (
            "a comment opened inside an event does not close inside it (an event tag "
            "follows before its '-->')"
        )
    if status == c.ERR_VALUE_CLOSE:
        close = "</weights>" if a == 3 else "</wgt>"
        return epos, f"expected {close} right after the value, found {_tag_at(buf, epos)!r}"
    if status == c.ERR_SECOND_HEADER:
        return epos, (
            "a second LHE header (<LesHouchesEvents>) inside the stream: two files joined "
            "into one?"
        )
    if status == c.ERR_DUP_WEIGHT:
        wid = ids[a] if 0 <= a < len(ids) else str(a)
        return epos, f"weight {wid!r} is given twice in one event"
    if status == c.ERR_NUP_TOO_BIG:
        return epos, (
            f"NUP disagrees with the particle lines: NUP={a} particle lines cannot fit "
            "before the end of the event"
        )
    if status == c.ERR_BAD_TAG:
        return epos, f"malformed tag: a '<' before its closing '>' in {_tag_at(buf, epos)!r}"
    return epos, c.ERR_MESSAGES.get(status, f"malformed event (code {status})")


# ------------------------------------------------------------------ one buffer's columns


class _Scratch:
    """Reusable columns for the events of one buffer (one parse at a time)."""

    ev_pid: np.ndarray
    ev_f: np.ndarray
    offsets: np.ndarray
    group: np.ndarray
    wts: np.ndarray
    p_i: np.ndarray
    p_f: np.ndarray

    def __init__(self, nw: int, ids: tuple[str, ...]) -> None:
        self.nw = nw
        self.ids = ids
        # ids as they appear in the events' <wgt id='...'> attributes (XML-escaped)
        enc = [xml_escape(i).encode("utf-8") for i in ids]
        self.wid_bytes = np.frombuffer(b"".join(enc) or b"\0", dtype=np.uint8).copy()
        self.wid_off = np.zeros(len(enc) + 1, dtype=np.int64)
        self.wid_off[1:] = np.cumsum([len(e) for e in enc]) if enc else []
        self.st = np.zeros(c.ST_SIZE, dtype=np.int64)
        self.slow = np.empty((1 << 12, 4), np.int64)
        self._alloc_events(1 << 13)
        self._alloc_particles(1 << 17)
        # results of the last parse
        self.n_ev = 0
        self.n_p = 0
        self.status = c.ST_OK
        self.resume = 0
        self.saw_end = False
        self.stopped = False
        #: (absolute position, message) of each damaged part skipped (lenient parses)
        self.skips: list[tuple[int, str]] = []

    def _alloc_events(self, cap: int, keep: int = 0) -> None:
        old = getattr(self, "ev_pid", None)
        pid = np.empty(cap, np.int32)
        evf = np.empty((4, cap), np.float64)
        offsets = np.empty(cap + 1, np.int64)
        group = np.empty(cap, np.int64)
        wts = np.empty((cap, self.nw), np.float64)
        offsets[0] = 0
        if old is not None and keep:
            pid[:keep] = self.ev_pid[:keep]
            evf[:, :keep] = self.ev_f[:, :keep]
            offsets[: keep + 1] = self.offsets[: keep + 1]
            group[:keep] = self.group[:keep]
            wts[:keep] = self.wts[:keep]
        self.ev_pid, self.ev_f, self.offsets, self.group, self.wts = pid, evf, offsets, group, wts

    def _alloc_particles(self, cap: int, keep: int = 0) -> None:
        old = getattr(self, "p_i", None)
        p_i = np.empty((6, cap), np.int32)
        p_f = np.empty((7, cap), np.float64)
        if old is not None and keep:
            p_i[:, :keep] = self.p_i[:, :keep]
            p_f[:, :keep] = self.p_f[:, :keep]
        self.p_i, self.p_f = p_i, p_f

    def _fix_slow(self, buf: np.ndarray, base: int, count: int) -> None:
        if count:
            bad = c.fix_slow_values(
                buf, self.slow[:count], self.ev_f, self.p_f, self.wts.reshape(-1)
            )
            if bad >= 0:
                tok = _token_at(buf, bad)
                raise _ScanFailure(base + bad, f"expected a number, found {tok!r}")

    def parse(
        self,
        kernel: Callable[..., Any],
        buf: np.ndarray,
        base: int,
        stop: int,
        lenient: bool = False,
        groups: bool = False,
    ) -> None:
        """Parse the whole events of ``buf`` (``base``: its absolute stream offset).

        Events (groups) whose tag starts at absolute offset >= ``stop`` are not read.
        Raises :class:`_ScanFailure` for malformed input; with ``lenient`` a damaged
        event (group) is skipped instead: the scan resumes at the next event (group)
        start and ``skips`` records where and why.
        """
        st = self.st
        st[:] = 0
        st[c.ST_STOP] = min(max(stop - base, 0), 1 << 62)
        saw_end = False
        self.skips = []
        while True:
            kernel(
                buf, self.wid_bytes, self.wid_off, self.ev_pid, self.ev_f, self.offsets,
                self.group, self.p_i, self.p_f, self.wts, self.slow, st,
            )  # fmt: skip
            status = int(st[c.ST_STATUS])
            saw_end = saw_end or bool(st[c.ST_SAWEND])
            if status >= 10:
                epos, msg = _message(
                    status, buf, int(st[c.ST_ERRPOS]), int(st[c.ST_A]), int(st[c.ST_B]),
                    self.ids,
                )  # fmt: skip
                if not lenient:
                    # the whole events before the damage stay in the columns (the counts
                    # of the last commit point), for the caller to deliver before the error
                    self._fix_slow(buf, base, int(st[c.ST_NSLOW]))
                    self.n_ev = int(st[c.ST_EV])
                    self.n_p = int(st[c.ST_NP])
                    raise _ScanFailure(base + epos, msg, self)
                # the counts in st are those of the last commit point; go on from the
                # next event (group) start after the damaged part
                self.skips.append((base + epos, msg))
                st[c.ST_POS] = _next_start(buf, max(epos, int(st[c.ST_POS]) + 1), groups)
                continue
            if status != c.ST_FULL:
                break
            which = int(st[c.ST_A])
            n_ev, n_p, n_slow = int(st[c.ST_EV]), int(st[c.ST_NP]), int(st[c.ST_NSLOW])
            if which == c.FULL_SLOW:
                if n_slow:  # convert what is there and start a new list
                    self._fix_slow(buf, base, n_slow)
                    st[c.ST_NSLOW] = 0
                else:
                    self.slow = np.empty((2 * self.slow.shape[0], 4), np.int64)
            elif which == c.FULL_EVENTS:
                self._alloc_events(2 * self.ev_pid.shape[0], keep=n_ev)
            else:
                self._alloc_particles(2 * self.p_i.shape[1], keep=n_p)
        self._fix_slow(buf, base, int(st[c.ST_NSLOW]))
        self.n_ev = int(st[c.ST_EV])
        self.n_p = int(st[c.ST_NP])
        self.status = status
        self.resume = int(st[c.ST_POS])
        self.saw_end = saw_end
        self.stopped = bool(st[c.ST_STOPPED])


_START = re.compile(rb"<event[ \t\r\n>/<]")
_GROUP_START = re.compile(rb"<eventgroup[ \t\r\n>/<]")


def _next_start(buf: np.ndarray, pos: int, groups: bool) -> int:
    """Offset of the first event (``groups``: event group) tag at or after ``pos``, or
    the end of ``buf``."""
    m = (_GROUP_START if groups else _START).search(memoryview(buf), pos)  # type: ignore[arg-type]
    return m.start() if m is not None else int(buf.shape[0])


# ------------------------------------------------------------------ one chunk's columns


class _SlabPool:
    """Reuses the memory of chunks the caller has let go of.

    A chunk's columns are views into one ``uint8`` slab. Fresh memory costs a page fault per
    4 kB page on first touch (measured: filling a fresh 150 MB array takes 2-7x as long as
    refilling a touched one), so a slab whose only reference is the pool's own is handed
    out again. Any view of a chunk the caller still holds (an awkward array, a numpy column)
    keeps its slab referenced, so a slab in use is never overwritten. The slabs of a finished
    read are kept for the next read in the process (:data:`SPARE_BLOCKS`).
    """

    def __init__(self, keep: int = 2) -> None:
        self.keep = keep
        self.slabs: list[np.ndarray] = []

    def take(self, nbytes: int) -> np.ndarray:
        # (indexing, not a loop variable: that would be a third reference to a free slab)
        free = [i for i in range(len(self.slabs)) if sys.getrefcount(self.slabs[i]) == 2]
        for i in free:
            if self.slabs[i].nbytes >= nbytes:
                return self.slabs[i]
        slab = _take_block(nbytes)
        if free:  # too small: replace it
            self.slabs[free[0]] = slab
        elif len(self.slabs) < self.keep:
            self.slabs.append(slab)
        return slab


#: ``nbytes`` of fresh memory (:func:`evtkin.io.blocks.fresh_block`; a name of this module so
#: that tests can count the fresh blocks)
_fresh_block = fresh_block

#: free chunk slabs kept from finished reads for the next ones in the process (their pages
#: are touched already; see :mod:`evtkin.io.blocks`)
SPARE_BLOCKS = 2
_POOL = SparePool()
#: scratch columns kept from finished reads (at most ``SPARE_SCRATCH``; under the pool's lock)
SPARE_SCRATCH = 4
_SPARE_SCRATCH: list[_Scratch] = []


def _take_block(nbytes: int) -> np.ndarray:
    """A kept slab of at least ``nbytes`` that no view refers to (the smallest), else a
    fresh one."""
    slab = _POOL.take(nbytes)
    return slab if slab is not None else _fresh_block(nbytes)


def _keep_blocks(slabs: list[np.ndarray], scratches: list[_Scratch]) -> None:
    """Keep the slabs and scratch columns of a finished read for later reads (slabs are
    taken only once no view of them is left; the newest are kept)."""
    _POOL.keep(slabs, SPARE_BLOCKS)
    with _POOL.lock:
        _SPARE_SCRATCH.extend(scratches)
        del _SPARE_SCRATCH[: max(0, len(_SPARE_SCRATCH) - SPARE_SCRATCH)]


def _spare_scratch(nw: int, ids: tuple[str, ...]) -> _Scratch:
    """A kept scratch for the weight ids ``ids``, else a new one."""
    with _POOL.lock:
        for i in range(len(_SPARE_SCRATCH)):
            if _SPARE_SCRATCH[i].ids == ids:
                return _SPARE_SCRATCH.pop(i)
    return _Scratch(nw, ids)


def _carve(
    slab: np.ndarray, layout: list[tuple[tuple[int, ...], type]]
) -> list[np.ndarray]:
    """Column views of ``slab`` with the given shapes and dtypes (64-byte aligned)."""
    out: list[np.ndarray] = []
    pos = 0
    for shape, dtype in layout:
        n = int(np.prod(shape)) * np.dtype(dtype).itemsize
        out.append(slab[pos : pos + n].view(dtype).reshape(shape))
        pos += -(-n // 64) * 64
    return out


def _slab_bytes(layout: list[tuple[tuple[int, ...], type]]) -> int:
    return sum(-(-int(np.prod(sh)) * np.dtype(dt).itemsize // 64) * 64 for sh, dt in layout)


class _Chunk:
    """The columns of one output chunk, filled by copying from scratch columns."""

    def __init__(
        self, cap: int, p_cap: int, names: tuple[str, ...], groups: bool,
        pool: _SlabPool | None = None,
    ) -> None:
        self.n = 0
        self.np = 0
        self.names = names
        self.nw = nw = len(names)
        self.groups = groups
        layout: list[tuple[tuple[int, ...], type]] = [
            ((cap,), np.int32),
            ((4, cap), np.float64),
            ((cap + 1,), np.int64),
            ((cap if groups else 0,), np.int64),
            ((cap, nw), np.float64),
            ((6, p_cap), np.int32),
            ((7, p_cap), np.float64),
        ]
        slab = (pool.take(_slab_bytes(layout)) if pool is not None
                else _fresh_block(_slab_bytes(layout)))
        (self.pid, self.evf, self.offsets, self.group, self.wts,
         self.p_i, self.p_f) = _carve(slab, layout)  # fmt: skip
        self.offsets[0] = 0

    def _grow_events(self, need: int) -> None:
        cap = max(need, 2 * self.pid.shape[0])
        n = self.n
        pid, evf, off = np.empty(cap, np.int32), np.empty((4, cap)), np.empty(cap + 1, np.int64)
        grp, wts = np.empty(cap if self.groups else 0, np.int64), np.empty((cap, self.nw))
        pid[:n], evf[:, :n], off[: n + 1], wts[:n] = (
            self.pid[:n],
            self.evf[:, :n],
            self.offsets[: n + 1],
            self.wts[:n],
        )
        if self.groups:
            grp[:n] = self.group[:n]
        self.pid, self.evf, self.offsets, self.group, self.wts = pid, evf, off, grp, wts

    def _grow_particles(self, need: int) -> None:
        cap = max(need, 2 * self.p_i.shape[1])
        p_i, p_f = np.empty((6, cap), np.int32), np.empty((7, cap))
        p_i[:, : self.np] = self.p_i[:, : self.np]
        p_f[:, : self.np] = self.p_f[:, : self.np]
        self.p_i, self.p_f = p_i, p_f

    def add(self, s: _Scratch, a: int, b: int, first_index: int) -> None:
        """Append scratch events ``[a, b)``; ``first_index``: global index of scratch row 0."""
        m = b - a
        n, np0 = self.n, self.np
        pa, pb = int(s.offsets[a]), int(s.offsets[b])
        k = pb - pa
        if n + m > self.pid.shape[0]:
            self._grow_events(n + m)
        if np0 + k > self.p_i.shape[1]:
            self._grow_particles(np0 + k)
        self.pid[n : n + m] = s.ev_pid[a:b]
        self.evf[:, n : n + m] = s.ev_f[:, a:b]
        self.wts[n : n + m] = s.wts[a:b]
        np.add(s.offsets[a + 1 : b + 1], np0 - pa, out=self.offsets[n + 1 : n + m + 1])
        if self.groups:
            np.add(s.group[a:b], first_index, out=self.group[n : n + m])
        self.p_i[:, np0 : np0 + k] = s.p_i[:, pa:pb]
        self.p_f[:, np0 : np0 + k] = s.p_f[:, pa:pb]
        self.n += m
        self.np += k

    def to_awkward(self) -> ak.Array:
        """Zero-copy awkward layout over the filled part of the columns."""
        n, np_ = self.n, self.np
        contents = ak.contents
        fields = [contents.NumpyArray(self.p_i[j, :np_]) for j in range(6)]
        fields += [contents.NumpyArray(self.p_f[j, :np_]) for j in range(7)]
        particles = contents.ListOffsetArray(
            ak.index.Index64(self.offsets[: n + 1]),
            contents.RecordArray(
                fields, list(_events.PARTICLE_FIELDS), parameters={"__record__": "Particle"}
            ),
        )
        wts = self.wts[:n]
        weights = contents.RegularArray(
            contents.NumpyArray(wts.reshape(-1)), self.nw, zeros_length=n
        )
        columns = [contents.NumpyArray(self.pid[:n])]
        columns += [contents.NumpyArray(self.evf[j, :n]) for j in range(4)]
        columns += [weights, _events.named_weights(wts, self.names), particles]
        names = [*_EVENT_FIELDS, "weights", "named_weights", "particles"]
        if self.groups:
            columns.append(contents.NumpyArray(self.group[:n]))
            names.append("group")
        return ak.Array(contents.RecordArray(columns, names, length=n))


# ------------------------------------------------------------------ reader thread


def _cut(buf: bytearray | mmap.mmap, fill: int, groups: bool, start: int = 0) -> int:
    """End of the last whole event (group) in ``buf[start:fill]``, or -1 if there is none."""
    e = buf.rfind(_CLOSE, start, fill)
    if e < 0:
        return -1
    end = e + len(_CLOSE)
    if groups:
        go = buf.rfind(_GROUP_OPEN, start, fill)
        gc = buf.rfind(_GROUP_CLOSE, start, fill)
        if go > gc:  # a group is still open at the end: cut before it
            end = go if go > start else -1
        elif gc >= 0 and gc + len(_GROUP_CLOSE) > end:
            end = gc + len(_GROUP_CLOSE)
    return end


class _Reader:
    """Reads the event part of the stream into reused buffers cut after whole events.

    ``get()`` returns ``(base, array, final, eof, raw)`` in file order (``base``: absolute
    offset of ``array[0]`` in the decompressed stream; ``raw``: the buffer to hand back with
    ``recycle``) or raises the reader's exception. With ``threaded`` the reading and
    decompression run ahead in a thread of their own; otherwise ``get()`` reads.
    """

    def __init__(
        self,
        stream: BinaryIO,
        first: bytes,
        base: int,
        stop: int | None,
        groups: bool,
        name: str,
        nbuf: int,
        threaded: bool = True,
    ) -> None:
        self.stream = stream
        self.first = first
        self.base = base
        self.stop_at = stop
        self.groups = groups
        self.name = name
        self.free: queue.SimpleQueue[bytearray] = queue.SimpleQueue()
        self.stop = threading.Event()
        #: what ended the stream early (a cut or corrupt compressed file), if anything
        self.damage: str | None = None
        self.items = self._produce()
        self.thread: threading.Thread | None = None
        if threaded:
            self.q: queue.Queue[Any] = queue.Queue(maxsize=nbuf)
            self.thread = threading.Thread(
                target=self._run, name="evtkin-lhe-reader", daemon=True
            )
            self.thread.start()

    def _fill(self, mv: memoryview, start: int) -> int:
        """readinto ``mv[start:]`` until full or EOF; returns the new fill level."""
        fill = start
        total = len(mv)
        while fill < total:
            try:
                got = self.stream.readinto(mv[fill:])  # type: ignore[attr-defined]
            except LHEError as exc:
                # damage in the compressed stream: what came before it is read as the
                # end of the stream, the caller reports the damage afterwards
                self.damage = str(exc)
                break
            except Exception as exc:
                self.damage = f"{self.name}: cannot read (corrupt compressed stream?): {exc}"
                break
            if not got:
                break
            fill += got
        return fill

    def _buffer(self, size: int) -> bytearray:
        try:
            buf = self.free.get_nowait()
            if len(buf) == size:
                return buf
        except queue.Empty:
            pass
        return bytearray(size)

    def _produce(self) -> Generator[tuple[int, np.ndarray, bool, bool, bytearray], None, None]:
        carry = self.first
        base = self.base
        size = max(BUFFER_BYTES, 2 * len(carry))
        while not self.stop.is_set():
            buf = self._buffer(size)
            buf[: len(carry)] = carry
            mv = memoryview(buf)
            fill = self._fill(mv, len(carry))
            eof = fill < size
            end = _cut(buf, fill, self.groups)
            while end < 0 and not eof:
                # no complete event yet: grow the buffer
                size *= 2
                bigger = bytearray(size)
                bigger[:fill] = buf[:fill]
                buf = bigger
                mv = memoryview(buf)
                fill = self._fill(mv, fill)
                eof = fill < size
                end = _cut(buf, fill, self.groups)
            if eof or end < 0:
                end = fill
            carry = bytes(buf[end:fill])
            del mv
            arr = np.frombuffer(buf, dtype=np.uint8, count=end)
            final = eof or (self.stop_at is not None and base + end >= self.stop_at)
            yield (base, arr, final, eof, buf)
            base += end
            if final:
                return

    def _run(self) -> None:
        try:
            for item in self.items:
                self._put(item)
        except BaseException as exc:  # handed to the consumer
            self._put(exc)

    def _put(self, item: Any) -> None:
        while not self.stop.is_set():
            try:
                self.q.put(item, timeout=0.1)
                return
            except queue.Full:
                continue

    def get(self) -> tuple[int, np.ndarray, bool, bool, Any]:
        if self.thread is None:
            return next(self.items)
        item = self.q.get()
        if isinstance(item, BaseException):
            raise item
        return item  # type: ignore[no-any-return]

    def recycle(self, buf: Any) -> None:
        self.free.put(buf)

    def close(self) -> None:
        self.stop.set()
        if self.thread is not None:
            self.thread.join(timeout=5)
        else:
            self.items.close()
        self.stream.close()


class _MappedReader:
    """The buffers of a plain file: views of the file mapped into memory, no copy (the
    same ``get()`` as :class:`_Reader`, in the caller's thread: mapping a window and finding
    its last ``</event>`` costs microseconds). Each buffer is a map of its own (private,
    so that its view is writable like a read buffer and the scanner sees one array type),
    unmapped when its last view goes: the mapped pages of the file counted in the resident
    memory stay a few buffers' worth. A window without a whole event is mapped again twice
    as large, as :class:`_Reader` grows its buffer.

    A file that shrinks while it is read raises :class:`LHEError` (checked before every
    window, :func:`~evtkin.io.sources.map_window`). A file that grows is read up to its
    size at the start."""

    damage: str | None = None

    def __init__(self, source: Source, base: int, stop: int | None, groups: bool) -> None:
        self.fh = open(source, "rb")  # noqa: SIM115 - closed in close()
        self.name = source_name(source)
        self.groups = groups
        self.items = self._produce(base, os.fstat(self.fh.fileno()).st_size, stop)

    def _produce(
        self, pos: int, size: int, stop: int | None
    ) -> Iterator[tuple[int, np.ndarray, bool, bool, Any]]:
        groups = self.groups
        windows = mapped_windows(self.fh.fileno(), pos, size, BUFFER_BYTES, self.name,
                                 LHEError, lambda mm, a, b: _cut(mm, b, groups, a))
        for at, view, eof in windows:
            final = eof or (stop is not None and at + len(view) >= stop)
            yield at, view, final, eof, None
            if final:
                return

    def get(self) -> tuple[int, np.ndarray, bool, bool, Any]:
        return next(self.items)

    def recycle(self, buf: Any) -> None:
        pass

    def close(self) -> None:
        self.items.close()  # type: ignore[attr-defined]
        self.fh.close()


class _Done:
    """A finished computation with the interface of a ``Future`` (for inline parsing)."""

    def __init__(self, fn: Callable[..., _Scratch], *args: Any) -> None:
        self.fn = fn
        self.args = args

    def result(self) -> _Scratch:
        return self.fn(*self.args)

    def cancel(self) -> bool:
        return True


# ------------------------------------------------------------------ byte ranges

_EVENT_TAG = re.compile(rb"<event(?:group)?[ \t\r\n>]")
_WINDOW = 1 << 20


def _find(fh: BinaryIO, pattern: re.Pattern[bytes], pos: int, limit: int) -> int:
    """Absolute offset of the first match of ``pattern`` at >= ``pos`` (< ``limit``), or -1."""
    overlap = 16
    while pos < limit:
        fh.seek(pos)
        block = fh.read(min(_WINDOW, limit - pos + overlap))
        if not block:
            return -1
        m = pattern.search(block)
        if m is not None:
            return pos + m.start()
        if len(block) <= overlap:
            return -1
        pos += len(block) - overlap
    return -1


def _in_comment(fh: BinaryIO, pos: int, lo: int) -> int:
    """If ``pos`` lies inside an XML comment (opened within 1 MB before it): the offset
    just after the comment's end, else -1."""
    a = max(lo, pos - _WINDOW)
    fh.seek(a)
    before = fh.read(pos - a)
    o = before.rfind(b"<!--")
    # the comment's end comes after its opening '<!--' (in '<!-->' it is not yet closed)
    if o < 0 or before.find(b"-->", o + 4) >= 0:
        return -1
    end = _find(fh, re.compile(re.escape(b"-->")), pos, 1 << 62)
    return end + 3 if end >= 0 else 1 << 62


def _sync(path: Source, start: int, stop: int, events_offset: int, groups: bool) -> int:
    """Offset of the first event (or group) tag at or after ``start``; ``stop`` if none.

    Event tags inside a group opened before ``start`` belong to an earlier range; tags
    inside XML comments are not events.
    """
    with open(path, "rb") as fh:
        pos = start
        while pos < stop:
            cand = _find(fh, _EVENT_TAG, pos, stop)
            if cand < 0 or cand >= stop:
                return stop
            after = _in_comment(fh, cand, events_offset)
            if after >= 0:
                pos = after
                continue
            fh.seek(cand)
            is_group = fh.read(11) == _GROUP_OPEN
            if groups and not is_group:
                close = _find(fh, re.compile(re.escape(_GROUP_CLOSE)), cand, 1 << 62)
                if close >= 0:
                    opened = _find(fh, re.compile(re.escape(_GROUP_OPEN)), cand, close)
                    if opened < 0:  # inside a group that started before ``start``
                        pos = close + len(_GROUP_CLOSE)
                        continue
            return cand
    return stop


def _file_has_groups(head: bytes) -> bool:
    """Whether the event section (its first bytes) uses ``<eventgroup>`` blocks."""
    return _GROUP_OPEN in head


# ------------------------------------------------------------------ public API


def _line_at(source: Source, pos: int) -> int:
    """1-based line number of absolute decompressed byte ``pos`` of ``source``."""
    lines = 1
    done = 0
    with open_binary(source) as fh:
        while done < pos:
            block = fh.read(min(1 << 22, pos - done))
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


def read_lhe(
    source: Source,
    *,
    step_size: int = 100_000,
    strict: bool = True,
    threads: int | None = None,
    byte_range: tuple[int, int] | None = None,
) -> Iterator[ak.Array]:
    """Stream the events of an LHE file as awkward Arrays of ``step_size`` events.

    Every chunk holds exactly ``step_size`` events except the last; in a file with
    ``<eventgroup>`` blocks a group is never split, so a chunk may hold more events to
    finish one (and the chunks carry a ``group`` field, see the module docstring).
    ``source`` is a path to a plain, gzip (multi-member too), zstd, bz2 or xz file
    (detected by magic bytes). ``threads`` is the number of parse threads (default: 2
    where there are cores for them, 1 for a compressed file on 2 cores), beside which a
    thread reads and decompresses;
    ``threads=0`` does everything in the caller's thread, for one core per reader (as in
    a run with one worker process per core).

    ``byte_range=(start, stop)`` (plain files only) reads exactly the events whose
    ``<event`` tag (or enclosing ``<eventgroup`` tag) starts at a byte offset in
    ``[start, stop)``; the offsets need no alignment, so ranges that tile the file read
    every event once. There, ``group`` counts from the first event of the range.

    Raises :class:`~evtkin.errors.LHEError` naming the file and 1-based line for
    malformed input, once every complete event before it was yielded (the last chunk
    before the error may be short). A file cut short (inside an event, or before
    ``</LesHouchesEvents>``) raises after the complete events were yielded when
    ``strict`` is true; with ``strict=False`` it issues an :class:`LHEWarning` instead.
    A valid file without events yields nothing.
    """
    _, nthreads, byte_range = reader_options(source, int(step_size), threads, byte_range,
                                             LHEError)  # fmt: skip
    return _iterate(source, int(step_size), strict, nthreads, byte_range)


def _open_events(
    source: Source, byte_range: tuple[int, int] | None
) -> tuple[BinaryIO, bytes, int, int | None, Any, bool]:
    """(stream, first bytes, absolute offset of those bytes, stop, info, has groups)."""
    if byte_range is None:
        stream, first, info = open_lhe(source)
        return stream, first, info.events_offset, None, info, _file_has_groups(first)
    info = lhe_info(source)
    size = compressed_size(source)
    with open(source, "rb") as fh:
        fh.seek(info.events_offset)
        head = fh.read(BUFFER_BYTES)
    groups = _file_has_groups(head)
    start = max(byte_range[0], info.events_offset)
    stop = min(byte_range[1], size)
    begin = _sync(source, start, stop, info.events_offset, groups) if start < stop else stop
    stream = open(source, "rb")  # noqa: SIM115 - closed by the reader
    stream.seek(begin)
    return stream, b"", begin, stop, info, groups


def _iterate(
    source: Source,
    step: int,
    strict: bool,
    threads: int,
    byte_range: tuple[int, int] | None,
) -> Iterator[ak.Array]:
    name = source_name(source)
    compressed_size(source)
    kernel, _ = _kernel()
    stream, first, begin, stop, info, groups = _open_events(source, byte_range)
    names = info.weight_names
    if not names:
        head = first[: 1 << 20]
        if byte_range is not None:
            with open(source, "rb") as fh:
                fh.seek(info.events_offset)
                head = fh.read(1 << 20)
        k = _sniff_weight_count(head)
        names = tuple(str(i) for i in range(k))
    nw = len(names)
    stop_abs = stop if stop is not None else 1 << 62
    # a range that ends before the end of the file need not see </LesHouchesEvents>
    need_end = stop is None or stop >= compressed_size(source)
    if stop is not None and begin >= stop:
        stream.close()
        return
    reader: _Reader | _MappedReader
    if MAP_PLAIN and detect_compression(source) is None:
        stream.close()
        reader = _MappedReader(source, begin, stop, groups)
    else:
        reader = _Reader(stream, first, begin, stop, groups, name, nbuf=1,
                         threaded=threads > 0)  # fmt: skip
    free: list[_Scratch] = []
    slabs = _SlabPool()

    lenient = not strict

    def work(s: _Scratch, base: int, arr: np.ndarray) -> _Scratch:
        s.parse(kernel, arr, base, stop_abs, lenient, groups)
        return s

    def scratch() -> _Scratch:
        return free.pop() if free else _spare_scratch(nw, names)

    pool = (ThreadPoolExecutor(max_workers=threads, thread_name_prefix="evtkin-lhe-parse")
            if threads > 0 else None)

    def submit(s: _Scratch, base: int, arr: np.ndarray) -> Future[_Scratch] | _Done:
        if pool is None:  # parse when the result is asked for, in this thread
            return _Done(work, s, base, arr)
        return pool.submit(work, s, base, arr)

    pending: deque[tuple[tuple[int, np.ndarray, bool, bool, Any],
                         Future[_Scratch] | _Done]]
    pending = deque()
    chunk: _Chunk | None = None
    per_event = 16.0  # particles per event (upper estimate), refined while reading
    ratio = 0.0  # the largest particles-per-event ratio of a buffer so far
    total = 0  # events yielded
    n_seen = 0  # events parsed so far (global index of the next scratch's row 0)
    saw_end = False
    stopped = False
    eof = False
    skipped: list[tuple[int, str]] = []
    damage_reported = False
    #: strict: the error raised once the complete events before it were yielded
    error: str | None = None

    def problem(msg: str) -> None:
        nonlocal error
        if strict:
            error = error or msg + "; use strict=False to read the complete events"
        else:
            _problem(msg, strict)

    def hand(s: _Scratch) -> Iterator[ak.Array]:
        """The events of a parse, handed to chunks of exactly ``step`` (groups kept whole)."""
        nonlocal chunk, total, ratio, per_event
        a = 0
        if s.n_ev:
            ratio = max(ratio, s.n_p / s.n_ev)
            per_event = 1.15 * ratio
        while a < s.n_ev:
            if chunk is None:
                chunk = _Chunk(step, int(step * per_event) + 64, names, groups, slabs)
            b = min(a + step - chunk.n, s.n_ev)
            if groups and b < s.n_ev:
                # never split a group: extend to the next group start
                g = s.group[b : s.n_ev]
                starts = np.flatnonzero(g == np.arange(b, s.n_ev))
                b = b + int(starts[0]) if starts.size else s.n_ev
            chunk.add(s, a, b, n_seen)
            a = b
            if chunk.n >= step:
                out = chunk.to_awkward()
                total += chunk.n
                chunk = None
                yield out
                del out  # the caller may have let go of it: its memory can be reused

    try:
        reader_done = False
        carry: tuple[int, np.ndarray] | None = None
        while True:
            while not reader_done and len(pending) < threads + 1:
                item = reader.get()
                pending.append((item, submit(scratch(), item[0], item[1])))
                reader_done = item[2]
            if not pending:
                break
            item, fut = pending.popleft()
            base, arr, final, item_eof, raw = item
            try:
                if carry is not None:
                    # the previous buffer ended inside an event: parse joined
                    s = fut.result()
                    cbase, carr = carry
                    arr = np.concatenate([carr, arr])
                    base = cbase
                    carry = None
                    s.parse(kernel, arr, base, stop_abs, lenient, groups)
                else:
                    s = fut.result()
            except _ScanFailure as exc:
                # the complete events before the damage first, then the error
                error = f"{name}: line {_line_at(source, exc.pos)}: {exc.message}"
                if exc.scratch is not None:
                    yield from hand(exc.scratch)
                break
            saw_end = saw_end or s.saw_end
            stopped = stopped or s.stopped
            skipped.extend(s.skips)
            eof = eof or item_eof
            yield from hand(s)
            n_seen += s.n_ev
            status, resume = s.status, s.resume
            free.append(s)
            if status == c.ST_INCOMPLETE:
                if not final:
                    carry = (base + resume, arr[resume:].copy())
                    reader.recycle(raw)
                    continue
                tail = bytes(arr[resume:])
                n_before = n_seen
                if reader.damage is not None:
                    line = _line_at_safe(source, base + resume)
                    msg = (
                        f"{reader.damage}; the events from line {line} on cannot be read; "
                        f"{n_before} complete events precede"
                    )
                    damage_reported = True
                elif b"<event" in tail:
                    line = _line_at(source, base + resume)
                    msg = (
                        f"{name}: line {line}: the file is cut short inside an event that "
                        f"starts here; {n_before} complete events precede it"
                    )
                else:
                    msg = (
                        f"{name}: the file ends inside a tag after {n_before} complete events "
                        "(cut short?)"
                    )
                problem(msg)
                saw_end = True  # reported already
            reader.recycle(raw)
        if error is None:
            if skipped:
                _warn_skipped(source, name, skipped)
            if reader.damage is not None and not damage_reported:
                problem(f"{reader.damage}; {n_seen} complete events precede")
                saw_end = True
            if not saw_end and not stopped and eof and need_end:
                problem(
                    f"{name}: the file ends without </LesHouchesEvents> after "
                    f"{n_seen} complete events (cut short?)"
                )
        if chunk is not None and chunk.n:
            out = chunk.to_awkward()
            chunk = None
            yield out
        if error is not None:
            raise LHEError(error)
    finally:
        reader.close()
        for _, fut in pending:
            fut.cancel()
        if pool is not None:
            pool.shutdown(wait=True)
        _keep_blocks(slabs.slabs, free)


def _line_at_safe(source: Source, pos: int) -> int:
    """:func:`_line_at` of a position before damage in the stream (never raises there)."""
    try:
        return _line_at(source, pos)
    except LHEError:  # pragma: no cover - the position lies before the damage
        return 0


def _lines_at(source: Source, positions: list[int]) -> list[int]:
    """1-based line numbers of absolute decompressed byte offsets (one pass)."""
    order = sorted(range(len(positions)), key=positions.__getitem__)
    out = [0] * len(positions)
    lines = 1
    done = 0
    k = 0
    with open_binary(source) as fh:
        while k < len(order):
            target = positions[order[k]]
            if done < target:
                block = fh.read(min(1 << 22, target - done))
                if not block:
                    target = done
                else:
                    lines += block.count(b"\n")
                    done += len(block)
                    continue
            out[order[k]] = lines
            k += 1
    return out


def _warn_skipped(source: Source, name: str, skipped: list[tuple[int, str]]) -> None:
    lines = _lines_at(source, [p for p, _ in skipped])
    shown = ", ".join(str(x) for x in lines[:10]) + (", ..." if len(lines) > 10 else "")
    warn_reading(
        f"{name}: skipped {len(skipped)} damaged part(s) of the event stream, at line(s) "
        f"{shown}; the first: line {lines[0]}: {skipped[0][1]}; every intact event is "
        "delivered",
        LHEWarning,
        stacklevel=4,
    )


def _problem(msg: str, strict: bool) -> None:
    if strict:
        raise LHEError(msg + "; use strict=False to read the complete events")
    warn_reading(msg + "; the complete events are delivered", LHEWarning, stacklevel=4)
