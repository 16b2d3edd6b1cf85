"""ROOT ntuples (TTrees) through uproot, streamed into evtkin's event model.

:func:`read_ntuple` reads the branches a :class:`~evtkin.io.ntuple_mapping.NtupleMapping`
declares (only those the caller needs, see ``fields``) and yields awkward Arrays shaped like
the LHE reader's chunks, one record per event:

* ``weight`` (float64; 1.0 when the mapping names no weight branch), ``weights`` (regular
  ``n × k`` float64 variation weights, k may be 0), ``named_weights`` (the same weights as a
  record of k fields named by :attr:`NtupleReader.variation_names`), ``process_id`` (int32, a
  branch or the mapping's constant, default 0), ``event_number`` (int64, when mapped and asked for);
* one jagged collection per mapped collection: records with the ``vector`` behaviour
  ``Momentum4D`` holding float64 coordinates in GeV (``pt, eta, phi, mass`` or
  ``px, py, pz, energy``, as mapped) plus the extra fields with their stored types;
* ``Momentum2D`` records for the mapped per-event vectors (e.g. missing pT), and the scalar
  branches (numbers or fixed-size arrays per event) under their mapped names.

Chunking: every chunk holds exactly ``step_size`` events except the last one of the whole
read; a chunk may span the boundary between two files (the pieces are concatenated).
Within a file the reading goes through ``TTree.iterate``.

Every problem with the input is an :class:`~evtkin.errors.NtupleError` naming the file, the
tree and the branch (with the mapping key that uses it): missing branches (with close
names suggested), wrong branch types, jagged branches of one collection whose lengths
differ (with the first entry where they do), unreadable, corrupt or truncated files.
"""

from __future__ import annotations

import difflib
import os
from collections.abc import Generator, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import awkward as ak
import numpy as np

import evtkin.events  # registers vector's awkward behaviours; named_weights
from evtkin.errors import ConfigError, NtupleError
from evtkin.io.ntuple_mapping import (
    ENERGY_LIKE,
    NtupleMapping,
    Selection,
)

__all__ = [
    "BranchType",
    "FileStats",
    "NtupleInfo",
    "NtupleReader",
    "ReadStats",
    "branch_type",
    "describe_ntuple",
    "read_ntuple",
]

PathLike = str | os.PathLike  # type: ignore[type-arg]


# --------------------------------------------------------------------------- branch types

@dataclass(frozen=True)
class BranchType:
    """What a branch holds per entry: ``kind`` is ``"flat"`` (a number or a fixed-size
    array, ``shape``), ``"jagged"`` (a variable-length list of numbers, each of ``shape``)
    or ``"other"`` (strings, objects, nested vectors: not readable as numbers)."""

    kind: str
    dtype: np.dtype[Any] | None
    shape: tuple[int, ...] = ()
    typename: str = ""

    def describe(self) -> str:
        if self.kind == "other" or self.dtype is None:
            return self.typename or "unknown"
        inner = " * ".join([*(str(s) for s in self.shape), str(self.dtype)])
        return f"var * {inner}" if self.kind == "jagged" else inner


def branch_type(branch: Any) -> BranchType:
    """Classify an uproot TBranch by its interpretation."""
    import uproot

    interp = branch.interpretation
    typename = str(getattr(branch, "typename", "") or "")
    if isinstance(interp, uproot.interpretation.numerical.AsDtype):
        dt = interp.to_dtype
        base = dt.subdtype[0] if dt.subdtype else dt
        return BranchType("flat", np.dtype(base), tuple(dt.shape), typename)
    if isinstance(interp, uproot.interpretation.jagged.AsJagged) and isinstance(
        interp.content, uproot.interpretation.numerical.AsDtype
    ):
        dt = interp.content.to_dtype
        base = dt.subdtype[0] if dt.subdtype else dt
        return BranchType("jagged", np.dtype(base), tuple(dt.shape), typename)
    return BranchType("other", None, (), typename or type(interp).__name__)


# role -> (kind, allowed dtype kinds, scalar shape only?, what it is for)
_ROLES: dict[str, tuple[str, str, bool, str]] = {
    "coord": ("jagged", "iuf", True, "a four-vector coordinate needs a variable-length list of "
              "numbers per event"),
    "extra": ("jagged", "biuf", False, "an extra field of a collection needs a variable-length "
              "list per event"),
    "scalar": ("flat", "biuf", False, "a scalar field needs one number (or a fixed-size array) "
               "per event; map variable-length branches under [collections]"),
    "weight": ("flat", "iuf", True, "an event weight needs one number per event"),
    "variation": ("flat", "iuf", True, "a variation weight branch in a list needs one number "
                  "per event"),
    "variation_array": ("any", "iuf", False, "variation weights in one branch need a "
                        "fixed-size (or constant-length) array of numbers per event"),
    "integer": ("flat", "iu", True, "needs one integer per event"),
    "slot": ("flat", "biuf", True, "a slot of a flat collection (slots = ...) needs one number "
             "per event"),
    "vector": ("flat", "iuf", True, "a per-event vector coordinate needs one number per event"),
}


@dataclass(frozen=True)
class _Need:
    branch: str
    role: str
    key: str  # the mapping key that uses the branch, for messages


def _needs(mapping: NtupleMapping, sel: Selection) -> list[_Need]:
    w = mapping.where
    out: list[_Need] = []
    if isinstance(mapping.weight, str):
        out.append(_Need(mapping.weight, "weight", f"{w}.weight"))
    var = mapping.variation_weights
    if isinstance(var, str):
        out.append(_Need(var, "variation_array", f"{w}.variation_weights"))
    elif var:
        out += [_Need(b, "variation", f"{w}.variation_weights[{i}]") for i, b in enumerate(var)]
    if isinstance(mapping.process_id, str):
        out.append(_Need(mapping.process_id, "integer", f"{w}.process_id"))
    if sel.event_number and mapping.event_number is not None:
        out.append(_Need(mapping.event_number, "integer", f"{w}.event_number"))
    for name, extras in sel.collections.items():
        c = mapping.collections[name]
        base = f"{w}.collections.{name}"
        if c.flat:
            used = {**c.coords, **{f: v for f, v in c.fields.items()
                                   if extras is None or f in extras}}
            for fname, src in used.items():
                if isinstance(src, str):
                    key = f"{base}.{fname}" if fname in c.coords else f"{base}.fields.{fname}"
                    out += [_Need(b, "slot", key) for b in c.slot_branches(src)]
            continue
        for coord, src in c.coords.items():
            if isinstance(src, str):
                out.append(_Need(src, "coord", f"{base}.{coord}"))
        for fname, src in c.fields.items():
            if isinstance(src, str) and (extras is None or fname in extras):
                out.append(_Need(src, "extra", f"{base}.fields.{fname}"))
    for name in sel.vectors:
        for coord, src in mapping.vectors[name].coords.items():
            out.append(_Need(src, "vector", f"{w}.vectors.{name}.{coord}"))
    for name in sel.scalars:
        out.append(_Need(mapping.scalars[name], "scalar", f"{w}.scalars.{name}"))
    return out


def _check_type(bt: BranchType, need: _Need, where: str) -> None:
    kind, dkinds, scalar_only, purpose = _ROLES[need.role]
    head = f"{where}: branch {need.branch!r} (mapped by {need.key})"
    if bt.kind == "other":
        raise NtupleError(f"{head} holds {bt.describe()}, which evtkin cannot read as numbers; "
                          f"{purpose}")
    if kind != "any" and bt.kind != kind:
        raise NtupleError(f"{head} is {'jagged' if bt.kind == 'jagged' else 'not jagged'} "
                          f"({bt.describe()} per event); {purpose}")
    assert bt.dtype is not None
    if bt.dtype.kind not in dkinds:
        raise NtupleError(f"{head} holds {bt.describe()}; {purpose.split(';')[0]} "
                          f"({'integers' if dkinds == 'iu' else 'numbers'}, not {bt.dtype})")
    if need.role == "variation_array":
        if bt.kind == "flat" and len(bt.shape) != 1:
            raise NtupleError(f"{head} is {bt.describe()} per event; {purpose}")
        if bt.kind == "jagged" and bt.shape:
            raise NtupleError(f"{head} is {bt.describe()} per event; {purpose}")
    elif scalar_only and bt.shape:
        raise NtupleError(f"{head} is {bt.describe()} per event; {purpose}")


# --------------------------------------------------------------------------- statistics

@dataclass
class FileStats:
    """What was read from one file: entries, bytes requested from the storage, requests."""

    path: str
    size: int
    entries: int = 0
    bytes_read: int = 0
    requests: int = 0


@dataclass
class ReadStats:
    """Totals of one :func:`read_ntuple` pass (``bytes_read`` counts every byte uproot
    requested from the files: headers, metadata and the baskets of the branches read)."""

    files: list[FileStats] = field(default_factory=list)
    branches: tuple[str, ...] = ()

    @property
    def bytes_read(self) -> int:
        return sum(f.bytes_read for f in self.files)

    @property
    def requests(self) -> int:
        return sum(f.requests for f in self.files)

    @property
    def entries(self) -> int:
        return sum(f.entries for f in self.files)

    @property
    def file_bytes(self) -> int:
        return sum(f.size for f in self.files)


# --------------------------------------------------------------------------- opening files

def _suggest(word: str, options: Sequence[str]) -> str:
    lower = {o.lower(): o for o in options}
    close = difflib.get_close_matches(word, list(options), n=3, cutoff=0.6)
    if word.lower() in lower and lower[word.lower()] not in close:
        close.insert(0, lower[word.lower()])
    return f"; did you mean {' or '.join(repr(c) for c in close)}?" if close else ""


class _OpenTree:
    """One opened file and its TTree, checked against the branches a read needs."""

    def __init__(self, path: str, mapping: NtupleMapping, needs: list[_Need]) -> None:
        import uproot

        self.path = path
        if not os.path.isfile(path):
            raise NtupleError(f"{path}: no such file")
        self.stats = FileStats(path, os.path.getsize(path))
        tree_label = repr(mapping.tree) if mapping.tree else "(the only TTree)"
        try:
            self.file = uproot.open(path, object_cache=None, array_cache=None)
        except Exception as exc:
            raise NtupleError(
                f"{path}: tree {tree_label}: cannot open as a ROOT file ({_short(exc)}); "
                "the file is corrupt, truncated or not a ROOT file"
            ) from None
        try:
            self.tree_name = self._find_tree(mapping.tree)
            self.where = f"{path}: tree {self.tree_name!r}"
            try:
                self.tree = self.file[self.tree_name]
                self.entries = int(self.tree.num_entries)
                keys = list(self.tree.keys(recursive=True))
            except NtupleError:
                raise
            except Exception as exc:
                raise NtupleError(
                    f"{path}: tree {self.tree_name!r}: cannot read the tree's metadata "
                    f"({_short(exc)}); the file is corrupt or truncated"
                ) from None
            self.types: dict[str, BranchType] = {}
            for need in needs:
                if need.branch not in self.types:
                    if need.branch not in keys:
                        raise NtupleError(
                            f"{self.where}: no branch {need.branch!r} (mapped by {need.key})"
                            f"{_suggest(need.branch, keys)}"
                        )
                    self.types[need.branch] = branch_type(self.tree[need.branch])
                _check_type(self.types[need.branch], need, self.where)
        except BaseException:
            self.close()
            raise

    def _find_tree(self, name: str | None) -> str:
        try:
            classes: dict[str, str] = {
                k.rsplit(";", 1)[0]: v for k, v in self.file.classnames().items()}
        except Exception as exc:
            raise NtupleError(
                f"{self.path}: cannot read the file's directory ({_short(exc)}); the file is "
                "corrupt or truncated"
            ) from None
        trees = sorted(k for k, v in classes.items() if v == "TTree")
        if name is None:
            if len(trees) != 1:
                listing = ", ".join(trees) or "none"
                raise NtupleError(
                    f"{self.path}: the mapping names no tree and the file holds "
                    f"{len(trees)} TTrees ({listing}); set tree = \"NAME\""
                )
            return trees[0]
        if name not in classes:
            raise NtupleError(
                f"{self.path}: no tree {name!r}{_suggest(name, trees)}"
                f" (TTrees in the file: {', '.join(trees) or 'none'})"
            )
        if classes[name] != "TTree":
            raise NtupleError(f"{self.path}: {name!r} is a {classes[name]}, not a TTree")
        return name

    def close(self) -> None:
        file = getattr(self, "file", None)
        if file is None:
            return
        source = getattr(file.file, "source", None)
        if source is not None:
            self.stats.bytes_read = int(source.num_requested_bytes)
            self.stats.requests = int(source.num_requests)
        file.close()
        self.file = None


def _short(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    name = type(exc).__name__
    return f"{name}: {text[:300]}" if text else name


# --------------------------------------------------------------------------- chunk building

def _jagged(arr: ak.Array) -> tuple[np.ndarray, Any]:
    """Offsets (starting at 0) and the content of a jagged array's layout."""
    layout = arr.layout
    if not isinstance(layout, ak.contents.ListOffsetArray):
        layout = layout.to_ListOffsetArray64(True)
    offsets = np.asarray(layout.offsets, dtype=np.int64)
    content = layout.content
    if len(offsets) and (offsets[0] != 0 or len(content) != offsets[-1]):
        content = content[offsets[0] : offsets[-1]]
        offsets = offsets - offsets[0]
    return offsets, content


def _numpy(content: Any) -> np.ndarray:
    return np.asarray(ak.to_numpy(ak.Array(content)))


def _first_difference(off_a: np.ndarray, off_b: np.ndarray) -> tuple[int, int, int]:
    ca, cb = np.diff(off_a), np.diff(off_b)
    i = int(np.flatnonzero(ca != cb)[0])
    return i, int(ca[i]), int(cb[i])


class _Builder:
    """Turns the arrays of one entry range into an event-model chunk."""

    def __init__(self, mapping: NtupleMapping, sel: Selection) -> None:
        self.m = mapping
        self.sel = sel
        self.k: int | None = None
        self.k_file: str | None = None
        if isinstance(mapping.variation_weights, tuple):
            self.k = len(mapping.variation_weights)

    def build(self, arrays: Mapping[str, ak.Array], n: int, ot: _OpenTree, first: int
              ) -> ak.Array:
        m = self.m
        scale = m.scale
        fields: list[str] = []
        contents: list[Any] = []

        def add(name: str, content: Any) -> None:
            fields.append(name)
            contents.append(content)

        if isinstance(m.weight, str):
            w = np.asarray(ak.to_numpy(arrays[m.weight]), dtype=np.float64)
        else:
            w = np.full(n, 1.0 if m.weight is None else float(m.weight))
        add("weight", ak.contents.NumpyArray(w))
        wv = self._variations(arrays, n, ot, first)
        add("weights", ak.contents.RegularArray(ak.contents.NumpyArray(wv.reshape(-1)),
                                                wv.shape[1], zeros_length=n))
        add("named_weights", evtkin.events.named_weights(wv, self.names(wv.shape[1])))
        if isinstance(m.process_id, str):
            pid = np.asarray(ak.to_numpy(arrays[m.process_id]), dtype=np.int32)
        else:
            pid = np.full(n, int(m.process_id), dtype=np.int32)
        add("process_id", ak.contents.NumpyArray(pid))
        if self.sel.event_number and m.event_number is not None:
            ev = np.asarray(ak.to_numpy(arrays[m.event_number]), dtype=np.int64)
            add("event_number", ak.contents.NumpyArray(ev))
        for name, extras in self.sel.collections.items():
            add(name, self._collection(name, extras, arrays, n, ot, first))
        for name in self.m.vectors:
            if name not in self.sel.vectors:
                continue
            vec = self.m.vectors[name]
            parts = []
            for coord, branch in vec.coords.items():
                x = np.asarray(ak.to_numpy(arrays[branch]), dtype=np.float64)
                parts.append(ak.contents.NumpyArray(x * scale if coord in ENERGY_LIKE else x))
            add(name, ak.contents.RecordArray(parts, list(vec.coords), length=n,
                                              parameters={"__record__": "Momentum2D"}))
        for name, branch in self.m.scalars.items():
            if name in self.sel.scalars:
                add(name, arrays[branch].layout)
        return ak.Array(ak.contents.RecordArray(contents, fields, length=n))

    def _variations(self, arrays: Mapping[str, ak.Array], n: int, ot: _OpenTree,
                    first: int) -> np.ndarray:
        var = self.m.variation_weights
        if var is None:
            wv = np.zeros((n, 0))
        elif isinstance(var, tuple):
            wv = np.empty((n, len(var)))
            for j, b in enumerate(var):
                wv[:, j] = ak.to_numpy(arrays[b])
        else:
            arr = arrays[var]
            if ot.types[var].kind == "flat":
                wv = np.asarray(ak.to_numpy(arr), dtype=np.float64).reshape(n, -1)
            else:
                offsets, content = _jagged(arr)
                counts = np.diff(offsets)
                k = self.k if self.k is not None else (int(counts[0]) if n else 0)
                bad = np.flatnonzero(counts != k)
                if len(bad):
                    i = int(bad[0])
                    raise NtupleError(
                        f"{ot.where}: branch {var!r} (mapped by {self.m.where}.variation_weights)"
                        f": entry {first + i} holds {int(counts[i])} variation weights, "
                        f"expected {k} as in the entries before"
                    )
                wv = _numpy(content).astype(np.float64).reshape(n, k)
        k = wv.shape[1]
        if self.k is None and (n or not isinstance(var, str)):
            self.k, self.k_file = k, ot.path
        elif n and self.k != k:
            raise NtupleError(
                f"{ot.where}: branch {var!r} (mapped by {self.m.where}.variation_weights) holds "
                f"{k} variation weights per event but {self.k_file or 'the mapping'} gave "
                f"{self.k}; all files of a read must have the same variations"
            )
        return wv

    def names(self, k: int) -> tuple[str, ...]:
        """The names of ``k`` variation weights: the mapping's ``variation_names``, else the
        branch names, else ``<branch>_<i>`` for the columns of one array branch."""
        var = self.m.variation_weights
        if var is None or k == 0:
            return ()
        if self.m.variation_names is not None and len(self.m.variation_names) == k:
            return tuple(self.m.variation_names)
        if isinstance(var, tuple):
            return var
        return tuple(f"{var}_{i}" for i in range(k))

    def _collection(self, name: str, extras: set[str] | None, arrays: Mapping[str, ak.Array],
                    n: int, ot: _OpenTree, first: int) -> Any:
        c = self.m.collections[name]
        scale = self.m.scale
        wanted = dict(c.coords)
        wanted.update(c.fields if extras is None else {f: c.fields[f] for f in extras})
        if c.flat:
            return self._flat_collection(c, wanted, arrays, n)
        ref_branch: str | None = None
        ref_offsets: np.ndarray | None = None
        columns: dict[str, Any] = {}
        for fname, src in wanted.items():
            if not isinstance(src, str):
                continue
            offsets, content = _jagged(arrays[src])
            if ref_offsets is None:
                ref_branch, ref_offsets = src, offsets
            elif not np.array_equal(offsets, ref_offsets):
                i, ca, cb = _first_difference(ref_offsets, offsets)
                raise NtupleError(
                    f"{ot.where}: collection {name!r} ({self.m.where}.collections.{name}): "
                    f"branches {ref_branch!r} and {src!r} have different lengths; first at "
                    f"entry {first + i} ({ca} vs {cb} values)"
                )
            if fname in c.coords:
                x = _numpy(content).astype(np.float64)
                if fname in ENERGY_LIKE and scale != 1.0:
                    x = x * scale
                content = ak.contents.NumpyArray(x)
            columns[fname] = content
        if ref_offsets is None:  # pragma: no cover - coordinates other than mass are branches
            raise ConfigError(f"{self.m.where}.collections.{name}: no branch mapped")
        total = int(ref_offsets[-1]) if len(ref_offsets) else 0
        for fname, src in wanted.items():
            if isinstance(src, str):
                continue
            if fname in c.coords:
                value = np.full(total, float(src) * (scale if fname in ENERGY_LIKE else 1.0))
            else:
                value = np.full(total, src, dtype=np.int64 if isinstance(src, int) else np.float64)
            columns[fname] = ak.contents.NumpyArray(value)
        order = [f for f in wanted]
        record = ak.contents.RecordArray([columns[f] for f in order], order, length=total,
                                         parameters={"__record__": "Momentum4D"})
        return ak.contents.ListOffsetArray(ak.index.Index64(ref_offsets), record)


    def _flat_collection(self, c: Any, wanted: Mapping[str, Any],
                         arrays: Mapping[str, ak.Array], n: int) -> Any:
        """One flat branch per slot and field → a jagged collection of the filled slots (in
        slot order)."""
        scale = self.m.scale
        columns: dict[str, np.ndarray] = {}
        for fname, src in wanted.items():
            if not isinstance(src, str):
                continue
            x = np.stack([np.asarray(ak.to_numpy(arrays[b])) for b in c.slot_branches(src)],
                         axis=1) if n else np.zeros((0, len(c.slots)))
            if fname in c.coords:
                x = x.astype(np.float64)
                if fname in ENERGY_LIKE and scale != 1.0:
                    x = x * scale
            columns[fname] = x
        ref = columns[c.presence]
        with np.errstate(invalid="ignore"):
            filled = np.isfinite(ref) & (ref > 0)
        offsets = np.zeros(n + 1, dtype=np.int64)
        np.cumsum(filled.sum(axis=1), out=offsets[1:])
        total = int(offsets[-1])
        contents = []
        for fname, src in wanted.items():
            if isinstance(src, str):
                contents.append(ak.contents.NumpyArray(np.ascontiguousarray(columns[fname][filled])))
            elif fname in c.coords:
                contents.append(ak.contents.NumpyArray(
                    np.full(total, float(src) * (scale if fname in ENERGY_LIKE else 1.0))))
            else:
                contents.append(ak.contents.NumpyArray(
                    np.full(total, src, dtype=np.int64 if isinstance(src, int) else np.float64)))
        record = ak.contents.RecordArray(contents, list(wanted), length=total,
                                         parameters={"__record__": "Momentum4D"})
        return ak.contents.ListOffsetArray(ak.index.Index64(offsets), record)


# --------------------------------------------------------------------------- the reader

def _paths(files: PathLike | Iterable[PathLike]) -> list[str]:
    if isinstance(files, (str, os.PathLike)):
        return [os.fspath(files)]
    out = [os.fspath(f) for f in files]
    if not out:
        raise NtupleError("read_ntuple: no input files given")
    return out


def _mapping(mapping: NtupleMapping | Mapping[str, Any]) -> NtupleMapping:
    if isinstance(mapping, NtupleMapping):
        return mapping
    return NtupleMapping.from_dict(mapping)


class NtupleReader:
    """Iterator over event-model chunks of one or more ntuple files (see :func:`read_ntuple`).

    ``stats`` (a :class:`ReadStats`) fills in as files are finished; ``branches`` lists
    the branches read; ``variation_names`` is known once the first file was opened.
    """

    def __init__(self, files: list[str], mapping: NtupleMapping, sel: Selection,
                 step_size: int, entry_start: int, entry_stop: int | None) -> None:
        self.files = files
        self.mapping = mapping
        self.selection = sel
        self.step_size = step_size
        self.entry_start = entry_start
        self.entry_stop = entry_stop
        self._needs = _needs(mapping, sel)
        self.branches: tuple[str, ...] = tuple(dict.fromkeys(n.branch for n in self._needs))
        self.stats = ReadStats(branches=self.branches)
        self._builder = _Builder(mapping, sel)
        self._open: _OpenTree | None = None
        self._gen = self._chunks()
        self._types0: tuple[str, dict[str, BranchType]] | None = None

    def __iter__(self) -> NtupleReader:
        return self

    def __next__(self) -> ak.Array:
        return next(self._gen)

    def close(self) -> None:
        """Stop reading and close the open file (its byte count goes into ``stats``)."""
        self._gen.close()
        self._finish()

    def _finish(self) -> None:
        if self._open is not None:
            self._open.close()
            self._open = None

    # ---------------------------------------------------------------- internals

    def _read(self, ot: _OpenTree, start: int, stop: int) -> ak.Array:
        try:
            arrays = ot.tree.arrays(list(self.branches), entry_start=start, entry_stop=stop,
                                    library="ak", how=dict)
        except Exception as exc:
            raise self._diagnose(ot, start, stop, exc) from None
        return self._builder.build(arrays, stop - start, ot, start)

    def _iterate(self, ot: _OpenTree, start: int, stop: int) -> Iterator[ak.Array]:
        step = self.step_size
        it = ot.tree.iterate(list(self.branches), step_size=step, entry_start=start,
                             entry_stop=stop, library="ak", how=dict, report=True)
        pos = start
        while True:
            try:
                arrays, report = next(it)
            except StopIteration:
                return
            except Exception as exc:
                raise self._diagnose(ot, pos, min(pos + step, stop), exc) from None
            lo, hi = int(report.tree_entry_start), int(report.tree_entry_stop)
            pos = hi
            yield self._builder.build(arrays, hi - lo, ot, lo)

    def _diagnose(self, ot: _OpenTree, start: int, stop: int, exc: BaseException
                  ) -> NtupleError:
        """Find which branch fails to read in [start, stop) (one at a time) and say so."""
        if isinstance(exc, NtupleError):
            return exc
        failing: list[tuple[_Need, Exception]] = []
        for need in self._needs:
            if need.branch in (f[0].branch for f in failing):
                continue
            try:
                ot.tree[need.branch].array(entry_start=start, entry_stop=stop, library="ak")
            except Exception as err:
                failing.append((need, err))
        if failing:
            need, inner = failing[0]
            others = [repr(f[0].branch) for f in failing[1:]]
            if len(others) > 4:
                others = [*others[:4], f"{len(others) - 4} more"]
            more = f" (also {', '.join(others)})" if others else ""
            return NtupleError(
                f"{ot.where}: branch {need.branch!r} (mapped by {need.key}){more}: cannot read "
                f"entries {start}-{stop - 1} ({_short(inner)}); the file is corrupt or truncated"
            )
        return NtupleError(
            f"{ot.where}: reading branches {', '.join(map(repr, self.branches))} at entries "
            f"{start}-{stop - 1} failed ({_short(exc)})"
        )

    @property
    def variation_names(self) -> tuple[str, ...] | None:
        """Names of the variation weights (``None`` until the first file was opened when
        they come from a branch's array size)."""
        m = self.mapping
        var = m.variation_weights
        if var is None:
            return ()
        if m.variation_names is not None:
            return m.variation_names
        if isinstance(var, tuple):
            return var
        if self._builder.k is not None:
            return tuple(f"{var}_{i}" for i in range(self._builder.k))
        if self._types0 is not None and self._types0[1][var].kind == "flat":
            return tuple(f"{var}_{i}" for i in range(self._types0[1][var].shape[0]))
        return None

    def _chunks(self) -> Generator[ak.Array, None, None]:
        try:
            yield from self._chunks_inner()
        finally:
            self._finish()

    def _chunks_inner(self) -> Iterator[ak.Array]:
        step = self.step_size
        start, stop = self.entry_start, self.entry_stop
        carry: list[ak.Array] = []
        have = 0
        before = 0  # entries in the files before the current one
        for path in self.files:
            if stop is not None and before >= stop:
                break
            ot = self._open = _OpenTree(path, self.mapping, self._needs)
            self.stats.files.append(ot.stats)
            self._check_types(ot)
            n = ot.entries
            lo = max(start - before, 0)
            hi = n if stop is None else min(stop - before, n)
            before += n
            pos = lo
            if have and pos < hi:
                m = min(step - have, hi - pos)
                carry.append(self._read(ot, pos, pos + m))
                have += m
                pos += m
                ot.stats.entries += m
                if have == step:
                    yield _concatenate(carry)
                    carry, have = [], 0
            if pos < hi:
                for chunk in self._iterate(ot, pos, hi):
                    ot.stats.entries += len(chunk)
                    if len(chunk) == step:
                        yield chunk
                    else:
                        carry, have = [chunk], len(chunk)
            self._finish()
        if have:
            yield _concatenate(carry)

    def _check_types(self, ot: _OpenTree) -> None:
        """All files of a read must give the same branch types (chunks must concatenate)."""
        if self._types0 is None:
            self._types0 = (ot.path, dict(ot.types))
            return
        path0, types0 = self._types0
        for branch, bt in ot.types.items():
            b0 = types0[branch]
            if (bt.kind, bt.dtype, bt.shape) != (b0.kind, b0.dtype, b0.shape):
                raise NtupleError(
                    f"{ot.where}: branch {branch!r} holds {bt.describe()} but {b0.describe()} "
                    f"in {path0}; all files of a read must have the same branch types"
                )


def _concatenate(pieces: list[ak.Array]) -> ak.Array:
    return pieces[0] if len(pieces) == 1 else ak.concatenate(pieces, axis=0)


def read_ntuple(
    files: PathLike | Iterable[PathLike],
    mapping: NtupleMapping | Mapping[str, Any],
    *,
    step_size: int = 100_000,
    entry_start: int | None = None,
    entry_stop: int | None = None,
    fields: Iterable[str] | None = None,
) -> NtupleReader:
    """Stream ROOT ntuple files as event-model chunks of ``step_size`` events.

    ``files``: one path or a list (read in order, as one sequence of entries).
    ``mapping``: an :class:`NtupleMapping` or the plain dict it is built from.
    ``entry_start``/``entry_stop``: a range of entries counted over the whole file list.
    ``fields``: the names needed, to read only their branches: a collection name (all its
    fields), ``collection.field`` (its coordinates plus that extra field), a vector or
    scalar name, ``event_number``. ``weight``, ``weights`` and ``process_id`` are always
    read. ``None`` reads everything the mapping declares.

    Every chunk has exactly ``step_size`` events except the last (chunks may span files).
    The returned :class:`NtupleReader` records the bytes read in ``reader.stats``.
    """
    if int(step_size) < 1:
        raise ValueError(f"step_size must be >= 1, got {step_size}")
    start = int(entry_start or 0)
    if start < 0 or (entry_stop is not None and int(entry_stop) < 0):
        raise ValueError("entry_start and entry_stop must be >= 0")
    m = _mapping(mapping)
    sel = m.select(fields)
    return NtupleReader(_paths(files), m, sel, int(step_size), start,
                        None if entry_stop is None else int(entry_stop))


# --------------------------------------------------------------------------- describe

@dataclass(frozen=True)
class NtupleInfo:
    """One file checked against a mapping: tree, entries, variation names, branch types."""

    path: str
    tree: str
    entries: int
    variation_names: tuple[str, ...]
    branch_types: dict[str, BranchType]


def describe_ntuple(path: PathLike, mapping: NtupleMapping | Mapping[str, Any],
                    fields: Iterable[str] | None = None) -> NtupleInfo:
    """Open ``path``, check the mapping's branches exist with usable types, and return
    the entry count and the variation-weight names (without reading event data, except
    the first entry of a jagged variation-weight branch)."""
    m = _mapping(mapping)
    sel = m.select(fields)
    reader = NtupleReader(_paths(path), m, sel, 1, 0, None)
    ot = _OpenTree(os.fspath(path), m, reader._needs)
    try:
        reader._check_types(ot)
        names = reader.variation_names
        var = m.variation_weights
        if names is None:
            names = ()
            if isinstance(var, str) and ot.entries:
                first = ot.tree[var].array(entry_start=0, entry_stop=1, library="ak")
                names = tuple(f"{var}_{i}" for i in range(len(first[0])))
        return NtupleInfo(ot.path, ot.tree_name, ot.entries, names, dict(ot.types))
    finally:
        ot.close()
