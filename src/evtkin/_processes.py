"""Process contexts whose children never import the parent's ``__main__`` module.

multiprocessing's ``forkserver`` and ``spawn`` start methods run the parent's main script
again in every child (as ``__mp_main__``) unless it is an importable module. A user's script
that calls :func:`evtkin.run` at top level (no ``if __name__ == "__main__":`` guard) then calls
it again in each worker, which dies with "An attempt has been made to start a new process
before the current process has finished its bootstrapping phase" (and the pool with
``BrokenProcessPool``). evtkin's workers run only evtkin's own functions and need nothing from
``__main__``, so every evtkin pool uses :func:`pool_context`: its processes are started while
:func:`main_kept_from_children` tells multiprocessing that there is no main module to import.
Scripts, ``python -m`` modules, notebooks and the command line behave alike, and no child
spends time re-running the caller's script.

Imports only the standard library's core (the command line imports it before numpy).
"""

from __future__ import annotations

import contextlib
import multiprocessing as mp
import sys
import threading
from collections.abc import Iterator
from importlib.machinery import ModuleSpec
from typing import Any

__all__ = ["main_kept_from_children", "pool_context", "start_method"]


def start_method() -> str:
    """``forkserver`` where it exists, else ``spawn``.

    fork is unsafe with the reader's threads; forkserver forks from a clean process that
    imported evtkin once (cheap workers), spawn is the portable fallback.
    """
    return "forkserver" if "forkserver" in mp.get_all_start_methods() else "spawn"


_MAIN_LOCK = threading.RLock()
#: what ``__main__.__spec__`` says while a child process is being started: multiprocessing's
#: child-side preparation skips a main module named ``__main__`` (it cannot be re-imported)
_MAIN_SPEC = ModuleSpec("__main__", None)
_NOT_SET = object()


@contextlib.contextmanager
def main_kept_from_children() -> Iterator[None]:
    """While active, processes started through :mod:`multiprocessing` (any start method, any
    thread) do not import this process's ``__main__`` module before they run their task.

    multiprocessing decides from ``sys.modules["__main__"].__spec__`` (a module name) or its
    ``__file__`` (a script path) what each child imports first; a spec named ``__main__``
    means "nothing". The attribute is set for the duration and restored after; the lock keeps
    two threads from interleaving their restores."""
    main = sys.modules.get("__main__")
    if main is None:  # pragma: no cover - an embedded interpreter
        yield
        return
    with _MAIN_LOCK:
        saved = main.__dict__.get("__spec__", _NOT_SET)
        main.__spec__ = _MAIN_SPEC
        try:
            yield
        finally:
            if saved is _NOT_SET:
                with contextlib.suppress(AttributeError):
                    del main.__spec__
            else:
                main.__spec__ = saved


def _popen_without_main(base: Any, process_obj: Any) -> Any:
    with main_kept_from_children():
        return base._Popen(process_obj)


_CONTEXTS: dict[str, Any] = {}
_SPAWN: Any = mp.get_context("spawn").Process


class SpawnProcessWithoutMain(_SPAWN):  # type: ignore[misc,valid-type]
    """A spawned process that does not import the parent's ``__main__``."""

    @staticmethod
    def _Popen(process_obj: Any) -> Any:
        return _popen_without_main(_SPAWN, process_obj)


_PROCESS_CLASSES: dict[str, type] = {"spawn": SpawnProcessWithoutMain}

if "forkserver" in mp.get_all_start_methods():
    _FORKSERVER: Any = mp.get_context("forkserver").Process

    class ForkserverProcessWithoutMain(_FORKSERVER):  # type: ignore[misc,valid-type]
        """A process forked by the forkserver that does not import the parent's ``__main__``."""

        @staticmethod
        def _Popen(process_obj: Any) -> Any:
            return _popen_without_main(_FORKSERVER, process_obj)

    _PROCESS_CLASSES["forkserver"] = ForkserverProcessWithoutMain


def pool_context(method: str | None = None) -> Any:
    """A multiprocessing context for ``method`` (default :func:`start_method`) whose processes
    never import the parent's ``__main__`` (see :func:`main_kept_from_children`); use it as
    ``mp_context`` of a process pool and for its queues."""
    name = method or start_method()
    ctx: Any = _CONTEXTS.get(name)
    if ctx is None:
        ctx = type(mp.get_context(name))()
        ctx.Process = _PROCESS_CLASSES.get(name, ctx.Process)
        _CONTEXTS[name] = ctx
    return ctx
