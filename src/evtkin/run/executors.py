"""Executors: run work units and hand back their outcomes; :func:`execute` merges them.

Three executors share one shape (a context manager with ``workers`` and
``outcomes(plan, units, progress)``):

* :class:`SerialExecutor`: the units one after another in this process;
* :class:`ProcessExecutor`: local worker processes (``concurrent.futures`` process pool,
  ``forkserver`` start where available, else ``spawn``; never ``fork``, because the
  reader runs threads);
* :class:`DaskExecutor`: a ``dask.distributed`` cluster, either an existing scheduler
  (``DaskExecutor("tcp://host:8786")``) or a ``LocalCluster`` started for the run
  (``DaskExecutor("local")``). Only plain functions are submitted, no dask collections.

Each unit runs :func:`run_unit`, which never raises for a failing unit: it returns a
:class:`UnitOutcome` carrying the partial result or the error (so failures travel back
from any worker as plain data). :func:`execute` makes the units, drives an executor,
stops with a :class:`UnitError` naming the file and range of the first failing unit (or,
with ``skip_bad=True``, records it and goes on), and merges the partial results **in unit
order** with :func:`~evtkin.run.partial.merge_all`, so every executor gives bit-identical
results for the same units. Worker processes never import the caller's ``__main__``
(:func:`evtkin.run.forkserver.pool_context`), so scripts need no ``if __name__ ==
"__main__":`` guard and notebooks work the same.
"""

from __future__ import annotations

import dataclasses
import logging
import multiprocessing as mp
import os
import queue as _queue
import signal
import threading
import time
import uuid
import warnings
from collections.abc import Callable, Collection, Iterator, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol

from evtkin.errors import ConfigError, EvtkinError
from evtkin.run.forkserver import (
    DASK_PRELOAD,
    available_cores,
    main_kept_from_children,
    pool_context,
    start_forkserver,
)
from evtkin.run.forkserver import start_method as forkserver_start_method
from evtkin.run.partial import PartialResult, merge_all
from evtkin.run.plan import Plan
from evtkin.run.progress import RunProgress
from evtkin.run.units import (
    PartialUnitError,
    WorkUnit,
    make_units,
    process_unit,
    reader_warnings,
    sha256_of,
)

__all__ = [
    "SMALL_INPUT_BYTES",
    "Checksums",
    "DaskExecutor",
    "Execution",
    "Executor",
    "ProcessExecutor",
    "SerialExecutor",
    "UnitError",
    "UnitOutcome",
    "available_cores",
    "execute",
    "executor_for",
    "get_executor",
    "local_cores",
    "run_unit",
]


class UnitError(EvtkinError):
    """A work unit failed (its file and range are named in the message)."""


def local_cores(executor: Any) -> int:
    """Cores of this machine that a run on ``executor`` was given, for the work after the
    units (drawing plots): 1 for ``--jobs 1``, the worker count of a process pool, every
    core for the default serial run (its reader uses threads) and for Dask (the plots are
    drawn on this machine, the client). An executor of another kind: 1."""
    if executor is None:
        return available_cores()
    if isinstance(executor, SerialExecutor):
        return 1 if executor.read_threads == 0 else available_cores()
    if isinstance(executor, ProcessExecutor):
        return max(1, min(executor.workers, available_cores()))
    if isinstance(executor, DaskExecutor):
        if executor.address == "local":
            return max(1, min(executor.n_workers, available_cores()))
        return available_cores()
    return 1


# --------------------------------------------------------------------------- one unit

@dataclass
class UnitOutcome:
    """What running one unit gave: its result, or the error it failed with."""

    index: int
    result: PartialResult | None = None
    error: str | None = None
    error_type: str | None = None
    fatal: bool = False  # a config error: never skipped
    n_events: int = 0
    seconds: float = 0.0
    pid: int = 0
    peak_rss_mb: float | None = None  # peak resident memory of the worker so far
    cpu_seconds: float = 0.0  # CPU time of the worker process (all its threads) on this unit


def _peak_rss_mb() -> float | None:
    try:
        import resource
    except ImportError:  # pragma: no cover - Windows
        return None
    kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return kb / 1024.0  # Linux reports kB


def run_unit(plan: Plan, unit: WorkUnit, read_threads: int | None = None,
             progress: Any = None) -> UnitOutcome:
    """Process one unit; never raises for a failing unit (the error is in the outcome)."""
    t0 = time.perf_counter()
    c0 = time.process_time()
    pid = os.getpid()
    try:
        res = process_unit(plan, unit, progress, read_threads=read_threads)
    except PartialUnitError as exc:  # failed late: the chunks before the failure are kept
        return UnitOutcome(unit.index, exc.result, str(exc), "PartialUnitError",
                           n_events=exc.result.n_events(), seconds=time.perf_counter() - t0,
                           pid=pid, peak_rss_mb=_peak_rss_mb(),
                           cpu_seconds=time.process_time() - c0)
    except ConfigError as exc:
        return UnitOutcome(unit.index, None, str(exc), "ConfigError", True,
                           seconds=time.perf_counter() - t0, pid=pid)
    except Exception as exc:
        msg = str(exc) if isinstance(exc, EvtkinError) else f"{type(exc).__name__}: {exc}"
        return UnitOutcome(unit.index, None, msg, type(exc).__name__,
                           seconds=time.perf_counter() - t0, pid=pid,
                           peak_rss_mb=_peak_rss_mb(), cpu_seconds=time.process_time() - c0)
    return UnitOutcome(unit.index, res, n_events=res.n_events(),
                       seconds=time.perf_counter() - t0, pid=pid, peak_rss_mb=_peak_rss_mb(),
                       cpu_seconds=time.process_time() - c0)


# --------------------------------------------------------------------------- executors

class Executor(Protocol):
    """Anything that turns units into outcomes (used as a context manager)."""

    workers: int

    def __enter__(self) -> Executor: ...  # pragma: no cover

    def __exit__(self, *exc: object) -> None: ...  # pragma: no cover

    def outcomes(self, plan: Plan, units: Sequence[WorkUnit],
                 progress: RunProgress | None = None) -> Iterator[UnitOutcome]:
        ...  # pragma: no cover

    def describe(self) -> dict[str, Any]: ...  # pragma: no cover


class _Base:
    workers: int = 1

    def __enter__(self) -> Any:
        return self

    def __exit__(self, *exc: object) -> None:
        return None

    def outcomes(self, plan: Plan, units: Sequence[WorkUnit],
                 progress: RunProgress | None = None) -> Iterator[UnitOutcome]:
        raise NotImplementedError  # pragma: no cover

    def checksums(self, paths: Sequence[str]) -> Checksums:
        """Start computing the SHA-256 of ``paths`` (here: in a thread of this process)."""
        return _Hasher(paths)

    def run(self, plan: Plan, units: Sequence[WorkUnit],
            progress: Any = None) -> Iterator[PartialResult]:
        """The partial results of ``units`` (raises :class:`UnitError` on a failing unit)."""
        units = _indexed(units)
        with self:
            for oc in self.outcomes(plan, units):
                yield _check(oc, units[oc.index], len(units))


class SerialExecutor(_Base):
    """Process the units one after another in this process (progress per chunk).

    ``read_threads``: parse threads of the LHE reader (default: its own, 2 on a multi-core
    machine; 0 keeps the whole run on one core, as ``--jobs 1`` does).
    """

    def __init__(self, read_threads: int | None = None) -> None:
        self.read_threads = read_threads
        self.workers = 1

    def outcomes(self, plan: Plan, units: Sequence[WorkUnit],
                 progress: RunProgress | None = None) -> Iterator[UnitOutcome]:
        for unit in units:
            cb = None
            if progress is not None:
                def cb(n: int, i: int = unit.index) -> None:
                    progress.chunk(i, n)
            yield run_unit(plan, unit, self.read_threads, cb)

    def describe(self) -> dict[str, Any]:
        return {"kind": "serial", "workers": 1}


# ---- local processes

_WORKER_QUEUE: Any = None


def _worker_init(q: Any, parent: int) -> None:
    """Worker set-up: Ctrl-C is the parent's business; keep the progress queue; exit if the
    parent process disappears (killed without a chance to stop its workers)."""
    global _WORKER_QUEUE
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _WORKER_QUEUE = q
    threading.Thread(target=_watch_parent, args=(parent,), daemon=True,
                     name="evtkin-watch-parent").start()


def _watch_parent(pid: int) -> None:
    while True:
        time.sleep(1.0)
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            os._exit(1)
        except PermissionError:  # pragma: no cover - pid reused by another user's process
            os._exit(1)


def _worker_run(plan: Plan, unit: WorkUnit, read_threads: int | None) -> UnitOutcome:
    q = _WORKER_QUEUE

    def cb(n: int) -> None:
        if q is not None:
            q.put((unit.index, n))

    return run_unit(plan, unit, read_threads, cb)


class ProcessExecutor(_Base):
    """Run units in ``jobs`` local worker processes (default: every available core).

    Each worker reads with ``read_threads`` parse threads (default 0: it reads, parses and
    analyses in one thread, so ``jobs`` workers keep ``jobs`` cores busy, not more). A run
    of a single unit stays in this process. :meth:`prestart` starts the forkserver early.
    """

    def __init__(self, jobs: int | None = None, *, read_threads: int | None = 0,
                 start_method: str | None = None) -> None:
        self.workers = int(jobs) if jobs else available_cores()
        if self.workers < 1:
            raise ValueError(f"jobs must be >= 1, got {jobs}")
        self.read_threads = read_threads
        self.start_method = start_method or forkserver_start_method()

    def prestart(self) -> None:
        """Start the forkserver now, so that it imports evtkin and loads the kernels
        (seconds) while this process still prepares the run; idempotent."""
        if self.start_method != "forkserver" or self.workers == 1:
            return
        start_forkserver()

    def describe(self) -> dict[str, Any]:
        return {"kind": "processes", "workers": self.workers, "start_method": self.start_method}

    def outcomes(self, plan: Plan, units: Sequence[WorkUnit],
                 progress: RunProgress | None = None) -> Iterator[UnitOutcome]:
        if len(units) <= 1 or self.workers == 1:
            yield from SerialExecutor().outcomes(plan, units, progress)
            return
        from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

        ctx = pool_context(self.start_method)
        self.prestart()  # import evtkin and load the compiled kernels once, in the forkserver
        q = ctx.Queue() if progress is not None else None
        stop = threading.Event()
        drain = None
        if q is not None and progress is not None:
            drain = threading.Thread(target=_drain, args=(q, progress, stop), daemon=True,
                                     name="evtkin-progress")
            drain.start()
        before = set(mp.active_children())
        pool = ProcessPoolExecutor(max_workers=min(self.workers, len(units)), mp_context=ctx,
                                   initializer=_worker_init, initargs=(q, os.getpid()))
        pending: set[Any] = set()
        ok = False
        try:
            unit_of = {pool.submit(_worker_run, plan, u, self.read_threads): u for u in units}
            pending = set(unit_of)
            while pending:
                done, pending = wait(pending, return_when=FIRST_COMPLETED)
                for fut in done:
                    yield _result_or_failure(fut, unit_of[fut])
            ok = True
        finally:
            for fut in pending:
                fut.cancel()
            if ok:
                pool.shutdown(wait=True)
            else:  # interrupted or a unit failed: do not wait for running units
                # every process started since the pool was made (also one whose start was
                # interrupted before the pool recorded it)
                procs = set((getattr(pool, "_processes", None) or {}).values())
                pool.shutdown(wait=False, cancel_futures=True)
                procs |= set(mp.active_children()) - before
                for p in procs:
                    p.terminate()
                for p in procs:
                    p.join(timeout=5)
            stop.set()
            if drain is not None:
                drain.join(timeout=2)
            if q is not None:
                q.cancel_join_thread()
                q.close()


def _result_or_failure(fut: Any, unit: WorkUnit) -> UnitOutcome:
    """The outcome of a finished future; a worker that died (killed, out of memory) is a
    failure of its unit."""
    try:
        out: UnitOutcome = fut.result()
    except Exception as exc:
        return UnitOutcome(unit.index, None,
                           f"the worker process running it failed: {type(exc).__name__}: {exc}",
                           type(exc).__name__)
    return out


def _drain(q: Any, progress: RunProgress, stop: threading.Event) -> None:
    while not stop.is_set():
        try:
            index, n = q.get(timeout=0.1)
        except _queue.Empty:
            continue
        except (EOFError, OSError, ValueError):  # pragma: no cover - queue closed
            return
        progress.chunk(index, n)


# ---- Dask

class DaskExecutor(_Base):
    """Run units on a ``dask.distributed`` cluster.

    ``address``: ``"local"`` starts a ``LocalCluster`` of ``n_workers`` single-threaded
    worker processes (default: every available core) for the duration of the run; any
    other value is a scheduler address (``tcp://host:8786``) or a ``scheduler.json`` file
    of a running cluster. The workers must be able to import evtkin and to read the input
    files at the same paths.
    """

    def __init__(self, address: str = "local", *, n_workers: int | None = None,
                 read_threads: int | None = 0, timeout: float = 30.0) -> None:
        self.address = address
        self.n_workers = n_workers or available_cores()
        self.read_threads = read_threads
        self.timeout = timeout
        self.workers = self.n_workers
        self._client: Any = None
        self._cluster: Any = None
        self._starting: threading.Thread | None = None
        self._start_error: BaseException | None = None

    def prestart(self) -> None:
        """With ``address="local"``: start the LocalCluster now, in a thread, so that its
        scheduler and workers come up while this process still prepares the run."""
        if self.address != "local" or self._starting is not None or self._cluster is not None:
            return

        def start() -> None:
            try:
                from distributed import LocalCluster

                self._cluster = _local_cluster(LocalCluster, self.n_workers)
            except BaseException as exc:  # reported by __enter__
                self._start_error = exc

        self._starting = threading.Thread(target=start, daemon=True, name="evtkin-dask-start")
        self._starting.start()

    def abandon(self) -> None:
        """Stop a cluster started by :meth:`prestart` that will not be used."""
        if self._starting is not None:
            self._starting.join()
            self._starting = None
        self.__exit__()

    def __enter__(self) -> DaskExecutor:
        try:
            from distributed import Client as _Client
            from distributed import LocalCluster

            Client: Callable[..., Any] = _Client  # distributed is not fully annotated
        except ImportError as exc:
            raise EvtkinError(
                "running on Dask needs the 'distributed' package: pip install 'evtkin[dask]'"
            ) from exc
        if self._starting is not None:
            self._starting.join()
            self._starting = None
            if self._start_error is not None:
                err, self._start_error = self._start_error, None
                if isinstance(err, OSError):
                    raise EvtkinError(f"cannot start a local Dask cluster: {err}") from None
                raise err
        try:
            if self.address == "local":
                if self._cluster is None:
                    self._cluster = _local_cluster(LocalCluster, self.n_workers)
                self._client = Client(self._cluster)
            elif self.address.endswith(".json") and os.path.isfile(self.address):
                self._client = Client(scheduler_file=self.address, timeout=self.timeout)
            else:
                self._client = Client(self.address, timeout=self.timeout)
        except OSError as exc:
            self.__exit__()
            raise EvtkinError(f"cannot reach the Dask scheduler at {self.address!r}: {exc}"
                              ) from None
        threads = sum(self._client.nthreads().values())
        self.workers = max(1, threads)
        return self

    def __exit__(self, *exc: object) -> None:
        if self._client is not None:
            self._client.close()
            self._client = None
        if self._cluster is not None:
            self._cluster.close()
            self._cluster = None

    def describe(self) -> dict[str, Any]:
        return {"kind": "dask", "address": self.address, "workers": self.workers}

    def checksums(self, paths: Sequence[str]) -> Checksums:
        """Hash ``paths`` on the cluster, one task per file, scheduled before the units
        (the client may not be able to read the files cheaply)."""
        if self._client is None:
            raise RuntimeError("use DaskExecutor as a context manager (with ...:)")
        return _DaskHashes(self._client, paths)

    def outcomes(self, plan: Plan, units: Sequence[WorkUnit],
                 progress: RunProgress | None = None) -> Iterator[UnitOutcome]:
        from distributed import as_completed as _as_completed

        as_completed: Callable[..., Any] = _as_completed

        client = self._client
        if client is None:
            raise RuntimeError("use DaskExecutor as a context manager (with ...:)")
        token = uuid.uuid4().hex[:12]
        [plan_f] = client.scatter([plan], broadcast=True, hash=False)
        futures = [client.submit(run_unit, plan_f, u, self.read_threads,
                                 key=f"evtkin-unit-{token}-{u.index}", pure=False)
                   for u in units]
        unit_of = {f.key: u for f, u in zip(futures, units, strict=True)}
        try:
            for fut in as_completed(futures):
                yield _result_or_failure(fut, unit_of[fut.key])
        finally:
            client.cancel([f for f in futures if not f.done()])
            client.cancel([plan_f])


class _DaskHashes:
    """SHA-256 tasks of input files on a Dask cluster."""

    def __init__(self, client: Any, paths: Sequence[str]) -> None:
        self.client = client
        self.paths = list(dict.fromkeys(paths))
        token = uuid.uuid4().hex[:12]
        self.futures = [client.submit(sha256_of, p, key=f"evtkin-sha256-{token}-{k}",
                                      pure=False, priority=10)
                        for k, p in enumerate(self.paths)]

    def result(self) -> dict[str, str]:
        try:
            sums = self.client.gather(self.futures)
        except Exception as exc:
            raise EvtkinError(f"cannot compute the checksum of an input file: "
                              f"{type(exc).__name__}: {exc}") from None
        return dict(zip(self.paths, sums, strict=True))


def _local_cluster(factory: Any, n_workers: int) -> Any:
    """A LocalCluster of single-threaded worker processes, started from a forkserver that has
    imported evtkin and loaded its compiled kernels (workers start in well under a second
    instead of several; spawn where forkserver does not exist)."""
    import dask

    # the workers' statistical profiler samples the running task's stack every 10 ms under
    # the GIL: measured ~30 % more CPU per unit on this workload; a local cluster started for
    # one run has no dashboard to show the profiles anyway
    quiet = {"distributed.worker.profile.enabled": False}
    method = forkserver_start_method()
    if method == "forkserver":
        from distributed.utils import get_mp_context as _get_mp_context

        get_mp_context: Callable[..., Any] = _get_mp_context

        with (dask.config.set({"distributed.worker.multiprocessing-method": method, **quiet}),
              main_kept_from_children()):
            get_mp_context().set_forkserver_preload(DASK_PRELOAD)  # (if not started yet)
            return factory(n_workers=n_workers, threads_per_worker=1, processes=True,
                           dashboard_address=None, silence_logs=logging.ERROR)
    with dask.config.set(quiet), main_kept_from_children():
        return factory(n_workers=n_workers, threads_per_worker=1, processes=True,
                       dashboard_address=None, silence_logs=logging.ERROR)


def get_executor(name: str = "serial", *, jobs: int | None = None,
                 dask: str | None = None) -> Executor:
    """An executor by name: ``"serial"``, ``"processes"`` (``jobs`` workers) or ``"dask"``
    (``dask`` = ``"local"`` or a scheduler address)."""
    if name == "serial":
        return SerialExecutor()
    if name == "processes":
        return ProcessExecutor(jobs)
    if name == "dask":
        return DaskExecutor(dask or "local", n_workers=jobs)
    raise ValueError(f"unknown executor {name!r}; available: 'serial', 'processes', 'dask'")


#: without ``jobs``, inputs smaller than this run in one process (starting workers costs more)
SMALL_INPUT_BYTES = 32_000_000


def executor_for(*, jobs: int | None = None, dask: str | None = None,
                 input_bytes: int | None = None) -> Executor:
    """The executor that ``--jobs``/``--dask`` (and ``evtkin.run(jobs=, dask=)``) ask for:
    this process on one core for ``jobs=1``; without ``jobs``, this process with the reader's
    parse threads for inputs under :data:`SMALL_INPUT_BYTES`; a local process pool otherwise
    (default: every core); a Dask cluster with ``dask`` (``jobs`` = its number of workers with
    ``dask="local"``)."""
    if jobs is not None and int(jobs) < 1:
        raise ValueError(f"jobs must be >= 1, got {jobs}")
    if dask:
        return DaskExecutor(dask, n_workers=jobs)
    if jobs == 1:
        return SerialExecutor(read_threads=0)  # one core, as asked
    if jobs is None and input_bytes is not None and input_bytes < SMALL_INPUT_BYTES:
        return SerialExecutor()  # the reader's own threads use the other cores
    return ProcessExecutor(jobs)


# --------------------------------------------------------------------------- driving a run

@dataclass
class Execution:
    """The merged result of a run's units and how it was obtained."""

    partial: PartialResult
    units: list[WorkUnit]
    skipped: list[dict[str, Any]] = field(default_factory=list)
    executor: dict[str, Any] = field(default_factory=dict)
    seconds: float = 0.0
    peak_rss_mb: dict[int, float] = field(default_factory=dict)  # per worker process id
    cpu_seconds: dict[int, float] = field(default_factory=dict)  # on the units, per worker

    def record(self) -> dict[str, Any]:
        """A JSON-ready summary for the provenance."""
        return {
            **self.executor,
            "units": len(self.units),
            "split_files": sorted({u.path for u in self.units if u.n_parts > 1}),
            "seconds": round(self.seconds, 3),
            "cpu_seconds": round(sum(self.cpu_seconds.values()), 3),
            "cpu_seconds_per_worker": [round(v, 3) for _, v in sorted(self.cpu_seconds.items())],
            "peak_rss_mb_per_worker": [round(v, 1) for _, v in sorted(self.peak_rss_mb.items())],
            "skipped": list(self.skipped),
        }


class Checksums(Protocol):
    """The SHA-256 checksums of input files, being computed (see ``Executor.checksums``)."""

    def result(self) -> dict[str, str]: ...  # pragma: no cover


class _Hasher:
    """SHA-256 of files, computed in a background thread of this process (hashlib and file
    reads release the GIL, so it runs beside the workers or the serial reader)."""

    def __init__(self, paths: Sequence[str]) -> None:
        self.paths = list(dict.fromkeys(paths))
        self.sums: dict[str, str] = {}
        self.error: BaseException | None = None
        self.thread = threading.Thread(target=self._run, daemon=True, name="evtkin-sha256")
        if self.paths:
            self.thread.start()

    def _run(self) -> None:
        try:
            for p in self.paths:
                self.sums[p] = sha256_of(p)
        except BaseException as exc:  # reported by result()
            self.error = exc

    def result(self) -> dict[str, str]:
        """The checksums by path (waits for the thread); raises if a file could not be read."""
        if self.paths:
            self.thread.join()
        if self.error is not None:
            raise EvtkinError(f"cannot compute the checksum of an input file: {self.error}")
        return self.sums


def _indexed(units: Sequence[WorkUnit]) -> list[WorkUnit]:
    return [u if u.index == k else dataclasses.replace(u, index=k)
            for k, u in enumerate(units)]


def _check(oc: UnitOutcome, unit: WorkUnit, n_units: int) -> PartialResult:
    if oc.error is None:
        assert oc.result is not None
        return oc.result
    if oc.fatal:
        raise ConfigError(oc.error)
    raise UnitError(
        f"work unit {unit.index + 1} of {n_units} failed: {unit.label}: {oc.error}\n"
        "(use --skip-bad, or skip_bad=True, to skip failing units and finish the rest)"
    )


def execute(plan: Plan, executor: Executor | None = None, *, skip_bad: bool = False,
            progress: bool | None = False, unit_bytes: int | None = None,
            units: Sequence[WorkUnit] | None = None,
            only_files: Collection[tuple[str, int]] | None = None) -> Execution:
    """Split the inputs into units, run them on ``executor`` (default serial), merge.

    ``skip_bad``: a failing unit is recorded in ``Execution.skipped`` (file, range, error)
    and the run goes on; otherwise the first failure stops the run with a
    :class:`UnitError`. Config errors found while running always stop the run.
    ``progress``: a progress bar on stderr (``None``: only on a terminal). ``unit_bytes``:
    target size of byte-range units (default: automatic from the number of workers).
    ``only_files``: run only the units of these ``(sample, file index)`` inputs (one part of
    a run split over jobs, see :mod:`evtkin.run.parts`).
    The SHA-256 of each input is computed apart from the units when the executor has a
    ``checksums(paths)`` method (all executors here do) and recorded in the merged result.
    """
    ex: Any = executor or SerialExecutor()
    t0 = time.perf_counter()
    hasher: Checksums | None = None
    with ex:
        if units is None:
            units = make_units(plan, workers=ex.workers, unit_bytes=unit_bytes)
        if only_files is not None:
            keep = set(only_files)
            units = [u for u in units if (u.sample, u.file_index) in keep]
        units = _indexed(units)
        start_checksums = getattr(ex, "checksums", None)
        if start_checksums is not None:
            # hash the inputs as separate work (local executors: a thread of this
            # process, overlapping the worker start-up and the event processing; Dask: a
            # task of its own) instead of inside the unit that starts each file, which
            # made that unit the straggler
            units = [dataclasses.replace(u, checksum=False) if u.starts_file else u
                     for u in units]
            hasher = start_checksums([u.path for u in units if not u.checksum])
        results: dict[int, PartialResult] = {}
        skipped: list[dict[str, Any]] = []
        peak: dict[int, float] = {}
        cpu: dict[int, float] = {}
        with RunProgress(len(units), sum(u.size for u in units), progress) as bar:
            stream = ex.outcomes(plan, units, bar)
            try:
                for oc in stream:
                    unit = units[oc.index]
                    bar.unit_done(oc.index, oc.n_events, unit.size)
                    cpu[oc.pid] = cpu.get(oc.pid, 0.0) + oc.cpu_seconds
                    if oc.peak_rss_mb is not None:
                        peak[oc.pid] = max(peak.get(oc.pid, 0.0), oc.peak_rss_mb)
                    if oc.error is not None and skip_bad and not oc.fatal:
                        kept = oc.result.n_events() if oc.result is not None else 0
                        # what a lenient second reading of the unit skipped (lines, counts)
                        damaged = ([m for _, m in oc.result.warnings]
                                   if oc.result is not None else [])
                        skipped.append({**unit.describe(), "error": oc.error,
                                        "events_kept": kept, "damaged": damaged})
                        if oc.result is not None:  # the events read before the failure
                            results[oc.index] = oc.result
                        continue
                    results[oc.index] = _check(oc, unit, len(units))
            finally:
                close = getattr(stream, "close", None)
                if close is not None:
                    close()
        sums = hasher.result() if hasher is not None else {}
        record = ex.describe()
    partial = merge_all(results[i] for i in sorted(results))
    for rec in partial.files.values():
        if rec.sha256 is None and rec.path in sums:
            rec.sha256 = sums[rec.path]
    # the readers' warnings, kept by the units wherever they ran: shown here, once each
    categories = reader_warnings()
    for name, message in dict.fromkeys(partial.warnings):
        warnings.warn(message, categories.get(name, UserWarning), stacklevel=2)
    skipped.sort(key=lambda r: (r["sample"], r["file_index"], r["part"]))
    return Execution(partial, list(units), skipped, record, time.perf_counter() - t0, peak,
                     cpu)
