"""End-to-end benchmark of ``evtkin run`` with the lepton+jets config on a big tt̄ file.

    python bench/bench_run.py [--events 1000000] [--step-size 100000] [--file PATH]

The big file is the shipped toy tt̄ sample (samples/toy_ttbar.lhe.gz, toy data) with its
event section repeated until ``--events`` events (written once to /tmp, gzipped). The run
is timed by stage (read / select+reconstruct / fill, as measured inside the work unit) and
compared with a bare ``read_lhe`` pass over the same file measured in the same process.
Target (issue 4): (select+reconstruct + fill) / read < 1.0.
"""

from __future__ import annotations

import argparse
import gzip
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def make_file(path: Path, events: int) -> Path:
    src = ROOT / "samples" / "toy_ttbar.lhe.gz"
    text = gzip.decompress(src.read_bytes()).decode()
    head, _, rest = text.partition("<event>")
    body = "<event>" + rest[: rest.rindex("</LesHouchesEvents>")]
    n_src = body.count("<event>")
    reps, extra = divmod(events, n_src)
    with gzip.open(path, "wt", compresslevel=1) as f:
        f.write(head)
        for _ in range(reps):
            f.write(body)
        if extra:
            cut = 0
            for _ in range(extra):
                cut = body.index("</event>", cut) + len("</event>\n")
            f.write(body[:cut])
        f.write("</LesHouchesEvents>\n")
    return path


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--events", type=int, default=1_000_000)
    ap.add_argument("--step-size", type=int, default=100_000)
    ap.add_argument("--file", type=Path, default=None)
    args = ap.parse_args()
    path = args.file or Path(f"/tmp/evtkin_bench_ttbar_{args.events}.lhe.gz")
    if not path.exists():
        t = time.perf_counter()
        make_file(path, args.events)
        print(f"wrote {path} ({path.stat().st_size / 1e6:.0f} MB) in "
              f"{time.perf_counter() - t:.1f} s", file=sys.stderr)

    import tomllib

    from evtkin.config import load_config
    from evtkin.io.lhe import read_lhe
    from evtkin.run.plan import build_plan
    from evtkin.run.units import WorkUnit, process_unit

    # warm-up (numba caches, imports) on a few events
    for _ in read_lhe(path, step_size=1000):
        break

    t = time.perf_counter()
    n = sum(len(c) for c in read_lhe(path, step_size=args.step_size))
    bare = time.perf_counter() - t

    data = tomllib.loads((ROOT / "configs" / "ttbar_lepton_jets.toml").read_text())
    data["samples"] = {"ttbar": {"files": [str(path)], "toy": True}}
    data.pop("output", None)
    plan = build_plan(load_config(data), step_size=args.step_size)
    t = time.perf_counter()
    part = process_unit(plan, WorkUnit("ttbar", 0, str(path)))
    total = time.perf_counter() - t
    s = part.seconds
    work = s["select"] + s["fill"]
    print(f"events                          {n}")
    print(f"bare read_lhe pass              {bare:8.2f} s   {n / bare / 1e3:8.1f} k events/s")
    print(f"run: read (inside the unit)     {s['read']:8.2f} s")
    print(f"run: select + reconstruct       {s['select']:8.2f} s")
    print(f"run: fill                       {s['fill']:8.2f} s")
    print(f"run: total incl. checksum       {total:8.2f} s   {n / total / 1e3:8.1f} k events/s")
    print(f"ratio (select+reco+fill) / read {work / s['read']:8.2f}   (target < 1.0)")
    print(f"ratio (select+reco+fill) / bare {work / bare:8.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
