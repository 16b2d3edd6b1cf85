"""Compiled byte scanner for the ``<event>`` part of LHE files (numba, ``nogil``, cached).

:func:`scan_kernel_source` is one single-pass state machine over a ``uint8`` buffer that holds
whole events (the reader cuts its buffers after an ``</event>``, or before an open
``<eventgroup>``). It writes straight into flat numeric columns (the caller's
preallocated arrays), starting at the counts held in ``st`` and resuming at byte
``st[ST_POS]``; when a column is full it stops at the last commit point (an event, or a
whole event group) so that the caller can grow the arrays and call again.

Every number of an event goes through one "number run" loop: the event line (``NUP
IDPRUP`` integers, then ``XWGTUP SCALUP AQEDUP AQCDUP``), a particle line (six integers,
then seven floats), a ``<weights>`` list and the value of a ``<wgt>`` tag. There is one
copy of the float parser, numbers go straight into their output column (through flat
views, one index computation per store), and the hot loop holds no token scratch space,
no array-taking call and no slow-path call (PERFORMANCE-NOTES: each of those put
reference counting or a rarely taken call into the hot loop). Speed comes from what the
loop does not do: byte classes are one lookup in a 256-entry table (``_CC``) instead of
chains of comparisons, and indices are cast to unsigned where they are used, so that
numba emits no negative-index wrap-around code. ``<wgt id='..'>`` tags whose id is the
declared id expected next are recognised by a direct byte comparison; any other tag
(and ids out of order) takes the general path.

Tags, comments and unknown elements (a few per event) are scanned by small helpers
(:func:`_tag_scan`, :func:`_find_weight`, :func:`_skip_element`), compiled with the
kernel; keeping them out of the kernel's body makes it (and its compile time) smaller.

Floats are bit-identical to Python's ``float()`` on the same text: a decimal mantissa of
at most 18 digits that is <= 2**53, with a decimal exponent within +-22, is converted
with a single correctly rounded multiplication or division by an exactly representable
power of ten; other mantissas of at most 18 digits (16-17 digit values printed with
``%.16e``, large exponents) by :func:`evtkin.io.exact_float.decimal_to_float` (a 128-bit
product, correctly rounded, or "undecided"). Any other token (more digits, ``nan``, a Fortran
exponent without a letter such as ``1.0+120``, or garbage) is recorded in a "slow list"
(target column, row, token span) and converted afterwards in Python by
:func:`fix_slow_values`, which also reports tokens that are not numbers. Fortran ``D``
exponents, ``+`` signs, tabs and CRLF line ends are accepted.

The kernel is compiled with ``error_model="numpy"`` (the default "python" model adds a
zero-divisor check to every division; the kernel only divides by exact powers of ten).
``fastmath`` is never used: it would break the exact rounding.

Integer fields (NUP, IDPRUP, IDUP, ISTUP, MOTHUP, ICOLUP) must be plain integers. Mother
indices are stored 0-based (the file's 0 = none becomes -1). A malformed event line or
particle line stops the scan with :data:`ERR_LINE`; :func:`diagnose_line` then works out
the exact message on the Python side (errors are rare, so their analysis need not be
compiled).

Structure is checked as the scan goes (LHEF 1.0, hep-ph/0609017: an event is one
``<event>`` element; XML 1.0: comments hold no markup), with the same verdicts as the
fallback scanner: every ``<event>`` closes before the next event tag (``ERR_EVENT_OPEN``;
a ``</event>`` outside an event is ``ERR_STRAY_CLOSE``); an element inside an event closes
inside it (``ERR_UNCLOSED``, ``ERR_RWGT_OPEN``); a comment opened inside an event holds no
event tag (``ERR_COMMENT``); a ``<wgt>`` value or ``<weights>`` list is followed by its
closing tag (``ERR_VALUE_CLOSE``); a ``<`` inside a tag is ``ERR_BAD_TAG``; a weight is
given at most once per event (``ERR_DUP_WEIGHT``); every integer field fits 32 bits;
a NUP too large for the bytes that follow is ``ERR_NUP_TOO_BIG`` (the caller never grows
its columns for an untrusted count); a second ``<LesHouchesEvents>`` is
``ERR_SECOND_HEADER``. Slow-path tokens are checked to be numbers in the kernel (one
linear pass, :func:`_number_ok`), so errors come in text order. On an error ``st`` holds
the counts of the last commit point and ``st[ST_POS]`` the start of the damaged event,
so that a lenient caller can resume at the next event start.

Importing this module does not import numba: :func:`compiled_kernel` compiles (or loads
from the cache) on first use, for the argument types the reader passes. The cold compile
uses numba's pipeline without the passes that leave this kernel unchanged, and memoised
call typing (``evtkin._jit.lean_pipeline`` and ``lean_compile``): ~9 s instead of ~15 s
here, with the same machine code speed (bench/bench_lhe_kernel.py). After any change to
the kernel or to how it is compiled, ``bench/check_lhe_kernels.py`` compares its output
with the previous build's on random pieces of real and damaged text.
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable
from typing import Any

import numpy as np

from evtkin.io.exact_float import decimal_to_float

__all__ = [
    "ERR_MESSAGES",
    "N_EVF",
    "N_PF",
    "N_PI",
    "ST_FULL",
    "ST_INCOMPLETE",
    "ST_OK",
    "compiled_kernel",
    "diagnose_line",
    "fix_slow_values",
    "numba_available",
    "parse_slow_token",
    "scan_kernel_source",
]

# event float rows: weight, scale, alpha_qed, alpha_qcd
N_EVF = 4
# particle int rows: pdgid, status, mother1, mother2, color1, color2
N_PI = 6
# particle float rows: px, py, pz, energy, mass, lifetime, spin
N_PF = 7

# ---- the ``st`` state array (int64[16]) shared with the caller
ST_EV = 0  # in: events already in the columns; out: committed events
ST_NP = 1  # in/out: particles
ST_NSLOW = 2  # in/out: entries of the slow list
ST_STATUS = 3  # out
ST_ERRPOS = 4  # out: byte offset of the error
ST_POS = 5  # in: where to start (between events); out: where to resume
ST_SAWEND = 6  # out: 1 if </LesHouchesEvents> was seen
ST_STOP = 7  # in: events (groups) whose tag starts at or after this offset are not read
ST_A = 8  # out: error detail / which column is full (1 events, 2 particles, 3 slow)
ST_B = 9  # out: error detail
ST_STOPPED = 10  # out: 1 if the scan stopped at ST_STOP
ST_ENSLOW = 11  # out, errors only: entries of the slow list at the error (ST_NSLOW: committed)
ST_SIZE = 16

# statuses
ST_OK = 0  # buffer consumed (or stopped at ST_STOP)
ST_FULL = 1  # a column is full (ST_A says which); resume at st[ST_POS]
ST_INCOMPLETE = 2  # buffer ends inside an event (or group) starting at st[ST_POS]
ERR_NUMBER = 10  # malformed number (errpos = token position)
ERR_FEW_PARTICLES = 11  # NUP larger than the particle lines (A = NUP, B = found)
ERR_MANY_PARTICLES = 12  # a numeric line after NUP particle lines (A = NUP)
ERR_UNKNOWN_WEIGHT = 13  # <wgt id> not declared (A, B = id span)
ERR_WEIGHT_COUNT = 14  # <weights> count != declared (A = found, B = declared)
ERR_INTEGER = 15  # an integer field holds something else
ERR_FIELD_COUNT = 16  # wrong number of fields (A = found, B = expected)
ERR_WGT_VALUE = 17  # <wgt> must hold exactly one number (A = found)
ERR_NEGATIVE_NUP = 18
ERR_LINE = 19  # malformed event line (B = 6) or particle line (B = 13) at errpos
# structure (LHEF 1.0: an event is one <event> element; its optional blocks close inside it)
ERR_EVENT_OPEN = 20  # the event is not closed before this tag (A, B = tag name span)
ERR_STRAY_CLOSE = 21  # </event> outside an event
ERR_UNCLOSED = 22  # an element inside the event does not close inside it (A, B = name span)
ERR_RWGT_OPEN = 23  # </event> before </rwgt>
ERR_COMMENT = 24  # a comment opened inside an event does not close inside it
ERR_VALUE_CLOSE = 25  # the value of <wgt>/<weights> is not followed by its closing tag (A = kind)
ERR_SECOND_HEADER = 26  # a second <LesHouchesEvents> in the stream
ERR_DUP_WEIGHT = 27  # a weight given twice in one event (A = column)
ERR_NUP_TOO_BIG = 28  # NUP particle lines cannot fit before </event> (A = NUP)
ERR_BAD_TAG = 29  # a '<' inside a tag (A = its position)

FULL_EVENTS = 1
FULL_PARTICLES = 2
FULL_SLOW = 3

ERR_MESSAGES = {
    ERR_NUMBER: "expected a number",
    ERR_FEW_PARTICLES: "NUP disagrees with the particle lines",
    ERR_MANY_PARTICLES: "NUP disagrees with the particle lines",
    ERR_UNKNOWN_WEIGHT: "weight id not declared",
    ERR_WEIGHT_COUNT: "wrong number of <weights> values",
    ERR_INTEGER: "expected an integer",
    ERR_FIELD_COUNT: "wrong number of fields",
    ERR_WGT_VALUE: "<wgt> must hold exactly one number",
    ERR_NEGATIVE_NUP: "NUP must not be negative",
    ERR_LINE: "malformed line",
    ERR_EVENT_OPEN: "the event is not closed",
    ERR_STRAY_CLOSE: "</event> outside an event",
    ERR_UNCLOSED: "an element is not closed inside its event",
    ERR_RWGT_OPEN: "<rwgt> is not closed inside its event",
    ERR_COMMENT: "a comment is not closed inside its event",
    ERR_VALUE_CLOSE: "a weight value is not followed by its closing tag",
    ERR_SECOND_HEADER: "a second LHE header in the stream",
    ERR_DUP_WEIGHT: "a weight given twice in one event",
    ERR_NUP_TOO_BIG: "NUP exceeds the particle lines",
    ERR_BAD_TAG: "malformed tag",
}

#: smallest particle line: 13 one-character fields, 12 separators and a line end
MIN_PARTICLE_LINE = 26

# slow-list targets: 0-3 event floats, 10-16 particle floats, 20 weights (flat index)
T_EVF = 0
T_PF = 10
T_WTS = 20

_P10 = np.array([10.0**k for k in range(23)], dtype=np.float64)  # all exact in binary64
_TWO53 = 1 << 53
_I32_MAX = 2147483647
_I32_MIN = -2147483648
U = np.uint64  # index cast: unsigned indices need no wrap-around code
_DOT48 = np.uint64(46 - 48 + (1 << 64))  # '.' - '0' as an unsigned byte difference
# tag names packed big-endian into an int (their first 8 bytes)
_K_EVENT = int.from_bytes(b"event", "big")
_K_EVENTGRO = int.from_bytes(b"eventgro", "big")
_K_RWGT = int.from_bytes(b"rwgt", "big")
_K_WEIGHTS = int.from_bytes(b"weights", "big")
_K_WGT = int.from_bytes(b"wgt", "big")
_K_LESHOUCH = int.from_bytes(b"LesHouch", "big")

# byte classes (bit flags), looked up in _CC: one table load instead of a chain of tests
C_BLANK = 1  # space, tab, CR
C_LF = 2  # newline
C_SPACE = C_BLANK | C_LF
C_TOKEN_END = 4  # what may follow a number: blank, newline or '<'
C_LINE_END = 8  # newline, '<' or '#'
C_NAME_END = 16  # end of a tag name: blank, newline, '>', '/' or '<'
C_EXP = 32  # exponent letters e E d D
C_HSPACE = 64  # space, tab
C_NUM_START = 128  # + - . and digits


def _byte_classes() -> np.ndarray:
    cc = np.zeros(256, dtype=np.uint8)
    members = {
        C_BLANK: b" \t\r",
        C_LF: b"\n",
        C_TOKEN_END: b" \t\r\n<",
        C_LINE_END: b"\n<#",
        C_NAME_END: b" \t\r\n>/<",
        C_EXP: b"eEdD",
        C_HSPACE: b" \t",
        C_NUM_START: b"+-.0123456789",
    }
    for flag, chars in members.items():
        for ch in chars:
            cc[ch] |= flag
    return cc


_CC = _byte_classes()
_LHE_ROOT = np.frombuffer(b"LesHouchesEvents", dtype=np.uint8).copy()
_INFINITY = np.frombuffer(b"infinity", dtype=np.uint8).copy()
_CLOSE_WGT = np.frombuffer(b"</wgt", dtype=np.uint8).copy()
_CLOSE_WEIGHTS = np.frombuffer(b"</weights", dtype=np.uint8).copy()


# ------------------------------------------------------------------ cold-path helpers
# Compiled with the kernel (see compiled_kernel); called once per tag, never per number.


def _event_boundary(buf: np.ndarray, p: int, n: int) -> bool:
    """Whether the ``<`` at ``buf[p]`` opens one of the tags that bound events:
    ``<event>``, ``</event>``, ``<eventgroup>``, ``</eventgroup>`` or
    ``<LesHouchesEvents>``/``</LesHouchesEvents>`` (the name followed by a name end)."""
    q = p + 1
    if q < n and buf[U(q)] == 47:
        q += 1
    if q + 5 < n and (
        buf[U(q)] == 101  # e
        and buf[U(q + 1)] == 118  # v
        and buf[U(q + 2)] == 101  # e
        and buf[U(q + 3)] == 110  # n
        and buf[U(q + 4)] == 116  # t
    ):
        c = buf[U(q + 5)]
        if _CC[c] & C_NAME_END:
            return True
        return (
            q + 10 < n
            and c == 103  # g
            and buf[U(q + 6)] == 114  # r
            and buf[U(q + 7)] == 111  # o
            and buf[U(q + 8)] == 117  # u
            and buf[U(q + 9)] == 112  # p
            and _CC[buf[U(q + 10)]] & C_NAME_END != 0
        )
    if q + 16 < n and buf[U(q)] == 76:  # 'L'
        for t in range(16):
            if buf[U(q + t)] != _LHE_ROOT[U(t)]:
                return False
        ends: bool = _CC[buf[U(q + 16)]] & C_NAME_END != 0
        return ends
    return False


def _line_runs_out(buf: np.ndarray, pos: int, n: int) -> bool:
    """Whether the event or particle line continuing at ``pos`` reaches the end of the
    buffer before its end (a newline, ``<`` or ``#`` where a token would start): then a
    malformed line may only be cut short."""
    while pos < n:
        c = buf[U(pos)]
        if _CC[c] & C_BLANK:
            pos += 1
        elif _CC[c] & C_LINE_END:
            return False
        else:
            while pos < n and not _CC[buf[U(pos)]] & C_TOKEN_END:
                pos += 1
    return True


def _tag_scan(buf: np.ndarray, pos: int, n: int, in_event: bool) -> tuple[int, int, int, int]:
    """Scan the tag (or comment) starting with the ``<`` at ``buf[pos]``.

    Returns ``(ne, gt, wid_s, wid_e)``: the end of the tag name (-1 for a comment
    ``<!-- -->``), the position of the closing ``>`` (>= n when the buffer ends first)
    and the span of the value of an ``id=`` attribute (-1 if none). Quoted attribute
    values may hold ``>``. A ``<`` inside the tag (quoted or not) makes it malformed:
    ``ne = -2`` and ``gt`` is that ``<``. Inside an event (``in_event``) a comment that
    holds an event boundary (see :func:`_event_boundary`) did not close where it opened:
    ``ne = -3``.
    """
    if pos + 3 < n and buf[U(pos + 1)] == 33 and buf[U(pos + 2)] == 45 and buf[U(pos + 3)] == 45:
        p = pos + 4
        while p + 2 < n and not (buf[U(p)] == 45 and buf[U(p + 1)] == 45 and buf[U(p + 2)] == 62):
            if in_event and buf[U(p)] == 60 and _event_boundary(buf, p, n):
                return -3, p, -1, -1
            p += 1
        if in_event and p + 2 >= n:
            # the comment runs to the end of the buffer: a boundary in its last bytes?
            while p < n:
                if buf[U(p)] == 60 and _event_boundary(buf, p, n):
                    return -3, p, -1, -1
                p += 1
        return -1, p + 2, -1, -1
    ns = pos + 2 if pos + 1 < n and buf[U(pos + 1)] == 47 else pos + 1
    ne = ns
    while ne < n and not _CC[buf[U(ne)]] & C_NAME_END:
        ne += 1
    q = 0
    gt = ne
    wid_s = -1
    wid_e = -1
    while gt < n:
        c = buf[U(gt)]
        if c == 60:  # '<' inside a tag
            return -2, gt, -1, -1
        if q != 0:
            if c == q:
                q = 0
                if wid_s >= 0 and wid_e < 0:
                    wid_e = gt
        elif c == 34 or c == 39:
            q = c
            # an attribute value starts; is it id=?
            b = gt - 1
            while b > ne and _CC[buf[U(b)]] & C_HSPACE:
                b -= 1
            if buf[U(b)] == 61:  # '='
                b -= 1
                while b > ne and _CC[buf[U(b)]] & C_HSPACE:
                    b -= 1
                if (
                    wid_s < 0  # the first id= only
                    and b - 2 >= ne
                    and buf[U(b)] == 100
                    and buf[U(b - 1)] == 105
                    and _CC[buf[U(b - 2)]] & (C_HSPACE | C_LF)
                ):
                    wid_s = gt + 1
        elif c == 62:
            break
        gt += 1
    return ne, gt, wid_s, wid_e


def _find_weight(buf: np.ndarray, wid_s: int, wid_e: int, wid_bytes: np.ndarray,
                 wid_off: np.ndarray, wnext: int, nw: int) -> int:
    """Column of the declared weight id ``buf[wid_s:wid_e]`` (column ``wnext`` is tried
    first, then all in order), or -1."""
    if wid_s < 0 or wid_e < wid_s:
        return -1
    L = wid_e - wid_s
    for attempt in range(nw + 1):
        j = wnext if attempt == 0 else attempt - 1
        if j >= nw:
            continue
        o0 = wid_off[U(j)]
        if wid_off[U(j + 1)] - o0 != L:
            continue
        same = True
        for t in range(L):
            if wid_bytes[U(o0 + t)] != buf[U(wid_s + t)]:
                same = False
                break
        if same:
            return j
    return -1


def _skip_element(buf: np.ndarray, pos: int, n: int, ns: int, nlen: int) -> int:
    """Position after the closing tag ``</name>`` of the element whose name is
    ``buf[ns:ns + nlen]``, searched from ``pos``; -1 if the buffer ends first, -2 if an
    event boundary (:func:`_event_boundary`) comes first: the element does not close
    inside its event."""
    while pos < n:
        if buf[U(pos)] == 60:
            if pos + 3 < n and buf[U(pos + 1)] == 33 and buf[U(pos + 2)] == 45 and (
                buf[U(pos + 3)] == 45
            ):
                # a comment inside the element: skipped whole; one that holds an event
                # boundary does not close inside the event
                ne, gt, _s, _e = _tag_scan(buf, pos, n, True)
                if ne == -3:
                    return -2
                if gt >= n:
                    return -1
                pos = gt + 1
                continue
            if pos + nlen + 2 < n and buf[U(pos + 1)] == 47:
                same = True
                for t in range(nlen):
                    if buf[U(pos + 2 + t)] != buf[U(ns + t)]:
                        same = False
                        break
                if same:
                    c = buf[U(pos + 2 + nlen)]
                    if c == 62 or _CC[c] & C_SPACE:
                        while pos < n and buf[U(pos)] != 62:
                            pos += 1
                        return pos + 1
            if _event_boundary(buf, pos, n):
                return -2
        pos += 1
    return -1


def _end_tag(buf: np.ndarray, pos: int, n: int, close: np.ndarray) -> int:
    """After a ``<wgt>`` value or a ``<weights>`` list: the position after its closing tag
    ``close`` (``b"</wgt"`` or ``b"</weights"`` as bytes) that must start at ``buf[pos]``;
    -1 if the buffer ends first, -2 if something else follows the value."""
    L = close.shape[0]
    for t in range(L):
        if pos + t >= n:
            return -1
        if buf[U(pos + t)] != close[U(t)]:
            return -2
    if pos + L >= n:
        return -1
    if not _CC[buf[U(pos + L)]] & C_NAME_END:
        return -2
    ne, gt, _s, _e = _tag_scan(buf, pos, n, True)
    if ne == -2:
        return -2
    if gt >= n:
        return -1
    return gt + 1


def _number_ok(buf: np.ndarray, s: int, e: int) -> bool:
    """Whether ``buf[s:e]`` is a number token :func:`parse_slow_token` accepts (one
    linear pass): ``[+-]`` digits with at most one ``.`` (at least one digit), then an
    optional exponent (``e E d D`` or, Fortran style, a bare sign, then digits); or
    ``nan``, ``inf``, ``infinity`` in any case."""
    p = s
    if p < e and (buf[U(p)] == 43 or buf[U(p)] == 45):
        p += 1
    c0 = buf[U(p)] | 32 if p < e else 0
    if c0 == 110 or c0 == 105:  # nan / inf / infinity
        L = e - p
        if L == 3:
            a, b, c = c0, buf[U(p + 1)] | 32, buf[U(p + 2)] | 32
            return (a == 110 and b == 97 and c == 110) or (a == 105 and b == 110 and c == 102)
        if L == 8:
            for t in range(8):  # noqa: SIM110 - a loop numba compiles (no generator)
                if (buf[U(p + t)] | 32) != _INFINITY[U(t)]:
                    return False
            return True
        return False
    digits = 0
    while p < e and U(buf[U(p)]) - U(48) <= U(9):
        p += 1
        digits += 1
    if p < e and buf[U(p)] == 46:
        p += 1
        while p < e and U(buf[U(p)]) - U(48) <= U(9):
            p += 1
            digits += 1
    if digits == 0:
        return False
    if p == e:
        return True
    c = buf[U(p)]
    if _CC[c] & C_EXP:
        p += 1
        if p < e and (buf[U(p)] == 43 or buf[U(p)] == 45):
            p += 1
    elif c == 43 or c == 45:
        p += 1
    else:
        return False
    x0 = p
    while p < e and U(buf[U(p)]) - U(48) <= U(9):
        p += 1
    return p > x0 and p == e


def scan_kernel_source(  # one state machine on purpose (see module docstring)
    buf: np.ndarray,  # uint8[:]        the text
    wid_bytes: np.ndarray,  # uint8[:]  declared weight ids, concatenated
    wid_off: np.ndarray,  # int64[:]    offsets into wid_bytes, len nw + 1
    ev_pid: np.ndarray,  # int32[:]     process id
    ev_f: np.ndarray,  # float64[4, :]  weight, scale, alpha_qed, alpha_qcd
    offsets: np.ndarray,  # int64[:]    particle offsets, len >= event capacity + 1
    group: np.ndarray,  # int64[:]      first event (column index) of each event's group
    p_i: np.ndarray,  # int32[6, :]
    p_f: np.ndarray,  # float64[7, :]
    wts: np.ndarray,  # float64[:, nw]
    slow: np.ndarray,  # int64[:, 4]    (target, index, token start, token end)
    st: np.ndarray,  # int64[16]        state in/out (see ST_*)
) -> int:  # the committed events (as st[ST_EV])
    # Every index is cast to unsigned (U) where it is used: numba then emits no
    # negative-index wrap-around (all indices here are >= 0 by construction).
    n = buf.shape[0]
    nw = wts.shape[1]
    ev_cap = ev_pid.shape[0]
    p_cap = p_i.shape[1]
    s_cap = slow.shape[0]
    # flat views of the C-contiguous columns: one index computation per store
    pif = p_i.reshape(-1)
    pff = p_f.reshape(-1)
    evff = ev_f.reshape(-1)
    wtf = wts.reshape(-1)
    P10 = _P10
    nan = np.nan

    ev: int = st[ST_EV]
    npart = st[ST_NP]
    nslow = st[ST_NSLOW]
    pos = st[ST_POS]
    stop_at = st[ST_STOP]
    st[ST_SAWEND] = 0
    st[ST_STOPPED] = 0
    st[ST_A] = 0
    st[ST_B] = 0
    # commit point: counts and resume position
    c_ev = ev
    c_np = npart
    c_slow = nslow
    c_pos = pos
    status = ST_OK
    in_group = False
    g_first = 0
    # seen[j] == ev: weight column j was given in event ev (a weight at most once per event)
    seen = np.full(nw, -1, np.int64)

    # state: 0 between events, 1 event line, 2 particle line, 3 number run,
    #        4 optional information, 5 inside <rwgt>, 6 a <wgt> value follows,
    #        7 a <weights> list follows
    state = 0
    nup = 0
    ip = 0
    row = 0
    line0 = 0
    # number run: kind 1 event line, 2 particle line, 3 <weights> list, 4 one <wgt>;
    # the k-th float goes to flat index dbase + k * dstride of the kind's column
    kind = 0
    dbase = 0
    dstride = 0
    wcol = 0
    wnext = 0
    while True:
        if state == 1 or state == 2:
            # --------------------------- start of the event line or of a particle line
            while pos < n and _CC[buf[U(pos)]] & C_SPACE:
                pos += 1
            if pos >= n:
                status = ST_INCOMPLETE
                break
            line0 = pos
            kind = state
            if state == 1:
                dbase = ev
                dstride = ev_cap
            else:
                c = buf[U(pos)]
                if c == 60 or c == 35:  # '<' or '#': fewer particle lines than NUP
                    status = ERR_FEW_PARTICLES
                    st[ST_ERRPOS] = pos
                    st[ST_A] = nup
                    st[ST_B] = ip
                    break
                row = npart + ip
                dbase = row
                dstride = p_cap
            state = 3
        elif state >= 6:
            # the value of a <wgt> tag for weight column wcol (6), or a <weights> list (7)
            if state == 6:
                if seen[U(wcol)] == ev:
                    status = ERR_DUP_WEIGHT
                    st[ST_ERRPOS] = pos
                    st[ST_A] = wcol
                    break
                seen[U(wcol)] = ev
                kind = 4
                wnext = wcol + 1
                dbase = ev * nw + wcol
                dstride = 0
            else:
                kind = 3
                dbase = ev * nw
                dstride = 1
            line0 = pos
            state = 3

        if state == 3:
            # ------------------------------------------------------------ number run
            # fields [0, ni) are integers (at most ilim digits), fn fields in all (-1: any)
            fn = 6 if kind == 1 else 13 if kind == 2 else -1
            ni = 2 if kind == 1 else 6 if kind == 2 else 0
            ilim = 18  # digits (leading zeros too); the value must fit 32 bits
            blank = C_SPACE if kind >= 3 else C_BLANK  # <weights>/<wgt>: newlines too
            iend = C_SPACE if kind == 1 else C_BLANK  # what may follow an integer
            full = False
            bad = False
            badnum = -1  # the first stored token that is no number
            slow0 = nslow
            fi = 0
            while True:
                while pos < n and _CC[buf[U(pos)]] & blank:
                    pos += 1
                if pos >= n:
                    break
                c = buf[U(pos)]
                if _CC[c] & C_LINE_END or fi == fn:  # '\n' '<' '#', or too many
                    break
                # ---- one number token: sign, then digits with at most one '.'
                s = pos
                neg = c == 45
                if neg or c == 43:
                    pos += 1
                mant = 0
                s0 = pos
                dot = -1
                while pos < n:
                    d = U(buf[U(pos)]) - U(48)
                    if d <= U(9):
                        mant = mant * 10 + np.int64(d)
                    elif d == _DOT48 and dot < 0:
                        dot = pos
                    else:
                        break
                    pos += 1
                nd = pos - s0  # digits, leading zeros included
                if fi < ni:
                    # -------- an integer field (event line: NUP IDPRUP; particle: 6)
                    if dot >= 0:
                        nd = 0
                        pos = dot  # (where a pure integer scan stops)
                    elif pos < n:
                        c = buf[U(pos)]
                        if not _CC[c] & iend:
                            nd = 0
                    if neg:
                        mant = -mant
                    if nd == 0 or nd > ilim or not _I32_MIN <= mant <= _I32_MAX:
                        bad = True
                        break
                    if kind == 2:
                        if fi == 2 or fi == 3:
                            mant -= 1  # mothers: 0-based, -1 = none
                        pif[U(fi * p_cap + row)] = mant
                    elif fi == 0:
                        nup = mant
                    else:
                        ev_pid[U(ev)] = mant
                        if pos >= n:
                            break  # the buffer ends here: incomplete before anything else
                        if nup < 0:
                            status = ERR_NEGATIVE_NUP
                            break
                        if npart + nup > p_cap:
                            if nup > (n - pos) // MIN_PARTICLE_LINE + 1:
                                # the lines cannot fit in what follows: never grow the
                                # columns for an untrusted count
                                status = ST_INCOMPLETE
                                q = pos
                                while q + 7 < n:
                                    c = buf[U(q)]
                                    if c == 60 and buf[U(q + 1)] == 47 and _event_boundary(
                                        buf, q, n
                                    ):
                                        status = ERR_NUP_TOO_BIG
                                        break
                                    q += 1
                                break
                            status = ST_FULL
                            break
                    fi += 1
                    continue
                # -------- a float field: exponent
                e10 = 0
                if dot >= 0:
                    nd -= 1
                    e10 = dot + 1 - pos  # minus the digits after the '.'
                if pos < n:
                    c = buf[U(pos)]
                    if _CC[c] & C_EXP:  # e E d D
                        pos += 1
                        eneg = False
                        if pos < n:
                            c = buf[U(pos)]
                            if c == 45:
                                eneg = True
                                pos += 1
                            elif c == 43:
                                pos += 1
                        ex = 0
                        x0 = pos
                        while pos < n:
                            d = U(buf[U(pos)]) - U(48)
                            if d > U(9):
                                break
                            ex = ex * 10 + np.int64(d)
                            pos += 1
                        if pos == x0 or pos - x0 > 5:
                            nd = 0  # no exponent digits, or a huge exponent: slow path
                        e10 += -ex if eneg else ex
                    if pos < n:
                        c = buf[U(pos)]
                        if not _CC[c] & C_TOKEN_END:
                            nd = 0
                k = fi - ni
                fi += 1
                exact = False
                v = nan
                if nd > 0 and nd <= 18:
                    if mant <= _TWO53 and e10 >= -22 and e10 <= 22:
                        v = np.float64(mant)
                        # one correctly rounded operation with an exact power of ten
                        v = v * P10[U(e10)] if e10 >= 0 else v / P10[U(-e10)]
                        exact = True
                    else:  # 16-18 digits (%.16e) or a large exponent
                        v, exact = decimal_to_float(U(mant), e10)
                if exact:
                    if neg:
                        v = -v
                    slow_token = False
                else:
                    # slow path: find the token's end, convert later in Python
                    while pos < n and not _CC[buf[U(pos)]] & C_TOKEN_END:
                        pos += 1
                    v = nan
                    slow_token = True
                if kind == 3 and k >= nw:
                    continue  # surplus <weights> values: counted, not stored
                at = dbase + k * dstride
                if kind == 2:
                    pff[U(at)] = v
                elif kind == 1:
                    evff[U(at)] = v
                else:
                    wtf[U(at)] = v
                if slow_token:
                    if nslow >= s_cap:
                        full = True
                        break
                    # (target column, index) for fix_slow_values
                    slow[U(nslow), 0] = T_PF + k if kind == 2 else T_EVF + k if kind == 1 else T_WTS
                    slow[U(nslow), 1] = at if kind >= 3 else dbase
                    slow[U(nslow), 2] = s
                    slow[U(nslow), 3] = pos
                    nslow += 1
            # ---- end of the run
            if nslow > slow0:
                # the run's slow tokens must be numbers (checked here, not in the loop:
                # no call in the hot loop)
                for j in range(slow0, nslow):
                    if not _number_ok(buf, slow[U(j), 2], slow[U(j), 3]):
                        badnum = slow[U(j), 2]
                        break
            if (status in (ERR_NEGATIVE_NUP, ERR_NUP_TOO_BIG)) and _line_runs_out(
                buf, pos, n
            ):
                status = ST_INCOMPLETE  # a damaged line that is cut short: cut short
                break
            if status == ERR_NEGATIVE_NUP:
                st[ST_ERRPOS] = line0
                break
            if status == ERR_NUP_TOO_BIG:
                st[ST_ERRPOS] = line0
                st[ST_A] = nup
                break
            if status == ST_INCOMPLETE:
                break
            if status == ST_FULL:
                st[ST_A] = FULL_PARTICLES
                break
            if full:
                status = ST_FULL
                st[ST_A] = FULL_SLOW
                break
            if pos >= n:
                status = ST_INCOMPLETE
                break
            if kind <= 2:
                c = buf[U(pos)]
                if bad or fi != fn or not _CC[c] & C_LINE_END or badnum >= 0:
                    if _line_runs_out(buf, pos, n):
                        status = ST_INCOMPLETE  # a damaged line that is cut short
                        break
                    status = ERR_LINE
                    st[ST_ERRPOS] = line0
                    st[ST_B] = 6 if kind == 1 else 13
                    break
                if kind == 1:
                    ip = 0
                else:
                    ip += 1
                state = 2 if ip < nup else 4
                continue
            if kind == 3:
                if badnum >= 0:
                    status = ERR_NUMBER
                    st[ST_ERRPOS] = badnum
                    break
                if fi != nw:
                    status = ERR_WEIGHT_COUNT
                    st[ST_ERRPOS] = pos
                    st[ST_A] = fi
                    st[ST_B] = nw
                    break
                for j in range(nw):
                    if seen[U(j)] == ev:
                        status = ERR_DUP_WEIGHT
                        st[ST_ERRPOS] = line0
                        st[ST_A] = j
                        break
                    seen[U(j)] = ev
                if status == ERR_DUP_WEIGHT:
                    break
            elif fi != 1 or buf[U(pos)] != 60:
                status = ERR_WGT_VALUE
                st[ST_ERRPOS] = line0
                st[ST_A] = fi
                break
            elif badnum >= 0:
                status = ERR_NUMBER
                st[ST_ERRPOS] = badnum
                break
            # the closing tag '</weights>' or '</wgt>' must follow
            if (
                kind == 4
                and pos + 5 < n
                and buf[U(pos + 1)] == 47
                and buf[U(pos + 2)] == 119
                and buf[U(pos + 3)] == 103
                and buf[U(pos + 4)] == 116
                and buf[U(pos + 5)] == 62
            ):
                pos += 6  # '</wgt>'
            else:
                e = _end_tag(buf, pos, n, _CLOSE_WGT if kind == 4 else _CLOSE_WEIGHTS)
                if e == -1:
                    status = ST_INCOMPLETE
                    break
                if e < 0:
                    status = ERR_VALUE_CLOSE
                    st[ST_ERRPOS] = pos
                    st[ST_A] = kind
                    break
                pos = e
            state = 4 if kind == 3 else 5
            continue

        # ------------------------------------------ states 0, 4 and 5: markup
        if state == 0:
            # between events: everything but tags is ignored
            while pos < n and buf[U(pos)] != 60:  # '<'
                pos += 1
            if pos >= n:
                if in_group:
                    status = ST_INCOMPLETE
                else:
                    status = ST_OK
                    c_pos = n
                break
        else:
            while pos < n and _CC[buf[U(pos)]] & C_SPACE:
                pos += 1
            if pos >= n:
                status = ST_INCOMPLETE
                break
            c = buf[U(pos)]
            if c == 60 and state == 5 and wnext < nw and pos + 12 < n:
                # fast path for <wgt id='ID'> with the declared id expected next
                q = buf[U(pos + 8)]
                if (
                    buf[U(pos + 1)] == 119  # w
                    and buf[U(pos + 2)] == 103  # g
                    and buf[U(pos + 3)] == 116  # t
                    and buf[U(pos + 4)] == 32
                    and buf[U(pos + 5)] == 105  # i
                    and buf[U(pos + 6)] == 100  # d
                    and buf[U(pos + 7)] == 61  # =
                    and (q == 34 or q == 39)
                ):
                    o0 = wid_off[U(wnext)]
                    L = wid_off[U(wnext + 1)] - o0
                    e = pos + 9 + L
                    if e + 1 < n and buf[U(e)] == q and buf[U(e + 1)] == 62:
                        same = True
                        for t in range(L):
                            b = wid_bytes[U(o0 + t)]
                            if b != buf[U(pos + 9 + t)] or b == q:
                                same = False
                                break
                        if same:
                            wcol = wnext
                            pos = e + 2
                            state = 6
                            continue
            if c == 35 and state == 4:  # '#' comment line: text up to its newline, but a
                # comment or an event boundary tag in it is markup (as everywhere in XML)
                while pos < n and buf[U(pos)] != 10:
                    if buf[U(pos)] == 60 and (
                        (pos + 3 < n and buf[U(pos + 1)] == 33 and buf[U(pos + 2)] == 45
                         and buf[U(pos + 3)] == 45)
                        or _event_boundary(buf, pos, n)
                    ):
                        break
                    pos += 1
                continue
            if c != 60:
                if state == 4 and _CC[c] & C_NUM_START:
                    status = ERR_MANY_PARTICLES
                    st[ST_ERRPOS] = pos
                    st[ST_A] = nup
                    break
                # free text: skip the line (state 4) or up to the next tag (state 5)
                while pos < n and buf[U(pos)] != 10 and buf[U(pos)] != 60:
                    pos += 1
                continue
        # ---- a tag starts at pos
        t0 = pos
        ne, gt, wid_s, wid_e = _tag_scan(buf, pos, n, state != 0)
        if ne < -1:
            # a '<' inside the tag, or a comment that does not close inside its event
            status = ERR_BAD_TAG if ne == -2 else ERR_COMMENT
            st[ST_ERRPOS] = t0
            st[ST_A] = gt
            break
        if ne < 0 or ne >= n:
            # a comment, or a tag name that runs to the end of the buffer
            if gt >= n:
                status = ST_INCOMPLETE
                if state == 0 and not in_group:
                    c_pos = t0
                break
            pos = gt + 1
            continue
        closing = buf[U(pos + 1)] == 47
        ns = pos + 2 if closing else pos + 1
        nlen = ne - ns
        key = 0  # the first (up to) 8 bytes of the name
        for t in range(ns, ns + min(nlen, 8)):
            key = (key << 8) | np.int64(buf[U(t)])
        is_event = nlen == 5 and key == _K_EVENT
        is_group = (
            nlen == 10
            and key == _K_EVENTGRO
            and buf[U(ns + 8)] == 117  # u
            and buf[U(ns + 9)] == 112  # p
        )
        if state == 0:
            if closing:
                if is_group and in_group:
                    in_group = False
                if nlen > 0 and buf[U(ns)] == 76:  # '</L': </LesHouchesEvents>
                    st[ST_SAWEND] = 1
                if is_event:  # </event> with no <event> open
                    status = ERR_STRAY_CLOSE
                    st[ST_ERRPOS] = t0
                    break
            elif nlen == 16 and key == _K_LESHOUCH and _event_boundary(buf, t0, n):
                status = ERR_SECOND_HEADER
                st[ST_ERRPOS] = t0
                break
            elif is_group or (is_event and not in_group):
                if pos >= stop_at:
                    st[ST_STOPPED] = 1
                    c_pos = pos
                    status = ST_OK
                    break
                c_pos = pos
                if is_group:
                    in_group = True
                    g_first = ev
        if gt >= n:
            status = ST_INCOMPLETE
            if state == 0 and not in_group:
                c_pos = t0
            break
        selfclose = buf[U(gt - 1)] == 47
        pos = gt + 1
        if state == 0:
            if closing:
                if is_group and not in_group:
                    # a whole group is done: commit
                    c_ev = ev
                    c_np = npart
                    c_slow = nslow
                    c_pos = pos
                continue
            if not is_event or selfclose:  # other tag, or <event/>
                continue
            # ------------------------------------------------ an <event> starts
            if ev >= ev_cap:
                status = ST_FULL
                st[ST_A] = FULL_EVENTS
                break
            for j in range(ev * nw, ev * nw + nw):
                wtf[U(j)] = nan
            state = 1
            continue
        if not (closing and is_event) and _event_boundary(buf, t0, n):
            # <event>, <eventgroup>, </eventgroup> or the root tag inside an event
            status = ERR_EVENT_OPEN
            st[ST_ERRPOS] = t0
            st[ST_A] = ns
            st[ST_B] = ne
            break
        if closing:
            if is_event and state == 5:
                status = ERR_RWGT_OPEN
                st[ST_ERRPOS] = t0
                break
            if is_event:
                # </event>
                npart += nup
                offsets[U(ev + 1)] = npart
                group[U(ev)] = g_first if in_group else ev
                ev += 1
                if not in_group:
                    c_ev = ev
                    c_np = npart
                    c_slow = nslow
                    c_pos = pos
                state = 0
            elif state == 5 and nlen == 4 and key == _K_RWGT:  # </rwgt>
                state = 4
            continue
        if selfclose:
            continue
        if state == 4 and nlen == 4 and key == _K_RWGT:
            state = 5
            wnext = 0
            continue
        if state == 4 and nlen == 7 and key == _K_WEIGHTS:
            state = 7
            continue
        if state == 5 and nlen == 3 and key == _K_WGT:
            # <wgt id=...>: the declared column of this id, expected next one first
            col = _find_weight(buf, wid_s, wid_e, wid_bytes, wid_off, wnext, nw)
            if col < 0:
                status = ERR_UNKNOWN_WEIGHT
                st[ST_ERRPOS] = t0
                st[ST_A] = wid_s
                st[ST_B] = wid_e
                break
            wcol = col
            state = 6
            continue
        # any other element: skip to the end of its closing tag '</name'
        e = _skip_element(buf, pos, n, ns, nlen)
        if e == -2:
            status = ERR_UNCLOSED
            st[ST_ERRPOS] = t0
            st[ST_A] = ns
            st[ST_B] = ne
            break
        if e < 0:
            status = ST_INCOMPLETE
            break
        pos = e

    st[ST_STATUS] = status
    if status >= 10:
        # the counts of the last commit point; ST_POS: where the damaged part starts
        st[ST_EV] = c_ev
        st[ST_NP] = c_np
        st[ST_NSLOW] = c_slow
        st[ST_ENSLOW] = nslow
        st[ST_POS] = c_pos
    else:
        # everything after the last commit point is dropped (and re-read on resume)
        st[ST_EV] = c_ev
        st[ST_NP] = c_np
        st[ST_NSLOW] = c_slow
        st[ST_POS] = c_pos
    return c_ev


# ------------------------------------------------------------------ compilation

_COMPILED: Callable[..., Any] | None = None
_HELPERS = (
    "_event_boundary", "_line_runs_out", "_tag_scan", "_find_weight", "_skip_element",
    "_end_tag", "_number_ok",
)
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
    """The numba-compiled :func:`scan_kernel_source` (cached on disk), or None.

    numba is imported here, on first use, so that ``import evtkin`` stays light. The
    kernel is compiled (or loaded from the cache) right away for the argument types the
    reader passes (writable C-contiguous arrays); other types compile on first call.
    """
    global _COMPILED, _TRIED
    if not _TRIED:
        _TRIED = True
        if numba_available():
            from numba import njit, types

            from evtkin._jit import (
                deferred_extensions,
                lean_compile,
                lean_pipeline,
                tie_cache_to_callees,
            )
            from evtkin.io import exact_float

            jit = njit(nogil=True, cache=True, error_model="numpy", pipeline_class=lean_pipeline())
            g = globals()
            g["decimal_to_float"] = exact_float.jitted()
            for name in _HELPERS:  # the kernel calls the compiled helpers
                g[name] = jit(g[name])
            kernel = jit(scan_kernel_source)
            tie_cache_to_callees(kernel)  # exact_float.py is compiled into it

            def c(dtype: Any, ndim: int) -> Any:
                return types.Array(dtype, ndim, "C")

            u8, i32, i64, f64 = types.uint8, types.int32, types.int64, types.float64
            signature = (
                c(u8, 1), c(u8, 1), c(i64, 1), c(i32, 1), c(f64, 2), c(i64, 1),
                c(i64, 1), c(i32, 2), c(f64, 2), c(f64, 2), c(i64, 2), c(i64, 1),
            )  # fmt: skip
            # numba's extension entry points (~1.3 s, unused here) load on the next compile
            with deferred_extensions(), lean_compile():
                kernel.compile(signature)
            _COMPILED = kernel
    return _COMPILED


# ------------------------------------------------------------------ slow tokens

# Unambiguous patterns (each character can match one way only): linear time on any token,
# however long (an ambiguous "\d+\.?\d*" backtracks quadratically on a long bad token).
_FLOAT_RE = re.compile(
    r"^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eEdD][+-]?\d+|[+-]\d+)?$|^[+-]?(?:nan|inf|infinity)$",
    re.I,
)
_FORTRAN_NOLETTER = re.compile(r"^([+-]?(?:\d+(?:\.\d*)?|\.\d+))([+-]\d+)$")


def parse_slow_token(token: bytes) -> float | None:
    """Python ``float()`` of one LHE number token (``D`` exponents, ``1.0+120``), or None."""
    text = token.decode("ascii", "replace")
    if not _FLOAT_RE.match(text):
        return None
    t = text.replace("D", "E").replace("d", "e")
    m = _FORTRAN_NOLETTER.match(t)
    if m:  # Fortran drops the exponent letter for three-digit exponents
        t = m.group(1) + "E" + m.group(2)
    return float(t)


def fix_slow_values(
    buf: np.ndarray,
    slow: np.ndarray,
    ev_f: np.ndarray,
    p_f: np.ndarray,
    wts_flat: np.ndarray,
) -> int:
    """Convert the slow-path tokens with Python ``float()`` into their columns.

    Returns -1 on success, else the byte offset of the first token that is not a number.
    """
    mv = memoryview(buf)  # type: ignore[arg-type]
    for target, index, s, e in slow.tolist():
        tok = bytes(mv[s:e])
        value: float | None
        if b"_" in tok or b"d" in tok or b"D" in tok:
            value = parse_slow_token(tok)
        else:
            try:
                value = float(tok)  # same result as parse_slow_token, faster
            except ValueError:
                value = parse_slow_token(tok)
        if value is None:
            return int(s)
        if target < T_PF:
            ev_f[target, index] = value
        elif target < T_WTS:
            p_f[target - T_PF, index] = value
        else:
            wts_flat[index] = value
    return -1


# ------------------------------------------------------------------ error analysis

_PLAIN_INT = re.compile(rb"^[+-]?\d{1,18}$")
_LINE_TOKEN = re.compile(rb"[^ \t\r\n<]+")


def diagnose_line(buf: np.ndarray, pos: int, expected: int) -> tuple[int, int, int, int]:
    """The precise error of a malformed event line (``expected=6``) or particle line (13).

    ``pos`` is the offset of the line's first token. Returns ``(status, errpos, a, b)``
    in the kernel's error protocol: a wrong field count first, then a non-integer (or
    out-of-range) integer field, then a negative NUP, then a token that is no number.
    """
    n = buf.shape[0]
    data = bytes(buf[pos : min(n, pos + (1 << 20))])
    cut = len(data)
    for stop in (b"\n", b"<"):
        i = data.find(stop)
        if 0 <= i < cut:
            cut = i
    data = data[:cut]
    spans = []
    for m in _LINE_TOKEN.finditer(data):
        if data[m.start()] == 35:  # a token starting with '#' ends the line (as in the scan)
            break
        spans.append((pos + m.start(), pos + m.end()))
    toks = [bytes(buf[s:e]) for s, e in spans]
    if len(toks) != expected:
        return ERR_FIELD_COUNT, (spans[0][0] if spans else pos), len(toks), expected
    n_int = 2 if expected == 6 else 6
    for (s, _e), tok in zip(spans[:n_int], toks[:n_int], strict=True):
        if not _PLAIN_INT.match(tok) or not _I32_MIN <= int(tok) <= _I32_MAX:
            return ERR_INTEGER, s, 0, 0
    if expected == 6 and int(toks[0]) < 0:
        return ERR_NEGATIVE_NUP, spans[0][0], 0, 0
    for (s, _e), tok in zip(spans[n_int:], toks[n_int:], strict=True):
        if parse_slow_token(tok) is None:
            return ERR_NUMBER, s, 0, 0
    return ERR_NUMBER, pos, 0, 0  # pragma: no cover - the kernel found a problem
