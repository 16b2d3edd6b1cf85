"""Jet clustering speed: evtkin.cluster_jets against today's parton-level clustering code
(select/jets.py, a direct search over all pairs at every step) on the same events, one core.

Events of N particles spread uniformly in rapidity |y| < 5 and φ, pT exponential (mean 2 GeV) +
0.2 GeV, pion mass; anti-kT R = 0.4 unless --algorithm/--radius say otherwise. Prints events/s
(wall clock and process CPU time: the machine is shared, CPU time is the steadier figure), the
exponent a of a fit t ∝ N^a between N = 250 and N = 4000, the ratio to the parton-level code at
the sizes where that code finishes in reasonable time, and the same for showered toy events when
a HepMC sample is given (--hepmc FILE; default: samples/*shower*.hepmc*, if there is one).

    .venv/bin/python bench/bench_clustering.py [--quick]
"""

from __future__ import annotations

import argparse
import glob
import math
import time
from collections.abc import Callable
from pathlib import Path

import awkward as ak
import numpy as np

from evtkin.select import clustering
from evtkin.select import jets as parton_jets

ROOT = Path(__file__).resolve().parent.parent


def uniform_events(rng: np.random.Generator, nev: int, n: int) -> ak.Array:
    pt = rng.exponential(2.0, (nev, n)) + 0.2
    y = rng.uniform(-5.0, 5.0, (nev, n))
    phi = rng.uniform(-math.pi, math.pi, (nev, n))
    mt = np.sqrt(pt * pt + 0.1396**2)
    cols = {"px": pt * np.cos(phi), "py": pt * np.sin(phi), "pz": mt * np.sinh(y),
            "energy": mt * np.cosh(y)}
    return ak.unflatten(ak.zip({k: v.ravel() for k, v in cols.items()}), np.full(nev, n))


def timed(fn: Callable[[], object], repeat: int) -> tuple[float, float]:
    """Best (wall, cpu) seconds of ``repeat`` calls."""
    wall = cpu = math.inf
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall = min(wall, time.perf_counter() - t0)
        cpu = min(cpu, time.process_time() - c0)
    return wall, cpu


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawTextHelpFormatter)
    ap.add_argument("--algorithm", default="anti-kt", choices=sorted(clustering.ALGORITHMS))
    ap.add_argument("--radius", type=float, default=0.4)
    ap.add_argument("--quick", action="store_true", help="fewer events (a rough figure)")
    ap.add_argument("--hepmc", help="showered events to cluster as well (stable particles)")
    args = ap.parse_args()
    rng = np.random.default_rng(2024)
    p = float(clustering.ALGORITHMS[args.algorithm])
    budget = 100_000 if args.quick else 600_000  # particles per timing

    def new(ev: ak.Array) -> object:
        return clustering.cluster_jets(ev, radius=args.radius, algorithm=args.algorithm)

    def old(ev: ak.Array) -> object:
        return parton_jets.cluster(ev, args.radius, p=p)

    new(uniform_events(rng, 2, 20))  # compile / load the kernels
    old(uniform_events(rng, 2, 20))
    print(f"{args.algorithm} R = {args.radius}, uniform events |y| < 5; one core")
    print(f"{'N':>6} {'events':>7} {'ev/s wall':>10} {'ev/s cpu':>10} {'µs/event cpu':>13}"
          f" {'old ev/s cpu':>13} {'new/old':>8}")
    sizes = (250, 500, 1000, 2000, 4000)
    cpu_per_event: dict[int, float] = {}
    for n in sizes:
        nev = max(10, min(2000, budget // n))
        events = uniform_events(rng, nev, n)
        wall, cpu = timed(lambda ev=events: new(ev), 3)
        cpu_per_event[n] = cpu / nev
        old_txt = ratio_txt = ""
        if n <= 1000:
            k = {250: 20, 500: 5, 1000: 1}[n] if not args.quick else 1
            sub = events[:k]
            _, ocpu = timed(lambda ev=sub: old(ev), 1)
            old_txt = f"{k / ocpu:13.1f}"
            ratio_txt = f"{(ocpu / k) / (cpu / nev):7.0f}x"
        print(f"{n:6d} {nev:7d} {nev / wall:10.0f} {nev / cpu:10.0f} {1e6 * cpu / nev:13.0f}"
              f" {old_txt:>13} {ratio_txt:>8}")
    logn = np.log(np.array(sizes, dtype=float))
    logt = np.log(np.array([cpu_per_event[n] for n in sizes]))
    slope = float(np.polyfit(logn, logt, 1)[0])
    two_point = math.log(cpu_per_event[4000] / cpu_per_event[250]) / math.log(16.0)
    print(f"exponent a (t ∝ N^a, least-squares fit over N = 250..4000): {slope:.2f}; "
          f"from the end points alone: {two_point:.2f}")
    print(f"N = 500: {1.0 / cpu_per_event[500]:.0f} events/s (target >= 2000)")

    path = args.hepmc
    if path is None:
        found = sorted(glob.glob(str(ROOT / "samples" / "*shower*.hepmc*")))
        path = found[0] if found else None
    if path is None:
        print("no showered sample found (samples/*shower*.hepmc*): skipped")
        return
    import evtkin

    chunks = [c for c in evtkin.read_hepmc(path, step_size=2000)]  # type: ignore[attr-defined]
    chunk = ak.concatenate(chunks) if len(chunks) > 1 else chunks[0]
    stable = chunk.particles[chunk.particles.status == 1]
    stable = stable[:2000]
    nmean = float(ak.mean(ak.num(stable)))
    wall, cpu = timed(lambda: new(stable), 3)
    k = 3
    _, ocpu = timed(lambda: old(stable[:k]), 1)
    ratio = (ocpu / k) / (cpu / len(stable))
    print(f"showered events {Path(path).name}: {len(stable)} events, {nmean:.0f} stable particles "
          f"on average: {len(stable) / cpu:.0f} events/s cpu ({len(stable) / wall:.0f} wall); "
          f"parton-level code {k / ocpu:.1f} events/s, ratio {ratio:.0f}x")


if __name__ == "__main__":
    main()
