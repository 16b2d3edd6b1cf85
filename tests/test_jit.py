"""The kernel wrapper defers numba's extension entry points only for its own first call."""

from __future__ import annotations

import subprocess
import sys

import numpy as np

SCRIPT = r"""
import sys

import numpy as np
import numpy as np
from numba import njit
from numba.core import entrypoints
from evtkin.hists.fill import AxisSpec
AxisSpec.regular(4, 0.0, 1.0, name="x").index(np.array([0.1, 0.5, 2.0]))  # first evtkin kernel call
print("after_ours", entrypoints._already_initialized)

@njit
def user_function(x):
    return x + 1

user_function(1)  # a compilation that is not ours loads the extensions as usual
print("after_user", entrypoints._already_initialized)
"""


def test_extensions_deferred_then_loaded_for_other_code() -> None:
    # numba runs the ``numba_extensions`` entry points before its first compilation
    # (numba docs, "Entry points"; common practice for extension packages)
    out = subprocess.run(
        [sys.executable, "-c", SCRIPT], capture_output=True, text=True, check=True
    ).stdout.split()
    assert out == ["after_ours", "False", "after_user", "True"]


def test_deferred_block_restores_flag() -> None:
    from numba.core import entrypoints

    from evtkin._jit import deferred_extensions

    before = entrypoints._already_initialized
    with deferred_extensions():
        assert entrypoints._already_initialized is True
    assert entrypoints._already_initialized is before


def test_lean_compile_restores_numba_typing_even_after_an_error() -> None:
    import pytest
    from numba.core import types
    from numba.core.typing.context import BaseContext

    from evtkin._jit import lean_compile

    before = BaseContext.resolve_function_type
    with lean_compile():
        assert BaseContext.resolve_function_type is not before
        assert "get_call_type" in vars(types.Function)
    assert BaseContext.resolve_function_type is before
    assert "get_call_type" not in vars(types.Function)
    with pytest.raises(RuntimeError), lean_compile():
        raise RuntimeError("inside the block")
    assert BaseContext.resolve_function_type is before
    assert "get_call_type" not in vars(types.Function)


def _mixed_arithmetic(a, b, k):  # type: ignore[no-untyped-def]
    # integer, unsigned, float and boolean operations: many distinct call typings
    total = 0.0
    count = 0
    for i in range(a.shape[0]):
        x = a[np.uint64(i)]
        j = b[i] % k
        if (x > 0.5 and j != 3) or x < -1.0:
            total += x * j - (j // 2) + np.float64(np.uint64(j)) / 7.0
            count += 1
        elif j == 0:
            total -= abs(x) ** 2
    return total, count


def test_lean_pipeline_and_memo_compile_the_same_function() -> None:
    # the reference is numba's default pipeline on the same Python function
    from numba import njit

    from evtkin._jit import lean_compile, lean_pipeline

    rng = np.random.default_rng(7)
    a = rng.normal(size=5000)
    b = rng.integers(0, 1000, size=5000)
    reference = njit(_mixed_arithmetic)(a, b, 11)
    with lean_compile():
        lean = njit(pipeline_class=lean_pipeline())(_mixed_arithmetic)
        lean.compile((types_of(a), types_of(b), types_of(11)))
    assert lean(a, b, 11) == reference
    assert reference == _mixed_arithmetic(a, b, 11)  # and both match plain Python


def types_of(value):  # type: ignore[no-untyped-def]
    from numba import typeof

    return typeof(value)


def test_lean_compile_nests() -> None:
    from numba.core import types
    from numba.core.typing.context import BaseContext

    from evtkin._jit import lean_compile

    before = BaseContext.resolve_function_type
    with lean_compile():
        outer = BaseContext.resolve_function_type
        with lean_compile():
            assert BaseContext.resolve_function_type is not outer
        assert BaseContext.resolve_function_type is outer
        assert "get_call_type" in vars(types.Function)
    assert BaseContext.resolve_function_type is before
    assert "get_call_type" not in vars(types.Function)
