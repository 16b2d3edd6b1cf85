"""Early start of the forkserver that local worker processes are forked from.

This module imports nothing but :mod:`multiprocessing`, :mod:`os` and :mod:`evtkin._processes`, so
that the command line can start the forkserver first thing, before it imports numpy, awkward,
numba and the rest of evtkin itself (~1.5 s). The forkserver then imports evtkin and loads the
compiled kernels (:data:`PRELOAD`) on the other core meanwhile, and the workers forked from it
start warm.

Worker processes never import the parent's ``__main__`` (:mod:`evtkin._processes`).
"""

from __future__ import annotations

import multiprocessing as mp
import os

from evtkin._processes import main_kept_from_children, pool_context, start_method

__all__ = ["DASK_PRELOAD", "PRELOAD", "available_cores", "main_kept_from_children",
           "pool_context", "start_forkserver", "start_method"]

#: modules the forkserver imports before it forks workers: evtkin, and the warm-up that loads
#: the compiled kernels, so that every worker starts with them loaded
PRELOAD = ["evtkin.run.executors", "evtkin.run._warmup"]
#: the same for the workers of a local Dask cluster (a module that is not installed is
#: skipped by the forkserver)
DASK_PRELOAD = ["distributed", *PRELOAD]


def available_cores() -> int:
    """Cores this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))  # type: ignore[attr-defined,unused-ignore]
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def start_forkserver(preload: list[str] | None = None) -> None:
    """Start the forkserver, preloading ``preload`` (default :data:`PRELOAD`), unless it
    runs already; nothing where there is no forkserver."""
    if start_method() != "forkserver":
        return
    from multiprocessing import forkserver

    mp.get_context("forkserver").set_forkserver_preload(PRELOAD if preload is None else preload)
    forkserver.ensure_running()
