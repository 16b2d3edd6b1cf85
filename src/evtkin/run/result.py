"""What a run gives back: :class:`RunResult` (``result[sample][histogram]``) and one
:class:`SampleResult` per sample (normalised histograms, σ, cutflow, bands, responses). Built by
:mod:`evtkin.run.pipeline`, written by :mod:`evtkin.run.outputs`."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from evtkin.hists.fill import HistAccumulator
from evtkin.hists.record import HistRecord
from evtkin.hists.response import Response
from evtkin.hists.xsec import XsecResult
from evtkin.output import tables
from evtkin.output.results import Results
from evtkin.run.partial import PartialResult
from evtkin.run.plan import Plan

__all__ = ["RunResult", "SampleResult", "results_record"]


@dataclass
class SampleResult:
    """Everything evtkin knows about one sample after a run (normalised)."""

    name: str
    label: str
    luminosity_fb: float | None
    toy: bool
    xsec: XsecResult | None
    variations: tuple[str, ...]
    #: the normalised histograms, carrying their bands (evtkin.hists.record)
    histograms: dict[str, HistRecord]
    #: per histogram: Σw, Σw² with the normalised per-event weights (before the normalisation mode)
    weighted: dict[str, HistAccumulator]
    cutflow: list[dict[str, Any]]
    n_events: int
    #: per histogram: uncertainty bands (name → Band) from the resolved recipes
    bands: dict[str, dict[str, Any]] = field(default_factory=dict)
    #: per 1-D histogram: the same bands formed from unit-area shapes, each variation
    #: normalised on its own (what a shape-only comparison draws)
    shape_bands: dict[str, dict[str, Any]] = field(default_factory=dict)
    #: the recipes applied to this sample and notes on how they were resolved
    recipes: list[Any] = field(default_factory=list)
    uncertainty_notes: list[str] = field(default_factory=list)
    #: per histogram marked ``response = true``: evtkin.hists.response.Response
    responses: dict[str, Response] = field(default_factory=dict)
    #: per object-level variation (``jes_up``, ...): its normalised histograms (nominal weight)
    varied: dict[str, dict[str, HistRecord]] = field(default_factory=dict)
    #: per region: its cutflow (the common rows up to where it branches off, then its steps)
    region_cutflows: dict[str, list[dict[str, Any]]] = field(default_factory=dict)
    #: a data sample (``data = true``): counted events, weight 1, no cross section
    data: bool = False


@dataclass(eq=False, repr=False)
class RunResult(Results):
    """What :func:`evtkin.run` returns: a :class:`~evtkin.output.results.Results` mapping,
    ``result[sample][histogram]`` a ``hist.Hist`` (Weight storage, per-bin contents; see
    :mod:`evtkin.hists.histview`), equal to what :func:`evtkin.load_results` reads back from
    the results folder. Beside the mapping: ``samples`` (the run's full per-sample record:
    normalised contents of every variation, accumulators, cross sections), ``provenance``,
    ``out`` (the folder written, if any), ``seconds`` (per stage) and ``partial`` (the merged
    sums before normalisation)."""

    samples: dict[str, SampleResult]
    provenance: dict[str, Any]
    out: Path | None = None
    seconds: dict[str, float] = field(default_factory=dict)
    #: the merged, not yet normalised sums (written as ``partial.npz`` for ``evtkin merge``)
    partial: PartialResult | None = None
    #: the plan the run followed (names the axes and the output formats of the mapping view)
    plan: Plan | None = field(default=None, repr=False)
    _samples_view: dict[str, Any] | None = field(default=None, init=False, repr=False)
    _meta: dict[str, Any] | None = field(default=None, init=False, repr=False)

    def _view(self) -> dict[str, Any]:
        if self._samples_view is None:
            from evtkin.output.results import from_record

            if self.plan is None:
                raise ValueError("RunResult made without its plan: no histogram view")
            formats = set(self.plan.config.output.formats)
            record = results_record(self.plan, self, with_cutflow="cutflow" in formats)
            text = (self.provenance.get("config") or {}).get("text")
            self._samples_view = from_record(record, config_text=text)
            self._meta = dict(record.meta)
        return self._samples_view

    @property
    def meta(self) -> dict[str, Any]:  # type: ignore[override]
        self._view()
        return dict(self._meta or {})

    @meta.setter
    def meta(self, value: Any) -> None:  # Results.__init__ is not called (dataclass)
        self._meta = dict(value)

    def hists(self, sample: str) -> Any:
        """The histograms of one sample (``result[sample]``)."""
        return self[sample]

    @property
    def histograms(self) -> dict[str, Any]:
        """``{sample: {histogram: hist.Hist}}``."""
        return dict(self.items())


def _with_region(plan: Plan, name: str, h: tables.HistResult) -> tables.HistResult:
    base = plan.hist_base.get(name, name)
    if base != name:
        h.region = name[len(base) + 1:]
    return h


def results_record(plan: Plan, result: RunResult, *, with_cutflow: bool = True) -> tables.Results:
    """The plain results record of a run (nominal values and uncertainty bands)."""
    samples = {}
    for name, s in result.samples.items():
        samples[name] = tables.SampleResult(
            name=name,
            label=s.label,
            luminosity_fb=s.luminosity_fb,
            xsec=s.xsec.to_dict() if s.xsec is not None else {},
            variations=list(s.variations),
            histograms={h: _with_region(plan, h, nh)  # the records, with their bands
                        for h, nh in s.histograms.items()},
            cutflow=list(s.cutflow) if with_cutflow else [],
            region_cutflows=dict(getattr(s, "region_cutflows", {})) if with_cutflow else {},
            data=s.data,
        )
    meta: dict[str, Any] = {"analysis": plan.config.name}
    if plan.config.note:
        meta["note"] = plan.config.note
    elif any(s.toy for s in plan.config.samples.values()):
        meta["note"] = "toy data — not a physics prediction"
    skipped = (result.provenance or {}).get("skipped")
    if skipped:  # --skip-bad: the units left out, so nothing is silently missing
        meta["skipped"] = list(skipped)
    meta.update(plot_meta(plan.config))
    return tables.Results(samples=samples, meta=meta)


def plot_meta(cfg: Any) -> dict[str, Any]:
    """results.json's ``plot`` (the config's plot options, per histogram too, and √s) and
    ``measured`` (the measured tables, read now) records; see docs/results-format.md."""
    from evtkin.output.measured import read_measured

    plot: dict[str, Any] = dict(cfg.plot.options)
    per_hist = {h: dict(spec.plot) for h, spec in cfg.histograms.items() if spec.plot}
    if per_hist:
        plot["histograms"] = per_hist
    sqrt_s = cfg.plot.sqrt_s_gev or _sqrt_s_of(cfg)
    if sqrt_s:
        plot["sqrt_s_gev"] = sqrt_s
    out: dict[str, Any] = {"plot": plot} if plot else {}
    if cfg.plot.measured:
        out["measured"] = {
            name: {"label": m.label, "toy": m.toy,
                   "tables": {h: dict(read_measured(f).to_dict(), toy=m.toy)
                              for h, f in m.tables.items()}}
            for name, m in cfg.plot.measured.items()}
    return out


def _sqrt_s_of(cfg: Any) -> float | None:
    """√s of the samples' beams (LHE: the ``<init>`` beam energies; HepMC: the invariant mass
    of the first event's beam particles, status 4), when every sample that says agrees (else
    ``None``)."""
    from evtkin.io.lhe_header import lhe_info

    values = []
    for s in cfg.samples.values():
        if not s.files:
            continue
        try:
            if s.format == "lhe":
                values.append(lhe_info(s.files[0]).sqrt_s)
            elif s.format == "hepmc":
                v = _hepmc_sqrt_s(s.files[0])
                if v is not None:
                    values.append(v)
        except (OSError, ValueError):
            continue
    if values and max(values) - min(values) <= 1e-6 * max(values):
        return float(values[0])
    return None


def _hepmc_sqrt_s(path: Path) -> float | None:
    """√s = the mass of the two beam particles (status 4) of the file's first event."""
    import awkward as ak
    import numpy as np

    from evtkin.io.hepmc import read_hepmc

    events = read_hepmc(path, step_size=1)
    try:
        first = next(iter(events), None)
    finally:
        close = getattr(events, "close", None)
        if close is not None:
            close()
    if first is None:
        return None
    p = first["particles"][0]
    beams = p[p["status"] == 4]
    if len(beams) != 2:
        return None
    e, px, py, pz = (float(ak.sum(beams[k])) for k in ("energy", "px", "py", "pz"))
    m2 = e * e - px * px - py * py - pz * pz
    return float(np.sqrt(m2)) if m2 > 0 else None

