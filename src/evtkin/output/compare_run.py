"""The comparison driver: :func:`compare_results` loads results folders, compares them
(:func:`evtkin.output.compare_plots.compare_loaded`), draws the plots, writes the summary tables
and the HTML report (:mod:`evtkin.output.report`). It sits above both so that neither imports the
other's driver."""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path

from evtkin.errors import ResultsError
from evtkin.files import safe_name
from evtkin.output.compare_plots import (
    ComparisonSet,
    compare_loaded,
    plot_comparison,
    write_summary,
)
from evtkin.output.drawing import Task, draw_all

__all__ = ["compare_results"]


def compare_results(
    folders: Sequence[str | os.PathLike[str]],
    *,
    out: str | os.PathLike[str],
    shape_only: bool = False,
    with_bands: bool = False,
    pulls: bool = False,
    samples: Sequence[str] | None = None,
    pair: tuple[str, str] | None = None,
    histograms: Sequence[str] | None = None,
    min_entries: float = 5.0,
    low_content: str = "flag",
    with_flow: bool = False,
    report: bool = True,
    workers: int = 1,
    allow_incomplete: bool = False,
) -> ComparisonSet:
    """Compare result folders (the first is the reference) and write plots, tables and a report.

    One folder alone compares its samples (the first is the reference), or, with ``pair``, two of
    its histograms. See :func:`compare_loaded` for the pairing rules. ``workers``: processes
    drawing the plots (see :func:`evtkin.output.drawing.draw_all`).
    """
    from evtkin.output.tables import read_results

    if not folders:
        raise ResultsError("compare: give at least one results folder")
    results = [read_results(f, allow_incomplete=allow_incomplete) for f in folders]
    cs = compare_loaded(
        results,
        [str(f) for f in folders],
        samples=samples,
        pair=pair,
        histograms=histograms,
        shape_only=shape_only,
        with_bands=with_bands,
        min_entries=min_entries,
        low_content=low_content,
        with_flow=with_flow,
    )
    outp = Path(out)
    outp.mkdir(parents=True, exist_ok=True)
    cs.out = str(outp)
    used: set[str] = set()
    tasks: list[Task] = []
    for e in cs.entries:
        stem = safe_name(e.name)
        while stem in used:
            stem += "_"
        used.add(stem)
        e.plot = f"plots/{stem}.png"
        tasks.append((plot_comparison, (e, outp / e.plot), {"pulls": pulls, "note": cs.note,
                                                          "corner": cs.corner}))
    draw_all(tasks, workers)
    write_summary(cs, outp)
    if report:
        from evtkin.output.report import write_compare_report

        write_compare_report(cs, outp / "report.html")
    return cs
