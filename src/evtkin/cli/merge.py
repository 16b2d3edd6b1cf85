"""``evtkin merge OUT RESULTS_FOLDER...``: add up the results folders of separate jobs."""

from __future__ import annotations

import argparse
import sys
from typing import Any

__all__ = ["add_parser", "main"]


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "merge",
        help="merge the results folders of jobs that ran one config over different inputs",
        description="Merge results folders written by 'evtkin run' of the same config over "
        "different input files (e.g. batch jobs started with 'evtkin run CONFIG --part K/N') "
        "into the results one run over all the inputs gives: Σw, Σw², counts, cutflows, cross "
        "sections and bands are added up before normalising. The config's sha256 must be the "
        "same in every folder and no input may be read by two folders.",
    )
    p.add_argument("out", metavar="OUT", help="the merged results folder (created)")
    p.add_argument("folders", metavar="RESULTS_FOLDER", nargs="+",
                   help="results folders of 'evtkin run' (each holds partial.npz)")
    p.set_defaults(func=main)
    out: argparse.ArgumentParser = p
    return out


def main(args: argparse.Namespace) -> int:
    from evtkin.run.merge import merge_results

    result = merge_results(args.out, args.folders)
    for w in result.provenance.get("merge_warnings") or []:
        print(f"warning: {w}", file=sys.stderr)
    # what the jobs' readers tolerated (lenient reading): said again here, since the merged
    # results hold the events those warnings are about
    for w in result.provenance.get("read_warnings") or []:
        print(f"warning: read by a part: {w}", file=sys.stderr)
    for name, s in result.samples.items():
        sigma = f"{s.xsec.sigma_pb:.6g} pb" if s.xsec is not None else "n/a"
        print(f"{name}: {s.n_events} events, σ = {sigma}")
    print(f"merged {len(args.folders)} folders into {args.out}")
    return 0
