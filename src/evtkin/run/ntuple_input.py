"""ROOT ntuple samples in a run: objects from mapped collections, reading only the branches the
config uses, entry-range work units, cross sections, and the generator-level (truth) join.

A sample with ``format = "root"`` declares its branch mapping in ``[samples.NAME.input]`` (the
table :meth:`evtkin.io.ntuple_mapping.NtupleMapping.from_dict` reads). Objects are built from a
mapped collection (``[objects.NAME] from = "jets"``) with the same thresholds, ``require``
conditions on the object fields, isolation against other objects and overlap removal as objects
built from LHE particles; the missing pT is a mapped vector (``[missing_pt] from = "met"``).

Cross section. An ntuple has no ``<init>`` block, so the config says how the weights give σ
(``weights_give``): ``"mean"`` (default) — σ = Σw/N over all events of the sample, as for
IDWTUP ±4 and as in files whose weight is the generator's XWGTUP of unweighted events (the toy
ntuple); ``"sum"`` — every weight already is the event's contribution to σ in pb, σ = Σw.
``cross_section_pb`` rescales either to the given σ. Both are applied after every unit has run.

Work units. A unit's ``first_event``/``max_events`` are entry ranges (``entry_start``,
``entry_stop``) of the file's tree. The bytes read, the tree and the branches read go into the
provenance record of each input.

Truth. ``truth_files = [LHE files]`` gives the generator-level events of the same sample: the
ntuple's ``event_number`` branch is the 0-based position of the event in those files (read in
order, as one sequence), as written by ``evtkin toy ntuple --from-lhe``. The join streams the
LHE files next to the ntuple, so the event numbers must not decrease along the ntuple, and every
ntuple event must have a generator-level partner. The events before a unit's first event number
are read and skipped (a unit in the middle of a file re-reads the start of the LHE files).
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError, NtupleError
from evtkin.expr import ATTRIBUTES, Expression, ExpressionError, Node, evaluate
from evtkin.select import kinematics as kin
from evtkin.select import objects as obj

__all__ = [
    "NtupleRunInfo",
    "TruthJoin",
    "collection_objects",
    "config_fields",
    "isolate_against_objects",
    "ntuple_entries",
    "ntuple_xsec",
    "object_mask",
    "process_ntuple_unit",
]

Progress = Callable[[int], None]


# --------------------------------------------------------------------------- objects

def object_mask(spec: Any, objs: Any, source: str) -> Any:
    """Jagged boolean mask of ``objs`` from the object's ``require`` condition: names are the
    objects' fields (``btag``, ``iso``, ``pdgid``, ...) or kinematic attributes (``pt``)."""
    fields = ak.fields(objs)

    def resolve(name: str) -> Any:
        if name in fields:
            return objs[name]
        if name in ATTRIBUTES:
            return ATTRIBUTES[name](objs)
        raise KeyError(name)

    try:
        value = evaluate(spec.require, resolve)
    except ExpressionError as exc:
        raise ConfigError(exc.render(f"{source}: objects.{spec.name}.require: ")) from None
    if not isinstance(value, ak.Array) or value.ndim != 2:
        raise ConfigError(f"{source}: objects.{spec.name}.require: {spec.require.text!r} must "
                          "give one true/false per object")
    return ak.fill_none(ak.values_astype(value, bool), False)


def isolate_against_objects(cfg: Any, objs: dict[str, Any]) -> dict[str, Any]:
    """Isolation against other defined objects (``against_objects``), on the objects as built."""
    out = dict(objs)
    for name, spec in cfg.objects.items():
        if spec.isolation_objects:
            others = ak.concatenate([objs[o] for o in spec.isolation_objects], axis=1) \
                if len(spec.isolation_objects) > 1 else objs[spec.isolation_objects[0]]
            if spec.isolation_min_pt:
                others = others[kin.pt(others) > spec.isolation_min_pt]
            out[name] = out[name][obj.isolated(out[name], others, spec.isolation_dr)]
    return out


def merged_collection(chunk: Any, sources: Sequence[str]) -> Any:
    """One collection, or several merged per event (e.g. electrons and muons as leptons),
    keeping the fields they have in common (in the first one's order)."""
    if len(sources) == 1:
        return chunk[sources[0]]
    parts = [chunk[s] for s in sources]
    common = [f for f in ak.fields(parts[0]) if all(f in ak.fields(p) for p in parts[1:])]
    merged = ak.concatenate([p[common] for p in parts], axis=1)
    return ak.zip({f: merged[f] for f in common}, with_name="Momentum4D")


def collection_objects(cfg: Any, chunk: Any) -> dict[str, Any]:
    """The config's objects (and missing pT) of one ntuple chunk: thresholds, ``require``,
    pT ordering, isolation against objects and overlap removal in the declared order."""
    out: dict[str, Any] = {}
    for name, spec in cfg.objects.items():
        coll = merged_collection(chunk, spec.source)
        if spec.require is not None:
            coll = coll[object_mask(spec, coll, cfg.source)]
        out[name] = obj.select(coll, pt_min=spec.min_pt, abs_eta_max=spec.max_abs_eta,
                               abs_rapidity_max=spec.max_abs_rapidity)
    out = isolate_against_objects(cfg, out)
    if cfg.overlap_removal:
        out = obj.apply_overlap_removal(
            out, [(o.remove, o.near, o.within_dr) for o in cfg.overlap_removal])
    if cfg.missing_pt is not None:
        out[cfg.missing_pt.name] = chunk[cfg.missing_pt.source]
    return out


# --------------------------------------------------------------------------- what to read

def _attrs(node: Node, out: set[str]) -> None:
    if node.kind == "attr":
        out.add(str(node.value))
    for a in node.args:
        _attrs(a, out)


def _expressions(cfg: Any) -> list[Expression]:
    exprs = [s.require for s in cfg.steps] + list(cfg.quantities.values())
    exprs += [a.value for h in cfg.histograms.values() for a in h.axes]
    exprs += [o.require for o in cfg.objects.values() if o.require is not None]
    return exprs


def config_fields(cfg: Any, mapping: Any) -> list[str]:
    """The ``fields=`` list for :func:`evtkin.io.ntuple.read_ntuple`: the collections the
    objects come from, with only the extra fields the config can use (attributes and ``require``
    names anywhere in the config, ``btag`` for b-tagged reconstruction, ``charge`` for
    opposite-charge pairs), the missing-pT vector and the event number when truth is joined."""
    used: set[str] = set()
    for e in _expressions(cfg):
        _attrs(e.tree, used)
    for o in cfg.objects.values():
        if o.require is not None:
            used |= set(o.require.names)
    for c in cfg.composites.values():
        if c.options.get("use_b_tags"):
            used.add("btag")
        if c.options.get("opposite_charge"):
            used.add("charge")
    out: list[str] = []
    for o in cfg.objects.values():
        for src in o.source:
            c = mapping.collections[src]
            extras = [f for f in c.fields if f in used]
            out += ([f"{c.name}.{f}" for f in extras] if extras
                    else [f"{c.name}.{next(iter(c.coords))}"])
    if cfg.missing_pt is not None:
        out.append(cfg.missing_pt.source)
    return list(dict.fromkeys(out))


# --------------------------------------------------------------------------- run information

@dataclass
class NtupleRunInfo:
    """What a run records about one ntuple input (``FileRecord.info``): tree, entries, branches
    and bytes read, variation-weight names and the σ convention."""

    path: str
    tree: str
    entries: int
    weight_names: tuple[str, ...]
    weights_give: str
    branches: tuple[str, ...]
    bytes_read: int = 0
    entries_read: int = 0
    # what the LHE bookkeeping looks for (an ntuple declares none of it)
    xsecinfo: dict[str, Any] = field(default_factory=dict)
    processes: tuple[Any, ...] = ()

    def merged_with(self, other: NtupleRunInfo) -> NtupleRunInfo:
        """Two units of the same file: bytes and entries read add up."""
        return replace(self, bytes_read=self.bytes_read + other.bytes_read,
                       entries_read=self.entries_read + other.entries_read)

    def provenance(self) -> dict[str, Any]:
        return {"format": "root", "tree": self.tree, "entries_in_file": self.entries,
                "branches_read": list(self.branches), "bytes_read": self.bytes_read}


def ntuple_entries(path: str | os.PathLike[str], mapping: Any) -> int:
    """Number of entries of the mapped tree (for planning entry-range work units)."""
    from evtkin.io.ntuple import describe_ntuple

    return describe_ntuple(path, mapping, fields=[]).entries


def ntuple_xsec(spec: Any, totals: Sequence[Any]) -> Any:
    """σ bookkeeping of an ntuple sample from its files' :class:`~evtkin.hists.xsec.FileTotals`
    (module docstring: ``weights_give`` = "mean" or "sum", optional ``cross_section_pb``)."""
    from evtkin.hists.xsec import XsecResult, effective_entries

    n = sum(t.total_events for t in totals)
    sw = sum(t.total_sum_w for t in totals)
    sw2 = sum(float(sum(t.sum_w2.values())) for t in totals)
    pids = sorted({p for t in totals for p in t.n_events})
    log = []
    if spec.weights_give == "sum":
        f = 1.0
        err = float(np.sqrt(sw2))
        log.append("ntuple: each weight is the event's contribution to σ: σ = Σw")
    else:
        f = 1.0 / n if n else 0.0
        var = max(sw2 / n - (sw / n) ** 2, 0.0) * n / (n - 1) if n > 1 else 0.0
        err = float(np.sqrt(var / n)) if n else 0.0
        log.append(f"ntuple: σ = Σw / N with N = {n} (mean weight = σ)")
    sigma = f * sw
    if spec.cross_section_pb is not None:
        if sigma == 0:
            raise ValueError("cannot override σ: the sum of weights is zero")
        log.append(f"σ overridden by the user: {spec.cross_section_pb:.6g} pb "
                   f"(was {sigma:.6g} pb)")
        f *= spec.cross_section_pb / sigma
        sigma, err = float(spec.cross_section_pb), 0.0
    factors = {p: f for p in pids}
    log.append(f"{len(totals)} files: σ = {sigma:.6g} pb, N = {n}")
    return XsecResult(
        factors=factors, sigma_pb=float(sigma), sigma_err_pb=err, n_events=int(n),
        sum_w=float(f * sw), sum_w2=float(f * f * sw2),
        n_eff=effective_entries(f * sw, f * f * sw2), mode=0,
        convention=spec.weights_give, log=log, file_factors=[factors for _ in totals],
    )


# --------------------------------------------------------------------------- truth join

class TruthJoin:
    """Generator-level events for ntuple event numbers, streamed from the LHE files in order
    (see the module docstring for the rules)."""

    def __init__(self, paths: Sequence[str], step_size: int, where: str) -> None:
        from evtkin.io.lhe import read_lhe

        self.paths = [str(p) for p in paths]
        self.where = where
        self._readers = (c for p in self.paths for c in read_lhe(p, step_size=step_size))
        self._buffer: list[Any] = []
        self._start = 0  # event number of the first buffered event
        self._stop = 0
        self._last = -1
        self._joined: Any = None

    def take(self, numbers: np.ndarray) -> Any:
        """The LHE events with these 0-based event numbers (non-decreasing), as one chunk."""
        if numbers.size == 0:
            return None
        if np.any(np.diff(numbers) < 0) or numbers[0] < self._last:
            raise NtupleError(f"{self.where}: event numbers decrease; the truth join needs them "
                              "in the order of the generator-level files")
        lo, hi = int(numbers[0]), int(numbers[-1])
        if lo < 0:
            raise NtupleError(f"{self.where}: negative event number {lo}")
        self._last = hi
        while self._stop <= hi:
            chunk = next(self._readers, None)
            if chunk is None:
                raise NtupleError(
                    f"{self.where}: event number {hi} has no generator-level event: the truth "
                    f"files ({', '.join(self.paths)}) hold {self._stop} events")
            self._buffer.append(chunk)
            self._stop += len(chunk)
            self._joined = None
        while self._buffer and self._start + len(self._buffer[0]) <= lo:
            self._start += len(self._buffer.pop(0))
            self._joined = None
        if self._joined is None:
            self._joined = (self._buffer[0] if len(self._buffer) == 1
                            else ak.concatenate(self._buffer, axis=0))
        return self._joined[numbers - self._start]


# --------------------------------------------------------------------------- the unit

def _reader(plan: Any, unit: Any, spec: Any, truth: bool) -> Any:
    from evtkin.io.ntuple import read_ntuple

    fields = config_fields(plan.config, spec.input)
    if truth:
        if spec.input.event_number is None:
            raise ConfigError(f"{plan.config.source}: samples.{spec.name}.input.event_number: "
                              "needed to match the ntuple with its truth_files")
        fields.append("event_number")
    entry_range = getattr(unit, "entry_range", None)
    stop: int | None
    if entry_range is not None:
        start, stop = int(entry_range[0]), int(entry_range[1])
        if unit.max_events is not None:
            stop = min(stop, start + int(unit.max_events))
    else:
        start = int(unit.first_event or 0)
        stop = None if unit.max_events is None else start + int(unit.max_events)
    return read_ntuple(unit.path, spec.input, step_size=plan.step_size, entry_start=start,
                       entry_stop=stop, fields=fields)


def process_ntuple_unit(plan: Any, unit: Any, progress: Progress | None = None) -> Any:
    """Read and analyse one ntuple unit (an entry range of one file); its partial result.

    The same steps as :func:`evtkin.run.units.process_unit` for LHE files; with ``truth_files``
    the response matrices of the histograms marked ``response = true`` are filled as well.
    """
    from evtkin.hists.response import fill_responses, response_names
    from evtkin.run.partial import FileRecord, PartialResult
    from evtkin.run.plan import analyse_chunk, hist_entries
    from evtkin.run.units import _weights, fill_by_process, sha256_of

    cfg = plan.config
    spec = cfg.samples[unit.sample]
    sample = unit.sample
    hist_names = plan.histograms_for(sample)
    responses = response_names(plan, sample) if spec.truth_files else []
    steps = {s.name: i + 1 for i, s in enumerate(cfg.steps)}
    row_of = {n: steps[h.after] if h.after is not None else len(steps)
              for n, h in cfg.histograms.items() if n in hist_names}
    reader = _reader(plan, unit, spec, bool(responses))
    join = (TruthJoin([str(p) for p in spec.truth_files], plan.step_size,
                      f"{unit.path} (samples.{sample}.truth_files)") if responses else None)
    result = PartialResult()
    seconds = {"read": 0.0, "select": 0.0, "fill": 0.0}
    variations: tuple[str, ...] | None = None
    n_total = 0
    tree_info: tuple[str, int] | None = None
    t0 = time.perf_counter()
    try:
        for chunk in reader:
            t1 = time.perf_counter()
            seconds["read"] += t1 - t0
            n = len(chunk)
            if tree_info is None and reader._open is not None:
                tree_info = (str(reader._open.tree_name), int(reader._open.entries))
            if variations is None:
                variations = tuple(str(v) for v in (reader.variation_names or ()))
            if n == 0:
                t0 = time.perf_counter()
                continue
            view, masks = analyse_chunk(plan, chunk)
            entries = {name: hist_entries(view, name, masks[row_of[name]])
                       for name in hist_names}
            truth = None
            if join is not None:
                lhe = join.take(np.asarray(ak.to_numpy(chunk["event_number"]), dtype=np.int64))
                truth = analyse_chunk(plan, lhe)
            t2 = time.perf_counter()
            seconds["select"] += t2 - t1
            w0, wv = _weights(chunk)
            fill_by_process(plan, result, sample, unit.file_index, chunk, masks, entries,
                            w0, wv, variations)
            if truth is not None:
                pid = np.asarray(ak.to_numpy(chunk["process_id"]), dtype=np.int64)
                pids = np.unique(pid)
                for p in pids:
                    in_p = None if pids.size == 1 else pid == p
                    key = (sample, unit.file_index, int(p))
                    fill_responses(plan, result, key, responses, (view, masks), truth, w0, in_p)
            n_total += n
            t0 = time.perf_counter()
            seconds["fill"] += t0 - t2
            if progress is not None:
                progress(n)
    finally:
        reader.close()
    seconds["read"] += time.perf_counter() - t0
    stats = reader.stats
    if tree_info is None:
        from evtkin.io.ntuple import describe_ntuple

        d = describe_ntuple(unit.path, spec.input, fields=[])
        tree_info = (d.tree, d.entries)
    info = NtupleRunInfo(
        path=unit.path, tree=tree_info[0] if tree_info else str(spec.input.tree or ""),
        entries=tree_info[1] if tree_info else 0,
        weight_names=variations if variations is not None
        else tuple(str(v) for v in (reader.variation_names or ())),
        weights_give=spec.weights_give, branches=tuple(reader.branches),
        bytes_read=int(stats.bytes_read), entries_read=n_total)
    starts = getattr(unit, "starts_file", unit.first_event == 0)
    entry_range = getattr(unit, "entry_range", None)
    starts = starts and (entry_range is None or entry_range[0] == 0)
    result.files[(sample, unit.file_index)] = FileRecord(
        sample, unit.file_index, unit.path, os.path.getsize(unit.path),
        sha256_of(unit.path) if starts else None, n_total, info)
    result.seconds = seconds
    return result

