"""The no-compile scanner: same inputs, outputs and error codes as the numba kernel.

Used by :func:`evtkin.read_lhe` when numba is unavailable or ``EVTKIN_NO_NUMBA=1`` is
set. It walks the buffer with compiled regular expressions (one match per tag or line)
and converts numbers with Python's ``float()``/``int()`` (through
:func:`evtkin.io.lhe_scan.parse_slow_token`, so ``D`` exponents are accepted), which makes
it exact by construction. It is an order of magnitude slower than the compiled kernel
(a Python step per line), but it needs nothing beyond numpy.

:func:`scan_kernel_py` has the signature and the ``out`` protocol of
:func:`evtkin.io.lhe_scan.scan_kernel`; see that module for the meaning of each array.
"""

from __future__ import annotations

import re

import numpy as np

from evtkin.io.lhe_scan import (
    ERR_FEW_PARTICLES,
    ERR_FIELD_COUNT,
    ERR_INTEGER,
    ERR_MANY_PARTICLES,
    ERR_NEGATIVE_NUP,
    ERR_NUMBER,
    ERR_UNKNOWN_WEIGHT,
    ERR_WEIGHT_COUNT,
    ERR_WGT_VALUE,
    ST_FULL,
    ST_INCOMPLETE,
    ST_OK,
    parse_slow_token,
)

__all__ = ["scan_kernel_py"]

_WS = b" \t\r\n"
_EVENT_OPEN = re.compile(rb"<event[ \t\r\n>]")
_TAG = re.compile(rb"""<(/?)([^ \t\r\n>/]*)((?:[^>"']|"[^"]*"|'[^']*')*)>""")
_ID_ATTR = re.compile(rb"""[ \t\n]id[ \t]*=[ \t]*(?:"([^"]*)"|'([^']*)')""")
_INT = re.compile(rb"^[+-]?\d{1,18}$")
_TOKEN = re.compile(rb"[^ \t\r\n<]+")


class _Stop(Exception):
    def __init__(self, status: int) -> None:
        self.status = status


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


def _float(data: bytes, span: tuple[int, int], out: np.ndarray) -> float:
    v = parse_slow_token(data[span[0] : span[1]])
    if v is None:
        out[4] = span[0]
        raise _Stop(ERR_NUMBER)
    return v


def _int(data: bytes, span: tuple[int, int], out: np.ndarray, lo: int, hi: int) -> int:
    tok = data[span[0] : span[1]]
    if not _INT.match(tok) or not lo <= int(tok) <= hi:
        out[4] = span[0]
        raise _Stop(ERR_INTEGER)
    return int(tok)


def scan_kernel_py(  # mirrors the compiled state machine
    buf: np.ndarray,
    start: int,
    wid_bytes: np.ndarray,
    wid_off: np.ndarray,
    nw: int,
    ev_pid: np.ndarray,
    ev_f: np.ndarray,
    ev_pos: np.ndarray,
    offsets: np.ndarray,
    p_i: np.ndarray,
    p_f: np.ndarray,
    wts: np.ndarray,
    slow: np.ndarray,
    tok_f: np.ndarray,
    tok_i: np.ndarray,
    out: np.ndarray,
) -> int:
    """Pure-Python/numpy twin of :func:`evtkin.io.lhe_scan.scan_kernel`."""
    data = bytes(buf)
    n = len(data)
    ids = [bytes(wid_bytes[wid_off[j] : wid_off[j + 1]]) for j in range(nw)]
    col_of = {w: j for j, w in enumerate(ids)}
    ev_cap = ev_pid.shape[0]
    p_cap = p_i.shape[1]
    ev = 0
    npart = 0
    offsets[0] = 0
    out[3] = ST_OK
    out[5] = start
    out[6] = 0
    pos = start
    ev_start = start
    try:
        while True:
            # ------------------------------------------------ between events
            lt = data.find(b"<", pos)
            if lt < 0:
                out[3] = ST_OK
                out[5] = n
                break
            pos = lt
            if pos + 6 >= n:
                out[3] = ST_INCOMPLETE
                out[5] = pos
                break
            if _EVENT_OPEN.match(data, pos):
                if ev >= ev_cap:
                    out[3] = ST_FULL
                    out[5] = pos
                    break
                ev_start = pos
                m = _TAG.match(data, pos)
                if m is None:
                    raise _Stop(ST_INCOMPLETE)
                pos = m.end()
                wts[ev, :] = np.nan
                # event line
                spans, pos = _line_tokens(data, pos, n, True)
                if len(spans) != 6:
                    out[4] = spans[0][0] if spans else pos
                    out[8] = len(spans)
                    out[9] = 6
                    raise _Stop(ERR_FIELD_COUNT)
                for s in spans[:2]:
                    if not _INT.match(data[s[0] : s[1]]):
                        out[4] = s[0]
                        raise _Stop(ERR_INTEGER)
                nup = int(data[spans[0][0] : spans[0][1]])
                if nup < 0:
                    out[4] = spans[0][0]
                    raise _Stop(ERR_NEGATIVE_NUP)
                if npart + nup > p_cap:
                    out[3] = ST_FULL
                    out[5] = ev_start
                    break
                pid = int(data[spans[1][0] : spans[1][1]])
                evf = [_float(data, s, out) for s in spans[2:]]
                ev_pid[ev] = pid
                ev_f[:, ev] = evf
                # particle lines
                for ip in range(nup):
                    spans, pos = _line_tokens(data, pos, n, True)
                    if not spans:
                        out[4] = pos
                        out[8] = nup
                        out[9] = ip
                        raise _Stop(ERR_FEW_PARTICLES)
                    if len(spans) != 13:
                        out[4] = spans[0][0]
                        out[8] = len(spans)
                        out[9] = 13
                        raise _Stop(ERR_FIELD_COUNT)
                    row = npart + ip
                    ints = [_int(data, s, out, -(2**31), 2**31 - 1) for s in spans[:6]]
                    ints[2] -= 1
                    ints[3] -= 1
                    p_i[:, row] = ints
                    p_f[:, row] = [_float(data, s, out) for s in spans[6:]]
                # optional information up to </event>
                in_rwgt = False
                wnext = 0
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
                            out[4] = pos
                            out[8] = nup
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
                            break
                        if in_rwgt and name == b"rwgt":
                            in_rwgt = False
                        continue
                    if attrs.endswith(b"/"):
                        continue
                    if not in_rwgt and name == b"rwgt":
                        in_rwgt = True
                        wnext = 0
                        continue
                    if not in_rwgt and name == b"weights":
                        spans, pos = _line_tokens(data, pos, n, False)
                        for j, s in enumerate(spans[:nw]):
                            wts[ev, j] = _float(data, s, out)
                        if len(spans) != nw:
                            out[4] = pos
                            out[8] = len(spans)
                            out[9] = nw
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
                            out[4] = tag0
                            g = 1 if mid is not None and mid.group(1) is not None else 2
                            base = tag0 + len(b"<") + len(name)
                            out[8] = base + mid.start(g) if mid is not None else -1
                            out[9] = base + mid.end(g) if mid is not None else -1
                            raise _Stop(ERR_UNKNOWN_WEIGHT)
                        wnext = col + 1
                        spans, pos = _line_tokens(data, pos, n, False)
                        if len(spans) != 1:
                            out[4] = spans[0][0] if spans else pos
                            out[8] = len(spans)
                            raise _Stop(ERR_WGT_VALUE)
                        wts[ev, col] = _float(data, spans[0], out)
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
                del wnext
                ev_pos[ev] = ev_start
                npart += nup
                offsets[ev + 1] = npart
                ev += 1
                continue
            if data.startswith(b"<!--", pos):
                e = data.find(b"-->", pos + 4)
                pos = n if e < 0 else e + 3
                continue
            if data.startswith(b"</L", pos):
                out[6] = 1
            e = data.find(b">", pos)
            if e < 0:
                out[3] = ST_INCOMPLETE
                out[5] = pos
                break
            pos = e + 1
    except _Stop as stop:
        out[3] = stop.status
        if stop.status == ST_INCOMPLETE:
            out[5] = ev_start
    out[0] = ev
    out[1] = npart
    out[2] = 0
    del slow, tok_f, tok_i  # the compiled kernel's scratch space; unused here
    return ev
