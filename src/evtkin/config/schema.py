"""The validated analysis description: frozen spec classes that the run, hists and output
layers import, and the vocabularies (allowed names and values) the readers check against."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from evtkin.expr import Expression
from evtkin.select.objects import PDG_CLASSES

#: per-event names every expression may use besides the config's own names
EVENT_FIELDS: dict[str, str] = {
    "weight": "the event weight as written in the file (XWGTUP)",
    "scale": "the event scale in GeV (SCALUP)",
    "alpha_qcd": "the strong coupling of the event (AQCDUP)",
    "alpha_qed": "the electromagnetic coupling of the event (AQEDUP)",
    "process_id": "the process id of the event (IDPRUP; HepMC: the signal process id, -1 if none)",
    "particles": "every particle of the event record",
}

#: built-in particle classes (absolute PDG ids; both signs are taken), from the physics library
PARTICLE_CLASSES: dict[str, tuple[int, ...]] = dict(PDG_CLASSES)

#: histogram normalisations (names as in docs/results-format.md)
NORMALISATIONS = ("raw", "xsec_per_bin", "events", "unit_area")

#: values of ``[samples.NAME] format`` (each has an input source in evtkin.run.inputs)
SAMPLE_FORMATS = ("lhe", "root", "hepmc")

#: ``clustering = { algorithm = ... }``: the generalised-kT family (p = -1, 1, 0)
CLUSTER_ALGORITHMS = ("anti-kt", "kt", "cambridge")
#: ``clustering = { inputs = ... }``
CLUSTER_INPUTS = ("selected", "stable")
#: ``clustering = { ghosts = [...] }``: B hadrons, charm hadrons, hadronic τ
GHOST_LABELS = ("b", "c", "tau")
#: ``clustering = { exclude = [...] }``: this name stands for the invisible particles
EXCLUDE_INVISIBLES = "invisibles"

COMPOSITE_BUILDS = ("pair", "leptonic_w", "ttbar_lepton_jets")
OUTPUT_FORMATS = ("root", "json", "csv", "cutflow", "plots", "report")
PLOT_FORMATS = ("png", "pdf", "svg")

# PDG 2024 (Phys. Rev. D 110, 030001): m_W = 80.3692 GeV, m_t = 172.57 GeV
DEFAULT_W_MASS = 80.3692
DEFAULT_TOP_MASS = 172.57

UNCERTAINTY_METHODS = ("envelope", "replicas_std", "replicas_68", "hessian_symmetric",
                       "hessian_asymmetric", "quadrature", "updown")

#: object-level systematic kinds (``[systematics.NAME] kind``) and their size key
SYSTEMATIC_KINDS = {"energy_scale": "shift", "smearing": "resolution", "efficiency": "drop"}
SKIM_FORMATS = ("parquet", "root")


@dataclass(frozen=True)
class SampleSpec:
    name: str
    files: tuple[Path, ...]
    label: str
    cross_section_pb: float | None = None
    luminosity_fb: float | None = None
    toy: bool = False
    format: str = "lhe"
    #: ROOT ntuples (``format = "root"``): the branch mapping, an
    #: :class:`evtkin.io.ntuple_mapping.NtupleMapping` from ``[samples.NAME.input]``
    input: Any = None
    #: ROOT ntuples: how the event weights give σ: ``"mean"`` (σ = Σw/N, like IDWTUP ±4) or
    #: ``"sum"`` (each weight is the event's contribution to σ in pb: σ = Σw)
    weights_give: str = "mean"
    #: generator-level (LHE) files with the same events, matched by the ntuple's event number
    #: (0-based position in the LHE file): the truth level of response matrices
    truth_files: tuple[Path, ...] = ()
    #: an event-weight expression of this sample, multiplying the generator weight (and the
    #: analysis' ``weight``)
    weight: Expression | None = None
    #: ``data = true``: recorded (or pseudo-) data: every event counts with weight 1 (Σw² = N),
    #: no cross section, no variation weights, object-level variations or bands; histograms
    #: hold event counts (``xsec_per_bin``: counts / (L · bin width)); drawn as points
    data: bool = False


@dataclass(frozen=True)
class ObjectSpec:
    """One collection of objects built from the event record."""

    name: str
    pdgids: tuple[int, ...]  # absolute PDG ids
    classes: tuple[str, ...]  # the names written in the config
    status: tuple[int, ...] = (1,)
    min_pt: float | None = None
    max_abs_eta: float | None = None
    max_abs_rapidity: float | None = None
    from_decay_of: tuple[int, ...] = ()
    isolation_against: tuple[int, ...] = ()
    isolation_dr: float | None = None
    isolation_min_pt: float = 0.0
    cluster_radius: float | None = None
    #: isolation against other defined objects (``against_objects``), e.g. for ntuple input
    isolation_objects: tuple[str, ...] = ()
    #: ROOT ntuples: the mapped collection(s) the objects come from (``from = "NAME"`` or a
    #: list, e.g. ``["electrons", "muons"]``, merged keeping their common fields)
    source: tuple[str, ...] | None = None
    #: a condition on each object's fields (``require = "btag == 1 and iso < 0.1"``)
    require: Expression | None = None
    #: the clustering algorithm (one of :data:`CLUSTER_ALGORITHMS`)
    cluster_algorithm: str = "anti-kt"
    #: relative isolation: keep objects whose scalar pT sum of the stable visible particles
    #: within ``isolation_dr`` (the object's own particles left out) over the object's pT is
    #: below this value
    isolation_max_relative: float | None = None
    # ---- particle-level recipes (showered events, HepMC samples); on the generator-level
    # partner events of a response matrix (LHE truth_files) they are not applied
    #: only prompt particles (not descended from a hadron)
    prompt: bool = False
    #: dressed leptons: photons within this ΔR added to the nearest lepton
    dressing_radius: float | None = None
    #: the clustering's inputs: ``"selected"`` (the particles of ``particles``/``status``)
    #: or ``"stable"`` (every stable particle of the event, less ``cluster_exclude``)
    cluster_inputs: str = "selected"
    #: left out of the clustering: the particles of these collections (a dressed lepton
    #: with its photons) and, for ``"invisibles"``, the invisible particles
    cluster_exclude: tuple[str, ...] = ()
    #: ghost labels of the jets (of :data:`GHOST_LABELS`) and the hadrons' pT threshold
    ghosts: tuple[str, ...] = ()
    ghost_min_pt: float = 5.0

    @property
    def particle_level(self) -> tuple[str, ...]:
        """The particle-level recipe keys this definition uses (as written in the config)."""
        out = []
        if self.prompt:
            out.append("prompt")
        if self.dressing_radius is not None:
            out.append("dressing")
        if self.cluster_inputs != "selected":
            out.append("clustering.inputs")
        if self.cluster_exclude:
            out.append("clustering.exclude")
        if self.ghosts:
            out.append("clustering.ghosts")
        return tuple(out)


@dataclass(frozen=True)
class OverlapSpec:
    remove: str
    near: str
    within_dr: float


@dataclass(frozen=True)
class MissingPtSpec:
    name: str
    pdgids: tuple[int, ...]
    #: ROOT ntuples: the mapped per-event vector holding the missing pT (``from = "NAME"``)
    source: str | None = None
    #: particle level (HepMC samples): only prompt invisibles (not from hadron decays)
    prompt: bool = False


@dataclass(frozen=True)
class StepSpec:
    name: str
    require: Expression


@dataclass(frozen=True)
class RegionSpec:
    """A named selection branching off the common steps after the step ``after`` (default:
    all of them) with its own ordered ``steps``."""

    name: str
    after: str | None
    steps: tuple[StepSpec, ...]


@dataclass(frozen=True)
class SystematicSpec:
    """An object-level variation of the collections ``objects`` (see
    :mod:`evtkin.select.variations`; an object seen by several collections, e.g. a jet in
    ``jets`` and ``bjets``, is varied alike in all): ``kind`` is a key of
    :data:`SYSTEMATIC_KINDS`, ``size`` the shift, resolution or drop probability, ``seed`` for
    the random kinds."""

    name: str
    objects: tuple[str, ...]
    kind: str
    size: float
    seed: int = 0

    @property
    def variations(self) -> tuple[str, ...]:
        """The varied runs: ``NAME_up``, ``NAME_down`` for a scale shift, ``NAME`` else."""
        if self.kind == "energy_scale":
            return (f"{self.name}_up", f"{self.name}_down")
        return (self.name,)


@dataclass(frozen=True)
class SkimSpec:
    """An event table: the ``columns`` of the events passing ``after`` or ``region``."""

    name: str
    columns: Mapping[str, Expression]
    after: str | None = None
    region: str | None = None
    formats: tuple[str, ...] = SKIM_FORMATS
    samples: tuple[str, ...] | None = None
    variation_weights: bool = True


@dataclass(frozen=True)
class CompositeSpec:
    """A composite object; ``options`` hold the build-specific, validated settings."""

    name: str
    build: str
    inputs: tuple[str, ...]
    options: Mapping[str, Any]


@dataclass(frozen=True)
class AxisDef:
    value: Expression
    edges: tuple[float, ...]
    regular: bool
    label: str
    unit: str


@dataclass(frozen=True)
class HistogramSpec:
    name: str
    title: str
    axes: tuple[AxisDef, ...]
    normalise: str = "xsec_per_bin"
    after: str | None = None  # histogram events that passed this step (default: all steps)
    samples: tuple[str, ...] | None = None
    #: fill a truth × reconstructed response matrix (samples with ``truth_files``)
    response: bool = False
    #: the regions to fill it in (each gives its own histogram ``NAME@REGION``); empty: the
    #: common selection only
    regions: tuple[str, ...] = ()
    #: ``plot = {...}``: how this histogram is drawn (the keys of :data:`PLOT_KEYS`)
    plot: Mapping[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class OutputSpec:
    directory: Path | None = None
    formats: tuple[str, ...] = OUTPUT_FORMATS
    plot_formats: tuple[str, ...] = ("png", "pdf")


#: plot options, in ``[plot]`` (every histogram) and a histogram's ``plot`` table; the same
#: names as the options of ``evtkin plot`` (see docs/plots.md)
PLOT_KEYS = ("stack", "overlay", "data", "colours", "logy", "logx", "xrange", "yrange", "rebin",
             "formats", "figsize", "title", "ratio")


@dataclass(frozen=True)
class MeasuredSpec:
    """``[measured.NAME]``: tables of measured points, one per histogram (docs/plots.md)."""

    name: str
    label: str
    tables: Mapping[str, Path]
    toy: bool = False


@dataclass(frozen=True)
class PlotSpec:
    """``[plot]`` (options for every histogram, :data:`PLOT_KEYS`), the √s written on the
    plots when the files do not give it, and the ``[measured.NAME]`` tables."""

    options: Mapping[str, Any] = field(default_factory=dict)
    sqrt_s_gev: float | None = None
    measured: Mapping[str, MeasuredSpec] = field(default_factory=dict)


@dataclass(frozen=True)
class UncertaintySpec:
    """One ``[uncertainties.NAME]`` recipe (resolved against the files by
    :mod:`evtkin.hists.recipes`). ``lines`` maps a key (``""`` = the table) to its 1-based line."""

    name: str
    method: str
    group: str | None = None
    ids: tuple[str, ...] = ()
    drop_anticorrelated: bool = False
    of: tuple[str, ...] = ()
    samples: tuple[str, ...] | None = None
    lines: Mapping[str, int | None] = field(default_factory=dict)
    #: ``updown``: the object-level systematic (``[systematics.NAME]``) the band comes from
    systematic: str | None = None


@dataclass(frozen=True)
class AnalysisConfig:
    """A validated analysis description (what :func:`load_config` returns)."""

    name: str
    description: str
    note: str | None
    source: str  # file name (or "<dict>")
    text: str  # the config text as written (canonical JSON for dicts)
    sha256: str
    base_dir: Path
    step_size: int | None
    samples: dict[str, SampleSpec]
    objects: dict[str, ObjectSpec]
    overlap_removal: tuple[OverlapSpec, ...]
    missing_pt: MissingPtSpec | None
    steps: tuple[StepSpec, ...]
    composites: dict[str, CompositeSpec]
    quantities: dict[str, Expression]
    histograms: dict[str, HistogramSpec]
    output: OutputSpec
    classes: dict[str, tuple[int, ...]] = field(default_factory=dict)
    #: ``[uncertainties.NAME]`` recipes, in the order written
    uncertainties: tuple[UncertaintySpec, ...] = ()
    #: bands from the files' ``<weightgroup combine=...>`` (default: only if no recipe is given)
    uncertainties_automatic: bool = True
    #: an event-weight expression for every sample, multiplying the generator weight
    weight: Expression | None = None
    #: ``[tables]``: binned lookup tables by name (:class:`evtkin.select.lookup.BinnedTable`)
    tables: Mapping[str, Any] = field(default_factory=dict)
    #: ``[regions.NAME]``, in the order written
    regions: dict[str, RegionSpec] = field(default_factory=dict)
    #: ``[systematics.NAME]``, in the order written
    systematics: dict[str, SystematicSpec] = field(default_factory=dict)
    #: ``[skims.NAME]``, in the order written
    skims: dict[str, SkimSpec] = field(default_factory=dict)
    #: what loading noticed but did not refuse (e.g. a file listed twice)
    warnings: tuple[str, ...] = ()
    #: ``[plot]`` and ``[measured.NAME]``
    plot: PlotSpec = field(default_factory=PlotSpec)

    def names(self) -> dict[str, str]:
        """Every name an expression may use → what it is."""
        out = {k: "event field" for k in EVENT_FIELDS}
        out.update({k: "object collection" for k in self.objects})
        if self.missing_pt is not None:
            out[self.missing_pt.name] = "missing transverse momentum"
        out.update({k: "composite" for k in self.composites})
        out.update({k: "quantity" for k in self.quantities})
        out.update({k: "table" for k in self.tables})
        for spec in self.samples.values():
            if spec.input is not None:
                out.update({k: "ntuple scalar" for k in spec.input.scalars})
        return out
