"""Numbers read by read_lhe are bit-identical to Python's float() on the same text."""

from __future__ import annotations

from pathlib import Path

import awkward as ak
import numpy as np
import pytest

import evtkin
from evtkin.io import lhe as lhe_mod
from evtkin.io.lhe_fallback import scan_kernel_py
from evtkin.io.lhe_scan import parse_slow_token
from lhe_textgen import minimal_file

N_LINES = 150_000  # x 7 float columns = 1.05 million values


def _random_tokens(rng: np.random.Generator, n: int) -> list[str]:
    """Number texts in the styles seen in LHE files, plus hard cases."""
    mant = rng.standard_normal(n) * 10.0 ** rng.integers(-12, 13, n)
    # mostly fast-path styles; 17/18-digit texts (slow path in Python) are rarer
    style = rng.choice(8, size=n, p=[0.4, 0.1, 0.05, 0.15, 0.1, 0.1, 0.05, 0.05])
    out = []
    for x, s in zip(mant.tolist(), style.tolist(), strict=True):
        if s == 0:
            t = f"{x:+.10e}"  # the common generator style
        elif s == 1:
            t = repr(x)  # shortest round-trip, up to 17 digits
        elif s == 2:
            t = f"{x:.17e}"  # 18 significant digits: needs the slow path
        elif s == 3:
            t = f"{x:.7E}".replace("E", "D")  # Fortran D exponent
        elif s == 4:
            t = f"{x:.15g}"
        elif s == 5:
            t = f"{x:.6f}"  # fixed point, often 0.000000 or -0.000000
        elif s == 6:
            t = f"{x * 1e290:.12e}" if x != 0 else "1e300"  # near the top of the range
        else:
            t = f"{x * 1e-300:.12e}"  # subnormals and underflow
        out.append(t)
    return out


def _write(path: Path, toks: list[str]) -> None:
    lines = []
    per_event = 10
    t = iter(toks)
    n_lines = len(toks) // 7
    for e in range(n_lines // per_event):
        lines.append(f"<event>\n {per_event} 1 1.0 91.1876 0.0078125 0.118\n")
        for _ in range(per_event):
            vals = " ".join(next(t) for _ in range(7))
            lines.append(f" 11 1 0 0 0 0 {vals}\n")
        lines.append("</event>\n")
        del e
    path.write_text(minimal_file("".join(lines)))


def _reference(toks: list[str]) -> np.ndarray:
    return np.array([float(x.replace("D", "E")) for x in toks], dtype=np.float64)


@pytest.fixture(scope="module")
def big_file(tmp_path_factory):
    rng = np.random.default_rng(7)
    toks = _random_tokens(rng, N_LINES * 7)
    path = tmp_path_factory.mktemp("floats") / "floats.lhe"
    _write(path, toks)
    return path, toks


def _read_columns(path: Path) -> np.ndarray:
    ev = ak.concatenate(list(evtkin.read_lhe(path)))
    p = ak.flatten(ev.particles)
    cols = [p[f].to_numpy() for f in ("px", "py", "pz", "energy", "mass", "lifetime", "spin")]
    return np.stack(cols, axis=1).reshape(-1)


def test_millions_of_values_bit_identical_to_float(big_file):
    path, toks = big_file
    got = _read_columns(path)
    ref = _reference(toks[: got.size])
    assert got.size == N_LINES * 7
    # Python float() is the reference (correctly rounded decimal -> binary64)
    assert np.array_equal(got.view(np.int64), ref.view(np.int64))


def test_exact_on_known_hard_cases(tmp_path):
    hard = [
        "0.1",
        "0.3",
        "2.2250738585072011e-308",
        "2.2250738585072014e-308",
        "4.9e-324",
        "1.7976931348623157e308",
        "9007199254740993",
        "9007199254740992.0",
        "123456789012345678",
        "1e23",
        "8.98846567431158e307",
        "5e-324",
        "-0.0",
        "+0.0",
        "0.000000000000000000000000000001",
        "1.0000000000000002",
        "3.0000000000000004D+00",
        "1e22",
        "1e-22",
        "4503599627370497.5",
        "1.1+120",
        "7.00000000000000000000001",
    ]
    toks = (hard * 7)[: 7 * 10]
    path = tmp_path / "hard.lhe"
    _write(path, toks)
    got = _read_columns(path)
    ref = np.array([parse_slow_token(t.encode()) for t in toks])
    assert np.array_equal(got.view(np.int64), ref.view(np.int64))
    # the slow-path converter itself agrees with float() (Fortran forms rewritten)
    assert parse_slow_token(b"1.1+120") == float("1.1E+120")
    assert parse_slow_token(b"-2.5D-3") == float("-2.5e-3")
    assert parse_slow_token(b"1.2.3") is None


def test_fallback_bit_identical(tmp_path, monkeypatch):
    rng = np.random.default_rng(11)
    toks = _random_tokens(rng, 7 * 2000)
    path = tmp_path / "f.lhe"
    _write(path, toks)
    compiled = _read_columns(path)
    monkeypatch.setattr(lhe_mod, "_KERNEL", scan_kernel_py)
    monkeypatch.setattr(lhe_mod, "_KIND", "fallback")
    slow = _read_columns(path)
    assert np.array_equal(compiled.view(np.int64), slow.view(np.int64))
    assert np.array_equal(slow.view(np.int64), _reference(toks).view(np.int64))


def test_sixteen_digit_exponent_values_need_no_slow_path(tmp_path, monkeypatch):
    # %.16e (17 significant digits, the usual way to print a double exactly) is read by
    # the compiled scanner itself, bit-identical to Python's float() (correctly rounded)
    rng = np.random.default_rng(5)
    vals = rng.standard_normal(7 * 3000) * 10.0 ** rng.integers(-6, 5, 7 * 3000)
    toks = [f"{x:.16e}" for x in vals]
    path = tmp_path / "e16.lhe"
    _write(path, toks)
    if lhe_mod._kernel()[1] != "numba":
        pytest.skip("the compiled scanner is not in use")

    def no_slow(*args):
        raise AssertionError("a %.16e token went to the slow path")

    monkeypatch.setattr(lhe_mod.c, "fix_slow_values", no_slow)
    got = _read_columns(path)
    assert np.array_equal(got.view(np.int64), _reference(toks).view(np.int64))
