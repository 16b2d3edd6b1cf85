"""Benchmark of the HepMC reader against a bare line scan and a raw read of the same file,
in one run.

    python bench/bench_hepmc.py [--mb 300] [--repeat 2] [--out-dir /tmp]

Makes (once) a big Asciiv3 file by repeating the events of the shipped toy shower sample
(samples/toy_ttbar_shower.hepmc.gz) until it holds ``--mb`` MB of text, and its gzip.
Each measurement runs in a fresh subprocess (best of ``--repeat``), printing MB/s of
uncompressed text and the ratio to the bare ``for line in open(path, "rb")`` scan of the
same run: a raw ``readinto`` read of the bytes, the reader with 0, 1 and 2 parse threads,
the reader on the gzip file, the raw gzip decompression (``isal.igzip`` ``readinto``),
and the peak RSS of each process. Then the compiled scanners alone, on in-memory 4 MB
pieces, one thread, CPU time: the HepMC kernel vs the LHE kernel (on the LHE toy sample's
events repeated to the same size).
"""

from __future__ import annotations

import argparse
import gzip
import json
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
SAMPLE = ROOT / "samples" / "toy_ttbar_shower.hepmc.gz"
LHE_SAMPLE = ROOT / "samples" / "toy_ttbar.lhe.gz"

CHILD = r"""
import json, resource, sys, time
mode, path, threads = sys.argv[1], sys.argv[2], int(sys.argv[3])
n = 0
if mode == "reader":
    import evtkin
    for _ in evtkin.read_hepmc(sys.argv[4]):  # warm: cached kernel, threads
        pass
t0 = time.perf_counter()
if mode == "bare":
    for line in open(path, "rb"):
        n += 1
elif mode == "raw":
    buf = bytearray(8 << 20)
    with open(path, "rb", buffering=0) as fh:
        while True:
            got = fh.readinto(buf)
            if not got:
                break
            n += got
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
    for chunk in evtkin.read_hepmc(path, threads=None if threads < 0 else threads):
        n += len(chunk)
dt = time.perf_counter() - t0
rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
print(json.dumps({"seconds": dt, "n": n, "rss_mb": rss}))
"""


def make_files(out_dir: Path, mb: int) -> tuple[Path, Path, Path]:
    big = out_dir / f"evtkin_bench_{mb}MB.hepmc"
    gz = out_dir / f"evtkin_bench_{mb}MB.hepmc.gz"
    tiny = out_dir / "evtkin_bench_tiny.hepmc"
    if not big.exists() or big.stat().st_mtime < SAMPLE.stat().st_mtime:
        text = gzip.decompress(SAMPLE.read_bytes())
        start = text.index(b"\nE ") + 1
        end = text.index(b"HepMC::Asciiv3-END_EVENT_LISTING")
        head, body = text[:start], text[start:end]
        copies = max(1, (mb << 20) // len(body))
        with open(big, "wb") as fh:
            fh.write(head)
            for _ in range(copies):
                fh.write(body)
            fh.write(text[end:])
        cut = body.index(b"\nE ", 1 << 16) + 1
        tiny.write_bytes(head + body[:cut] + text[end:])
        if gz.exists():
            gz.unlink()
    if not gz.exists():
        from isal import igzip

        with open(big, "rb") as src, igzip.open(gz, "wb", compresslevel=1) as dst:
            shutil.copyfileobj(src, dst, 8 << 20)
    return big, gz, tiny


def run_child(mode: str, path: Path, threads: int, tiny: Path, repeat: int) -> dict[str, float]:
    best: dict[str, float] | None = None
    for _ in range(repeat):
        out = subprocess.run([sys.executable, "-c", CHILD, mode, str(path), str(threads),
                              str(tiny)], capture_output=True, text=True, check=True)  # fmt: skip
        got = json.loads(out.stdout.strip().splitlines()[-1])
        if best is None or got["seconds"] < best["seconds"]:
            best = got
    assert best is not None
    return best


def pieces(text: bytes, cut: bytes, size: int = 4 << 20) -> list[np.ndarray]:
    out = []
    pos = 0
    while pos < len(text):
        end = min(pos + size, len(text))
        if end < len(text):
            k = text.rfind(cut, pos + 1, end)
            end = k + (1 if cut.startswith(b"\n") else len(cut)) if k > pos else end
        out.append(np.frombuffer(text[pos:end], np.uint8).copy())
        pos = end
    return out


def kernel_rates(big: Path, repeat: int) -> tuple[float, float]:
    """(HepMC kernel MB/s, LHE kernel MB/s), one thread, CPU time, best of ``repeat``."""
    from evtkin.io import hepmc_scan as c
    from evtkin.io import lhe

    text = big.read_bytes()[: 64 << 20]
    text = text[text.index(b"\nE ") + 1 : text.rindex(b"\nE ") + 1]
    hp = pieces(text, b"\nE ")
    kern = c.compiled_kernel()
    cap = c.capacities(max(p.shape[0] for p in hp))
    ce, cp, cv = cap["events"], cap["particles"], cap["vertices"]
    arrays = (
        np.empty((c.N_EVI, ce), np.int64), np.empty((c.N_EVF, ce)), np.empty(ce + 1, np.int64),
        np.empty(ce + 1, np.int64), np.empty((c.N_PI, cp), np.int32), np.empty((c.N_PF, cp)),
        np.empty(cv, np.int32), np.empty((c.N_VF, cv)), np.empty(cap["weights"]),
        np.empty((3, cp), np.int64), np.empty((4, cv), np.int64),
        np.empty(cap["incoming"], np.int64), np.empty((cap["slow"], 5), np.int64),
        np.empty((cap["errors"], 6), np.int64),
    )  # fmt: skip
    k = 27
    cfg = np.zeros(c.CFG_SIZE, np.int64)
    cfg[c.CFG_FORM], cfg[c.CFG_K], cfg[c.CFG_FINAL], cfg[c.CFG_STOP] = 3, k, 1, 1 << 62
    st = np.zeros(c.ST_SIZE, np.int64)
    assert kern is not None

    def hepmc_pass() -> float:
        t0 = time.thread_time()
        for p in hp:
            kern(p, cfg, st, *arrays)
            assert st[c.ST_STATUS] == c.ST_OK, st
        return time.thread_time() - t0

    lhe_text = gzip.decompress(LHE_SAMPLE.read_bytes())
    a = lhe_text.index(b"<event")
    b = lhe_text.rindex(b"</event>") + len(b"</event>\n")
    body = lhe_text[a:b]
    body = body * max(1, len(text) // len(body))
    lp = pieces(body, b"</event>\n")
    info = lhe.lhe_info(LHE_SAMPLE)
    kernel, _ = lhe._kernel()
    scratch = lhe._Scratch(len(info.weight_names), info.weight_names)

    def lhe_pass() -> float:
        t0 = time.thread_time()
        for p in lp:
            scratch.parse(kernel, p, 0, 1 << 62)
        return time.thread_time() - t0

    hepmc_pass()
    lhe_pass()
    th = min(hepmc_pass() for _ in range(repeat))
    tl = min(lhe_pass() for _ in range(repeat))
    return len(text) / th / 1e6, len(body) / tl / 1e6


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawTextHelpFormatter)
    ap.add_argument("--mb", type=int, default=300, help="size of the big file (MB of text)")
    ap.add_argument("--repeat", type=int, default=2)
    ap.add_argument("--out-dir", default="/tmp")
    args = ap.parse_args()
    big, gz, tiny = make_files(Path(args.out_dir), args.mb)
    size = big.stat().st_size
    print(f"file {big} ({size / 1e6:.0f} MB; gzip {gz.stat().st_size / 1e6:.0f} MB); "
          f"load average {os.getloadavg()[0]:.2f}")  # fmt: skip
    rows = [("bare line scan (baseline)", "bare", big, 0), ("raw readinto", "raw", big, 0),
            ("reader, threads=0", "reader", big, 0), ("reader, threads=1", "reader", big, 1),
            ("reader, threads=2", "reader", big, 2),
            ("reader, gzip (default threads)", "reader", gz, -1),
            ("raw gzip decompression", "decompress", gz, 0)]  # fmt: skip
    base = None
    print(f"{'case':34s} {'MB/s':>8s} {'x line scan':>12s} {'peak RSS MB':>12s}")
    for label, mode, path, threads in rows:
        got = run_child(mode, path, threads, tiny, args.repeat)
        rate = size / got["seconds"] / 1e6
        if base is None:
            base = rate
        print(f"{label:34s} {rate:8.0f} {rate / base:12.2f} {got['rss_mb']:12.0f}")
    h, lrate = kernel_rates(big, args.repeat)
    print(f"compiled scanners alone, one thread (CPU time): HepMC {h:.0f} MB/s, LHE {lrate:.0f} "
          f"MB/s, ratio {h / lrate:.2f}")  # fmt: skip


if __name__ == "__main__":
    main()
