"""``evtkin compare A B [C ...]``: compare result folders bin by bin (first = reference)."""

from __future__ import annotations

import argparse
from typing import Any

from evtkin.cli.run import _positive


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "compare",
        help="compare result folders: ratios, pulls, χ² tests, plots, HTML report",
        description=(
            "Compare every 1-D histogram present in all given result folders against the first "
            "one: bin-by-bin ratio and pull with MC errors, χ² homogeneity tests for weighted "
            "histograms (Gagunashvili, NIM A 614 (2010) 287) in absolute and shape-only modes, "
            "a Kolmogorov distance. With one folder, its samples are compared (the first is the "
            "reference), or two of its histograms with --pair."
        ),
    )
    p.add_argument("folders", nargs="+", metavar="FOLDER", help="results folders of `evtkin run`")
    p.add_argument(
        "--out",
        default="evtkin-compare",
        metavar="DIR",
        help="output folder (default: %(default)s)",
    )
    p.add_argument(
        "--shape-only",
        action="store_true",
        help="compare shapes (each normalised to unit area) instead of absolute contents",
    )
    p.add_argument("--pulls", action="store_true", help="add a pull panel to the plots")
    p.add_argument(
        "--with-bands",
        action="store_true",
        help="add the reference's uncertainty band to the pulls in quadrature",
    )
    p.add_argument(
        "--pair",
        nargs=2,
        metavar=("REF_HIST", "HIST"),
        help="compare two histograms of the same run (e.g. truth vs reconstructed)",
    )
    p.add_argument(
        "--samples",
        nargs="+",
        metavar="SAMPLE",
        help="samples to compare: one name per folder, or the samples of one folder",
    )
    p.add_argument("--hists", nargs="+", metavar="HIST", help="only these histograms")
    p.add_argument(
        "--min-entries",
        type=float,
        default=5.0,
        metavar="N",
        help="effective entries per bin below which a bin counts as low-content (default: 5)",
    )
    p.add_argument(
        "--low-content",
        choices=("flag", "merge"),
        default="flag",
        help="keep low-content bins and list them in the notes (default), or merge adjacent "
        "ones until each group reaches --min-entries (the summary lists the merged bins)",
    )
    p.add_argument(
        "--with-flow",
        action="store_true",
        help="include the under- and overflow bins in the χ² tests (default: in-range bins)",
    )
    p.add_argument("--no-report", action="store_true", help="do not write report.html")
    p.add_argument("--allow-incomplete", action="store_true",
                   help="compare folders marked INCOMPLETE too (a run was interrupted while "
                   "writing them; default: refuse them)")
    p.add_argument(
        "--jobs",
        "-j",
        type=_positive,
        metavar="N",
        help="processes drawing the plots (default: every available core; 1: this process only)",
    )
    p.set_defaults(func=run)
    out: argparse.ArgumentParser = p
    return out


def run(args: argparse.Namespace) -> int:
    # evtkin.run.forkserver imports only multiprocessing and os (not the run layer)
    from evtkin.run.forkserver import available_cores, start_forkserver

    if args.jobs != 1:
        # the processes that draw the plots fork from a forkserver that imports matplotlib
        # and evtkin's plotting now, while this process imports and compares
        start_forkserver(["evtkin.output.compare_plots", "matplotlib.pyplot"])
    from evtkin.output.compare_plots import summary_text
    from evtkin.output.compare_run import compare_results

    cs = compare_results(
        args.folders,
        out=args.out,
        shape_only=args.shape_only,
        with_bands=args.with_bands,
        pulls=args.pulls,
        samples=args.samples,
        pair=tuple(args.pair) if args.pair else None,
        histograms=args.hists,
        min_entries=args.min_entries,
        low_content=args.low_content,
        with_flow=args.with_flow,
        report=not args.no_report,
        workers=args.jobs if args.jobs else available_cores(),
        allow_incomplete=args.allow_incomplete,
    )
    print(summary_text(cs), end="")
    print(f"written: {cs.out}/summary.txt, summary.csv, summary.json, plots/")
    if not args.no_report:
        print(f"report: {cs.out}/report.html")
    return 0
