"""``responses.json``: the response matrices of a run (see :mod:`evtkin.hists.response`)."""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from pathlib import Path

from evtkin.files import atomic_write_text
from evtkin.hists.response import Response

__all__ = ["plot_responses", "write_responses"]


def write_responses(folder: str | Path, responses: Mapping[str, Mapping[str, Response]]
                    ) -> Path | None:
    """``responses.json`` from ``{sample: {histogram: Response}}``: per sample and histogram
    the matrix, truth and reco histograms, efficiency and purity (see
    :meth:`evtkin.hists.response.Response.to_dict`). Nothing is written without any."""
    data = {s: {h: r.to_dict() for h, r in per.items()} for s, per in responses.items()}
    data = {s: d for s, d in data.items() if d}
    if not data:
        return None
    doc = {"about": "response matrices: rows = truth bin, columns = reconstructed bin, flow "
                    "bins included; contents in pb (σ-normalised Σw); efficiency and purity per "
                    "in-range bin", "samples": data}
    return atomic_write_text(Path(folder) / "responses.json",
                             json.dumps(doc, indent=1, allow_nan=False) + "\n")


def plot_responses(folder: str | Path, responses: Mapping[str, Mapping[str, Response]], *,
                   levels: Mapping[str, tuple[str, str]] | None = None,
                   labels: Mapping[str, str] | None = None, corner: str = "",
                   formats: Sequence[str] = ("png",), note: str = "") -> list[Path]:
    """``plots/response_<sample>_<histogram>.<fmt>``: per response matrix the migrations
    P(reconstructed bin | truth bin) in percent (each truth row normalised to the events
    reconstructed in range), with the efficiency and purity per bin below. ``levels``: per
    sample the names of the two levels (default: truth, reconstructed); ``labels``: per
    sample its label, shown in the corner with ``corner`` (e.g. √s) as in the 2-D plots
    (default: the sample's name)."""
    import io

    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt
    import numpy as np

    from evtkin.files import atomic_write_bytes, safe_name
    from evtkin.output.style import PALETTE, apply_axes_style, corner_texts, display_label

    written: list[Path] = []
    for sample, per in responses.items():
        truth_name, reco_name = (levels or {}).get(sample, ("truth", "reconstructed"))
        for hname, r in per.items():
            edges = np.asarray(r.edges, dtype=np.float64)
            n = len(edges) - 1
            m = np.asarray(r.matrix, dtype=np.float64).reshape(n + 2, n + 2)[1:-1, 1:-1]
            rows = m.sum(axis=1, keepdims=True)
            with np.errstate(divide="ignore", invalid="ignore"):
                frac = np.where(rows > 0, 100.0 * m / np.where(rows > 0, rows, 1.0), np.nan)
            fig, (ax, ax2) = plt.subplots(
                2, 1, figsize=(7.2, 7.6), height_ratios=(3.2, 1.0), sharex=True,
                layout="constrained")
            shown = np.where(frac > 0, frac, np.nan)  # empty cells stay white
            mesh = ax.pcolormesh(edges, edges, np.ma.masked_invalid(shown.T), cmap="Blues",
                                 vmin=0.0, vmax=100.0)
            centres = 0.5 * (edges[:-1] + edges[1:])
            if n <= 12:
                for i in range(n):
                    for j in range(n):
                        if np.isfinite(frac[i, j]) and frac[i, j] > 0:
                            ax.text(centres[i], centres[j], f"{frac[i, j]:.0f}", ha="center",
                                    va="center", fontsize=8,
                                    color="white" if frac[i, j] > 60 else "black")
            unit = f" [{r.unit}]" if r.unit else ""
            label = display_label(r.label)
            apply_axes_style(ax, ylabel=f"{label}, {reco_name}{unit}")
            cbar = fig.colorbar(mesh, ax=ax, pad=0.01)
            cbar.set_label(f"P({reco_name} bin | {truth_name} bin) [%]")
            label_text = (labels or {}).get(sample) or str(sample)
            corner_texts(ax, note=note, right=", ".join(x for x in (label_text, corner) if x))
            eff = np.asarray(r.efficiency, dtype=np.float64)
            pur = np.asarray(r.purity, dtype=np.float64)
            # bins without events have no efficiency (purity): left blank, not drawn as 0
            ax2.stairs(eff, edges, color=PALETTE[0], label="Efficiency", linewidth=1.8)
            ax2.stairs(pur, edges, color=PALETTE[3], label="Purity", linewidth=1.8,
                       linestyle="--")
            ax2.set_ylim(0.0, 1.15)
            apply_axes_style(ax2, xlabel=f"{label}, {truth_name}{unit}", ylabel="Fraction")
            ax2.legend(fontsize=8, loc="lower right", ncol=2, frameon=False)
            stem = Path(folder) / "plots" / f"response_{safe_name(sample)}_{safe_name(hname)}"
            for fmt in formats:
                buf = io.BytesIO()
                fig.savefig(buf, format=fmt, dpi=150)
                written.append(atomic_write_bytes(stem.with_name(f"{stem.name}.{fmt}"),
                                                  buf.getvalue()))
            plt.close(fig)
    return written
