"""Benchmark of the LHE reader against a bare line scan of the same file, in one run.

    python bench/make_big_lhe.py --gzip          # once: /tmp/evtkin_bench.lhe(.gz)
    python bench/bench_lhe.py [--file /tmp/evtkin_bench.lhe] [--repeat 3]

Prints MB/s (of uncompressed text) and the ratio to a bare ``for line in open(path, "rb")``
scan measured in the same run: uncompressed with 1 and 2 parse threads, gzip, the raw
decompression rate, peak RSS of each reading process, warm start-up time (imports +
cached compile + a tiny file) and the cold compile time (empty numba cache). Each
measurement runs in a fresh subprocess; the best of ``--repeat`` runs is shown.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CHILD = r"""
import json, resource, sys, time
mode, path, threads = sys.argv[1], sys.argv[2], int(sys.argv[3])
t0 = time.perf_counter()
n = 0
if mode == "bare":
    for line in open(path, "rb"):
        n += 1
elif mode == "decompress":
    from isal import igzip
    buf = bytearray(8 << 20)
    with igzip.open(path, "rb") as fh:
        while True:
            got = fh.readinto(buf)
            if not got:
                break
            n += got
else:
    import evtkin
    from evtkin.io.lhe import _kernel
    _kernel()
    t0 = time.perf_counter()
    for chunk in evtkin.read_lhe(path, threads=threads):
        n += len(chunk)
dt = time.perf_counter() - t0
rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
print(json.dumps({"seconds": dt, "n": n, "rss_mb": rss}))
"""

STARTUP = r"""
import time; t0 = time.perf_counter()
import evtkin
list(evtkin.read_lhe(sys.argv[1]))
print(time.perf_counter() - t0)
"""


def run(mode: str, path: str, threads: int = 1, env: dict | None = None) -> dict:
    out = subprocess.run(
        [sys.executable, "-c", CHILD, mode, path, str(threads)],
        capture_output=True, text=True, check=True, env=env,
    )  # fmt: skip
    return json.loads(out.stdout.strip().splitlines()[-1])


def best(mode: str, path: str, threads: int, repeat: int) -> dict:
    runs = [run(mode, path, threads) for _ in range(repeat)]
    r = min(runs, key=lambda x: x["seconds"])
    r["rss_mb"] = max(x["rss_mb"] for x in runs)
    return r


def timed_startup(tiny: str, env: dict | None = None) -> float:
    t0 = time.perf_counter()
    subprocess.run(
        [sys.executable, "-c", "import sys\n" + STARTUP, tiny],
        capture_output=True, text=True, check=True, env=env,
    )  # fmt: skip
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--file", default="/tmp/evtkin_bench.lhe")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    path = args.file
    gz = path + ".gz"
    size_mb = Path(path).stat().st_size / 1e6
    print(f"file {path}: {size_mb:.0f} MB uncompressed; machine: {os.cpu_count()} cores (shared)")
    subprocess.run(["cat", path], stdout=subprocess.DEVNULL, check=True)  # warm the page cache

    bare = best("bare", path, 1, args.repeat)
    base = size_mb / bare["seconds"]
    rows = [("bare line scan (baseline)", bare, 1.0)]
    for label, mode, p, th in (
        ("read_lhe plain, 1 parse thread", "read", path, 1),
        ("read_lhe plain, 2 parse threads", "read", path, 2),
    ):
        r = best(mode, p, th, args.repeat)
        rows.append((label, r, (size_mb / r["seconds"]) / base))
    if Path(gz).exists():
        subprocess.run(["cat", gz], stdout=subprocess.DEVNULL, check=True)
        r = best("decompress", gz, 1, args.repeat)
        rows.append(("raw gzip decompression (isal)", r, (size_mb / r["seconds"]) / base))
        for th in (1, 2):
            r = best("read", gz, th, args.repeat)
            rows.append(
                (f"read_lhe gzip, {th} parse thread(s)", r, (size_mb / r["seconds"]) / base)
            )
    print(f"{'what':40s} {'s':>7s} {'MB/s':>7s} {'x bare':>7s} {'peak RSS MB':>12s} {'events':>9s}")
    for label, r, ratio in rows:
        print(
            f"{label:40s} {r['seconds']:7.2f} {size_mb / r['seconds']:7.0f} {ratio:7.2f} "
            f"{r['rss_mb']:12.0f} {r['n']:9d}"
        )

    with tempfile.TemporaryDirectory() as tmp:
        tiny = os.path.join(tmp, "tiny.lhe")
        with open(path, "rb") as src:
            head = src.read(200_000)
        cut = head.rfind(b"</event>") + len(b"</event>\n")
        with open(tiny, "wb") as dst:
            dst.write(head[:cut] + b"</LesHouchesEvents>\n")
        warm = min(timed_startup(tiny) for _ in range(args.repeat))
        env = dict(os.environ, NUMBA_CACHE_DIR=os.path.join(tmp, "numba-cache"))
        cold = timed_startup(tiny, env)
    print(f"start-up, warm cache (python + imports + cached kernel + tiny file): {warm:.2f} s")
    print(f"start-up, cold (empty numba cache, includes compiling): {cold:.2f} s")


if __name__ == "__main__":
    main()
