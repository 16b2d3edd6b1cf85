"""The run plan: a validated config turned into what every chunk of events goes through.

:class:`Plan` is picklable (plain dataclasses, parsed expression trees, histogram specs),
so any executor can ship it to workers. :func:`analyse_chunk` runs the physics on one
chunk of events: objects (thresholds, isolation, anti-kT, overlap removal in the declared
order), missing pT, the ordered selection steps, composites and derived quantities (both
computed lazily, only when a step or histogram asks for them), and returns the masks and
the values to histogram. All of it is whole-array awkward/numpy work through
:mod:`evtkin.select`; there is no per-event Python loop.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import awkward as ak
import numpy as np

from evtkin.config import AnalysisConfig, CompositeSpec, HistogramSpec
from evtkin.errors import ConfigError
from evtkin.expr import Expression, ExpressionError, evaluate
from evtkin.hists.fill import AxisSpec, HistSpec
from evtkin.select import build
from evtkin.select import composites as comp
from evtkin.select import kinematics as kin

__all__ = ["ChunkView", "Plan", "analyse_chunk", "build_plan", "hist_entries"]

#: rows of every cutflow: "all events" then one per step
ALL_EVENTS = "all events"


@dataclass(frozen=True)
class Plan:
    """Everything a worker needs to process a unit of work.

    Histograms are named as filled: a config histogram without regions under its own name, one
    with regions once per region as ``NAME@REGION`` (:attr:`hist_base` maps back to the config
    name, :attr:`hist_row` gives the cutflow row whose events fill it). The cutflow rows
    (:attr:`cutflow_rows`) are ``all events``, the common steps, then every region's own steps;
    :attr:`region_rows` lists the rows of each region's cutflow. :attr:`variations` are the
    object-level systematic runs ``(name, systematic, sign)``.
    """

    config: AnalysisConfig
    hist_specs: dict[str, HistSpec]
    step_size: int
    max_events: int | None = None
    hist_base: dict[str, str] = field(default_factory=dict)
    hist_row: dict[str, int] = field(default_factory=dict)
    rows: tuple[str, ...] = ()
    region_rows: dict[str, tuple[int, ...]] = field(default_factory=dict)
    variations: tuple[tuple[str, Any, float], ...] = ()
    #: where work units put the part files of event tables (set by the pipeline)
    skim_dir: str | None = None
    #: read damaged inputs leniently (``read_lhe(strict=False)``: skip damaged events, warn)
    lenient: bool = False
    #: a unit whose input fails after some chunks keeps them (``--skip-bad``)
    keep_partial: bool = False

    @property
    def cutflow_rows(self) -> tuple[str, ...]:
        return self.rows or (ALL_EVENTS, *(s.name for s in self.config.steps))

    @property
    def common_rows(self) -> int:
        """The number of rows of the common cutflow (``all events`` and the common steps)."""
        return 1 + len(self.config.steps)

    def histogram(self, name: str) -> HistogramSpec:
        """The config histogram a filled histogram (``NAME`` or ``NAME@REGION``) comes from."""
        return self.config.histograms[self.hist_base.get(name, name)]

    def histograms_for(self, sample: str) -> list[str]:
        names = self.hist_specs if self.hist_base else self.config.histograms
        return [n for n in names
                if (h := self.histogram(n)).samples is None or sample in h.samples]

    def row_of(self, name: str) -> int:
        """The cutflow row whose events fill histogram ``name``."""
        if name in self.hist_row:
            return self.hist_row[name]
        h = self.histogram(name)
        steps = [s.name for s in self.config.steps]
        return steps.index(h.after) + 1 if h.after is not None else len(steps)

    def skim_row(self, skim: Any) -> int:
        """The cutflow row whose events an event table holds."""
        if skim.region is not None:
            return self.region_rows[skim.region][-1]
        steps = [s.name for s in self.config.steps]
        return steps.index(skim.after) + 1 if skim.after is not None else len(steps)


DEFAULT_STEP_SIZE = 100_000


def _axes(h: Any) -> tuple[AxisSpec, ...]:
    axes = []
    for key, a in zip(("x", "y"), h.axes, strict=False):
        if a.regular:
            ax = AxisSpec.regular(len(a.edges) - 1, a.edges[0], a.edges[-1], name=key,
                                  label=a.label, unit=a.unit)
        else:
            ax = AxisSpec.variable(a.edges, name=key, label=a.label, unit=a.unit)
        axes.append(ax)
    return tuple(axes)


def build_plan(config: AnalysisConfig, *, step_size: int | None = None,
               max_events: int | None = None) -> Plan:
    """Turn a validated config into a :class:`Plan` (histogram specs for the fill layer)."""
    if step_size is not None and step_size <= 0:
        raise ConfigError(f"step size must be a positive number of events, got {step_size}")
    if max_events is not None and max_events < 0:
        raise ConfigError(f"max events must be >= 0, got {max_events}")
    steps = [s.name for s in config.steps]
    rows: list[str] = [ALL_EVENTS, *steps]
    region_rows: dict[str, tuple[int, ...]] = {}
    for rname, region in config.regions.items():
        start = steps.index(region.after) + 1 if region.after is not None else len(steps)
        own = []
        for st in region.steps:
            own.append(len(rows))
            rows.append(st.name)
        region_rows[rname] = (*range(start + 1), *own)
    specs: dict[str, HistSpec] = {}
    base: dict[str, str] = {}
    hist_row: dict[str, int] = {}
    for name, h in config.histograms.items():
        if not h.regions:
            specs[name] = HistSpec(name, _axes(h), h.title)
            base[name] = name
            hist_row[name] = steps.index(h.after) + 1 if h.after is not None else len(steps)
            continue
        for r in h.regions:
            full = f"{name}@{r}"
            if full in config.histograms:
                raise ConfigError(f"{config.source}: histograms.{name}: its copy for region "
                                  f"{r!r} would be named {full!r}, which is another histogram")
            specs[full] = HistSpec(full, _axes(h), f"{h.title} — region {r}")
            base[full] = name
            hist_row[full] = region_rows[r][-1]
    variations: list[tuple[str, Any, float]] = []
    for sys in config.systematics.values():
        if sys.kind == "energy_scale":
            variations += [(f"{sys.name}_up", sys, 1.0), (f"{sys.name}_down", sys, -1.0)]
        else:
            variations.append((sys.name, sys, 1.0))
    size = step_size or config.step_size or DEFAULT_STEP_SIZE
    return Plan(config, specs, size, max_events, base, hist_row, tuple(rows), region_rows,
                tuple(variations))


# --------------------------------------------------------------------------- composites

def _leading(collection: Any) -> Any:
    return ak.firsts(collection, axis=1)


def _build_composite(spec: CompositeSpec, get: Callable[[str], Any]) -> Any:
    o = spec.options
    if spec.build == "pair":
        kwargs = dict(mass_window=o["mass_window"], dr_min=o["min_dr"], dr_max=o["max_dr"],
                      opposite_charge=o["opposite_charge"])
        if len(spec.inputs) == 1:
            cands = comp.combinations(get(spec.inputs[0]), 2, **kwargs)
        else:
            cands = comp.cartesian(get(spec.inputs[0]), get(spec.inputs[1]), **kwargs)
        if o["same_flavour"]:
            cands = cands[np.abs(cands["d0"]["pdgid"]) == np.abs(cands["d1"]["pdgid"])]
        if o["best_mass"] is not None:
            return comp.best_by_mass(cands, o["best_mass"])
        return cands
    if spec.build == "leptonic_w":
        lepton = _leading(get(spec.inputs[0]))
        nu, w = comp.leptonic_w(lepton, get(spec.inputs[1]), m_w=o["w_mass"], choice=o["root"])
        fields = {f: w[f] for f in ak.fields(w)}
        return ak.zip({**fields, "neutrino": nu, "lepton": lepton}, with_name="Momentum4D",
                      depth_limit=1)
    # ttbar_lepton_jets
    lepton = _leading(get(spec.inputs[0]))
    jets = get(spec.inputs[1])
    nu, _ = comp.leptonic_w(lepton, get(spec.inputs[2]), m_w=o["w_mass"],
                            choice=o["neutrino_root"])
    bmask = None
    if o["use_b_tags"]:
        fields = ak.fields(jets)
        bmask = jets["btag"] if "btag" in fields else np.abs(jets["pdgid"]) == 5
    return comp.ttbar_lepton_jets(
        lepton, nu, jets, bmask, m_w=o["w_mass"], m_t=o["top_mass"],
        sigma_w=o["w_resolution"], sigma_t=o["top_resolution"], max_jets=o["max_jets"],
    )


def _variation_function(variation: tuple[str, Any, float] | None
                        ) -> Callable[[Any], Any] | None:
    if variation is None:
        return None
    from evtkin.select.variations import vary

    _, sys, sign = variation

    def apply(objs: Any) -> Any:
        return vary(objs, sys.kind, sys.size, sign=sign, seed=sys.seed, name=sys.name)

    return apply


class ChunkView:
    """The names an expression can use on one chunk, computed on first use and cached."""

    def __init__(self, plan: Plan, chunk: Any,
                 variation: tuple[str, Any, float] | None = None) -> None:
        self.plan = plan
        self.chunk = chunk
        self._cache: dict[str, Any] = {}
        self._busy: set[str] = set()
        cfg = plan.config
        vary = _variation_function(variation)
        varied = set(variation[1].objects) if variation is not None else set()
        if "particles" not in ak.fields(chunk):  # a ROOT ntuple: objects from its collections
            self._cache.update(build.collection_objects(
                chunk, cfg.objects, cfg.overlap_removal, cfg.missing_pt, cfg.source,
                vary=vary, varied=varied))
        else:
            self._cache.update(build.particle_objects(
                chunk["particles"], cfg.objects, cfg.overlap_removal, cfg.missing_pt,
                vary=vary, varied=varied))

    def __len__(self) -> int:
        return len(self.chunk)

    def resolve(self, name: str) -> Any:
        if name in self._cache:
            return self._cache[name]
        cfg = self.plan.config
        if name == "particles":
            value = self.chunk["particles"]
        elif name == "process_id" and "signal_process_id" in ak.fields(self.chunk):
            # HepMC: the file's signal process id (the chunk's own process_id, the key the
            # normalisation is kept by, is 0 for every event of a HepMC file)
            value = self.chunk["signal_process_id"]
        elif name in ("weight", "scale", "alpha_qcd", "alpha_qed", "process_id"):
            value = self.chunk[name]
        elif name in cfg.tables:
            value = cfg.tables[name]
        elif name in _scalars(cfg) and name in ak.fields(self.chunk):
            value = self.chunk[name]
        elif name in cfg.composites:
            value = self._guarded(name, lambda: _build_composite(cfg.composites[name],
                                                                 self.resolve))
        elif name in cfg.quantities:
            value = self._guarded(name, lambda: evaluate(cfg.quantities[name], self.resolve))
        else:
            raise KeyError(name)
        self._cache[name] = value
        return value

    def _guarded(self, name: str, compute: Callable[[], Any]) -> Any:
        if name in self._busy:  # pragma: no cover - configs with cycles are rejected earlier
            raise ConfigError(f"{name!r} refers to itself")
        self._busy.add(name)
        try:
            return compute()
        finally:
            self._busy.discard(name)

    def where(self, expr: Expression, where: str) -> str:
        """``config.toml:LINE: key`` of an expression (its recorded place, else ``where``)."""
        return expr.where or f"{self.plan.config.source}: {where}"

    def evaluate(self, expr: Expression, where: str) -> Any:
        try:
            return evaluate(expr, self.resolve)
        except ExpressionError as exc:
            raise ConfigError(exc.render(f"{self.where(expr, where)}: ")) from None


def _scalars(cfg: AnalysisConfig) -> set[str]:
    return {n for s in cfg.samples.values() if s.input is not None for n in s.input.scalars}


def analyse_chunk(plan: Plan, chunk: Any, view: ChunkView | None = None
                  ) -> tuple[ChunkView, list[np.ndarray]]:
    """Objects and the cumulative selection masks of one chunk.

    Returns the view (for quantities and histogram values) and one boolean numpy mask per
    cutflow row (row 0 = all events, then after each common step, cumulative, then each
    region's steps, starting from the events of the common step it branches off). Missing
    values in a condition count as failing. ``view``: analyse this view (e.g. one with varied
    objects) instead of a new one.
    """
    if view is None:
        view = ChunkView(plan, chunk)
    n = len(chunk)
    current = np.ones(n, dtype=bool)
    masks = [current]
    for i, step in enumerate(plan.config.steps):
        value = view.evaluate(step.require, f"step[{i}].require")
        current = current & _event_bool(value, n, view.where(step.require, f"step[{i}].require"),
                                        step.require.text)
        masks.append(current)
    for rname, region in plan.config.regions.items():
        current = masks[plan.region_rows[rname][len(plan.region_rows[rname]) - len(region.steps)
                                                - 1]]
        for k, step in enumerate(region.steps):
            key = f"regions.{rname}.steps[{k}].require"
            value = view.evaluate(step.require, key)
            current = current & _event_bool(value, n, view.where(step.require, key),
                                            step.require.text)
            masks.append(current)
    return view, masks


def event_bool(value: Any, n: int, where: str, text: str) -> np.ndarray:
    """One true/false per event from a condition's value (missing counts as false); a value
    that is not one per event is a ConfigError naming ``where``."""
    return _event_bool(value, n, where, text)


def _event_bool(value: Any, n: int, where: str, text: str) -> np.ndarray:
    if isinstance(value, (bool, np.bool_)):
        return np.full(n, bool(value))
    arr = value if isinstance(value, ak.Array) else ak.Array(np.asarray(value))
    if arr.ndim != 1 or len(arr) != n:
        raise ConfigError(
            f"{where}: {text!r} gives a value per object; a condition must give one true/false "
            "per event: for a collection use count(...), min(...), max(...) or an index [0]"
        )
    filled = ak.fill_none(arr, False)
    return np.asarray(ak.to_numpy(filled), dtype=bool)


def event_weight(plan: Plan, view: ChunkView, sample: str) -> np.ndarray | None:
    """The product of the analysis' and the sample's weight expressions for every event of
    the view (``None`` without any); a missing value counts as 1."""
    out: np.ndarray | None = None
    n = len(view)
    for key, expr in (("analysis.weight", plan.config.weight),
                      (f"samples.{sample}.weight", plan.config.samples[sample].weight)):
        if expr is None:
            continue
        value = view.evaluate(expr, key)
        where = view.where(expr, key)
        if isinstance(value, ak.Array):
            if value.ndim != 1 or ak.fields(value):
                what = "objects" if ak.fields(value) else "a value per object"
                raise ConfigError(f"{where}: {expr.text!r} gives {what}; an event weight must "
                                  "give one number per event (e.g. prod(...) over objects)")
            col = np.asarray(ak.to_numpy(ak.fill_none(value, 1.0)), dtype=np.float64)
        else:
            col = np.broadcast_to(np.asarray(value, dtype=np.float64), (n,)).copy()
        if col.shape != (n,):
            raise ConfigError(f"{where}: {expr.text!r} must give one number per event")
        out = col if out is None else out * col
    return out


# --------------------------------------------------------------------------- histogram values

def hist_entries(view: ChunkView, name: str, mask: np.ndarray
                 ) -> tuple[list[np.ndarray], np.ndarray]:
    """Flat value arrays (one per axis) and the event row of every entry of histogram ``name``.

    A value per event gives one entry per selected event, a value per object one entry per
    object; missing values (``None``, e.g. ``jets[2].pt`` with two jets) give no entry.
    """
    spec = view.plan.histogram(name)
    n = len(view)
    rows_all = np.flatnonzero(mask)
    values = []
    for key, axis in zip(("x", "y"), spec.axes, strict=False):
        path = f"histograms.{spec.name}.{key}.value"
        v = view.evaluate(axis.value, path)
        if not isinstance(v, ak.Array):
            v = ak.Array(np.broadcast_to(np.asarray(v, dtype=np.float64), (n,)).copy())
        if ak.fields(v):
            raise ConfigError(
                f"{view.where(axis.value, path)}: "
                f"{axis.value.text!r} gives objects; histogram a number such as .pt or .mass"
            )
        if v.ndim > 2:
            raise ConfigError(
                f"{view.where(axis.value, path)}: "
                f"{axis.value.text!r} has more than one value per object"
            )
        values.append(v[mask])
    if len(values) == 2 and (values[0].ndim > 1 or values[1].ndim > 1):
        values = list(ak.broadcast_arrays(*values))
    flat_event = [_event_column(v) for v in values]
    if all(f is not None for f in flat_event):  # one number per event: plain numpy from here
        keep_rows = np.ones(len(rows_all), dtype=bool)
        cols = []
        for f in flat_event:
            assert f is not None
            col, none = f
            keep_rows &= ~none
            cols.append(col)
        if keep_rows.all():
            return cols, rows_all
        return [c[keep_rows] for c in cols], rows_all[keep_rows]
    first = values[0]
    if first.ndim == 2:
        counts = ak.to_numpy(ak.num(first, axis=1))
        rows = np.repeat(rows_all, counts)
        flat = [ak.flatten(v, axis=1) for v in values]
    else:
        rows = rows_all
        flat = values
    keep = np.ones(len(rows), dtype=bool)
    out = []
    for v in flat:
        none = ak.to_numpy(ak.is_none(v, axis=0))
        keep &= ~none
        out.append(np.asarray(ak.to_numpy(ak.fill_none(v, np.nan)), dtype=np.float64))
    if not keep.all():
        out = [o[keep] for o in out]
        rows = rows[keep]
    return out, rows


def _event_column(values: ak.Array) -> tuple[np.ndarray, np.ndarray] | None:
    """``(float64 values, missing)`` of a one-number-per-event array read from its buffers
    (missing values as NaN in the first); ``None`` for other layouts."""
    layout = values.layout
    if values.ndim != 1:
        return None
    if layout.is_option:
        if layout.content.is_option or layout.content.is_union:
            return None
        index = (layout.index.data if layout.is_indexed
                 else layout.to_IndexedOptionArray64().index.data)
        missing = np.asarray(index) < 0
    else:
        missing = np.zeros(len(values), dtype=bool)
    col = kin._layout_numpy(layout)
    if col is None:
        return None
    return col, missing
