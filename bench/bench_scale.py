"""Scaling benchmark of ``evtkin run``: one process vs local worker processes vs Dask.

    python bench/bench_scale.py [--file PATH] [--copies K] [--workers 2] [--skip-dask]

The input is a big toy tt̄ file (toy data). By default the gzipped 200k-event file made by
``bench/bench_run.py --events 200000`` is decompressed once to a plain copy in /tmp, so
that it can be split into byte-range work units; ``--copies K`` lists it K times.

A. End to end: ``evtkin run`` in a fresh process (imports, pool or cluster start-up, JSON
   output) with ``--jobs 1`` (one core), ``--jobs N`` and ``--dask local --jobs N``, after
   one tiny untimed run (so that no timed run recompiles numba kernels).
B. In this process after a warm-up, the run phase only: ``--jobs 1`` (one core: the reader
   parses in the analysis thread), ``--jobs N`` with a cold forkserver (it imports evtkin
   and loads the compiled kernels), again with the forkserver warm (start-up amortised, as
   in a long run), a Dask ``LocalCluster`` of N single-threaded workers, and, for
   reference, one process whose reader parses in 2 threads of its own.

"cores busy" is the CPU time of the workers (all their threads) over the wall time: one
process already keeps more than one core busy, because the LHE reader parses in its own
threads while the analysis runs. Also printed: events/s, MB/s, the speed-ups (targets:
``--jobs 2`` over ``--jobs 1`` >= 1.7, Dask over ``--jobs 2`` >= 0.9), the peak resident
memory of every worker, the number of units, the load average (the machine may be shared)
and a check that all runs agree (cutflow counts exactly, histograms to 1e-12 relative).
"""

from __future__ import annotations

import argparse
import gzip
import os
import re
import shutil
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_GZ = Path("/tmp/evtkin_bench_ttbar_200000.lhe.gz")


def plain_copy(src: Path) -> Path:
    """An uncompressed copy of ``src`` in /tmp (made once)."""
    if not src.name.endswith(".gz"):
        return src
    dst = Path("/tmp") / ("evtkin_scale_" + src.name[: -len(".gz")])
    if not dst.exists() or dst.stat().st_mtime < src.stat().st_mtime:
        t = time.perf_counter()
        tmp = dst.with_suffix(".part")
        with gzip.open(src, "rb") as fi, open(tmp, "wb") as fo:
            shutil.copyfileobj(fi, fo, 1 << 22)
        os.replace(tmp, dst)
        print(f"wrote {dst} ({dst.stat().st_size / 1e6:.0f} MB) in "
              f"{time.perf_counter() - t:.1f} s", file=sys.stderr)
    return dst


def write_cli_config(config: Path, files: list[Path]) -> Path:
    """The config with its samples replaced by ``files`` and JSON output only."""
    text = config.read_text()
    text = re.sub(r"\[samples\.[^\]]+\].*?(?=\n\[)", "", text, flags=re.S)
    text = re.sub(r"\[output\].*?(?=\n\[|\Z)", "", text, flags=re.S)
    listed = ", ".join(f'"{f}"' for f in files)
    text += f'\n[samples.ttbar]\nfiles = [{listed}]\ntoy = true\n\n[output]\nformats = ["json"]\n'
    out = Path("/tmp/evtkin_scale_bench.toml")
    out.write_text(text)
    return out


def flat(res):  # type: ignore[no-untyped-def]
    out = {}
    for name, s in res.samples.items():
        out[name] = ({h: (a.sumw.copy(), a.entries) for h, a in s.weighted.items()},
                     [r["n_raw"] for r in s.cutflow])
    return out


def agree(a, b) -> bool:  # type: ignore[no-untyped-def]
    import numpy as np

    for name, (ha, ca) in a.items():
        hb, cb = b[name]
        if ca != cb:
            return False
        for h, (w, n) in ha.items():
            if hb[h][1] != n or not np.allclose(hb[h][0], w, rtol=1e-12, atol=0):
                return False
    return True


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--file", type=Path, default=DEFAULT_GZ)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--config", type=Path, default=ROOT / "configs" / "ttbar_lepton_jets.toml")
    ap.add_argument("--copies", type=int, default=1,
                    help="list the file this many times in the sample (more work per run)")
    ap.add_argument("--skip-dask", action="store_true")
    args = ap.parse_args()
    if not args.file.exists():
        print(f"{args.file} is missing: make it with `python bench/bench_run.py --events "
              "200000` or `evtkin toy ttbar -n 200000 -o ...`", file=sys.stderr)
        return 2
    path = plain_copy(args.file)
    size = path.stat().st_size

    import tomllib

    from evtkin.config import load_config
    from evtkin.run.executors import DaskExecutor, ProcessExecutor, SerialExecutor
    from evtkin.run.pipeline import run

    data = tomllib.loads(args.config.read_text())
    data["samples"] = {"ttbar": {"files": [str(path)] * args.copies, "toy": True}}
    data.pop("output", None)
    cfg = load_config(data)

    n = args.workers
    cli_cfg = write_cli_config(args.config, [path] * args.copies)
    evtkin_cmd = str(Path(sys.executable).parent / "evtkin")
    print(f"file {path} x {args.copies} ({size * args.copies / 1e6:.0f} MB), "
          f"{os.cpu_count()} cores")
    print("A. end to end: `evtkin run` in a fresh process (imports, start-up, outputs: json)")
    cli_runs = [["--jobs", "1"], ["--jobs", str(n)]]
    if not args.skip_dask:
        cli_runs.append(["--dask", "local", "--jobs", str(n)])
    # a tiny run first, so that no timed run pays for (re)compiling numba kernels
    subprocess.run([evtkin_cmd, "run", str(cli_cfg), "--out", "/tmp/evtkin_scale_out",
                    "--jobs", "1", "--max-events", "1000"], check=True, stdout=subprocess.DEVNULL)
    cli_times = []
    for extra in cli_runs:
        load = os.getloadavg()[0]
        t = time.perf_counter()
        subprocess.run([evtkin_cmd, "run", str(cli_cfg), "--out", "/tmp/evtkin_scale_out",
                        *extra], check=True, stdout=subprocess.DEVNULL)
        dt = time.perf_counter() - t
        cli_times.append(dt)
        print(f"  evtkin run {' '.join(extra):28s} {dt:7.2f} s  (load {load:.2f})")
    print(f"  speed-up --jobs {n} over --jobs 1: {cli_times[0] / cli_times[1]:5.2f}x")
    if len(cli_times) > 2:
        print(f"  --dask local vs --jobs {n}: {cli_times[1] / cli_times[2]:5.2f}x")
    print("B. in one process, after a warm-up (run phase only, no outputs)")

    # warm-up: imports and numba caches, on a small prefix
    run(cfg, max_events=2000)

    runs = [("--jobs 1 (one core)", lambda: SerialExecutor(read_threads=0)),
            (f"--jobs {n} (cold start)", lambda: ProcessExecutor(n)),
            (f"--jobs {n} (warm forkserver)", lambda: ProcessExecutor(n))]
    if not args.skip_dask:
        runs.append((f"--dask local ({n} workers)", lambda: DaskExecutor("local", n_workers=n)))
    # for reference: one process whose LHE reader parses in 2 threads (the default of
    # evtkin.run() and of a small input without --jobs)
    runs.append(("one process, 2 parse threads", lambda: SerialExecutor()))
    load0 = os.getloadavg()
    results = {}
    cpu_total: dict[str, float] = {}
    cpu_worst: dict[str, float] = {}
    size *= args.copies
    print(f"  load average before {load0[0]:.2f} {load0[1]:.2f} {load0[2]:.2f}")
    for label, make in runs:
        load = os.getloadavg()[0]
        t = time.perf_counter()
        res = run(cfg, executor=make(), progress=False)
        dt = time.perf_counter() - t
        ex = res.provenance["execution"]
        events = sum(s.n_events for s in res.samples.values())
        results[label] = (dt, flat(res))
        cpu_total[label] = ex["cpu_seconds"]
        cpu_worst[label] = max(ex["cpu_seconds_per_worker"])
        rss = ", ".join(f"{v:.0f}" for v in ex["peak_rss_mb_per_worker"])
        print(f"  {label:28s} {dt:7.2f} s  {events / dt / 1e3:7.1f} k ev/s  "
              f"{size / dt / 1e6:6.1f} MB/s  units {ex['units']:3d}  "
              f"cores busy {ex['cpu_seconds'] / dt:4.2f}  peak RSS/worker [MB] {rss}"
              f"  (load {load:.2f})")
    load1 = os.getloadavg()
    labels = list(results)
    base = results[labels[0]][0]
    for k in (1, 2):
        print(f"  speed-up {labels[k]} over --jobs 1: {base / results[labels[k]][0]:5.2f}x  "
              "(target >= 1.7 for 2 workers)")
    # load-independent view: the CPU time of the busiest worker is the wall time the run
    # would take with a free core per worker (start-up and memory-bandwidth effects aside)
    print(f"  speed-up {labels[2]} over {labels[-1]}: "
          f"{results[labels[-1]][0] / results[labels[2]][0]:5.2f}x")
    for k in (2, 3)[: len(labels) - 3]:
        print(f"  CPU-bound estimate {labels[k]}: one process {cpu_total[labels[0]]:.1f} CPU-s, "
              f"busiest worker {cpu_worst[labels[k]]:.1f} CPU-s, all workers "
              f"{cpu_total[labels[k]]:.1f} CPU-s -> speed-up "
              f"{cpu_total[labels[0]] / cpu_worst[labels[k]]:4.2f}x with free cores")
    if len(labels) > 4:
        par = results[labels[1]][0]
        print(f"  {labels[3]} vs {labels[1]}: {par / results[labels[3]][0]:5.2f}x  "
              "(target >= 0.9)")
    same = all(agree(results[labels[0]][1], results[k][1]) for k in labels[1:])
    print(f"results agree (cutflow exact, histograms 1e-12): {same}")
    print(f"load average after {load1[0]:.2f} {load1[1]:.2f} {load1[2]:.2f}")
    return 0 if same else 1


if __name__ == "__main__":  # required: the executors start processes
    sys.exit(main())
