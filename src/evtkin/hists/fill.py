"""Histogram booking and filling with a variation axis.

A :class:`HistSpec` describes a 1-D or 2-D histogram (regular or variable binning). A
:class:`HistAccumulator` holds, for the nominal weight and ``V`` variation weights at once, the sum
of weights Σw and the sum of squared weights Σw² in every bin **including the under- and overflow
bins**. The public arrays :attr:`HistAccumulator.sumw` / :attr:`HistAccumulator.sumw2` have shape
``(1 + V, n1 + 2[, n2 + 2])``; index 0 of the first axis is the nominal weight.

Bin convention (identical to boost-histogram / ``hist``): lower edge inclusive, upper edge
exclusive; values below the first edge go to the underflow bin (flow index 0), values
``>= last edge``, ``+inf`` and NaN go to the overflow bin (flow index ``n + 1``).

Filling is one pass over the entries and vectorised over variations: the flat bin index of every
entry is computed once, then a compiled kernel adds the whole weight row (nominal + variations) of
the entry to a bin-major buffer. :func:`fill_many` fills several histograms from the same weight
table in cache-sized blocks of events so that the weight table is read from memory once.

Correlated event groups (LHEF 2.0 ``<eventgroup>``): give ``group`` ids; the weights of the entries
of one group that land in the same bin are summed before squaring for Σw². Entries with a negative
group id are independent. A group must be complete within one fill call.
"""

from __future__ import annotations

import functools
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

try:  # numba is a declared dependency, but keep a numpy path for environments without it
    import numba  # noqa: F401

    from evtkin._jit import kernel, wide_vectors

    _HAVE_NUMBA = True
except ImportError:  # pragma: no cover - exercised only without numba
    _HAVE_NUMBA = False

__all__ = [
    "AxisSpec",
    "HistAccumulator",
    "HistSpec",
    "fill_many",
]



# --------------------------------------------------------------------------------------------------
# specs
# --------------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class AxisSpec:
    """One histogram axis: regular ``(n, lo, hi)`` or variable edges, with a label and a unit."""

    name: str
    edges: tuple[float, ...]
    kind: Literal["regular", "variable"] = "variable"
    label: str = ""
    unit: str = ""

    @classmethod
    def regular(
        cls, n: int, lo: float, hi: float, *, name: str, label: str = "", unit: str = ""
    ) -> AxisSpec:
        """Regular axis with ``n`` equal bins on ``[lo, hi)``."""
        if int(n) != n or n < 1:
            raise ValueError(f"axis {name!r}: number of bins must be a positive integer, got {n!r}")
        if not (np.isfinite(lo) and np.isfinite(hi) and hi > lo):
            raise ValueError(f"axis {name!r}: need finite lo < hi, got lo={lo!r}, hi={hi!r}")
        import boost_histogram as bh

        edges = bh.axis.Regular(int(n), float(lo), float(hi)).edges
        return cls(name, tuple(float(e) for e in edges), "regular", label, unit)

    @classmethod
    def variable(
        cls, edges: Sequence[float], *, name: str, label: str = "", unit: str = ""
    ) -> AxisSpec:
        """Axis with the given bin edges (strictly increasing, finite, at least two)."""
        arr = np.asarray(edges, dtype=np.float64)
        if arr.ndim != 1 or arr.size < 2:
            raise ValueError(f"axis {name!r}: need at least two bin edges, got {list(arr)}")
        if not np.all(np.isfinite(arr)) or not np.all(np.diff(arr) > 0):
            raise ValueError(f"axis {name!r}: edges must be finite and strictly increasing")
        return cls(name, tuple(float(e) for e in arr), "variable", label, unit)

    @property
    def nbins(self) -> int:
        """Number of in-range bins."""
        return len(self.edges) - 1

    @property
    def lo(self) -> float:
        return self.edges[0]

    @property
    def hi(self) -> float:
        return self.edges[-1]

    @property
    def edges_array(self) -> np.ndarray:
        return np.asarray(self.edges, dtype=np.float64)

    @property
    def widths(self) -> np.ndarray:
        """In-range bin widths (length ``nbins``)."""
        return np.diff(self.edges_array)

    @property
    def title(self) -> str:
        """Axis title for plots: ``label [unit]``."""
        base = self.label or self.name
        return f"{base} [{self.unit}]" if self.unit else base

    def to_hist_axis(self) -> Any:
        """The equivalent ``hist`` axis (with under- and overflow)."""
        import hist

        if self.kind == "regular":
            return hist.axis.Regular(
                self.nbins, self.lo, self.hi, name=self.name, label=self.title
            )
        return hist.axis.Variable(list(self.edges), name=self.name, label=self.title)

    def index(self, values: Any) -> np.ndarray:
        """Flow-inclusive bin index (0 = underflow, ``nbins + 1`` = overflow) of each value."""
        x = np.ascontiguousarray(values, dtype=np.float64).reshape(-1)
        out = np.empty(x.size, dtype=np.int64)
        _write_index(self, x, out, 1, False)
        return out

    def _lut(self) -> tuple[np.ndarray, float]:
        return _lut_cached(self.edges)

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name,
            "label": self.label,
            "unit": self.unit,
            "kind": self.kind,
            "edges": list(self.edges),
        }


@dataclass(frozen=True)
class HistSpec:
    """A 1-D or 2-D histogram: name, title and its axes."""

    name: str
    axes: tuple[AxisSpec, ...]
    title: str = ""

    def __post_init__(self) -> None:
        if not 1 <= len(self.axes) <= 2:
            raise ValueError(
                f"histogram {self.name!r}: 1 or 2 axes supported, got {len(self.axes)}"
            )
        object.__setattr__(self, "axes", tuple(self.axes))

    @property
    def ndim(self) -> int:
        return len(self.axes)

    @property
    def shape(self) -> tuple[int, ...]:
        """Shape of one weight's contents with flow bins."""
        return tuple(a.nbins + 2 for a in self.axes)

    @property
    def size(self) -> int:
        return int(np.prod(self.shape))

    def flat_index(self, *values: Any) -> np.ndarray:
        """Flat C-order index into the flow-inclusive contents of each entry."""
        xs = self._values(values)
        out = np.empty(xs[0].size, dtype=np.int64)
        self._write_flat_index(xs, out)
        return out

    def _values(self, values: Sequence[Any]) -> list[np.ndarray]:
        if len(values) != self.ndim:
            raise ValueError(
                f"histogram {self.name!r} has {self.ndim} axes but {len(values)} value arrays given"
            )
        xs = [np.ascontiguousarray(v, dtype=np.float64).reshape(-1) for v in values]
        if self.ndim == 2 and xs[0].size != xs[1].size:
            raise ValueError(
                f"histogram {self.name!r}: x and y have different lengths "
                f"({xs[0].size} and {xs[1].size})"
            )
        return xs

    def _write_flat_index(self, xs: Sequence[np.ndarray], out: np.ndarray) -> None:
        if self.ndim == 1:
            _write_index(self.axes[0], xs[0], out, 1, False)
        else:
            _write_index(self.axes[0], xs[0], out, self.shape[1], False)
            _write_index(self.axes[1], xs[1], out, 1, True)


# --------------------------------------------------------------------------------------------------
# index kernels (same arithmetic as boost-histogram's regular axis)
# Each kernel writes ``out[i] = index * mult (+ out[i] if accumulate)`` so that 2-D flat indices and
# buffer offsets are built in place without temporaries.
# --------------------------------------------------------------------------------------------------
def _index_regular_py(x: np.ndarray, n: int, lo: float, delta: float) -> np.ndarray:
    z = (x - lo) / delta
    out = np.full(x.shape, n + 1, dtype=np.int64)  # overflow, also NaN
    below = z < 1.0
    inside = below & (z >= 0.0)
    out[inside] = (z[inside] * n).astype(np.int64) + 1
    out[below & ~inside] = 0
    return out


def _index_variable_py(x: np.ndarray, edges: np.ndarray) -> np.ndarray:
    # upper_bound semantics: x == edge_k goes to bin k + 1 (flow index); NaN sorts last -> overflow
    return np.searchsorted(edges, x, side="right").astype(np.int64)


@functools.lru_cache(maxsize=256)
def _lut_cached(edges_t: tuple[float, ...]) -> tuple[np.ndarray, float]:
    """Look-up table for variable axes: a fine regular grid of cells over [lo, hi); for each cell
    the flow index of its lower boundary, from which a short linear scan finds the bin."""
    edges = np.asarray(edges_t, dtype=np.float64)
    ncell = min(8 * (edges.size - 1), 1 << 16)
    scale = ncell / (edges[-1] - edges[0])
    cells = edges[0] + np.arange(ncell) / scale
    lut = np.searchsorted(edges, cells, side="right").astype(np.int64)
    # guard against rounding of cells: never start beyond the true position
    lut = np.maximum(lut - 1, 1)
    return lut, float(scale)


#: the kernels' array arguments (annotations only: numba types the calls itself)
Arr = np.ndarray

if _HAVE_NUMBA:

    @kernel()
    def _index_regular_nb(x: Arr, n: int, lo: float, delta: float, out: Arr, mult: int,
                          accumulate: bool) -> None:
        for i in range(x.size):
            z = (x[i] - lo) / delta
            if z < 1.0:  # noqa: SIM108 (kept readable: mirrors the boost formula)
                k = np.int64(z * n) + 1 if z >= 0.0 else 0
            else:
                k = n + 1  # overflow, also NaN
            if accumulate:
                out[i] += k * mult
            else:
                out[i] = k * mult

    @kernel()
    def _index_variable_nb(x: Arr, edges: Arr, lut: Arr, scale: float, out: Arr, mult: int,
                           accumulate: bool) -> None:
        m = edges.size
        lo = edges[0]
        hi = edges[m - 1]
        nl = lut.size
        for i in range(x.size):
            v = x[i]
            if v >= lo:
                if v < hi:
                    j = np.int64((v - lo) * scale)
                    if j >= nl:
                        j = nl - 1
                    b = lut[j]
                    while b > 1 and edges[b - 1] > v:  # (defensive) step back
                        b -= 1
                    while edges[b] <= v:
                        b += 1
                    k = b
                else:
                    k = m
            elif v == v:
                k = 0
            else:
                k = m  # NaN -> overflow
            if accumulate:
                out[i] += k * mult
            else:
                out[i] = k * mult

    @kernel()
    def _accumulate_nb(gidx: Arr, grows: Arr, rowflag: Arr, starts: Arr, w0: Arr, wv: Arr,
                       src: Arr, out: Arr) -> None:
        # ``out`` is bin-major ``(n_bins, W)``: [Σw (1+V) | Σw² (1+V) | zero padding] per bin,
        # one contiguous row; ``src`` (length W) is scratch. Event-major loop: the extended
        # row [w, w²] of an event is built once (squares once per event, not once per event
        # and histogram) and stays in L1 while every histogram adds it to the bins of its
        # entries of that event with a contiguous loop of W additions (W a multiple of 8: no
        # scalar remainder). Row views (not flat offsets) keep that loop free of
        # negative-index handling, so it vectorises. Measured (bench/bench_fill.py): rows
        # aligned to cache lines (see _aligned_zeros) and 512-bit vectors where the CPU has
        # them (see wide_vectors) make the row loop ~1.3x and ~1.6x faster. Entries of each
        # histogram must be in non-decreasing row order (the caller sorts them otherwise).
        wide_vectors()
        nh = starts.size - 1
        nv = wv.shape[1]
        m = nv + 1
        ptr = starts[:-1].copy()
        m2 = out.shape[1]
        for r in range(w0.size):
            wr = wv[r]
            a = w0[r]
            src[0] = a
            src[m] = a * a
            for c in range(nv):
                y = wr[c]
                src[1 + c] = y
                src[m + 1 + c] = y * y
            for h in range(nh):
                p = ptr[h]
                end = starts[h + 1]
                if rowflag[h]:
                    while p < end and grows[p] == r:
                        ov = out[gidx[p]]
                        for c in range(m2):
                            ov[c] += src[c]
                        p += 1
                elif p < end:  # one entry per row
                    ov = out[gidx[p]]
                    for c in range(m2):
                        ov[c] += src[c]
                    p += 1
                ptr[h] = p

    @kernel()
    def _accumulate_direct_nb(gidx: Arr, starts: Arr, w0: Arr, wv: Arr, src: Arr,
                              out: Arr) -> None:
        # _accumulate_nb when every histogram has one entry per weight row (entry r of
        # histogram h is gidx[starts[h] + r]): no row pointers to follow, ~5 % faster
        wide_vectors()
        nh = starts.size - 1
        nv = wv.shape[1]
        m = nv + 1
        m2 = out.shape[1]
        for r in range(w0.size):
            wr = wv[r]
            a = w0[r]
            src[0] = a
            src[m] = a * a
            for c in range(nv):
                y = wr[c]
                src[1 + c] = y
                src[m + 1 + c] = y * y
            for h in range(nh):
                ov = out[gidx[starts[h] + r]]
                for c in range(m2):
                    ov[c] += src[c]

    @kernel()
    def _accumulate_nominal_nb(gidx: Arr, grows: Arr, rowflag: Arr, starts: Arr, w0: Arr,
                               out: Arr) -> None:
        # nominal weight only: histogram-major, two additions per entry
        for h in range(starts.size - 1):
            s0 = starts[h]
            use_rows = rowflag[h]
            for p in range(s0, starts[h + 1]):
                a = w0[grows[p] if use_rows else p - s0]
                ov = out[gidx[p]]
                ov[0] += a
                ov[1] += a * a


def _write_index(
    axis: AxisSpec, x: np.ndarray, out: np.ndarray, mult: int, accumulate: bool
) -> None:
    """``out = index * mult`` (or ``+=``) for the flow-inclusive bin index of ``x`` on ``axis``."""
    if _HAVE_NUMBA:
        if axis.kind == "regular":
            _index_regular_nb(x, axis.nbins, axis.lo, axis.hi - axis.lo, out, mult, accumulate)
        else:
            lut, scale = axis._lut()
            _index_variable_nb(x, axis.edges_array, lut, scale, out, mult, accumulate)
        return
    if axis.kind == "regular":  # pragma: no cover - numpy path
        k = _index_regular_py(x, axis.nbins, axis.lo, axis.hi - axis.lo)
    else:  # pragma: no cover
        k = _index_variable_py(x, axis.edges_array)
    if accumulate:  # pragma: no cover
        out += k * mult
    else:  # pragma: no cover
        out[:] = k * mult


def _aligned_zeros(shape: tuple[int, ...]) -> np.ndarray:
    """float64 zeros whose first element is 64-byte aligned (a cache line)."""
    n = int(np.prod(shape))
    raw = np.zeros(n + 8, dtype=np.float64)
    k = (-raw.ctypes.data % 64) // 8
    return raw[k : k + n].reshape(shape)


def _row_width(nv: int) -> int:
    """Columns of the fill buffer: 2(1+V) rounded up to a multiple of 8 (whole SIMD blocks)."""
    return 2 if nv == 0 else -(-2 * (1 + nv) // 8) * 8


def _accumulate(
    gidx: np.ndarray,
    grows: np.ndarray,
    rowflag: np.ndarray,
    starts: np.ndarray,
    w0: np.ndarray,
    wv: np.ndarray,
    out: np.ndarray,
) -> None:
    """Add weight rows ``(w0[r], wv[r, :])`` and their squares of every entry to bin ``gidx``.

    ``out`` has shape ``(n_bins, W)`` with ``W >= 2 (1 + V)`` (see :func:`_row_width`): Σw in
    columns ``0..V``, Σw² in ``1+V..2V+1``, padding columns stay zero.
    Entries ``starts[h]:starts[h+1]`` belong to histogram ``h``; their weight row is ``grows[p]``
    if ``rowflag[h]`` else ``p - starts[h]``.
    """
    if _HAVE_NUMBA:
        if wv.shape[1] == 0:
            _accumulate_nominal_nb(gidx, grows, rowflag, starts, w0, out)
        else:
            src = _aligned_zeros((out.shape[1],))
            if not rowflag.any() and np.all(np.diff(starts) == w0.size):
                _accumulate_direct_nb(gidx, starts, w0, wv, src, out)
            else:
                _accumulate_nb(gidx, grows, rowflag, starts, w0, wv, src, out)
        return
    nb = out.shape[0]  # pragma: no cover - numpy path
    m = 1 + wv.shape[1]  # pragma: no cover
    rows = np.empty_like(gidx)  # pragma: no cover
    for h in range(starts.size - 1):  # pragma: no cover
        sl = slice(starts[h], starts[h + 1])
        rows[sl] = grows[sl] if rowflag[h] else np.arange(starts[h + 1] - starts[h])
    cols = [w0, *(wv[:, c] for c in range(wv.shape[1]))]  # pragma: no cover
    for c, col in enumerate(cols):  # pragma: no cover
        w = col[rows]
        out[:, c] += np.bincount(gidx, weights=w, minlength=nb)
        out[:, m + c] += np.bincount(gidx, weights=w * w, minlength=nb)


# --------------------------------------------------------------------------------------------------
# accumulator
# --------------------------------------------------------------------------------------------------
@dataclass
class HistAccumulator:
    """Σw and Σw² per flow-inclusive bin for the nominal weight and every variation weight.

    Internally the contents are stored bin-major (``(*spec.shape, 1 + V)``) so that one entry's
    weight row is added to contiguous memory; :attr:`sumw` and :attr:`sumw2` are views with the
    variation axis first.
    """

    spec: HistSpec
    variations: tuple[str, ...] = ()
    entries: int = 0
    _w: np.ndarray = field(default=None, repr=False)  # type: ignore[arg-type]
    _w2: np.ndarray = field(default=None, repr=False)  # type: ignore[arg-type]
    #: the raw number of entries per flow-inclusive bin (int64, ``spec.shape``): one per fill,
    #: whatever its weight
    counts: np.ndarray = field(default=None, repr=False)  # type: ignore[arg-type]

    def __post_init__(self) -> None:
        self.variations = tuple(str(v) for v in self.variations)
        shape = (*self.spec.shape, 1 + len(self.variations))
        if self._w is None:
            self._w = np.zeros(shape, dtype=np.float64)
        if self._w2 is None:
            self._w2 = np.zeros(shape, dtype=np.float64)
        if self.counts is None:
            self.counts = np.zeros(self.spec.shape, dtype=np.int64)
        if self._w.shape != shape or self._w2.shape != shape:
            raise ValueError(f"histogram {self.spec.name!r}: contents shape != {shape}")
        if self.counts.shape != tuple(self.spec.shape):
            raise ValueError(f"histogram {self.spec.name!r}: counts shape != {self.spec.shape}")

    # ---- contents -------------------------------------------------------------------------------
    @property
    def nvar(self) -> int:
        return len(self.variations)

    @property
    def sumw(self) -> np.ndarray:
        """Σw, shape ``(1 + V, *spec.shape)``, flow bins included; index 0 = nominal."""
        return np.moveaxis(self._w, -1, 0)

    @property
    def sumw2(self) -> np.ndarray:
        """Σw² (MC variance), shape ``(1 + V, *spec.shape)``, flow bins included."""
        return np.moveaxis(self._w2, -1, 0)

    def variation_index(self, which: int | str | None) -> int:
        """Index along the variation axis: ``None``/``"nominal"`` → 0, a name or 1-based number."""
        if which is None or which == "nominal":
            return 0
        if isinstance(which, str):
            try:
                return 1 + self.variations.index(which)
            except ValueError:
                raise KeyError(
                    f"histogram {self.spec.name!r}: no variation {which!r}; "
                    f"known: {list(self.variations)}"
                ) from None
        if not 0 <= which <= self.nvar:
            raise IndexError(f"variation index {which} out of range 0..{self.nvar}")
        return int(which)

    # ---- filling --------------------------------------------------------------------------------
    def fill(
        self,
        *values: Any,
        weight: Any = None,
        variations: Any = None,
        rows: Any = None,
        group: Any = None,
    ) -> None:
        """Fill entries ``values`` (one array per axis).

        ``weight`` (nominal) and ``variations`` (``(n_rows, V)``) are indexed by ``rows`` if given
        (entry ``j`` uses row ``rows[j]``, e.g. the event of a jet), else entry by entry.
        ``weight=None`` means unit weights. ``group``: see the module docstring; indexed like the
        weights.
        """
        fill_many([(self, values, rows)], weight=weight, variations=variations, group=group)

    # ---- merging --------------------------------------------------------------------------------
    def _check_compatible(self, other: HistAccumulator) -> None:
        if not isinstance(other, HistAccumulator):
            raise TypeError(f"cannot add {type(other).__name__} to HistAccumulator")
        if other.spec != self.spec:
            raise ValueError(f"cannot merge histograms with different specs ({self.spec.name!r})")
        if other.variations != self.variations:
            raise ValueError(
                f"cannot merge histogram {self.spec.name!r}: variation lists differ"
            )

    def __add__(self, other: HistAccumulator) -> HistAccumulator:
        self._check_compatible(other)
        return HistAccumulator(
            self.spec, self.variations, self.entries + other.entries,
            self._w + other._w, self._w2 + other._w2, self.counts + other.counts,
        )

    def __iadd__(self, other: HistAccumulator) -> HistAccumulator:
        self._check_compatible(other)
        self._w += other._w
        self._w2 += other._w2
        self.counts += other.counts
        self.entries += other.entries
        return self

    def __radd__(self, other: Any) -> HistAccumulator:
        if isinstance(other, int) and other == 0:  # allows sum(list_of_accumulators)
            return self.copy()
        return self.__add__(other)

    def add_scaled(self, other: HistAccumulator, factor: float) -> HistAccumulator:
        """Add ``other`` × ``factor`` in place (Σw × factor, Σw² × factor², entries and the raw
        counts per bin added unscaled): the merge of per-file parts with their cross-section
        factors known after the pass.
        ``other`` must have the same spec and number of variations; returns ``self``."""
        if not isinstance(other, HistAccumulator):
            raise TypeError(f"cannot add {type(other).__name__} to HistAccumulator")
        if other.spec != self.spec or other._w.shape != self._w.shape:
            raise ValueError(f"cannot merge histograms with different specs ({self.spec.name!r})")
        f = float(factor)
        self._w += f * other._w
        self._w2 += (f * f) * other._w2
        self.counts += other.counts
        self.entries += other.entries
        return self

    def scaled(self, factor: float) -> HistAccumulator:
        """Contents × factor (Σw² × factor²): e.g. a cross-section factor known after the pass."""
        f = float(factor)
        return HistAccumulator(self.spec, self.variations, self.entries, self._w * f,
                               self._w2 * (f * f), self.counts.copy())

    def copy(self) -> HistAccumulator:
        return HistAccumulator(
            self.spec, self.variations, self.entries, self._w.copy(), self._w2.copy(),
            self.counts.copy(),
        )

    def empty_like(self) -> HistAccumulator:
        return HistAccumulator(self.spec, self.variations)

    # ---- conversion -----------------------------------------------------------------------------
    def to_hist(self, variation: int | str | None = None) -> Any:
        """``hist.Hist`` with Weight storage for one weight (default nominal), flow preserved."""
        import hist

        i = self.variation_index(variation)
        h = hist.Hist(*(a.to_hist_axis() for a in self.spec.axes), storage=hist.storage.Weight(),
                      name=self.spec.name, label=self.spec.title)
        view = h.view(flow=True)
        view["value"] = self.sumw[i]
        view["variance"] = self.sumw2[i]
        return h

    def to_hists(self) -> dict[str, Any]:
        """One ``hist.Hist`` per weight: ``{"nominal": ..., <variation name>: ...}``."""
        out = {"nominal": self.to_hist()}
        for k, name in enumerate(self.variations, start=1):
            out[name] = self.to_hist(k)
        return out

    def to_hist_with_variation_axis(self, axis_name: str = "variation") -> Any:
        """``hist.Hist`` with an extra StrCategory axis (``"nominal"`` first, then variations)."""
        import hist

        names = ["nominal", *self.variations]
        if len(set(names)) != len(names):
            raise ValueError(f"histogram {self.spec.name!r}: variation names are not unique")
        h = hist.Hist(
            *(a.to_hist_axis() for a in self.spec.axes),
            hist.axis.StrCategory(names, name=axis_name),
            storage=hist.storage.Weight(), name=self.spec.name, label=self.spec.title,
        )
        view = h.view(flow=True)
        view["value"][..., : len(names)] = self._w
        view["variance"][..., : len(names)] = self._w2
        return h


# --------------------------------------------------------------------------------------------------
# vectorised fill of several histograms from one weight table
# --------------------------------------------------------------------------------------------------
def _as_weights(weight: Any, variations: Any, nrows: int) -> tuple[np.ndarray, np.ndarray]:
    if weight is None:
        w0 = np.ones(nrows, dtype=np.float64)
    else:
        w0 = np.ascontiguousarray(weight, dtype=np.float64).reshape(-1)
    if variations is None:
        wv = np.zeros((w0.size, 0), dtype=np.float64)
    else:
        wv = np.ascontiguousarray(variations, dtype=np.float64)
        if wv.ndim == 1:
            wv = wv.reshape(-1, 1)
        if wv.ndim != 2 or wv.shape[0] != w0.size:
            raise ValueError(
                f"variation weights must have shape (n, V) with n = {w0.size}, got {wv.shape}"
            )
    return w0, wv


def fill_many(
    items: Sequence[tuple[HistAccumulator, Sequence[Any], Any]],
    *,
    weight: Any = None,
    variations: Any = None,
    group: Any = None,
) -> None:
    """Fill several accumulators from one weight table in a single blocked pass.

    ``items``: ``(accumulator, values, rows)`` with ``values`` one array per axis and ``rows``
    ``None`` (entry j ↔ weight row j) or an integer array mapping entries to weight rows (monotonic
    rows, as from flattening per-event lists, give the best cache behaviour; any order is correct).
    ``weight=None`` means unit weights. All accumulators must declare as many variations as
    ``variations`` has columns.
    """
    if not items:
        return
    prepared = []
    nrows: int | None = None
    if weight is not None:
        nrows = int(np.asarray(weight).reshape(-1).size)
    elif variations is not None:
        nrows = int(np.asarray(variations).shape[0])
    for acc, values, rows in items:
        xs = acc.spec._values(values)
        n_ent = xs[0].size
        r = None
        if rows is None:
            if nrows is None:
                nrows = n_ent
            elif n_ent != nrows:
                raise ValueError(
                    f"histogram {acc.spec.name!r}: {n_ent} values but {nrows} weight rows"
                )
        else:
            r = np.ascontiguousarray(rows, dtype=np.int64).reshape(-1)
            if r.size != n_ent:
                raise ValueError(
                    f"histogram {acc.spec.name!r}: {n_ent} values but {r.size} row indices"
                )
        prepared.append((acc, xs, r))
    if nrows is None:  # only row-mapped items and unit weights: rows must say how many
        nrows = 1 + max(
            (int(r.max()) if r is not None and r.size else -1) for _a, _x, r in prepared
        )
    w0, wv = _as_weights(weight, variations, nrows)
    nv = wv.shape[1]
    for acc, _x, r in prepared:
        if acc.nvar != nv:
            raise ValueError(
                f"histogram {acc.spec.name!r} declares {acc.nvar} variations, "
                f"but the weight table has {nv}"
            )
        if r is not None and r.size and (r.min() < 0 or r.max() >= nrows):
            raise IndexError(
                f"histogram {acc.spec.name!r}: row indices must lie in 0..{nrows - 1}"
            )

    if group is not None:
        g = np.ascontiguousarray(group, dtype=np.int64).reshape(-1)
        if g.size != nrows:
            raise ValueError(f"group ids: expected {nrows} values, got {g.size}")
        for acc, xs, r in prepared:
            _fill_grouped(acc, acc.spec.flat_index(*xs), r, w0, wv, g)
        return

    sizes = [xs[0].size for _a, xs, _r in prepared]
    starts = np.zeros(len(prepared) + 1, dtype=np.int64)
    np.cumsum(sizes, out=starts[1:])
    gidx = np.empty(int(starts[-1]), dtype=np.int64)
    any_rows = any(r is not None for _a, _x, r in prepared)
    grows = np.empty(int(starts[-1]) if any_rows else 0, dtype=np.int64)
    rowflag = np.zeros(len(prepared), dtype=np.bool_)
    offset = 0
    offsets = []
    for h, (acc, xs, r) in enumerate(prepared):
        sl = slice(int(starts[h]), int(starts[h + 1]))
        view = gidx[sl]
        acc.spec._write_flat_index(xs, view)
        if offset:
            view += offset
        if r is not None:
            if r.size > 1 and np.any(r[1:] < r[:-1]):  # the kernel wants non-decreasing rows
                order = np.argsort(r, kind="stable")
                view[:] = view[order]
                r = r[order]
            grows[sl] = r
            rowflag[h] = True
        offsets.append(offset)
        offset += acc.spec.size
    m = 1 + nv
    buf = _aligned_zeros((offset, _row_width(nv)))
    _accumulate(gidx, grows, rowflag, starts, w0, wv, buf)
    counts = np.bincount(gidx, minlength=offset)
    for h, (acc, _x, _r) in enumerate(prepared):
        sl = slice(offsets[h], offsets[h] + acc.spec.size)
        acc._w += buf[sl, :m].reshape(acc._w.shape)
        acc._w2 += buf[sl, m : 2 * m].reshape(acc._w2.shape)
        acc.counts += counts[sl].reshape(acc.counts.shape)
        acc.entries += sizes[h]


def _fill_grouped(
    acc: HistAccumulator,
    idx: np.ndarray,
    rows: np.ndarray | None,
    w0: np.ndarray,
    wv: np.ndarray,
    group: np.ndarray,
) -> None:
    """Fill with correlated groups: sum a group's weights per bin, then square (Σw unchanged)."""
    table = np.concatenate([w0[:, None], wv], axis=1)
    g = group
    if rows is not None:
        table = table[rows]
        g = group[rows]
    grouped = g >= 0
    # independent entries stay as they are; grouped entries are merged per (group, bin)
    units_idx = [idx[~grouped]]
    units_w = [table[~grouped]]
    if np.any(grouped):
        gi = idx[grouped]
        gg = g[grouped]
        gw = table[grouped]
        order = np.lexsort((gi, gg))
        gi, gg, gw = gi[order], gg[order], gw[order]
        new = np.ones(gi.size, dtype=bool)
        new[1:] = (gi[1:] != gi[:-1]) | (gg[1:] != gg[:-1])
        first = np.flatnonzero(new)
        units_idx.append(gi[first])
        units_w.append(np.add.reduceat(gw, first, axis=0))
    uidx = np.ascontiguousarray(np.concatenate(units_idx))
    uw = np.concatenate(units_w, axis=0)
    m = 1 + acc.nvar
    buf = _aligned_zeros((acc.spec.size, _row_width(acc.nvar)))
    _accumulate(
        uidx, np.empty(0, dtype=np.int64), np.zeros(1, dtype=np.bool_),
        np.array([0, uidx.size], dtype=np.int64),
        np.ascontiguousarray(uw[:, 0]), np.ascontiguousarray(uw[:, 1:]), buf,
    )
    acc._w += buf[:, :m].reshape(acc._w.shape)
    acc._w2 += buf[:, m : 2 * m].reshape(acc._w2.shape)
    acc.counts += np.bincount(idx, minlength=acc.spec.size).reshape(acc.counts.shape)
    acc.entries += idx.size
