"""Event tables (``[skims.NAME]``): declared quantities of the selected events, streamed.

While the units run, each chunk's selected events go to a part file of their own
(``skims/.parts/<skim>/<sample>/u<unit>-c<chunk>.parquet``: the columns, the file index, the
process id and the weights as written times the event-weight expression). After the merge,
when the cross-section factor of every (file, process) is known, :func:`assemble_skims`
reads the parts in order (units in input order, chunks in event order), multiplies the
weights by their factors and writes, one row group (or basket) per part:

* ``skims/<skim>/<sample>.parquet`` (awkward → Parquet), and
* ``skims/<skim>/<sample>.root``, a TTree named after the skim (uproot),

then deletes the parts. Memory stays bounded by one part. The columns: every declared
quantity (a number per event, or a list of numbers per event for a per-object quantity;
missing values are NaN), ``weight`` (the event's weight in pb: normalised so that a sample's
weights over all events read sum to its σ, times the event-weight expression), one
``weight_<variation>`` per variation weight (with ``variation_weights = true``), ``file_index``
and ``process_id``. A ROOT list column ``X`` gets its counter branch ``n_X``.
"""

from __future__ import annotations

import os
import re
import shutil
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError
from evtkin.files import atomic_path, safe_name

__all__ = ["PARTS", "assemble_skims", "skim_columns", "write_part"]

PARTS = ".parts"
_BAD = re.compile(r"[^A-Za-z0-9_]")


def _variation_column(name: str) -> str:
    return "weight_" + _BAD.sub("_", name)


def _numbers(value: Any, n: int, where: str) -> ak.Array:
    """A column: one float per event, or a list of floats per event; missing → NaN."""
    if not isinstance(value, ak.Array):
        return ak.Array(np.broadcast_to(np.asarray(value, dtype=np.float64), (n,)).copy())
    if ak.fields(value):
        raise ConfigError(f"{where}: gives objects; a column needs numbers (e.g. .pt, .mass)")
    if value.ndim > 2:
        raise ConfigError(f"{where}: has more than one value per object")
    filled = ak.fill_none(value, np.nan, axis=-1)
    if value.ndim == 2:
        filled = ak.fill_none(filled, [], axis=0)
    return ak.values_astype(filled, np.float64)


def skim_columns(evaluate: Callable[[Any, str], Any], skim: Any, n: int) -> dict[str, ak.Array]:
    """The declared columns of one chunk (all events): ``evaluate(expression, where)``."""
    out = {}
    for name, expr in skim.columns.items():
        where = expr.where or f"skims.{skim.name}.columns.{name}"
        out[name] = _numbers(evaluate(expr, f"skims.{skim.name}.columns.{name}"), n, where)
    return out


def write_part(folder: str | os.PathLike[str], skim: str, sample: str, unit: int, chunk: int,
               columns: Mapping[str, ak.Array], mask: np.ndarray, file_index: int,
               process_id: np.ndarray, weight: np.ndarray, variations: np.ndarray,
               variation_names: Sequence[str]) -> Path | None:
    """The selected events (``mask``) of one chunk as a part file; nothing for none."""
    if not mask.any():
        return None
    d = Path(folder) / PARTS / safe_name(skim) / safe_name(sample)
    d.mkdir(parents=True, exist_ok=True)
    data: dict[str, Any] = {name: col[mask] for name, col in columns.items()}
    data["weight"] = np.asarray(weight[mask], dtype=np.float64)
    for k, v in enumerate(variation_names):
        data[_variation_column(v)] = np.asarray(variations[mask, k], dtype=np.float64)
    data["file_index"] = np.full(int(mask.sum()), file_index, dtype=np.int32)
    data["process_id"] = np.asarray(process_id[mask], dtype=np.int32)
    path = d / f"u{unit:06d}-c{chunk:06d}.parquet"
    with atomic_path(path) as tmp:  # a worker stopped midway leaves no half part file
        ak.to_parquet(ak.zip(data, depth_limit=1), tmp)
    return path


def _scaled(part: ak.Array, factor: Callable[[int, int], float],
            weight_columns: Sequence[str]) -> ak.Array:
    fi = np.asarray(ak.to_numpy(part["file_index"]), dtype=np.int64)
    pid = np.asarray(ak.to_numpy(part["process_id"]), dtype=np.int64)
    f = np.empty(len(fi))
    for a, b in set(zip(fi.tolist(), pid.tolist(), strict=True)):
        f[(fi == a) & (pid == b)] = factor(a, b)
    out = {name: part[name] for name in ak.fields(part)}
    for name in weight_columns:
        out[name] = np.asarray(ak.to_numpy(part[name]), dtype=np.float64) * f
    return ak.zip(out, depth_limit=1)


def _root_types(part: ak.Array, where: str) -> dict[str, Any]:
    types: dict[str, Any] = {}
    names = set(ak.fields(part))
    for name in ak.fields(part):
        col = part[name]
        if col.ndim == 2:
            if f"n_{name}" in names:
                raise ConfigError(f"{where}: the ROOT tree needs the counter branch n_{name} "
                                  f"for the list column {name!r}, but a column has that name")
            types[name] = "var * float64"
        else:
            types[name] = np.asarray(ak.to_numpy(col)).dtype
    return types


def assemble_skims(plan: Any, folder: str | os.PathLike[str],
                   factors: Mapping[str, Callable[[int, int], float]]) -> list[Path]:
    """Turn the part files of every skim and sample into the final tables (see the module
    docstring); ``factors[sample](file_index, process_id)`` is the σ factor."""
    root = Path(folder) / "skims"
    written: list[Path] = []
    parts_root = root / PARTS
    for sname, skim in plan.config.skims.items():
        for sample in plan.config.samples:
            if skim.samples is not None and sample not in skim.samples:
                continue
            d = parts_root / safe_name(sname) / safe_name(sample)
            # hidden names are temporary files of part writes that never finished
            parts = sorted(p for p in d.glob("*.parquet") if not p.name.startswith(".")
                           ) if d.is_dir() else []
            out_dir = root / safe_name(sname)
            out_dir.mkdir(parents=True, exist_ok=True)
            base = out_dir / safe_name(sample)
            factor = factors.get(sample, lambda i, p: 0.0)
            written += _assemble_one(skim, parts, base, factor,
                                     f"skims.{sname} (sample {sample})")
    shutil.rmtree(parts_root, ignore_errors=True)
    return written


def _assemble_one(skim: Any, parts: Sequence[Path], base: Path,
                  factor: Callable[[int, int], float], where: str) -> list[Path]:
    pq = base.with_suffix(".parquet")
    rt = base.with_suffix(".root")
    first = ak.from_parquet(parts[0]) if parts else None
    weight_columns = ([f for f in ak.fields(first) if f == "weight" or f.startswith("weight_")]
                      if first is not None else ["weight"])
    out: list[Path] = []

    def scaled_parts() -> Any:
        for p in parts:
            yield _scaled(ak.from_parquet(p), factor, weight_columns)

    if "parquet" in skim.formats:
        with atomic_path(pq) as tmp:
            if parts:
                ak.to_parquet_row_groups(scaled_parts(), tmp)
            else:  # no selected event: an empty table with the declared columns
                empty = {c: np.zeros(0) for c in (*skim.columns, "weight")}
                ak.to_parquet(ak.zip(empty, depth_limit=1), tmp)
        out.append(pq)
    if "root" in skim.formats:
        import uproot

        with atomic_path(rt) as tmp, uproot.recreate(tmp) as f:
            if parts:
                assert first is not None
                types = _root_types(first, where)
                tree = f.mktree(skim.name, types, counter_name=lambda n: f"n_{n}")
                for part in scaled_parts():
                    tree.extend({name: part[name] for name in types})
            else:
                f.mktree(skim.name, {c: "float64" for c in (*skim.columns, "weight")})
        out.append(rt)
    return out
