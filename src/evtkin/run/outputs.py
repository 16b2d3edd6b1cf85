"""Write a run's results folder (layout in docs/results-format.md) through :mod:`evtkin.output`.

``results.json`` and ``provenance.json`` are always written (they are the record every other
command reads); ROOT, CSV, cutflow tables and plots follow ``[output] formats``. Uncertainty bands
(:mod:`evtkin.hists.recipes`) go into every output: ``bands`` in the JSON, ``<band>_down/_up``
columns in the CSV, ``<sample>__<hist>__<band>_up/_down`` histograms in the ROOT file, shaded on
the plots. :func:`summary_text` is the per-sample cross-section summary printed after a run.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

from evtkin.files import atomic_write_text
from evtkin.output import tables

if TYPE_CHECKING:  # pragma: no cover
    from evtkin.run.plan import Plan
    from evtkin.run.result import RunResult

__all__ = ["INCOMPLETE_MARKER", "summary_text", "to_results", "write_outputs"]

#: present in a results folder while a run writes it (removed once provenance.json is written)
INCOMPLETE_MARKER = "INCOMPLETE"
_INCOMPLETE_TEXT = ("evtkin is writing this folder, or a run writing it was interrupted: "
                    "its files may be a mix of two runs. Run again to complete it.\n")


def to_results(plan: Plan, result: RunResult, *, with_cutflow: bool = True) -> tables.Results:
    """The plain results record of a run (:func:`evtkin.run.result.results_record`)."""
    from evtkin.run.result import results_record

    return results_record(plan, result, with_cutflow=with_cutflow)


def write_outputs(plan: Plan, result: RunResult, folder: str | Path, *, workers: int = 1) -> Path:
    """Write every requested output of ``result`` into ``folder`` (created if needed).

    ``workers``: processes that may draw the plots (the cores the run was given)."""
    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    # every file is written under a temporary name and renamed; while the folder is being
    # (re)written it holds INCOMPLETE and no provenance.json (written last), so a run that
    # was interrupted is recognisable
    marker = atomic_write_text(out / INCOMPLETE_MARKER, _INCOMPLETE_TEXT)
    (out / "provenance.json").unlink(missing_ok=True)
    formats = set(plan.config.output.formats)
    results = to_results(plan, result, with_cutflow="cutflow" in formats)
    tables.write_results(out, results, csv_tables="csv" in formats)
    if "root" in formats:
        from evtkin.output.rootfile import write_results_root

        write_results_root(out, results)
    if "plots" in formats:
        from evtkin.output.plots import write_plots

        write_plots(out, results, note=str(results.meta.get("note", "")),
                    formats=plan.config.output.plot_formats, workers=workers)
    if result.partial is not None:  # the sums evtkin merge adds up
        from evtkin.run.partial_store import save_partial

        save_partial(out, result.partial, config_sha256=plan.config.sha256)
    tables.write_provenance(out, result.provenance)
    if any(s.responses for s in result.samples.values()):
        from evtkin.output.responses import write_responses

        found = {name: s.responses for name, s in result.samples.items()}
        write_responses(out, found)
        if "plots" in formats:
            from evtkin.output.responses import plot_responses
            from evtkin.output.style import sqrt_s_text

            levels = {name: ("parton level", "particle level")
                      for name, spec in plan.config.samples.items() if spec.format == "hepmc"}
            labels = {name: s.label or name for name, s in results.samples.items()}
            plot_rec = results.meta.get("plot") or {}
            corner = sqrt_s_text(plot_rec.get("sqrt_s_gev") if isinstance(plot_rec, dict)
                                 else None, None)  # the contents are in pb: no luminosity
            plot_responses(out, {k: v for k, v in found.items() if v}, levels=levels,
                           labels=labels, corner=corner, formats=plan.config.output.plot_formats,
                           note=str(results.meta.get("note", "")))
    if "report" in formats:  # last: it reads the folder back (and embeds the plots written above)
        from evtkin.output.report import write_run_report

        write_run_report(out)
    marker.unlink()
    return out


def summary_text(result: RunResult) -> str:
    """Per sample: events, σ ± error, Σw, Σw², N_eff, the weighting convention used, and any
    cross-check warnings (one block per sample, plain text)."""
    lines = []
    for name, s in result.samples.items():
        x = s.xsec
        if s.data:
            sel = s.cutflow[-1]["n_raw"] if s.cutflow else s.n_events
            lines.append(f"{name}: data, {s.n_events} events counted (weight 1), {sel} selected")
            continue
        if x is None:
            lines.append(f"{name}: {s.n_events} events (no cross section: no events read)")
            continue
        sel = s.cutflow[-1]["n_raw"] if s.cutflow else s.n_events
        lines.append(
            f"{name}: {x.n_events} events, {sel} selected; σ = {x.sigma_pb:.6g} ± "
            f"{x.sigma_err_pb:.3g} pb; Σw = {x.sum_w:.6g} pb, Σw² = {x.sum_w2:.4g} pb², "
            f"N_eff = {x.n_eff:.6g}")
        mode = f"IDWTUP = {x.mode}" if x.mode else "IDWTUP differs between files"
        decl = (f"; declared {x.declared_pb:.6g} pb" if x.declared_pb else "; no declared σ")
        lines.append(f"  weights: {mode}, convention {x.convention!r}{decl}")
        for w in x.warnings:
            lines.append(f"  warning: {w}")
        bands = sorted({b for per in getattr(s, "bands", {}).values() for b in per})
        if bands:
            lines.append(f"  bands: {', '.join(bands)}")
    return "\n".join(lines) + ("\n" if lines else "")
