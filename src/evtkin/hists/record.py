"""The one record of a normalised histogram, from the normalisation to the output files.

:func:`evtkin.hists.normalise.normalise` makes a :class:`HistRecord` from an accumulator; the run
attaches its uncertainty bands to it; the output layer writes it (``results.json``, CSV, ROOT,
plots) and reads it back (:func:`evtkin.output.tables.read_results`); the library view turns it
into a ``hist.Hist`` (:mod:`evtkin.hists.histview`). Its arrays include the flow bins and hold the
normalisation's stored quantity (dσ/dX per bin for ``xsec_per_bin`` with the flow bins as plain
σ, σ·L per bin for ``events``, fractions for ``unit_area``, Σw for ``raw``):

* ``values``/``variances``: the nominal weight's contents and MC variance;
* ``rows``/``row_variances`` (in memory, not written): the same for the nominal weight and every
  variation weight, shape ``(1 + V, *shape)``, nominal first, in the order of ``variations``;
  the bands are formed from them; ``None`` for a record read back from a file;
* ``bands``/``shape_bands``: uncertainty bands (:class:`evtkin.hists.bands.Band`) of the
  contents and of the unit-area shape;
* ``variation_values``: every variation's values when they are to be written (else ``None``);
* ``counts``: the raw number of fills per stored bin (unweighted); ``region``: the region a
  ``<histogram>@<region>`` record was filled in.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from evtkin.hists.bands import Band
from evtkin.hists.fill import AxisSpec, HistSpec

__all__ = ["AxisInfo", "HistRecord", "HistResult"]


def _jnum(x: float) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def _jlist(a: Any) -> Any:
    arr = np.asarray(a, dtype=np.float64)
    if arr.ndim == 0:
        return _jnum(float(arr))
    return [_jlist(v) for v in arr] if arr.ndim > 1 else [_jnum(v) for v in arr]


@dataclass
class AxisInfo:
    """One axis of a record: the stored name (``x``/``y``), label and unit, kind and edges."""

    name: str
    label: str
    unit: str
    kind: str
    edges: np.ndarray

    @classmethod
    def from_spec(cls, a: AxisSpec) -> AxisInfo:
        return cls(a.name, a.label, a.unit, a.kind, a.edges_array.copy())

    @property
    def nbins(self) -> int:
        return int(self.edges.size - 1)

    @property
    def title(self) -> str:
        base = self.label or self.name
        return f"{base} [{self.unit}]" if self.unit else base

    def to_spec(self) -> AxisSpec:
        return AxisSpec(self.name, tuple(float(e) for e in self.edges),
                        "regular" if self.kind == "regular" else "variable", self.label,
                        self.unit)

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "label": self.label, "unit": self.unit, "kind": self.kind,
                "edges": _jlist(self.edges)}


@dataclass
class HistRecord:
    """One normalised histogram of one sample; arrays include the flow bins (module docstring)."""

    name: str
    title: str
    axes: list[AxisInfo]
    normalisation: str
    y_label: str
    y_unit: str
    entries: int
    values: np.ndarray
    variances: np.ndarray
    bands: dict[str, Band] = field(default_factory=dict)
    norm_includes_flow: bool = True
    variation_values: dict[str, np.ndarray] | None = None
    #: 1-D: the bands as fractions of unit area per stored bin, each variation normalised on
    #: its own (see evtkin.hists.normalise.shape_fractions); used by shape-only comparisons
    shape_bands: dict[str, Band] = field(default_factory=dict)
    #: the variation weights' names, in the order of ``rows[1:]``
    variations: tuple[str, ...] = ()
    #: in memory: the contents of the nominal weight and every variation, ``(1 + V, *shape)``
    rows: np.ndarray | None = field(default=None, repr=False)
    row_variances: np.ndarray | None = field(default=None, repr=False)
    #: the region the histogram was filled in (its name is then ``<histogram>@<region>``)
    region: str | None = None
    #: the raw number of entries per stored bin (one per fill, unweighted, not normalised)
    counts: np.ndarray | None = None

    @classmethod
    def from_rows(cls, spec: HistSpec, variations: tuple[str, ...], rows: np.ndarray,
                  row_variances: np.ndarray, normalisation: str, y_unit: str, y_label: str,
                  entries: int = 0, norm_includes_flow: bool = True) -> HistRecord:
        """A record of every weight's contents (nominal first)."""
        return cls(
            name=spec.name, title=spec.title or spec.name,
            axes=[AxisInfo.from_spec(a) for a in spec.axes], normalisation=normalisation,
            y_label=y_label, y_unit=y_unit, entries=int(entries), values=rows[0],
            variances=row_variances[0], norm_includes_flow=norm_includes_flow,
            variations=tuple(variations), rows=rows, row_variances=row_variances)

    @property
    def spec(self) -> HistSpec:
        """The histogram's booking (name, title, axes)."""
        return HistSpec(self.name, tuple(a.to_spec() for a in self.axes), self.title)

    def all_rows(self) -> np.ndarray:
        """``rows``, or the nominal alone (one row) for a record read back from a file."""
        return self.rows if self.rows is not None else self.values[None]

    @property
    def nominal(self) -> np.ndarray:
        return self.values

    @property
    def nominal_variance(self) -> np.ndarray:
        return self.variances

    @property
    def ndim(self) -> int:
        return len(self.axes)

    def _inner(self, a: np.ndarray) -> np.ndarray:
        return a[(slice(1, -1),) * self.ndim]

    def inner_values(self) -> np.ndarray:
        return self._inner(self.values)

    def inner_variances(self) -> np.ndarray:
        return self._inner(self.variances)

    def errors(self) -> np.ndarray:
        """sqrt(variance), flow included."""
        out: np.ndarray = np.sqrt(np.clip(self.variances, 0.0, None))
        return out

    @property
    def y_title(self) -> str:
        return f"{self.y_label} [{self.y_unit}]" if self.y_unit else self.y_label

    def to_dict(self) -> dict[str, Any]:
        """The histogram's entry in results.json (docs/results-format.md)."""
        return {
            "title": self.title,
            "ndim": self.ndim,
            "axes": [a.to_dict() for a in self.axes],
            "normalisation": self.normalisation,
            "norm_includes_flow": self.norm_includes_flow,
            "y_label": self.y_label,
            "y_unit": self.y_unit,
            "entries": int(self.entries),
            "values": _jlist(self.values),
            "variances": _jlist(self.variances),
            "bands": {k: {"method": b.method, "members": list(b.members),
                          "down": _jlist(b.down), "up": _jlist(b.up)}
                      for k, b in self.bands.items()},
            "variation_values": None if self.variation_values is None else {
                k: _jlist(v) for k, v in self.variation_values.items()},
            "shape_bands": {k: {"method": b.method, "members": list(b.members),
                                "down": _jlist(b.down), "up": _jlist(b.up)}
                            for k, b in self.shape_bands.items()},
            **({"region": self.region} if self.region is not None else {}),
            **({"counts": np.asarray(self.counts, dtype=np.int64).tolist()}
               if self.counts is not None else {}),
        }


#: the name the output layer has used for the record
HistResult = HistRecord
