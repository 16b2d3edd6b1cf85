"""The entry point: :func:`load_config` reads ``[analysis]``, calls one reader per section,
then the cross-reference checks."""

from __future__ import annotations

import hashlib
import sys
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from evtkin.config.checks import _check_data_roles, _check_names, _check_ntuple_names
from evtkin.config.keylines import KeyLines
from evtkin.config.read_composites import _read_composites
from evtkin.config.read_histograms import _read_histograms
from evtkin.config.read_objects import _read_classes, _read_missing, _read_objects, _read_overlap
from evtkin.config.read_output import _read_output
from evtkin.config.read_plot import _read_plot
from evtkin.config.read_regions import _read_regions
from evtkin.config.read_samples import _read_samples
from evtkin.config.read_skims import _read_skims
from evtkin.config.read_steps import _read_quantities, _read_steps
from evtkin.config.read_systematics import _read_systematics
from evtkin.config.read_uncertainties import _read_uncertainties
from evtkin.config.read_weights import _read_tables
from evtkin.config.schema import AnalysisConfig
from evtkin.config.tables import _Ctx, _Table
from evtkin.errors import ConfigError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

_TOP = ("analysis", "classes", "samples", "objects", "overlap_removal", "missing_pt", "step",
        "composites", "quantities", "histograms", "output", "uncertainties", "regions",
        "tables", "systematics", "skims", "plot", "measured")



def load_config(source: str | Path | Mapping[str, Any], *, base_dir: Path | None = None
                ) -> AnalysisConfig:
    """Read and validate an analysis config.

    ``source`` is a path to a TOML file or an already-parsed mapping (as from
    ``tomllib.loads``). Relative sample paths are resolved against the config file's folder
    (or ``base_dir``, default the working directory, for mappings).
    """
    if isinstance(source, Mapping):
        import json

        data = dict(source)
        text = json.dumps(data, sort_keys=True, default=str)
        name = "<config dict>"
        lines = None
        base = Path(base_dir) if base_dir is not None else Path.cwd()
    else:
        path = Path(source)
        try:
            raw = path.read_bytes()
        except OSError as exc:
            raise ConfigError(f"{path}: cannot read the config: {exc.strerror or exc}") from None
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError as exc:
            line = raw[: exc.start].count(b"\n") + 1
            raise ConfigError(f"{path}:{line}: the config is not UTF-8 text") from None
        name = str(path)
        try:
            data = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            raise ConfigError(f"{path}: not valid TOML: {exc}") from None
        lines = KeyLines(text)
        base = Path(base_dir) if base_dir is not None else path.resolve().parent
    ctx = _Ctx(name, lines)
    top = _Table(ctx, (), data)
    a = top.table("analysis")
    if a is None:
        a = _Table(ctx, ("analysis",), {})
    an_name = a.string("name", Path(name).stem if lines is not None else "analysis")
    description = a.string("description", "")
    note = a.string("note", None)
    lumi = a.number("luminosity_fb", None, positive=True)
    step_size = a.integer("step_size", None, positive=True)
    weight = a.expression("weight") if a.has("weight") else None
    a.known.append("weight")
    a.done()
    warnings: list[str] = []
    classes = _read_classes(top)
    samples = _read_samples(top, base, lumi, warnings)
    objects = _read_objects(top, classes)
    overlap = _read_overlap(top, objects)
    missing = _read_missing(top, classes)
    steps = _read_steps(top)
    regions = _read_regions(top, steps)
    composites = _read_composites(top)
    quantities = _read_quantities(top)
    raw_measured = data.get("measured")
    measured_names = list(raw_measured) if isinstance(raw_measured, dict) else []
    histograms = _read_histograms(top, steps, samples, regions, measured_names)
    plot = _read_plot(top, base, list(samples), histograms)
    output = _read_output(top, base)
    systematics = _read_systematics(top, objects)
    uncertainties, automatic = _read_uncertainties(top, samples, systematics)
    tables = _read_tables(top, base)
    skims = _read_skims(top, steps, regions, samples)
    for k in _TOP:
        top.known.append(k)
    top.done()
    seen: dict[str, str] = {}
    for kind, names in (("object", objects), ("composite", composites)):
        for n in names:
            if n in seen:
                raise ctx.error((kind + "s", n), f"{n!r} is already defined as a {seen[n]}")
            seen[n] = kind
    if missing is not None and missing.name in seen:
        raise ctx.error(("missing_pt", "name"), f"{missing.name!r} is already defined")
    cfg = AnalysisConfig(
        name=an_name,
        description=description,
        note=note,
        source=name,
        text=text,
        sha256=hashlib.sha256(text.encode("utf-8")).hexdigest(),
        base_dir=base,
        step_size=step_size,
        samples=samples,
        objects=objects,
        overlap_removal=overlap,
        missing_pt=missing,
        steps=steps,
        composites=composites,
        quantities=quantities,
        histograms=histograms,
        output=output,
        classes=classes,
        uncertainties=uncertainties,
        uncertainties_automatic=automatic,
        weight=weight,
        tables=tables,
        regions=regions,
        systematics=systematics,
        skims=skims,
        warnings=tuple(warnings),
        plot=plot,
    )
    _check_names(ctx, cfg)
    _check_ntuple_names(ctx, cfg)
    _check_data_roles(ctx, cfg)
    return cfg
