"""Tables of measured points drawn over the predictions (evtkin's own format, CSV or JSON).

CSV (``*.csv``): ``# key: value`` lines, then a header row ``lo,hi,value,stat,syst`` and one row
per bin, in rising order and without gaps::

    # evtkin measured table
    # label: toy measured points (not real data)
    # toy: true
    # x_unit: GeV
    # y_unit: events
    lo,hi,value,stat,syst
    60,62,812,28.5,16.2

JSON (``*.json``)::

    {"format": "evtkin-measured", "label": "...", "toy": true, "x_unit": "GeV",
     "y_unit": "events", "columns": ["lo", "hi", "value", "stat", "syst"],
     "bins": [[60, 62, 812, 28.5, 16.2], ...]}

``value`` is in ``y_unit`` (the quantity of the histogram it is drawn on: ``events``, ``pb``,
``pb/GeV`` or empty for fractions), ``stat`` and ``syst`` are symmetric one-standard-deviation
errors (non-negative). Every error names the file and the 1-based line.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from evtkin.errors import ResultsError

__all__ = ["COLUMNS", "MeasuredTable", "read_measured", "write_measured_csv"]

COLUMNS = ("lo", "hi", "value", "stat", "syst")
_KEYS = ("label", "toy", "x_unit", "y_unit", "histogram", "note")


@dataclass
class MeasuredTable:
    """Measured points: in-range bins only (no flow)."""

    edges: np.ndarray
    values: np.ndarray
    stat: np.ndarray
    syst: np.ndarray
    label: str = "data"
    x_unit: str = ""
    y_unit: str = ""
    toy: bool = False
    source: str = ""
    meta: dict[str, str] = field(default_factory=dict)

    @property
    def total_error(self) -> np.ndarray:
        return np.sqrt(self.stat**2 + self.syst**2)  # type: ignore[no-any-return]

    def to_dict(self) -> dict[str, Any]:
        return {"label": self.label, "x_unit": self.x_unit, "y_unit": self.y_unit,
                "toy": self.toy, "source": self.source, "edges": self.edges.tolist(),
                "values": self.values.tolist(), "stat": self.stat.tolist(),
                "syst": self.syst.tolist()}

    @classmethod
    def from_dict(cls, d: dict[str, Any], where: str = "measured") -> MeasuredTable:
        try:
            return cls(np.asarray(d["edges"], float), np.asarray(d["values"], float),
                       np.asarray(d["stat"], float), np.asarray(d["syst"], float),
                       str(d.get("label", "data")), str(d.get("x_unit", "")),
                       str(d.get("y_unit", "")), bool(d.get("toy", False)),
                       str(d.get("source", "")))
        except (KeyError, TypeError, ValueError) as exc:
            raise ResultsError(f"{where}: not a measured table ({exc})") from None


def _number(text: str, where: str, column: str) -> float:
    try:
        x = float(text)
    except (TypeError, ValueError):
        raise ResultsError(f"{where}: column {column!r}: expected a number, got "
                           f"{text!r}") from None
    if not math.isfinite(x):
        raise ResultsError(f"{where}: column {column!r}: expected a finite number, got {text!r}")
    return x


def _rows_to_table(rows: list[tuple[int, list[Any]]], meta: dict[str, str], path: Path,
                   convert: bool) -> MeasuredTable:
    if not rows:
        raise ResultsError(f"{path}: no bins (expected rows {','.join(COLUMNS)})")
    data: list[list[float]] = []
    for line, row in rows:
        where = f"{path}:{line}"
        if len(row) != len(COLUMNS):
            raise ResultsError(f"{where}: expected {len(COLUMNS)} columns "
                               f"({', '.join(COLUMNS)}), got {len(row)}")
        vals = []
        for col, x in zip(COLUMNS, row, strict=True):
            if convert:
                vals.append(_number(str(x).strip(), where, col))
            elif isinstance(x, bool) or not isinstance(x, (int, float)) or not math.isfinite(x):
                raise ResultsError(f"{where}: column {col!r}: expected a number, got {x!r}")
            else:
                vals.append(float(x))
        lo, hi, _v, st, sy = vals
        if hi <= lo:
            raise ResultsError(f"{where}: expected hi > lo, got lo = {lo:g}, hi = {hi:g}")
        if st < 0 or sy < 0:
            raise ResultsError(f"{where}: errors must be >= 0, got stat = {st:g}, syst = {sy:g}")
        if data and not math.isclose(data[-1][1], lo, rel_tol=1e-9, abs_tol=1e-12):
            raise ResultsError(f"{where}: bins must follow each other without gaps: lo = {lo:g} "
                               f"after hi = {data[-1][1]:g}")
        data.append(vals)
    arr = np.array(data)
    toy = str(meta.get("toy", "false")).strip().lower() in ("1", "true", "yes")
    return MeasuredTable(
        edges=np.append(arr[:, 0], arr[-1, 1]), values=arr[:, 2], stat=arr[:, 3], syst=arr[:, 4],
        label=str(meta.get("label", "") or "data"), x_unit=str(meta.get("x_unit", "")),
        y_unit=str(meta.get("y_unit", "")), toy=toy, source=str(path),
        meta={k: str(v) for k, v in meta.items()})


_META = re.compile(r"^#\s*([A-Za-z_]+)\s*:\s*(.*?)\s*$")


def _read_csv(path: Path, text: str) -> MeasuredTable:
    meta: dict[str, str] = {}
    header_seen = False
    rows: list[tuple[int, list[Any]]] = []
    for lineno, line in enumerate(text.splitlines(), start=1):
        s = line.strip()
        if not s:
            continue
        if s.startswith("#"):
            m = _META.match(s)
            if m and m.group(1) in _KEYS:
                meta[m.group(1)] = m.group(2)
            continue
        cells = next(csv.reader(io.StringIO(s)))
        if not header_seen:
            if [c.strip() for c in cells] != list(COLUMNS):
                raise ResultsError(f"{path}:{lineno}: expected the header row "
                                   f"{','.join(COLUMNS)}, got {s!r}")
            header_seen = True
            continue
        rows.append((lineno, cells))
    if not header_seen:
        raise ResultsError(f"{path}: no header row {','.join(COLUMNS)}")
    return _rows_to_table(rows, meta, path, convert=True)


def _read_json(path: Path, text: str) -> MeasuredTable:
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise ResultsError(f"{path}:{exc.lineno}: not valid JSON ({exc.msg})") from None
    if not isinstance(doc, dict) or doc.get("format") != "evtkin-measured":
        raise ResultsError(f"{path}:1: expected an object with \"format\": \"evtkin-measured\"")
    cols = doc.get("columns", list(COLUMNS))
    if list(cols) != list(COLUMNS):
        raise ResultsError(f"{path}: \"columns\" must be {list(COLUMNS)}, got {cols}")
    bins = doc.get("bins")
    if not isinstance(bins, list):
        raise ResultsError(f"{path}:1: expected \"bins\": a list of [lo, hi, value, stat, syst]")
    # the 1-based line of each row: decode the rows one by one from the "bins" array
    lines = _row_lines(text, len(bins))
    rows = []
    for k, row in enumerate(bins):
        if not isinstance(row, list):
            raise ResultsError(f"{path}:{lines[k]}: expected a row [lo, hi, value, stat, syst], "
                               f"got {row!r}")
        rows.append((lines[k], row))
    meta = {k: doc[k] for k in _KEYS if k in doc}
    return _rows_to_table(rows, meta, path, convert=False)


def _row_lines(text: str, n: int) -> list[int]:
    m = re.search(r'"bins"\s*:\s*\[', text)
    out = []
    pos = m.end() if m else 0
    dec = json.JSONDecoder()
    for _ in range(n):
        while pos < len(text) and text[pos] in " \t\r\n,":
            pos += 1
        out.append(text.count("\n", 0, pos) + 1)
        try:
            _, pos = dec.raw_decode(text, pos)
        except json.JSONDecodeError:
            break
    return out + [out[-1] if out else 1] * (n - len(out))


def read_measured(path: str | os.PathLike[str]) -> MeasuredTable:
    """Read a measured table (``.csv`` or ``.json``); see the module docstring for the format."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise ResultsError(f"{p}: cannot read the measured table ({exc.strerror})") from None
    except UnicodeDecodeError:
        raise ResultsError(f"{p}: not UTF-8 text") from None
    if p.suffix.lower() == ".json":
        return _read_json(p, text)
    return _read_csv(p, text)


def write_measured_csv(path: str | os.PathLike[str], t: MeasuredTable, header: str = "") -> str:
    """The CSV text of ``t`` (and write it to ``path``); used to make toy tables."""
    from evtkin.files import atomic_write_text

    buf = io.StringIO()
    buf.write(f"# {header or 'evtkin measured table'}\n")
    buf.write(f"# label: {t.label}\n# toy: {'true' if t.toy else 'false'}\n")
    buf.write(f"# x_unit: {t.x_unit}\n# y_unit: {t.y_unit}\n")
    buf.write(",".join(COLUMNS) + "\n")
    for i in range(t.values.size):
        buf.write(",".join(f"{x:.6g}" for x in (t.edges[i], t.edges[i + 1], t.values[i],
                                                 t.stat[i], t.syst[i])) + "\n")
    atomic_write_text(path, buf.getvalue())
    return buf.getvalue()
