"""Compiled byte scanner for the event part of HepMC ASCII files (numba, ``nogil``, cached).

:func:`scan_kernel_source` reads a ``uint8`` buffer that starts at an event line (``E``)
and holds whole events (the reader cuts its buffers before a line that starts with
``E ``), line by line, into flat columns preallocated by the caller. Their sizes are
bounded by the buffer's byte count (see :func:`capacities`), never by a count read from
the file. The same kernel reads both ASCII forms (``cfg[CFG_FORM]``):

* **Asciiv3**: ``E number n_vertices n_particles [@ x y z t]``, ``U``, ``W`` weights,
  ``A id name value`` attributes (event-level ``alphaQCD``, ``alphaQED``, ``event_scale``,
  ``GenCrossSection``, ``signal_process_id``, ``GenPdfInfo``), ``C xsec err``,
  ``P id parent pdgid px py pz e m status`` (parent: 0 none, < 0 a vertex id, > 0 a
  particle id whose end vertex is meant, made if it has none yet), ``V id status
  [in,in,...] [@ x y z t]``; ``T`` and ``N`` lines are skipped.
* **IO_GenEvent**: ``E number n_mpi scale alpha_qcd alpha_qed process_id signal_vertex
  n_vertices beam1 beam2 n_random [random...] n_weights [weights...]``, ``U``, ``C``,
  ``V barcode id x y z ctau n_orphans n_out n_weights [weights...]`` followed by its
  ``n_orphans`` incoming and ``n_out`` outgoing ``P barcode pdgid px py pz e m status
  theta phi end_vertex_barcode n_flow [flow pairs...]`` lines; ``F`` PDF info; ``N``, ``H``
  skipped.

PDF info (IO_GenEvent ``F`` line, Asciiv3 ``A 0 GenPdfInfo``): ``id1 id2 x1 x2 scale xf1
xf2 [set1 set2]``, the partons' PDG ids, momentum fractions, factorisation scale, x*f(x)
values and the two PDF set ids (0 when the line has only the first seven values, as
older IO_GenEvent files write it; values after the ninth are ignored).

References are resolved when an event ends (ids looked up through a stable sort, or
directly where the ids count 1, 2, ... / -1, -2, ...): ``prod_vertex`` and
``end_vertex`` become 0-based indices into the event's vertices. In Asciiv3 a reference
must point to a line above it, so the decay graph is acyclic. Vertices made for a parent
particle that had no end vertex come after the event's ``V`` lines, in particle order.

Errors stop at the start of the offending line (or of the event, for a count that
disagrees); ``cfg[CFG_LENIENT]`` rolls the event back instead, records it and resumes at
the next line that starts with ``E ``. Floats are bit-identical to Python's ``float()``:
a mantissa of at most 18 digits that is <= 2**53 with a decimal exponent within +-22 is
converted by one correctly rounded operation, any other mantissa of at most 18 digits
(16-17 digit values printed with ``%.16e``, the common form of real files) by
:func:`evtkin.io.exact_float.decimal_to_float`; a token neither decides (more digits, a
rare tie) is recorded in the slow list and converted in Python (:func:`fix_slow`).
Never ``fastmath``.

Plain Asciiv3 ``P`` and ``V`` lines (nearly every line of a showered file) take a fast
path first: one inline pass over the line's tokens (no helper calls, byte-class tables,
unsigned indices, and no end-of-buffer checks: it runs only when the buffer ends with a
newline, which stops every loop). It accepts a line only when every token is plain
(integers of at most 10 digits, floats of at most 18 digits whose exact conversion
applies, exponents of at most 3 digits) and then stores exactly what the generic path
would; any other line (a slow token, damage) is left to the generic path, which finds
the value, slow-list entry or error as before. This made the kernel 2.3x faster
(bench/bench_hepmc.py); eight-digits-at-a-time (SWAR) token parsing was tried and
measured slower. Per event, ids that count 1, 2, ... (and -1, -2, ...) are looked up
directly. IO_GenEvent ``P`` and ``V`` lines take fast paths of the same kind and contract
(their colour-flow pairs and vertex weights, and the polarisation angles, are checked and
skipped): 232 -> 442 MB/s for a plain IO_GenEvent file in one thread.

The fallback (:mod:`evtkin.io.hepmc_fallback`) implements the same grammar and checks in
Python; the two agree on columns, statuses and error positions (tests/test_hepmc_scanners.py).
"""

from __future__ import annotations

import os
from collections.abc import Callable
from typing import Any

import numpy as np

from evtkin.io.exact_float import decimal_to_float

# ---- cfg (int64[8])
CFG_FORM = 0  # 3 Asciiv3, 2 IO_GenEvent
CFG_K = 1  # weights per event
CFG_FINAL = 2  # 1: the buffer ends the stream
CFG_STOP = 3  # events whose E line starts at or after this offset are not read
CFG_LENIENT = 4
CFG_SIZE = 8

FORM_V3 = 3
FORM_V2 = 2

# ---- st (int64[16]) out
ST_EV = 0
ST_NP = 1
ST_NV = 2
ST_NSLOW = 3
ST_STATUS = 4
ST_ERRPOS = 5
ST_POS = 6  # where reading stopped (end marker line start, stop line, buffer end)
ST_NERR = 7  # damaged events skipped (lenient)
ST_A = 8
ST_B = 9
ST_EVSTART = 10  # start of the event an error belongs to
ST_SIZE = 16

# statuses
ST_OK = 0  # buffer consumed
ST_END = 1  # the END_EVENT_LISTING line starts at st[ST_POS]
ST_LISTING = 2  # another ``HepMC::`` line (a second header?) starts at st[ST_POS]
ST_STOPPED = 3  # an event line at or after cfg[CFG_STOP] starts at st[ST_POS]
ERR_LINE = 10  # malformed line
ERR_UNEXPECTED = 11  # a line that does not belong here
ERR_COUNT_P = 12  # particle lines != declared (A declared, B found)
ERR_COUNT_V = 13  # vertices != declared (A declared, B found)
ERR_VERTEX_REF = 14  # a reference to a vertex that does not exist (A = the id)
ERR_PARTICLE_REF = 15  # a reference to a particle that does not exist (A = the id)
ERR_DUP_ID = 16  # an id given twice (A = the id)
ERR_WEIGHTS = 17  # weights on the line != declared (A found, B declared)
ERR_UNIT = 18  # unknown unit
ERR_CUT = 19  # the stream ends inside this event (A = the check that failed)
ERR_VCOUNT = 20  # IO_GenEvent: particle lines after a vertex != declared (A decl, B found)
ERR_TWO_END = 21  # Asciiv3: a particle listed as incoming to a second vertex (A = id)
ERR_LOOP = 22  # IO_GenEvent: a particle ends in its own production vertex (A = barcode)

# columns
# event_number, unit flags (1 MEV, 2 CM), line start offset, then EV_INT_FIELDS
N_EVI = 8
# weight, scale, alpha_qcd, alpha_qed, xsec, xsec_err, then the PDF info's floats
N_EVF = 11
#: the event ints of rows 3.. of the event columns, and their values where the file has none
EV_INT_FIELDS = ("signal_process_id", "pdf_parton1", "pdf_parton2", "pdf_set1", "pdf_set2")
EV_INT_UNSET = (-1, 0, 0, 0, 0)
#: the PDF info's floats (rows 6.. of the float event columns; NaN where the file has none)
PDF_FLOAT_FIELDS = ("pdf_x1", "pdf_x2", "pdf_scale", "pdf_xf1", "pdf_xf2")
#: the PDF info's fields, in the order of the line that gives them
PDF_FIELDS = ("pdf_parton1", "pdf_parton2", *PDF_FLOAT_FIELDS, "pdf_set1", "pdf_set2")
N_PI = 4  # pdgid, status, prod_vertex, end_vertex
N_PF = 5  # px, py, pz, energy, mass
N_VF = 4  # x, y, z, t
# slow-list targets (column 0 of a slow row)
T_EVF = 0
T_PF = 1
T_VF = 2
T_W = 3

UNIT_MEV = 1
UNIT_CM = 2

INT32_MAX = 2147483647
INT64_LIMIT = 10**18  # |event numbers| below this

_END_V3 = np.frombuffer(b"HepMC::Asciiv3-END_EVENT_LISTING", dtype=np.uint8).copy()
_END_V2 = np.frombuffer(b"HepMC::IO_GenEvent-END_EVENT_LISTING", dtype=np.uint8).copy()
_PREFIX = np.frombuffer(b"HepMC::", dtype=np.uint8).copy()
_A_AQCD = np.frombuffer(b"alphaQCD", dtype=np.uint8).copy()
_A_AQED = np.frombuffer(b"alphaQED", dtype=np.uint8).copy()
_A_SCALE = np.frombuffer(b"event_scale", dtype=np.uint8).copy()
_A_XSEC = np.frombuffer(b"GenCrossSection", dtype=np.uint8).copy()
_A_PROC = np.frombuffer(b"signal_process_id", dtype=np.uint8).copy()
_A_PDF = np.frombuffer(b"GenPdfInfo", dtype=np.uint8).copy()

U = np.uint64  # index cast: unsigned indices need no wrap-around code
_DOT48 = np.uint64(46 - 48 + (1 << 64))  # '.' - '0' as an unsigned byte difference
_SEPS = np.zeros(256, np.bool_)
_SEPS[[32, 9, 13, 11, 12]] = True
_ENDS = _SEPS.copy()
_ENDS[10] = True
_POW10 = np.array([10.0**i for i in range(23)])
_TWO53 = 2**53
# IO_GenEvent P line fields after "P": which are floats (px py pz e m, theta phi); [12]: flows
_V2P_FLOAT = np.array([0, 0, 1, 1, 1, 1, 1, 0, 1, 1, 0, 0, 0], np.bool_)
# IO_GenEvent V line fields after "V" (x y z ctau); [9]: its weights (floats)
_V2V_FLOAT = np.array([0, 0, 1, 1, 1, 1, 0, 0, 0, 1], np.bool_)


def end_marker(form: int) -> bytes:
    return bytes(_END_V3 if form == FORM_V3 else _END_V2)


def capacities(nbytes: int) -> dict[str, int]:
    """Column sizes that the events of ``nbytes`` of text cannot exceed (each line or
    token takes at least the bytes counted here)."""
    n = int(nbytes)
    return {
        "events": n // 8 + 2,  # "E 0 0 0\n"
        "particles": n // 16 + 2,  # a P line has >= 9 fields
        "vertices": n // 8 + 2,  # "V -1 0\n", or one per P line
        "weights": n // 2 + 2,  # "1 "
        "incoming": n // 2 + 2,  # "1,"
        "slow": n // 2 + 2,
        "errors": n // 8 + 2,
    }


Arr = np.ndarray  # (kernels' arguments)


# ------------------------------------------------------------------ token helpers
# plain functions here; compiled_kernel() replaces them by numba dispatchers


def _is_sep(c: int) -> bool:  # the separators of Python's bytes.split() within a line
    return c == 32 or c == 9 or c == 13 or c == 11 or c == 12


def _skip_sep(buf: Arr, p: int, n: int) -> int:
    while p < n and _is_sep(buf[p]):
        p += 1
    return p


def _at_eol(buf: Arr, p: int, n: int) -> tuple[bool, int]:
    """(at end of line, position after separators)."""
    p = _skip_sep(buf, p, n)
    return p >= n or buf[p] == 10, p


def _line_end(buf: Arr, p: int, n: int) -> int:
    """Offset of the ``\\n`` ending the line at ``p`` (``n`` if none)."""
    while p < n and buf[p] != 10:
        p += 1
    return p


def _token_end(buf: Arr, p: int, n: int) -> int:
    while p < n and buf[p] != 10 and not _is_sep(buf[p]):
        p += 1
    return p


def _int(buf: Arr, p: int, n: int, limit: int) -> tuple[int, int, bool]:
    """Parse an integer token at ``p`` (after separators): (value, end, ok). ``ok`` is
    False for a missing or malformed token or one with ``|value| >= limit``."""
    p = _skip_sep(buf, p, n)
    neg = False
    if p < n and (buf[p] == 45 or buf[p] == 43):
        neg = buf[p] == 45
        p += 1
    v = 0
    nd = 0
    sig = 0
    while p < n:
        c = buf[p]
        if c < 48 or c > 57:
            break
        if sig > 0 or c != 48:
            sig += 1
            if sig <= 18:
                v = v * 10 + (c - 48)
        nd += 1
        p += 1
    if nd == 0 or (p < n and buf[p] != 10 and not _is_sep(buf[p])):
        return 0, p, False
    if sig > 18 or v >= limit:
        return 0, p, False
    return (-v if neg else v), p, True


def _digits(buf: Arr, p: int, n: int) -> tuple[int, bool]:
    """Skip one token of the form [+-]?[0-9]+ of any length: (end, ok)."""
    p = _skip_sep(buf, p, n)
    if p < n and (buf[p] == 45 or buf[p] == 43):
        p += 1
    nd = 0
    while p < n and 48 <= buf[p] <= 57:
        p += 1
        nd += 1
    ok = nd > 0 and (p >= n or buf[p] == 10 or _is_sep(buf[p]))
    return p, ok


def _float(buf: Arr, p: int, n: int) -> tuple[float, int, int, int]:
    """Parse a float token at ``p`` (after separators): (value, start, end, status);
    status 0 exact, 1 valid but needs Python's float() (value NaN), 2 malformed."""
    p = _skip_sep(buf, p, n)
    s = p
    neg = False
    if p < n and (buf[p] == 45 or buf[p] == 43):
        neg = buf[p] == 45
        p += 1
    m = 0
    sig = 0
    nint = 0
    nfrac = 0
    while p < n and 48 <= buf[p] <= 57:
        c = buf[p]
        if sig > 0 or c != 48:
            sig += 1
            if sig <= 18:
                m = m * 10 + (c - 48)
        nint += 1
        p += 1
    scale = 0
    if p < n and buf[p] == 46:
        p += 1
        while p < n and 48 <= buf[p] <= 57:
            c = buf[p]
            if sig > 0 or c != 48:
                sig += 1
                if sig <= 18:
                    m = m * 10 + (c - 48)
                    scale -= 1
            else:
                scale -= 1
            nfrac += 1
            p += 1
    if nint + nfrac == 0:
        return 0.0, s, p, 2
    e = 0
    big = False
    if p < n and (buf[p] == 101 or buf[p] == 69):
        p += 1
        eneg = False
        if p < n and (buf[p] == 45 or buf[p] == 43):
            eneg = buf[p] == 45
            p += 1
        ne = 0
        while p < n and 48 <= buf[p] <= 57:
            if e < 100000:
                e = e * 10 + (buf[p] - 48)
            else:
                big = True
            ne += 1
            p += 1
        if ne == 0:
            return 0.0, s, p, 2
        if eneg:
            e = -e
    if p < n and buf[p] != 10 and not _is_sep(buf[p]):
        return 0.0, s, _token_end(buf, p, n), 2
    if m == 0 and sig == 0:
        return (-0.0 if neg else 0.0), s, p, 0
    if sig > 18 or big:  # (digits past the 18th were not summed)
        return np.nan, s, p, 1
    e10 = e + scale
    if m > _TWO53 or e10 < -22 or e10 > 22:
        x, exact = decimal_to_float(U(m), e10)
        if not exact:
            return np.nan, s, p, 1
    else:
        x = float(m)
        if e10 >= 0:  # noqa: SIM108 - (compiled code)
            x = x * _POW10[e10]
        else:
            x = x / _POW10[-e10]
    return (-x if neg else x), s, p, 0


def _floats(buf: Arr, p: int, n: int, out: Arr, col: int, d0: int, d1: int, target: int,
            slow: Arr, nslow: int) -> tuple[int, bool, int]:  # fmt: skip
    """Parse floats at ``p`` into the rows ``d0..d1`` of column ``col`` of ``out`` (slow
    tokens into the slow list as ``target``): (end, ok, slow count). Stops at the first
    malformed token."""
    for d in range(d0, d1 + 1):
        x, s, p, fs = _float(buf, p, n)
        if fs == 2:
            return p, False, nslow
        out[d, col] = x
        if fs == 1:
            slow[nslow, 0] = target
            slow[nslow, 1] = d
            slow[nslow, 2] = col
            slow[nslow, 3] = s
            slow[nslow, 4] = p
            nslow += 1
    return p, True, nslow


def _pdf_info(buf: Arr, p: int, n: int, ev_i: Arr, ev_f: Arr, ne: int, slow: Arr,
              nslow: int) -> tuple[int, bool, int]:  # fmt: skip
    """Parse ``id1 id2 x1 x2 scale xf1 xf2 [set1 set2]`` at ``p`` into event ``ne``:
    (end, ok, slow count)."""
    id1, p, ok = _int(buf, p, n, INT32_MAX + 1)
    id2 = 0
    if ok:
        id2, p, ok = _int(buf, p, n, INT32_MAX + 1)
    if ok:
        p, ok, nslow = _floats(buf, p, n, ev_f, ne, 6, 10, T_EVF, slow, nslow)
    set1 = 0
    set2 = 0
    if ok:
        eol, _q = _at_eol(buf, p, n)
        if not eol:
            set1, p, ok = _int(buf, p, n, INT32_MAX + 1)
            if ok:
                set2, p, ok = _int(buf, p, n, INT32_MAX + 1)
    if ok:
        ev_i[4, ne] = id1
        ev_i[5, ne] = id2
        ev_i[6, ne] = set1
        ev_i[7, ne] = set2
    return p, ok, nslow


def _match(buf: Arr, a: int, b: int, pat: Arr) -> bool:
    """Whether ``buf[a:b]`` equals ``pat``."""
    if b - a != pat.shape[0]:
        return False
    for i in range(b - a):  # noqa: SIM110 - (compiled code: no generators)
        if buf[a + i] != pat[i]:
            return False
    return True


def _lookup(ids: Arr, order: Arr, seq: int, key: int) -> int:
    """Local index of ``key`` in ``ids`` (-1 if absent). ``seq``: 1 if ids[j] == j + 1,
    -1 if ids[j] == -(j + 1), else 0 (binary search through the stable ``order``)."""
    m = ids.shape[0]
    if seq == 1:
        return key - 1 if 1 <= key <= m else -1
    if seq == -1:
        return -key - 1 if 1 <= -key <= m else -1
    lo = 0
    hi = m
    while lo < hi:
        mid = (lo + hi) // 2
        if ids[order[mid]] < key:
            lo = mid + 1
        else:
            hi = mid
    if lo < m and ids[order[lo]] == key:
        found: int = order[lo]
        return found
    return -1


def _index(ids: Arr) -> tuple[Arr, int, int]:
    """(order, seq, first duplicate): ``order`` a stable sort of ``ids`` (empty where they
    count 1, 2, ... or -1, -2, ...); the duplicate is the local index of the earliest
    repeated occurrence (-1 if none)."""
    m = ids.shape[0]
    up = True
    down = True
    for j in range(m):
        if ids[j] != j + 1:
            up = False
        if ids[j] != -(j + 1):
            down = False
        if not up and not down:
            break
    if up and m > 0:
        return np.empty(0, np.int64), 1, -1
    if down and m > 0:
        return np.empty(0, np.int64), -1, -1
    order = np.argsort(ids, kind="mergesort")
    dup = -1
    for j in range(1, m):
        a = order[j - 1]
        b = order[j]
        if ids[a] == ids[b] and (dup < 0 or b < dup):
            dup = b
    return order, 0, dup


def _finish_v3(
    p_i: Arr, pscr: Arr, vscr: Arr, inl: Arr, v_i: Arr, v_f: Arr, p0: int, p1: int, v0: int,
    nv: int, decl_np: int, decl_nv: int, e_pos: int,
) -> tuple[int, int, int, int, int]:  # fmt: skip
    """Resolve an Asciiv3 event's references: (code, errpos, a, b, nv)."""
    if p1 - p0 != decl_np:
        return ERR_COUNT_P, e_pos, decl_np, p1 - p0, nv
    vids = vscr[0, v0:nv]
    vorder, vseq, vdup = _index(vids)
    if vdup >= 0:
        return ERR_DUP_ID, vscr[1, v0 + vdup], vids[vdup], 0, nv
    pids = pscr[0, p0:p1]
    porder, pseq, pdup = _index(pids)
    if pdup >= 0:
        return ERR_DUP_ID, pscr[2, p0 + pdup], pids[pdup], 0, nv
    m = p1 - p0
    for w in range(v0, nv):
        for q in range(vscr[2, w], vscr[3, w]):
            key = inl[q]
            if pseq == 1:
                j = key - 1 if 1 <= key <= m else -1
            else:
                j = _lookup(pids, porder, pseq, key)
            if j < 0 or pscr[2, p0 + j] > vscr[1, w]:
                return ERR_PARTICLE_REF, vscr[1, w], inl[q], 0, nv
            if p_i[3, p0 + j] != -1:
                return ERR_TWO_END, vscr[1, w], inl[q], 0, nv
            p_i[3, p0 + j] = w - v0
    nx = nv
    for i in range(p0, p1):
        r = pscr[1, i]
        if r == 0:
            p_i[2, i] = -1
        elif r < 0:
            if vseq == -1:  # noqa: SIM108 - (compiled code)
                w = -r - 1 if -r <= nv - v0 else -1
            else:
                w = _lookup(vids, vorder, vseq, r)
            if w < 0 or vscr[1, v0 + w] > pscr[2, i]:
                return ERR_VERTEX_REF, pscr[2, i], r, 0, nv
            p_i[2, i] = w
        else:
            if pseq == 1:  # noqa: SIM108 - (compiled code)
                j = r - 1 if r <= m else -1
            else:
                j = _lookup(pids, porder, pseq, r)
            if j < 0 or j >= i - p0:
                return ERR_PARTICLE_REF, pscr[2, i], r, 0, nv
            ev = p_i[3, p0 + j]
            if ev == -1:
                ev = nx - v0
                v_i[nx] = 0
                for d in range(4):
                    v_f[d, nx] = 0.0
                nx += 1
                p_i[3, p0 + j] = ev
            p_i[2, i] = ev
    if nx - v0 != decl_nv:
        return ERR_COUNT_V, e_pos, decl_nv, nx - v0, nv
    return 0, 0, 0, 0, nx


def _finish_v2(
    p_i: Arr, pscr: Arr, vscr: Arr, p0: int, p1: int, v0: int, nv: int, decl_nv: int,
    e_pos: int,
) -> tuple[int, int, int, int]:  # fmt: skip
    """Resolve an IO_GenEvent event's end-vertex barcodes: (code, errpos, a, b)."""
    if nv - v0 != decl_nv:
        return ERR_COUNT_V, e_pos, decl_nv, nv - v0
    vids = vscr[0, v0:nv]
    vorder, vseq, vdup = _index(vids)
    if vdup >= 0:
        return ERR_DUP_ID, vscr[1, v0 + vdup], vids[vdup], 0
    for i in range(p0, p1):
        r = pscr[1, i]
        if r == 0:
            p_i[3, i] = -1
            continue
        w = _lookup(vids, vorder, vseq, r)
        if w < 0:
            return ERR_VERTEX_REF, pscr[2, i], r, 0
        if w == p_i[2, i]:
            return ERR_LOOP, pscr[2, i], pscr[0, i], 0
        p_i[3, i] = w
    return 0, 0, 0, 0


_HELPERS = (
    "_is_sep", "_skip_sep", "_at_eol", "_line_end", "_token_end", "_int", "_digits",
    "_float", "_floats", "_pdf_info", "_match", "_lookup", "_index", "_finish_v3",
    "_finish_v2",
)  # fmt: skip


# ------------------------------------------------------------------ the kernel


def scan_kernel_source(  # one line-dispatch loop on purpose (see the module docstring)
    buf: Arr, cfg: Arr, st: Arr, ev_i: Arr, ev_f: Arr, p_off: Arr, v_off: Arr, p_i: Arr,
    p_f: Arr, v_i: Arr, v_f: Arr, wts: Arr, pscr: Arr, vscr: Arr, inl: Arr, slow: Arr,
    errs: Arr,
) -> int:  # fmt: skip
    n = buf.shape[0]
    form = cfg[CFG_FORM]
    k = cfg[CFG_K]
    final = cfg[CFG_FINAL]
    stop = cfg[CFG_STOP]
    lenient = cfg[CFG_LENIENT]
    ne = 0
    npt = 0
    nv = 0
    nin = 0
    nslow = 0
    nerr = 0
    p_off[0] = 0
    v_off[0] = 0
    pos = 0
    in_ev = False
    e_pos = 0
    decl_np = 0
    decl_nv = 0
    nw_seen = 0
    slow0 = 0
    in0 = 0
    # IO_GenEvent: the current vertex and the particle lines it still expects
    cur_v = -1
    rem_orph = 0
    rem_out = 0
    v_line = 0
    v_decl = 0
    status = ST_OK
    fast = form == FORM_V3 and n > 1 and buf[n - 1] == 10  # (a sentinel)
    fast2 = form == FORM_V2 and n > 1 and buf[n - 1] == 10
    while True:
        # ---- fast path: an Asciiv3 P line of plain tokens inside an event. It either
        # accepts the line with exactly the generic path's columns, or leaves everything
        # to the generic path below (which then finds the same values, a slow token or
        # the error).
        if (fast and in_ev and pos < n and buf[U(pos)] == 80
                and _SEPS[buf[U(pos + 1)]]):  # fmt: skip
            q = pos + 1
            good = True
            pid = 0
            ref = 0
            pdg = 0
            for fi in range(3):  # id, parent, pdgid
                while _SEPS[buf[U(q)]]:
                    q += 1
                c = buf[U(q)]
                neg = c == 45
                if neg or c == 43:
                    q += 1
                mant = 0
                s0 = q
                while True:
                    dg = U(buf[U(q)]) - U(48)
                    if dg > U(9):
                        break
                    mant = mant * 10 + np.int64(dg)
                    q += 1
                if q == s0 or q - s0 > 10 or mant > INT32_MAX or not _ENDS[buf[U(q)]]:
                    good = False
                    break
                if neg:
                    mant = -mant
                if fi == 0:
                    pid = mant
                elif fi == 1:
                    ref = mant
                else:
                    pdg = mant
            if good:
                for d in range(5):  # px, py, pz, e, m
                    while _SEPS[buf[U(q)]]:
                        q += 1
                    c = buf[U(q)]
                    neg = c == 45
                    if neg or c == 43:
                        q += 1
                    mant = 0
                    s0 = q
                    dot = -1
                    while True:
                        dg = U(buf[U(q)]) - U(48)
                        if dg <= U(9):
                            mant = mant * 10 + np.int64(dg)
                        elif dg == _DOT48 and dot < 0:
                            dot = q
                        else:
                            break
                        q += 1
                    nd = q - s0
                    e10 = 0
                    if dot >= 0:
                        nd -= 1
                        e10 = dot + 1 - q
                    if nd <= 0 or nd > 18:
                        good = False
                        break
                    c = buf[U(q)]
                    if c == 101 or c == 69:
                        q += 1
                        eneg = False
                        if buf[U(q)] == 45 or buf[U(q)] == 43:
                            eneg = buf[U(q)] == 45
                            q += 1
                        ex = 0
                        xs = q
                        while U(buf[U(q)]) - U(48) <= U(9) and q - xs < 4:
                            ex = ex * 10 + np.int64(buf[U(q)] - 48)
                            q += 1
                        if q == xs or q - xs > 3:
                            good = False
                            break
                        e10 += -ex if eneg else ex
                        c = buf[U(q)]
                    if not _ENDS[c]:
                        good = False
                        break
                    if mant <= _TWO53 and -22 <= e10 <= 22:
                        x = np.float64(mant)
                        x = x * _POW10[U(e10)] if e10 >= 0 else x / _POW10[U(-e10)]
                    else:  # (16-17 digit values: %.16e)
                        x, exact = decimal_to_float(U(mant), e10)
                        if not exact:
                            good = False
                            break
                    p_f[U(d), U(npt)] = -x if neg else x
            if good:  # status
                while _SEPS[buf[U(q)]]:
                    q += 1
                c = buf[U(q)]
                neg = c == 45
                if neg or c == 43:
                    q += 1
                mant = 0
                s0 = q
                while True:
                    dg = U(buf[U(q)]) - U(48)
                    if dg > U(9):
                        break
                    mant = mant * 10 + np.int64(dg)
                    q += 1
                if q == s0 or q - s0 > 10 or mant > INT32_MAX:
                    good = False
                while _SEPS[buf[U(q)]]:
                    q += 1
                if good and buf[U(q)] == 10:
                    p_i[0, U(npt)] = pdg
                    p_i[1, U(npt)] = -mant if neg else mant
                    p_i[2, U(npt)] = -1
                    p_i[3, U(npt)] = -1
                    pscr[0, U(npt)] = pid
                    pscr[1, U(npt)] = ref
                    pscr[2, U(npt)] = pos
                    npt += 1
                    pos = q + 1
                    continue
        # ---- fast path: an IO_GenEvent P line of plain tokens after its vertex, "P
        # barcode pdgid px py pz e m status theta phi end_vertex n_flow [flow pairs]"
        # (same contract as above; theta and phi are checked, not kept)
        if (fast2 and in_ev and cur_v >= 0 and (rem_orph > 0 or rem_out > 0)
                and pos < n and buf[U(pos)] == 80 and _SEPS[buf[U(pos + 1)]]):  # fmt: skip
            q = pos + 1
            good = True
            bc = 0
            pdg = 0
            stat = 0
            endbc = 0
            nflow = 0
            fi = -1
            while True:  # fields after "P" (n_flow, field 11, adds its pairs)
                fi += 1
                if fi >= 12 + 2 * nflow:
                    break
                while _SEPS[buf[U(q)]]:
                    q += 1
                c = buf[U(q)]
                neg = c == 45
                if neg or c == 43:
                    q += 1
                if _V2P_FLOAT[U(min(fi, 12))]:
                    mant = 0
                    s0 = q
                    dot = -1
                    while True:
                        dg = U(buf[U(q)]) - U(48)
                        if dg <= U(9):
                            mant = mant * 10 + np.int64(dg)
                        elif dg == _DOT48 and dot < 0:
                            dot = q
                        else:
                            break
                        q += 1
                    nd = q - s0
                    e10 = 0
                    if dot >= 0:
                        nd -= 1
                        e10 = dot + 1 - q
                    if nd <= 0 or nd > 18:
                        good = False
                        break
                    c = buf[U(q)]
                    if c == 101 or c == 69:
                        q += 1
                        eneg = False
                        if buf[U(q)] == 45 or buf[U(q)] == 43:
                            eneg = buf[U(q)] == 45
                            q += 1
                        ex = 0
                        xs = q
                        while U(buf[U(q)]) - U(48) <= U(9) and q - xs < 4:
                            ex = ex * 10 + np.int64(buf[U(q)] - 48)
                            q += 1
                        if q == xs or q - xs > 3:
                            good = False
                            break
                        e10 += -ex if eneg else ex
                        c = buf[U(q)]
                    if not _ENDS[c]:
                        good = False
                        break
                    if fi >= 7:  # theta, phi: checked only
                        continue
                    if mant <= _TWO53 and -22 <= e10 <= 22:
                        x = np.float64(mant)
                        x = x * _POW10[U(e10)] if e10 >= 0 else x / _POW10[U(-e10)]
                    else:
                        x, exact = decimal_to_float(U(mant), e10)
                        if not exact:
                            good = False
                            break
                    p_f[U(fi - 2), U(npt)] = -x if neg else x
                else:
                    mant = 0
                    s0 = q
                    while True:
                        dg = U(buf[U(q)]) - U(48)
                        if dg > U(9):
                            break
                        mant = mant * 10 + np.int64(dg)
                        q += 1
                    if q == s0 or q - s0 > 10 or mant > INT32_MAX or not _ENDS[buf[U(q)]]:
                        good = False
                        break
                    if neg:
                        mant = -mant
                    if fi == 0:
                        bc = mant
                    elif fi == 1:
                        pdg = mant
                    elif fi == 7:
                        stat = mant
                    elif fi == 10:
                        endbc = mant
                    elif fi == 11:
                        if mant < 0 or mant > (n - q) // 4:
                            good = False
                            break
                        nflow = mant
            if good:
                while _SEPS[buf[U(q)]]:
                    q += 1
                if buf[U(q)] == 10:
                    p_i[0, U(npt)] = pdg
                    p_i[1, U(npt)] = stat
                    if rem_orph > 0:
                        p_i[2, U(npt)] = -1
                        rem_orph -= 1
                    else:
                        p_i[2, U(npt)] = cur_v
                        rem_out -= 1
                    p_i[3, U(npt)] = -1
                    pscr[0, U(npt)] = bc
                    pscr[1, U(npt)] = endbc
                    pscr[2, U(npt)] = pos
                    npt += 1
                    pos = q + 1
                    continue
        # ---- fast path: an IO_GenEvent V line of plain tokens after a complete vertex,
        # "V barcode id x y z ctau n_orphans n_out n_weights [weights]" (same contract;
        # the weights are checked, not kept)
        if (fast2 and in_ev and not (cur_v >= 0 and (rem_orph > 0 or rem_out > 0))
                and pos < n and buf[U(pos)] == 86 and _SEPS[buf[U(pos + 1)]]):  # fmt: skip
            q = pos + 1
            good = True
            bc = 0
            vst = 0
            no = 0
            nout = 0
            nwv = 0
            fi = -1
            while True:  # fields after "V" (n_weights, field 8, adds its values)
                fi += 1
                if fi >= 9 + nwv:
                    break
                while _SEPS[buf[U(q)]]:
                    q += 1
                c = buf[U(q)]
                neg = c == 45
                if neg or c == 43:
                    q += 1
                if _V2V_FLOAT[U(min(fi, 9))]:
                    mant = 0
                    s0 = q
                    dot = -1
                    while True:
                        dg = U(buf[U(q)]) - U(48)
                        if dg <= U(9):
                            mant = mant * 10 + np.int64(dg)
                        elif dg == _DOT48 and dot < 0:
                            dot = q
                        else:
                            break
                        q += 1
                    nd = q - s0
                    e10 = 0
                    if dot >= 0:
                        nd -= 1
                        e10 = dot + 1 - q
                    if nd <= 0 or nd > 18:
                        good = False
                        break
                    c = buf[U(q)]
                    if c == 101 or c == 69:
                        q += 1
                        eneg = False
                        if buf[U(q)] == 45 or buf[U(q)] == 43:
                            eneg = buf[U(q)] == 45
                            q += 1
                        ex = 0
                        xs = q
                        while U(buf[U(q)]) - U(48) <= U(9) and q - xs < 4:
                            ex = ex * 10 + np.int64(buf[U(q)] - 48)
                            q += 1
                        if q == xs or q - xs > 3:
                            good = False
                            break
                        e10 += -ex if eneg else ex
                        c = buf[U(q)]
                    if not _ENDS[c]:
                        good = False
                        break
                    if fi >= 9:  # the vertex's weights: checked only
                        continue
                    if mant <= _TWO53 and -22 <= e10 <= 22:
                        x = np.float64(mant)
                        x = x * _POW10[U(e10)] if e10 >= 0 else x / _POW10[U(-e10)]
                    else:
                        x, exact = decimal_to_float(U(mant), e10)
                        if not exact:
                            good = False
                            break
                    v_f[U(fi - 2), U(nv)] = -x if neg else x
                else:
                    mant = 0
                    s0 = q
                    while True:
                        dg = U(buf[U(q)]) - U(48)
                        if dg > U(9):
                            break
                        mant = mant * 10 + np.int64(dg)
                        q += 1
                    if q == s0 or q - s0 > 10 or mant > INT32_MAX or not _ENDS[buf[U(q)]]:
                        good = False
                        break
                    if neg:
                        mant = -mant
                    if fi == 0:
                        bc = mant
                    elif fi == 1:
                        vst = mant
                    elif fi == 6:
                        no = mant
                    elif fi == 7:
                        nout = mant
                    else:
                        nwv = mant
                    if fi >= 6 and (mant < 0 or mant > (n - q) // 2):
                        good = False
                        break
            if good:
                while _SEPS[buf[U(q)]]:
                    q += 1
                if buf[U(q)] == 10:
                    v_i[U(nv)] = vst
                    vscr[0, U(nv)] = bc
                    vscr[1, U(nv)] = pos
                    cur_v = nv - v_off[ne]
                    rem_orph = no
                    rem_out = nout
                    v_line = pos
                    v_decl = no + nout
                    nv += 1
                    pos = q + 1
                    continue
        # ---- fast path: an Asciiv3 V line of plain tokens (same contract as above)
        if (fast and in_ev and pos < n and buf[U(pos)] == 86
                and _SEPS[buf[U(pos + 1)]]):  # fmt: skip
            q = pos + 1
            good = True
            vid = 0
            vst = 0
            for fi in range(2):
                while _SEPS[buf[U(q)]]:
                    q += 1
                neg = False
                if (buf[U(q)] == 45 or buf[U(q)] == 43):
                    neg = buf[U(q)] == 45
                    q += 1
                mant = 0
                s0 = q
                while U(buf[U(q)]) - U(48) <= U(9) and q - s0 < 11:
                    mant = mant * 10 + np.int64(buf[U(q)] - 48)
                    q += 1
                if q == s0 or q - s0 > 10 or mant > INT32_MAX or not _ENDS[buf[U(q)]]:
                    good = False
                    break
                if fi == 0:
                    vid = -mant if neg else mant
                else:
                    vst = -mant if neg else mant
            a_in = nin
            if good:
                while _SEPS[buf[U(q)]]:
                    q += 1
                if buf[U(q)] == 91:
                    q += 1
                    if buf[U(q)] == 93:
                        q += 1
                    else:
                        while True:
                            neg = False
                            if (buf[U(q)] == 45 or buf[U(q)] == 43):
                                neg = buf[U(q)] == 45
                                q += 1
                            mant = 0
                            s0 = q
                            while U(buf[U(q)]) - U(48) <= U(9) and q - s0 < 11:
                                mant = mant * 10 + np.int64(buf[U(q)] - 48)
                                q += 1
                            if q == s0 or q - s0 > 10 or mant > INT32_MAX:
                                good = False
                                break
                            inl[U(nin)] = -mant if neg else mant
                            nin += 1
                            c = buf[U(q)]
                            q += 1
                            if c == 44:
                                continue
                            if c != 93:
                                good = False
                            break
                    if good and not _ENDS[buf[U(q)]]:
                        good = False
                else:
                    good = False
            if good:
                while _SEPS[buf[U(q)]]:
                    q += 1
                if buf[U(q)] == 10:
                    for d in range(4):
                        v_f[U(d), U(nv)] = 0.0
                elif buf[U(q)] == 64 and _SEPS[buf[U(q + 1)]]:
                    q += 1
                    for d in range(4):
                        while _SEPS[buf[U(q)]]:
                            q += 1
                        c = buf[U(q)]
                        neg = c == 45
                        if neg or c == 43:
                            q += 1
                        mant = 0
                        s0 = q
                        dot = -1
                        while True:
                            dg = U(buf[U(q)]) - U(48)
                            if dg <= U(9):
                                mant = mant * 10 + np.int64(dg)
                            elif dg == _DOT48 and dot < 0:
                                dot = q
                            else:
                                break
                            q += 1
                        nd = q - s0
                        e10 = 0
                        if dot >= 0:
                            nd -= 1
                            e10 = dot + 1 - q
                        if nd <= 0 or nd > 18:
                            good = False
                            break
                        if (buf[U(q)] == 101 or buf[U(q)] == 69):
                            q += 1
                            eneg = False
                            if (buf[U(q)] == 45 or buf[U(q)] == 43):
                                eneg = buf[U(q)] == 45
                                q += 1
                            ex = 0
                            xs = q
                            while U(buf[U(q)]) - U(48) <= U(9) and q - xs < 4:
                                ex = ex * 10 + np.int64(buf[U(q)] - 48)
                                q += 1
                            if q == xs or q - xs > 3:
                                good = False
                                break
                            e10 += -ex if eneg else ex
                        if not _ENDS[buf[U(q)]]:
                            good = False
                            break
                        if mant <= _TWO53 and -22 <= e10 <= 22:
                            x = np.float64(mant)
                            x = x * _POW10[U(e10)] if e10 >= 0 else x / _POW10[U(-e10)]
                        else:
                            x, exact = decimal_to_float(U(mant), e10)
                            if not exact:
                                good = False
                                break
                        v_f[U(d), U(nv)] = -x if neg else x
                    if good:
                        while _SEPS[buf[U(q)]]:
                            q += 1
                        good = buf[U(q)] == 10
                else:
                    good = False
            if good:
                v_i[U(nv)] = vst
                vscr[U(0), U(nv)] = vid
                vscr[U(1), U(nv)] = pos
                vscr[U(2), U(nv)] = a_in
                vscr[U(3), U(nv)] = nin
                nv += 1
                pos = q + 1
                continue
            nin = a_in
        code = 0
        errpos = 0
        ea = 0
        eb = 0
        finish = False  # finish the open event before this line
        closing = 0  # 1 end of buffer, 2 E line, 3 HepMC:: line, 4 stop
        from_finish = False  # the error was found when closing the open event
        ls = pos
        if pos >= n:
            if not in_ev:
                break
            finish = True
            closing = 1
        else:
            c = buf[pos]
            c1 = buf[pos + 1] if pos + 1 < n else 10
            if c == 10:
                pos += 1
                continue
            if _is_sep(c):
                eol, q = _at_eol(buf, pos, n)
                if eol:
                    pos = q + 1
                    continue
                code = ERR_UNEXPECTED
                errpos = ls
            elif c == 72 and c1 == 101 and pos + 7 <= n and _match(buf, pos, pos + 7, _PREFIX):
                closing = 3
                finish = in_ev
            elif c1 != 10 and not _is_sep(c1):
                code = ERR_UNEXPECTED
                errpos = ls
            elif c == 69:  # E
                if ls >= stop:
                    closing = 4
                    finish = in_ev
                else:
                    closing = 2
                    finish = in_ev
            elif not in_ev:
                code = ERR_UNEXPECTED
                errpos = ls
        if code == 0 and finish:
            # close the open event (IO_GenEvent: its last vertex first)
            if form == FORM_V2 and cur_v >= 0 and (rem_orph > 0 or rem_out > 0):
                code = ERR_VCOUNT
                errpos = v_line
                ea = v_decl
                eb = v_decl - rem_orph - rem_out
            elif k > 0 and nw_seen == 0 and form == FORM_V3:
                code = ERR_WEIGHTS
                errpos = e_pos
                ea = 0
                eb = k
            elif form == FORM_V3:
                code, errpos, ea, eb, nv2 = _finish_v3(
                    p_i, pscr, vscr, inl, v_i, v_f, p_off[ne], npt, v_off[ne], nv, decl_np,
                    decl_nv, e_pos,
                )  # fmt: skip
                if code == 0:
                    nv = nv2
            else:
                code, errpos, ea, eb = _finish_v2(
                    p_i, pscr, vscr, p_off[ne], npt, v_off[ne], nv, decl_nv, e_pos
                )
            if closing == 1 and final and (code != 0 or buf[n - 1] != 10):
                ea = code
                code = ERR_CUT
                errpos = e_pos
            from_finish = code != 0
            if code == 0:
                ne += 1
                p_off[ne] = npt
                v_off[ne] = nv
                in_ev = False
        if code == 0:
            if closing == 1:
                break
            if closing == 3:
                le = _line_end(buf, pos, n)
                q = le
                while q > pos and _is_sep(buf[q - 1]):
                    q -= 1
                if form == FORM_V3:
                    is_end = _match(buf, pos, q, _END_V3)
                else:
                    is_end = _match(buf, pos, q, _END_V2)
                status = ST_END if is_end else ST_LISTING
                pos = ls
                break
            if closing == 4:
                status = ST_STOPPED
                pos = ls
                break
            p = pos + 1
            if closing == 2:
                # ---- a new event
                in_ev = True
                e_pos = ls
                num = 0
                nw_seen = 0
                slow0 = nslow
                in0 = nin
                cur_v = -1
                rem_orph = 0
                rem_out = 0
                ev_i[1, ne] = 0
                ev_i[2, ne] = ls
                ev_i[3, ne] = -1  # EV_INT_UNSET
                for d in range(4, N_EVI):
                    ev_i[d, ne] = 0
                for d in range(N_EVF):
                    ev_f[d, ne] = np.nan
                ok = True
                num, p, ok1 = _int(buf, p, n, INT64_LIMIT)
                ok = ok and ok1
                if form == FORM_V3:
                    if ok:
                        decl_nv, p, ok = _int(buf, p, n, INT32_MAX + 1)
                    if ok:
                        decl_np, p, ok = _int(buf, p, n, INT32_MAX + 1)
                    if ok and (decl_nv < 0 or decl_np < 0):
                        ok = False
                    if ok:
                        eol, p = _at_eol(buf, p, n)
                        if not eol:
                            if buf[p] == 64 and (p + 1 >= n or _is_sep(buf[p + 1])):
                                p += 1
                                for _d in range(4):
                                    _x, _s, p, fs = _float(buf, p, n)
                                    if fs == 2:
                                        ok = False
                                        break
                                if ok:
                                    eol, p = _at_eol(buf, p, n)
                                    ok = eol
                            else:
                                ok = False
                else:
                    _x, p, ok1 = _int(buf, p, n, INT32_MAX + 1)  # n_mpi
                    ok = ok and ok1
                    if ok:  # scale, alpha_qcd, alpha_qed
                        p, ok, nslow = _floats(buf, p, n, ev_f, ne, 1, 3, T_EVF, slow, nslow)
                    if ok:
                        proc, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        ev_i[3, ne] = proc
                    if ok:  # signal vertex
                        _x, p, ok = _int(buf, p, n, INT32_MAX + 1)
                    if ok:
                        decl_nv, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok and decl_nv < 0:
                            ok = False
                    for _d in range(2):  # beam barcodes
                        if ok:
                            _x, p, ok = _int(buf, p, n, INT32_MAX + 1)
                    nrand = 0
                    if ok:
                        nrand, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok and nrand < 0:
                            ok = False
                    for _d in range(nrand):
                        if not ok:
                            break
                        p, ok = _digits(buf, p, n)
                    nwl = 0
                    if ok:
                        nwl, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok and nwl < 0:
                            ok = False
                    j = 0
                    while ok and j < nwl:
                        x, s, p, fs = _float(buf, p, n)
                        if fs == 2:
                            ok = False
                            break
                        if j < k:
                            wts[ne * k + j] = x
                            if fs == 1:
                                slow[nslow, 0] = T_W
                                slow[nslow, 1] = 0
                                slow[nslow, 2] = ne * k + j
                                slow[nslow, 3] = s
                                slow[nslow, 4] = p
                                nslow += 1
                        j += 1
                    if ok:
                        eol, p = _at_eol(buf, p, n)
                        ok = eol
                    if ok and nwl != k:
                        code = ERR_WEIGHTS
                        errpos = ls
                        ea = nwl
                        eb = k
                    nw_seen = 1
                if ok:
                    ev_i[0, ne] = num
                elif code == 0:
                    code = ERR_LINE
                    errpos = ls
            elif c == 80:  # P
                ok = True
                pid = 0
                ref = 0
                pdg = 0
                stat = 0
                bc = 0
                if form == FORM_V3:
                    pid, p, ok = _int(buf, p, n, INT32_MAX + 1)
                    ref = 0
                    if ok:
                        ref, p, ok = _int(buf, p, n, INT32_MAX + 1)
                    if ok:
                        pdg, p, ok = _int(buf, p, n, INT32_MAX + 1)
                    if ok:
                        p, ok, nslow = _floats(buf, p, n, p_f, npt, 0, 4, T_PF, slow, nslow)
                    if ok:
                        stat, p, ok = _int(buf, p, n, INT32_MAX + 1)
                    if ok:
                        eol, p = _at_eol(buf, p, n)
                        ok = eol
                    if ok:
                        p_i[0, npt] = pdg
                        p_i[1, npt] = stat
                        p_i[2, npt] = -1
                        p_i[3, npt] = -1
                        pscr[0, npt] = pid
                        pscr[1, npt] = ref
                        pscr[2, npt] = ls
                        npt += 1
                    else:
                        code = ERR_LINE
                        errpos = ls
                else:
                    if cur_v < 0:
                        code = ERR_UNEXPECTED
                        errpos = ls
                    elif rem_orph == 0 and rem_out == 0:
                        code = ERR_VCOUNT
                        errpos = v_line
                        ea = v_decl
                        eb = v_decl + 1
                    else:
                        bc, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok:
                            pdg, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok:
                            p, ok, nslow = _floats(buf, p, n, p_f, npt, 0, 4, T_PF, slow, nslow)
                        if ok:
                            stat, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        for _d in range(2):  # polarisation theta, phi
                            if ok:
                                _x, _s, p, fs = _float(buf, p, n)
                                ok = fs != 2
                        endbc = 0
                        if ok:
                            endbc, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        nflow = 0
                        if ok:
                            nflow, p, ok = _int(buf, p, n, INT32_MAX + 1)
                            if ok and nflow < 0:
                                ok = False
                        for _d in range(2 * nflow):
                            if not ok:
                                break
                            _x, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok:
                            eol, p = _at_eol(buf, p, n)
                            ok = eol
                        if ok:
                            p_i[0, npt] = pdg
                            p_i[1, npt] = stat
                            if rem_orph > 0:
                                p_i[2, npt] = -1
                                rem_orph -= 1
                            else:
                                p_i[2, npt] = cur_v
                                rem_out -= 1
                            p_i[3, npt] = -1
                            pscr[0, npt] = bc
                            pscr[1, npt] = endbc
                            pscr[2, npt] = ls
                            npt += 1
                        else:
                            code = ERR_LINE
                            errpos = ls
            elif c == 86:  # V
                ok = True
                vid = 0
                bc = 0
                if form == FORM_V3:
                    vid, p, ok = _int(buf, p, n, INT32_MAX + 1)
                    vst = 0
                    if ok:
                        vst, p, ok = _int(buf, p, n, INT32_MAX + 1)
                    a_in = nin
                    x0 = 0.0
                    x1 = 0.0
                    x2 = 0.0
                    x3 = 0.0
                    if ok:
                        p = _skip_sep(buf, p, n)
                        if p < n and buf[p] == 91:  # [
                            p += 1
                            if p < n and buf[p] == 93:
                                p += 1
                            else:
                                while True:
                                    neg = False
                                    if p < n and (buf[p] == 45 or buf[p] == 43):
                                        neg = buf[p] == 45
                                        p += 1
                                    v = 0
                                    nd = 0
                                    while p < n and 48 <= buf[p] <= 57 and nd < 10:
                                        v = v * 10 + (buf[p] - 48)
                                        nd += 1
                                        p += 1
                                    if nd == 0 or v > INT32_MAX or (p < n and 48 <= buf[p] <= 57):
                                        ok = False
                                        break
                                    inl[nin] = -v if neg else v
                                    nin += 1
                                    if p < n and buf[p] == 44:
                                        p += 1
                                        continue
                                    if p < n and buf[p] == 93:
                                        p += 1
                                        break
                                    ok = False
                                    break
                            if ok and p < n and buf[p] != 10 and not _is_sep(buf[p]):
                                ok = False
                        else:
                            ok = False
                    if ok:
                        eol, p = _at_eol(buf, p, n)
                        if not eol:
                            if buf[p] == 64 and (p + 1 >= n or _is_sep(buf[p + 1])):
                                p += 1
                                p, ok, nslow = _floats(buf, p, n, v_f, nv, 0, 3, T_VF, slow, nslow)
                                if ok:
                                    eol, p = _at_eol(buf, p, n)
                                    ok = eol
                            else:
                                ok = False
                        else:
                            v_f[0, nv] = x0
                            v_f[1, nv] = x1
                            v_f[2, nv] = x2
                            v_f[3, nv] = x3
                    if ok:
                        v_i[nv] = vst
                        vscr[0, nv] = vid
                        vscr[1, nv] = ls
                        vscr[2, nv] = a_in
                        vscr[3, nv] = nin
                        nv += 1
                    else:
                        code = ERR_LINE
                        errpos = ls
                else:
                    if cur_v >= 0 and (rem_orph > 0 or rem_out > 0):
                        code = ERR_VCOUNT
                        errpos = v_line
                        ea = v_decl
                        eb = v_decl - rem_orph - rem_out
                    else:
                        bc, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        vst = 0
                        if ok:
                            vst, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok:
                            p, ok, nslow = _floats(buf, p, n, v_f, nv, 0, 3, T_VF, slow, nslow)
                        no = 0
                        nout = 0
                        nwv = 0
                        if ok:
                            no, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok:
                            nout, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok:
                            nwv, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok and (no < 0 or nout < 0 or nwv < 0):
                            ok = False
                        for _d in range(nwv):
                            if not ok:
                                break
                            _x, _s, p, fs = _float(buf, p, n)
                            ok = fs != 2
                        if ok:
                            eol, p = _at_eol(buf, p, n)
                            ok = eol
                        if ok:
                            v_i[nv] = vst
                            vscr[0, nv] = bc
                            vscr[1, nv] = ls
                            cur_v = nv - v_off[ne]
                            rem_orph = no
                            rem_out = nout
                            v_line = ls
                            v_decl = no + nout
                            nv += 1
                        else:
                            code = ERR_LINE
                            errpos = ls
            elif c == 85:  # U
                a1 = _skip_sep(buf, p, n)
                b1 = _token_end(buf, a1, n)
                a2 = _skip_sep(buf, b1, n)
                b2 = _token_end(buf, a2, n)
                eol, p = _at_eol(buf, b2, n)
                flags = -1
                if eol and b1 > a1 and b2 > a2:
                    mom = -1
                    if b1 - a1 == 3 and buf[a1 + 1] == 69 and buf[a1 + 2] == 86:
                        if buf[a1] == 71:
                            mom = 0
                        elif buf[a1] == 77:
                            mom = UNIT_MEV
                    ln = -1
                    if b2 - a2 == 2 and buf[a2 + 1] == 77:
                        if buf[a2] == 77:
                            ln = 0
                        elif buf[a2] == 67:
                            ln = UNIT_CM
                    if mom >= 0 and ln >= 0:
                        flags = mom + ln
                if flags < 0:
                    code = ERR_UNIT
                    errpos = ls
                else:
                    ev_i[1, ne] = flags
            elif c == 87 and form == FORM_V3:  # W
                if nw_seen:
                    code = ERR_UNEXPECTED
                    errpos = ls
                else:
                    j = 0
                    ok = True
                    while True:
                        eol, p = _at_eol(buf, p, n)
                        if eol:
                            break
                        x, s, p, fs = _float(buf, p, n)
                        if fs == 2:
                            ok = False
                            break
                        if j < k:
                            wts[ne * k + j] = x
                            if fs == 1:
                                slow[nslow, 0] = T_W
                                slow[nslow, 1] = 0
                                slow[nslow, 2] = ne * k + j
                                slow[nslow, 3] = s
                                slow[nslow, 4] = p
                                nslow += 1
                        j += 1
                    if not ok:
                        code = ERR_LINE
                        errpos = ls
                    elif j != k:
                        code = ERR_WEIGHTS
                        errpos = ls
                        ea = j
                        eb = k
                    nw_seen = 1
            elif c == 67:  # C
                p, ok, nslow = _floats(buf, p, n, ev_f, ne, 4, 5, T_EVF, slow, nslow)
                if not ok:
                    code = ERR_LINE
                    errpos = ls
                p = _line_end(buf, p, n)
            elif c == 65 and form == FORM_V3:  # A
                aid, p, ok = _int(buf, p, n, INT32_MAX + 1)
                if ok and aid == 0:
                    a1 = _skip_sep(buf, p, n)
                    b1 = _token_end(buf, a1, n)
                    p = b1
                    d = -1
                    if _match(buf, a1, b1, _A_AQCD):
                        d = 2
                    elif _match(buf, a1, b1, _A_AQED):
                        d = 3
                    elif _match(buf, a1, b1, _A_SCALE):
                        d = 1
                    elif _match(buf, a1, b1, _A_XSEC):
                        d = 4
                    if d >= 0:
                        last = 5 if d == 4 else d
                        p, ok, nslow = _floats(buf, p, n, ev_f, ne, d, last, T_EVF, slow, nslow)
                    elif _match(buf, a1, b1, _A_PROC):
                        proc, p, ok = _int(buf, p, n, INT32_MAX + 1)
                        if ok:
                            ev_i[3, ne] = proc
                    elif _match(buf, a1, b1, _A_PDF):
                        p, ok, nslow = _pdf_info(buf, p, n, ev_i, ev_f, ne, slow, nslow)
                if not ok:
                    code = ERR_LINE
                    errpos = ls
                p = _line_end(buf, p, n)
            elif c == 70 and form == FORM_V2:  # F
                p, ok, nslow = _pdf_info(buf, p, n, ev_i, ev_f, ne, slow, nslow)
                if not ok:
                    code = ERR_LINE
                    errpos = ls
                p = _line_end(buf, p, n)
            elif (form == FORM_V3 and (c == 84 or c == 78)) or (
                form == FORM_V2 and (c == 78 or c == 72)
            ):
                p = _line_end(buf, p, n)
            else:
                code = ERR_UNEXPECTED
                errpos = ls
            if code == 0:
                pos = _line_end(buf, p, n) + 1
        if (code != 0 and not from_finish and in_ev and final and buf[n - 1] != 10
                and _line_end(buf, ls, n) >= n):  # fmt: skip
            ea = code  # the last line is cut short
            code = ERR_CUT
            errpos = e_pos
        if code != 0:
            ev_start = e_pos if in_ev else ls
            if not lenient:
                status = code
                st[ST_ERRPOS] = errpos
                st[ST_A] = ea
                st[ST_B] = eb
                st[ST_EVSTART] = ev_start
                break
            # roll the event back and resume at the next event line
            q = _line_end(buf, ls, n)
            if code == ERR_CUT:
                q = n
            elif from_finish:
                q = ls - 1 if closing != 1 else n
            while q < n and not from_finish:
                if q + 2 < n and buf[q + 1] == 69 and _is_sep(buf[q + 2]):
                    break
                if q + 7 < n and _match(buf, q + 1, q + 8, _PREFIX):
                    break
                q = _line_end(buf, q + 1, n)
            resume = q + 1 if q < n else n
            errs[nerr, 0] = ev_start
            errs[nerr, 1] = resume
            errs[nerr, 2] = errpos
            errs[nerr, 3] = code
            errs[nerr, 4] = ea
            errs[nerr, 5] = eb
            nerr += 1
            npt = p_off[ne]
            nv = v_off[ne]
            nslow = slow0 if in_ev else nslow
            nin = in0 if in_ev else nin
            in_ev = False
            pos = resume
    st[ST_EV] = ne
    st[ST_NP] = npt
    st[ST_NV] = nv
    st[ST_NSLOW] = nslow
    st[ST_STATUS] = status
    st[ST_POS] = min(pos, n)
    st[ST_NERR] = nerr
    return 0


# ------------------------------------------------------------------ compilation

_COMPILED: Callable[..., Any] | None = None
_TRIED = False


def numba_available() -> bool:
    """True when numba is importable and ``EVTKIN_NO_NUMBA`` is not set."""
    if os.environ.get("EVTKIN_NO_NUMBA", "") not in ("", "0"):
        return False
    try:
        import numba  # noqa: F401
    except ImportError:  # pragma: no cover - numba is a dependency
        return False
    return True


def compiled_kernel() -> Callable[..., Any] | None:
    """The numba-compiled :func:`scan_kernel_source` (cached on disk), or None."""
    global _COMPILED, _TRIED
    if not _TRIED:
        _TRIED = True
        if numba_available():
            from numba import njit, types

            from evtkin._jit import deferred_extensions, lean_compile, tie_cache_to_callees
            from evtkin.io import exact_float

            jit = njit(nogil=True, cache=True, error_model="numpy")
            g = globals()
            g["decimal_to_float"] = exact_float.jitted()
            for name in _HELPERS:
                g[name] = jit(g[name])
            kern = jit(scan_kernel_source)
            tie_cache_to_callees(kern)  # exact_float.py is compiled into it

            def arr(dtype: Any, ndim: int) -> Any:
                return types.Array(dtype, ndim, "C")

            u8, i32, i64, f64 = types.uint8, types.int32, types.int64, types.float64
            signature = (
                arr(u8, 1), arr(i64, 1), arr(i64, 1), arr(i64, 2), arr(f64, 2), arr(i64, 1),
                arr(i64, 1), arr(i32, 2), arr(f64, 2), arr(i32, 1), arr(f64, 2), arr(f64, 1),
                arr(i64, 2), arr(i64, 2), arr(i64, 1), arr(i64, 2), arr(i64, 2),
            )  # fmt: skip
            with deferred_extensions(), lean_compile():
                kern.compile(signature)
            _COMPILED = kern
    return _COMPILED


# ------------------------------------------------------------------ slow tokens


def fix_slow(
    buf: np.ndarray, slow: np.ndarray, ev_f: np.ndarray, p_f: np.ndarray, v_f: np.ndarray,
    wts: np.ndarray,
) -> None:  # fmt: skip
    """Convert the slow list's tokens (already validated) with Python's ``float()``."""
    raw = buf.tobytes() if slow.shape[0] > 64 else None
    for t, row, col, a, b in slow.tolist():
        text = raw[a:b] if raw is not None else bytes(buf[a:b])
        x = float(text)
        if t == T_EVF:
            ev_f[row, col] = x
        elif t == T_PF:
            p_f[row, col] = x
        elif t == T_VF:
            v_f[row, col] = x
        else:
            wts[col] = x
