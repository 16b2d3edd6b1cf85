"""Benchmark of the compiled LHE scan kernel alone (no reading, no chunk assembly).

    python bench/make_big_lhe.py                      # once: /tmp/evtkin_bench.lhe
    python bench/bench_lhe_kernel.py [--file /tmp/evtkin_bench.lhe] [--repeat 5]
                                     [--no-compile] [--kernel-file other_scan.py]
                                     [--compare older_scan.py]

The event part of the file is read into memory once, in 8 MB pieces cut after the last
``</event>`` of each (as the reader does). Each run then parses every piece through
``_Scratch.parse`` (the kernel call plus its Python wrapper) on one thread; the time is
the thread's CPU time (``time.thread_time``), so that other load on a shared machine
distorts it less than wall-clock time. Printed: MB/s (of text) for the best and the
median run, with the load average, and, each in a fresh subprocess, the cold-compile
time (empty temporary ``NUMBA_CACHE_DIR``) and the cached-load time (same directory,
second process), both with and without the numba import.

A numpy pass over the same pieces (counting ``<``) is timed in the same run as the
baseline, and the kernel's MB/s are also printed as a ratio to it. ``--kernel-file``
benchmarks the ``compiled_kernel()`` of another copy of the scan module instead of
``evtkin.io.lhe_scan``; ``--compare FILE`` times a second copy (say, an older version)
in the same run, interleaved, and prints the speed ratio of the two.
"""

from __future__ import annotations

import argparse
import importlib
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from types import ModuleType
from typing import Any

import numpy as np

PIECE = 8 << 20  # the reader's buffer size

CHILD = r"""
import importlib, json, sys, time
import numpy as np
t0 = time.perf_counter()
import numba  # noqa: F401
t1 = time.perf_counter()
path = sys.argv[1]
if path == "-":
    from evtkin.io import lhe_scan as mod
else:
    import os
    sys.path.insert(0, os.path.dirname(path))
    mod = importlib.import_module(os.path.splitext(os.path.basename(path))[0])
kernel = mod.compiled_kernel()
text = (b"<event>\n 1 1 1.0 2.0 3.0 4.0\n 1 1 0 0 0 0 1 2 3 4 5 6 7\n"
        b"<rwgt><wgt id='a'> 1.5 </wgt></rwgt>\n</event>\n")
buf = np.frombuffer(text, np.uint8).copy()  # writable, as the reader passes it
st = np.zeros(16, np.int64)
st[7] = 1 << 62
kernel(buf, np.frombuffer(b"a", np.uint8).copy(), np.array([0, 1], np.int64),
       np.empty(4, np.int32), np.empty((4, 4)), np.zeros(5, np.int64),
       np.empty(4, np.int64), np.empty((6, 4), np.int32), np.empty((7, 4)),
       np.empty((4, 1)), np.empty((16, 4), np.int64), st)
t2 = time.perf_counter()
assert st[3] == 0 and st[0] == 1, st
print(json.dumps({"numba_import": t1 - t0, "kernel": t2 - t1, "total": t2 - t0,
                  "cpu": time.process_time()}))
"""


def load_module(path: str | None) -> ModuleType:
    """The scan module: ``evtkin.io.lhe_scan`` or a copy loaded from ``path``."""
    if path is None:
        from evtkin.io import lhe_scan

        return lhe_scan
    # imported by name (not from a spec) so that numba's cache can find it again
    sys.path.insert(0, os.path.dirname(os.path.abspath(path)))
    return importlib.import_module(os.path.splitext(os.path.basename(path))[0])


def read_pieces(path: str) -> tuple[list[tuple[int, np.ndarray]], tuple[str, ...]]:
    """The event part of ``path`` as (offset, uint8 array) pieces cut after ``</event>``."""
    from evtkin.io.lhe_header import lhe_info

    info = lhe_info(path)
    pieces: list[tuple[int, np.ndarray]] = []
    with open(path, "rb") as fh:
        fh.seek(info.events_offset)
        base = info.events_offset
        carry = b""
        while True:
            data = carry + fh.read(PIECE - len(carry))
            if not data:
                break
            end = data.rfind(b"</event>")
            if end < 0 or len(data) < PIECE:
                end = len(data)  # the last piece: everything that is left
            else:
                end += len(b"</event>")
            pieces.append((base, np.frombuffer(data[:end], np.uint8).copy()))
            base += end
            carry = data[end:]
            if len(data) < PIECE:
                break
    return pieces, tuple(info.weight_names)


def one_run(kernel: Any, scratch: Any, pieces: list[tuple[int, np.ndarray]]) -> tuple[float, int]:
    """CPU seconds of this thread to parse all pieces, and the events parsed."""
    n_ev = 0
    t0 = time.thread_time()
    for base, arr in pieces:
        scratch.parse(kernel, arr, base, 1 << 62)
        n_ev += scratch.n_ev
    return time.thread_time() - t0, n_ev


def compile_times(kernel_file: str | None) -> dict[str, dict[str, float]]:
    """Cold compile and cached load, each in a fresh process with a temporary cache."""
    out: dict[str, dict[str, float]] = {}
    with tempfile.TemporaryDirectory(prefix="evtkin-numba-cache-") as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        env.pop("EVTKIN_NO_NUMBA", None)
        arg = os.path.abspath(kernel_file) if kernel_file else "-"
        for label in ("cold", "cached", "cached again"):
            res = subprocess.run(
                [sys.executable, "-c", CHILD, arg],
                capture_output=True, text=True, check=False, env=env,
            )  # fmt: skip
            if res.returncode != 0:
                sys.exit(f"{label} compile run failed:\n{res.stderr}")
            out[label] = json.loads(res.stdout.strip().splitlines()[-1])
    return out


def baseline_pass(pieces: list[tuple[int, np.ndarray]]) -> float:
    """CPU seconds of one vectorised numpy pass over the pieces (counting ``<``): the
    baseline measured in the same run, so that ratios show through the machine's noise."""
    t0 = time.thread_time()
    for _, arr in pieces:
        np.count_nonzero(arr == 60)
    return time.thread_time() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--file", default=os.path.join(tempfile.gettempdir(), "evtkin_bench.lhe"))
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--no-compile", action="store_true", help="skip the compile timings")
    ap.add_argument("--kernel-file", default=None, help="another copy of lhe_scan.py")
    ap.add_argument("--compare", default=None, help="a copy of lhe_scan.py to time alongside")
    args = ap.parse_args()

    from evtkin.io.lhe import _Scratch

    files = [args.kernel_file] + ([args.compare] if args.compare else [])
    kernels = [load_module(f).compiled_kernel() for f in files]
    if kernels[0] is None:
        sys.exit("numba is not available (or EVTKIN_NO_NUMBA is set)")
    pieces, ids = read_pieces(args.file)
    nbytes = sum(a.shape[0] for _, a in pieces)
    scratches = [_Scratch(len(ids), ids) for _ in kernels]
    for kernel, scratch in zip(kernels, scratches, strict=True):
        one_run(kernel, scratch, pieces[:2])  # warm-up: sizes the scratch columns
    base: list[float] = []
    rates: list[list[float]] = [[] for _ in kernels]
    n_ev = 0
    for _ in range(args.repeat):  # interleaved, so that all see the same machine
        base.append(nbytes / baseline_pass(pieces) / 1e6)
        for i, (kernel, scratch) in enumerate(zip(kernels, scratches, strict=True)):
            dt, n_ev = one_run(kernel, scratch, pieces)
            rates[i].append(nbytes / dt / 1e6)
    load = os.getloadavg()
    print(f"file: {args.file}: {nbytes / 1e6:.1f} MB of events, {len(pieces)} pieces, "
          f"{n_ev} events, {len(ids)} weights")  # fmt: skip
    print(f"load average: {load[0]:.2f} {load[1]:.2f} {load[2]:.2f}")
    print(f"baseline numpy pass MB/s: best {max(base):.0f}, median {statistics.median(base):.0f}")
    for f, rs in zip(files, rates, strict=True):
        best, med = max(rs), statistics.median(rs)
        print(f"kernel {f or 'evtkin.io.lhe_scan'} MB/s (1 thread, CPU time): best "
              f"{best:.0f}, median {med:.0f} (x{best / max(base):.3f} / "
              f"x{med / statistics.median(base):.3f} of the baseline); runs "
              f"{' '.join(f'{r:.0f}' for r in rs)}")  # fmt: skip
    if args.compare:
        ratio = statistics.median(a / b for a, b in zip(rates[0], rates[1], strict=True))
        print(f"speed ratio first/second kernel (median of interleaved runs): {ratio:.2f}")
    if not args.no_compile:
        for f in files:
            print(f"compile and load of {f or 'evtkin.io.lhe_scan'}:")
            for label, t in compile_times(f).items():
                print(f"{label:>14}: kernel {t['kernel']:.2f} s, numba import "
                      f"{t['numba_import']:.2f} s, total {t['total']:.2f} s "
                      f"(process CPU {t['cpu']:.2f} s)")  # fmt: skip


if __name__ == "__main__":
    main()
