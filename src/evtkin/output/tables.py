"""Results JSON, CSV tables, cutflow tables and provenance of a results folder.

The folder layout and the JSON schema are documented in docs/results-format.md. The same plain
dataclasses (:class:`Results`, :class:`SampleResult`, :class:`HistResult`, :class:`AxisInfo` and
:class:`evtkin.hists.bands.Band`) are written and read back by :func:`read_results`.
Every file is written to a temporary name in its folder and renamed (no half-written files).
"""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import math
import os
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import numpy as np

from evtkin._version import __version__
from evtkin.errors import ResultsError
from evtkin.files import atomic_write_text, safe_name
from evtkin.hists.bands import Band
from evtkin.hists.record import AxisInfo, HistRecord, HistResult, _jlist, _jnum

__all__ = [
    "FORMAT",
    "FORMAT_VERSION",
    "AxisInfo",
    "HistResult",
    "Results",
    "SampleResult",
    "count_error_text",
    "count_text",
    "cutflow_latex",
    "cutflow_markdown",
    "cutflow_text",
    "hist_result",
    "load_results",
    "read_results",
    "write_cutflow",
    "write_hist_csv",
    "write_json",
    "write_provenance",
    "write_results",
]

FORMAT = "evtkin-results"
FORMAT_VERSION = 1
RESULTS_JSON = "results.json"


# --------------------------------------------------------------------------------------------------
# plain objects
# --------------------------------------------------------------------------------------------------
@dataclass
class SampleResult:
    name: str
    label: str = ""
    luminosity_fb: float | None = None
    xsec: dict[str, Any] = field(default_factory=dict)
    variations: list[str] = field(default_factory=list)
    histograms: dict[str, HistResult] = field(default_factory=dict)
    cutflow: list[dict[str, Any]] = field(default_factory=list)
    #: per region: its cutflow (the common steps up to where it branches off, then its own)
    region_cutflows: dict[str, list[dict[str, Any]]] = field(default_factory=dict)
    #: a data sample: counted events (weight 1), no cross section; drawn as points
    data: bool = False


@dataclass
class Results:
    samples: dict[str, SampleResult] = field(default_factory=dict)
    meta: dict[str, Any] = field(default_factory=dict)


def hist_result(
    norm: HistRecord, bands: Mapping[str, Band] | None = None, *, keep_variations: bool = False,
    shape_bands: Mapping[str, Band] | None = None,
) -> HistRecord:
    """The record ``norm`` with these bands (and, with ``keep_variations``, every variation's
    values for ``variation_values``), as written to a results folder."""
    var_vals = None
    if keep_variations and norm.rows is not None:
        var_vals = {n: norm.rows[i + 1].copy() for i, n in enumerate(norm.variations)}
    return dataclasses.replace(
        norm, bands=dict(bands if bands is not None else norm.bands),
        shape_bands=dict(shape_bands if shape_bands is not None else norm.shape_bands),
        variation_values=var_vals if keep_variations else norm.variation_values)


# --------------------------------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------------------------------
def _arr(x: Any, what: str) -> np.ndarray:
    try:
        return np.array(
            [np.nan if v is None else v for v in x] if _flat(x) else
            [[np.nan if v is None else v for v in row] for row in x], dtype=np.float64,
        )
    except (TypeError, ValueError) as exc:
        raise ResultsError(f"{what}: expected a list of numbers ({exc})") from None


def _flat(x: Any) -> bool:
    return not (len(x) and isinstance(x[0], list))


def _default(o: Any) -> Any:
    if isinstance(o, np.ndarray):
        return _jlist(o)
    if isinstance(o, np.integer):
        return int(o)
    if isinstance(o, np.floating):
        return _jnum(float(o))
    if isinstance(o, Path):
        return str(o)
    raise TypeError(f"cannot write {type(o).__name__} to JSON")


def _clean(o: Any) -> Any:
    """Replace non-finite floats by None (strict JSON)."""
    if isinstance(o, float):
        return _jnum(o)
    if isinstance(o, dict):
        return {str(k): _clean(v) for k, v in o.items()}
    if isinstance(o, (list, tuple)):
        return [_clean(v) for v in o]
    return o


def write_json(path: str | os.PathLike[str], obj: Any) -> Path:
    """Strict JSON (NaN/inf → null), UTF-8, atomic."""
    text = json.dumps(_clean(obj), default=_default, ensure_ascii=False, indent=1,
                      allow_nan=False)
    return atomic_write_text(path, text + "\n")


def write_provenance(folder: str | os.PathLike[str], record: Mapping[str, Any]) -> Path:
    """``provenance.json`` from a dict given by the pipeline (evtkin version added if absent)."""

    rec = {"evtkin_version": __version__, **dict(record)}
    return write_json(Path(folder) / "provenance.json", rec)


# --------------------------------------------------------------------------------------------------
# CSV and cutflow
# --------------------------------------------------------------------------------------------------
def _flow_edges(edges: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    lo = np.concatenate([[-np.inf], edges])
    hi = np.concatenate([edges, [np.inf]])
    return lo, hi


def write_hist_csv(path: str | os.PathLike[str], h: HistResult, sample: str = "") -> Path:
    """One row per stored bin (flow rows included); band columns ``<band>_down, <band>_up``."""
    buf = io.StringIO()
    of = f" of sample {sample!r}" if sample else ""
    buf.write(f"# evtkin histogram {h.name!r}{of}\n")
    buf.write(f"# title: {h.title}\n# normalisation: {h.normalisation}; y: {h.y_title}\n")
    buf.write("# axes: " + "; ".join(a.title for a in h.axes) + "\n")
    w = csv.writer(buf, lineterminator="\n")
    bands = list(h.bands)
    band_cols = [c for b in bands for c in (f"{b}_down", f"{b}_up")]
    err = h.errors()
    counts = h.counts
    entries_col = ["entries"] if counts is not None else []
    if h.ndim == 1:
        lo, hi = _flow_edges(h.axes[0].edges)
        w.writerow(["lo", "hi", "value", "error", *entries_col, *band_cols])
        for k in range(h.values.size):
            extra = [v for b in bands for v in (h.bands[b].down[k], h.bands[b].up[k])]
            n = [str(int(counts[k]))] if counts is not None else []
            w.writerow([*(_fmt(x) for x in (lo[k], hi[k], h.values[k], err[k])), *n,
                        *(_fmt(x) for x in extra)])
    else:
        xlo, xhi = _flow_edges(h.axes[0].edges)
        ylo, yhi = _flow_edges(h.axes[1].edges)
        w.writerow(["x_lo", "x_hi", "y_lo", "y_hi", "value", "error", *entries_col, *band_cols])
        for i in range(h.values.shape[0]):
            for j in range(h.values.shape[1]):
                extra = [v for b in bands for v in (h.bands[b].down[i, j], h.bands[b].up[i, j])]
                n = [str(int(counts[i, j]))] if counts is not None else []
                w.writerow([*(_fmt(x) for x in (xlo[i], xhi[i], ylo[j], yhi[j], h.values[i, j],
                                                err[i, j])), *n, *(_fmt(x) for x in extra)])
    return atomic_write_text(path, buf.getvalue())


def _fmt(x: float) -> str:
    x = float(x)
    if math.isnan(x):
        return "nan"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return repr(x)


def read_hist_csv(path: str | os.PathLike[str]) -> dict[str, np.ndarray]:
    """Columns of a histogram CSV as float arrays (comment lines skipped)."""
    p = Path(path)
    try:
        lines = [ln for ln in p.read_text(encoding="utf-8").splitlines() if not ln.startswith("#")]
    except OSError as exc:
        raise ResultsError(f"{p}: cannot read ({exc})") from None
    rows = list(csv.reader(lines))
    if not rows:
        raise ResultsError(f"{p}: no header row")
    header = rows[0]
    try:
        data = np.array([[float(v) for v in r] for r in rows[1:]], dtype=np.float64)
    except ValueError as exc:
        raise ResultsError(f"{p}: non-numeric value ({exc})") from None
    data = data.reshape(-1, len(header))
    return {name: data[:, i] for i, name in enumerate(header)}


def count_error_text(x: float, digits: int = 3) -> str:
    """An uncertainty of an event count as it is read out in a talk: ``digits`` significant
    digits in plain decimals, thousands separated by commas (``123,000``, ``3.16``,
    ``0.0123``; ``0`` is ``0``)."""
    x = float(x)
    if not math.isfinite(x):
        return str(x)
    if x == 0.0:
        return "0"
    places = digits - 1 - math.floor(math.log10(abs(x)))
    r = round(x, places)  # correctly rounded (Python's round of a float)
    if r != 0.0:  # 9.996 → 10.0: one place fewer
        places = digits - 1 - math.floor(math.log10(abs(r)))
    if places <= 0:
        return f"{round(r):,}"
    return f"{r:.{places}f}"


def count_text(x: float) -> str:
    """An (expected) event count as it is read out in a talk: whole events with thousands
    separated by commas from 100 up, at most six significant digits as Σw has
    (``4,872``, ``71,650,100``), three significant digits below (``12.3``, ``0.0123``);
    integers exactly (``1,204``); ``0`` is ``0``."""
    if isinstance(x, (int, np.integer)) and not isinstance(x, bool):
        return f"{int(x):,}"
    text = count_error_text(x)
    if "." in text or text == "0" or not math.isfinite(x):  # below 100 (or 0, nan, inf)
        return text
    whole = math.floor(math.log10(abs(float(x)))) + 1  # digits before the point
    return count_error_text(x, min(whole, 6))


def _cutflow_rows(steps: Sequence[Mapping[str, Any]]) -> list[dict[str, Any]]:
    out = []
    first = prev = None
    for s in steps:
        sw = float(s["sum_w"])
        row = {"step": str(s["step"]), "n_raw": int(s["n_raw"]), "sum_w": sw,
               "sum_w2": float(s.get("sum_w2", 0.0))}
        if first is None:
            first = prev = sw
        row["eff_step"] = sw / prev if prev else float("nan")
        row["eff_cum"] = sw / first if first else float("nan")
        prev = sw
        out.append(row)
    return out


def _expected(rows: Sequence[Mapping[str, Any]], luminosity_fb: float | None
              ) -> list[tuple[float, float]] | None:
    """Expected events N = L·Σw and √(L²·Σw²) per step (L in pb⁻¹), when a luminosity is set."""
    if not luminosity_fb:
        return None
    lum = float(luminosity_fb) * 1000.0  # 1 fb⁻¹ = 1000 pb⁻¹
    return [(lum * r["sum_w"], lum * math.sqrt(max(r["sum_w2"], 0.0))) for r in rows]


def _cutflow_table(steps: Sequence[Mapping[str, Any]], luminosity_fb: float | None,
                   data: bool = False) -> tuple[list[str], list[list[str]]]:
    rows = _cutflow_rows(steps)
    if data:  # counted events: N ± √N, no cross section
        head = ["step", "events", "± √N", "eff. step", "eff. cumul."]
        return head, [[r["step"], count_text(r["n_raw"]), count_error_text(math.sqrt(r["sum_w2"])),
                       f"{r['eff_step']:.4f}", f"{r['eff_cum']:.4f}"] for r in rows]
    exp = _expected(rows, luminosity_fb)
    head = ["step", "events", "Σw [pb]", "± √Σw² [pb]"]
    if exp is not None:
        head += [f"expected events ({luminosity_fb:g} fb⁻¹)", "± √Σw²·L"]
    head += ["eff. step", "eff. cumul."]
    body = []
    for k, r in enumerate(rows):
        line = [r["step"], count_text(r["n_raw"]), f"{r['sum_w']:.6g}",
                f"{math.sqrt(r['sum_w2']):.3g}"]
        if exp is not None:
            line += [count_text(exp[k][0]), count_error_text(exp[k][1])]
        line += [f"{r['eff_step']:.4f}", f"{r['eff_cum']:.4f}"]
        body.append(line)
    return head, body


def cutflow_text(steps: Sequence[Mapping[str, Any]], title: str = "",
                 luminosity_fb: float | None = None, data: bool = False) -> str:
    """Aligned text table: step, raw count, Σw ± √Σw² (pb), with a luminosity the expected
    events N = L·Σw ± L·√Σw², step and cumulative efficiency (``data``: counted events,
    N ± √N)."""
    head, body = _cutflow_table(steps, luminosity_fb, data)
    widths = [max(len(x) for x in col) for col in zip(head, *body, strict=False)]
    lines = [title] if title else []
    for r in [head, *body]:
        lines.append("  ".join(x.ljust(w) if i == 0 else x.rjust(w)
                               for i, (x, w) in enumerate(zip(r, widths, strict=True))))
        if r is head:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines) + "\n"


def cutflow_markdown(steps: Sequence[Mapping[str, Any]], luminosity_fb: float | None = None,
                     title: str = "", data: bool = False) -> str:
    """The cutflow as a Markdown table (the same columns as :func:`cutflow_text`)."""
    head, body = _cutflow_table(steps, luminosity_fb, data)

    def cell(x: str) -> str:
        return x.replace("|", "\\|")

    out = [f"**{cell(title)}**", ""] if title else []
    out.append("| " + " | ".join(cell(h) for h in head) + " |")
    out.append("|" + "|".join(":---" if i == 0 else "---:" for i in range(len(head))) + "|")
    out += ["| " + " | ".join(cell(x) for x in r) + " |" for r in body]
    return "\n".join(out) + "\n"


_TEX_SPECIAL = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#",
                "_": r"\_", "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}",
                "^": r"\textasciicircum{}"}


def _tex(text: str) -> str:
    return "".join(_TEX_SPECIAL.get(ch, ch) for ch in text)


def _tex_number(text: str) -> str:
    """``1.5e+07`` → ``1.5\\times10^{7}`` (math mode)."""
    m = re.fullmatch(r"(-?[0-9.]+)e([+-])0*([0-9]+)", text)
    if m:
        sign = "-" if m.group(2) == "-" else ""
        return f"{m.group(1)}\\times10^{{{sign}{m.group(3)}}}"
    return text


def _tex_count(text: str) -> str:
    """``71,650,100`` → ``71{,}650{,}100`` (math mode: a comma without the space after it)."""
    return text.replace(",", "{,}")


def cutflow_latex(steps: Sequence[Mapping[str, Any]], luminosity_fb: float | None = None,
                  title: str = "", data: bool = False) -> str:
    """The cutflow as a LaTeX ``tabular`` (values ± errors in math mode), ready to \\input
    (``data``: counted events, N ± √N)."""
    rows = _cutflow_rows(steps)
    if data:
        out = [f"% {_tex(title)}" if title else "% evtkin cutflow", r"\begin{tabular}{lrrr}",
               r"\hline", r"Step & Events & Eff. step & Eff. cumul. \\", r"\hline"]
        out += [f"{_tex(r['step'])} & ${_tex_count(count_text(r['n_raw']))} \\pm "
                f"{_tex_count(count_error_text(math.sqrt(r['sum_w2'])))}$ & "
                f"{r['eff_step']:.4f} & {r['eff_cum']:.4f} \\\\" for r in rows]
        out += [r"\hline", r"\end{tabular}"]
        return "\n".join(out) + "\n"
    exp = _expected(rows, luminosity_fb)
    cols = "lr" + "r" + ("r" if exp is not None else "") + "rr"
    head = ["Step", "Events", r"$\sum w$ [pb]"]
    if exp is not None:
        head.append(f"Expected ({luminosity_fb:g}" + r"~fb$^{-1}$)")
    head += ["Eff. step", "Eff. cumul."]
    out = [f"% {_tex(title)}" if title else "% evtkin cutflow",
           f"\\begin{{tabular}}{{{cols}}}", r"\hline", " & ".join(head) + r" \\", r"\hline"]
    for k, r in enumerate(rows):
        sw = _tex_number(f"{r['sum_w']:.6g}")
        err = _tex_number(f"{math.sqrt(r['sum_w2']):.3g}")
        cells = [_tex(r["step"]), count_text(r["n_raw"]), f"${sw} \\pm {err}$"]
        if exp is not None:
            n = _tex_count(count_text(exp[k][0]))
            dn = _tex_count(count_error_text(exp[k][1]))
            cells.append(f"${n} \\pm {dn}$")
        cells += [f"{r['eff_step']:.4f}", f"{r['eff_cum']:.4f}"]
        out.append(" & ".join(cells) + r" \\")
    out += [r"\hline", r"\end{tabular}"]
    return "\n".join(out) + "\n"


def write_cutflow(
    folder: str | os.PathLike[str], sample: str, steps: Sequence[Mapping[str, Any]],
    title: str | None = None,
    luminosity_fb: float | None = None,
    data: bool = False,
) -> tuple[Path, Path]:
    """``cutflow/<sample>.txt``, ``.csv``, ``.md`` and ``.tex`` (a region's:
    ``<sample>@<region>``; with a luminosity: the expected events too, and the CSV gains the
    columns ``expected``, ``expected_err``; ``data``: counted events, N ± √N, no expected
    events)."""
    d = Path(folder) / "cutflow"
    rows = _cutflow_rows(steps)
    exp = None if data else _expected(rows, luminosity_fb)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["step", "n_raw", "sum_w", "sum_w2", "eff_step", "eff_cum"]
               + (["expected", "expected_err"] if exp is not None else []))
    for k, r in enumerate(rows):
        w.writerow([r["step"], r["n_raw"], _fmt(r["sum_w"]), _fmt(r["sum_w2"]),
                    _fmt(r["eff_step"]), _fmt(r["eff_cum"])]
                   + ([_fmt(exp[k][0]), _fmt(exp[k][1])] if exp is not None else []))
    title = title or f"sample {sample}"
    stem = safe_name(sample)
    t = atomic_write_text(d / f"{stem}.txt", cutflow_text(steps, title, luminosity_fb, data))
    c = atomic_write_text(d / f"{stem}.csv", buf.getvalue())
    atomic_write_text(d / f"{stem}.md", cutflow_markdown(steps, luminosity_fb, title, data))
    atomic_write_text(d / f"{stem}.tex", cutflow_latex(steps, luminosity_fb, title, data))
    return t, c


# --------------------------------------------------------------------------------------------------
# results folder
# --------------------------------------------------------------------------------------------------
def results_to_dict(results: Results) -> dict[str, Any]:

    meta = dict(results.meta)
    out: dict[str, Any] = {
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "evtkin_version": meta.pop("evtkin_version", __version__),
        "created_utc": meta.pop(
            "created_utc", datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")),
        **meta,
        "samples": {},
    }
    for name, s in results.samples.items():
        out["samples"][name] = {
            "label": s.label or name,
            "luminosity_fb": s.luminosity_fb,
            "xsec": s.xsec,
            "variations": list(s.variations),
            "histograms": {k: h.to_dict() for k, h in s.histograms.items()},
            "cutflow": _cutflow_rows(s.cutflow) if s.cutflow else [],
        }
        if s.region_cutflows:
            out["samples"][name]["region_cutflows"] = {
                r: _cutflow_rows(rows) for r, rows in s.region_cutflows.items()}
        if s.data:
            out["samples"][name]["data"] = True
    return out


def write_results(
    folder: str | os.PathLike[str], results: Results, *, csv_tables: bool = True
) -> Path:
    """``results.json`` plus ``csv/<sample>/<hist>.csv`` and ``cutflow/<sample>.{txt,csv}``."""
    root = Path(folder)
    root.mkdir(parents=True, exist_ok=True)
    for sname, s in results.samples.items():
        if csv_tables:
            for hname, h in s.histograms.items():
                target = root / "csv" / safe_name(sname) / f"{safe_name(hname)}.csv"
                write_hist_csv(target, h, sname)
        if s.cutflow:
            write_cutflow(root, sname, s.cutflow, luminosity_fb=s.luminosity_fb, data=s.data)
        for region, rows in s.region_cutflows.items():
            write_cutflow(root, f"{sname}@{region}", rows,
                          title=f"sample {sname}, region {region}",
                          luminosity_fb=s.luminosity_fb, data=s.data)
    return write_json(root / RESULTS_JSON, results_to_dict(results))


def _need(d: Mapping[str, Any], key: str, where: str) -> Any:
    if key not in d:
        raise ResultsError(f"{where}: missing key {key!r}")
    return d[key]


def _read_hist(name: str, d: Mapping[str, Any], where: str) -> HistResult:
    axes = []
    for i, a in enumerate(_need(d, "axes", where)):
        edges = _arr(_need(a, "edges", f"{where}.axes[{i}]"), f"{where}.axes[{i}].edges")
        axes.append(AxisInfo(str(a.get("name", "")), str(a.get("label", "")),
                             str(a.get("unit", "")), str(a.get("kind", "variable")), edges))
    shape = tuple(a.nbins + 2 for a in axes)
    values = _arr(_need(d, "values", where), f"{where}.values")
    variances = _arr(_need(d, "variances", where), f"{where}.variances")
    for what, arr in (("values", values), ("variances", variances)):
        if arr.shape != shape:
            raise ResultsError(
                f"{where}.{what}: expected shape {shape} (flow bins included), got {arr.shape}")
    bands = _load_bands(d, "bands", where)
    shape_bands = _load_bands(d, "shape_bands", where)
    vv = d.get("variation_values")
    return HistResult(
        name=name, title=str(d.get("title", name)), axes=axes,
        normalisation=str(_need(d, "normalisation", where)), y_label=str(d.get("y_label", "")),
        y_unit=str(d.get("y_unit", "")), entries=int(d.get("entries", 0)), values=values,
        variances=variances, bands=bands,
        norm_includes_flow=bool(d.get("norm_includes_flow", True)),
        variation_values=None if vv is None else {
            k: _arr(v, f"{where}.variation_values.{k}") for k, v in vv.items()},
        shape_bands=shape_bands,
        region=None if d.get("region") is None else str(d["region"]),
        counts=None if d.get("counts") is None else np.asarray(d["counts"], dtype=np.int64),
    )


def _load_bands(d: Mapping[str, Any], key: str, where: str) -> dict[str, Band]:
    bands = {}
    for bname, b in (d.get(key) or {}).items():
        bw = f"{where}.{key}.{bname}"
        bands[bname] = Band(str(b.get("method", "")), _arr(_need(b, "down", bw), bw + ".down"),
                            _arr(_need(b, "up", bw), bw + ".up"), list(b.get("members", [])))
    return bands


def read_results(folder: str | os.PathLike[str], *, allow_incomplete: bool = False) -> Results:
    """Read ``<folder>/results.json`` back into plain objects (arrays as numpy, flow included).

    A folder marked ``INCOMPLETE`` (a run is writing it, or was interrupted) is refused with
    a :class:`ResultsError` unless ``allow_incomplete``."""
    p = Path(folder)
    path = p / RESULTS_JSON if p.is_dir() else p
    if not allow_incomplete and (path.parent / "INCOMPLETE").exists():
        raise ResultsError(
            f"{path.parent}: the folder is marked INCOMPLETE (a run is writing it, or a run "
            "writing it was interrupted); run again, or allow incomplete results explicitly "
            "(--allow-incomplete, allow_incomplete=True)"
        )
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ResultsError(f"{path}: no results file (expected {RESULTS_JSON})") from None
    except json.JSONDecodeError as exc:
        raise ResultsError(f"{path}:{exc.lineno}: not valid JSON ({exc.msg})") from None
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise ResultsError(f"{path}: not an evtkin results file (format != {FORMAT!r})")
    if int(data.get("format_version", 0)) > FORMAT_VERSION:
        raise ResultsError(f"{path}: format version {data.get('format_version')} is newer than "
                           f"this evtkin understands ({FORMAT_VERSION})")
    meta = {k: v for k, v in data.items() if k != "samples"}
    out = Results(meta=meta)
    for sname, s in _need(data, "samples", str(path)).items():
        where = f"{path}: samples.{sname}"
        hists = {h: _read_hist(h, hd, f"{where}.histograms.{h}")
                 for h, hd in (s.get("histograms") or {}).items()}
        out.samples[sname] = SampleResult(
            name=sname, label=str(s.get("label", sname)), luminosity_fb=s.get("luminosity_fb"),
            xsec=dict(s.get("xsec") or {}), variations=list(s.get("variations") or []),
            histograms=hists, cutflow=list(s.get("cutflow") or []),
            region_cutflows={str(r): list(rows)
                             for r, rows in (s.get("region_cutflows") or {}).items()},
            data=bool(s.get("data", False)),
        )
    return out


#: the same as :func:`read_results` (the plain record); :func:`evtkin.load_results` gives the
#: ``hist.Hist`` mappings that :func:`evtkin.run` returns
load_results = read_results
