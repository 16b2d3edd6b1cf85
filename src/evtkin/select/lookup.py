"""Binned lookup tables (scale factors, efficiencies) read from a small TOML file.

The file format (``format = "evtkin-table"``, version 1)::

    format = "evtkin-table"
    description = "muon identification scale factors (toy)"   # optional
    axes = [
      { name = "pt",      edges = [20.0, 30.0, 50.0, 100.0] },
      { name = "abs_eta", edges = [0.0, 1.2, 2.4] },
    ]
    values = [[0.97, 0.95],        # one row per bin of the first axis,
              [0.98, 0.96],        # nested like the axes (1 to 3 axes)
              [0.99, 0.97]]
    errors = [[0.01, 0.02], [0.01, 0.02], [0.005, 0.01]]   # optional, same shape
    outside = "nearest"            # or a number (e.g. 1.0): the value outside the edges

Bins include their lower edge and exclude their upper edge; the last edge is exclusive as
well. A value outside an axis' edges takes the nearest bin (``outside = "nearest"``, the
default: a scale factor measured up to 100 GeV also applies above) or the number given; a
missing or NaN input gives a missing value. In expressions a table is called as
``lookup(NAME, x, ...)`` with one argument per axis, on numbers per event or per object.
"""

from __future__ import annotations

import itertools
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import awkward as ak
import numpy as np
import tomllib

from evtkin.errors import ConfigError

__all__ = ["BinnedTable", "read_table"]

_FORMAT = "evtkin-table"
_KEYS = ("format", "description", "axes", "values", "errors", "outside")


@dataclass(frozen=True)
class BinnedTable:
    """A table of values on a grid of 1 to 3 binned axes."""

    name: str
    source: str
    axis_names: tuple[str, ...]
    edges: tuple[tuple[float, ...], ...]
    values: np.ndarray  # shape: one entry per bin of each axis
    errors: np.ndarray | None = None
    outside: float | None = None  # None: the nearest bin

    @property
    def ndim(self) -> int:
        return len(self.edges)

    def bin_index(self, axis: int, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Bin numbers of ``x`` along ``axis`` (clipped into range) and whether ``x`` lies
        inside the edges."""
        e = np.asarray(self.edges[axis])
        i = np.searchsorted(e, x, side="right") - 1
        inside = (x >= e[0]) & (x < e[-1])
        return np.clip(i, 0, len(e) - 2), inside

    def lookup_flat(self, *xs: np.ndarray, errors: bool = False) -> np.ndarray:
        """The values (or errors) at flat float arrays ``xs`` (NaN in, NaN out)."""
        if len(xs) != self.ndim:
            raise ValueError(f"table {self.name!r} has {self.ndim} axes, got {len(xs)} values")
        table = self.errors if errors else self.values
        if table is None:
            raise ValueError(f"table {self.name!r} has no errors")
        idx = []
        inside = np.ones(len(xs[0]), dtype=bool)
        nan = np.zeros(len(xs[0]), dtype=bool)
        for a, x in enumerate(xs):
            i, ok = self.bin_index(a, x)
            idx.append(i)
            inside &= ok
            nan |= np.isnan(x)
        out = np.asarray(table[tuple(idx)], dtype=np.float64)
        if self.outside is not None:
            out = np.where(inside, out, self.outside)
        return np.where(nan, np.nan, out)

    def __call__(self, *args: Any) -> Any:
        """The table at per-event or per-object awkward/numpy values (broadcast together)."""
        arrays = [a if isinstance(a, ak.Array) else ak.Array(np.atleast_1d(np.asarray(a)))
                  for a in args]
        if len(arrays) > 1:
            arrays = list(ak.broadcast_arrays(*arrays))
        first = arrays[0]
        if first.ndim == 2:
            counts = ak.num(first, axis=1)
            flat = [ak.flatten(a, axis=1) for a in arrays]
        else:
            counts = None
            flat = arrays
        missing = np.zeros(len(flat[0]), dtype=bool)
        cols = []
        for f in flat:
            missing |= np.asarray(ak.to_numpy(ak.is_none(f, axis=0)))
            cols.append(np.asarray(ak.to_numpy(ak.fill_none(f, np.nan)), dtype=np.float64))
        out = ak.Array(self.lookup_flat(*cols))
        if missing.any():
            out = ak.mask(out, ~missing)
        return out if counts is None else ak.unflatten(out, counts)


def _fail(path: str, message: str) -> ConfigError:
    return ConfigError(f"{path}: {message}")


def read_table(path: str | os.PathLike[str], name: str = "") -> BinnedTable:
    """Read and check a table file (see the module docstring); errors name the file and key."""
    p = Path(path)
    where = str(p)
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except OSError as exc:
        raise _fail(where, f"cannot read the table: {exc.strerror or exc}") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise _fail(where, f"not a valid TOML table file: {exc}") from None
    for key in data:
        if key not in _KEYS:
            raise _fail(where, f"unknown key {key!r} (known: {', '.join(_KEYS)})")
    if data.get("format") != _FORMAT:
        raise _fail(where, f"format: expected \"{_FORMAT}\", got {data.get('format')!r}")
    axes = data.get("axes")
    if not isinstance(axes, list) or not 1 <= len(axes) <= 3:
        raise _fail(where, "axes: expected a list of 1 to 3 tables {name, edges}")
    names: list[str] = []
    edges: list[tuple[float, ...]] = []
    for k, ax in enumerate(axes):
        if not isinstance(ax, dict) or set(ax) - {"name", "edges"} or "edges" not in ax:
            raise _fail(where, f"axes[{k}]: expected {{ name = \"...\", edges = [...] }}")
        e = ax["edges"]
        if (not isinstance(e, list) or len(e) < 2
                or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in e)
                or not all(math.isfinite(v) for v in e)):
            raise _fail(where, f"axes[{k}].edges: expected at least two finite numbers")
        if any(b <= a for a, b in itertools.pairwise(e)):
            raise _fail(where, f"axes[{k}].edges: the edges must increase strictly")
        names.append(str(ax.get("name", f"axis{k}")))
        edges.append(tuple(float(v) for v in e))
    shape = tuple(len(e) - 1 for e in edges)

    def grid(key: str) -> np.ndarray:
        try:
            arr = np.asarray(data[key], dtype=np.float64)
        except (ValueError, TypeError):
            raise _fail(where, f"{key}: expected nested lists of numbers, one per bin "
                        f"(shape {' x '.join(map(str, shape))})") from None
        if arr.shape != shape:
            raise _fail(where, f"{key}: shape {' x '.join(map(str, arr.shape)) or 'scalar'} "
                        f"does not match the axes' bins {' x '.join(map(str, shape))}")
        return arr

    if "values" not in data:
        raise _fail(where, "values: missing")
    values = grid("values")
    errors = grid("errors") if "errors" in data else None
    outside_raw = data.get("outside", "nearest")
    if outside_raw == "nearest":
        outside: float | None = None
    elif isinstance(outside_raw, (int, float)) and not isinstance(outside_raw, bool):
        outside = float(outside_raw)
    else:
        raise _fail(where, f"outside: expected \"nearest\" or a number, got {outside_raw!r}")
    return BinnedTable(name or p.stem, where, tuple(names), tuple(edges), values, errors,
                       outside)
