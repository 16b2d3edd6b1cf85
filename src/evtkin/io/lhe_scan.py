"""Compiled byte scanner for the ``<event>`` part of LHE files (numba, ``nogil``, cached).

:func:`scan_kernel` is one single-pass state machine over a ``uint8`` buffer that holds
whole events (the reader cuts its buffers after an ``</event>``, or before an open
``<eventgroup>``). It writes straight into flat numeric columns (the caller's
preallocated arrays), starting at the counts held in ``st`` and resuming at byte
``st[ST_POS]``; when a column is full it stops at the last commit point (an event, or a
whole event group) so that the caller can grow the arrays and call again.

The fixed-layout lines have dedicated paths: the event line is ``NUP IDPRUP`` (integers)
then ``XWGTUP SCALUP AQEDUP AQCDUP`` (floats), a particle line six integers then seven
floats. Numbers go straight into their output column; there is no token scratch space,
no array-taking helper and no slow-path call in the loop (PERFORMANCE-NOTES: each of
those put reference counting or a rarely taken call into the hot loop).

Floats are bit-identical to Python's ``float()`` on the same text: a decimal mantissa of
at most 18 digits that is <= 2**53, with a decimal exponent within +-22, is converted
with a single correctly rounded multiplication or division by an exactly representable
power of ten. Any other token (more digits, larger exponents, ``nan``, a Fortran
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

Importing this module does not import numba: :func:`compiled_kernel` compiles (or loads
from the cache) on first use.
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable
from typing import Any

import numpy as np

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
}

# slow-list targets: 0-3 event floats, 10-16 particle floats, 20 weights (flat index)
T_EVF = 0
T_PF = 10
T_WTS = 20

_P10 = np.array([10.0**k for k in range(23)], dtype=np.float64)  # all exact in binary64
_TWO53 = 1 << 53
_INT32_MAX = 2147483647
_INT32_MIN = -2147483648


def scan_kernel_source(  # one state machine on purpose (see module docstring)
    buf,  # uint8[:]        the text
    wid_bytes,  # uint8[:]  declared weight ids, concatenated
    wid_off,  # int64[:]    offsets into wid_bytes, len nw + 1
    ev_pid,  # int32[:]     process id
    ev_f,  # float64[4, :]  weight, scale, alpha_qed, alpha_qcd
    offsets,  # int64[:]    particle offsets, len >= event capacity + 1
    group,  # int64[:]      first event (column index) of each event's group
    p_i,  # int32[6, :]
    p_f,  # float64[7, :]
    wts,  # float64[:, nw]
    slow,  # int64[:, 4]    (target, index, token start, token end)
    st,  # int64[16]        state in/out (see ST_*)
):
    n = buf.shape[0]
    nw = wts.shape[1]
    ev_cap = ev_pid.shape[0]
    p_cap = p_i.shape[1]
    s_cap = slow.shape[0]
    P10 = _P10
    nan = np.nan

    ev = st[ST_EV]
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

    # state: 0 between events, 1 event line, 2 particle line, 3 float run,
    #        4 optional information, 5 inside <rwgt>
    state = 0
    nup = 0
    ip = 0
    row = 0
    line0 = 0
    # float run: fmode 1 event line, 2 particle line, 3 <weights> list, 4 one <wgt>
    fmode = 0
    fi = 0
    fn = 0
    wcol = 0
    wnext = 0
    while True:
        if state == 0:
            # ---------------------------------------------------- between events
            while pos < n and buf[pos] != 60:  # '<'
                pos += 1
            if pos >= n:
                if in_group:
                    status = ST_INCOMPLETE
                else:
                    status = ST_OK
                    c_pos = n
                break
            t0 = pos
            if pos + 3 < n and buf[pos + 1] == 33 and buf[pos + 2] == 45 and buf[pos + 3] == 45:
                # comment: skip to '-->'
                pos += 4
                while pos + 2 < n and not (
                    buf[pos] == 45 and buf[pos + 1] == 45 and buf[pos + 2] == 62
                ):
                    pos += 1
                if pos + 2 >= n:
                    status = ST_INCOMPLETE
                    if not in_group:
                        c_pos = t0
                    break
                pos += 3
                continue
            closing = pos + 1 < n and buf[pos + 1] == 47
            ns = pos + 2 if closing else pos + 1
            ne = ns
            while ne < n:
                c = buf[ne]
                if c == 32 or c == 9 or c == 13 or c == 10 or c == 62 or c == 47:
                    break
                ne += 1
            if ne >= n:
                status = ST_INCOMPLETE
                if not in_group:
                    c_pos = t0
                break
            nlen = ne - ns
            is_event = (
                nlen >= 5
                and buf[ns] == 101  # e
                and buf[ns + 1] == 118  # v
                and buf[ns + 2] == 101  # e
                and buf[ns + 3] == 110  # n
                and buf[ns + 4] == 116  # t
            )
            is_group = (
                is_event
                and nlen == 10
                and buf[ns + 5] == 103  # g
                and buf[ns + 6] == 114  # r
                and buf[ns + 7] == 111  # o
                and buf[ns + 8] == 117  # u
                and buf[ns + 9] == 112  # p
            )
            is_event = is_event and nlen == 5
            if closing:
                if is_group and in_group:
                    in_group = False
                if nlen > 0 and buf[ns] == 76:  # '</L': </LesHouchesEvents>
                    st[ST_SAWEND] = 1
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
            # skip the tag, honouring quoted attribute values
            pos = ne
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
                status = ST_INCOMPLETE
                if not in_group:
                    c_pos = t0
                break
            pos += 1
            if closing:
                if is_group and not in_group:
                    # a whole group is done: commit
                    c_ev = ev
                    c_np = npart
                    c_slow = nslow
                    c_pos = pos
                continue
            if not is_event or buf[pos - 2] == 47:  # other tag, or <event/>
                continue
            # ------------------------------------------------ an <event> starts
            if ev >= ev_cap:
                status = ST_FULL
                st[ST_A] = FULL_EVENTS
                break
            for j in range(nw):
                wts[ev, j] = nan
            state = 1
            continue

        if state == 1:
            # ------------------------------------------------- NUP IDPRUP (integers)
            while pos < n:
                c = buf[pos]
                if c == 32 or c == 9 or c == 13 or c == 10:
                    pos += 1
                else:
                    break
            line0 = pos
            bad = False
            ival0 = 0
            for f in range(2):
                while pos < n and (buf[pos] == 32 or buf[pos] == 9 or buf[pos] == 13):
                    pos += 1
                if pos >= n:
                    break
                c = buf[pos]
                neg = c == 45
                if c == 45 or c == 43:
                    pos += 1
                iv = 0
                s0 = pos
                while pos < n:
                    d = np.int64(buf[pos]) - 48
                    if d < 0 or d > 9:
                        break
                    iv = iv * 10 + d
                    pos += 1
                nd = pos - s0
                if pos < n:
                    c = buf[pos]
                    if not (c == 32 or c == 9 or c == 13 or c == 10):
                        nd = 0
                if nd == 0 or nd > 18:
                    bad = True
                    break
                if neg:
                    iv = -iv
                if f == 0:
                    ival0 = iv
                else:
                    ev_pid[ev] = iv
            if pos >= n:
                status = ST_INCOMPLETE
                break
            if bad:
                status = ERR_LINE
                st[ST_ERRPOS] = line0
                st[ST_B] = 6
                break
            nup = ival0
            if nup < 0:
                status = ERR_NEGATIVE_NUP
                st[ST_ERRPOS] = line0
                break
            if npart + nup > p_cap:
                status = ST_FULL
                st[ST_A] = FULL_PARTICLES
                break
            ip = 0
            fmode = 1
            fi = 0
            fn = 4
            state = 3
            continue

        if state == 2:
            # ------------------------------------------- particle line: six integers
            while pos < n:
                c = buf[pos]
                if c == 32 or c == 9 or c == 13 or c == 10:
                    pos += 1
                else:
                    break
            if pos >= n:
                status = ST_INCOMPLETE
                break
            c = buf[pos]
            if c == 60 or c == 35:  # '<' or '#': fewer particle lines than NUP
                status = ERR_FEW_PARTICLES
                st[ST_ERRPOS] = pos
                st[ST_A] = nup
                st[ST_B] = ip
                break
            line0 = pos
            row = npart + ip
            bad = False
            for f in range(6):
                while pos < n and (buf[pos] == 32 or buf[pos] == 9 or buf[pos] == 13):
                    pos += 1
                if pos >= n:
                    break
                c = buf[pos]
                neg = c == 45
                if c == 45 or c == 43:
                    pos += 1
                iv = 0
                s0 = pos
                while pos < n:
                    d = np.int64(buf[pos]) - 48
                    if d < 0 or d > 9:
                        break
                    iv = iv * 10 + d
                    pos += 1
                nd = pos - s0
                if pos < n:
                    c = buf[pos]
                    if not (c == 32 or c == 9 or c == 13):
                        nd = 0
                if nd == 0 or nd > 10:
                    bad = True
                    break
                if neg:
                    iv = -iv
                if iv > _INT32_MAX or iv < _INT32_MIN:
                    bad = True
                    break
                if f == 2 or f == 3:
                    iv -= 1
                p_i[f, row] = iv
            if pos >= n:
                status = ST_INCOMPLETE
                break
            if bad:
                status = ERR_LINE
                st[ST_ERRPOS] = line0
                st[ST_B] = 13
                break
            # ---------------------------------------- particle line: seven floats
            full = False
            for f in range(7):
                while pos < n and (buf[pos] == 32 or buf[pos] == 9 or buf[pos] == 13):
                    pos += 1
                if pos >= n:
                    break
                c = buf[pos]
                if c == 10 or c == 60 or c == 35:  # too few fields
                    bad = True
                    break
                s = pos
                neg = c == 45
                if c == 45 or c == 43:
                    pos += 1
                mant = 0
                s0 = pos
                while pos < n:
                    d = np.int64(buf[pos]) - 48
                    if d < 0 or d > 9:
                        break
                    mant = mant * 10 + d
                    pos += 1
                nd = pos - s0
                e10 = 0
                if pos < n and buf[pos] == 46:  # '.'
                    pos += 1
                    f0 = pos
                    while pos < n:
                        d = np.int64(buf[pos]) - 48
                        if d < 0 or d > 9:
                            break
                        mant = mant * 10 + d
                        pos += 1
                    nd += pos - f0
                    e10 = f0 - pos
                if pos < n:
                    c = buf[pos]
                    if c == 101 or c == 69 or c == 100 or c == 68:  # e E d D
                        pos += 1
                        eneg = False
                        if pos < n:
                            c = buf[pos]
                            if c == 45:
                                eneg = True
                                pos += 1
                            elif c == 43:
                                pos += 1
                        ex = 0
                        x0 = pos
                        while pos < n:
                            d = np.int64(buf[pos]) - 48
                            if d < 0 or d > 9:
                                break
                            ex = ex * 10 + d
                            pos += 1
                        if pos == x0 or pos - x0 > 5:
                            nd = 0
                        e10 += -ex if eneg else ex
                    if pos < n:
                        c = buf[pos]
                        if not (c == 32 or c == 10 or c == 9 or c == 13 or c == 60):
                            nd = 0
                if nd > 0 and nd <= 18 and mant <= _TWO53 and e10 >= -22 and e10 <= 22:
                    v = np.float64(mant)
                    v = v * P10[e10] if e10 >= 0 else v / P10[-e10]
                    p_f[f, row] = -v if neg else v
                else:
                    while pos < n:
                        c = buf[pos]
                        if c == 32 or c == 9 or c == 13 or c == 10 or c == 60:
                            break
                        pos += 1
                    p_f[f, row] = nan
                    if nslow >= s_cap:
                        full = True
                        break
                    slow[nslow, 0] = T_PF + f
                    slow[nslow, 1] = row
                    slow[nslow, 2] = s
                    slow[nslow, 3] = pos
                    nslow += 1
            if full:
                status = ST_FULL
                st[ST_A] = FULL_SLOW
                break
            if pos < n and not bad:
                while pos < n and (buf[pos] == 32 or buf[pos] == 9 or buf[pos] == 13):
                    pos += 1
                if pos < n:
                    c = buf[pos]
                    if not (c == 10 or c == 60 or c == 35):  # too many fields
                        bad = True
            if pos >= n:
                status = ST_INCOMPLETE
                break
            if bad:
                status = ERR_LINE
                st[ST_ERRPOS] = line0
                st[ST_B] = 13
                break
            ip += 1
            state = 2 if ip < nup else 4
            continue

        if state == 3:
            # ------------------------------------------------------------ float run
            allow_nl = fmode >= 3
            full = False
            while True:
                while pos < n:
                    c = buf[pos]
                    if c == 32 or c == 9 or c == 13 or (c == 10 and allow_nl):
                        pos += 1
                    else:
                        break
                if pos >= n:
                    break
                c = buf[pos]
                if c == 10 or c == 60 or c == 35:  # newline, '<', '#'
                    break
                if fi == fn:  # one token too many
                    break
                # ---- one number token
                s = pos
                idx = 0
                neg = c == 45
                if c == 45 or c == 43:
                    pos += 1
                mant = 0
                s0 = pos
                while pos < n:
                    d = np.int64(buf[pos]) - 48
                    if d < 0 or d > 9:
                        break
                    mant = mant * 10 + d
                    pos += 1
                nd = pos - s0  # digits, leading zeros included (at most 18: no overflow)
                e10 = 0
                if pos < n and buf[pos] == 46:  # '.'
                    pos += 1
                    f0 = pos
                    while pos < n:
                        d = np.int64(buf[pos]) - 48
                        if d < 0 or d > 9:
                            break
                        mant = mant * 10 + d
                        pos += 1
                    nd += pos - f0
                    e10 = f0 - pos
                if pos < n:
                    c = buf[pos]
                    if c == 101 or c == 69 or c == 100 or c == 68:  # e E d D
                        pos += 1
                        eneg = False
                        if pos < n:
                            c = buf[pos]
                            if c == 45:
                                eneg = True
                                pos += 1
                            elif c == 43:
                                pos += 1
                        ex = 0
                        x0 = pos
                        while pos < n:
                            d = np.int64(buf[pos]) - 48
                            if d < 0 or d > 9:
                                break
                            ex = ex * 10 + d
                            pos += 1
                        if pos == x0 or pos - x0 > 5:
                            nd = 0  # no exponent digits, or a huge exponent: slow path
                        e10 += -ex if eneg else ex
                    if pos < n:
                        c = buf[pos]
                        if not (c == 32 or c == 10 or c == 9 or c == 13 or c == 60):
                            nd = 0
                if nd > 0 and nd <= 18 and mant <= _TWO53 and e10 >= -22 and e10 <= 22:
                    v = np.float64(mant)
                    # one correctly rounded operation with an exact power of ten
                    v = v * P10[e10] if e10 >= 0 else v / P10[-e10]
                    if neg:
                        v = -v
                    tgt = -1
                else:
                    # slow path: find the token's end, convert later in Python
                    while pos < n:
                        c = buf[pos]
                        if c == 32 or c == 9 or c == 13 or c == 10 or c == 60:
                            break
                        pos += 1
                    v = nan
                    tgt = 0
                if fmode == 2:
                    p_f[fi, row] = v
                    if tgt == 0:
                        tgt = T_PF + fi
                        idx = row
                elif fmode == 1:
                    ev_f[fi, ev] = v
                    if tgt == 0:
                        tgt = T_EVF + fi
                        idx = ev
                elif fmode == 3:
                    if fi < nw:
                        wts[ev, fi] = v
                    elif tgt == 0:
                        tgt = -1
                    if tgt == 0:
                        tgt = T_WTS
                        idx = ev * nw + fi
                else:
                    wts[ev, wcol] = v
                    if tgt == 0:
                        tgt = T_WTS
                        idx = ev * nw + wcol
                if tgt >= 0:
                    if nslow >= s_cap:
                        full = True
                        break
                    slow[nslow, 0] = tgt
                    slow[nslow, 1] = idx
                    slow[nslow, 2] = s
                    slow[nslow, 3] = pos
                    nslow += 1
                fi += 1
            if full:
                status = ST_FULL
                st[ST_A] = FULL_SLOW
                break
            if pos >= n:
                status = ST_INCOMPLETE
                break
            if fmode <= 2:
                if fi != fn or (buf[pos] != 10 and buf[pos] != 60 and buf[pos] != 35):
                    status = ERR_LINE
                    st[ST_ERRPOS] = line0
                    st[ST_B] = 6 if fmode == 1 else 13
                    break
                if fmode == 2:
                    ip += 1
                state = 2 if ip < nup else 4
                continue
            if fmode == 3:
                if fi != nw:
                    status = ERR_WEIGHT_COUNT
                    st[ST_ERRPOS] = pos
                    st[ST_A] = fi
                    st[ST_B] = nw
                    break
            elif fi != 1 or buf[pos] != 60:
                status = ERR_WGT_VALUE
                st[ST_ERRPOS] = line0
                st[ST_A] = fi
                break
            # skip the closing tag '</weights>' or '</wgt>'
            while pos < n and buf[pos] != 62:
                pos += 1
            pos += 1
            state = 4 if fmode == 3 else 5
            continue

        # ---------------------------------------------- states 4 and 5: markup
        while pos < n:
            c = buf[pos]
            if c == 32 or c == 9 or c == 13 or c == 10:
                pos += 1
            else:
                break
        if pos >= n:
            status = ST_INCOMPLETE
            break
        c = buf[pos]
        if c == 35 and state == 4:  # '#' comment line
            while pos < n and buf[pos] != 10:
                pos += 1
            continue
        if c != 60:
            if state == 4 and (c == 43 or c == 45 or c == 46 or (c >= 48 and c <= 57)):
                status = ERR_MANY_PARTICLES
                st[ST_ERRPOS] = pos
                st[ST_A] = nup
                break
            # free text: skip the line (state 4) or up to the next tag (state 5)
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
                status = ST_INCOMPLETE
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
            status = ST_INCOMPLETE
            break
        nlen = ne - ns
        # end of the start tag (quote-aware), noting the value of an id= attribute
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
            status = ST_INCOMPLETE
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
                # </event>
                npart += nup
                offsets[ev + 1] = npart
                group[ev] = g_first if in_group else ev
                ev += 1
                pos = gt + 1
                if not in_group:
                    c_ev = ev
                    c_np = npart
                    c_slow = nslow
                    c_pos = pos
                state = 0
                continue
            if state == 5 and nlen == 4 and buf[ns] == 114:  # </rwgt>
                state = 4
            pos = gt + 1
            continue
        pos = gt + 1
        if selfclose:
            continue
        if (
            state == 4
            and nlen == 4
            and buf[ns] == 114
            and buf[ns + 1] == 119
            and buf[ns + 2] == 103
            and buf[ns + 3] == 116
        ):  # <rwgt>
            state = 5
            wnext = 0
            continue
        if (
            state == 4
            and nlen == 7
            and buf[ns] == 119
            and buf[ns + 1] == 101
            and buf[ns + 2] == 105
            and buf[ns + 3] == 103
            and buf[ns + 4] == 104
            and buf[ns + 5] == 116
            and buf[ns + 6] == 115
        ):  # <weights>
            fmode = 3
            fi = 0
            fn = -1
            line0 = pos
            state = 3
            continue
        if (
            state == 5
            and nlen == 3
            and buf[ns] == 119
            and buf[ns + 1] == 103
            and buf[ns + 2] == 116
        ):
            # <wgt id=...>: the declared column of this id, expected next one first
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
                status = ERR_UNKNOWN_WEIGHT
                st[ST_ERRPOS] = tag0
                st[ST_A] = wid_s
                st[ST_B] = wid_e
                break
            wcol = col
            wnext = col + 1
            fmode = 4
            fi = 0
            fn = -1
            line0 = pos
            state = 3
            continue
        # any other element: skip to its closing tag '</name'
        found = False
        while pos + nlen + 2 < n:
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
            status = ST_INCOMPLETE
            break
        while pos < n and buf[pos] != 62:
            pos += 1
        pos += 1

    st[ST_STATUS] = status
    if status >= 10:
        st[ST_EV] = ev
        st[ST_NP] = npart
        st[ST_NSLOW] = nslow
        st[ST_POS] = pos
    else:
        # everything after the last commit point is dropped (and re-read on resume)
        st[ST_EV] = c_ev
        st[ST_NP] = c_np
        st[ST_NSLOW] = c_slow
        st[ST_POS] = c_pos
    return c_ev


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
    """The numba-compiled :func:`scan_kernel_source` (cached on disk), or None.

    numba is imported here, on first use, so that ``import evtkin`` stays light.
    """
    global _COMPILED, _TRIED
    if not _TRIED:
        _TRIED = True
        if numba_available():
            from numba import njit

            _COMPILED = njit(nogil=True, cache=True, error_model="numpy")(scan_kernel_source)
    return _COMPILED


# ------------------------------------------------------------------ slow tokens

_FLOAT_RE = re.compile(
    r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eEdD][+-]?\d+|[+-]\d+)?$|^[+-]?(?:nan|inf|infinity)$",
    re.I,
)
_FORTRAN_NOLETTER = re.compile(r"^([+-]?(?:\d+\.?\d*|\.\d+))([+-]\d+)$")


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
_LINE_TOKEN = re.compile(rb"[^ \t\r\n<#]+")


def diagnose_line(buf: np.ndarray, pos: int, expected: int) -> tuple[int, int, int, int]:
    """The precise error of a malformed event line (``expected=6``) or particle line (13).

    ``pos`` is the offset of the line's first token. Returns ``(status, errpos, a, b)``
    in the kernel's error protocol: a wrong field count first, then a non-integer (or
    out-of-range) integer field, then a negative NUP, then a token that is no number.
    """
    end = pos
    n = buf.shape[0]
    while end < n and buf[end] != 10 and buf[end] != 60 and buf[end] != 35:
        end += 1
    data = bytes(buf[pos:end])
    spans = [(pos + m.start(), pos + m.end()) for m in _LINE_TOKEN.finditer(data)]
    toks = [bytes(buf[s:e]) for s, e in spans]
    if len(toks) != expected:
        return ERR_FIELD_COUNT, (spans[0][0] if spans else pos), len(toks), expected
    n_int = 2 if expected == 6 else 6
    for (s, _e), tok in zip(spans[:n_int], toks[:n_int], strict=True):
        if not _PLAIN_INT.match(tok) or not _INT32_MIN <= int(tok) <= _INT32_MAX:
            return ERR_INTEGER, s, 0, 0
    if expected == 6 and int(toks[0]) < 0:
        return ERR_NEGATIVE_NUP, spans[0][0], 0, 0
    for (s, _e), tok in zip(spans[n_int:], toks[n_int:], strict=True):
        if parse_slow_token(tok) is None:
            return ERR_NUMBER, s, 0, 0
    return ERR_NUMBER, pos, 0, 0  # pragma: no cover - the kernel found a problem
