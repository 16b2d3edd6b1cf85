"""The baselines the reader benchmarks measure in the same run as the reader (shared by
bench_lhe.py and bench_hepmc.py).

``CHILD_PRELUDE`` is the start of the code each measuring subprocess runs: it defines
``baseline(mode, path)``, the count of lines or bytes of one pass over ``path`` by

* ``"bare"``: ``for line in open(path, "rb")`` (the bare line scan),
* ``"raw"``: ``readinto`` of the file's bytes into one 8 MB buffer,
* ``"decompress"``: ``isal.igzip`` decompression of a gzip file, ``readinto`` as above,

and ``report(seconds, n, cpu=None)``, which prints the child's result line (with its peak
RSS; ``cpu``: the process CPU seconds of the timed part, where the child measures them).
:func:`run_child` runs one child and reads that line; :func:`interleaved` runs cases in
rounds (A/B/C, A/B/C, ...) so that drifting load on a shared machine spreads over all
cases, and keeps each case's fastest and median time and largest peak RSS.
"""

from __future__ import annotations

import json
import statistics
import subprocess
import sys
from collections.abc import Sequence
from typing import Any

BASELINES = ("bare", "raw", "decompress")

CHILD_PRELUDE = r"""
import json, resource, sys, time


def baseline(mode, path):
    n = 0
    if mode == "bare":
        for line in open(path, "rb"):
            n += 1
        return n
    buf = bytearray(8 << 20)
    if mode == "raw":
        fh = open(path, "rb", buffering=0)
    else:
        from isal import igzip
        fh = igzip.open(path, "rb")
    with fh:
        while True:
            got = fh.readinto(buf)
            if not got:
                break
            n += got
    return n


def report(seconds, n, cpu=None):
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({"seconds": seconds, "n": n, "rss_mb": rss, "cpu": cpu}))
"""


def run_child(code: str, args: Sequence[str], env: dict[str, str] | None = None) -> dict[str, Any]:
    """Run ``code`` (``CHILD_PRELUDE`` + the script's own part) in a fresh interpreter with
    ``args`` as ``sys.argv[1:]``; its last output line (from ``report``) as a dict."""
    out = subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True,
                         check=True, env=env)  # fmt: skip
    return dict(json.loads(out.stdout.strip().splitlines()[-1]))


def interleaved(cases: Sequence[tuple[str, Sequence[str]]], code: str, repeat: int,
                env: dict[str, str] | None = None) -> dict[str, dict[str, Any]]:  # fmt: skip
    """Run every case (label, child args) once per round, ``repeat`` rounds. Per case: the
    fastest run's figures, ``median`` seconds, ``all`` seconds, the largest peak RSS and
    ``cpu_min`` (the least CPU seconds of a run, where the child reports them)."""
    runs: dict[str, list[dict[str, Any]]] = {label: [] for label, _ in cases}
    for _ in range(repeat):
        for label, args in cases:
            runs[label].append(run_child(code, args, env))
    out: dict[str, dict[str, Any]] = {}
    for label, rs in runs.items():
        best = dict(min(rs, key=lambda x: x["seconds"]))
        best["rss_mb"] = max(x["rss_mb"] for x in rs)
        best["all"] = [x["seconds"] for x in rs]
        best["median"] = statistics.median(best["all"])
        cpus = [x["cpu"] for x in rs if x.get("cpu") is not None]
        best["cpu_min"] = min(cpus) if cpus else None
        out[label] = best
    return out
