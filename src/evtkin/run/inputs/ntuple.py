"""ROOT ntuples as a run input: reading only the branches the config uses, entry-range work
units, cross sections, and the generator-level (truth) join. The objects are built from the
mapped collections by :func:`evtkin.select.build.collection_objects`.

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

from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

import awkward as ak
import numpy as np

from evtkin.errors import ConfigError, NtupleError
from evtkin.expr import Expression, Node
from evtkin.hists.xsec import FileTotals, XsecResult, effective_entries
from evtkin.run.inputs.base import InputSource, UnitReading
from evtkin.run.workunit import WorkUnit, entry_ranges

if TYPE_CHECKING:  # pragma: no cover
    from evtkin.config import AnalysisConfig, SampleSpec
    from evtkin.io.ntuple import NtupleReader
    from evtkin.io.ntuple_mapping import NtupleMapping
    from evtkin.run.partial import FileRecord
    from evtkin.run.plan import Plan

__all__ = ["NtupleRunInfo", "NtupleSource", "TruthJoin", "config_fields", "ntuple_xsec"]


# --------------------------------------------------------------------------- what to read

def _attrs(node: Node, out: set[str]) -> None:
    if node.kind == "attr":
        out.add(str(node.value))
    for a in node.args:
        _attrs(a, out)


def _expressions(cfg: AnalysisConfig) -> list[Expression]:
    exprs = [s.require for s in cfg.steps] + list(cfg.quantities.values())
    exprs += [a.value for h in cfg.histograms.values() for a in h.axes]
    exprs += [o.require for o in cfg.objects.values() if o.require is not None]
    exprs += [st.require for r in getattr(cfg, "regions", {}).values() for st in r.steps]
    exprs += [e for k in getattr(cfg, "skims", {}).values() for e in k.columns.values()]
    exprs += [e for e in (getattr(cfg, "weight", None),
                          *(getattr(s, "weight", None) for s in cfg.samples.values()))
              if e is not None]
    return exprs


def config_fields(cfg: AnalysisConfig, mapping: NtupleMapping) -> list[str]:
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
    for comp in cfg.composites.values():
        if comp.options.get("use_b_tags"):
            used.add("btag")
        if comp.options.get("opposite_charge"):
            used.add("charge")
    out: list[str] = []
    for o in cfg.objects.values():
        for src in o.source or ():
            c = mapping.collections[src]
            extras = [f for f in c.fields if f in used]
            out += ([f"{c.name}.{f}" for f in extras] if extras
                    else [f"{c.name}.{next(iter(c.coords))}"])
    if cfg.missing_pt is not None and cfg.missing_pt.source is not None:
        out.append(cfg.missing_pt.source)
    names: set[str] = set()
    for e in _expressions(cfg):
        names |= set(e.names)
    out += [n for n in mapping.scalars if n in names]
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


def ntuple_xsec(spec: SampleSpec, totals: Sequence[FileTotals]) -> XsecResult:
    """σ bookkeeping of an ntuple sample from its files' :class:`~evtkin.hists.xsec.FileTotals`
    (module docstring: ``weights_give`` = "mean" or "sum", optional ``cross_section_pb``)."""
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

    def __init__(self, paths: Sequence[str], step_size: int, where: str,
                 error: type[Exception] = NtupleError) -> None:
        from evtkin.io.lhe import read_lhe

        self.paths = [str(p) for p in paths]
        self.where = where
        self.error = error
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
            raise self.error(f"{self.where}: event numbers decrease; the truth join needs them "
                              "in the order of the generator-level files")
        lo, hi = int(numbers[0]), int(numbers[-1])
        if lo < 0:
            raise self.error(f"{self.where}: negative event number {lo}")
        self._last = hi
        while self._stop <= hi:
            chunk = next(self._readers, None)
            if chunk is None:
                raise self.error(
                    f"{self.where}: event number {hi} has no generator-level event: the truth "
                    f"files ({', '.join(self.paths)}) hold {self._stop} events")
            self._buffer.append(chunk)
            self._stop += len(chunk)
            self._joined = None
            self._drop_before(lo)  # a unit far into the file: memory stays a few chunks
        self._drop_before(lo)
        if self._joined is None:
            self._joined = (self._buffer[0] if len(self._buffer) == 1
                            else ak.concatenate(self._buffer, axis=0))
        return self._joined[numbers - self._start]

    def _drop_before(self, lo: int) -> None:
        while self._buffer and self._start + len(self._buffer[0]) <= lo:
            self._start += len(self._buffer.pop(0))
            self._joined = None


# --------------------------------------------------------------------------- the source

def _reader(plan: Plan, unit: WorkUnit, spec: SampleSpec, truth: bool) -> NtupleReader:
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


class _NtupleReading(UnitReading):
    def __init__(self, plan: Plan, unit: WorkUnit, with_truth: bool) -> None:
        spec = plan.config.samples[unit.sample]
        self.unit = unit
        self.spec = spec
        self.reader = _reader(plan, unit, spec, with_truth)
        self.join = (TruthJoin([str(p) for p in spec.truth_files], plan.step_size,
                               f"{unit.path} (samples.{unit.sample}.truth_files)")
                     if with_truth else None)
        self._tree: tuple[str, int] | None = None
        self._names: tuple[str, ...] | None = None

    def chunks(self) -> Iterator[Any]:
        for chunk in self.reader:
            if self._tree is None and self.reader._open is not None:
                self._tree = (str(self.reader._open.tree_name), int(self.reader._open.entries))
            if self._names is None:
                self._names = tuple(str(v) for v in (self.reader.variation_names or ()))
            yield chunk

    def variation_names(self) -> tuple[str, ...] | None:
        return self._names

    def truth(self, chunk: Any) -> Any:
        if self.join is None:
            return None
        return self.join.take(np.asarray(ak.to_numpy(chunk["event_number"]), dtype=np.int64))

    def close(self) -> None:
        self.reader.close()

    def file_info(self, n_events: int) -> NtupleRunInfo:
        reader, spec = self.reader, self.spec
        tree = self._tree
        if tree is None:
            from evtkin.io.ntuple import describe_ntuple

            d = describe_ntuple(self.unit.path, spec.input, fields=[])
            tree = (d.tree, d.entries)
        names = (self._names if self._names is not None
                 else tuple(str(v) for v in (reader.variation_names or ())))
        return NtupleRunInfo(
            path=self.unit.path, tree=tree[0], entries=tree[1], weight_names=names,
            weights_give=spec.weights_give, branches=tuple(reader.branches),
            bytes_read=int(reader.stats.bytes_read), entries_read=n_events)


class NtupleSource(InputSource):
    """ROOT ntuples through a declared branch mapping (``[samples.NAME.input]``)."""

    format = "root"

    def work_units(self, spec: SampleSpec, file_index: int, path: str, size: int, parts: int,
                   max_events: int | None) -> list[WorkUnit]:
        if parts <= 1:
            return super().work_units(spec, file_index, path, size, 1, max_events)
        from evtkin.io.ntuple import describe_ntuple

        n = describe_ntuple(path, spec.input, fields=[]).entries
        ranges = entry_ranges(n, parts)
        return [WorkUnit(spec.name, file_index, path, entry_range=(a, b), part=k,
                         n_parts=len(ranges), size=size * (b - a) // max(n, 1),
                         format=self.format)
                for k, (a, b) in enumerate(ranges)]

    def open(self, plan: Plan, unit: WorkUnit, *, read_threads: int | None = None,
             with_truth: bool = False) -> UnitReading:
        return _NtupleReading(plan, unit, with_truth)

    def provenance(self, info: Any) -> dict[str, Any]:
        return info.provenance() if isinstance(info, NtupleRunInfo) else {}

    def cross_section(self, spec: SampleSpec, records: Sequence[FileRecord],
                      totals: Sequence[FileTotals]) -> XsecResult:
        return ntuple_xsec(spec, totals)
