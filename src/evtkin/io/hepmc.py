"""Streaming reader of HepMC ASCII event files: ``read_hepmc(path)`` yields awkward chunks.

Pipeline (one run of :func:`read_hepmc`), as for LHE files (:mod:`evtkin.io.lhe`)::

    buffers of ~4 MB cut       parse workers (1-2, nogil)        caller's thread
    before a line "E "  --->   byte scanner -> columns    --->   copies the columns into
    plain file: mapped views   (compiled, or the Python          chunks of exactly
    compressed: a reader       fallback), one scratch per        step_size events,
    thread decompresses        buffer in flight                  zero-copy awkward layout

A plain file (or a byte-range unit) is never read into buffers: each buffer is a view of
a window of the file mapped into memory (:class:`_MappedBuffers`), made in the caller's
thread. ``threads=0`` does everything in the caller's thread. Memory blocks (scratch,
chunk columns) are reused once no view of them is left, and kept for the next read in
the process (:data:`SPARE_BLOCKS`).

Each chunk is an awkward Array with one record per event: ``event_number`` (int64),
``weight`` (the first weight; 1 for an event without weights), ``weights`` (regular
``n x k``, columns in the order of ``hepmc_info(path).weight_names``), ``named_weights``
(the same columns as a record with one field per weight name), ``scale``,
``alpha_qcd``, ``alpha_qed``, ``xsec_pb``, ``xsec_err_pb`` (float64, NaN where the file
has none; in IO_GenEvent files the unset value -1 of scale and couplings reads as NaN),
``signal_process_id`` (int64: IO_GenEvent's process id, Asciiv3's ``signal_process_id``
attribute; -1 where the file has none), the PDF info (IO_GenEvent ``F`` line, Asciiv3
``GenPdfInfo`` attribute): ``pdf_parton1``, ``pdf_parton2`` (PDG ids), ``pdf_x1``,
``pdf_x2``, ``pdf_scale`` (as written), ``pdf_xf1``, ``pdf_xf2`` (x f(x)),
``pdf_set1``, ``pdf_set2`` (PDF set ids; the floats NaN and the ints 0 where the event
has none),
``particles`` (jagged ``Particle`` records, see :mod:`evtkin.events`: ``pdgid``,
``status``, ``px``, ``py``, ``pz``, ``energy``, ``mass`` (the generated mass as written),
``prod_vertex``, ``end_vertex``: 0-based indices into the same event's ``vertices``,
-1 = none) and ``vertices`` (jagged records ``x``, ``y``, ``z``, ``t`` in mm (t as c*t),
``status``). Momenta are converted from MEV to GeV and lengths from CM to mm.

Chunk size: ``step_size`` events, or, by default, as many events as fit in about
``CHUNK_TEXT_BYTES`` of text judged from the first buffer (showered events are large:
a chunk of a 20 kB-per-event file then holds ~800 events and ~20 MB of columns), at
most 100 000. Memory is the interpreter and libraries, a few buffers and their columns,
and two chunks: flat in the file size.
"""

from __future__ import annotations

import mmap
import queue
import sys
import threading
from collections import deque
from collections.abc import Callable, Iterator
from concurrent.futures import Future, ThreadPoolExecutor
from typing import Any, BinaryIO

import awkward as ak
import numpy as np

from evtkin import events as _events
from evtkin.errors import HepMCError, warn_reading
from evtkin.io import hepmc_scan as c
from evtkin.io.blocks import SparePool, anonymous_map, fresh_block
from evtkin.io.hepmc_header import (
    FORM_NAMES,
    TolerantStream,
    _first_event_facts,
    compression,
    file_size,
    open_hepmc,
    open_stream,
    read_block,
)
from evtkin.io.sources import Source, mapped_windows, reader_options, source_name

__all__ = ["HepMCWarning", "hepmc_byte_ranges", "read_hepmc", "scanner_kind"]

BUFFER_BYTES = 4 << 20
CHUNK_TEXT_BYTES = 16 << 20
MAX_AUTO_STEP = 100_000
MAP_PLAIN = True  # plain files: scan views of the mapped file (False: read into buffers)
PARTICLE_FIELDS = ("pdgid", "status", "prod_vertex", "end_vertex",
                   "px", "py", "pz", "energy", "mass")  # fmt: skip
VERTEX_FIELDS = ("status", "x", "y", "z", "t")
EVENT_FIELDS = ("weight", "scale", "alpha_qcd", "alpha_qed", "xsec_pb", "xsec_err_pb")
PDF_FIELDS = c.PDF_FIELDS
_CUT = b"\nE "
_events.register()  # the Particle behaviour of the particle records
_MAX_LISTED = 20  # damaged events named in a warning


class HepMCWarning(UserWarning):
    """Something in a HepMC file was tolerated because ``strict=False``."""


# ------------------------------------------------------------------ scanner choice

_KERNEL: Callable[..., Any] | None = None
_KIND: str | None = None


def _kernel() -> tuple[Callable[..., Any], str]:
    global _KERNEL, _KIND
    if _KERNEL is None:
        compiled = c.compiled_kernel()
        if compiled is not None:
            _KERNEL, _KIND = compiled, "numba"
        else:
            from evtkin.io.hepmc_fallback import scan_py

            _KERNEL, _KIND = scan_py, "fallback"
    assert _KERNEL is not None
    assert _KIND is not None
    return _KERNEL, _KIND


def scanner_kind() -> str:
    """``"numba"`` or ``"fallback"``: which scanner :func:`read_hepmc` uses."""
    return _kernel()[1]


# ------------------------------------------------------------------ one buffer


#: ``nbytes`` of fresh memory (:func:`evtkin.io.blocks.fresh_block`; a name of this module so
#: that tests can count the fresh blocks)
_block = fresh_block

#: free blocks kept from finished reads for the next ones in the process (their pages are
#: touched already; see :mod:`evtkin.io.blocks`)
SPARE_BLOCKS = 6
#: chunk blocks larger than this are not kept (a large ``step_size`` would otherwise leave
#: their pages resident after the read; scratch blocks are mostly untouched address space)
SPARE_CHUNK_BYTES = 64 << 20
_POOL = SparePool()


def _take_block(nbytes: int, extra: int = 0) -> np.ndarray:
    """A kept block of at least ``nbytes`` that no view refers to (the smallest), else a
    fresh one of ``nbytes + extra``."""
    block = _POOL.take(nbytes)
    return block if block is not None else _block(nbytes + extra)


def _keep_blocks(blocks: list[np.ndarray]) -> None:
    """Keep ``blocks`` for later reads (taken only once no view of them is left)."""
    _POOL.keep(blocks, SPARE_BLOCKS)


Layout = list[tuple[tuple[int, ...], Any]]


def _layout_bytes(layout: Layout) -> int:
    return sum(-(-int(np.prod(sh)) * np.dtype(dt).itemsize // 64) * 64 for sh, dt in layout)


def _carve(block: np.ndarray, layout: Layout) -> list[np.ndarray]:
    """Views of ``block`` with the given shapes and dtypes (64-byte aligned)."""
    out: list[np.ndarray] = []
    pos = 0
    for shape, dtype in layout:
        n = int(np.prod(shape)) * np.dtype(dtype).itemsize
        out.append(block[pos : pos + n].view(dtype).reshape(shape))
        pos += -(-n // 64) * 64
    return out


class _BlockPool:
    """Hands out again the block of a chunk the caller has let go of (its pages are
    touched already: no page faults on refilling). A block is free when no view of it is
    left, i.e. its only references are the pool's list and ``getrefcount``'s argument."""

    def __init__(self, keep: int = 2) -> None:
        self.keep = keep
        self.blocks: list[np.ndarray] = []

    def take(self, nbytes: int) -> np.ndarray:
        # (indexing, not a loop variable: that would be a third reference to a free block)
        free = [i for i in range(len(self.blocks)) if sys.getrefcount(self.blocks[i]) == 2]
        for i in free:
            if self.blocks[i].nbytes >= nbytes:
                return self.blocks[i]
        block = _take_block(nbytes, nbytes // 4)  # (room for the next chunks' estimates)
        if free:
            self.blocks[free[0]] = block
        elif len(self.blocks) < self.keep:
            self.blocks.append(block)
        return block


class Scratch:
    """The columns one scan writes (sized for the events of ``nbytes`` of text), reused
    from buffer to buffer: only the pages a scan touches are ever resident."""

    nbytes: int = -1
    block: np.ndarray

    def __init__(self, nbytes: int) -> None:
        self.ensure(nbytes)

    def ensure(self, nbytes: int) -> None:
        if nbytes <= self.nbytes:
            return
        # room for the next buffers, which differ by a line or so: a new block has pages
        # that fault again when first written
        self.nbytes = nbytes = max(int(nbytes) + (int(nbytes) >> 3), BUFFER_BYTES + (1 << 20))
        cap = c.capacities(nbytes)
        ce, cp, cv = cap["events"], cap["particles"], cap["vertices"]
        i64, f64, i32 = np.int64, np.float64, np.int32
        layout: Layout = [
            ((c.N_EVI, ce), i64), ((c.N_EVF, ce), f64), ((ce + 1,), i64), ((ce + 1,), i64),
            ((c.N_PI, cp), i32), ((c.N_PF, cp), f64), ((cv,), i32), ((c.N_VF, cv), f64),
            ((cap["weights"],), f64), ((3, cp), i64), ((4, cv), i64), ((cap["incoming"],), i64),
            ((cap["slow"], 5), i64), ((cap["errors"], 6), i64),
        ]  # fmt: skip
        # (mostly never touched: only the pages a scan writes become resident)
        self.block = _take_block(_layout_bytes(layout))
        (self.ev_i, self.ev_f, self.p_off, self.v_off, self.p_i, self.p_f, self.v_i, self.v_f,
         self.wts, self.pscr, self.vscr, self.inl, self.slow,
         self.errs) = _carve(self.block, layout)  # fmt: skip


class Parsed:
    """One buffer's events and what the scan reported: views of its :class:`Scratch`
    (valid until the scratch is scanned into again; offsets relative to the buffer)."""

    scratch: Scratch
    n_ev: int
    n_done: int  # events complete before an error
    ev_i: np.ndarray
    ev_f: np.ndarray
    wts: np.ndarray
    p_off: np.ndarray
    v_off: np.ndarray
    p_i: np.ndarray
    p_f: np.ndarray
    v_i: np.ndarray
    v_f: np.ndarray
    status: int
    pos: int  # relative
    errpos: int
    evstart: int
    a: int
    b: int
    errs: np.ndarray  # lenient: (event start, resume, errpos, code, a, b), relative


def scan_buffer(
    kernel: Callable[..., Any], arr: np.ndarray, form: int, k: int, final: bool,
    stop: int, lenient: bool, scratch: Scratch | None = None,
) -> Parsed:  # fmt: skip
    """Scan one buffer of whole events into ``scratch`` (a new one if None); the result's
    columns are views of it, units converted to GeV and mm."""
    if scratch is None:
        scratch = Scratch(arr.shape[0])
    else:
        scratch.ensure(arr.shape[0])
    w = scratch
    cfg = np.zeros(c.CFG_SIZE, np.int64)
    cfg[c.CFG_FORM], cfg[c.CFG_K], cfg[c.CFG_FINAL] = form, k, int(final)
    cfg[c.CFG_STOP], cfg[c.CFG_LENIENT] = min(stop, 1 << 62), int(lenient)
    st = np.zeros(c.ST_SIZE, np.int64)
    wts = w.wts if w.wts.shape[0] >= 1 else np.empty(1)
    kernel(arr, cfg, st, w.ev_i, w.ev_f, w.p_off, w.v_off, w.p_i, w.p_f, w.v_i, w.v_f, wts,
           w.pscr, w.vscr, w.inl, w.slow, w.errs)  # fmt: skip
    out = Parsed()
    out.scratch = w
    n_ev, n_p, n_v = int(st[c.ST_EV]), int(st[c.ST_NP]), int(st[c.ST_NV])
    out.status, out.pos = int(st[c.ST_STATUS]), int(st[c.ST_POS])
    out.errpos, out.evstart = int(st[c.ST_ERRPOS]), int(st[c.ST_EVSTART])
    out.a, out.b = int(st[c.ST_A]), int(st[c.ST_B])
    out.errs = w.errs[: int(st[c.ST_NERR])].copy()
    out.n_done = n_ev
    if out.status >= c.ERR_LINE:
        n_ev = n_p = n_v = 0
    nslow = int(st[c.ST_NSLOW])
    if nslow and n_ev:
        c.fix_slow(arr, w.slow[:nslow], w.ev_f, w.p_f, w.v_f, w.wts)
    out.n_ev = n_ev
    out.ev_i = w.ev_i[:, :n_ev]
    out.ev_f = w.ev_f[:, :n_ev]
    out.wts = w.wts[: n_ev * k].reshape(n_ev, k)
    out.p_off = w.p_off[: n_ev + 1]
    out.v_off = w.v_off[: n_ev + 1]
    out.p_i = w.p_i[:, :n_p]
    out.p_f = w.p_f[:, :n_p]
    out.v_i = w.v_i[:n_v]
    out.v_f = w.v_f[:, :n_v]
    _finish_columns(out, form, k)
    return out


def _finish_columns(out: Parsed, form: int, k: int) -> None:
    """Units to GeV and mm; the first weight; IO_GenEvent's unset -1 to NaN."""
    n = out.n_ev
    if n == 0:
        return
    flags = out.ev_i[1]
    if np.any(flags & c.UNIT_MEV):
        per_p = np.repeat(flags & c.UNIT_MEV, np.diff(out.p_off)).astype(bool)
        out.p_f[:, per_p] /= 1000.0
    if np.any(flags & c.UNIT_CM):
        per_v = np.repeat(flags & c.UNIT_CM, np.diff(out.v_off)).astype(bool)
        out.v_f[:, per_v] *= 10.0
    out.ev_f[0] = out.wts[:, 0] if k > 0 else 1.0
    if form == c.FORM_V2:
        sub = out.ev_f[1:4]
        sub[sub == -1.0] = np.nan


# ------------------------------------------------------------------ chunks


class _Chunk:
    """The columns of one output chunk of ``step`` events, filled by copying from scans
    (particle and vertex columns grow when the estimate was short)."""

    def __init__(self, step: int, k: int, p_cap: int, v_cap: int, pool: _BlockPool) -> None:
        self.n = self.np = self.nv = 0
        self.k = k
        p_cap, v_cap = max(p_cap, 1), max(v_cap, 1)
        i64, f64, i32 = np.int64, np.float64, np.int32
        layout: Layout = [
            ((step,), i64), ((c.N_EVF, step), f64), ((step, k), f64), ((step + 1,), i64),
            ((step + 1,), i64), ((c.N_PI, p_cap), i32), ((c.N_PF, p_cap), f64),
            ((v_cap,), i32), ((c.N_VF, v_cap), f64), ((c.N_EVI - 3, step), i64),
        ]  # fmt: skip
        (self.number, self.ev_f, self.wts, self.p_off, self.v_off, self.p_i, self.p_f, self.v_i,
         self.v_f, self.ev_n) = _carve(pool.take(_layout_bytes(layout)), layout)  # fmt: skip
        self.p_off[0] = self.v_off[0] = 0

    def add(self, s: Parsed, a: int, b: int) -> None:
        """Append the events ``[a, b)`` of ``s``."""
        m = b - a
        n, np0, nv0 = self.n, self.np, self.nv
        pa, pb = int(s.p_off[a]), int(s.p_off[b])
        va, vb = int(s.v_off[a]), int(s.v_off[b])
        kp, kv = pb - pa, vb - va
        if np0 + kp > self.p_i.shape[1]:
            cap = max(np0 + kp, 2 * self.p_i.shape[1])
            lay: Layout = [((c.N_PI, cap), np.int32), ((c.N_PF, cap), np.float64)]
            p_i, p_f = _carve(_block(_layout_bytes(lay)), lay)
            p_i[:, :np0], p_f[:, :np0] = self.p_i[:, :np0], self.p_f[:, :np0]
            self.p_i, self.p_f = p_i, p_f
        if nv0 + kv > self.v_i.shape[0]:
            cap = max(nv0 + kv, 2 * self.v_i.shape[0])
            lay = [((cap,), np.int32), ((c.N_VF, cap), np.float64)]
            v_i, v_f = _carve(_block(_layout_bytes(lay)), lay)
            v_i[:nv0], v_f[:, :nv0] = self.v_i[:nv0], self.v_f[:, :nv0]
            self.v_i, self.v_f = v_i, v_f
        self.number[n : n + m] = s.ev_i[0, a:b]
        self.ev_n[:, n : n + m] = s.ev_i[3:, a:b]
        self.ev_f[:, n : n + m] = s.ev_f[:, a:b]
        self.wts[n : n + m] = s.wts[a:b]
        np.add(s.p_off[a + 1 : b + 1], np0 - pa, out=self.p_off[n + 1 : n + m + 1])
        np.add(s.v_off[a + 1 : b + 1], nv0 - va, out=self.v_off[n + 1 : n + m + 1])
        self.p_i[:, np0 : np0 + kp] = s.p_i[:, pa:pb]
        self.p_f[:, np0 : np0 + kp] = s.p_f[:, pa:pb]
        self.v_i[nv0 : nv0 + kv] = s.v_i[va:vb]
        self.v_f[:, nv0 : nv0 + kv] = s.v_f[:, va:vb]
        self.n += m
        self.np += kp
        self.nv += kv

    def to_awkward(self, wnames: tuple[str, ...]) -> ak.Array:
        """Zero-copy awkward layout over the filled part of the columns."""
        n, n_p, n_v, k = self.n, self.np, self.nv, self.k
        C = ak.contents
        pfields = [C.NumpyArray(self.p_i[j, :n_p]) for j in range(c.N_PI)]
        pfields += [C.NumpyArray(self.p_f[j, :n_p]) for j in range(c.N_PF)]
        particles = C.ListOffsetArray(
            ak.index.Index64(self.p_off[: n + 1]),
            C.RecordArray(
                pfields, list(PARTICLE_FIELDS), length=n_p, parameters={"__record__": "Particle"}
            ),
        )
        vfields = [C.NumpyArray(self.v_i[:n_v])]
        vfields += [C.NumpyArray(self.v_f[j, :n_v]) for j in range(c.N_VF)]
        vertices = C.ListOffsetArray(
            ak.index.Index64(self.v_off[: n + 1]),
            C.RecordArray(vfields, list(VERTEX_FIELDS), length=n_v),
        )
        W = self.wts[:n]
        weights = C.RegularArray(C.NumpyArray(W.reshape(-1)), k, zeros_length=n)
        event: dict[str, Any] = {"event_number": C.NumpyArray(self.number[:n])}
        for j, name in enumerate(EVENT_FIELDS + c.PDF_FLOAT_FIELDS):
            event[name] = C.NumpyArray(self.ev_f[j, :n])
        for j, name in enumerate(c.EV_INT_FIELDS):
            event[name] = C.NumpyArray(self.ev_n[j, :n])
        names = ["event_number", *EVENT_FIELDS, "signal_process_id", *PDF_FIELDS]
        columns = [event[name] for name in names]
        columns += [weights, _events.named_weights(W, wnames), particles, vertices]
        names += ["weights", "named_weights", "particles", "vertices"]
        return ak.Array(C.RecordArray(columns, names, length=n))


# ------------------------------------------------------------------ buffers


class _Buffers:
    """Reads the event text into buffers that end before a line starting with ``E ``.

    ``get()`` returns ``(base, array, final, error)`` in file order (``base``: absolute
    decompressed offset of ``array[0]``; ``error``: a read failure that ended the stream
    early, else None). With ``threaded`` the reading runs ahead in a thread.
    """

    def __init__(self, stream: TolerantStream | BinaryIO, first: bytes, base: int,
                 source: Source, threaded: bool) -> None:  # fmt: skip
        self.stream = stream
        self.source = source
        self.items = self._produce(first, base)
        self.free: queue.SimpleQueue[mmap.mmap] = queue.SimpleQueue()
        self.stop = threading.Event()
        self.thread: threading.Thread | None = None
        if threaded:
            self.q: queue.Queue[Any] = queue.Queue(maxsize=2)
            self.thread = threading.Thread(target=self._run, name="evtkin-hepmc-read",
                                           daemon=True)  # fmt: skip
            self.thread.start()

    def _produce(self, first: bytes, base: int) -> Iterator[tuple[int, np.ndarray, bool, Any]]:
        carry = first
        want = BUFFER_BYTES
        while True:
            size = want
            while len(carry) + (1 << 20) > size:
                size *= 2
            buf = self._buffer(size)
            buf[: len(carry)] = carry
            fill = len(carry)
            eof = False
            with memoryview(buf)[:size] as mv:
                while fill < size:
                    got = self.stream.readinto(mv[fill:])  # type: ignore[union-attr]
                    if not got:
                        eof = True
                        break
                    fill += got
            if eof:
                error = getattr(self.stream, "error", None)
                yield base, np.frombuffer(buf, np.uint8, count=fill), True, error
                return
            cut = buf.rfind(_CUT, 1, fill) + 1
            if cut <= 0:  # one event larger than the buffer: read more
                want = 2 * size
                carry = bytes(buf[:fill])
                continue
            want = BUFFER_BYTES
            carry = bytes(buf[cut:fill])
            yield base, np.frombuffer(buf, np.uint8, count=cut), False, None
            base += cut

    def _buffer(self, size: int) -> mmap.mmap:
        """A recycled buffer of at least ``size`` bytes (its pages already touched), or a
        new one."""
        while True:
            try:
                buf = self.free.get_nowait()
            except queue.Empty:
                return anonymous_map(size)  # (see evtkin.io.blocks)
            if len(buf) >= size:
                return buf

    def recycle(self, arr: np.ndarray) -> None:
        """Hand back the buffer under ``arr`` (a scan of it has been consumed)."""
        base = arr.base
        owner = base.obj if isinstance(base, memoryview) else base
        if isinstance(owner, mmap.mmap):
            self.free.put(owner)

    def _run(self) -> None:
        try:
            for item in self.items:
                if not self._put(item):
                    return
        except BaseException as exc:
            self._put(exc)

    def _put(self, item: Any) -> bool:
        while not self.stop.is_set():
            try:
                self.q.put(item, timeout=0.1)
                return True
            except queue.Full:
                continue
        return False

    def get(self) -> tuple[int, np.ndarray, bool, Any]:
        if self.thread is None:
            return next(self.items)
        item = self.q.get()
        if isinstance(item, BaseException):
            raise item
        return item  # type: ignore[no-any-return]

    def close(self) -> None:
        self.stop.set()
        if self.thread is not None:
            self.thread.join(timeout=5)
        else:
            self.items.close()  # type: ignore[attr-defined]
        self.stream.close()


def _cut_before_event(mm: mmap.mmap, start: int, stop: int) -> int:
    """Just after the newline before the last ``E`` line in ``mm[start + 1 : stop]``, or -1."""
    k = mm.rfind(_CUT, start + 1, stop)
    return k + 1 if k >= 0 else -1


class _MappedBuffers:
    """The buffers of a plain file: views of the file mapped into memory, no copy (same
    ``get()`` as :class:`_Buffers`, in the caller's thread: mapping a window and finding
    its last ``E`` line costs microseconds). Each buffer is a map of its own (private,
    so that its view is writable like a read buffer and the scanner sees one array type),
    unmapped when its last view goes: the mapped pages of the file counted in the resident
    memory stay a few buffers' worth. The maps are marked sequential (the kernel reads
    ahead of a scan in a file not in the page cache). Measured against reading into
    buffers (200 MB file, CPU time): 7% less CPU in the page cache, 35% less cold.

    A file that shrinks while it is read raises :class:`HepMCError` (checked before every
    window, :func:`~evtkin.io.sources.map_window`). A file that grows is read up to its
    size at the start."""

    def __init__(self, source: Source, start: int, stop: int) -> None:
        self.fh = open(source, "rb")  # noqa: SIM115 - closed in close()
        self.name = source_name(source)
        self.items = self._produce(start, stop)

    def _produce(self, pos: int, size: int) -> Iterator[tuple[int, np.ndarray, bool, Any]]:
        windows = mapped_windows(self.fh.fileno(), pos, size, BUFFER_BYTES, self.name,
                                 HepMCError, _cut_before_event)  # fmt: skip
        for at, view, final in windows:
            yield at, view, final, None

    def get(self) -> tuple[int, np.ndarray, bool, Any]:
        return next(self.items)

    def recycle(self, arr: np.ndarray) -> None:
        pass

    def close(self) -> None:
        self.items.close()  # type: ignore[attr-defined]
        self.fh.close()


class _Done:
    def __init__(self, fn: Callable[..., Parsed], *args: Any) -> None:
        self.fn, self.args = fn, args

    def result(self) -> Parsed:
        return self.fn(*self.args)

    def cancel(self) -> bool:
        return True


# ------------------------------------------------------------------ byte ranges


def _next_event(fh: BinaryIO, pos: int, limit: int) -> int:
    """Offset of the first line start ``E `` at or after ``pos`` (before ``limit``), or -1."""
    if pos == 0:
        fh.seek(0)
        if fh.read(2) == b"E ":
            return 0
    base = max(pos - 1, 0)
    while base < limit:
        fh.seek(base)
        block = fh.read(min(1 << 20, limit - base + 2))
        i = block.find(_CUT)
        if i >= 0:
            at = base + i + 1
            return at if at < limit else -1
        if len(block) < 3:
            return -1
        base += len(block) - 2
    return -1


def hepmc_byte_ranges(path: Source, parts: int) -> list[tuple[int, int]]:
    """Split a plain HepMC file into about ``parts`` byte ranges of whole events (the first
    starts at the first event line, each further one at the first event line after an
    evenly spaced offset, the last ends at the end of the file)."""
    from evtkin.io.hepmc_header import hepmc_info

    if compression(path) is not None:
        raise HepMCError(f"{source_name(path)}: compressed files cannot be split by byte ranges")
    offset = hepmc_info(path).events_offset
    size = file_size(path)
    with open(path, "rb") as fh:
        first = _next_event(fh, offset, size)
        if first < 0:
            return [(offset, size)]
        starts = [first]
        for j in range(1, max(1, int(parts))):
            approx = first + ((size - first) * j) // max(1, int(parts))
            if approx <= starts[-1]:
                continue
            nxt = _next_event(fh, approx, size)
            if nxt < 0:
                break
            if nxt > starts[-1]:
                starts.append(nxt)
    return list(zip(starts, [*starts[1:], size], strict=True))


# ------------------------------------------------------------------ public API


def _line_at(source: Source, pos: int) -> int:
    """1-based line of absolute decompressed offset ``pos``."""
    lines = 1
    done = 0
    with open_stream(source) as fh:
        while done < pos:
            block = fh.read(min(1 << 22, pos - done))
            if not block:
                break
            lines += block.count(b"\n")
            done += len(block)
    return lines


def _lines_at(source: Source, positions: list[int]) -> list[int]:
    """1-based lines of several sorted absolute offsets (one pass)."""
    out: list[int] = []
    lines = 1
    done = 0
    with open_stream(source) as fh:
        for pos in positions:
            while done < pos:
                block = fh.read(min(1 << 22, pos - done))
                if not block:
                    break
                lines += block.count(b"\n")
                done += len(block)
            out.append(lines)
    return out


_LAYOUT = {
    (c.FORM_V3, "E"): "E event_number n_vertices n_particles [@ x y z t]",
    (c.FORM_V3, "P"): "P id parent pdgid px py pz e m status",
    (c.FORM_V3, "V"): "V id status [incoming,...] [@ x y z t]",
    (c.FORM_V3, "W"): "W weight ...",
    (c.FORM_V3, "A"): "A id name value",
    (c.FORM_V2, "E"): "E number n_mpi scale alpha_qcd alpha_qed process_id signal_vertex "
                      "n_vertices beam1 beam2 n_random [random ...] n_weights [weights ...]",
    (c.FORM_V2, "V"): "V barcode id x y z ctau n_orphans n_out n_weights [weights ...]",
    (c.FORM_V2, "P"): "P barcode pdgid px py pz e m status theta phi end_vertex n_flow "
                      "[flow ...]",
    (c.FORM_V3, "C"): "C cross_section error",
    (c.FORM_V2, "C"): "C cross_section error",
    (c.FORM_V2, "F"): "F id1 id2 x1 x2 scale xf1 xf2 [pdf_set1 pdf_set2]",
}  # fmt: skip


def _describe(code: int, a: int, b: int, form: int, line: bytes) -> str:
    """The message of a scan error."""
    shown = line[:100].decode("utf-8", "replace").rstrip("\r")
    kind = line[:1].decode("ascii", "replace")
    if code == c.ERR_LINE:
        layout = _LAYOUT.get((form, kind), "")
        return f"malformed {kind} line {shown!r}" + (f" (expected: {layout})" if layout else "")
    if code == c.ERR_UNEXPECTED:
        return f"unexpected line in {FORM_NAMES[form]} event text: {shown!r}"
    if code == c.ERR_COUNT_P:
        return (f"the event line declares {a} particles but {b} P lines follow "
                "(a count that disagrees with the lines)")  # fmt: skip
    if code == c.ERR_COUNT_V:
        return (f"the event line declares {a} vertices but the event has {b} "
                "(a count that disagrees with the lines)")  # fmt: skip
    if code == c.ERR_VERTEX_REF:
        return f"{shown!r} points to vertex {a}, which does not exist in this event (above it)"
    if code == c.ERR_PARTICLE_REF:
        return f"{shown!r} refers to particle {a}, which does not exist in this event (above it)"
    if code == c.ERR_DUP_ID:
        return f"id {a} is given twice in this event: {shown!r}"
    if code == c.ERR_WEIGHTS:
        return f"the event holds {a} weights but the file declares {b}"
    if code == c.ERR_UNIT:
        return f"expected 'U GEV|MEV MM|CM', found {shown!r}"
    if code == c.ERR_VCOUNT:
        return (f"the vertex line declares {a} particles (orphans + outgoing) but {b} "
                "P lines follow it")  # fmt: skip
    if code == c.ERR_TWO_END:
        return f"{shown!r} lists particle {a} as incoming, but it already ends in a vertex"
    if code == c.ERR_LOOP:
        return f"particle {a} ends in its own production vertex: {shown!r}"
    return f"malformed event (code {code})"


def _line_text(arr: np.ndarray, rel: int) -> bytes:
    end = int(rel)
    n = arr.shape[0]
    while end < n and end - rel < 200 and arr[end] != 10:
        end += 1
    return bytes(arr[rel:end])


def read_hepmc(
    source: Source,
    *,
    step_size: int | None = None,
    strict: bool = True,
    threads: int | None = None,
    byte_range: tuple[int, int] | None = None,
) -> Iterator[ak.Array]:
    """Stream the events of a HepMC ASCII file (Asciiv3 or IO_GenEvent, plain, gzip, zstd,
    bz2 or xz; all detected by content) as awkward Arrays of ``step_size`` events.

    Every chunk holds exactly ``step_size`` events except the last. ``step_size=None``
    (the default) takes as many events as fit in ~16 MB of text, judged from the first
    4 MB read (at most 100 000). ``threads``: parse threads (default 2 where there are
    cores for them, 1 for a compressed file on 2 cores), beside a thread that decompresses
    a compressed file (a plain file is memory-mapped); ``threads=0`` does everything in
    the caller's thread. ``byte_range=(start, stop)``
    (plain files only) reads exactly the events whose ``E`` line starts in
    ``[start, stop)`` (see :func:`hepmc_byte_ranges`).

    Raises :class:`~evtkin.errors.HepMCError` naming the file and 1-based line for
    malformed input. With ``strict=False`` a damaged event is skipped (reading resumes at
    the next event line) and a :class:`HepMCWarning` gives the count and lines of what
    was skipped; a file cut short yields its complete events and warns. Chunks yielded
    before an error are complete and correct.
    """
    step, nthreads, byte_range = reader_options(source, step_size, threads, byte_range,
                                                HepMCError)  # fmt: skip
    return _iterate(source, step, strict, nthreads, byte_range)


def _weight_names(form: int, run: dict[str, Any], first: bytes) -> tuple[str, ...]:
    """The names of the weight columns (as ``hepmc_info`` gives them: the run's or the first
    event's names, else ``"0"``, ``"1"``, ...)."""
    names, nw, *_ = _first_event_facts(form, first[: 4 << 20])
    declared = run["names"] if form == c.FORM_V3 else names
    if declared:
        return tuple(str(x) for x in declared)
    return tuple(str(i) for i in range(nw))


def _iterate(
    source: Source, step: int | None, strict: bool, threads: int,
    byte_range: tuple[int, int] | None,
) -> Iterator[ak.Array]:  # fmt: skip
    name = source_name(source)
    kernel, _ = _kernel()
    stream, first, form, _version, run = open_hepmc(source)
    offset = int(run["offset"])
    stop_abs = 1 << 62
    base = offset
    mapped = MAP_PLAIN and stream.kind is None
    if byte_range is not None:
        stream.close()
        with open(source, "rb") as fh:
            fh.seek(offset)
            first = fh.read(4 << 20)
        wnames = _weight_names(form, run, first)
        k = len(wnames)
        size = file_size(source)
        start = max(byte_range[0], offset)
        stop_abs = min(byte_range[1], size)
        if start >= stop_abs:
            return
        with open(source, "rb") as fh:
            begin = _next_event(fh, start, stop_abs)
        if begin < 0:
            return
        first, base = b"", begin
        need_end = byte_range[1] >= size
    else:
        while len(first) < (1 << 20):  # enough of the first events for their facts
            block = read_block(stream, 1 << 20, source)
            if not block:
                break
            first += block
        wnames = _weight_names(form, run, first)
        k = len(wnames)
        need_end = True
    reader: _Buffers | _MappedBuffers
    if mapped:
        stream.close()
        reader = _MappedBuffers(source, base, file_size(source))
    else:
        if byte_range is not None:
            plain = open(source, "rb")  # noqa: SIM115 - closed by the reader
            plain.seek(base)
            stream = TolerantStream(plain, source, None)
        reader = _Buffers(stream, first, base, source, threaded=threads > 0)
    pool = (ThreadPoolExecutor(max_workers=threads, thread_name_prefix="evtkin-hepmc-parse")
            if threads > 0 else None)  # fmt: skip

    free: list[Scratch] = []  # scratch columns of scans already consumed

    def submit(arr: np.ndarray, b: int, final: bool) -> Future[Parsed] | _Done:
        scratch = free.pop() if free else None
        args = (kernel, arr, form, k, final, stop_abs - b, not strict, scratch)
        if pool is None:
            return _Done(scan_buffer, *args)
        return pool.submit(scan_buffer, *args)

    pending: deque[tuple[int, np.ndarray, bool, Any, Future[Parsed] | _Done]] = deque()
    chunk: _Chunk | None = None
    blocks = _BlockPool()
    n_p_seen = n_v_seen = 0
    n_seen = 0
    skipped: list[tuple[int, int, str]] = []  # absolute start, resume, reason
    n_skipped = 0
    saw_end = False
    stopped = False
    problem: str | None = None
    try:
        reader_done = False
        while True:
            while not reader_done and len(pending) < threads + 1:
                b, arr, final, error = reader.get()
                pending.append((b, arr, final, error, submit(arr, b, final)))
                reader_done = final
            if not pending:
                break
            b, arr, final, error, fut = pending.popleft()
            s = fut.result()
            if step is None:
                per_event = arr.shape[0] / max(s.n_ev, 1)
                step = max(1, min(MAX_AUTO_STEP, int(CHUNK_TEXT_BYTES // max(per_event, 1.0))))
            if s.status >= c.ERR_LINE:
                line = _line_at(source, b + s.errpos)
                if s.status == c.ERR_CUT:
                    why = f" ({error})" if error is not None else ""
                    raise HepMCError(
                        f"{name}: line {line}: the file is cut short inside the event that "
                        f"starts here{why}; {n_seen + s.n_done} complete events precede it; "
                        "use strict=False to read the complete events"
                    )
                msg = _describe(s.status, s.a, s.b, form, _line_text(arr, s.errpos))
                raise HepMCError(f"{name}: line {line}: {msg}")
            for row in s.errs.tolist():
                if row[3] == c.ERR_CUT:
                    why = f" ({error})" if error is not None else ""
                    problem = (f"{name}: the file is cut short inside its last event{why} "
                               f"(after {n_seen + s.n_ev} complete events)")  # fmt: skip
                    continue
                n_skipped += 1
                if len(skipped) < _MAX_LISTED:
                    reason = _describe(row[3], row[4], row[5], form, _line_text(arr, row[2]))
                    skipped.append((b + row[0], b + row[1], reason))
            if error is not None and problem is None:
                problem = f"{error} after {n_seen + s.n_ev} complete events"
            # hand the events to chunks of exactly ``step``
            a = 0
            while a < s.n_ev:
                if chunk is None:  # columns for the particles and vertices seen so far
                    per_p = (n_p_seen + int(s.p_off[s.n_ev]) + 1) / (n_seen + s.n_ev)
                    per_v = (n_v_seen + int(s.v_off[s.n_ev]) + 1) / (n_seen + s.n_ev)
                    chunk = _Chunk(step, k, int(per_p * step * 1.15) + 64,
                                   int(per_v * step * 1.15) + 64, blocks)  # fmt: skip
                take = min(step - chunk.n, s.n_ev - a)
                chunk.add(s, a, a + take)
                a += take
                if chunk.n >= step:
                    out = chunk.to_awkward(wnames)
                    chunk = None
                    yield out
                    del out
            n_seen += s.n_ev
            n_p_seen += int(s.p_off[s.n_ev])
            n_v_seen += int(s.v_off[s.n_ev])
            free.append(s.scratch)
            if s.status == c.ST_OK:
                reader.recycle(arr)
            if s.status == c.ST_END:
                saw_end = True
                later = [item[1] for item in pending]
                last = final or (bool(pending) and pending[-1][2])
                _check_after_end(source, name, b + s.pos, arr[s.pos :], later, last, reader,
                                 strict)  # fmt: skip
                break
            if s.status == c.ST_LISTING:
                line = _line_at(source, b + s.pos)
                text = _line_text(arr, s.pos).decode("utf-8", "replace")
                _problem(f"{name}: line {line}: unexpected {text!r} inside the event listing "
                         f"after {n_seen} events (a second file appended?); what follows is "
                         "not read", strict)  # fmt: skip
                saw_end = True
                break
            if s.status == c.ST_STOPPED:
                stopped = True
                break
        if n_skipped:
            where = _lines_at(source, sorted(x for r in skipped for x in (r[0], r[1])))
            spans = []
            for j in range(len(skipped)):
                lo, hi = where[2 * j], where[2 * j + 1] - 1
                spans.append(f"{lo}-{hi}" if hi > lo else f"{lo}")
            more = ", ..." if n_skipped > len(skipped) else ""
            warn_reading(
                f"{name}: skipped {n_skipped} damaged event(s) (lines {', '.join(spans)}{more}); "
                f"the first: {skipped[0][2]}; the intact events are delivered",
                HepMCWarning, stacklevel=2,
            )  # fmt: skip
        if problem is not None:
            _problem(problem, strict)
        elif not saw_end and not stopped and need_end:
            _problem(f"{name}: the file ends without the END_EVENT_LISTING line after "
                     f"{n_seen} complete events (cut short?)", strict)  # fmt: skip
        if chunk is not None and chunk.n:
            out = chunk.to_awkward(wnames)
            chunk = None
            yield out
    finally:
        reader.close()
        for *_, fut in pending:
            fut.cancel()
        if pool is not None:
            pool.shutdown(wait=True)
        kept = [x for x in blocks.blocks if x.nbytes <= SPARE_CHUNK_BYTES]
        _keep_blocks([*kept, *(x.block for x in free)])


def _check_after_end(source: Source, name: str, pos: int, rest: np.ndarray,
                     later: list[np.ndarray], final: bool, reader: _Buffers | _MappedBuffers,
                     strict: bool) -> None:  # fmt: skip
    """After the END_EVENT_LISTING line: only blank text (or a problem)."""
    text = bytes(rest)
    nl = text.find(b"\n")
    after = text[nl + 1 :] if nl >= 0 else b""
    after += b"".join(bytes(x) for x in later)
    while not final and len(after) < (1 << 20):
        _b, arr, final, _e = reader.get()
        after += bytes(arr)
    if after.strip():
        at = pos + (nl + 1 if nl >= 0 else len(text)) + (len(after) - len(after.lstrip()))
        line = _line_at(source, at)
        shown = after.strip()[:60].decode("utf-8", "replace")
        _problem(f"{name}: line {line}: text after the END_EVENT_LISTING line ({shown!r}; a "
                 "second file appended?) is not read", strict)  # fmt: skip


def _problem(msg: str, strict: bool) -> None:
    if strict:
        raise HepMCError(msg + "; use strict=False to read the complete events")
    warn_reading(msg + "; the complete events are delivered", HepMCWarning, stacklevel=4)
