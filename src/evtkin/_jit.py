"""Compiled kernels without the start-up cost of unrelated numba extensions.

numba runs every installed package's ``numba_extensions`` entry point before its first
compilation in a process (including loading a kernel from the on-disk cache). In our
environment that imports the numba backend of ``vector`` and more, about 0.7 s and 20 MB,
although no evtkin kernel uses them: evtkin's kernels take plain numpy arrays and scalars.

:func:`kernel` wraps ``numba.njit(nogil=True, cache=True)``: the first call of the kernel
(which compiles it or loads it from the cache) runs with the extension loading deferred.
Deferral is temporary and exact: it holds numba's own compiler lock, so no other
compilation can run meanwhile, and it restores numba's flag afterwards, so the next
compilation that is not ours (say, a user's function taking awkward arrays) loads the
extensions as usual. Kernels called from other kernels must stay plain dispatchers
(:func:`plain`), because compiled code cannot call the Python wrapper.
"""

from __future__ import annotations

import contextlib
import functools
from collections.abc import Callable, Iterator
from typing import Any, TypeVar

__all__ = ["deferred_extensions", "first_call_deferred", "kernel", "plain", "wide_vectors"]

F = TypeVar("F", bound=Callable[..., Any])


@contextlib.contextmanager
def deferred_extensions() -> Iterator[None]:
    """Compile (or load) numba code inside the block without running numba's extension
    entry points, unless they have run already."""
    try:
        from numba.core import entrypoints
        from numba.core.compiler_lock import global_compiler_lock
    except ImportError:  # pragma: no cover - numba internals moved: just compile normally
        yield
        return
    with global_compiler_lock:
        saved = entrypoints._already_initialized
        entrypoints._already_initialized = True
        try:
            yield
        finally:
            entrypoints._already_initialized = saved


def plain(**options: Any) -> Callable[[F], F]:
    """``numba.njit(nogil=True, cache=True, **options)``, for kernels called by kernels."""
    from numba import njit

    def wrap(fn: F) -> F:
        return njit(nogil=True, cache=True, **options)(fn)  # type: ignore[no-any-return]

    return wrap


def first_call_deferred(dispatcher: F) -> F:
    """A wrapper of a numba ``dispatcher`` whose first call defers numba's extension
    loading (see the module docstring). ``.dispatcher`` is the numba dispatcher."""
    ready = False

    @functools.wraps(dispatcher)
    def call(*args: Any) -> Any:
        nonlocal ready
        if ready:
            return dispatcher(*args)
        with deferred_extensions():
            out = dispatcher(*args)
        ready = True
        return out

    call.dispatcher = dispatcher  # type: ignore[attr-defined]
    return call  # type: ignore[return-value]


def kernel(**options: Any) -> Callable[[F], F]:
    """``numba.njit(nogil=True, cache=True, **options)`` wrapped by
    :func:`first_call_deferred`."""
    from numba import njit

    def wrap(fn: F) -> F:
        wrapped = first_call_deferred(njit(nogil=True, cache=True, **options)(fn))
        wrapped.py_func = fn  # type: ignore[attr-defined]
        return wrapped

    return wrap


def _make_wide_vectors() -> Any:
    from numba import types
    from numba.extending import intrinsic

    @intrinsic  # type: ignore[misc]
    def wide_vectors(typingctx: Any) -> Any:
        """Call first in a kernel: let LLVM vectorise its loops with 512-bit registers.

        LLVM prefers 256-bit vectors on CPUs with AVX-512 (a tuning default for mixed code,
        where wide instructions may lower the clock). For a kernel that is one long
        vectorised loop of loads, adds and stores, twice the width per instruction pays:
        bench/bench_fill.py measured the row-adding loop of the histogram fill ~1.6x
        faster. The hint is an LLVM function attribute of the calling kernel only; on CPUs
        without 512-bit vectors it changes nothing.
        """
        sig = types.void()

        def codegen(context: Any, builder: Any, signature: Any, args: Any) -> Any:
            attrs = builder.function.attributes
            # llvmlite checks attribute names against a fixed list that lacks these
            # string attributes; the set underneath takes them as written
            set.add(attrs, '"prefer-vector-width"="512"')
            set.add(attrs, '"min-legal-vector-width"="512"')
            return context.get_dummy_value()

        return sig, codegen

    return wide_vectors


try:
    wide_vectors = _make_wide_vectors()
except ImportError:  # pragma: no cover - without numba there are no kernels to tune
    wide_vectors = None
