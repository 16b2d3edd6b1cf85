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
import hashlib
import inspect
import types as pytypes
from collections.abc import Callable, Iterator
from typing import Any, TypeVar, cast

__all__ = [
    "deferred_extensions",
    "first_call_deferred",
    "kernel",
    "lean_compile",
    "lean_pipeline",
    "plain",
    "tie_cache_to_callees",
    "wide_vectors",
]

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


@contextlib.contextmanager
def lean_compile() -> Iterator[None]:
    """Type the numba code compiled inside the block with memoised call typing (less
    compile time for large kernels). Holds numba's compiler lock throughout.

    numba types every call site afresh (operators, ``getitem``, number classes such as
    ``np.uint64``) and again at every step of its type propagation, and its lowering
    asks once more: the LHE scan kernel resolves ~3900 calls of ~200 distinct kinds,
    ~2.5 s of its cold compile. The typing of a call to one of numba's built-in
    functions depends on nothing but the argument types, so inside the block each
    distinct (function, argument types) is resolved once and the same signature is
    returned afterwards. Calls of compiled functions (dispatchers) and everything else
    are resolved as before; numba's own methods are restored when the block ends.
    """
    try:
        from numba.core import types
        from numba.core.compiler_lock import global_compiler_lock
        from numba.core.typing.context import BaseContext
    except ImportError:  # pragma: no cover - numba internals moved: compile normally
        yield
        return

    by_context: Callable[..., Any] = BaseContext.resolve_function_type
    by_function: Callable[..., Any] = types.Function.get_call_type  # (from its base class)
    own = "get_call_type" in vars(types.Function)
    memo: dict[Any, Any] = {}

    def once(what: Any, func: Any, args: Any, kws: Any, resolve: Callable[[], Any]) -> Any:
        try:
            key = (what, func, tuple(args), tuple(sorted(kws.items())))
            if key in memo:
                return memo[key]
        except TypeError:  # pragma: no cover - an unhashable type: no memo
            return resolve()
        memo[key] = out = resolve()
        return out

    def context_resolve(self: Any, func: Any, args: Any, kws: Any) -> Any:
        if isinstance(func, (types.Function, types.NumberClass)):
            return once((0, self), func, args, kws, lambda: by_context(self, func, args, kws))
        return by_context(self, func, args, kws)

    def function_resolve(self: Any, context: Any, args: Any, kws: Any) -> Any:
        return once((1, context), self, args, kws, lambda: by_function(self, context, args, kws))

    with global_compiler_lock:
        BaseContext.resolve_function_type = context_resolve  # type: ignore[method-assign]
        types.Function.get_call_type = function_resolve  # type: ignore[method-assign]
        try:
            yield
        finally:
            if own:  # pragma: no cover - (not so in the numba versions we use)
                types.Function.get_call_type = by_function  # type: ignore[method-assign]
            else:
                del types.Function.get_call_type
            BaseContext.resolve_function_type = by_context  # type: ignore[method-assign]


def lean_pipeline() -> Any:
    """A numba compiler class (``njit(pipeline_class=...)``): numba's own nopython
    pipeline without two passes that change nothing in straight-line numeric kernels
    (no closures, comprehensions or array expressions) but walk every block of the
    function: inlining of closure-like calls, and the rewrites after typing (array
    expressions and the like). For the LHE scan kernel they took ~1.5 s of its cold
    compile and left its IR unchanged. Use only for kernels known to have no such code:
    a kernel that does would still compile, only without those rewrites or fail typing,
    never silently differ."""
    from numba.core.compiler import CompilerBase, DefaultPassBuilder

    skipped = ("inline_closure_likes", "nopython_rewrites")  # numba's pass names

    class LeanCompiler(CompilerBase):  # type: ignore[misc]
        def define_pipelines(self) -> list[Any]:
            define: Callable[..., Any] = DefaultPassBuilder.define_nopython_pipeline
            pm = define(self.state)
            pm.passes = [entry for entry in pm.passes if entry[0].name() not in skipped]
            pm.finalize()
            return [pm]

    return LeanCompiler


def plain(**options: Any) -> Callable[[F], F]:
    """``numba.njit(nogil=True, cache=True, **options)``, for kernels called by kernels."""
    from numba import njit

    def wrap(fn: F) -> F:
        dispatcher = njit(nogil=True, cache=True, **options)(fn)
        tie_cache_to_callees(dispatcher)
        return cast(F, dispatcher)

    return wrap


def tie_cache_to_callees(dispatcher: Any) -> None:
    """Make the on-disk cache of a compiled function go stale when a compiled function it
    calls, defined in another file, changes.

    numba keys a cached function on the contents of its own source file only, yet compiles
    the compiled functions it calls into it: after an edit of such a callee in another file
    (``io/exact_float.py`` for both scanners), the cache would go on serving the old code.
    The callees are found through the global names the function's code uses (a module's
    attributes too), then theirs in turn; the sha256 of each of their files is added to the
    stamp numba compares with the one stored beside the cached code. Call it once the
    callees are bound (at decoration for module-level imports); without numba's cache (or
    if numba's internals moved) it does nothing."""
    try:
        cache_file = dispatcher._cache._cache_file
        stamp = cache_file._source_stamp
        own = inspect.getfile(dispatcher.py_func)
    except (AttributeError, TypeError):
        return
    files = sorted(_callee_files(dispatcher.py_func) - {own})
    if files:
        cache_file._source_stamp = (stamp, *(_file_hash(f) for f in files))


def _callee_files(fn: Any) -> set[str]:
    """Source files of the numba dispatchers ``fn`` calls, directly or through them."""
    from numba.core.dispatcher import Dispatcher

    files: set[str] = set()
    seen: set[int] = set()
    todo = [fn]
    while todo:
        f = todo.pop()
        if id(f) in seen:
            continue
        seen.add(id(f))
        names = set(_code_names(f.__code__))
        scope = getattr(f, "__globals__", {})
        for name in names:
            value = scope.get(name)
            found = ([getattr(value, m, None) for m in names]
                     if isinstance(value, pytypes.ModuleType) else [value])
            for callee in found:
                if isinstance(callee, Dispatcher):
                    files.add(inspect.getfile(callee.py_func))
                    todo.append(callee.py_func)
    return files


def _code_names(code: pytypes.CodeType) -> Iterator[str]:
    yield from code.co_names
    for const in code.co_consts:
        if isinstance(const, pytypes.CodeType):
            yield from _code_names(const)


def _file_hash(path: str) -> str:
    with open(path, "rb") as f:
        return hashlib.sha256(f.read()).hexdigest()


def first_call_deferred(dispatcher: F) -> F:
    """A wrapper of a numba ``dispatcher`` whose first call defers numba's extension
    loading (see the module docstring) and, if it compiles, types calls with
    :func:`lean_compile`. ``.dispatcher`` is the numba dispatcher."""
    ready = False

    @functools.wraps(dispatcher)
    def call(*args: Any) -> Any:
        nonlocal ready
        if ready:
            return dispatcher(*args)
        with deferred_extensions(), lean_compile():
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
        dispatcher = njit(nogil=True, cache=True, **options)(fn)
        tie_cache_to_callees(dispatcher)
        wrapped = first_call_deferred(cast(F, dispatcher))
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
