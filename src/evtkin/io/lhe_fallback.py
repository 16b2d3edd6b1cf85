"""The no-compile scanner: same inputs, outputs and protocol as the numba kernel.

Used by :func:`evtkin.read_lhe` when numba is unavailable or ``EVTKIN_NO_NUMBA=1`` is
set. It walks the buffer with compiled regular expressions (one match per tag or line)
and converts numbers with Python's ``float()``/``int()`` (through
:func:`evtkin.io.lhe_scan.parse_slow_token`, so ``D`` exponents are accepted), which makes
it exact by construction and leaves the slow list empty. It is an order of magnitude
slower than the compiled kernel (a Python step per line), but it needs nothing beyond
numpy.

:func:`scan_kernel_py` has the signature and the ``st`` protocol of
:func:`evtkin.io.lhe_scan.scan_kernel_source` (see that module): it starts at the counts
and offset held in ``st``, commits whole events (whole groups inside ``<eventgroup>``),
stops before an event or group whose tag starts at or after ``st[ST_STOP]``, and reports
full columns, incomplete input and errors the same way.
"""

from __future__ import annotations

import re

import numpy as np

from evtkin.io.lhe_scan import (
    ERR_BAD_TAG,
    ERR_COMMENT,
    ERR_DUP_WEIGHT,
    ERR_EVENT_OPEN,
    ERR_FEW_PARTICLES,
    ERR_LINE,
    ERR_MANY_PARTICLES,
    ERR_NUMBER,
    ERR_NUP_TOO_BIG,
    ERR_RWGT_OPEN,
    ERR_SECOND_HEADER,
    ERR_STRAY_CLOSE,
    ERR_UNCLOSED,
    ERR_UNKNOWN_WEIGHT,
    ERR_VALUE_CLOSE,
    ERR_WEIGHT_COUNT,
    ERR_WGT_VALUE,
    FULL_EVENTS,
    FULL_PARTICLES,
    MIN_PARTICLE_LINE,
    ST_A,
    ST_B,
    ST_ENSLOW,
    ST_ERRPOS,
    ST_EV,
    ST_FULL,
    ST_INCOMPLETE,
    ST_NP,
    ST_NSLOW,
    ST_OK,
    ST_POS,
    ST_SAWEND,
    ST_STATUS,
    ST_STOP,
    ST_STOPPED,
    parse_slow_token,
)

__all__ = ["scan_kernel_py"]

_WS = b" \t\r\n"
_NAME = re.compile(rb"[^ \t\r\n>/<]*")
_PLAIN = re.compile(rb"[^<>\"']*")  # tag bytes with no meaning to the tag scan
_IN_DQ = re.compile(rb'[^<"]*')
_IN_SQ = re.compile(rb"[^<']*")
_INT = re.compile(rb"^[+-]?\d{1,18}$")
_TOKEN = re.compile(rb"[^ \t\r\n<]+")
#: the tags that bound events (lhe_scan._event_boundary)
_BOUNDARY = re.compile(rb"</?(?:event(?:group)?|LesHouchesEvents)[ \t\r\n>/<]")
_CLOSE_BOUNDARY = re.compile(rb"</(?:event(?:group)?|LesHouchesEvents)[ \t\r\n>/<]")
#: where a '#' text line inside an event stops before its newline
_HASH_STOP = re.compile(rb"<!--|</?(?:event(?:group)?|LesHouchesEvents)[ \t\r\n>/<]")
_I32_MIN, _I32_MAX = -(2**31), 2**31 - 1


class _Stop(Exception):
    def __init__(self, status: int) -> None:
        self.status = status


class _Full(Exception):
    def __init__(self, which: int) -> None:
        self.which = which


def _fail(st: np.ndarray, status: int, pos: int, a: int = 0, b: int = 0) -> _Stop:
    st[ST_ERRPOS] = pos
    st[ST_A] = a
    st[ST_B] = b
    return _Stop(status)


def _tag(data: bytes, pos: int, n: int, in_event: bool) -> tuple[int, int, int, int]:
    """The twin of ``lhe_scan._tag_scan`` (same returns, same rules)."""
    if data.startswith(b"<!--", pos):
        e = data.find(b"-->", pos + 4)
        if in_event:
            m = _BOUNDARY.search(data, pos + 4, n if e < 0 else e)
            if m is not None:
                return -3, m.start(), -1, -1
        if e < 0:
            return -1, max(n, pos + 4) + 1, -1, -1
        return -1, e + 2, -1, -1
    ns = pos + 2 if pos + 1 < n and data[pos + 1] == 47 else pos + 1
    m = _NAME.match(data, ns)
    ne = m.end() if m is not None else ns
    gt = ne
    wid_s = wid_e = -1
    while True:
        mp = _PLAIN.match(data, gt)
        gt = mp.end() if mp is not None else gt
        if gt >= n:
            return ne, n, wid_s, wid_e
        c = data[gt]
        if c == 60:
            return -2, gt, -1, -1
        if c == 62:
            return ne, gt, wid_s, wid_e
        # a quote: an attribute value starts; is it the first id=?
        b = gt - 1
        while b > ne and data[b] in b" \t":
            b -= 1
        if data[b] == 61:  # '='
            b -= 1
            while b > ne and data[b] in b" \t":
                b -= 1
            if wid_s < 0 and b - 2 >= ne and data[b] == 100 and data[b - 1] == 105 and (
                data[b - 2] in b" \t\n"
            ):
                wid_s = gt + 1
        mq = (_IN_DQ if c == 34 else _IN_SQ).match(data, gt + 1)
        q_end = mq.end() if mq is not None else gt + 1
        if q_end >= n:
            return ne, n, wid_s, wid_e
        if data[q_end] == 60:
            return -2, q_end, -1, -1
        if wid_s >= 0 and wid_e < 0:
            wid_e = q_end
        gt = q_end + 1


def _line_tokens(data: bytes, pos: int, n: int, stop_nl: bool) -> tuple[list[tuple[int, int]], int]:
    """Token spans from ``pos`` (after skipping blank space) to end of line / next '<'.

    Returns (spans, new_pos); raises _Stop(ST_INCOMPLETE) at the end of the buffer.
    """
    while pos < n and data[pos] in _WS:
        pos += 1
    spans: list[tuple[int, int]] = []
    while True:
        while pos < n and (data[pos] in b" \t\r" or (not stop_nl and data[pos] == 10)):
            pos += 1
        if pos >= n:
            raise _Stop(ST_INCOMPLETE)
        c = data[pos]
        if c in b"\n<#":
            return spans, pos
        m = _TOKEN.match(data, pos)
        assert m is not None
        spans.append((m.start(), m.end()))
        pos = m.end()


def _float(data: bytes, span: tuple[int, int], st: np.ndarray) -> float:
    v = parse_slow_token(data[span[0] : span[1]])
    if v is None:
        raise _fail(st, ERR_NUMBER, span[0])
    return v


def _check_line(
    data: bytes, spans: list[tuple[int, int]], pos: int, expected: int, st: np.ndarray
) -> None:
    """Field count, integer fields and numbers of an event (6) or particle (13) line."""
    line0 = spans[0][0] if spans else pos
    if len(spans) != expected:
        raise _fail(st, ERR_LINE, line0, 0, expected)
    n_int = 2 if expected == 6 else 6
    for s, e in spans[:n_int]:
        tok = data[s:e]
        if not _INT.match(tok) or not _I32_MIN <= int(tok) <= _I32_MAX:
            raise _fail(st, ERR_LINE, line0, 0, expected)
    if expected == 6 and int(data[spans[0][0] : spans[0][1]]) < 0:
        raise _fail(st, ERR_LINE, line0, 0, expected)
    for s, e in spans[n_int:]:
        if parse_slow_token(data[s:e]) is None:
            raise _fail(st, ERR_LINE, line0, 0, expected)


def scan_kernel_py(  # mirrors the compiled state machine
    buf: np.ndarray,
    wid_bytes: np.ndarray,
    wid_off: np.ndarray,
    ev_pid: np.ndarray,
    ev_f: np.ndarray,
    offsets: np.ndarray,
    group: np.ndarray,
    p_i: np.ndarray,
    p_f: np.ndarray,
    wts: np.ndarray,
    slow: np.ndarray,
    st: np.ndarray,
) -> int:
    """Pure-Python/numpy twin of :func:`evtkin.io.lhe_scan.scan_kernel_source`."""
    del slow  # every number is converted exactly here
    data = bytes(buf)
    n = len(data)
    nw = wts.shape[1]
    ids = [bytes(wid_bytes[wid_off[j] : wid_off[j + 1]]) for j in range(nw)]
    col_of: dict[bytes, int] = {}
    for j, w in enumerate(ids):
        col_of.setdefault(w, j)
    ev_cap = ev_pid.shape[0]
    p_cap = p_i.shape[1]
    ev = int(st[ST_EV])
    npart = int(st[ST_NP])
    pos = int(st[ST_POS])
    stop_at = int(st[ST_STOP])
    st[ST_SAWEND] = 0
    st[ST_STOPPED] = 0
    st[ST_A] = 0
    st[ST_B] = 0
    commit = (ev, npart, pos)
    in_group = False
    g_first = 0
    status = ST_OK
    try:
        while True:
            # ------------------------------------------------ between events
            lt = data.find(b"<", pos)
            if lt < 0:
                if in_group:
                    raise _Stop(ST_INCOMPLETE)
                commit = (ev, npart, n)
                break
            pos = t0 = lt
            ne, gt, _ws, _we = _tag(data, pos, n, False)
            if ne == -2:
                raise _fail(st, ERR_BAD_TAG, t0, gt)
            if ne < 0 or ne >= n:
                if gt >= n:
                    if not in_group:
                        commit = (ev, npart, t0)
                    raise _Stop(ST_INCOMPLETE)
                pos = gt + 1
                continue
            closing = data[pos + 1] == 47
            ns = pos + 2 if closing else pos + 1
            name = data[ns:ne]
            is_event = name == b"event"
            is_group = name == b"eventgroup"
            if closing:
                if is_group and in_group:
                    in_group = False
                if name.startswith(b"L"):
                    st[ST_SAWEND] = 1
                if is_event:
                    raise _fail(st, ERR_STRAY_CLOSE, t0)
            elif name == b"LesHouchesEvents":
                raise _fail(st, ERR_SECOND_HEADER, t0)
            elif is_group or (is_event and not in_group):
                if pos >= stop_at:
                    st[ST_STOPPED] = 1
                    commit = (ev, npart, pos)
                    break
                commit = (commit[0], commit[1], pos)
                if is_group:
                    in_group = True
                    g_first = ev
            if gt >= n:
                if not in_group:
                    commit = (commit[0], commit[1], t0)
                raise _Stop(ST_INCOMPLETE)
            selfclose = data[gt - 1] == 47
            pos = gt + 1
            if closing:
                if is_group and not in_group:
                    commit = (ev, npart, pos)
                continue
            if not is_event or selfclose:
                continue
            # ------------------------------------------------ an <event>
            if ev >= ev_cap:
                raise _Full(FULL_EVENTS)
            wts[ev, :] = np.nan
            pos = _event_body(data, pos, n, ev, npart, p_cap, ev_pid, ev_f, p_i, p_f, st)
            nup = int(st[ST_B])
            st[ST_B] = 0
            pos = _optional_part(data, pos, n, nup, ev, wts, col_of, st)
            npart += nup
            offsets[ev + 1] = npart
            group[ev] = g_first if in_group else ev
            ev += 1
            if not in_group:
                commit = (ev, npart, pos)
    except _Stop as stop:
        status = stop.status
    except _Full as full:
        status = ST_FULL
        st[ST_A] = full.which
    st[ST_STATUS] = status
    st[ST_EV], st[ST_NP], st[ST_POS] = commit
    st[ST_NSLOW] = 0
    st[ST_ENSLOW] = 0
    return int(st[ST_EV])


def _event_body(
    data: bytes,
    pos: int,
    n: int,
    ev: int,
    npart: int,
    p_cap: int,
    ev_pid: np.ndarray,
    ev_f: np.ndarray,
    p_i: np.ndarray,
    p_f: np.ndarray,
    st: np.ndarray,
) -> int:
    """The event line and the particle lines; returns the position after them (NUP in
    ``st[ST_B]``)."""
    spans, pos = _line_tokens(data, pos, n, True)
    _check_line(data, spans, pos, 6, st)
    line0 = spans[0][0]
    nup = int(data[spans[0][0] : spans[0][1]])
    if npart + nup > p_cap:
        after = spans[1][1]  # where the kernel checks: just after IDPRUP
        if nup > (n - after) // MIN_PARTICLE_LINE + 1:
            if _CLOSE_BOUNDARY.search(data, after) is not None:
                raise _fail(st, ERR_NUP_TOO_BIG, line0, nup)
            raise _Stop(ST_INCOMPLETE)
        raise _Full(FULL_PARTICLES)
    ev_pid[ev] = int(data[spans[1][0] : spans[1][1]])
    ev_f[:, ev] = [_float(data, s, st) for s in spans[2:]]
    for ip in range(nup):
        spans, pos = _line_tokens(data, pos, n, True)
        if not spans:
            raise _fail(st, ERR_FEW_PARTICLES, pos, nup, ip)
        _check_line(data, spans, pos, 13, st)
        row = npart + ip
        ints = [int(data[s:e]) for s, e in spans[:6]]
        ints[2] -= 1
        ints[3] -= 1
        p_i[:, row] = ints
        p_f[:, row] = [_float(data, s, st) for s in spans[6:]]
    st[ST_B] = nup
    return pos


def _end_tag(data: bytes, pos: int, n: int, close: bytes) -> int:
    """The twin of ``lhe_scan._end_tag``."""
    L = len(close)
    for t in range(L):
        if pos + t >= n:
            return -1
        if data[pos + t] != close[t]:
            return -2
    if pos + L >= n:
        return -1
    if data[pos + L] not in b" \t\r\n>/<":
        return -2
    ne, gt, _s, _e = _tag(data, pos, n, True)
    if ne == -2:
        return -2
    if gt >= n:
        return -1
    return gt + 1


def _optional_part(
    data: bytes,
    pos: int,
    n: int,
    nup: int,
    ev: int,
    wts: np.ndarray,
    col_of: dict[bytes, int],
    st: np.ndarray,
) -> int:
    """Skip/parse everything after the particle lines up to and including ``</event>``."""
    nw = wts.shape[1]
    in_rwgt = False
    seen: set[int] = set()
    while True:
        while pos < n and data[pos] in _WS:
            pos += 1
        if pos >= n:
            raise _Stop(ST_INCOMPLETE)
        c = data[pos]
        if c == 35 and not in_rwgt:  # '#' line: text, but a comment or an event
            # boundary tag in it is markup (lhe_scan: the same rule)
            e = data.find(b"\n", pos)
            e = n if e < 0 else e
            mh = _HASH_STOP.search(data, pos, min(e + 1, n))
            pos = mh.start() if mh is not None and mh.start() < e else e
            continue
        if c != 60:
            if not in_rwgt and c in b"+-.0123456789":
                raise _fail(st, ERR_MANY_PARTICLES, pos, nup)
            while pos < n and data[pos] not in b"\n<":
                pos += 1
            continue
        t0 = pos
        ne, gt, wid_s, wid_e = _tag(data, pos, n, True)
        if ne < -1:
            raise _fail(st, ERR_BAD_TAG if ne == -2 else ERR_COMMENT, t0, gt)
        if ne < 0 or ne >= n:
            if gt >= n:
                raise _Stop(ST_INCOMPLETE)
            pos = gt + 1
            continue
        closing = data[pos + 1] == 47
        ns = pos + 2 if closing else pos + 1
        name = data[ns:ne]
        if gt >= n:
            raise _Stop(ST_INCOMPLETE)
        selfclose = data[gt - 1] == 47
        pos = gt + 1
        if not (closing and name == b"event") and _BOUNDARY.match(data, t0) is not None:
            raise _fail(st, ERR_EVENT_OPEN, t0, ns, ne)
        if closing:
            if name == b"event":
                if in_rwgt:
                    raise _fail(st, ERR_RWGT_OPEN, t0)
                return pos
            if in_rwgt and name == b"rwgt":
                in_rwgt = False
            continue
        if selfclose:
            continue
        if not in_rwgt and name == b"rwgt":
            in_rwgt = True
            continue
        if not in_rwgt and name == b"weights":
            line0 = pos
            spans, pos = _line_tokens(data, pos, n, False)
            for j, s in enumerate(spans[:nw]):
                wts[ev, j] = _float(data, s, st)
            if len(spans) != nw:
                raise _fail(st, ERR_WEIGHT_COUNT, pos, len(spans), nw)
            for j in range(nw):
                if j in seen:
                    raise _fail(st, ERR_DUP_WEIGHT, line0, j)
                seen.add(j)
            e = _end_tag(data, pos, n, b"</weights")
            if e == -1:
                raise _Stop(ST_INCOMPLETE)
            if e < 0:
                raise _fail(st, ERR_VALUE_CLOSE, pos, 3)
            pos = e
            continue
        if in_rwgt and name == b"wgt":
            col = -1
            if wid_s >= 0 and wid_e >= wid_s:
                col = col_of.get(data[wid_s:wid_e], -1)
            if col < 0:
                raise _fail(st, ERR_UNKNOWN_WEIGHT, t0, wid_s, wid_e)
            if col in seen:
                raise _fail(st, ERR_DUP_WEIGHT, pos, col)
            seen.add(col)
            start = pos
            spans, pos = _line_tokens(data, pos, n, False)
            if len(spans) != 1 or data[pos] != 60:
                raise _fail(st, ERR_WGT_VALUE, start, len(spans))
            wts[ev, col] = _float(data, spans[0], st)
            e = _end_tag(data, pos, n, b"</wgt")
            if e == -1:
                raise _Stop(ST_INCOMPLETE)
            if e < 0:
                raise _fail(st, ERR_VALUE_CLOSE, pos, 4)
            pos = e
            continue
        # any other element: skip to its closing tag, inside the event
        close = re.compile(b"</" + re.escape(name) + rb"[ \t\r\n>]")
        while True:
            mc = close.search(data, pos)
            mb = _BOUNDARY.search(data, pos)
            cm = data.find(b"<!--", pos)
            first = min(x for x in (mc.start() if mc else n, mb.start() if mb else n,
                                    cm if cm >= 0 else n))
            if cm >= 0 and cm == first and cm + 3 < n:  # a comment inside: skipped whole
                kind, gt, _s, _e = _tag(data, cm, n, True)
                if kind == -3:
                    raise _fail(st, ERR_UNCLOSED, t0, ns, ne)
                if gt >= n:
                    raise _Stop(ST_INCOMPLETE)
                pos = gt + 1
                continue
            break
        if mb is not None and (mc is None or mb.start() < mc.start()):
            raise _fail(st, ERR_UNCLOSED, t0, ns, ne)
        if mc is None:
            raise _Stop(ST_INCOMPLETE)
        e = data.find(b">", mc.start())
        pos = n + 1 if e < 0 else e + 1
