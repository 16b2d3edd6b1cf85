"""Compiled byte scanner for the ``<event>`` part of LHE files (numba, ``nogil``, cached).

:func:`scan_kernel` is one single-pass state machine over a ``uint8`` buffer that holds
whole events (the reader cuts its buffers after an ``</event>``). It writes flat numeric
columns into preallocated output arrays and stops at an event boundary when they are
full, so the caller can flush and call again. Every event is committed only at its
``</event>``; a buffer that ends inside an event returns that event's start offset.

Floats are bit-identical to Python's ``float()`` on the same text: a decimal mantissa
of at most 18 digits that is <= 2**53, with a decimal exponent within +-22, is
converted with a single correctly rounded multiplication or division by an exactly
representable power of ten. Any other token (more digits, larger exponents, ``nan``,
a Fortran exponent without a letter such as ``1.0+120``) is recorded in a "slow list"
and converted afterwards in Python by :func:`fix_slow_values`. Fortran ``D`` exponents,
``+`` signs, tabs and CRLF line ends are accepted.

The kernel is compiled with ``error_model="numpy"`` (measured 2.2x faster than the
default "python" model, which adds a zero-divisor check and error path to every
division); it never divides by zero (only by exact powers of ten), so results are the
same. ``fastmath`` is never used: it would break the exact rounding.

Integer fields (NUP, IDPRUP, IDUP, ISTUP, MOTHUP, ICOLUP) must be plain integers.
Mother indices are stored 0-based (the file's 0 = none becomes -1).
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable
from typing import Any

import numpy as np

njit: Callable[..., Any] | None
if os.environ.get("EVTKIN_NO_NUMBA", "") in ("", "0"):
    try:
        from numba import njit
    except ImportError:  # pragma: no cover - numba is a dependency
        njit = None
else:
    njit = None

#: True when the compiled kernel is available (numba importable, EVTKIN_NO_NUMBA unset)
HAVE_NUMBA = njit is not None

__all__ = [
    "ERR_MESSAGES",
    "HAVE_NUMBA",
    "N_EVF",
    "N_PF",
    "N_PI",
    "ST_FULL",
    "ST_INCOMPLETE",
    "ST_OK",
    "fix_slow_values",
    "parse_slow_token",
    "scan_kernel",
]

# event float rows: weight, scale, alpha_qed, alpha_qcd
N_EVF = 4
# particle int rows: pdgid, status, mother1, mother2, color1, color2
N_PI = 6
# particle float rows: px, py, pz, energy, mass, lifetime, spin
N_PF = 7

# statuses (out[3])
ST_OK = 0  # buffer consumed
ST_FULL = 1  # an output array is full; resume at out[5]
ST_INCOMPLETE = 2  # buffer ends inside an event starting at out[5]
ERR_NUMBER = 10  # malformed number (out[4] = token position)
ERR_FEW_PARTICLES = 11  # NUP larger than the particle lines (out[8] = NUP, out[9] = found)
ERR_MANY_PARTICLES = 12  # a numeric line after NUP particle lines (out[8] = NUP)
ERR_UNKNOWN_WEIGHT = 13  # <wgt id> not declared (out[8], out[9] = id span)
ERR_WEIGHT_COUNT = 14  # <weights> count != declared (out[8] = found, out[9] = declared)
ERR_INTEGER = 15  # an integer field holds something else
ERR_FIELD_COUNT = 16  # wrong number of fields (out[8] = found, out[9] = expected)
ERR_WGT_VALUE = 17  # <wgt> must hold exactly one number (out[8] = found)
ERR_NEGATIVE_NUP = 18

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
}

_P10 = np.array([10.0**k for k in range(23)], dtype=np.float64)  # all exact in binary64
_TWO53 = np.int64(1 << 53)

_MAXTOK = 16  # at most this many tokens kept per numeric line (13 needed)


def _scan_kernel_py(  # one state machine on purpose (see module docstring)
    buf,  # uint8[:]  the text
    start,  # int      where to begin (between events)
    wid_bytes,  # uint8[:] declared weight ids, concatenated
    wid_off,  # int64[:] offsets into wid_bytes, len nw + 1
    nw,  # int        number of weight columns
    ev_pid,  # int32[:]      process id
    ev_f,  # float64[4, :]   weight, scale, alpha_qed, alpha_qcd
    ev_pos,  # int64[:]      byte offset of each event's '<event'
    offsets,  # int64[:]     particle offsets, len >= cap + 1
    p_i,  # int32[6, :]
    p_f,  # float64[7, :]
    wts,  # float64[:, nw]
    slow,  # int64[:, 4]   (target, index, token start, token end)
    tok_f,  # float64[16]  scratch: token values of one line
    tok_i,  # int64[5, 16] scratch: int value, is-int, is-slow, start, end
    out,  # int64[16]
):
    n = buf.shape[0]
    ev_cap = ev_pid.shape[0]
    p_cap = p_i.shape[1]
    s_cap = slow.shape[0]
    P10 = _P10
    # token scratch space comes from the caller: arrays allocated in here would put
    # reference counting into the hot loop (PERFORMANCE-NOTES)

    ev = 0
    npart = 0
    nslow = 0
    offsets[0] = 0
    pos = start
    out[3] = ST_OK
    out[5] = start
    out[6] = 0
    # state: 0 between events, 1 event line, 2 particle line, 3 optional info,
    #        4 inside <rwgt>, 5 <weights> values, 6 <wgt> value
    state = 0
    ev_start = 0
    nup = 0
    ip = 0
    ev_slow0 = 0
    wcol = 0
    wnext = 0
    while True:
        if state == 0:
            # ---------------------------------------------------- between events
            while pos < n and buf[pos] != 60:  # '<'
                pos += 1
            if pos >= n:
                out[3] = ST_OK
                out[5] = n
                break
            if pos + 6 >= n:
                out[3] = ST_INCOMPLETE
                out[5] = pos
                break
            if (
                buf[pos + 1] == 101  # e
                and buf[pos + 2] == 118  # v
                and buf[pos + 3] == 101  # e
                and buf[pos + 4] == 110  # n
                and buf[pos + 5] == 116  # t
                and (
                    buf[pos + 6] == 62
                    or buf[pos + 6] == 32
                    or buf[pos + 6] == 9
                    or buf[pos + 6] == 10
                    or buf[pos + 6] == 13
                )
            ):
                # room for one more event?
                if ev >= ev_cap or nslow + 4 + nw > s_cap:
                    out[3] = ST_FULL
                    out[5] = pos
                    break
                ev_start = pos
                ev_slow0 = nslow
                # skip the tag, honouring quoted attribute values
                pos += 6
                q = 0
                while pos < n:
                    c = buf[pos]
                    if q != 0:
                        if c == q:
                            q = 0
                    elif c == 34 or c == 39:
                        q = c
                    elif c == 62:
                        break
                    pos += 1
                if pos >= n:
                    out[3] = ST_INCOMPLETE
                    out[5] = ev_start
                    break
                pos += 1
                for j in range(nw):
                    wts[ev, j] = np.nan
                state = 1
                continue
            if pos + 3 < n and buf[pos + 1] == 33 and buf[pos + 2] == 45 and buf[pos + 3] == 45:
                # comment: skip to '-->'
                pos += 4
                while pos + 2 < n and not (
                    buf[pos] == 45 and buf[pos + 1] == 45 and buf[pos + 2] == 62
                ):
                    pos += 1
                pos += 3
                continue
            if buf[pos + 1] == 47 and buf[pos + 2] == 76:  # '</L'
                out[6] = 1  # </LesHouchesEvents>
            tag0 = pos
            while pos < n and buf[pos] != 62:
                pos += 1
            if pos >= n:
                out[3] = ST_INCOMPLETE
                out[5] = tag0
                break
            pos += 1
            continue

        # ------------------------------------------------------------ tokenizer
        # states 1, 2 read one line; 5, 6 read values up to the next '<'
        stop_nl = state == 1 or state == 2
        if state == 3 or state == 4:
            k = 0  # not a numeric state
        else:
            # skip leading blank space (newlines too: the line starts at the first token)
            while pos < n:
                c = buf[pos]
                if c == 32 or c == 9 or c == 13 or c == 10:
                    pos += 1
                else:
                    break
            k = 0
            while True:
                while pos < n:
                    c = buf[pos]
                    if c == 32 or c == 9 or c == 13 or (c == 10 and not stop_nl):
                        pos += 1
                    else:
                        break
                if pos >= n:
                    break
                c = buf[pos]
                if c == 10 or c == 60 or c == 35:  # newline, '<', '#'
                    break
                # ---- one number token
                s = pos
                neg = False
                if c == 45:
                    neg = True
                    pos += 1
                elif c == 43:
                    pos += 1
                mant = 0
                nd = 0
                e10 = 0
                digits = False
                inexact = False
                isint = True
                while pos < n:
                    c = buf[pos]
                    if c < 48 or c > 57:
                        break
                    digits = True
                    if nd < 18:
                        if nd > 0 or c != 48:
                            mant = mant * 10 + (c - 48)
                            nd += 1
                    else:
                        e10 += 1
                        if c != 48:
                            inexact = True
                    pos += 1
                if pos < n and buf[pos] == 46:  # '.'
                    isint = False
                    pos += 1
                    while pos < n:
                        c = buf[pos]
                        if c < 48 or c > 57:
                            break
                        digits = True
                        if nd < 18:
                            if nd > 0 or c != 48:
                                mant = mant * 10 + (c - 48)
                                nd += 1
                            e10 -= 1
                        elif c != 48:
                            inexact = True
                        pos += 1
                bad = not digits
                if pos < n and not bad:
                    c = buf[pos]
                    if c == 101 or c == 69 or c == 100 or c == 68:  # e E d D
                        isint = False
                        pos += 1
                        eneg = False
                        if pos < n and (buf[pos] == 45 or buf[pos] == 43):
                            eneg = buf[pos] == 45
                            pos += 1
                        ex = 0
                        edig = False
                        while pos < n:
                            c = buf[pos]
                            if c < 48 or c > 57:
                                break
                            edig = True
                            if ex < 100000:
                                ex = ex * 10 + (c - 48)
                            pos += 1
                        if not edig:
                            bad = True
                        e10 += -ex if eneg else ex
                # the token must end here
                if pos < n:
                    c = buf[pos]
                    if not (c == 32 or c == 9 or c == 13 or c == 10 or c == 60):
                        bad = True
                if bad:
                    while pos < n:
                        c = buf[pos]
                        if c == 32 or c == 9 or c == 13 or c == 10 or c == 60:
                            break
                        pos += 1
                if k < _MAXTOK:
                    tok_i[3, k] = s
                    tok_i[4, k] = pos
                    tok_i[1, k] = 1 if (isint and not bad) else 0
                    if bad or inexact:
                        tok_i[2, k] = 1
                        tok_f[k] = np.nan
                    elif mant == 0:
                        tok_i[2, k] = 0
                        tok_f[k] = -0.0 if neg else 0.0
                    elif mant <= _TWO53 and -22 <= e10 <= 22:
                        tok_i[2, k] = 0
                        v = np.float64(mant)
                        # one correctly rounded operation with an exact power of ten
                        v = v * P10[e10] if e10 >= 0 else v / P10[-e10]
                        tok_f[k] = -v if neg else v
                    else:
                        tok_i[2, k] = 1
                        tok_f[k] = np.nan
                    if tok_i[1, k]:
                        iv = mant
                        tok_i[0, k] = -iv if neg else iv
                    else:
                        tok_i[0, k] = 0
                k += 1
                if state == 5 and k == _MAXTOK:
                    # <weights> lists can be long: flush the scratch tokens now
                    # (room for nw slow entries was checked at the event line)
                    for t in range(k):
                        if wcol < nw:
                            wts[ev, wcol] = tok_f[t]
                            if tok_i[2, t]:
                                slow[nslow, 0] = 20
                                slow[nslow, 1] = ev * nw + wcol
                                slow[nslow, 2] = tok_i[3, t]
                                slow[nslow, 3] = tok_i[4, t]
                                nslow += 1
                        wcol += 1
                    k = 0
            if pos >= n:
                out[3] = ST_INCOMPLETE
                out[5] = ev_start
                break

        if state == 1:
            # ------------------------------------------ NUP IDPRUP XWGTUP SCALUP AQEDUP AQCDUP
            if k != 6:
                out[3] = ERR_FIELD_COUNT
                out[4] = tok_i[3, 0] if k > 0 else pos
                out[8] = k
                out[9] = 6
                break
            if not tok_i[1, 0] or not tok_i[1, 1]:
                out[3] = ERR_INTEGER
                out[4] = tok_i[3, 0] if not tok_i[1, 0] else tok_i[3, 1]
                break
            nup = tok_i[0, 0]
            if nup < 0:
                out[3] = ERR_NEGATIVE_NUP
                out[4] = tok_i[3, 0]
                break
            if npart + nup > p_cap or nslow + nup * 7 + 4 + nw > s_cap:
                out[3] = ST_FULL
                out[5] = ev_start
                break
            ev_pid[ev] = tok_i[0, 1]
            for f in range(4):
                ev_f[f, ev] = tok_f[2 + f]
                if tok_i[2, 2 + f]:
                    slow[nslow, 0] = f
                    slow[nslow, 1] = ev
                    slow[nslow, 2] = tok_i[3, 2 + f]
                    slow[nslow, 3] = tok_i[4, 2 + f]
                    nslow += 1
            ip = 0
            state = 2 if nup > 0 else 3
            continue

        if state == 2:
            # ------------------------------------------------------------ particle line
            if k == 0:
                out[3] = ERR_FEW_PARTICLES
                out[4] = pos
                out[8] = nup
                out[9] = ip
                break
            if k != 13:
                out[3] = ERR_FIELD_COUNT
                out[4] = tok_i[3, 0]
                out[8] = k
                out[9] = 13
                break
            row = npart + ip
            for f in range(6):
                if not tok_i[1, f] or tok_i[0, f] > 2147483647 or tok_i[0, f] < -2147483648:
                    out[3] = ERR_INTEGER
                    out[4] = tok_i[3, f]
                    break
                v_i = tok_i[0, f]
                if f == 2 or f == 3:
                    v_i -= 1
                p_i[f, row] = v_i
            if out[3] == ERR_INTEGER:
                break
            for f in range(7):
                p_f[f, row] = tok_f[6 + f]
                if tok_i[2, 6 + f]:
                    slow[nslow, 0] = 10 + f
                    slow[nslow, 1] = row
                    slow[nslow, 2] = tok_i[3, 6 + f]
                    slow[nslow, 3] = tok_i[4, 6 + f]
                    nslow += 1
            ip += 1
            if ip == nup:
                state = 3
            continue

        if state == 5:
            # ------------------------------------------------- <weights> values
            for t in range(k):
                if wcol < nw:
                    wts[ev, wcol] = tok_f[t]
                    if tok_i[2, t]:
                        slow[nslow, 0] = 20
                        slow[nslow, 1] = ev * nw + wcol
                        slow[nslow, 2] = tok_i[3, t]
                        slow[nslow, 3] = tok_i[4, t]
                        nslow += 1
                wcol += 1
            if wcol != nw:
                out[3] = ERR_WEIGHT_COUNT
                out[4] = pos
                out[8] = wcol
                out[9] = nw
                break
            # expect '</weights>' (or any closing tag): skip it
            while pos < n and buf[pos] != 62:
                pos += 1
            pos += 1
            state = 3
            continue

        if state == 6:
            # ------------------------------------------------------- one <wgt> value
            if k != 1:
                out[3] = ERR_WGT_VALUE
                out[4] = tok_i[3, 0] if k > 0 else pos
                out[8] = k
                break
            wts[ev, wcol] = tok_f[0]
            if tok_i[2, 0] and nslow < s_cap:
                slow[nslow, 0] = 20
                slow[nslow, 1] = ev * nw + wcol
                slow[nslow, 2] = tok_i[3, 0]
                slow[nslow, 3] = tok_i[4, 0]
                nslow += 1
            while pos < n and buf[pos] != 62:  # '</wgt>'
                pos += 1
            pos += 1
            state = 4
            continue

        # ---------------------------------------------- states 3 and 4: markup
        while pos < n:
            c = buf[pos]
            if c == 32 or c == 9 or c == 13 or c == 10:
                pos += 1
            else:
                break
        if pos >= n:
            out[3] = ST_INCOMPLETE
            out[5] = ev_start
            break
        c = buf[pos]
        if c == 35 and state == 3:  # '#' comment line
            while pos < n and buf[pos] != 10:
                pos += 1
            continue
        if c != 60:
            if state == 3 and (c == 43 or c == 45 or c == 46 or (48 <= c <= 57)):
                out[3] = ERR_MANY_PARTICLES
                out[4] = pos
                out[8] = nup
                break
            # free text: skip the line (state 3) or up to the next tag (state 4)
            while pos < n and buf[pos] != 10 and buf[pos] != 60:
                pos += 1
            continue
        # a tag: read its name
        if pos + 3 < n and buf[pos + 1] == 33 and buf[pos + 2] == 45 and buf[pos + 3] == 45:
            pos += 4
            while pos + 2 < n and not (
                buf[pos] == 45 and buf[pos + 1] == 45 and buf[pos + 2] == 62
            ):
                pos += 1
            if pos + 2 >= n:
                out[3] = ST_INCOMPLETE
                out[5] = ev_start
                break
            pos += 3
            continue
        tag0 = pos
        closing = pos + 1 < n and buf[pos + 1] == 47
        ns = pos + 2 if closing else pos + 1
        ne = ns
        while ne < n:
            c = buf[ne]
            if c == 32 or c == 9 or c == 13 or c == 10 or c == 62 or c == 47:
                break
            ne += 1
        if ne >= n:
            out[3] = ST_INCOMPLETE
            out[5] = ev_start
            break
        nlen = ne - ns
        # end of the start tag (quote-aware)
        q = 0
        gt = ne
        wid_s = -1
        wid_e = -1
        while gt < n:
            c = buf[gt]
            if q != 0:
                if c == q:
                    q = 0
                    if wid_s >= 0 and wid_e < 0:
                        wid_e = gt
            elif c == 34 or c == 39:
                q = c
                # an attribute value starts; is it id=?
                b = gt - 1
                while b > ne and (buf[b] == 32 or buf[b] == 9):
                    b -= 1
                if buf[b] == 61:  # '='
                    b -= 1
                    while b > ne and (buf[b] == 32 or buf[b] == 9):
                        b -= 1
                    if (
                        b - 2 >= ne
                        and buf[b] == 100
                        and buf[b - 1] == 105
                        and (buf[b - 2] == 32 or buf[b - 2] == 9 or buf[b - 2] == 10)
                    ):
                        wid_s = gt + 1
            elif c == 62:
                break
            gt += 1
        if gt >= n:
            out[3] = ST_INCOMPLETE
            out[5] = ev_start
            break
        selfclose = buf[gt - 1] == 47
        if closing:
            if (
                nlen == 5
                and buf[ns] == 101
                and buf[ns + 1] == 118
                and buf[ns + 2] == 101
                and buf[ns + 3] == 110
                and buf[ns + 4] == 116
            ):
                # </event>: commit
                ev_pos[ev] = ev_start
                npart += nup
                offsets[ev + 1] = npart
                ev += 1
                ev_slow0 = nslow
                pos = gt + 1
                state = 0
                continue
            if state == 4 and nlen == 4 and buf[ns] == 114:  # </rwgt>
                state = 3
            pos = gt + 1
            continue
        pos = gt + 1
        if selfclose:
            continue
        # rwgt / weights / wgt
        if (
            state == 3
            and nlen == 4
            and buf[ns] == 114
            and buf[ns + 1] == 119
            and buf[ns + 2] == 103
            and buf[ns + 3] == 116
        ):
            state = 4
            wnext = 0
            continue
        if (
            state == 3
            and nlen == 7
            and buf[ns] == 119
            and buf[ns + 1] == 101
            and buf[ns + 2] == 105
            and buf[ns + 3] == 103
            and buf[ns + 4] == 104
            and buf[ns + 5] == 116
            and buf[ns + 6] == 115
        ):
            state = 5
            wcol = 0
            continue
        if (
            state == 4
            and nlen == 3
            and buf[ns] == 119
            and buf[ns + 1] == 103
            and buf[ns + 2] == 116
        ):
            # find the declared column of this id: expected next first, then search
            col = -1
            if wid_s >= 0 and wid_e >= wid_s:
                L = wid_e - wid_s
                for attempt in range(nw + 1):
                    j = wnext if attempt == 0 else attempt - 1
                    if j >= nw:
                        continue
                    o0 = wid_off[j]
                    if wid_off[j + 1] - o0 != L:
                        continue
                    same = True
                    for t in range(L):
                        if wid_bytes[o0 + t] != buf[wid_s + t]:
                            same = False
                            break
                    if same:
                        col = j
                        break
            if col < 0:
                out[3] = ERR_UNKNOWN_WEIGHT
                out[4] = tag0
                out[8] = wid_s
                out[9] = wid_e
                break
            wcol = col
            wnext = col + 1
            state = 6
            continue
        # any other element: skip to its closing tag '</name'
        found = False
        while pos + nlen + 1 < n:
            if buf[pos] == 60 and buf[pos + 1] == 47:
                same = True
                for t in range(nlen):
                    if buf[pos + 2 + t] != buf[ns + t]:
                        same = False
                        break
                if same:
                    c = buf[pos + 2 + nlen]
                    if c == 62 or c == 32 or c == 9 or c == 13 or c == 10:
                        found = True
                        break
            pos += 1
        if not found:
            out[3] = ST_INCOMPLETE
            out[5] = ev_start
            break
        while pos < n and buf[pos] != 62:
            pos += 1
        pos += 1

    out[0] = ev
    out[1] = npart
    # the slow entries of an uncommitted event are dropped with it
    out[2] = ev_slow0 if (out[3] == ST_FULL or out[3] == ST_INCOMPLETE) else nslow
    return ev


scan_kernel: Callable[..., Any] | None = (
    njit(nogil=True, cache=True, error_model="numpy")(_scan_kernel_py) if njit is not None else None
)


# ------------------------------------------------------------------ slow tokens

_FLOAT_RE = re.compile(
    r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eEdD][+-]?\d+|[+-]\d+)?$|^[+-]?(?:nan|inf|infinity)$",
    re.I,
)


def parse_slow_token(token: bytes) -> float | None:
    """Python ``float()`` of one LHE number token (``D`` exponents, ``1.0+120``), or None."""
    text = token.decode("ascii", "replace")
    if not _FLOAT_RE.match(text):
        return None
    t = text.replace("D", "E").replace("d", "e")
    m = re.match(r"^([+-]?(?:\d+\.?\d*|\.\d+))([+-]\d+)$", t)
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
    """Convert the slow-path tokens with Python ``float()``.

    Returns -1 on success, else the byte offset of the first token that is not a number.
    """
    mv = memoryview(buf)
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
        if target < 10:
            ev_f[target, index] = value
        elif target < 20:
            p_f[target - 10, index] = value
        else:
            wts_flat[index] = value
    return -1
