"""Single-file HTML reports: plots embedded as base64 PNG, inline CSS, no scripts, no links.

* :func:`write_run_report` for a results folder of ``evtkin run`` (job summary, cutflows, every
  histogram with its plot, provenance);
* :func:`write_compare_report` for a :class:`~evtkin.output.compare_plots.ComparisonSet` (sources,
  the table sorted by p-value, every comparison plot, notes, provenance).

Every piece of text from the inputs is HTML-escaped.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import json
import os
import tempfile
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from evtkin._version import __version__
from evtkin.files import atomic_write_text
from evtkin.output.tables import Results as ResultsRecord
from evtkin.output.tables import _cutflow_table, count_text

__all__ = ["render_compare_report", "render_run_report", "write_compare_report", "write_run_report"]

_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;margin:2em auto;
 max-width:1100px;
 padding:0 1em;color:#222;line-height:1.4}
h1{font-size:1.6em;border-bottom:2px solid #446;padding-bottom:.2em}
h2{font-size:1.25em;margin-top:1.8em;border-bottom:1px solid #ccd}
h3{font-size:1.05em;margin-bottom:.3em}
table{border-collapse:collapse;margin:.6em 0;font-size:.9em}
th,td{border:1px solid #ccd;padding:.25em .6em;text-align:right;vertical-align:top}
td:not(.l){white-space:nowrap}
th{background:#eef}
td.l,th.l{text-align:left}
tr.low td{background:#fde8e8}
.note{background:#fff6d6;border:1px solid #e8d48a;padding:.4em .8em;display:inline-block}
.small{font-size:.85em;color:#555}
figure{margin:1em 0;display:inline-block;vertical-align:top}
figure img{max-width:100%;height:auto;border:1px solid #eee}
figcaption{font-size:.85em;color:#444}
pre{background:#f6f6f8;padding:.6em;overflow-x:auto;font-size:.8em}
nav a{margin-right:1em}
"""


def _e(x: Any) -> str:
    return html.escape(str(x), quote=True)


def _num(v: Any, fmt: str = ".4g") -> str:
    if v is None:
        return "–"
    if isinstance(v, (int, np.integer)) and not isinstance(v, bool):
        return str(int(v))
    try:
        f = float(v)
    except (TypeError, ValueError):
        return _e(v)
    return "nan" if not np.isfinite(f) else format(f, fmt)


def _count(v: Any) -> str:
    """An event count as the cutflow tables print it (:func:`count_text`)."""
    return "–" if v is None else _e(count_text(v))


def _img(png: bytes, alt: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return f'<img alt="{_e(alt)}" src="data:image/png;base64,{data}">'


def _table(
    head: Sequence[str],
    rows: Iterable[Sequence[str]],
    left: int = 1,
    row_class: Sequence[str] | None = None,
) -> str:
    def cls(i: int) -> str:
        return ' class="l"' if i < left else ""

    out = ["<table><thead><tr>"]
    out += [f"<th{cls(i)}>{_e(h)}</th>" for i, h in enumerate(head)]
    out.append("</tr></thead><tbody>")
    for k, r in enumerate(rows):
        rc = f' class="{row_class[k]}"' if row_class and row_class[k] else ""
        out.append(
            f"<tr{rc}>" + "".join(f"<td{cls(i)}>{c}</td>" for i, c in enumerate(r)) + "</tr>"
        )
    out.append("</tbody></table>")
    return "".join(out)


def _page(title: str, body: list[str], note: str = "") -> str:
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(title)}</title><style>{_CSS}</style></head><body>",
        f"<h1>{_e(title)}</h1>",
        f'<p class="small">written by evtkin {_e(__version__)} on {_e(stamp)}</p>',
    ]
    if note:
        parts.append(f'<p class="note">{_e(note)}</p>')
    parts += body
    parts.append("</body></html>")
    return "\n".join(parts) + "\n"


def _write(path: str | os.PathLike[str], text: str) -> Path:
    return atomic_write_text(path, text)


def _anchor(name: str) -> str:
    return "h-" + "".join(ch if ch.isalnum() else "-" for ch in name)


# --------------------------------------------------------------------------------------------------
# comparison report


def render_compare_report(cs: Any, *, title: str = "evtkin comparison") -> str:
    """HTML text of the comparison report (``cs`` is a ``ComparisonSet``)."""
    from evtkin.compare import p_text
    from evtkin.output.compare_plots import plot_comparison, summary_rows

    body: list[str] = []
    mode = (
        "shape only (each normalised to unit area)"
        if cs.shape_only
        else ("absolute (normalisations compared)")
    )
    body.append("<h2>Inputs</h2>")
    body.append(
        _table(
            ["role", "label", "folder", "sample"],
            [
                [
                    _e("reference" if i == 0 else f"compared #{i}"),
                    _e(s.label),
                    _e(s.folder),
                    _e(getattr(s.sample, "name", "")),
                ]
                for i, s in enumerate(cs.sources)
            ],
            left=4,
        )
    )
    body.append(
        f"<p>Mode: {_e(mode)}. Bands in pulls: {'yes' if cs.with_bands else 'no'}. "
        "χ² tests for weighted histograms after N. D. Gagunashvili, NIM A 614 (2010) 287; "
        "the Kolmogorov p-value is approximate (effective entries, binned data).</p>"
    )
    rows = summary_rows(cs)
    # each note once: numbered below the table, the rows refer to the numbers
    note_ids: dict[str, int] = {}
    row_notes: list[list[int]] = []
    for _entry, c in cs.comparisons():  # the rows' order
        ids = [note_ids.setdefault(n, len(note_ids) + 1)
               for n in dict.fromkeys((*c.chi2.notes, *c.notes))]
        row_notes.append(sorted(ids))
    body.append("<h2>Summary, smallest p-value first</h2>")
    body.append(
        _table(
            [
                "histogram",
                "compared",
                "method",
                "χ²",
                "ndf",
                "p",
                "p (shape)",
                "p (absolute)",
                "KS D",
                "KS p≈",
                "merged bins",
                "notes",
            ],
            [
                [
                    f'<a href="#{_anchor(r["histogram"])}">{_e(r["histogram"])}</a>',
                    _e(r["other"]),
                    _e(r["method"]),
                    _num(r["chi2"]),
                    _num(r["ndf"]),
                    _e(p_text(r["p_value"], r["log10_p"])),
                    _num(r["p_shape"], ".3g"),
                    _num(r["p_absolute"], ".3g"),
                    _num(r["ks_distance"], ".3g"),
                    _num(r["ks_p_approx"], ".3g"),
                    _e(r["merged"]) or "–",
                    '<span class="small">'
                    + ", ".join(f'<a href="#note{i}">{i}</a>' for i in ids) + "</span>",
                ]
                for r, ids in zip(rows, row_notes, strict=True)
            ],
            left=3,
            row_class=[
                "low" if (r["p_value"] == r["p_value"] and r["p_value"] < 0.01) else ""
                for r in rows
            ],
        )
    )
    if note_ids:
        body.append("<p class=small>Notes:</p><ol class=small>")
        body += [f'<li id="note{i}">{_e(n)}</li>' for n, i in note_ids.items()]
        body.append("</ol>")
    if cs.skipped:
        body.append("<p class=small>Not compared:</p><ul class=small>")
        body += [f"<li>{_e(s)}</li>" for s in cs.skipped]
        body.append("</ul>")
    body.append("<h2>Histograms</h2>")
    entries = sorted(cs.entries, key=lambda e: (not np.isfinite(e.min_p), e.min_p))
    for e in entries:
        png = _entry_png(cs, e, plot_comparison)
        body.append(f'<h3 id="{_anchor(e.name)}">{_e(e.name)}</h3>')
        stats_txt = "; ".join(
            f"{c.label_b}: χ²/ndf = {_num(c.chi2.statistic)}/{c.chi2.ndf}, "
            f"p = {c.chi2.p_text}"
            for c in e.comparisons
        )
        body.append(f"<figure>{_img(png, e.name)}<figcaption>{_e(stats_txt)}</figcaption></figure>")
    body.append("<h2>Provenance</h2>")
    prov = {
        "evtkin_version": __version__,
        "inputs": [
            {"folder": s.folder, "sample": getattr(s.sample, "name", "")} for s in cs.sources
        ],
        "output": cs.out,
    }
    body.append(f"<pre>{_e(json.dumps(prov, indent=1))}</pre>")
    return _page(title, body, cs.note)


def _entry_png(cs: Any, e: Any, plot_comparison: Any) -> bytes:
    if cs.out and e.plot and (Path(cs.out) / e.plot).is_file():
        out: bytes = (Path(cs.out) / e.plot).read_bytes()
        return out
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "plot.png"
        plot_comparison(e, path, note=cs.note, corner=getattr(cs, "corner", ""))
        return path.read_bytes()


def write_compare_report(cs: Any, path: str | os.PathLike[str]) -> Path:
    """Write the comparison report to ``path``; return the path."""
    return _write(path, render_compare_report(cs))


# --------------------------------------------------------------------------------------------------
# run report


def render_run_report(
    results: Any, folder: str | os.PathLike[str] | None = None, *, title: str = "evtkin run report"
) -> str:
    """HTML text of a run report (``results`` shaped like ``evtkin.output.tables.Results``).

    Plots are taken from ``folder/plots`` when present, otherwise drawn here.
    """
    folder_p = Path(folder) if folder is not None else None
    meta = getattr(results, "meta", {}) or {}
    samples = results.samples
    body: list[str] = [
        '<nav class="small"><a href="#summary">summary</a><a href="#cutflow">cutflow'
        '</a><a href="#histograms">histograms</a><a href="#provenance">provenance</a>'
        "</nav>"
    ]
    body.append('<h2 id="summary">Job summary</h2>')
    rows = []
    for name, s in samples.items():
        x = s.xsec or {}
        sig = x.get("sigma_pb")
        sig_txt = "–" if sig is None else f"{_num(sig)} ± {_num(x.get('sigma_err_pb'), '.2g')}"
        n_events = x.get("n_events")
        if getattr(s, "data", False):
            sig_txt = "data (counted events)"
            n_events = s.cutflow[0].get("n_raw") if s.cutflow else None
        rows.append(
            [
                _e(name),
                _e(s.label),
                sig_txt,
                _count(n_events),
                _count(x.get("n_eff")),
                _num(s.luminosity_fb),
                _num(len(s.histograms)),
                _num(len(s.variations)),
            ]
        )
    body.append(
        _table(
            [
                "sample",
                "label",
                "σ [pb]",
                "events",
                "N_eff",
                "L [fb⁻¹]",
                "histograms",
                "variations",
            ],
            rows,
            left=2,
        )
    )
    if folder_p is not None:
        body.append(f'<p class="small">results folder: {_e(folder_p)}</p>')

    body.append('<h2 id="cutflow">Cutflow</h2>')
    for name, s in samples.items():
        flows = [(s.label or name, s.cutflow)] if s.cutflow else []
        flows += [(f"{s.label or name}: region {r}", rows)
                  for r, rows in getattr(s, "region_cutflows", {}).items()]
        for heading, rows in flows:
            body.append(f"<h3>{_e(heading)}</h3>")
            # the columns of the cutflow files: Σw ± √Σw² in pb and, with a luminosity, the
            # expected events; a data sample's counted events N ± √N
            head, cells = _cutflow_table(rows, s.luminosity_fb, getattr(s, "data", False))
            body.append(_table(head, [[_e(x) for x in r] for r in cells]))

    body.append('<h2 id="histograms">Histograms</h2>')
    names: list[str] = []
    for s in samples.values():
        names += [h for h in s.histograms if h not in names]
    for h in names:
        have = [(sn, s.histograms[h]) for sn, s in samples.items() if h in s.histograms]
        first = have[0][1]
        body.append(
            f'<h3 id="{_anchor(h)}">{_e(first.title or h)} '
            f'<span class="small">({_e(h)}, {_e(first.normalisation)})</span></h3>'
        )
        for png, cap in _run_pngs(folder_p, h, have, meta, results):
            body.append(f"<figure>{_img(png, cap)}<figcaption>{_e(cap)}</figcaption></figure>")

    body.append('<h2 id="provenance">Provenance</h2>')
    prov: Any = None
    if folder_p is not None and (folder_p / "provenance.json").is_file():
        try:
            prov = json.loads((folder_p / "provenance.json").read_text(encoding="utf-8"))
        except (OSError, ValueError) as exc:
            prov = f"provenance.json could not be read: {exc}"
    if prov is None:
        prov = {k: v for k, v in meta.items() if k != "samples"}
    text = prov if isinstance(prov, str) else json.dumps(prov, indent=1, default=str)
    body.append(f"<pre>{_e(text)}</pre>")
    return _page(title, body, str(meta.get("note", "") or ""))


def _run_pngs(
    folder: Path | None, h: str, have: list[tuple[str, Any]], meta: dict[str, Any],
    results: Any = None,
) -> list[tuple[bytes, str]]:
    safe = "".join(ch if (ch.isalnum() or ch in "_.+-") else "_" for ch in h)
    first = have[0][1]
    ndim = getattr(first, "ndim", len(first.axes))
    if folder is not None:
        if ndim == 1 and (folder / "plots" / f"{safe}.png").is_file():
            return [((folder / "plots" / f"{safe}.png").read_bytes(), first.title or h)]
        if ndim == 2:
            out = []
            for sn, hr in have:
                ss = "".join(ch if (ch.isalnum() or ch in "_.+-") else "_" for ch in sn)
                p = folder / "plots" / f"{safe}__{ss}.png"
                if p.is_file():
                    out.append((p.read_bytes(), f"{hr.title or h} — {sn}"))
            if len(out) == len(have):
                return out
    note = str(meta.get("note", "") or "")
    if isinstance(results, ResultsRecord):
        # no PNG in the folder (e.g. plot_formats = ["pdf"]): the run plots' own figures
        from evtkin.output.plots import write_plots

        with tempfile.TemporaryDirectory() as tmp:
            paths = write_plots(tmp, results, note=note, hists=[h],
                                overrides={"formats": ["png"]})
            caps = ([first.title or h] if ndim == 1 else
                    [f"{hr.title or h} — {sn}" for sn, hr in have])
            return [(p.read_bytes(), c) for p, c in zip(paths, caps, strict=False)]
    return _draw_run_plots(h, have, note)


def _draw_run_plots(h: str, have: list[tuple[str, Any]], note: str) -> list[tuple[bytes, str]]:
    import io

    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    out = []
    first = have[0][1]
    ndim = getattr(first, "ndim", len(first.axes))
    figs: list[tuple[Any, str]] = []
    if ndim == 1:
        fig, ax = plt.subplots(figsize=(6.4, 4.2))
        for sn, hr in have:
            e = np.asarray(hr.axes[0].edges, float)
            v = np.asarray(hr.values, float)[1:-1]
            err = np.sqrt(np.asarray(hr.variances, float)[1:-1])
            art = ax.stairs(v, e, label=sn)
            ax.errorbar(
                0.5 * (e[1:] + e[:-1]),
                v,
                yerr=err,
                fmt="none",
                ecolor=art.get_edgecolor(),
                elinewidth=1,
            )
        ax.set_xlabel(first.axes[0].label or first.axes[0].name)
        ax.set_ylabel(first.y_label or "")
        ax.legend(fontsize=8, frameon=False)
        if note:
            ax.text(
                0.02,
                0.97,
                note,
                transform=ax.transAxes,
                fontsize=7,
                va="top",
                color="0.35",
                style="italic",
            )
        figs.append((fig, first.title or h))
    else:
        for sn, hr in have:
            fig, ax = plt.subplots(figsize=(6.0, 4.8))
            ex = np.asarray(hr.axes[0].edges, float)
            ey = np.asarray(hr.axes[1].edges, float)
            v = np.asarray(hr.values, float)[1:-1, 1:-1]
            m = ax.pcolormesh(ex, ey, v.T, shading="flat")
            fig.colorbar(m, ax=ax)
            ax.set_xlabel(hr.axes[0].label or hr.axes[0].name)
            ax.set_ylabel(hr.axes[1].label or hr.axes[1].name)
            figs.append((fig, f"{hr.title or h} — {sn}"))
    for fig, cap in figs:
        buf = io.BytesIO()
        fig.savefig(buf, format="png", dpi=100, bbox_inches="tight")
        plt.close(fig)
        out.append((buf.getvalue(), cap))
    return out


def write_run_report(
    folder: str | os.PathLike[str], path: str | os.PathLike[str] | None = None
) -> Path:
    """Write the report of a results folder (default ``folder/report.html``); return the path."""
    from evtkin.output.tables import read_results

    results = read_results(folder, allow_incomplete=True)  # written while INCOMPLETE
    target = Path(path) if path is not None else Path(folder) / "report.html"
    return _write(target, render_run_report(results, folder))
