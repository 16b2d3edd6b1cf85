"""Differential check of two builds of the LHE scan kernel (not a benchmark; no timing).

    python bench/check_lhe_kernels.py OTHER_SCAN.py [--cases 30000] [--file /tmp/evtkin_bench.lhe]

Runs ``evtkin.io.lhe_scan``'s compiled kernel and the one of another copy of the module
(say, the previous version: ``git show HEAD~1:src/evtkin/io/lhe_scan.py > /tmp/old_scan.py``)
on the same random pieces of real event text: random cuts (most start or end inside an
event), each with up to three random byte substitutions, deletions or insertions drawn from
the characters that matter to the parser. Every output column, the slow-token list and the
state array must be identical (NaN equal to NaN). Use it after changing the kernel or the
way it is compiled; it prints the first case that differs. ``--clean``: pieces start at an
event tag and are not damaged (for a change of what the kernel accepts: the two builds must
still agree on undamaged text).
"""

from __future__ import annotations

import argparse
import random
import sys
from typing import Any

import numpy as np

from bench_lhe_kernel import load_module

ALPHABET = b"0123456789 .-+eEdD\n<>/#'\"=abcwgtidrsvn\t\r"


def run(kernel: Any, buf: np.ndarray, ids: tuple[np.ndarray, np.ndarray], nw: int) -> list[Any]:
    cap, pcap = 40, 600
    cols = [np.zeros(cap, np.int32), np.zeros((4, cap)), np.zeros(cap + 1, np.int64),
            np.zeros(cap, np.int64), np.zeros((6, pcap), np.int32), np.zeros((7, pcap)),
            np.zeros((cap, nw)), np.zeros((20, 4), np.int64)]
    st = np.zeros(16, np.int64)
    st[7] = 1 << 62  # no stop position
    ret = kernel(buf, *ids, *cols, st)
    return [ret, *cols, st]


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("other", help="another copy of lhe_scan.py")
    ap.add_argument("--cases", type=int, default=30_000)
    ap.add_argument("--file", default="/tmp/evtkin_bench.lhe")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--clean", action="store_true",
                    help="undamaged pieces that start at an event tag")
    args = ap.parse_args()
    from evtkin.io import lhe_scan
    from evtkin.io.lhe_header import lhe_info

    info = lhe_info(args.file)
    names = [str(n) for n in info.weight_names]
    with open(args.file, "rb") as fh:
        fh.seek(info.events_offset)
        body = fh.read(2_000_000)
    wid_bytes = np.frombuffer("".join(names).encode(), np.uint8).copy()
    wid_off = np.zeros(len(names) + 1, np.int64)
    wid_off[1:] = np.cumsum([len(n.encode()) for n in names])
    ids = (wid_bytes, wid_off)
    ours, theirs = lhe_scan.compiled_kernel(), load_module(args.other).compiled_kernel()
    rng = random.Random(args.seed)
    for case in range(args.cases):
        a = rng.randrange(0, len(body) - 10)
        if args.clean:
            a = max(body.find(b"<event", a), 0)
        piece = bytearray(body[a : a + rng.randrange(50, 6000)])
        for _ in range(0 if args.clean else rng.randrange(0, 4)):
            j, op = rng.randrange(len(piece)), rng.random()
            if op < 0.5:
                piece[j] = rng.choice(ALPHABET)
            elif op < 0.75:
                del piece[j]
            else:
                piece.insert(j, rng.choice(ALPHABET))
        buf = np.frombuffer(bytes(piece), np.uint8).copy()
        x, y = run(ours, buf, ids, len(names)), run(theirs, buf, ids, len(names))
        for u, v in zip(x, y, strict=True):
            if not np.array_equal(np.asarray(u), np.asarray(v), equal_nan=True):
                print(f"case {case} differs (offset {a}): {bytes(piece)[:200]!r}...")
                return 1
    print(f"identical on {args.cases} cases")
    return 0


if __name__ == "__main__":
    sys.exit(main())
