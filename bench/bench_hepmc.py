"""Benchmark of the HepMC reader against a bare line scan and a raw read of the same file,
in one run.

    python bench/bench_hepmc.py [--mb 300] [--repeat 3] [--out-dir /tmp] [--rss 1000,3000] [--e16]

Makes (once) a big Asciiv3 file by repeating the events of the shipped toy shower sample
(samples/toy_ttbar_shower.hepmc.gz) until it holds ``--mb`` MB of text, and its gzip.
Each measurement runs in a fresh subprocess, ``--repeat`` interleaved rounds (the
baselines come from ``_baselines.py``, shared with bench_lhe.py), printing MB/s of
uncompressed text and the ratio to the bare ``for line in open(path, "rb")`` scan of the
same run (best of the rounds, and median against median): a raw ``readinto`` read of the
bytes, the reader with 0, 1 and 2 parse threads, the reader on the gzip file, the raw gzip
decompression (``isal.igzip`` ``readinto``), and the peak RSS of each process. Then the
compiled scanners alone, on in-memory 4 MB pieces, one thread, CPU time, interleaved: the
HepMC kernel vs the LHE kernel (on the LHE toy sample's events repeated to the same size).
``--e16``: the same events with their momenta printed as ``%.16e`` (17 significant digits,
as real generator files print doubles; the LHE text of the scanner comparison too).
``--rss 1000,3000`` reads files of those sizes (MB; made in ``--out-dir`` and deleted
afterwards) with the default options and prints their peak RSS: flat in the file size?
"""

from __future__ import annotations

import argparse
import gzip
import os
import shutil
import time
from pathlib import Path
from typing import Any

import numpy as np

from _baselines import CHILD_PRELUDE, interleaved, run_child

ROOT = Path(__file__).resolve().parent.parent
SAMPLE = ROOT / "samples" / "toy_ttbar_shower.hepmc.gz"
LHE_SAMPLE = ROOT / "samples" / "toy_ttbar.lhe.gz"

CHILD = CHILD_PRELUDE + r"""
mode, path, threads, tiny = sys.argv[1], sys.argv[2], int(sys.argv[3]), sys.argv[4]
if mode in ("bare", "raw", "decompress"):
    t0, c0 = time.perf_counter(), time.process_time()
    n = baseline(mode, path)
else:
    import evtkin
    for _ in evtkin.read_hepmc(tiny):  # warm: cached kernel, threads
        pass
    t0, c0 = time.perf_counter(), time.process_time()
    n = 0
    for chunk in evtkin.read_hepmc(path, threads=None if threads < 0 else threads):
        n += len(chunk)
report(time.perf_counter() - t0, n, time.process_time() - c0)
"""


def as_e16(text: bytes) -> bytes:
    """The ``P`` lines' five momentum fields (LHE: a particle line's seven floats)
    rewritten as ``%.16e`` (17 significant digits: how real files print doubles)."""
    out = []
    for line in text.split(b"\n"):
        t = line.split()
        if line.startswith(b"P "):
            t[4:9] = [b"%.16e" % float(x) for x in t[4:9]]
            line = b" ".join(t)
        elif len(t) == 13 and not line.startswith(b"<"):
            t[6:13] = [b"%.16e" % float(x) for x in t[6:13]]
            line = b" ".join(t)
        out.append(line)
    return b"\n".join(out)


def make_files(out_dir: Path, mb: int, with_gzip: bool = True,
               e16: bool = False) -> tuple[Path, Path, Path]:  # fmt: skip
    tag = "_e16" if e16 else ""
    big = out_dir / f"evtkin_bench_{mb}MB{tag}.hepmc"
    gz = out_dir / f"evtkin_bench_{mb}MB{tag}.hepmc.gz"
    tiny = out_dir / f"evtkin_bench_tiny{tag}.hepmc"
    if not big.exists() or big.stat().st_mtime < SAMPLE.stat().st_mtime:
        text = gzip.decompress(SAMPLE.read_bytes())
        start = text.index(b"\nE ") + 1
        end = text.index(b"HepMC::Asciiv3-END_EVENT_LISTING")
        head, body = text[:start], text[start:end]
        if e16:
            body = as_e16(body)
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
    if with_gzip and not gz.exists():
        from isal import igzip

        with open(big, "rb") as src, igzip.open(gz, "wb", compresslevel=1) as dst:
            shutil.copyfileobj(src, dst, 8 << 20)
    return big, gz, tiny


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


def kernel_arrays(c: Any, nbytes: int, k: int) -> tuple[tuple[np.ndarray, ...], np.ndarray,
                                                        np.ndarray]:  # fmt: skip
    """The scanner's output columns for ``nbytes`` of Asciiv3 text with ``k`` weights, its
    ``cfg`` (a final buffer, no stop) and ``st`` arrays."""
    cap = c.capacities(nbytes)
    ce, cp, cv = cap["events"], cap["particles"], cap["vertices"]
    arrays = (
        np.empty((c.N_EVI, ce), np.int64), np.empty((c.N_EVF, ce)), np.empty(ce + 1, np.int64),
        np.empty(ce + 1, np.int64), np.empty((c.N_PI, cp), np.int32), np.empty((c.N_PF, cp)),
        np.empty(cv, np.int32), np.empty((c.N_VF, cv)), np.empty(cap["weights"]),
        np.empty((3, cp), np.int64), np.empty((4, cv), np.int64),
        np.empty(cap["incoming"], np.int64), np.empty((cap["slow"], 5), np.int64),
        np.empty((cap["errors"], 6), np.int64),
    )  # fmt: skip
    cfg = np.zeros(c.CFG_SIZE, np.int64)
    cfg[c.CFG_FORM], cfg[c.CFG_K], cfg[c.CFG_FINAL], cfg[c.CFG_STOP] = 3, k, 1, 1 << 62
    return arrays, cfg, np.zeros(c.ST_SIZE, np.int64)


def kernel_rates(big: Path, repeat: int, e16: bool = False) -> tuple[list[float], list[float]]:
    """MB/s of the HepMC kernel and of the LHE kernel, one thread, CPU time, ``repeat``
    interleaved passes each."""
    from evtkin.io import hepmc_scan as c
    from evtkin.io import lhe

    text = big.read_bytes()[: 64 << 20]
    text = text[text.index(b"\nE ") + 1 : text.rindex(b"\nE ") + 1]
    hp = pieces(text, b"\nE ")
    kern = c.compiled_kernel()
    arrays, cfg, st = kernel_arrays(c, max(p.shape[0] for p in hp), k=27)
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
    if e16:
        body = as_e16(body)
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
    rh, rl = [], []
    for _ in range(repeat):
        rh.append(len(text) / hepmc_pass() / 1e6)
        rl.append(len(body) / lhe_pass() / 1e6)
    return rh, rl


def rss_growth(out_dir: Path, sizes: list[int]) -> None:
    """Peak RSS of a default read (threads and step size) of files of ``sizes`` MB, each
    made for the purpose and deleted afterwards."""
    tiny = out_dir / "evtkin_bench_tiny.hepmc"
    for mb in sizes:
        big, _gz, tiny = make_files(out_dir, mb, with_gzip=False)
        try:
            got = run_child(CHILD, ["reader", str(big), "-1", str(tiny)])
            size = big.stat().st_size
            print(f"{size / 1e6:7.0f} MB file, default options: {size / got['seconds'] / 1e6:5.0f} "
                  f"MB/s, {got['n']} events, peak RSS {got['rss_mb']:.0f} MB")  # fmt: skip
        finally:
            big.unlink(missing_ok=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawTextHelpFormatter)
    ap.add_argument("--mb", type=int, default=300, help="size of the big file (MB of text)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--out-dir", default="/tmp")
    ap.add_argument("--rss", default="",
                    help="comma-separated file sizes in MB (e.g. 1000,3000): peak RSS of a "
                    "default read of each (files made and deleted here)")  # fmt: skip
    ap.add_argument("--skip-rates", action="store_true", help="only the --rss figures")
    ap.add_argument("--e16", action="store_true",
                    help="momenta printed with %%.16e (17 significant digits, as real files "
                    "print doubles), also in the LHE text of the scanner comparison")  # fmt: skip
    args = ap.parse_args()
    out_dir = Path(args.out_dir)
    if not args.skip_rates:
        rates(out_dir, args.mb, args.repeat, args.e16)
    if args.rss:
        rss_growth(out_dir, [int(x) for x in args.rss.split(",")])


def rates(out_dir: Path, mb: int, repeat: int, e16: bool = False) -> None:
    big, gz, tiny = make_files(out_dir, mb, e16=e16)
    size = big.stat().st_size
    print(f"file {big} ({size / 1e6:.0f} MB; gzip {gz.stat().st_size / 1e6:.0f} MB); "
          f"load average {os.getloadavg()[0]:.2f}; {repeat} interleaved rounds")  # fmt: skip
    rows = [("bare line scan (baseline)", "bare", big, 0), ("raw readinto", "raw", big, 0),
            ("reader, threads=0", "reader", big, 0), ("reader, threads=1", "reader", big, 1),
            ("reader, threads=2", "reader", big, 2),
            ("reader, gzip (default threads)", "reader", gz, -1),
            ("raw gzip decompression", "decompress", gz, 0)]  # fmt: skip
    cases = [(label, [mode, str(path), str(threads), str(tiny)])
             for label, mode, path, threads in rows]  # fmt: skip
    run_child(CHILD, ["reader", str(tiny), "0", str(tiny)])  # compile or load the kernel once
    res = interleaved(cases, CHILD, repeat)
    base = res[rows[0][0]]
    # x line scan: best time against the baseline's best; (median): median against median;
    # CPU MB/s: MB per CPU second of the process (all its threads), the least CPU of a run
    print(f"{'case':34s} {'MB/s':>6s} {'x line scan':>12s} {'(median)':>9s} {'CPU MB/s':>9s} "
          f"{'peak RSS MB':>12s}")  # fmt: skip
    for label, *_ in rows:
        r = res[label]
        rate = size / r["seconds"] / 1e6
        cpu = f"{size / r['cpu_min'] / 1e6:9.0f}" if r["cpu_min"] else f"{'':9s}"
        print(f"{label:34s} {rate:6.0f} {base['seconds'] / r['seconds']:12.2f} "
              f"{base['median'] / r['median']:9.2f} {cpu} {r['rss_mb']:12.0f}")  # fmt: skip
    print(f"load average after: {os.getloadavg()[0]:.2f}")
    rh, rl = kernel_rates(big, max(repeat, 3), e16)
    ratios = sorted(h / lr for h, lr in zip(rh, rl, strict=True))
    print(f"compiled scanners alone, one thread (CPU time, {len(rh)} interleaved passes): HepMC "
          f"best {max(rh):.0f} MB/s, LHE best {max(rl):.0f} MB/s, ratio of bests "
          f"{max(rh) / max(rl):.2f}, median pass ratio {ratios[len(ratios) // 2]:.2f}")  # fmt: skip


if __name__ == "__main__":
    main()
