"""Drawing many figures: one after another in this process, or in a pool of processes.

matplotlib draws in pure Python (~1–2 s per figure on a slow core), so a results folder with
a dozen histograms is drawn faster on several cores. The figures are the same either way.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from concurrent.futures import ProcessPoolExecutor
from typing import Any

__all__ = ["MIN_FIGURES_FOR_PROCESSES", "Task", "draw_all"]

#: fewer figures than this are drawn in this process (starting a worker costs about two
#: figures on a slow machine)
MIN_FIGURES_FOR_PROCESSES = 4

#: one figure: ``(function, args, kwargs)``; function, arguments and result must pickle
Task = tuple[Callable[..., Any], tuple[Any, ...], dict[str, Any]]


def draw_all(tasks: Sequence[Task], workers: int = 1) -> list[Any]:
    """Call every task; return their results in task order.

    ``workers`` > 1 with at least :data:`MIN_FIGURES_FOR_PROCESSES` tasks: in a pool of up to
    ``workers`` processes, forked from the forkserver where there is one (never from this
    process, whose reader threads may still exist), else spawned; the workers never import
    the caller's ``__main__`` (a script without a main guard, a notebook).
    """
    if workers <= 1 or len(tasks) < MIN_FIGURES_FOR_PROCESSES:
        return [fn(*args, **kwargs) for fn, args, kwargs in tasks]
    from evtkin._processes import pool_context

    with ProcessPoolExecutor(max_workers=min(workers, len(tasks)),
                             mp_context=pool_context()) as pool:
        futures = [pool.submit(_call, t) for t in tasks]
        return [f.result() for f in futures]


def _call(task: Task) -> Any:
    fn, args, kwargs = task
    return fn(*args, **kwargs)
