"""Write a synthetic LHE v3 file for the reader benchmark (deterministic, plain text).

    python bench/make_big_lhe.py [--mb 300] [--out /tmp/evtkin_bench.lhe] [--gzip]

About 12 particles and 10 ``<rwgt>`` variation weights per event, numbers in the usual
``%+.10e`` style. The content is random toy numbers (an invented "bench" run), not
physics. Written in blocks of 10 000 events with numpy-generated columns.
"""

from __future__ import annotations

import argparse
import gzip
import shutil
import time
from pathlib import Path

import numpy as np

NW = 10
HEAD = (
    '<LesHouchesEvents version="3.0">\n'
    "<!-- evtkin benchmark file: synthetic toy numbers, invented run 'bench' -->\n"
    "<header>\n<initrwgt>\n<weightgroup name='scale_variation' combine='envelope'>\n"
    + "".join(f"<weight id='{1000 + i}'> variation {i} </weight>\n" for i in range(NW))
    + "</weightgroup>\n</initrwgt>\n</header>\n"
    "<init>\n 2212 2212 +6.8000000000e+03 +6.8000000000e+03 0 0 303600 303600 -4 1\n"
    " +1.0000000000e+02 +1.0000000000e+00 +1.0000000000e+02 1\n"
    "<generator name='evtkin-bench' version='0.1'>evtkin bench</generator>\n</init>\n"
)

PLINE = " %8d %2d %4d %4d %4d %4d %+.10e %+.10e %+.10e %+.10e %+.10e %.4e %.4e\n"


def block(rng: np.random.Generator, n: int) -> str:
    nup = rng.integers(10, 15, size=n)
    tot = int(nup.sum())
    ids = rng.choice(np.array([1, 2, 21, -1, -2, 11, -11, 13, 22, 5, -5, 24]), size=tot)
    st = rng.choice(np.array([-1, 1, 1, 1, 2]), size=tot)
    m1 = rng.integers(0, 3, size=tot)
    col = rng.integers(0, 510, size=(tot, 2))
    mom = rng.normal(0.0, 80.0, size=(tot, 3))
    mass = np.abs(rng.normal(0.0, 5.0, size=tot))
    energy = np.sqrt((mom**2).sum(axis=1) + mass**2)
    rows = zip(
        ids.tolist(), st.tolist(), m1.tolist(), m1.tolist(), col[:, 0].tolist(),
        col[:, 1].tolist(), mom[:, 0].tolist(), mom[:, 1].tolist(), mom[:, 2].tolist(),
        energy.tolist(), mass.tolist(), [0.0] * tot, [9.0] * tot, strict=True,
    )  # fmt: skip
    plines = [PLINE % r for r in rows]
    w = rng.normal(100.0, 10.0, size=n)
    wv = w[:, None] * rng.uniform(0.8, 1.2, size=(n, NW))
    scale = rng.uniform(50.0, 500.0, size=n)
    out = []
    k = 0
    for i in range(n):
        out.append(
            f"<event>\n {nup[i]} 1 {w[i]:+.10e} {scale[i]:+.10e} {0.0078125:+.10e} "
            f"{0.118:+.10e}\n"
        )
        out.extend(plines[k : k + nup[i]])
        k += nup[i]
        out.append("<rwgt>\n")
        out.extend(f"<wgt id='{1000 + j}'> {wv[i, j]:+.10e} </wgt>\n" for j in range(NW))
        out.append("</rwgt>\n</event>\n")
    return "".join(out)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--mb", type=float, default=300.0)
    ap.add_argument("--out", default="/tmp/evtkin_bench.lhe")
    ap.add_argument("--gzip", action="store_true", help="also write OUT.gz")
    args = ap.parse_args()
    rng = np.random.default_rng(12345)
    target = int(args.mb * 1e6)
    t0 = time.perf_counter()
    size = 0
    with open(args.out, "w") as fh:
        fh.write(HEAD)
        while size < target:
            text = block(rng, 10_000)
            fh.write(text)
            size += len(text)
        fh.write("</LesHouchesEvents>\n")
    print(
        f"wrote {args.out}: {Path(args.out).stat().st_size / 1e6:.0f} MB "
        f"in {time.perf_counter() - t0:.1f} s"
    )
    if args.gzip:
        with open(args.out, "rb") as src, gzip.open(args.out + ".gz", "wb", compresslevel=6) as dst:
            shutil.copyfileobj(src, dst, 1 << 22)
        print(f"wrote {args.out}.gz: {Path(args.out + '.gz').stat().st_size / 1e6:.0f} MB")


if __name__ == "__main__":
    main()
