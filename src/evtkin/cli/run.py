"""``evtkin run CONFIG``: run an analysis config and write its results folder."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

__all__ = ["add_parser", "main"]


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value <= 0:
        raise argparse.ArgumentTypeError(f"expected a number > 0, got {value}")
    return value


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "run",
        help="run an analysis config over its samples",
        description="Run the analysis described by CONFIG (TOML) over its samples and write "
        "histograms (ROOT, JSON, CSV), cutflow tables, plots and a provenance record.",
    )
    p.add_argument("config", metavar="CONFIG", help="analysis config (TOML)")
    p.add_argument("--out", metavar="DIR", help="results folder (default: [output] directory "
                   "of the config, else 'evtkin-output' next to it)")
    p.add_argument("--max-events", metavar="N", type=_positive,
                   help="read at most N events from each input file")
    p.add_argument("--step-size", metavar="N", type=_positive,
                   help="events per chunk (memory vs overhead; results do not depend on it)")
    where = p.add_argument_group(
        "where the work runs",
        "The inputs are split into work units (whole files; plain LHE files also into byte "
        "ranges of whole events) that run in parallel; the results do not depend on how.",
    )
    where.add_argument("--jobs", "-j", metavar="N", type=_positive,
                       help="cores to use: N local worker processes of one thread each "
                       "(default: every available core; --jobs 1 runs in this process on one "
                       "core); with --dask local, the number of Dask workers")
    where.add_argument("--dask", metavar="ADDRESS",
                       help="run on a Dask cluster: a scheduler address (tcp://host:8786), a "
                       "scheduler.json file, or 'local' to start a local cluster for this run "
                       "(needs the [dask] extra)")
    where.add_argument("--unit-size", metavar="MB", type=_positive,
                       help="split plain LHE files into byte-range units of about MB megabytes "
                       "(default: automatic, a few units per worker)")
    where.add_argument("--skip-bad", action="store_true",
                       help="skip work units that fail (e.g. a corrupt file), finish the rest "
                       "and list what was skipped in the provenance and the results (default: "
                       "stop at the first failure)")
    where.add_argument("--lenient", action="store_true",
                       help="read damaged LHE files leniently: skip damaged events (and a "
                       "cut-short end) with a warning naming their lines, and analyse every "
                       "intact event (default: stop at the first damage)")
    where.add_argument("--part", metavar="K/N",
                       help="read only the K-th of N parts of the input files (whole files, "
                       "dealt out by size; for batch jobs): merge the N results folders with "
                       "'evtkin merge OUT FOLDER...'")
    p.set_defaults(func=main)
    out: argparse.ArgumentParser = p
    return out


def main(args: argparse.Namespace) -> int:
    part = None
    if args.part:
        from evtkin.run.parts import parse_part

        part = parse_part(args.part)
    executor = None
    if args.dask == "local" or (not args.dask and (args.jobs or 0) > 1):
        # local workers: start their forkserver before this process imports evtkin's
        # analysis layers (numpy, awkward, numba, distributed: seconds), so that both
        # import at the same time and the workers fork from it ready
        from evtkin.run.forkserver import DASK_PRELOAD, start_forkserver

        start_forkserver(DASK_PRELOAD if args.dask else None)
    if args.dask or (args.jobs or 0) > 1:  # known without the config: start workers at once
        executor = make_executor(jobs=args.jobs, dask=args.dask)
        _prestart(executor)
    from evtkin.config import load_config

    try:
        cfg = load_config(args.config)
        if cfg.plot.measured:  # a bad measured table stops the run before it starts
            from evtkin.output.measured import read_measured

            for m in cfg.plot.measured.values():
                for f in m.tables.values():
                    read_measured(f)
    except BaseException:
        if executor is not None and hasattr(executor, "abandon"):
            executor.abandon()  # a prestarted local cluster: stop it before reporting
        raise
    out = Path(args.out) if args.out else (cfg.output.directory
                                           or Path(args.config).resolve().parent / "evtkin-output")
    if executor is None:
        input_bytes = sum(f.stat().st_size for s in cfg.samples.values() for f in s.files
                          if f.is_file())
        executor = make_executor(jobs=args.jobs, dask=args.dask, input_bytes=input_bytes)
        _prestart(executor)
    from evtkin.run.pipeline import run

    restore = _terminate_like_interrupt()
    try:
        result = run(cfg, out=out, max_events=args.max_events, step_size=args.step_size,
                     progress=None, executor=executor, skip_bad=args.skip_bad,
                     unit_bytes=args.unit_size * 1_000_000 if args.unit_size else None,
                     part=part, lenient=args.lenient)
    finally:
        restore()
    for w in cfg.warnings:
        print(f"warning: {w}", file=sys.stderr)
    for name, s in result.samples.items():
        sigma = f"{s.xsec.sigma_pb:.6g} pb" if s.xsec is not None else "n/a"
        what = "data: counted with weight 1" if s.data else f"σ = {sigma}"
        print(f"{name}: {s.n_events} events, {what}, "
              f"{s.cutflow[-1]['n_raw'] if s.cutflow else 0} selected")
        if s.xsec is not None:
            for w in s.xsec.warnings:
                print(f"  warning: {w}", file=sys.stderr)
    skipped = result.provenance.get("skipped") or []
    for rec in skipped:
        where = rec["path"]
        if rec.get("byte_range"):
            where += f" (bytes {rec['byte_range'][0]}-{rec['byte_range'][1]})"
        kept = rec.get("events_kept") or 0
        note = f" ({kept} complete events of this unit are kept)" if kept else ""
        print(f"  skipped: {where}: {rec['error']}{note}", file=sys.stderr)
        for damage in rec.get("damaged") or []:  # what a lenient second reading left out
            print(f"    read again leniently: {damage}", file=sys.stderr)
    if skipped:
        print(f"warning: {len(skipped)} work unit(s) skipped (--skip-bad); they are listed in "
              "provenance.json and results.json", file=sys.stderr)
    print(f"results written to {out}")
    return 0


def _prestart(executor: Any) -> None:
    """Let worker processes (or a local Dask cluster) start while this process imports,
    reads the config and plans the run."""
    prestart = getattr(executor, "prestart", None)
    if prestart is not None:
        prestart()


def _terminate_like_interrupt() -> Callable[[], None]:
    """SIGTERM (a batch system stopping the job) stops the run like Ctrl-C: workers are
    stopped, no output file is left half-written. Returns a function restoring the handler."""
    import signal
    import threading

    def handler(signum: int, frame: Any) -> None:
        raise KeyboardInterrupt

    if (threading.current_thread() is not threading.main_thread()
            or signal.getsignal(signal.SIGTERM) != signal.SIG_DFL):
        return lambda: None
    signal.signal(signal.SIGTERM, handler)

    def restore() -> None:
        signal.signal(signal.SIGTERM, signal.SIG_DFL)

    return restore


def make_executor(*, jobs: int | None = None, dask: str | None = None,
                  input_bytes: int | None = None) -> Any:
    """The executor for ``--jobs``/``--dask`` (:func:`evtkin.run.executors.executor_for`)."""
    from evtkin.run.executors import executor_for

    return executor_for(jobs=jobs, dask=dask, input_bytes=input_bytes)
