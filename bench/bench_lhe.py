"""Benchmark of the LHE reader against a bare line scan of the same file, in one run.

    python bench/make_big_lhe.py --gzip          # once: /tmp/evtkin_bench.lhe(.gz)
    python bench/bench_lhe.py [--file /tmp/evtkin_bench.lhe] [--repeat 3] [--big]

Prints MB/s (of uncompressed text), MB per CPU second of the whole process (all threads;
the least CPU of the runs: it moves far less with the load of a shared machine than wall
time) and the ratio to a bare ``for line in open(path, "rb")`` scan measured in the same
run: uncompressed with 0, 1 and 2 parse threads, gzip, the raw decompression rate, peak
RSS of each reading process, warm start-up time (imports + cached compile + a tiny file)
and the cold compile time (empty numba cache). Each measurement runs in a fresh
subprocess; the best of ``--repeat`` interleaved runs is shown.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from _baselines import CHILD_PRELUDE, run_child
from _baselines import interleaved as _interleaved

CHILD = CHILD_PRELUDE + r"""
mode, path, threads = sys.argv[1], sys.argv[2], int(sys.argv[3])
t0, c0 = time.perf_counter(), time.process_time()
if mode in ("bare", "decompress"):
    n = baseline(mode, path)
else:
    import evtkin
    # load the cached compiled kernel and start the threads once on a tiny file: start-up is
    # measured on its own below, here we time the reading of the big file
    for _ in evtkin.read_lhe(sys.argv[4]):
        pass
    t0, c0 = time.perf_counter(), time.process_time()
    n = 0
    for chunk in evtkin.read_lhe(path, threads=threads):
        n += len(chunk)
report(time.perf_counter() - t0, n, time.process_time() - c0)
"""

STARTUP = r"""
import time
import evtkin
next(iter(evtkin.read_lhe(sys.argv[1])))
print(time.time() - float(sys.argv[2]))  # launch to first chunk (interpreter start included)
"""


TINY = os.path.join(tempfile.gettempdir(), "evtkin_bench_tiny.lhe")


def make_tiny(path: str) -> str:
    """The header and first events of ``path`` as a small complete file (for warm-up)."""
    with open(path, "rb") as src:
        head = src.read(200_000)
    cut = head.rfind(b"</event>") + len(b"</event>\n")
    with open(TINY, "wb") as dst:
        dst.write(head[:cut] + b"</LesHouchesEvents>\n")
    return TINY


def make_big(path: str, copies: int) -> str:
    """``path`` with its events repeated ``copies`` times (made once, next to it in /tmp)."""
    out = os.path.join(tempfile.gettempdir(), f"evtkin_bench_x{copies}.lhe")
    if os.path.exists(out) and os.path.getmtime(out) >= os.path.getmtime(path):
        return out
    data = Path(path).read_bytes()
    first = data.index(b"<event")
    last = data.rindex(b"</event>") + len(b"</event>\n")
    with open(out + ".part", "wb") as fh:
        fh.write(data[:first])
        for _ in range(copies):
            fh.write(data[first:last])
        fh.write(data[last:])
    os.replace(out + ".part", out)
    return out


def run(mode: str, path: str, threads: int = 1, env: dict | None = None) -> dict:
    return run_child(CHILD, [mode, path, str(threads), TINY], env)


def interleaved(cases: list[tuple[str, str, str, int]], repeat: int) -> dict[str, dict]:
    """Every case once per round, ``repeat`` rounds (see ``_baselines.interleaved``)."""
    return _interleaved([(label, [mode, path, str(threads), TINY])
                         for label, mode, path, threads in cases], CHILD, repeat)  # fmt: skip


def timed_startup(tiny: str, env: dict | None = None) -> tuple[float, float]:
    """(launch to first chunk, launch to process exit): start-up proper, and with the
    interpreter's shut-down (freeing numba/LLVM, ~0.4 s here) for reference."""
    t0 = time.perf_counter()
    out = subprocess.run(
        [sys.executable, "-c", "import sys\n" + STARTUP, tiny, repr(time.time())],
        capture_output=True, text=True, check=True, env=env,
    )  # fmt: skip
    return float(out.stdout.strip().splitlines()[-1]), time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--file", default="/tmp/evtkin_bench.lhe")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--big", action="store_true",
                    help="also read a ~10x larger file (the events repeated, made once in /tmp) "
                    "to show that peak memory does not grow with the file size")
    args = ap.parse_args()
    path = args.file
    gz = path + ".gz"
    size_mb = Path(path).stat().st_size / 1e6
    print(f"file {path}: {size_mb:.0f} MB uncompressed; machine: {os.cpu_count()} cores (shared)")
    subprocess.run(["cat", path], stdout=subprocess.DEVNULL, check=True)  # warm the page cache
    make_tiny(path)

    cases = [
        ("bare line scan (baseline)", "bare", path, 1),
        ("read_lhe plain, all in one thread", "read", path, 0),
        ("read_lhe plain, 1 parse thread", "read", path, 1),
        ("read_lhe plain, 2 parse threads", "read", path, 2),
    ]
    if Path(gz).exists():
        subprocess.run(["cat", gz], stdout=subprocess.DEVNULL, check=True)
        cases += [
            ("raw gzip decompression (isal)", "decompress", gz, 1),
            ("read_lhe gzip, 1 parse thread", "read", gz, 1),
            ("read_lhe gzip, 2 parse threads", "read", gz, 2),
        ]
    print(f"load average before: {os.getloadavg()}")
    res = interleaved(cases, args.repeat)
    base = size_mb / res[cases[0][0]]["seconds"]
    print(
        f"{'what':34s} {'s':>6s} {'MB/s':>6s} {'x bare':>7s} {'CPU MB/s':>9s} "
        f"{'peak RSS MB':>12s} {'events':>8s}  all runs (s)"
    )
    for label, r in res.items():
        mbs = size_mb / r["seconds"]
        runs_s = " ".join(f"{x:.2f}" for x in r["all"])
        cpu = f"{size_mb / r['cpu_min']:9.0f}" if r["cpu_min"] else f"{'':9s}"
        print(
            f"{label:34s} {r['seconds']:6.2f} {mbs:6.0f} {mbs / base:7.2f} {cpu} "
            f"{r['rss_mb']:12.0f} {r['n']:8d}  {runs_s}"
        )
    print(f"load average after: {os.getloadavg()}")
    if args.big:
        big = make_big(path, 10)
        big_mb = Path(big).stat().st_size / 1e6
        for threads in (1, 2):
            r = run("read", big, threads)
            print(f"{big_mb:.0f} MB file, {threads} parse thread(s): {r['seconds']:.2f} s, "
                  f"{big_mb / r['seconds']:.0f} MB/s, {r['n']} events, "
                  f"peak RSS {r['rss_mb']:.0f} MB")

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
    print(f"start-up, warm cache (launch to first chunk: python, imports, cached kernel): "
          f"{warm[0]:.2f} s ({warm[1]:.2f} s to process exit)")
    print(f"start-up, cold (empty numba cache, includes compiling): {cold[0]:.2f} s "
          f"({cold[1]:.2f} s to process exit)")


if __name__ == "__main__":
    main()
