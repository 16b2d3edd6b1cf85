"""Cross-reference checks on a read config: names used in expressions, composites, steps,
quantities (no circles), and objects/missing pT/response histograms against the samples' formats."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from evtkin.config.keylines import Path_
from evtkin.config.schema import EVENT_FIELDS, AnalysisConfig
from evtkin.config.tables import _check_name, _Ctx, _suggest
from evtkin.expr import BOOLEAN_KINDS, Expression, ExpressionError
from evtkin.files import safe_name


def _check_expression_names(ctx: _Ctx, path: Path_, expr: Expression,
                            known: Mapping[str, str]) -> None:
    for name, col in expr.names.items():
        if name not in known:
            close = _suggest(name, known)
            hint = f"; did you mean {close!r}?" if close else ""
            exc = ExpressionError(f"unknown name {name!r}{hint}", expr.text, col)
            raise ctx._expr_error(path, exc)


def _check_condition(ctx: _Ctx, path: Path_, expr: Expression,
                     quantities: Mapping[str, Expression], fields_ok: bool = False) -> None:
    """A ``require`` must be true/false: a comparison, ``and``/``or``/``not``, a quantity
    that is one, or (object requires, ``fields_ok``) a field of the objects. A constant or a
    number/object valued expression is an error."""
    node, seen = expr.tree, set()
    while node.kind == "name" and node.value in quantities and node.value not in seen:
        seen.add(node.value)
        node = quantities[node.value].tree
    if node.kind in BOOLEAN_KINDS or (fields_ok and node.kind == "name"):
        return
    if node.kind == "num":
        what = "a constant (it does not depend on the event)"
    elif node.kind == "name":
        what = f"{node.value!r}, which is not a condition"
    else:
        what = "a number or objects, not a condition"
    exc = ExpressionError(
        f"require must be true/false (a comparison such as 'count(jets) >= 2', or 'and', "
        f"'or', 'not' of such); this is {what}", expr.text, node.pos if node is expr.tree else 0
    )
    raise ctx._expr_error(path, exc)


def _check_file_names(ctx: _Ctx, cfg: AnalysisConfig) -> None:
    """Sample and histogram names become parts of file names (``evtkin.files.safe_name``):
    two names that give the same part would overwrite each other's files."""
    for section, names in (("samples", list(cfg.samples)), ("histograms", list(cfg.histograms))):
        seen: dict[str, str] = {}
        for name in names:
            part = safe_name(name)
            if part in seen:
                raise ctx.error(
                    (section, name),
                    f"{name!r} and {seen[part]!r} give the same file name {part!r} (characters "
                    "outside A-Z a-z 0-9 _ . + @ - become '_'); rename one",
                )
            seen[part] = name


def _check_names(ctx: _Ctx, cfg: AnalysisConfig) -> None:
    _check_file_names(ctx, cfg)
    known = cfg.names()
    collections = [*list(cfg.objects), "particles"]
    for name, c in cfg.composites.items():
        if c.build == "pair":
            for i, inp in enumerate(c.inputs):
                key: Path_ = ("composites", name, "of") + ((i,) if len(c.inputs) > 1 else ())
                _check_name(ctx, key, inp, collections, "object collection")
        elif c.build == "leptonic_w":
            _check_name(ctx, ("composites", name, "lepton"), c.inputs[0], collections,
                        "object collection")
            _check_met(ctx, cfg, ("composites", name, "missing_pt"), c.inputs[1])
        else:
            _check_name(ctx, ("composites", name, "lepton"), c.inputs[0], collections,
                        "object collection")
            _check_name(ctx, ("composites", name, "jets"), c.inputs[1], collections,
                        "object collection")
            _check_met(ctx, cfg, ("composites", name, "missing_pt"), c.inputs[2])
    for i, step in enumerate(cfg.steps):
        _check_expression_names(ctx, ("step", i, "require"), step.require, known)
        _check_condition(ctx, ("step", i, "require"), step.require, cfg.quantities)
    for rname, region in cfg.regions.items():
        for i, step in enumerate(region.steps):
            path: Path_ = (("regions", rname, "steps", i, "require")
                           if step.name != rname or len(region.steps) > 1
                           else ("regions", rname, "require"))
            _check_expression_names(ctx, path, step.require, known)
            _check_condition(ctx, path, step.require, cfg.quantities)
    if cfg.weight is not None:
        _check_expression_names(ctx, ("analysis", "weight"), cfg.weight, known)
    for sname, spec in cfg.samples.items():
        if spec.weight is not None:
            _check_expression_names(ctx, ("samples", sname, "weight"), spec.weight, known)
    for kname, skim in cfg.skims.items():
        for col, e in skim.columns.items():
            _check_expression_names(ctx, ("skims", kname, "columns", col), e, known)
    for name, q in cfg.quantities.items():
        if name in cfg.objects or name in cfg.composites or name in EVENT_FIELDS:
            raise ctx.error(("quantities", name), f"{name!r} is already defined elsewhere")
        _check_expression_names(ctx, ("quantities", name), q, known)
    for name, h in cfg.histograms.items():
        if h.normalise == "xsec_per_bin":
            for sname in h.samples or tuple(cfg.samples):
                spec = cfg.samples[sname]
                if spec.data and spec.luminosity_fb is None:
                    raise ctx.error(
                        ("histograms", name, "normalise"),
                        f"'xsec_per_bin' of the data sample {sname!r} is its counts / (L · bin "
                        f"width): set luminosity_fb in [analysis] or in [samples.{sname}] (or "
                        f"normalise = \"events\" for plain counts)",
                    )
        if h.normalise == "events":
            for sname in h.samples or tuple(cfg.samples):
                if cfg.samples[sname].data:
                    continue  # counts as they are
                if cfg.samples[sname].luminosity_fb is None:
                    raise ctx.error(
                        ("histograms", name, "normalise"),
                        f"'events' needs a luminosity: set luminosity_fb in [analysis] or in "
                        f"[samples.{sname}]",
                    )
        for axis_key, axis in zip(("x", "y"), h.axes, strict=False):
            _check_expression_names(ctx, ("histograms", name, axis_key, "value"), axis.value,
                                    known)
    # quantities may use other quantities, but not in a circle
    state: dict[str, int] = {}

    def visit(q: str, trail: list[str]) -> None:
        if state.get(q) == 2:
            return
        if state.get(q) == 1:
            cycle = " → ".join([*trail[trail.index(q):], q])
            raise ctx.error(("quantities", q), f"quantities refer to each other: {cycle}")
        state[q] = 1
        for n in cfg.quantities[q].names:
            if n in cfg.quantities:
                visit(n, [*trail, q])
        state[q] = 2

    for qname in cfg.quantities:
        visit(qname, [])


def _check_data_roles(ctx: _Ctx, cfg: AnalysisConfig) -> None:
    """A data sample (``data = true``) is drawn as points: never stacked or overlaid."""
    tables: list[tuple[Path_, Any]] = [(("plot",), cfg.plot.options)]
    tables += [(("histograms", h, "plot"), spec.plot) for h, spec in cfg.histograms.items()]
    for path, options in tables:
        for role in ("stack", "overlay"):
            for i, n in enumerate(options.get(role) or ()):
                if n in cfg.samples and cfg.samples[n].data:
                    raise ctx.error((*path, role, i), f"{n!r} is a data sample (data = true): "
                                    f"it is drawn as points, never in {role!r}")


def _check_ntuple_names(ctx: _Ctx, cfg: AnalysisConfig) -> None:
    """Objects, missing pT and response histograms against the samples' formats and mappings."""
    from evtkin.events import PARTICLE_FIELDS
    from evtkin.expr import ATTRIBUTES

    for oname, o in cfg.objects.items():
        for other in o.isolation_objects:
            _check_name(ctx, ("objects", oname, "isolation", "against_objects"), other,
                        [n for n in cfg.objects if n != oname], "object collection")
    _check_particle_level(ctx, cfg)
    for sname, spec in cfg.samples.items():
        if spec.format != "root":
            for oname, o in cfg.objects.items():
                if not o.pdgids and o.cluster_inputs == "stable":
                    if spec.truth_files and any(h.response for h in cfg.histograms.values()):
                        raise ctx.error(("objects", oname, "clustering", "inputs"),
                                        f"sample {sname!r} has truth_files: give particles = "
                                        "[...] too (the jets' inputs in the generator-level "
                                        "events, e.g. [\"jets_with_b\"])")
                    continue
                if not o.pdgids:
                    raise ctx.error(("objects", oname),
                                    f"sample {sname!r} is an {spec.format.upper()} file: give "
                                    "particles = [...] (from = ... is for ROOT ntuples)")
                if o.require is not None:
                    _check_expression_names(ctx, ("objects", oname, "require"), o.require,
                                            {n: "field" for n in (*PARTICLE_FIELDS, *ATTRIBUTES)})
                    _check_condition(ctx, ("objects", oname, "require"), o.require, {}, True)
            continue
        m = spec.input
        for oname, o in cfg.objects.items():
            if o.source is None:
                raise ctx.error(("objects", oname), f"sample {sname!r} is a ROOT ntuple: give "
                                "from = \"COLLECTION\" (a collection of its input mapping)")
            for k, src in enumerate(o.source):
                key: Path_ = ("objects", oname, "from") + ((k,) if len(o.source) > 1 else ())
                _check_name(ctx, key, src, m.collections, f"collection of samples.{sname}.input")
            if o.cluster_radius is not None:
                raise ctx.error(("objects", oname, "clustering"), f"sample {sname!r} is a ROOT "
                                "ntuple: its collections are already reconstructed objects")
            if o.require is not None:
                known = {n: "field" for src in o.source for n in
                         (*m.collections[src].coords, *m.collections[src].fields, *ATTRIBUTES)}
                _check_expression_names(ctx, ("objects", oname, "require"), o.require, known)
                _check_condition(ctx, ("objects", oname, "require"), o.require, {}, True)
        if cfg.missing_pt is not None:
            if cfg.missing_pt.source is None:
                raise ctx.error(("missing_pt",), f"sample {sname!r} is a ROOT ntuple: give "
                                "from = \"VECTOR\" (a vector of its input mapping)")
            _check_name(ctx, ("missing_pt", "from"), cfg.missing_pt.source, m.vectors,
                        f"vector of samples.{sname}.input")
    for hname, h in cfg.histograms.items():
        if not h.response:
            continue
        if len(h.axes) != 1:
            raise ctx.error(("histograms", hname, "response"), "response matrices are made for "
                            "1-D histograms only")
        with_truth = [n for n in (h.samples or cfg.samples) if cfg.samples[n].truth_files]
        if not with_truth:
            raise ctx.error(("histograms", hname, "response"), "no sample of this histogram has "
                            "truth_files (generator-level events to match)")


def _particle_level_keys(cfg: AnalysisConfig) -> list[tuple[Path_, str]]:
    """(key path, key as written) of every particle-level recipe the config asks for."""
    out: list[tuple[Path_, str]] = []
    for oname, o in cfg.objects.items():
        for key in o.particle_level:
            out.append((("objects", oname, *key.split(".")), f"objects.{oname}.{key}"))
    if cfg.missing_pt is not None and cfg.missing_pt.prompt:
        out.append((("missing_pt", "prompt"), "missing_pt.prompt"))
    return out


def _check_particle_level(ctx: _Ctx, cfg: AnalysisConfig) -> None:
    """Particle-level recipes (prompt, dressing, clustering inputs/exclude/ghosts, prompt
    missing pT) need showered events with their decay graph: HepMC samples only. Collections
    left out of a clustering must not leave each other out in a circle."""
    keys = _particle_level_keys(cfg)
    if keys:
        for sname, spec in cfg.samples.items():
            if spec.format == "hepmc":
                continue
            path, written = keys[0]
            what = ("an LHE file (parton level: no stable particles, no decay graph)"
                    if spec.format == "lhe" else "a ROOT ntuple (reconstructed collections)")
            raise ctx.error(path, f"{written} is a particle-level recipe for showered events "
                            f"(format = \"hepmc\"), but sample {sname!r} is {what}")
    state: dict[str, int] = {}

    def visit(name: str, trail: list[str]) -> None:
        if state.get(name) == 2:
            return
        if state.get(name) == 1:
            cycle = " → ".join([*trail[trail.index(name):], name])
            raise ctx.error(("objects", name, "clustering", "exclude"),
                            f"collections leave each other out of their clustering: {cycle}")
        state[name] = 1
        for other in cfg.objects[name].cluster_exclude:
            if other in cfg.objects:
                visit(other, [*trail, name])
        state[name] = 2

    for oname in cfg.objects:
        visit(oname, [])


def _check_met(ctx: _Ctx, cfg: AnalysisConfig, path: Path_, name: str) -> None:
    if cfg.missing_pt is None:
        raise ctx.error(path, "needs a [missing_pt] section")
    _check_name(ctx, path, name, [cfg.missing_pt.name], "missing-pT name")
