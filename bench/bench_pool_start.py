"""Starting a process pool through evtkin's context (children never import ``__main__``)
against multiprocessing's plain context of the same start method.

    python bench/bench_pool_start.py [--rounds 15] [--workers 2] [--tasks 8]

Each round starts a ``ProcessPoolExecutor`` of ``--workers`` processes, runs ``--tasks``
trivial tasks and shuts it down, alternately with the plain context (baseline) and with
:func:`evtkin._processes.pool_context`; the forkserver is started before the timed rounds.
Printed: the median seconds of both and their ratio (evtkin / plain; below 1 where the plain
context re-imports this script in every child). The plain context needs this script's main
guard; evtkin's does not.
"""

from __future__ import annotations

import argparse
import math
import multiprocessing as mp
import os
import statistics
import time
from concurrent.futures import ProcessPoolExecutor
from typing import Any

from evtkin._processes import pool_context, start_method


def one_round(ctx: Any, workers: int, tasks: int) -> float:
    t0 = time.perf_counter()
    with ProcessPoolExecutor(max_workers=workers, mp_context=ctx) as pool:
        list(pool.map(math.sqrt, range(tasks)))
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=15)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--tasks", type=int, default=8)
    args = ap.parse_args()
    method = start_method()
    plain, ours = mp.get_context(method), pool_context(method)
    one_round(plain, args.workers, args.tasks)  # start the forkserver, untimed
    one_round(ours, args.workers, args.tasks)
    a, b = [], []
    for _ in range(args.rounds):
        a.append(one_round(plain, args.workers, args.tasks))
        b.append(one_round(ours, args.workers, args.tasks))
    ma, mb = statistics.median(a), statistics.median(b)
    print(f"start method {method}, {args.workers} workers, {args.tasks} tasks, "
          f"{args.rounds} rounds, load average {os.getloadavg()[0]:.2f}")
    print(f"plain context        median {ma * 1e3:8.1f} ms")
    print(f"evtkin pool_context  median {mb * 1e3:8.1f} ms   ratio {mb / ma:.3f}")


if __name__ == "__main__":
    main()
