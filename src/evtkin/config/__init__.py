"""Analysis configs: TOML text → a validated :class:`AnalysisConfig`.

The vocabulary (see ``configs/*.toml`` for complete examples)::

    [analysis]            name, description, note, luminosity_fb, step_size
    [classes]             user particle classes: name = [PDG ids] (both signs are taken)
    [samples.NAME]        files, label, cross_section_pb, luminosity_fb, toy, format,
                          and for format = "root": input (the branch mapping of
                          evtkin.io.ntuple_mapping), weights_give, truth_files
                          (truth_files also for format = "hepmc")
    [objects.NAME]        particles, status, min_pt, max_abs_eta, max_abs_rapidity,
                          from_decay_of, isolation = {against, within_dr}, clustering = {radius},
                          from (an ntuple collection), require (a condition on object fields),
                          isolation = {against_objects, within_dr},
                          clustering = {algorithm, radius},
                          particle level (HepMC): prompt, dressing = {radius},
                          clustering = {inputs, exclude, ghosts, ghost_min_pt},
                          isolation = {within_dr, max_relative_pt}
    [[overlap_removal]]   remove, near, within_dr               (applied in the order written)
    [missing_pt]          name, particles, from (an ntuple vector), prompt (HepMC)
    [[step]]              name, require                         (an ordered event selection)
    [composites.NAME]     build = "pair" | "leptonic_w" | "ttbar_lepton_jets" + options
    [quantities]          NAME = "expression"   (a number per event or object, or an object)
    [histograms.NAME]     title, x = {value, bins, range | edges, label, unit}, y = {...},
                          normalise, after, samples, response
    [output]              directory, formats, plot_formats
    [uncertainties.NAME]  method, group | ids, drop_anticorrelated, of, samples, systematic
                          (bands from variation weights; ``automatic = false`` turns off the
                          default bands taken from the files' weight groups; ``updown``: the
                          band of an object-level systematic)
    [regions.NAME]        after, require | steps = [{name, require}, ...]
    [tables]              NAME = "file.toml" (binned tables for lookup(NAME, ...))
    [systematics.NAME]    objects, kind = "energy_scale" | "smearing" | "efficiency",
                          shift | resolution | drop, seed
    [skims.NAME]          after | region, columns = {NAME = "expression"}, formats, samples,
                          variation_weights
    ([analysis] and [samples.NAME] also take weight = "expression": the event weight factor)

Every error names the config file, the 1-based line of the offending key (TOML parsers do
not report lines, so :class:`KeyLines` finds them by scanning the text), the dotted key path,
what was expected and, for misspelt keys or names, the closest known spelling.

The package: :mod:`~evtkin.config.keylines` (the TOML line scanner), :mod:`~evtkin.config.tables`
(the table walker), :mod:`~evtkin.config.schema` (the frozen spec classes other layers import),
one ``read_*`` module per section (or group of related sections), :mod:`~evtkin.config.checks`
(the cross-reference checks) and :mod:`~evtkin.config.loader` (:func:`load_config`).
"""


from __future__ import annotations

from evtkin.config.keylines import KeyLines
from evtkin.config.loader import _TOP as _TOP
from evtkin.config.loader import load_config
from evtkin.config.schema import (
    COMPOSITE_BUILDS,
    DEFAULT_TOP_MASS,
    DEFAULT_W_MASS,
    EVENT_FIELDS,
    NORMALISATIONS,
    OUTPUT_FORMATS,
    PARTICLE_CLASSES,
    PLOT_FORMATS,
    PLOT_KEYS,
    SAMPLE_FORMATS,
    SKIM_FORMATS,
    SYSTEMATIC_KINDS,
    UNCERTAINTY_METHODS,
    AnalysisConfig,
    AxisDef,
    CompositeSpec,
    HistogramSpec,
    MissingPtSpec,
    ObjectSpec,
    OutputSpec,
    OverlapSpec,
    RegionSpec,
    SampleSpec,
    SkimSpec,
    StepSpec,
    SystematicSpec,
    UncertaintySpec,
)
from evtkin.config.tables import _Table as _Table

__all__ = [
    "COMPOSITE_BUILDS",
    "DEFAULT_TOP_MASS",
    "DEFAULT_W_MASS",
    "EVENT_FIELDS",
    "NORMALISATIONS",
    "OUTPUT_FORMATS",
    "PARTICLE_CLASSES",
    "PLOT_FORMATS",
    "PLOT_KEYS",
    "SAMPLE_FORMATS",
    "SKIM_FORMATS",
    "SYSTEMATIC_KINDS",
    "UNCERTAINTY_METHODS",
    "AnalysisConfig",
    "AxisDef",
    "CompositeSpec",
    "HistogramSpec",
    "KeyLines",
    "MissingPtSpec",
    "ObjectSpec",
    "OutputSpec",
    "OverlapSpec",
    "RegionSpec",
    "SampleSpec",
    "SkimSpec",
    "StepSpec",
    "SystematicSpec",
    "UncertaintySpec",
    "load_config",
]
