"""``evtkin plot RESULTS_FOLDER``: re-draw the plots of a results folder without running again."""

from __future__ import annotations

import argparse
import time
from pathlib import Path
from typing import Any

from evtkin.cli.run import _positive

__all__ = ["add_parser", "main", "overrides_from"]


def _colour(text: str) -> tuple[str, str]:
    name, sep, colour = text.partition("=")
    if not sep or not name or not colour:
        raise argparse.ArgumentTypeError(f"expected SAMPLE=COLOUR (e.g. ttbar=#D55E00), got "
                                         f"{text!r}")
    return name, colour


def _measured(text: str) -> tuple[str, str]:
    hist, sep, path = text.partition("=")
    if not sep or not hist or not path:
        raise argparse.ArgumentTypeError(f"expected HIST=TABLE (e.g. mll=points.csv), got "
                                         f"{text!r}")
    return hist, path


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    p: argparse.ArgumentParser = subparsers.add_parser(
        "plot",
        help="re-draw the plots of a results folder with other options (no re-run)",
        description=(
            "Re-draw histograms of a results folder from its results.json, without running the "
            "analysis again: choose the histograms, stacks, overlays and points, log or linear "
            "axes, ranges, rebinning (exact for every normalisation: Σw and Σw² are merged, "
            "densities divided by the new widths, unit area stays unit area), formats and the "
            "figure size. Options not given keep what the run's config chose ([plot] and each "
            "histogram's plot table)."
        ),
    )
    p.add_argument("folder", metavar="RESULTS_FOLDER", help="results folder of `evtkin run`")
    p.add_argument("--out", metavar="DIR",
                   help="write the figures to DIR/plots (default: the results folder's plots/)")
    p.add_argument("--hists", nargs="+", metavar="HIST", help="only these histograms")
    what = p.add_argument_group("what is drawn")
    what.add_argument("--stack", nargs="+", metavar="SAMPLE",
                      help="stack these samples, bottom first (the order of the stack)")
    what.add_argument("--overlay", nargs="+", metavar="SAMPLE",
                      help="draw these samples as lines (default: every sample neither stacked "
                      "nor data)")
    what.add_argument("--data", nargs="+", metavar="NAME",
                      help="draw these samples or measured tables as points (never stacked)")
    what.add_argument("--measured", action="append", type=_measured, metavar="HIST=TABLE",
                      help="draw the measured points of TABLE (evtkin's CSV or JSON table, see "
                      "docs/plots.md) on histogram HIST; repeat for more")
    what.add_argument("--colour", action="append", type=_colour, metavar="SAMPLE=COLOUR",
                      help="colour of a sample (a matplotlib colour: #D55E00, C2, tab:red)")
    what.add_argument("--ratio", action=argparse.BooleanOptionalAction, default=None,
                      help="the ratio panel (default: when there is something to compare)")
    axes = p.add_argument_group("axes")
    scale = axes.add_mutually_exclusive_group()
    scale.add_argument("--logy", action="store_const", const=True, dest="logy",
                       help="log y axis (default: log when the contents span > 3 decades)")
    scale.add_argument("--liny", action="store_const", const=False, dest="logy",
                       help="linear y axis")
    axes.add_argument("--logx", action=argparse.BooleanOptionalAction, default=None,
                      help="log x axis (the first edge must be above 0)")
    axes.add_argument("--xrange", nargs=2, type=float, metavar=("LO", "HI"), help="x range")
    axes.add_argument("--yrange", nargs=2, type=float, metavar=("LO", "HI"), help="y range")
    rebin = axes.add_mutually_exclusive_group()
    rebin.add_argument("--rebin", type=_positive, metavar="N",
                       help="merge every N bins (N must divide the number of bins)")
    rebin.add_argument("--rebin-edges", nargs="+", type=float, metavar="EDGE",
                       help="new bin edges, a subset of the histogram's own")
    look = p.add_argument_group("output")
    look.add_argument("--formats", nargs="+", choices=("png", "pdf", "svg"), metavar="FMT",
                      help="png, pdf and/or svg (default: the run's plot formats)")
    look.add_argument("--size", nargs=2, type=float, metavar=("W", "H"),
                      help="figure size in inches")
    look.add_argument("--title", action=argparse.BooleanOptionalAction, default=None,
                      help="print the histogram's title in the figure (default: no)")
    p.add_argument("--jobs", "-j", type=_positive, metavar="N",
                   help="processes drawing the plots (default: every available core)")
    p.add_argument("--allow-incomplete", action="store_true",
                   help="plot a folder marked INCOMPLETE too (a run was interrupted while "
                   "writing it; default: refuse it)")
    p.set_defaults(func=main)
    return p


def overrides_from(args: argparse.Namespace) -> dict[str, Any]:
    """The plot options given on the command line (names as the config's plot keys)."""
    out: dict[str, Any] = {
        "stack": args.stack, "overlay": args.overlay, "data": args.data, "logy": args.logy,
        "logx": args.logx, "xrange": args.xrange, "yrange": args.yrange,
        "rebin": args.rebin if args.rebin else args.rebin_edges, "formats": args.formats,
        "figsize": args.size, "title": args.title, "ratio": args.ratio,
        "colours": dict(args.colour) if args.colour else None,
    }
    return {k: v for k, v in out.items() if v is not None}


def main(args: argparse.Namespace) -> int:
    from evtkin.run.forkserver import available_cores, start_forkserver

    if args.jobs != 1:
        start_forkserver(["evtkin.output.plots", "matplotlib.pyplot"])
    t0 = time.perf_counter()
    from evtkin.errors import ResultsError
    from evtkin.output.measured import read_measured
    from evtkin.output.plots import write_plots
    from evtkin.output.tables import read_results

    results = read_results(args.folder, allow_incomplete=args.allow_incomplete)
    overrides = overrides_from(args)
    if args.measured:
        measured = dict(results.meta.get("measured") or {})
        data = list(overrides.get("data") or (results.meta.get("plot") or {}).get("data") or [])
        for hist, path in args.measured:
            table = read_measured(path)
            name = Path(path).stem
            rec = measured.setdefault(name, {"label": table.label, "tables": {}})
            rec["tables"][hist] = table.to_dict()
            if name not in data:
                data.append(name)
        results.meta["measured"] = measured
        overrides["data"] = data
    out = Path(args.out) if args.out else Path(args.folder)
    if out.resolve() == Path(args.folder).resolve() and not (out / "results.json").is_file():
        raise ResultsError(f"{out}: no results.json")
    files = write_plots(out, results, note=str(results.meta.get("note", "") or ""),
                        overrides=overrides, hists=args.hists,
                        workers=args.jobs if args.jobs else available_cores())
    for f in files:
        print(f)
    print(f"{len(files)} file(s) written in {time.perf_counter() - t0:.1f} s")
    return 0
