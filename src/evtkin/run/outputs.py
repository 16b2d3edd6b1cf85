"""Write a run's results folder (layout in docs/results-format.md) through :mod:`evtkin.output`.

``results.json`` and ``provenance.json`` are always written (they are the record every other
command reads); ROOT, CSV, cutflow tables and plots follow ``[output] formats``.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

from evtkin.output import tables

if TYPE_CHECKING:  # pragma: no cover
    from evtkin.run.pipeline import RunResult
    from evtkin.run.plan import Plan

__all__ = ["to_results", "write_outputs"]


def to_results(plan: Plan, result: RunResult, *, with_cutflow: bool = True) -> tables.Results:
    """The plain results record of a run (nominal values, no bands yet)."""
    samples = {}
    for name, s in result.samples.items():
        samples[name] = tables.SampleResult(
            name=name,
            label=s.label,
            luminosity_fb=s.luminosity_fb,
            xsec=s.xsec.to_dict() if s.xsec is not None else {},
            variations=list(s.variations),
            histograms={h: tables.hist_result(nh) for h, nh in s.histograms.items()},
            cutflow=list(s.cutflow) if with_cutflow else [],
        )
    meta: dict[str, Any] = {"analysis": plan.config.name}
    if plan.config.note:
        meta["note"] = plan.config.note
    elif any(s.toy for s in plan.config.samples.values()):
        meta["note"] = "toy data — not a physics prediction"
    return tables.Results(samples=samples, meta=meta)


def write_outputs(plan: Plan, result: RunResult, folder: str | Path) -> Path:
    """Write every requested output of ``result`` into ``folder`` (created if needed)."""
    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    formats = set(plan.config.output.formats)
    results = to_results(plan, result, with_cutflow="cutflow" in formats)
    tables.write_results(out, results, csv_tables="csv" in formats)
    if "root" in formats:
        from evtkin.output.rootfile import write_results_root

        write_results_root(out, results)
    if "plots" in formats:
        from evtkin.output.plots import write_plots

        write_plots(out, results, note=str(results.meta.get("note", "")),
                    formats=plan.config.output.plot_formats)
    tables.write_provenance(out, result.provenance)
    return out
