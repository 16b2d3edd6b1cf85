"""Uncertainty recipes: which variation weights form which band, resolved against the files.

A config declares recipes in ``[uncertainties.NAME]`` tables (parsed by :mod:`evtkin.config`)::

    [uncertainties.scale]
    group = "scale_variation"      # a <weightgroup> declared in the files, or ids = ["1001", ...]
    method = "envelope"
    drop_anticorrelated = true     # 7-point set: drop (muR, muF) = (0.5, 2) and (2, 0.5)

    [uncertainties.pdf]
    group = "toy_pdf_replicas"
    method = "replicas_std"        # or replicas_68, hessian_symmetric, hessian_asymmetric

    [uncertainties.total]
    method = "quadrature"
    of = ["scale", "pdf"]

Methods and their sources (formulas in :mod:`evtkin.hists.bands`): ``envelope`` (bin-by-bin
minimum/maximum over the members and the nominal; common practice for scale variations),
``replicas_std`` / ``replicas_68`` (standard deviation or 68 % interval of Monte-Carlo replicas) and
``hessian_symmetric`` / ``hessian_asymmetric`` (master formulas for eigenvector sets; asymmetric
members are ordered in ± pairs), all as in the PDF4LHC15 recommendations, arXiv:1510.03865;
``quadrature`` adds the upward and downward deviations of other recipes in quadrature.

With ``drop_anticorrelated`` the (muR, muF) factors of every member are read from its description
or id (``muR=2 muF=0.5``, ``MUR=0.5_MUF=1.0``, ``mur="2" muf="1"``); members outside
{0.5, 1, 2}² and the two anti-correlated points are left out. A member whose factors cannot be read
is a :class:`~evtkin.errors.ConfigError`.

``updown`` takes the band of an object-level systematic (``systematic = "NAME"``, a
``[systematics.NAME]`` variation of an object collection whose selection, composites and
histograms are re-run in the same pass): for an up/down pair the band is
nominal + max(X_up − X_0, X_down − X_0, 0) upwards and nominal − max(X_0 − X_up, X_0 − X_down,
0) downwards (the asymmetric formula of one ± pair); a one-sided variation (smearing,
efficiency) is symmetrised, X_0 ± |X_var − X_0| (common practice). It combines in
``quadrature`` with the weight-based bands like any other recipe.

A recipe applies to the samples listed in its ``samples`` key, by default to every LHE sample
(ntuple samples carry no variation weights); an ``updown`` recipe by default to every sample.

**Default** (no recipe in the config, or ``automatic = true``): one band per weight group whose
``combine`` attribute is recognised — ``envelope`` (7-point when every member's factors can be
read), ``replicas``/``gaussian`` → ``replicas_std``, ``symmhessian`` → ``hessian_symmetric``,
``hessian`` → ``hessian_asymmetric`` (an even number of members) — plus ``total`` (their
quadrature sum) when there are at least two. Groups with another or no ``combine`` value get no
band; the reason is recorded in the run's provenance. ``automatic = false`` with no recipe gives no
bands at all.

Bands are formed from the *normalised* contents of each histogram: for ``unit_area`` histograms
every variation has been divided by its own total first (:mod:`evtkin.hists.normalise`), so the
band is a pure shape uncertainty.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Protocol

import numpy as np

from evtkin.errors import ConfigError
from evtkin.hists import bands as bandlib

__all__ = [
    "AUTO_COMBINE",
    "Recipe",
    "RecipeConfig",
    "RecipeSample",
    "RecipeSystematic",
    "UncertaintyDefinition",
    "bands_for",
    "check_config_against_files",
    "resolve_recipes",
]

class UncertaintyDefinition(Protocol):
    """One ``[uncertainties.NAME]`` recipe as declared (see
    :class:`evtkin.config.UncertaintySpec`); ``lines`` maps a key (``""`` = the table) to its
    1-based line in the config."""

    @property
    def name(self) -> str: ...
    @property
    def method(self) -> str: ...
    @property
    def group(self) -> str | None: ...
    @property
    def ids(self) -> tuple[str, ...]: ...
    @property
    def drop_anticorrelated(self) -> bool: ...
    @property
    def of(self) -> tuple[str, ...]: ...
    @property
    def samples(self) -> tuple[str, ...] | None: ...
    @property
    def lines(self) -> Mapping[str, int | None]: ...
    @property
    def systematic(self) -> str | None: ...


class RecipeSample(Protocol):
    """What the recipes need of a sample (see :class:`evtkin.config.SampleSpec`)."""

    @property
    def format(self) -> str: ...
    @property
    def files(self) -> Sequence[Path]: ...


class RecipeSystematic(Protocol):
    """An object-level systematic: the names of its varied runs (see
    :class:`evtkin.config.SystematicSpec`)."""

    @property
    def variations(self) -> tuple[str, ...]: ...


class RecipeConfig(Protocol):
    """What resolving recipes needs of an analysis (:class:`evtkin.config.AnalysisConfig`
    satisfies it): the config's file name for messages, its samples, its recipes and
    systematics, and whether bands come from the files' weight groups by default."""

    @property
    def source(self) -> str: ...
    @property
    def samples(self) -> Mapping[str, RecipeSample]: ...
    @property
    def uncertainties(self) -> Sequence[UncertaintyDefinition]: ...
    @property
    def uncertainties_automatic(self) -> bool: ...
    @property
    def systematics(self) -> Mapping[str, RecipeSystematic]: ...


#: ``<weightgroup combine=...>`` values (lower case) → method used by the automatic default
AUTO_COMBINE: dict[str, str] = {
    "envelope": "envelope",
    "replicas": "replicas_std",
    "replica": "replicas_std",
    "gaussian": "replicas_std",
    "mc": "replicas_std",
    "symmhessian": "hessian_symmetric",
    "hessian": "hessian_asymmetric",
}

#: recipe method → :class:`~evtkin.hists.bands.Band` method name written to the results
_BAND_METHOD = {
    "replicas_std": "replicas_std",
    "replicas_68": "replicas_68",
    "hessian_symmetric": "hessian_sym",
    "hessian_asymmetric": "hessian_asym",
    "quadrature": "quadrature",
    "updown": "updown",
}


@dataclass(frozen=True)
class Recipe:
    """A recipe resolved for one sample: ``columns`` index the variation weights (0-based)."""

    name: str
    method: str
    columns: tuple[int, ...] = ()
    members: tuple[str, ...] = ()
    drop_anticorrelated: bool = False
    of: tuple[str, ...] = ()
    origin: str = "config"  # "config" or "file"

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "method": self.method, "members": list(self.members),
                "drop_anticorrelated": self.drop_anticorrelated, "of": list(self.of),
                "origin": self.origin}


@dataclass
class _FileWeights:
    """What the files of one sample declare about their variation weights."""

    names: tuple[str, ...]
    groups: dict[str, tuple[str, ...]] = field(default_factory=dict)
    descriptions: dict[str, str] = field(default_factory=dict)
    combine: dict[str, str] = field(default_factory=dict)
    source: str = ""


def _file_weights(variations: Sequence[str], infos: Sequence[object | None],
                  source: str) -> _FileWeights:
    fw = _FileWeights(tuple(str(v) for v in variations), source=source)
    for info in infos:
        if info is None:
            continue
        for g, ids in dict(getattr(info, "weight_groups", {}) or {}).items():
            fw.groups.setdefault(str(g), tuple(str(i) for i in ids))
        for k, v in dict(getattr(info, "weight_descriptions", {}) or {}).items():
            fw.descriptions.setdefault(str(k), str(v))
        for k, v in dict(getattr(info, "weight_group_combine", {}) or {}).items():
            fw.combine.setdefault(str(k), str(v))
    return fw


def _suggest(word: str, choices: Sequence[str]) -> str:
    import difflib

    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.5)
    return f"; did you mean {close[0]!r}?" if close else ""


def _where(source: str, spec: UncertaintyDefinition, key: str) -> str:
    line = spec.lines.get(key) if spec.lines else None
    if line is None and spec.lines:
        line = spec.lines.get("")
    return f"{source}:{line}" if line is not None else source


def _factors(fw: _FileWeights, wid: str) -> tuple[float, float] | None:
    return bandlib.parse_scale_factors(f"{fw.descriptions.get(wid, '')} {wid}")


def _seven_point(fw: _FileWeights, ids: Sequence[str]) -> list[int] | None:
    """Positions (in ``ids``) of the 7-point set, or None if some member has no readable factors."""
    factors = [_factors(fw, w) for w in ids]
    if any(f is None for f in factors):
        return None
    return bandlib.seven_point_members(factors, drop_anticorrelated=True)


def resolve_recipes(
    cfg: RecipeConfig, sample: str, variations: Sequence[str], infos: Sequence[object | None],
) -> tuple[list[Recipe], list[str]]:
    """The recipes that apply to ``sample`` with the weights its files declare, and notes.

    ``variations`` are the sample's variation-weight ids in column order; ``infos`` the files'
    header records (:class:`~evtkin.io.lhe_header.LHEInfo`; ``weight_groups``,
    ``weight_descriptions`` and ``weight_group_combine`` are read where a record has them, a
    record of another format may have none). Unknown group names or ids raise
    :class:`ConfigError` naming the config key and line, with the closest declared name.
    """
    source = cfg.source
    fw = _file_weights(variations, infos, source)
    column = {w: i for i, w in enumerate(fw.names)}
    notes: list[str] = []
    out: list[Recipe] = []
    spec = cfg.samples.get(sample)
    is_lhe = spec is None or spec.format == "lhe"
    every = cfg.uncertainties
    updown = {u.name for u in every if u.method == "updown"}
    specs = [u for u in every
             if (u.samples is None and (is_lhe or u.method == "updown"
                                        or (u.method == "quadrature" and updown & set(u.of))))
             or (u.samples is not None and sample in u.samples)]
    for u in specs:
        key = f"uncertainties.{u.name}"
        if u.method == "updown":
            if u.systematic is None or u.systematic not in cfg.systematics:
                raise ConfigError(f"{_where(source, u, 'systematic')}: {key}.systematic: "
                                  f"no [systematics.{u.systematic}] table")
            sys_spec = cfg.systematics[u.systematic]
            out.append(Recipe(u.name, "updown", members=tuple(sys_spec.variations)))
            continue
        if u.method == "quadrature":
            have = {r.name for r in out}
            of = tuple(o for o in u.of if o in have)
            missing = [o for o in u.of if o not in have]
            if missing:
                notes.append(f"{sample}: {key}: {missing} do not apply to this sample")
            out.append(Recipe(u.name, "quadrature", of=of))
            continue
        if u.group is not None:
            if u.group not in fw.groups:
                declared = sorted(fw.groups)
                raise ConfigError(
                    f"{_where(source, u, 'group')}: {key}.group: sample {sample!r} declares no "
                    f"weight group {u.group!r} (declared: "
                    f"{', '.join(map(repr, declared)) or 'none'})" + _suggest(u.group, declared)
                    + ("" if u.samples else "; or restrict the recipe with samples = [...]"))
            ids = fw.groups[u.group]
        else:
            ids = u.ids
            for i, w in enumerate(ids):
                if w not in column:
                    raise ConfigError(
                        f"{_where(source, u, 'ids')}: {key}.ids[{i}]: sample {sample!r} has no "
                        f"variation weight with id {w!r} (declared: "
                        f"{', '.join(map(repr, fw.names[:12])) or 'none'}"
                        f"{', ...' if len(fw.names) > 12 else ''})" + _suggest(w, fw.names))
        cols = [column[w] for w in ids if w in column]
        if len(cols) != len(ids):  # a group lists an id that the events do not carry
            lost = [w for w in ids if w not in column]
            raise ConfigError(f"{_where(source, u, 'group')}: {key}.group: ids {lost[:5]} of "
                              f"group {u.group!r} are not among the sample's event weights")
        members = tuple(ids)
        if u.drop_anticorrelated:
            keep = _seven_point(fw, ids)
            if keep is None:
                bad = [w for w in ids if _factors(fw, w) is None]
                raise ConfigError(
                    f"{_where(source, u, 'drop_anticorrelated')}: {key}.drop_anticorrelated: "
                    f"cannot read muR/muF of weights {bad[:5]} from their descriptions "
                    f"({[fw.descriptions.get(w, '') for w in bad[:3]]}); list the 7 members "
                    "with ids = [...] and drop_anticorrelated = false")
            cols = [cols[k] for k in keep]
            members = tuple(ids[k] for k in keep)
        _check_count(u.method, len(cols), f"{_where(source, u, 'method')}: {key}: sample "
                     f"{sample!r}")
        out.append(Recipe(u.name, u.method, tuple(cols), members, u.drop_anticorrelated))
    if cfg.uncertainties_automatic:
        out.extend(_automatic(fw, column, {r.name for r in out}, sample, notes))
    return out, notes


def _check_count(method: str, n: int, where: str) -> None:
    need = {"replicas_std": 2, "replicas_68": 2}.get(method, 1)
    if n < need:
        raise ConfigError(f"{where}: method {method!r} needs at least {need} variation weights, "
                          f"got {n}")
    if method == "hessian_asymmetric" and n % 2:
        raise ConfigError(f"{where}: method 'hessian_asymmetric' needs members in ± pairs (an "
                          f"even number), got {n}")


def _automatic(fw: _FileWeights, column: Mapping[str, int], taken: set[str], sample: str,
               notes: list[str]) -> list[Recipe]:
    out: list[Recipe] = []
    for g, ids in fw.groups.items():
        if g in taken:
            continue
        combine = fw.combine.get(g, "").strip().lower()
        method = AUTO_COMBINE.get(combine)
        cols = [column[w] for w in ids if w in column]
        if method is None:
            notes.append(f"{sample}: weight group {g!r} (combine={combine or 'not given'!r}): "
                         "no automatic band; declare a recipe in [uncertainties]")
            continue
        if not cols or len(cols) != len(ids):
            notes.append(f"{sample}: weight group {g!r}: its ids are not all event weights; "
                         "no automatic band")
            continue
        members = tuple(ids)
        drop = False
        if method == "envelope":
            keep = _seven_point(fw, ids)
            if keep and len(keep) < len(ids):  # anti-correlated (or off-grid) points present
                drop = True
                cols = [cols[k] for k in keep]
                members = tuple(ids[k] for k in keep)
        if method == "hessian_asymmetric" and len(cols) % 2:
            notes.append(f"{sample}: weight group {g!r} (combine=hessian) has an odd number of "
                         "members; no automatic band (declare a recipe)")
            continue
        if method.startswith("replicas") and len(cols) < 2:
            continue
        out.append(Recipe(g, method, tuple(cols), members, drop, origin="file"))
        notes.append(f"{sample}: band {g!r} = {method}{' (7-point)' if drop else ''} of "
                     f"{len(cols)} weights (from the file's combine={combine!r})")
    if len(out) >= 2:
        name = "total" if "total" not in taken and "total" not in {r.name for r in out} \
            else "total_quadrature"
        out.append(Recipe(name, "quadrature", of=tuple(r.name for r in out), origin="file"))
    return out


def bands_for(values: np.ndarray, recipes: Sequence[Recipe],
              shifted: Mapping[str, np.ndarray] | None = None) -> dict[str, bandlib.Band]:
    """Bands of one normalised histogram: ``values`` has shape ``(1 + V, *shape)`` (index 0 =
    nominal, column ``c`` of a recipe is ``values[1 + c]``); ``shifted`` holds the nominal
    contents of the same histogram in each object-level variation (``updown`` recipes)."""
    x0 = values[0]
    out: dict[str, bandlib.Band] = {}
    for r in recipes:
        if r.method == "updown":
            if shifted is None or not all(m in shifted for m in r.members):
                continue
            xs = np.stack([shifted[m] for m in r.members])
            b = (bandlib.hessian_asymmetric(x0, xs, list(r.members)) if len(r.members) == 2
                 else bandlib.hessian_symmetric(x0, xs, list(r.members)))
            b.method = "updown"
        elif r.method == "quadrature":
            parts = [out[o] for o in r.of if o in out]
            b = bandlib.quadrature(x0, parts, list(r.of))
        else:
            xs = values[1 + np.asarray(r.columns, dtype=np.int64)]
            names = list(r.members)
            if r.method == "envelope":
                b = bandlib.envelope(x0, xs, names)
                b.method = "envelope7" if r.drop_anticorrelated else "envelope"
            elif r.method == "replicas_std":
                b = bandlib.replicas_std(x0, xs, names)
            elif r.method == "replicas_68":
                b = bandlib.replicas_68(x0, xs, names)
            elif r.method == "hessian_symmetric":
                b = bandlib.hessian_symmetric(x0, xs, names)
            elif r.method == "hessian_asymmetric":
                b = bandlib.hessian_asymmetric(x0, xs, names)
            else:  # pragma: no cover - the config accepts only the methods above
                raise ValueError(f"unknown band method {r.method!r}")
            b.method = _BAND_METHOD.get(r.method, b.method)
        out[r.name] = b
    return out


def check_config_against_files(cfg: RecipeConfig) -> None:
    """Resolve every recipe against the first file of each LHE sample (headers only), so that
    an unknown group or id fails before any event is read."""
    from evtkin.io.lhe_header import lhe_info

    if not cfg.uncertainties:
        return
    for name, spec in cfg.samples.items():
        if spec.format != "lhe" or not spec.files:
            continue
        path = spec.files[0]
        if not path.is_file():
            continue  # reported with the key and line by the unit planner
        info = lhe_info(path)
        resolve_recipes(cfg, name, info.weight_names, [info])
