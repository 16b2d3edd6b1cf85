"""Cost of regions, event weights and object-level systematics, measured in one process run.

Runs configs/ttbar_regions.toml on the shipped toy ntuple (serial, no output files) in four
forms and prints each time as a ratio to the first (baseline, the same analysis with no regions,
no weight expression and no systematic): + the three regions, + the scale-factor weight,
+ the ±3 % jet-energy-scale systematic (two more passes of objects, selection and histograms).
Each form runs ``--repeat`` times, interleaved; the best time counts.
"""

from __future__ import annotations

import argparse
import dataclasses
import shutil
import tempfile
import time
from pathlib import Path

from evtkin.config import load_config
from evtkin.run.pipeline import run

REPO = Path(__file__).resolve().parents[1]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--copies", type=int, default=10,
                    help="read the toy ntuple this many times (copies in a temporary folder)")
    args = ap.parse_args()
    full = load_config(REPO / "configs" / "ttbar_regions.toml")
    tmp = Path(tempfile.mkdtemp(prefix="evtkin-bench-"))
    spec = full.samples["ttbar_reco"]
    copies = []
    for k in range(args.copies):
        copies.append(tmp / f"copy{k}.root")
        shutil.copyfile(spec.files[0], copies[-1])
    full = dataclasses.replace(full, skims={}, uncertainties=(),
                               samples={"ttbar_reco": dataclasses.replace(spec,
                                                                         files=tuple(copies))},
                               output=dataclasses.replace(full.output, directory=None))
    plain_hists = {n: dataclasses.replace(h, regions=()) for n, h in full.histograms.items()}
    forms = {
        "baseline": dataclasses.replace(full, regions={}, histograms=plain_hists, weight=None,
                                        systematics={}),
        "+ 3 regions": dataclasses.replace(full, weight=None, systematics={}),
        "+ scale-factor weight": dataclasses.replace(full, systematics={}),
        "+ JES up/down": full,
    }
    best = {k: float("inf") for k in forms}
    for _ in range(args.repeat):
        for name, cfg in forms.items():
            t0 = time.perf_counter()
            run(cfg)
            best[name] = min(best[name], time.perf_counter() - t0)
    base = best["baseline"]
    print(f"{20000 * args.copies} events, serial, best of {args.repeat}")
    for name, t in best.items():
        print(f"{name:24s} {t:7.2f} s   x{t / base:.2f}")
    shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
