"""Long mutation-fuzz run of the LHE reader (not a benchmark, not part of make test).

    python bench/fuzz_lhe.py [--cases 30000] [--seed 0] [--max-seconds 5]

Case ``seed + i`` builds a valid LHE v3 text, damages it with 1-3 random mutations and
checks the reader's contract on it with both scanners, strict and lenient (see
``tests/lhe_fuzz.py``): nothing but LHEError / LHEWarning escapes, both scanners give the
same verdict and the same events, every intact event is delivered, no read takes longer
than ``--max-seconds``. Prints the number of inputs tried, the failures by kind (with the
first case of each, rerun with ``--seed CASE --cases 1 --show``), the number of strict
errors whose messages differ between the scanners, and the slowest read.
"""

from __future__ import annotations

import argparse
import collections
import os
import sys
import tempfile
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "tests"))

import lhe_fuzz


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=30_000)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--max-seconds", type=float, default=5.0)
    ap.add_argument("--show", action="store_true", help="print the mutated text of each case")
    args = ap.parse_args()
    failures: collections.Counter[str] = collections.Counter()
    first: dict[str, tuple[int, str]] = {}
    differ = 0
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        for i in range(args.cases):
            case = args.seed + i
            text, events = lhe_fuzz.fuzz_case(case)
            if args.show:
                print(text[text.index("</init>") :])
            for problem in lhe_fuzz.check(text, events, tmp, max_seconds=args.max_seconds):
                kind = problem.split(":", 1)[0] + ":" + problem.split(":", 2)[1][:40]
                failures[kind] += 1
                first.setdefault(kind, (case, problem))
            differ += lhe_fuzz.message_differs(text, tmp)
            if (i + 1) % 1000 == 0:
                print(f"{i + 1} inputs, {sum(failures.values())} failures, "
                      f"{time.perf_counter() - t0:.0f} s", flush=True)  # fmt: skip
    print(f"inputs tried: {args.cases} (seeds {args.seed}..{args.seed + args.cases - 1}), "
          f"each read 6 times (2 scanners x strict/lenient, messages)")  # fmt: skip
    print(f"failures: {sum(failures.values())}")
    for kind, count in failures.most_common():
        case, problem = first[kind]
        print(f"  {count:6d}  {kind}  (first: case {case}: {problem[:300]})")
    print(f"strict errors with different messages in the two scanners: {differ}")
    print(f"slowest read: {lhe_fuzz.SLOWEST[0]:.3f} s (case text of {lhe_fuzz.SLOWEST[1]} bytes)")
    print(f"time: {time.perf_counter() - t0:.0f} s")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
