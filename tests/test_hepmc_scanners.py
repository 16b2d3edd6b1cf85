"""The compiled HepMC scanner and the Python fallback agree: same columns, statuses, error
positions and skipped events, on random valid and damaged event text (property-based)."""

from __future__ import annotations

import tempfile
from pathlib import Path

import awkward as ak
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import evtkin
from evtkin.io import hepmc_scan as c
from evtkin.io.hepmc import Parsed, scan_buffer
from evtkin.io.hepmc_fallback import scan_py
from hepmc_textgen import random_events

KERNEL = c.compiled_kernel()
pytestmark = pytest.mark.skipif(KERNEL is None, reason="numba is not available")


def _text(form: str, seed: int, n: int) -> bytes:
    ev = random_events(n, seed=seed, grouped=form == "IO_GenEvent")
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "t.hepmc"
        evtkin.write_hepmc(path, ev, form=form, weight_names=("a", "b"),
                           precision=[None, 6, 17][seed % 3])  # fmt: skip
        data = path.read_bytes()
    return data[data.index(b"\nE ") + 1 :]


TEXTS = {(form, s): _text(form, s, 6) for form in ("Asciiv3", "IO_GenEvent") for s in range(3)}

_JUNK = [b" ", b"\n", b"x", b"-", b"1", b".", b"e", b"@", b"[", b",", b"]", b"\r", b"E ",
         b"P ", b"V ", b"99999999999999999999", b"0", b"\t", b"HepMC::x\n", b"1e400",
         b"-1", b"U MEV CM\n", b"A 0 alphaQCD 0.1\n", b"\x00", b"\xff",
         b"A 0 signal_process_id 7\n", b"A 0 GenPdfInfo 21 2 0.1 0.2 91.2 0.3 0.4\n",
         b"F 21 -1 1e-3 0.5 10 2.5 0.125 303400 303400\n", b"F 1 2 0.1 0.2 3 4 5 6\n"]  # fmt: skip


@st.composite
def damaged(draw: st.DrawFn) -> tuple[int, bytes]:
    form = draw(st.sampled_from(["Asciiv3", "IO_GenEvent"]))
    text = bytearray(TEXTS[(form, draw(st.integers(0, 2)))])
    for _ in range(draw(st.integers(0, 4))):
        kind = draw(st.integers(0, 4))
        at = draw(st.integers(0, len(text)))
        if kind == 0 and len(text) > 1:  # delete a few bytes
            del text[at : at + draw(st.integers(1, 12))]
        elif kind == 1:  # insert junk
            text[at:at] = draw(st.sampled_from(_JUNK))
        elif kind == 2:  # swap two lines
            lines = bytes(text).split(b"\n")
            i, j = draw(st.integers(0, len(lines) - 1)), draw(st.integers(0, len(lines) - 1))
            lines[i], lines[j] = lines[j], lines[i]
            text = bytearray(b"\n".join(lines))
        elif kind == 3:  # cut short
            text = text[:at]
        else:  # change a digit
            digits = [k for k in range(len(text)) if 48 <= text[k] <= 57]
            if digits:
                text[digits[at % len(digits)]] = 48 + draw(st.integers(0, 9))
    return (3 if form == "Asciiv3" else 2), bytes(text)


def _compare(a: Parsed, b: Parsed) -> None:
    for name in ("status", "errpos", "a", "b", "n_ev", "n_done"):
        assert getattr(a, name) == getattr(b, name), name
    if a.status < c.ERR_LINE:
        assert a.pos == b.pos
    np.testing.assert_array_equal(a.errs, b.errs)
    for name in ("ev_i", "ev_f", "wts", "p_off", "v_off", "p_i", "p_f", "v_i", "v_f"):
        x, y = getattr(a, name), getattr(b, name)
        assert x.shape == y.shape, name
        # bit-identical floats (NaN where absent on both sides)
        np.testing.assert_array_equal(x.view(np.int64) if x.dtype == np.float64 else x,
                                      y.view(np.int64) if y.dtype == np.float64 else y,
                                      err_msg=name)  # fmt: skip


@settings(max_examples=250, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])  # fmt: skip
@given(damaged(), st.booleans(), st.integers(0, 3))
def test_scanners_agree(case: tuple[int, bytes], lenient: bool, stop_at: int) -> None:
    form, text = case
    arr = np.frombuffer(text, np.uint8)
    stop = 1 << 62 if stop_at == 0 else len(text) * stop_at // 4
    for final in (True, False):
        a = scan_buffer(KERNEL, arr, form, 2, final, stop, lenient)
        b = scan_buffer(scan_py, arr, form, 2, final, stop, lenient)
        _compare(a, b)


@pytest.mark.parametrize("key", sorted(TEXTS))
def test_valid_text_reads_whole(key: tuple[str, int]) -> None:
    text = TEXTS[key]
    form = 3 if key[0] == "Asciiv3" else 2
    arr = np.frombuffer(text, np.uint8)
    a = scan_buffer(KERNEL, arr, form, 2, True, 1 << 62, False)
    b = scan_buffer(scan_py, arr, form, 2, True, 1 << 62, False)
    _compare(a, b)
    assert a.status == c.ST_END
    assert a.n_ev == 6


def test_float_tokens_exact() -> None:
    # correctly rounded like Python's float(): fast path and slow path (>18 digits, big
    # exponents) alike (IEEE 754 round-to-nearest, as CPython's float() does)
    rng = np.random.default_rng(3)
    vals = np.concatenate([rng.normal(0, 1e3, 200), 10.0 ** rng.uniform(-30, 30, 200)])
    toks = [repr(float(x)) for x in vals] + [f"{x:.6e}" for x in vals[:50]]
    toks += ["0.1", "-0.0", "1e22", "1e23", "9007199254740993", "123456789012345678901",
             ".5", "5.", "+1.5E+02", "4.9e-324", "1e-400", "1e400"]  # fmt: skip
    lines = [f"P {i + 1} 0 22 {t} 0 0 0 0 1" for i, t in enumerate(toks)]
    text = (f"E 1 0 {len(toks)}\nU GEV MM\nW 1 2\n" + "\n".join(lines) + "\n").encode()
    arr = np.frombuffer(text, np.uint8)
    got = scan_buffer(KERNEL, arr, 3, 2, True, 1 << 62, False)
    assert got.status == c.ST_OK
    assert got.p_f[0].tolist() == [float(t) for t in toks]
    assert ak.Array(got.p_f[0]).tolist() == scan_buffer(scan_py, arr, 3, 2, True, 1 << 62,
                                                        False).p_f[0].tolist()  # fmt: skip


def test_sixteen_digit_exponent_floats_exact_without_slow_path(monkeypatch) -> None:  # type: ignore[no-untyped-def]
    # files printed with %.16e (17 significant digits: the usual way to print a double so
    # that it reads back exactly) are read by the compiled scanner itself, bit-identical
    # to Python's float() (correctly rounded, IEEE 754), not by the per-token slow path
    rng = np.random.default_rng(17)
    vals = np.concatenate([rng.normal(0, 300.0, 3000), 10.0 ** rng.uniform(-12, 5, 3000)])
    vals[::7] *= -1
    toks = [f"{x:.16e}" for x in vals]
    lines, vlines = [], []
    for i in range(0, len(toks) - 5, 5):
        lines.append(f"P {len(lines) + 1} 0 22 {' '.join(toks[i : i + 5])} 1")
    for i in range(0, 400, 4):
        vlines.append(f"V -{len(vlines) + 1} 0 [{len(vlines) + 1}] @ {' '.join(toks[i : i + 4])}")
    text = (f"E 1 {len(vlines)} {len(lines)}\nU GEV MM\nW 1 2\n" + "\n".join(lines) + "\n"
            + "\n".join(vlines) + "\n").encode()  # fmt: skip

    def no_slow(*args: object) -> None:
        raise AssertionError("a %.16e token went to the slow path")

    monkeypatch.setattr(c, "fix_slow", no_slow)
    arr = np.frombuffer(text, np.uint8)
    got = scan_buffer(KERNEL, arr, 3, 2, True, 1 << 62, False)
    assert got.status == c.ST_OK
    want = np.array([float(t) for t in toks[: 5 * len(lines)]]).reshape(-1, 5).T
    np.testing.assert_array_equal(got.p_f.view(np.int64), want.view(np.int64))
    vwant = np.array([float(t) for t in toks[: 4 * len(vlines)]]).reshape(-1, 4).T
    np.testing.assert_array_equal(got.v_f.view(np.int64), vwant.view(np.int64))


def test_io_genevent_flows_and_vertex_weights_change_no_column() -> None:
    # IO_GenEvent P lines may end in colour-flow pairs and V lines in vertex weights
    # (HepMC2 IO_GenEvent layout, see the module docstring of evtkin.io.hepmc_scan): the
    # scanners check and skip them, so the particle and vertex columns are those of the
    # same text without them, and the compiled and the fallback scanner agree
    text = TEXTS[("IO_GenEvent", 1)]
    out = []
    for i, line in enumerate(text.split(b"\n")):
        t = line.split()
        if line.startswith(b"P ") and t[-1] == b"0":
            t[-1] = b"2 1 %d 2 %d" % (501 + i, 502 + i) if i % 2 else b"1 1 -7"
        elif line.startswith(b"V ") and t[-1] == b"0":
            t[-1] = b"2 0.5 1.25e-3"
        out.append(b" ".join(t) if t else line)
    changed = b"\n".join(out)
    assert changed.count(b" 501") + changed.count(b" 1 -7") > 10
    plain = np.frombuffer(text, np.uint8)
    rich = np.frombuffer(changed, np.uint8)
    a = scan_buffer(KERNEL, plain, 2, 2, True, 1 << 62, False)
    b = scan_buffer(KERNEL, rich, 2, 2, True, 1 << 62, False)
    assert a.status == b.status == c.ST_END
    for name in ("ev_i", "ev_f", "wts", "p_off", "v_off", "p_i", "p_f", "v_i", "v_f"):
        x, y = getattr(a, name), getattr(b, name)
        if name == "ev_i":  # (row 2 holds the event lines' offsets)
            x, y = np.delete(x, 2, axis=0), np.delete(y, 2, axis=0)
        np.testing.assert_array_equal(x, y, err_msg=name)
    _compare(b, scan_buffer(scan_py, rich, 2, 2, True, 1 << 62, False))
