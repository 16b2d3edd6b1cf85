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
    ERR_FEW_PARTICLES,
    ERR_LINE,
    ERR_MANY_PARTICLES,
    ERR_NUMBER,
    ERR_UNKNOWN_WEIGHT,
    ERR_WEIGHT_COUNT,
    ERR_WGT_VALUE,
    FULL_EVENTS,
    FULL_PARTICLES,
    ST_A,
    ST_B,
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
_TOP_TAG = re.compile(rb"<(/?)([^ \t\r\n>/]*)")
_TAG = re.compile(rb"""<(/?)([^ \t\r\n>/]*)((?:[^>"']|"[^"]*"|'[^']*')*)>""")
_ID_ATTR = re.compile(rb"""[ \t\n]id[ \t]*=[ \t]*(?:"([^"]*)"|'([^']*)')""")
_INT = re.compile(rb"^[+-]?\d{1,18}$")
_TOKEN = re.compile(rb"[^ \t\r\n<]+")


class _Stop(Exception):
    def __init__(self, status: int) -> None:
        self.status = status


class _Full(Exception):
    def __init__(self, which: int) -> None:
        self.which = which


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
        st[ST_ERRPOS] = span[0]
        raise _Stop(ERR_NUMBER)
    return v


def _line_error(st: np.ndarray, line0: int, expected: int) -> _Stop:
    st[ST_ERRPOS] = line0
    st[ST_B] = expected
    return _Stop(ERR_LINE)


def _check_line(
    data: bytes, spans: list[tuple[int, int]], pos: int, expected: int, st: np.ndarray
) -> None:
    """Field count and integer fields of an event (6) or particle (13) line."""
    line0 = spans[0][0] if spans else pos
    if len(spans) != expected:
        raise _line_error(st, line0, expected)
    n_int = 2 if expected == 6 else 6
    for s, e in spans[:n_int]:
        tok = data[s:e]
        if not _INT.match(tok) or not -(2**31) <= int(tok) <= 2**31 - 1:
            raise _line_error(st, line0, expected)
    if expected == 6 and int(data[spans[0][0] : spans[0][1]]) < 0:
        raise _line_error(st, line0, expected)


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
    col_of = {w: j for j, w in enumerate(ids)}
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
            pos = lt
            if data.startswith(b"<!--", pos):
                e = data.find(b"-->", pos + 4)
                if e < 0:
                    if not in_group:
                        commit = (ev, npart, pos)
                    raise _Stop(ST_INCOMPLETE)
                pos = e + 3
                continue
            mt = _TOP_TAG.match(data, pos)
            m = _TAG.match(data, pos)
            if m is None or mt is None or mt.end() >= n:
                if not in_group:
                    commit = (ev, npart, pos)
                raise _Stop(ST_INCOMPLETE)
            closing, name = mt.group(1), mt.group(2)
            if closing:
                if name == b"eventgroup" and in_group:
                    in_group = False
                    commit = (ev, npart, m.end())
                if name.startswith(b"L"):
                    st[ST_SAWEND] = 1
                pos = m.end()
                continue
            if name == b"eventgroup" or (name == b"event" and not in_group):
                if pos >= stop_at:
                    st[ST_STOPPED] = 1
                    commit = (ev, npart, pos)
                    break
                commit = (commit[0], commit[1], pos)
                if name == b"eventgroup":
                    in_group = True
                    g_first = ev
            if name != b"event" or m.group(3).endswith(b"/"):
                pos = m.end()
                continue
            # ------------------------------------------------ an <event>
            if ev >= ev_cap:
                raise _Full(FULL_EVENTS)
            pos = m.end()
            wts[ev, :] = np.nan
            spans, pos = _line_tokens(data, pos, n, True)
            _check_line(data, spans, pos, 6, st)
            nup = int(data[spans[0][0] : spans[0][1]])
            if npart + nup > p_cap:
                raise _Full(FULL_PARTICLES)
            ev_pid[ev] = int(data[spans[1][0] : spans[1][1]])
            ev_f[:, ev] = [_float(data, s, st) for s in spans[2:]]
            for ip in range(nup):
                spans, pos = _line_tokens(data, pos, n, True)
                if not spans:
                    st[ST_ERRPOS] = pos
                    st[ST_A] = nup
                    st[ST_B] = ip
                    raise _Stop(ERR_FEW_PARTICLES)
                _check_line(data, spans, pos, 13, st)
                row = npart + ip
                ints = [int(data[s:e]) for s, e in spans[:6]]
                ints[2] -= 1
                ints[3] -= 1
                p_i[:, row] = ints
                p_f[:, row] = [_float(data, s, st) for s in spans[6:]]
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
    if status >= 10:
        st[ST_EV], st[ST_NP] = ev, npart
    else:
        st[ST_EV], st[ST_NP], st[ST_POS] = commit
    st[ST_NSLOW] = 0
    return int(st[ST_EV])


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
    while True:
        while pos < n and data[pos] in _WS:
            pos += 1
        if pos >= n:
            raise _Stop(ST_INCOMPLETE)
        c = data[pos]
        if c == 35 and not in_rwgt:  # '#'
            e = data.find(b"\n", pos)
            pos = n if e < 0 else e
            continue
        if c != 60:
            if not in_rwgt and c in b"+-.0123456789":
                st[ST_ERRPOS] = pos
                st[ST_A] = nup
                raise _Stop(ERR_MANY_PARTICLES)
            while pos < n and data[pos] not in b"\n<":
                pos += 1
            continue
        if data.startswith(b"<!--", pos):
            e = data.find(b"-->", pos + 4)
            if e < 0:
                raise _Stop(ST_INCOMPLETE)
            pos = e + 3
            continue
        m = _TAG.match(data, pos)
        if m is None:
            raise _Stop(ST_INCOMPLETE)
        tag0 = pos
        closing, name, attrs = m.group(1), m.group(2), m.group(3)
        pos = m.end()
        if closing:
            if name == b"event":
                return pos
            if in_rwgt and name == b"rwgt":
                in_rwgt = False
            continue
        if attrs.endswith(b"/"):
            continue
        if not in_rwgt and name == b"rwgt":
            in_rwgt = True
            continue
        if not in_rwgt and name == b"weights":
            spans, pos = _line_tokens(data, pos, n, False)
            for j, s in enumerate(spans[:nw]):
                wts[ev, j] = _float(data, s, st)
            if len(spans) != nw:
                st[ST_ERRPOS] = pos
                st[ST_A] = len(spans)
                st[ST_B] = nw
                raise _Stop(ERR_WEIGHT_COUNT)
            e = data.find(b">", pos)
            pos = n if e < 0 else e + 1
            continue
        if in_rwgt and name == b"wgt":
            mid = _ID_ATTR.search(attrs)
            col = -1
            if mid is not None:
                wid = mid.group(1) if mid.group(1) is not None else mid.group(2)
                col = col_of.get(wid, -1)
            if col < 0:
                st[ST_ERRPOS] = tag0
                g = 1 if mid is not None and mid.group(1) is not None else 2
                base = tag0 + len(b"<") + len(name)
                st[ST_A] = base + mid.start(g) if mid is not None else -1
                st[ST_B] = base + mid.end(g) if mid is not None else -1
                raise _Stop(ERR_UNKNOWN_WEIGHT)
            start = pos
            spans, pos = _line_tokens(data, pos, n, False)
            if len(spans) != 1:
                st[ST_ERRPOS] = start
                st[ST_A] = len(spans)
                raise _Stop(ERR_WGT_VALUE)
            wts[ev, col] = _float(data, spans[0], st)
            e = data.find(b">", pos)
            pos = n if e < 0 else e + 1
            continue
        # any other element: skip to its closing tag
        close = re.compile(b"</" + re.escape(name) + rb"[ \t\r\n>]")
        mc = close.search(data, pos)
        if mc is None:
            raise _Stop(ST_INCOMPLETE)
        e = data.find(b">", mc.start())
        pos = e + 1
