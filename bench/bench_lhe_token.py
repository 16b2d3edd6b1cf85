"""Time to diagnose a malformed number token of N characters (linear growth expected).

    python bench/bench_lhe_token.py [--repeat 3]

Writes small LHE files whose first particle line holds a bad token of 10^4, 10^5 and 10^6
characters (digits then an ``x``), in a particle field and in a ``<wgt>`` value, and
times ``read_lhe`` (both scanners) until its LHEError. Prints the best time of each and
the ratio to the 10^4 case: linear scanning gives ratios near 10 and 100 (plus a fixed
start cost); the quadratic scan this replaced took 13 s at 2*10^4 characters.
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import evtkin
from evtkin.io import lhe as lhe_mod
from evtkin.io.lhe_fallback import scan_kernel_py

HEAD = ("<LesHouchesEvents version=\"3.0\">\n<header><initrwgt><weight id='a'>x</weight>"
        "</initrwgt></header>\n<init>\n 2212 2212 6500 6500 0 0 0 0 3 1\n 1.5 0.1 1.5 7\n"
        "</init>\n")


def event(px: str, wgt: str) -> str:
    return (f"<event>\n 1 1 1.0 91.0 0.0078125 0.118\n 11 1 0 0 0 0 {px} 2.0 3.0 4.0 0.0 0.0 "
            f"9.0\n<rwgt>\n<wgt id='a'>{wgt}</wgt>\n</rwgt>\n</event>\n")


def timed(path: str, repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        try:
            for _chunk in evtkin.read_lhe(path, threads=0):
                pass
        except evtkin.LHEError:
            pass
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    lhe_mod._kernel()
    compiled = lhe_mod._KERNEL, lhe_mod._KIND
    with tempfile.TemporaryDirectory() as tmp:
        for scanner in ("numba", "fallback"):
            lhe_mod._KERNEL, lhe_mod._KIND = (
                compiled if scanner == "numba" else (scan_kernel_py, "fallback")
            )
            for where in ("particle", "wgt"):
                base = None
                for n in (10_000, 100_000, 1_000_000):
                    tok = "1" * n + "x"
                    ev = event(tok, "1.5") if where == "particle" else event("1.0", tok)
                    path = os.path.join(tmp, "t.lhe")
                    with open(path, "w") as fh:
                        fh.write(HEAD + ev + "</LesHouchesEvents>\n")
                    s = timed(path, args.repeat)
                    base = base or s
                    print(f"{scanner:8s} {where:8s} N = {n:>9,d}: {s * 1e3:8.2f} ms  "
                          f"x{s / base:6.1f} of N = 10^4")
    lhe_mod._KERNEL, lhe_mod._KIND = compiled


if __name__ == "__main__":
    main()
