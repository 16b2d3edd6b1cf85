"""The compiled decimal -> float64 conversion (evtkin.io.exact_float) against Python's
``float()``, which is correctly rounded (round half to even, IEEE 754; CPython converts
with David Gay's correctly rounded algorithm)."""

from __future__ import annotations

import math
import warnings
from fractions import Fraction

import numpy as np
import pytest

from evtkin.io import exact_float as ef

numba = pytest.importorskip("numba")


@numba.njit
def _convert_all(ws, qs, out, ok):  # type: ignore[no-untyped-def]
    f = _F
    for i in range(ws.shape[0]):
        x, good = f(ws[i], qs[i])
        out[i] = x
        ok[i] = good


_F = ef.jitted()


def _check(ws: np.ndarray, qs: np.ndarray) -> tuple[int, np.ndarray]:
    """(mismatches against float(), ok flags)."""
    out = np.empty(ws.shape[0])
    ok = np.empty(ws.shape[0], np.bool_)
    _convert_all(ws, qs, out, ok)
    bad = 0
    for w, q, x, good in zip(ws.tolist(), qs.tolist(), out.tolist(), ok.tolist(), strict=True):
        if good and float(f"{w}e{q}") != x:  # Python float() is correctly rounded
            bad += 1
    return bad, ok


def test_seventeen_digit_values_match_float() -> None:
    # values printed with %.16e: 17 significant digits, mostly above 2**53 (so beyond
    # the one-operation exact conversion), exponents of typical momenta and positions
    rng = np.random.default_rng(20261203)
    ws = rng.integers(10**16, 10**17, 200_000, dtype=np.uint64)
    qs = rng.integers(-40, 10, 200_000).astype(np.int64)
    bad, ok = _check(ws, qs)
    assert bad == 0
    # undecided only for ties of values above 2**52 with a few decimals (q = -1..-4)
    assert ok[(qs < -4) | (qs >= 0)].all()
    assert ok.mean() > 0.999


def test_whole_range_and_64_bit_mantissas_match_float() -> None:
    rng = np.random.default_rng(7)
    n = 100_000
    ws = rng.integers(1, 2**63, n, dtype=np.int64).astype(np.uint64) * np.uint64(2)
    ws += rng.integers(0, 2, n).astype(np.uint64)
    ws[ws == 0] = 1
    qs = rng.integers(ef.Q_MIN, ef.Q_MAX + 1, n).astype(np.int64)
    bad, ok = _check(ws, qs)
    assert bad == 0
    # fails only outside the normal range (zero, subnormal or overflow: slow path)
    inner = (qs > -280) & (qs < 280)
    assert ok[inner].mean() > 0.999


def _near_halfway(rng: np.random.Generator, n: int) -> tuple[np.ndarray, np.ndarray]:
    """19-digit decimals just below, at and above the midpoint between a random double
    and the next one up: the inputs where rounding is hardest."""
    ws, qs = [], []
    for x in np.exp(rng.uniform(-60, 60, n)).tolist():
        mid = (Fraction(x) + Fraction(math.nextafter(x, math.inf))) / 2
        q = math.floor(math.log10(mid)) - 18  # 19 significant digits
        scaled = mid / Fraction(10) ** q
        w = int(scaled)
        for d in (-1, 0, 1, 2):
            if 0 < w + d < 2**64:
                ws.append(w + d)
                qs.append(q)
    return np.array(ws, np.uint64), np.array(qs, np.int64)


def test_near_halfway_values_match_float() -> None:
    ws, qs = _near_halfway(np.random.default_rng(11), 20_000)
    bad, ok = _check(ws, qs)
    assert bad == 0
    assert ok.mean() > 0.5  # some ties are left to the slow path, by design


def _ties() -> list[tuple[int, int]]:
    """(w, q) with w * 10**q exactly halfway between two doubles: an odd 54-bit number
    times a power of two (q = 0), or an odd 54-bit multiple of 5**q times 2**q."""
    out = [((2**53 + j) << s, 0) for j in (1, 3, 5, 7) for s in (0, 1, 5, 10)]
    for q in (1, 3, 7, 20):
        r = 2**53 // 5**q + 1
        out += [(r + j, q) for j in range(12) if (r + j) % 2 and 2**53 < (r + j) * 5**q < 2**54]
    return out


def test_exact_ties_round_half_to_even() -> None:
    ties = _ties()
    assert len(ties) > 20
    for w, q in ties:
        exact = Fraction(w * 10**q)
        want = float(f"{w}e{q}")  # Python float(): round half to even (IEEE 754)
        other = math.nextafter(want, math.inf if exact > want else -math.inf)
        assert exact - Fraction(want) == Fraction(other) - exact  # a true tie
        x, good = _F(np.uint64(w), q)
        assert good
        assert x == want


def test_python_version_agrees_with_the_compiled_one() -> None:
    rng = np.random.default_rng(3)
    ws = rng.integers(10**16, 10**19, 3000, dtype=np.uint64)
    qs = rng.integers(-330, 300, 3000).astype(np.int64)
    out = np.empty(3000)
    ok = np.empty(3000, np.bool_)
    _convert_all(ws, qs, out, ok)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # uint64 wrap-around is intended
        for i in range(3000):
            x, good = ef.decimal_to_float(ws[i], int(qs[i]))
            assert good == ok[i]
            if good:
                assert x == out[i]
