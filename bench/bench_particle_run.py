"""The whole particle-level run (read + objects + jets + steps + composites + fill) of
``configs/ttbar_particle_level.toml`` on showered toy tt̄ events, one core and ``--jobs 2``.

    python bench/bench_particle_run.py [--file PATH] [--events 2000] [--workers 2] [--copies 4]

The input is a plain (uncompressed, so it splits into byte-range units) toy shower file in
/tmp, made once with ``evtkin toy shower samples/toy_ttbar.lhe.gz -n EVENTS`` (about
4 s per 250 events on one core); the shipped 250-event sample is too small to time. The
config's samples are replaced by that file and its response histograms become plain ones
(no truth files, so the file splits into units).

A. In this process, one core (reader without threads), CPU time (``time.process_time``) per
   stage, cumulative: read only (the baseline), + objects (prompt, dressing, ghost-labelled
   jets, missing pT), + steps, composites and histogram values (``analyse_chunk`` and
   ``hist_entries``), each as events per CPU second and as a ratio to the read-only rate.
B. The run phase (``evtkin.run`` with no outputs) on the file listed ``--copies`` times, with
   ``--jobs 1`` (one core) and ``--jobs N`` (warm forkserver), interleaved, best of
   ``--rounds``: wall time and CPU seconds from the run's provenance. The machine is
   shared, so wall times lie when other work runs: the speed-up is also given as the CPU-bound
   estimate (one process' CPU time over the busiest worker's), the wall time the run would take
   with a free core per worker. Targets: >= 1000 events/s on one core, ``--jobs 2`` >= 1.7x
   ``--jobs 1``. Also checks that both runs agree (cutflow exactly, histograms to 1e-12).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
CONFIG = ROOT / "configs" / "ttbar_particle_level.toml"


def make_sample(path: Path, events: int) -> None:
    if path.exists():
        return
    print(f"making {path} ({events} showered events; about 10 s per 250) ...", file=sys.stderr)
    t = time.perf_counter()
    tmp = path.with_name(path.name + ".part.hepmc")
    evtkin = str(Path(sys.executable).parent / "evtkin")
    subprocess.run([evtkin, "toy", "shower", str(ROOT / "samples" / "toy_ttbar.lhe.gz"),
                    "-n", str(events), "--seed", "1601", "-o", str(tmp)], check=True,
                   stdout=subprocess.DEVNULL)
    os.replace(tmp, path)
    print(f"  done in {time.perf_counter() - t:.0f} s", file=sys.stderr)


def bench_config(path: Path, copies: int = 1) -> Any:
    import tomllib

    from evtkin.config import load_config

    data = tomllib.loads(CONFIG.read_text())
    # the file K times: a file listed twice is read once (so is a symbolic link to it), so
    # hard links with their own names
    files = [str(path)] + [str(_link(path, k)) for k in range(1, copies)]
    data["samples"] = {"ttbar": {"files": files, "format": "hepmc", "toy": True}}
    for h in data["histograms"].values():
        h.pop("response", None)
    data.pop("output", None)
    return load_config(data)


def _link(path: Path, k: int) -> Path:
    link = path.with_name(f"{path.stem}_copy{k}{path.suffix}")
    if not link.exists():
        os.link(path, link)
    return link


def flat(res: Any) -> dict[str, Any]:
    out = {}
    for name, s in res.samples.items():
        out[name] = ({h: (a.sumw.copy(), a.entries) for h, a in s.weighted.items()},
                     [r["n_raw"] for r in s.cutflow])
    return out


def agree(a: dict[str, Any], b: dict[str, Any]) -> bool:
    import numpy as np

    for name, (ha, ca) in a.items():
        hb, cb = b[name]
        if ca != cb:
            return False
        for h, (w, n) in ha.items():
            if hb[h][1] != n or not np.allclose(hb[h][0], w, rtol=1e-12, atol=0):
                return False
    return True


def stages(cfg: Any, path: Path, repeat: int) -> None:
    from evtkin.io.hepmc import read_hepmc
    from evtkin.run.plan import analyse_chunk, build_plan, hist_entries
    from evtkin.select import build

    plan = build_plan(cfg)

    def read_only() -> int:
        return sum(len(c) for c in read_hepmc(path, threads=0))

    def objects() -> int:
        n = 0
        for c in read_hepmc(path, threads=0):
            build.particle_objects(c["particles"], cfg.objects, cfg.overlap_removal,
                                   cfg.missing_pt)
            n += len(c)
        return n

    def analysis() -> int:
        n = 0
        for c in read_hepmc(path, threads=0):
            view, masks = analyse_chunk(plan, c)
            for h in plan.hist_specs:
                hist_entries(view, h, masks[plan.row_of(h)])
            n += len(c)
        return n

    print("A. one core, in this process, CPU time per stage (best of "
          f"{repeat}; cumulative stages)")
    base = None
    for label, fn in (("read only (baseline)", read_only), ("+ objects and jets", objects),
                      ("+ steps, composites, values", analysis)):
        best = float("inf")
        n = 0
        for _ in range(repeat):
            t = time.process_time()
            n = fn()
            best = min(best, time.process_time() - t)
        rate = n / best
        base = rate if base is None else base
        print(f"  {label:30s} {best:7.2f} CPU-s  {rate:8.0f} events/CPU-s  "
              f"{rate / base:5.2f}x the read-only rate")


def runs(cfg: Any, workers: int, rounds: int) -> bool:
    from evtkin.run.executors import ProcessExecutor, SerialExecutor
    from evtkin.run.pipeline import run

    print(f"B. the run phase (evtkin.run, no outputs): --jobs 1 vs --jobs {workers}, "
          f"{rounds} interleaved rounds after a cold-forkserver run")
    load0 = os.getloadavg()
    print(f"  load average before {load0[0]:.2f} {load0[1]:.2f} {load0[2]:.2f} "
          f"({os.cpu_count()} cores)")
    plan = [(f"--jobs {workers} (cold forkserver)", lambda: ProcessExecutor(workers))]
    for _ in range(rounds):
        plan += [("--jobs 1 (one core)", lambda: SerialExecutor(read_threads=0)),
                 (f"--jobs {workers} (warm forkserver)", lambda: ProcessExecutor(workers))]
    got: dict[str, list[tuple[float, float, float]]] = {}
    first: Any = None
    same = True
    events = 0
    for label, make in plan:
        load = os.getloadavg()[0]
        t = time.perf_counter()
        res = run(cfg, executor=make(), progress=False)
        dt = time.perf_counter() - t
        ex = res.provenance["execution"]
        events = sum(s.n_events for s in res.samples.values())
        cpu, worst = float(ex["cpu_seconds"]), float(max(ex["cpu_seconds_per_worker"]))
        got.setdefault(label, []).append((dt, cpu, worst))
        now = flat(res)
        first = now if first is None else first
        same = same and agree(first, now)
        print(f"  {label:30s} {dt:7.2f} s wall  {events / dt:7.0f} events/s  "
              f"CPU {cpu:6.2f} s ({events / cpu:6.0f} events/CPU-s), busiest worker "
              f"{worst:6.2f} s, units {ex['units']}  (load {load:.2f})")
    one = got["--jobs 1 (one core)"]
    par = got[f"--jobs {workers} (warm forkserver)"]
    wall1, cpu1 = min(r[0] for r in one), min(r[1] for r in one)
    wall2, cpu2, worst2 = (min(r[0] for r in par), min(r[1] for r in par),
                           min(r[2] for r in par))
    print(f"  {events} events. Best of {rounds}:")
    print(f"  one core: {events / wall1:.0f} events/s wall, {events / cpu1:.0f} events/CPU-s "
          "(target >= 1000)")
    print(f"  speed-up --jobs {workers} (warm) over --jobs 1, wall: {wall1 / wall2:5.2f}x  "
          "(target >= 1.7; wall time on a shared machine)")
    print(f"  speed-up, CPU-bound estimate: one process {cpu1:.2f} CPU-s / busiest worker "
          f"{worst2:.2f} CPU-s = {cpu1 / worst2:5.2f}x  (all workers {cpu2:.2f} CPU-s: "
          f"{cpu2 / cpu1:4.2f}x the one-core CPU time)")
    print(f"results agree (cutflow exact, histograms 1e-12): {same}")
    load1 = os.getloadavg()
    print(f"load average after {load1[0]:.2f} {load1[1]:.2f} {load1[2]:.2f}")
    return same


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--events", type=int, default=2000)
    ap.add_argument("--file", type=Path, default=None,
                    help="a plain HepMC file of showered tt̄ events (default: made in /tmp)")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--repeat", type=int, default=3, help="repeats of each stage in A")
    ap.add_argument("--rounds", type=int, default=3, help="rounds of --jobs 1, --jobs N in B")
    ap.add_argument("--copies", type=int, default=4,
                    help="the run phase (B) reads the file this many times (more work per run, "
                         "so that the workers' start-up counts less)")
    args = ap.parse_args()
    path = args.file or Path(f"/tmp/evtkin_plevel_bench/toy_ttbar_shower_{args.events}.hepmc")
    path.parent.mkdir(parents=True, exist_ok=True)
    make_sample(path, args.events)
    cfg = bench_config(path)
    from evtkin.run.pipeline import run

    print(f"file {path} ({path.stat().st_size / 1e6:.0f} MB); run phase: {args.copies} copies")
    run(cfg, max_events=200)  # warm-up: imports and the compiled kernels' caches
    stages(cfg, path, args.repeat)
    return 0 if runs(bench_config(path, args.copies), args.workers, args.rounds) else 1


if __name__ == "__main__":  # required: the executors start processes
    sys.exit(main())
