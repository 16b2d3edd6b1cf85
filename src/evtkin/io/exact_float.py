"""Correctly rounded ``w * 10**q`` as a float64, in compiled code, for any 64-bit ``w``.

The scanners convert a decimal token to a float by one multiplication or division when
its digits ``w`` are at most 2**53 and its decimal exponent ``q`` is within +-22
(Clinger's fast path: both operands are exact, so the one rounding is IEEE's). Event
files printed with 16 or 17 significant digits (``%.16e``, the common way to print a
double so that it reads back exactly) have ``w`` above 2**53 for nearly every value:
those tokens went to Python's ``float()``, about 30 MB/s.

:func:`decimal_to_float` covers them with the algorithm of D. Lemire, "Number parsing at
a gigabyte per second", Software: Practice and Experience 51 (2021) 1700-1727 (also
N. Eisel's earlier version of it): multiply the normalised ``w`` by a 128-bit
approximation of ``5**q`` and read the 53-bit significand off the high bits of the
product. Where the truncated bits could change the rounding (rare), or for a result
outside the normal range, it reports failure and the caller keeps its correct slow path,
so a result it does return is exactly Python's ``float()`` of the text (tests compare
millions of values, tests/test_exact_float.py).

The table is computed here from exact integers (no constants copied from elsewhere):
for ``q >= 0`` the top 128 bits of ``5**q`` (truncated), for ``q < 0`` the top 128 bits of
``2**b / 5**-q`` rounded up, and beside each the binary exponent that goes with it.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

__all__ = ["Q_MAX", "Q_MIN", "decimal_to_float", "jitted"]

Q_MIN = -342  # below: the value is 0 (or subnormal) whatever the 19 digits
Q_MAX = 308  # above: the value overflows


def _table() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(high 64 bits, low 64 bits, exponent) for q in [Q_MIN, Q_MAX]: 5**q is about
    ``(hi * 2**64 + lo) * 2**b`` with the 128-bit integer's top bit set, and the exponent
    column holds ``1214 + b + q`` (the biased binary exponent of ``w * 10**q`` for a
    normalised ``w`` whose product with ``hi`` has its top bit set; see decimal_to_float)."""
    n = Q_MAX - Q_MIN + 1
    hi = np.zeros(n, np.uint64)
    lo = np.zeros(n, np.uint64)
    ex = np.zeros(n, np.int64)
    mask = (1 << 64) - 1
    for q in range(Q_MIN, Q_MAX + 1):
        if q >= 0:
            v = 5**q
            L = v.bit_length()
            c = v << (128 - L) if L <= 128 else v >> (L - 128)  # truncated
            b = L - 128
        else:
            v = 5 ** (-q)
            b = v.bit_length() + 127
            c = (1 << b) // v + 1  # rounded up
            if c >> 128:  # (cannot happen for a power of 5, kept as a guard)
                c >>= 1
                b -= 1
            b = -b
        assert 1 << 127 <= c < 1 << 128
        i = q - Q_MIN
        hi[i], lo[i], ex[i] = c >> 64, c & mask, 1214 + b + q
    return hi, lo, ex


POW5_HI, POW5_LO, POW5_EXP = _table()
_M9 = np.uint64(0x1FF)
_ONE = np.uint64(1)
_TOP = np.uint64(1 << 53)
_HIDDEN = np.uint64((1 << 52) - 1)


def mul128(a: Any, b: Any) -> tuple[Any, Any]:
    """(high, low) 64-bit halves of the 128-bit product of two uint64 (Python version;
    compiled code uses one 64 x 64 -> 128 multiplication, see :func:`jitted`)."""
    p = int(a) * int(b)
    return np.uint64(p >> 64), np.uint64(p & ((1 << 64) - 1))


def clz64(x: Any) -> int:
    """Leading zero bits of a nonzero uint64 (Python version)."""
    return 64 - int(x).bit_length()


def bits_to_float(bits: Any) -> float:
    """The float64 whose IEEE bit pattern is ``bits`` (Python version)."""
    return float(np.array([bits], np.uint64).view(np.float64)[0])


def decimal_to_float(w: Any, q: int) -> tuple[float, bool]:
    """``(w * 10**q, True)`` correctly rounded (round half to even) for a uint64 ``w``,
    or ``(0.0, False)`` where this method cannot decide or the result is not a normal
    float64 (the caller then uses a slow path). Sign is the caller's; ``w == 0`` gives
    ``(0.0, True)``."""
    if w == 0:
        return 0.0, True
    if q < Q_MIN or q > Q_MAX:
        return 0.0, False
    i = q - Q_MIN
    lz = clz64(w)
    w = w << np.uint64(lz)
    hi, lo = mul128(w, POW5_HI[i])
    if (hi & _M9) == _M9 and lo + w < lo:  # the low half of the table entry may carry
        hi2, lo2 = mul128(w, POW5_LO[i])
        mid = lo + hi2
        if mid < lo:
            hi += _ONE
        if mid + _ONE == np.uint64(0) and (hi & _M9) == _M9 and lo2 + w < lo2:
            return 0.0, False  # still undecided
        lo = mid
    upper = hi >> np.uint64(63)
    mant = hi >> (upper + np.uint64(9))
    lz += 1 - np.int64(upper)
    if lo == np.uint64(0) and (hi & _M9) == np.uint64(0) and (mant & np.uint64(3)) == _ONE:
        # maybe exactly halfway between two floats. For 0 <= q <= 23 the table entry is
        # 5**q itself (< 2**64) and the product exact: when every bit below the rounding
        # bit is zero it is a tie, rounded to the even neighbour (down); elsewhere a tie
        # cannot be told from a value just above it: undecided
        if 0 <= q <= 23:
            if (hi & ((_ONE << (upper + np.uint64(9))) - _ONE)) == np.uint64(0):
                mant -= _ONE
        else:
            return 0.0, False
    mant += mant & _ONE
    mant >>= _ONE
    if mant >= _TOP:
        mant = _TOP >> _ONE
        lz -= 1
    e = POW5_EXP[i] - lz
    if e < 1 or e > 2046:
        return 0.0, False
    return bits_to_float((mant & _HIDDEN) | (np.uint64(e) << np.uint64(52))), True


# ------------------------------------------------------------------ compiled versions

_JITTED: Callable[..., Any] | None = None


def jitted() -> Callable[..., Any]:
    """The numba-compiled :func:`decimal_to_float` (``mul128``, ``clz64`` and
    ``bits_to_float`` become single LLVM instructions), for use inside other kernels."""
    global _JITTED
    if _JITTED is None:
        _register_intrinsics()
        from numba import njit

        _JITTED = njit(nogil=True, cache=True, error_model="numpy")(decimal_to_float)
    return _JITTED


_REGISTERED = False


def _register_intrinsics() -> None:
    global _REGISTERED
    if _REGISTERED:
        return
    import numba.extending
    from llvmlite import ir

    types: Any = numba.types
    intrinsic: Any = numba.extending.intrinsic
    overload: Any = numba.extending.overload

    u64 = types.uint64
    i128 = ir.IntType(128)
    i64 = ir.IntType(64)

    @intrinsic  # type: ignore[untyped-decorator]
    def _mul(typingctx: Any, a: Any, b: Any) -> Any:
        sig = types.UniTuple(u64, 2)(u64, u64)

        def codegen(context: Any, builder: Any, signature: Any, args: Any) -> Any:
            p = builder.mul(builder.zext(args[0], i128), builder.zext(args[1], i128))
            high = builder.trunc(builder.lshr(p, ir.Constant(i128, 64)), i64)
            return context.make_tuple(builder, signature.return_type, (high, builder.trunc(p, i64)))

        return sig, codegen

    @intrinsic  # type: ignore[untyped-decorator]
    def _clz(typingctx: Any, a: Any) -> Any:
        sig = types.int64(u64)

        def codegen(context: Any, builder: Any, signature: Any, args: Any) -> Any:
            return builder.ctlz(args[0], ir.Constant(ir.IntType(1), 0))

        return sig, codegen

    @intrinsic  # type: ignore[untyped-decorator]
    def _bits(typingctx: Any, a: Any) -> Any:
        sig = types.float64(u64)

        def codegen(context: Any, builder: Any, signature: Any, args: Any) -> Any:
            return builder.bitcast(args[0], ir.DoubleType())

        return sig, codegen

    @overload(mul128)
    def _mul128_impl(a, b):  # type: ignore[no-untyped-def]  # (numba: names as the function's)
        return lambda a, b: _mul(np.uint64(a), np.uint64(b))

    @overload(clz64)
    def _clz64_impl(x):  # type: ignore[no-untyped-def]
        return lambda x: _clz(np.uint64(x))

    @overload(bits_to_float)
    def _bits_impl(bits):  # type: ignore[no-untyped-def]
        return lambda bits: _bits(np.uint64(bits))

    _REGISTERED = True
