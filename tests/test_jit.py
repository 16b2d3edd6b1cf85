"""The kernel wrapper defers numba's extension entry points only for its own first call."""

from __future__ import annotations

import subprocess
import sys

SCRIPT = r"""
import sys
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
    out = subprocess.run([sys.executable, "-c", SCRIPT], capture_output=True, text=True,
                         check=True).stdout.split()
    assert out == ["after_ours", "False", "after_user", "True"]


def test_deferred_block_restores_flag() -> None:
    from numba.core import entrypoints

    from evtkin._jit import deferred_extensions

    before = entrypoints._already_initialized
    with deferred_extensions():
        assert entrypoints._already_initialized is True
    assert entrypoints._already_initialized is before
