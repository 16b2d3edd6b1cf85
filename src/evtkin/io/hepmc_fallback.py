"""The Python scanner of HepMC event text, used when numba is unavailable or
``EVTKIN_NO_NUMBA=1`` is set.

Same arguments, grammar, checks, statuses and error positions as the compiled
:func:`evtkin.io.hepmc_scan.scan_kernel_source` (see its module docstring); lines are
split with ``bytes.split`` and numbers converted with ``int``/``float`` after a regular
expression has checked the token. Slower, never different (tests/test_hepmc_scanners.py).
"""

from __future__ import annotations

import re
from typing import Any

import numpy as np

from evtkin.io import hepmc_scan as c

__all__ = ["scan_py"]

_INT = re.compile(rb"[+-]?[0-9]+")
_FLOAT = re.compile(rb"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
_LIST_ITEM = re.compile(rb"[+-]?[0-9]{1,10}")
_SEPS = b" \t\r\x0b\x0c"
_ATTR = {b"alphaQCD": (2,), b"alphaQED": (3,), b"event_scale": (1,), b"GenCrossSection": (4, 5)}
_INT32 = c.INT32_MAX + 1


class _Bad(Exception):
    """A malformed line."""


def _int(tok: bytes | None, limit: int = _INT32) -> int:
    if tok is None or _INT.fullmatch(tok) is None:
        raise _Bad
    digits = tok.lstrip(b"+-").lstrip(b"0")
    if len(digits) > 18:
        raise _Bad
    v = int(tok)
    if abs(v) >= limit:
        raise _Bad
    return v


def _float(tok: bytes | None) -> float:
    if tok is None or _FLOAT.fullmatch(tok) is None:
        raise _Bad
    return float(tok)


class _Toks:
    def __init__(self, line: bytes) -> None:
        self.t = line.split()
        self.i = 1

    def next(self) -> bytes | None:
        if self.i < len(self.t):
            self.i += 1
            return self.t[self.i - 1]
        return None

    def done(self) -> bool:
        return self.i >= len(self.t)


def _list(tok: bytes | None) -> list[int]:
    if tok is None or not tok.startswith(b"[") or not tok.endswith(b"]") or len(tok) < 2:
        raise _Bad
    inner = tok[1:-1]
    if not inner:
        return []
    out = []
    for item in inner.split(b","):
        if _LIST_ITEM.fullmatch(item) is None:
            raise _Bad
        v = int(item)
        if abs(v) > c.INT32_MAX:
            raise _Bad
        out.append(v)
    return out


def _index(ids: list[int]) -> tuple[dict[int, int], int]:
    """(id -> first local index, local index of the first repeated id or -1)."""
    where: dict[int, int] = {}
    dup = -1
    for j, v in enumerate(ids):
        if v in where:
            if dup < 0:
                dup = j
        else:
            where[v] = j
    return where, dup


class _Event:
    def __init__(self, pos: int, p0: int, v0: int, nin0: int) -> None:
        self.pos = pos
        self.nin0 = nin0
        self.p0 = p0
        self.v0 = v0
        self.decl_np = 0
        self.decl_nv = 0
        self.nw_seen = False
        self.pids: list[int] = []
        self.prefs: list[int] = []
        self.ppos: list[int] = []
        self.vids: list[int] = []
        self.vpos: list[int] = []
        self.vin: list[list[int]] = []
        # IO_GenEvent: current vertex
        self.cur_v = -1
        self.rem_orph = 0
        self.rem_out = 0
        self.v_line = 0
        self.v_decl = 0


class _Fail(Exception):
    def __init__(self, code: int, errpos: int, a: int = 0, b: int = 0) -> None:
        self.code, self.errpos, self.a, self.b = code, errpos, a, b


def scan_py(
    buf: Any, cfg: Any, st: Any, ev_i: Any, ev_f: Any, p_off: Any, v_off: Any, p_i: Any,
    p_f: Any, v_i: Any, v_f: Any, wts: Any, pscr: Any, vscr: Any, inl: Any, slow: Any,
    errs: Any,
) -> int:  # fmt: skip
    """Scan ``buf`` into the columns; the arguments as for the compiled kernel."""
    data = buf.tobytes()
    n = len(data)
    form, k, final, stop, lenient = (int(cfg[i]) for i in range(5))
    v3 = form == c.FORM_V3
    end_line = c.end_marker(form)
    S = _State(data, k, v3, ev_i, ev_f, p_i, p_f, v_i, v_f, wts, pscr, vscr, inl)
    ne = 0
    nerr = 0
    p_off[0] = 0
    v_off[0] = 0
    ev: _Event | None = None
    status = c.ST_OK
    # line starts and ends (ends exclude the newline)
    starts = [0]
    idx = data.find(b"\n")
    while idx >= 0:
        starts.append(idx + 1)
        idx = data.find(b"\n", idx + 1)
    li = 0
    nlines = len(starts)

    def line_end(s: int) -> int:
        e = data.find(b"\n", s)
        return n if e < 0 else e

    def resume_after(li0: int) -> int:
        """Index of the first line after ``li0`` that starts an event or a HepMC:: line."""
        j = li0 + 1
        while j < nlines:
            s = starts[j]
            if s >= n:
                return nlines
            if (
                data[s : s + 1] == b"E" and s + 1 < n and data[s + 1] in _SEPS
            ) or data.startswith(b"HepMC::", s):
                return j
            j += 1
        return nlines

    while True:
        pos = starts[li] if li < nlines else n
        ls = pos
        code = 0
        errpos = 0
        ea = eb = 0
        finish = False
        closing = 0
        from_finish = False
        line = b""
        if pos >= n:
            if ev is None:
                break
            finish = True
            closing = 1
        else:
            line = data[pos : line_end(pos)]
            c0 = line[0:1]
            c1 = line[1:2]
            if line == b"":
                li += 1
                continue
            if line[0] in _SEPS:
                if line.strip() == b"":
                    li += 1
                    continue
                code, errpos = c.ERR_UNEXPECTED, ls
            elif line.startswith(b"HepMC::"):
                closing = 3
                finish = ev is not None
            elif c1 != b"" and c1 not in (b" ", b"\t", b"\r", b"\x0b", b"\x0c"):
                code, errpos = c.ERR_UNEXPECTED, ls
            elif c0 == b"E":
                closing = 4 if ls >= stop else 2
                finish = ev is not None
            elif ev is None:
                code, errpos = c.ERR_UNEXPECTED, ls
        if code == 0 and finish:
            assert ev is not None
            try:
                S.finish(ev)
            except _Fail as f:
                code, errpos, ea, eb = f.code, f.errpos, f.a, f.b
            if closing == 1 and final and (code != 0 or not data.endswith(b"\n")):
                ea = code
                code = c.ERR_CUT
                errpos = ev.pos
            from_finish = code != 0
            if code == 0:
                ne += 1
                p_off[ne] = S.npt
                v_off[ne] = S.nv
                ev = None
        if code == 0:
            if closing == 1:
                break
            if closing == 3:
                status = c.ST_END if line.rstrip(_SEPS) == end_line else c.ST_LISTING
                break
            if closing == 4:
                status = c.ST_STOPPED
                break
            try:
                if closing == 2:
                    ev = _Event(ls, S.npt, S.nv, S.nin)
                    S.event_line(ev, ne, line, ls)
                else:
                    assert ev is not None
                    S.line(ev, ne, line, ls)
            except _Fail as f:
                code, errpos, ea, eb = f.code, f.errpos, f.a, f.b
            if code == 0:
                li += 1
                continue
        # an error
        if (not from_finish and ev is not None and final and not data.endswith(b"\n")
                and line_end(ls) >= n):  # fmt: skip
            ea, code, errpos = code, c.ERR_CUT, ev.pos  # the last line is cut short
        ev_start = ev.pos if ev is not None else ls
        if not lenient:
            status = code
            st[c.ST_ERRPOS] = errpos
            st[c.ST_A] = ea
            st[c.ST_B] = eb
            st[c.ST_EVSTART] = ev_start
            break
        if code == c.ERR_CUT:
            nxt = nlines
        elif from_finish:
            nxt = li if closing != 1 else nlines
        else:
            nxt = resume_after(li)
        resume = starts[nxt] if nxt < nlines else n
        errs[nerr, :] = (ev_start, resume, errpos, code, ea, eb)
        nerr += 1
        S.npt = int(p_off[ne])
        S.nv = int(v_off[ne])
        if ev is not None:
            S.nin = ev.nin0
        ev = None
        li = nxt
    st[c.ST_EV] = ne
    st[c.ST_NP] = S.npt
    st[c.ST_NV] = S.nv
    st[c.ST_NSLOW] = 0
    st[c.ST_STATUS] = status
    st[c.ST_POS] = pos if status in (c.ST_END, c.ST_LISTING, c.ST_STOPPED) else n
    st[c.ST_NERR] = nerr
    return 0


class _State:
    """Column writers shared by the lines of one scan."""

    def __init__(
        self, data: bytes, k: int, v3: bool, ev_i: Any, ev_f: Any, p_i: Any, p_f: Any,
        v_i: Any, v_f: Any, wts: Any, pscr: Any, vscr: Any, inl: Any,
    ) -> None:  # fmt: skip
        self.data = data
        self.k = k
        self.v3 = v3
        self.ev_i, self.ev_f, self.p_i, self.p_f = ev_i, ev_f, p_i, p_f
        self.v_i, self.v_f, self.wts = v_i, v_f, wts
        self.pscr, self.vscr, self.inl = pscr, vscr, inl
        self.npt = 0
        self.nv = 0
        self.nin = 0

    # ---- E lines
    def event_line(self, ev: _Event, ne: int, line: bytes, ls: int) -> None:
        self.ev_i[1, ne] = 0
        self.ev_i[2, ne] = ls
        self.ev_i[3:, ne] = c.EV_INT_UNSET
        self.ev_f[:, ne] = np.nan
        t = _Toks(line)
        k = self.k
        try:
            num = _int(t.next(), c.INT64_LIMIT)
            if self.v3:
                ev.decl_nv = _int(t.next())
                ev.decl_np = _int(t.next())
                if ev.decl_nv < 0 or ev.decl_np < 0:
                    raise _Bad
                if not t.done():
                    if t.next() != b"@":
                        raise _Bad
                    for _ in range(4):
                        _float(t.next())
                    if not t.done():
                        raise _Bad
            else:
                _int(t.next())
                for d in (1, 2, 3):
                    self.ev_f[d, ne] = _float(t.next())
                self.ev_i[3, ne] = _int(t.next())  # process id
                _int(t.next())
                ev.decl_nv = _int(t.next())
                if ev.decl_nv < 0:
                    raise _Bad
                _int(t.next())
                _int(t.next())
                nrand = _int(t.next())
                if nrand < 0:
                    raise _Bad
                for _ in range(nrand):
                    tok = t.next()
                    if tok is None or _INT.fullmatch(tok) is None:
                        raise _Bad
                nw = _int(t.next())
                if nw < 0:
                    raise _Bad
                for j in range(nw):
                    x = _float(t.next())
                    if j < k:
                        self.wts[ne * k + j] = x
                if not t.done():
                    raise _Bad
                ev.nw_seen = True
                if nw != k:
                    self.ev_i[0, ne] = num
                    raise _Fail(c.ERR_WEIGHTS, ls, nw, k)
            self.ev_i[0, ne] = num
        except _Bad:
            raise _Fail(c.ERR_LINE, ls) from None

    # ---- other lines of an event
    def line(self, ev: _Event, ne: int, line: bytes, ls: int) -> None:
        c0 = line[0:1]
        v3 = self.v3
        t = _Toks(line)
        if c0 == b"P":
            if v3:
                self._p3(ev, t, ls)
            else:
                self._p2(ev, t, ls)
        elif c0 == b"V":
            if v3:
                self._v3(ev, t, ls)
            else:
                self._v2(ev, t, ls)
        elif c0 == b"U":
            toks = t.t
            flags = -1
            if len(toks) == 3:
                mom = {b"GEV": 0, b"MEV": c.UNIT_MEV}.get(toks[1], -1)
                ln = {b"MM": 0, b"CM": c.UNIT_CM}.get(toks[2], -1)
                if mom >= 0 and ln >= 0:
                    flags = mom + ln
            if flags < 0:
                raise _Fail(c.ERR_UNIT, ls)
            self.ev_i[1, ne] = flags
        elif c0 == b"W" and v3:
            if ev.nw_seen:
                raise _Fail(c.ERR_UNEXPECTED, ls)
            k = self.k
            vals = t.t[1:]
            try:
                for j, tok in enumerate(vals):
                    x = _float(tok)
                    if j < k:
                        self.wts[ne * k + j] = x
            except _Bad:
                raise _Fail(c.ERR_LINE, ls) from None
            ev.nw_seen = True
            if len(vals) != k:
                raise _Fail(c.ERR_WEIGHTS, ls, len(vals), k)
        elif c0 == b"C":
            try:
                self.ev_f[4, ne] = _float(t.next())
                self.ev_f[5, ne] = _float(t.next())
            except _Bad:
                raise _Fail(c.ERR_LINE, ls) from None
        elif c0 == b"A" and v3:
            try:
                aid = _int(t.next())
                name = t.t[2] if aid == 0 and len(t.t) > 2 else None
                t.i = 3
                if name in _ATTR:
                    for d in _ATTR[name]:
                        self.ev_f[d, ne] = _float(t.next())
                elif name == b"signal_process_id":
                    self.ev_i[3, ne] = _int(t.next())
                elif name == b"GenPdfInfo":
                    self._pdf_info(ne, t)
            except _Bad:
                raise _Fail(c.ERR_LINE, ls) from None
        elif c0 == b"F" and not v3:
            try:
                self._pdf_info(ne, t)
            except _Bad:
                raise _Fail(c.ERR_LINE, ls) from None
        elif (v3 and c0 in (b"T", b"N")) or (not v3 and c0 in (b"N", b"H")):
            pass
        else:
            raise _Fail(c.ERR_UNEXPECTED, ls)

    def _pdf_info(self, ne: int, t: _Toks) -> None:
        """``id1 id2 x1 x2 scale xf1 xf2 [set1 set2]`` (later values ignored)."""
        ids = (_int(t.next()), _int(t.next()))
        for d in range(6, 11):
            self.ev_f[d, ne] = _float(t.next())
        sets = (_int(t.next()), _int(t.next())) if not t.done() else (0, 0)
        self.ev_i[4:8, ne] = (*ids, *sets)

    def _p3(self, ev: _Event, t: _Toks, ls: int) -> None:
        i = self.npt
        try:
            pid = _int(t.next())
            ref = _int(t.next())
            pdg = _int(t.next())
            for d in range(5):
                self.p_f[d, i] = _float(t.next())
            stat = _int(t.next())
            if not t.done():
                raise _Bad
        except _Bad:
            raise _Fail(c.ERR_LINE, ls) from None
        self.p_i[:, i] = (pdg, stat, -1, -1)
        self.pscr[0, i], self.pscr[1, i], self.pscr[2, i] = pid, ref, ls
        ev.pids.append(pid)
        self.npt += 1

    def _p2(self, ev: _Event, t: _Toks, ls: int) -> None:
        if ev.cur_v < 0:
            raise _Fail(c.ERR_UNEXPECTED, ls)
        if ev.rem_orph == 0 and ev.rem_out == 0:
            raise _Fail(c.ERR_VCOUNT, ev.v_line, ev.v_decl, ev.v_decl + 1)
        i = self.npt
        try:
            bc = _int(t.next())
            pdg = _int(t.next())
            for d in range(5):
                self.p_f[d, i] = _float(t.next())
            stat = _int(t.next())
            _float(t.next())
            _float(t.next())
            endbc = _int(t.next())
            nflow = _int(t.next())
            if nflow < 0:
                raise _Bad
            for _ in range(2 * nflow):
                _int(t.next())
            if not t.done():
                raise _Bad
        except _Bad:
            raise _Fail(c.ERR_LINE, ls) from None
        if ev.rem_orph > 0:
            prod = -1
            ev.rem_orph -= 1
        else:
            prod = ev.cur_v
            ev.rem_out -= 1
        self.p_i[:, i] = (pdg, stat, prod, -1)
        self.pscr[0, i], self.pscr[1, i], self.pscr[2, i] = bc, endbc, ls
        self.npt += 1

    def _v3(self, ev: _Event, t: _Toks, ls: int) -> None:
        j = self.nv
        try:
            vid = _int(t.next())
            vst = _int(t.next())
            items = _list(t.next())
            pos4 = (0.0, 0.0, 0.0, 0.0)
            if not t.done():
                if t.next() != b"@":
                    raise _Bad
                pos4 = tuple(_float(t.next()) for _ in range(4))  # type: ignore[assignment]
                if not t.done():
                    raise _Bad
        except _Bad:
            raise _Fail(c.ERR_LINE, ls) from None
        self.v_f[:, j] = pos4
        self.v_i[j] = vst
        a = self.nin
        self.inl[a : a + len(items)] = items
        self.nin += len(items)
        self.vscr[:, j] = (vid, ls, a, self.nin)
        self.nv += 1

    def _v2(self, ev: _Event, t: _Toks, ls: int) -> None:
        if ev.cur_v >= 0 and (ev.rem_orph > 0 or ev.rem_out > 0):
            raise _Fail(c.ERR_VCOUNT, ev.v_line, ev.v_decl, ev.v_decl - ev.rem_orph - ev.rem_out)
        j = self.nv
        try:
            bc = _int(t.next())
            vst = _int(t.next())
            for d in range(4):
                self.v_f[d, j] = _float(t.next())
            no = _int(t.next())
            nout = _int(t.next())
            nw = _int(t.next())
            if no < 0 or nout < 0 or nw < 0:
                raise _Bad
            for _ in range(nw):
                _float(t.next())
            if not t.done():
                raise _Bad
        except _Bad:
            raise _Fail(c.ERR_LINE, ls) from None
        self.v_i[j] = vst
        self.vscr[0, j], self.vscr[1, j] = bc, ls
        ev.cur_v = j - ev.v0
        ev.rem_orph, ev.rem_out = no, nout
        ev.v_line, ev.v_decl = ls, no + nout
        self.nv += 1

    # ---- closing an event
    def finish(self, ev: _Event) -> None:
        if not self.v3:
            if ev.cur_v >= 0 and (ev.rem_orph > 0 or ev.rem_out > 0):
                raise _Fail(c.ERR_VCOUNT, ev.v_line, ev.v_decl,
                            ev.v_decl - ev.rem_orph - ev.rem_out)  # fmt: skip
            self._finish_v2(ev)
            return
        if self.k > 0 and not ev.nw_seen:
            raise _Fail(c.ERR_WEIGHTS, ev.pos, 0, self.k)
        self._finish_v3(ev)

    def _finish_v3(self, ev: _Event) -> None:
        p0, p1, v0 = ev.p0, self.npt, ev.v0
        pscr, vscr, p_i = self.pscr, self.vscr, self.p_i
        if p1 - p0 != ev.decl_np:
            raise _Fail(c.ERR_COUNT_P, ev.pos, ev.decl_np, p1 - p0)
        vids = vscr[0, v0 : self.nv].tolist()
        vwhere, vdup = _index(vids)
        if vdup >= 0:
            raise _Fail(c.ERR_DUP_ID, int(vscr[1, v0 + vdup]), vids[vdup])
        pids = pscr[0, p0:p1].tolist()
        pwhere, pdup = _index(pids)
        if pdup >= 0:
            raise _Fail(c.ERR_DUP_ID, int(pscr[2, p0 + pdup]), pids[pdup])
        for w in range(v0, self.nv):
            vline = int(vscr[1, w])
            for q in range(int(vscr[2, w]), int(vscr[3, w])):
                pid = int(self.inl[q])
                j = pwhere.get(pid, -1)
                if j < 0 or pscr[2, p0 + j] > vline:
                    raise _Fail(c.ERR_PARTICLE_REF, vline, pid)
                if p_i[3, p0 + j] != -1:
                    raise _Fail(c.ERR_TWO_END, vline, pid)
                p_i[3, p0 + j] = w - v0
        nx = self.nv
        for i in range(p0, p1):
            r = int(pscr[1, i])
            if r == 0:
                p_i[2, i] = -1
            elif r < 0:
                w = vwhere.get(r, -1)
                if w < 0 or vscr[1, v0 + w] > pscr[2, i]:
                    raise _Fail(c.ERR_VERTEX_REF, int(pscr[2, i]), r)
                p_i[2, i] = w
            else:
                j = pwhere.get(r, -1)
                if j < 0 or j >= i - p0:
                    raise _Fail(c.ERR_PARTICLE_REF, int(pscr[2, i]), r)
                e = int(p_i[3, p0 + j])
                if e == -1:
                    e = nx - v0
                    self.v_i[nx] = 0
                    self.v_f[:, nx] = 0.0
                    nx += 1
                    p_i[3, p0 + j] = e
                p_i[2, i] = e
        if nx - v0 != ev.decl_nv:
            raise _Fail(c.ERR_COUNT_V, ev.pos, ev.decl_nv, nx - v0)
        self.nv = nx

    def _finish_v2(self, ev: _Event) -> None:
        p0, p1, v0 = ev.p0, self.npt, ev.v0
        pscr, vscr, p_i = self.pscr, self.vscr, self.p_i
        if self.nv - v0 != ev.decl_nv:
            raise _Fail(c.ERR_COUNT_V, ev.pos, ev.decl_nv, self.nv - v0)
        vids = vscr[0, v0 : self.nv].tolist()
        vwhere, vdup = _index(vids)
        if vdup >= 0:
            raise _Fail(c.ERR_DUP_ID, int(vscr[1, v0 + vdup]), vids[vdup])
        for i in range(p0, p1):
            r = int(pscr[1, i])
            if r == 0:
                p_i[3, i] = -1
                continue
            w = vwhere.get(r, -1)
            if w < 0:
                raise _Fail(c.ERR_VERTEX_REF, int(pscr[2, i]), r)
            if w == p_i[2, i]:
                raise _Fail(c.ERR_LOOP, int(pscr[2, i]), int(pscr[0, i]))
            p_i[3, i] = w
