"""Analysis configs: TOML text → a validated :class:`AnalysisConfig`.

The vocabulary (see ``configs/*.toml`` for complete examples)::

    [analysis]            name, description, note, luminosity_fb, step_size
    [classes]             user particle classes: name = [PDG ids] (both signs are taken)
    [samples.NAME]        files, label, cross_section_pb, luminosity_fb, toy, format,
                          and for format = "root": input (the branch mapping of
                          evtkin.io.ntuple_mapping), weights_give, truth_files
    [objects.NAME]        particles, status, min_pt, max_abs_eta, max_abs_rapidity,
                          from_decay_of, isolation = {against, within_dr}, clustering = {radius},
                          from (an ntuple collection), require (a condition on object fields),
                          isolation = {against_objects, within_dr}
    [[overlap_removal]]   remove, near, within_dr               (applied in the order written)
    [missing_pt]          name, particles, from (an ntuple vector)
    [[step]]              name, require                         (an ordered event selection)
    [composites.NAME]     build = "pair" | "leptonic_w" | "ttbar_lepton_jets" + options
    [quantities]          NAME = "expression"   (a number per event or object, or an object)
    [histograms.NAME]     title, x = {value, bins, range | edges, label, unit}, y = {...},
                          normalise, after, samples, response
    [output]              directory, formats, plot_formats
    [uncertainties.NAME]  method, group | ids, drop_anticorrelated, of, samples
                          (bands from variation weights; ``automatic = false`` turns off the
                          default bands taken from the files' weight groups)

Every error names the config file, the 1-based line of the offending key (TOML parsers do
not report lines, so :class:`KeyLines` finds them by scanning the text), the dotted key path,
what was expected and, for misspelt keys or names, the closest known spelling.
"""

from __future__ import annotations

import contextlib
import difflib
import hashlib
import itertools
import sys
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from evtkin.errors import ConfigError
from evtkin.expr import Expression, ExpressionError, parse
from evtkin.select.objects import PDG_CLASSES

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

__all__ = [
    "EVENT_FIELDS",
    "NORMALISATIONS",
    "PARTICLE_CLASSES",
    "AnalysisConfig",
    "AxisDef",
    "CompositeSpec",
    "HistogramSpec",
    "KeyLines",
    "MissingPtSpec",
    "ObjectSpec",
    "OutputSpec",
    "OverlapSpec",
    "SampleSpec",
    "StepSpec",
    "UncertaintySpec",
    "load_config",
]

Path_ = tuple[str | int, ...]

#: per-event names every expression may use besides the config's own names
EVENT_FIELDS: dict[str, str] = {
    "weight": "the event weight as written in the file (XWGTUP)",
    "scale": "the event scale in GeV (SCALUP)",
    "alpha_qcd": "the strong coupling of the event (AQCDUP)",
    "alpha_qed": "the electromagnetic coupling of the event (AQEDUP)",
    "process_id": "the process id of the event (IDPRUP)",
    "particles": "every particle of the event record",
}

#: built-in particle classes (absolute PDG ids; both signs are taken), from the physics library
PARTICLE_CLASSES: dict[str, tuple[int, ...]] = dict(PDG_CLASSES)

#: histogram normalisations (names as in docs/results-format.md)
NORMALISATIONS = ("raw", "xsec_per_bin", "events", "unit_area")

COMPOSITE_BUILDS = ("pair", "leptonic_w", "ttbar_lepton_jets")
OUTPUT_FORMATS = ("root", "json", "csv", "cutflow", "plots", "report")
PLOT_FORMATS = ("png", "pdf", "svg")

# PDG 2024 (Phys. Rev. D 110, 030001): m_W = 80.3692 GeV, m_t = 172.57 GeV
DEFAULT_W_MASS = 80.3692
DEFAULT_TOP_MASS = 172.57
_REQUIRED = object()


# --------------------------------------------------------------------------- line finder

class KeyLines:
    """Map TOML key paths to the 1-based line where each key (or array element) is written.

    Handles table headers, arrays of tables, dotted and quoted keys, inline tables, multi-line
    arrays and all four string forms. Paths use ints for array indices, e.g.
    ``("step", 2, "require")``. :meth:`line` falls back to the nearest written ancestor.
    """

    def __init__(self, text: str) -> None:
        self.text = text
        self.lines: dict[Path_, int] = {}
        self._i = 0
        self._line = 1
        self._aot: dict[Path_, int] = {}
        # the text was already accepted by the TOML parser; be lenient on odd corners
        with contextlib.suppress(IndexError):
            self._scan()

    def line(self, path: Iterable[str | int]) -> int | None:
        p = tuple(path)
        while p:
            if p in self.lines:
                return self.lines[p]
            p = p[:-1]
        return None

    # scanning helpers ------------------------------------------------------
    def _peek(self, k: int = 0) -> str:
        j = self._i + k
        return self.text[j] if j < len(self.text) else ""

    def _advance(self, k: int = 1) -> None:
        for _ in range(k):
            if self._i < len(self.text) and self.text[self._i] == "\n":
                self._line += 1
            self._i += 1

    def _skip_ws(self, newlines: bool) -> None:
        while self._i < len(self.text):
            c = self.text[self._i]
            if c in " \t\r" or (newlines and c == "\n"):
                self._advance()
            elif c == "#":
                while self._i < len(self.text) and self.text[self._i] != "\n":
                    self._advance()
            else:
                return

    def _string(self) -> str:
        q = self._peek()
        if self.text.startswith(q * 3, self._i):
            self._advance(3)
            end = self.text.find(q * 3, self._i)
            end = len(self.text) if end < 0 else end
            while self._i < end:
                self._advance()
            self._advance(3)
            while self._peek() == q:  # up to two extra quotes belong to the string
                self._advance()
            return ""
        self._advance()
        out = []
        while self._i < len(self.text) and self._peek() != q and self._peek() != "\n":
            if q == '"' and self._peek() == "\\":
                self._advance()
            out.append(self._peek())
            self._advance()
        self._advance()
        return "".join(out)

    def _key(self, stop: str) -> list[str]:
        parts: list[str] = []
        while True:
            self._skip_ws(False)
            c = self._peek()
            if c in ('"', "'"):
                parts.append(self._string())
            else:
                start = self._i
                while self._peek() and self._peek() not in " \t.=]\n" + stop:
                    self._advance()
                parts.append(self.text[start:self._i])
            self._skip_ws(False)
            if self._peek() == ".":
                self._advance()
                continue
            return parts

    def _value(self, path: Path_) -> None:
        self._skip_ws(False)
        c = self._peek()
        if c in ('"', "'"):
            self._string()
        elif c == "[":
            self._advance()
            index = 0
            while True:
                self._skip_ws(True)
                if self._peek() in ("]", ""):
                    self._advance()
                    return
                self.lines.setdefault((*path, index), self._line)
                self._value((*path, index))
                index += 1
                self._skip_ws(True)
                if self._peek() == ",":
                    self._advance()
        elif c == "{":
            self._advance()
            while True:
                self._skip_ws(False)
                if self._peek() in ("}", ""):
                    self._advance()
                    return
                if self._peek() == ",":
                    self._advance()
                    continue
                full = path + tuple(self._key("}"))
                self.lines.setdefault(full, self._line)
                if self._peek() == "=":
                    self._advance()
                self._value(full)
        else:
            while self._peek() and self._peek() not in ",]}\n#":
                self._advance()

    def _resolve(self, parts: list[str]) -> Path_:
        out: Path_ = ()
        for part in parts:
            out = (*out, part)
            if out in self._aot:
                out = (*out, self._aot[out])
        return out

    def _scan(self) -> None:
        table: Path_ = ()
        while True:
            self._skip_ws(True)
            if self._i >= len(self.text):
                return
            if self.text.startswith("[[", self._i):
                line = self._line
                self._advance(2)
                parts = self._key("]")
                self._advance(2)
                base = (*self._resolve(parts[:-1]), parts[-1])
                index = self._aot.get(base, -1) + 1
                self._aot[base] = index
                table = (*base, index)
                self.lines.setdefault(base, line)
                self.lines[table] = line
            elif self._peek() == "[":
                line = self._line
                self._advance()
                parts = self._key("]")
                self._advance()
                table = self._resolve(parts)
                self.lines.setdefault(table, line)
            else:
                line = self._line
                full = table + tuple(self._key("="))
                for k in range(len(table) + 1, len(full) + 1):
                    self.lines.setdefault(full[:k], line)
                if self._peek() == "=":
                    self._advance()
                self._value(full)


# --------------------------------------------------------------------------- specs

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


@dataclass(frozen=True)
class StepSpec:
    name: str
    require: Expression


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


@dataclass(frozen=True)
class OutputSpec:
    directory: Path | None = None
    formats: tuple[str, ...] = OUTPUT_FORMATS
    plot_formats: tuple[str, ...] = ("png", "pdf")


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

    def names(self) -> dict[str, str]:
        """Every name an expression may use → what it is."""
        out = {k: "event field" for k in EVENT_FIELDS}
        out.update({k: "object collection" for k in self.objects})
        if self.missing_pt is not None:
            out[self.missing_pt.name] = "missing transverse momentum"
        out.update({k: "composite" for k in self.composites})
        out.update({k: "quantity" for k in self.quantities})
        return out


# --------------------------------------------------------------------------- validation

def _fmt_path(path: Path_) -> str:
    out = ""
    for p in path:
        if isinstance(p, int):
            out += f"[{p}]"
        else:
            out += ("." if out else "") + str(p)
    return out or "(top level)"


class _Ctx:
    def __init__(self, source: str, lines: KeyLines | None) -> None:
        self.source = source
        self.lines = lines

    def error(self, path: Path_, message: str, *, suggest: str | None = None) -> ConfigError:
        line = self.lines.line(path) if self.lines is not None else None
        where = f"{self.source}:{line}" if line is not None else self.source
        hint = f"; did you mean {suggest!r}?" if suggest else ""
        return ConfigError(f"{where}: {_fmt_path(path)}: {message}{hint}")

    def expr(self, path: Path_, text: Any) -> Expression:
        if not isinstance(text, str):
            raise self.error(path, f"expected an expression in quotes, got {_kind(text)}")
        try:
            return parse(text)
        except ExpressionError as exc:
            raise self._expr_error(path, exc) from None

    def _expr_error(self, path: Path_, exc: ExpressionError) -> ConfigError:
        line = self.lines.line(path) if self.lines is not None else None
        where = f"{self.source}:{line}" if line is not None else self.source
        return ConfigError(exc.render(f"{where}: {_fmt_path(path)}: bad expression: "))


def _kind(value: Any) -> str:
    if isinstance(value, bool):
        return f"a boolean ({str(value).lower()})"
    if isinstance(value, (int, float)):
        return f"a number ({value})"
    if isinstance(value, str):
        return f"a string ({value!r})"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "a table"
    return type(value).__name__


def _suggest_key(key: str, present: Iterable[str]) -> str | None:
    """A key in ``present`` that looks like a misspelling of the required ``key``."""
    close = difflib.get_close_matches(key, list(present), n=1, cutoff=0.75)
    return close[0] if close else None


def _suggest(word: str, choices: Iterable[str]) -> str | None:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return close[0] if close else None


class _Table:
    """Reads one TOML table, checking types; :meth:`done` rejects keys nobody asked for."""

    def __init__(self, ctx: _Ctx, path: Path_, data: Any) -> None:
        if not isinstance(data, dict):
            raise ctx.error(path, f"expected a table, got {_kind(data)}")
        self.ctx, self.path, self.data = ctx, path, data
        self.known: list[str] = []

    def has(self, key: str) -> bool:
        return key in self.data

    def raw(self, key: str, default: Any = None) -> Any:
        self.known.append(key)
        return self.data.get(key, default)

    def _get(self, key: str, default: Any) -> Any:
        self.known.append(key)
        if key not in self.data:
            if default is _REQUIRED:
                self._missing(key)
            return default
        return self.data[key]

    def _missing(self, key: str, what: str = "") -> None:
        """Raise for a missing required key; a misspelt spelling of it is named instead."""
        typo = _suggest_key(key, [k for k in self.data if k != key])
        if typo is not None:
            raise self.ctx.error((*self.path, typo), f"unknown key {typo!r}", suggest=key)
        raise self.ctx.error((*self.path, key), f"this key is required{what}")

    def string(self, key: str, default: Any = _REQUIRED, choices: Iterable[str] = ()) -> Any:
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if not isinstance(v, str):
            raise self.ctx.error((*self.path, key), f"expected a string, got {_kind(v)}")
        allowed = tuple(choices)
        if allowed and v not in allowed:
            raise self.ctx.error(
                (*self.path, key),
                f"expected one of {', '.join(map(repr, allowed))}, got {v!r}",
                suggest=_suggest(v, allowed),
            )
        return v

    def number(self, key: str, default: Any = _REQUIRED, *, positive: bool = False,
               nonnegative: bool = False) -> Any:
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise self.ctx.error((*self.path, key), f"expected a number, got {_kind(v)}")
        if v != v or v in (float("inf"), float("-inf")):
            raise self.ctx.error((*self.path, key), f"expected a finite number, got {v}")
        if positive and v <= 0:
            raise self.ctx.error((*self.path, key), f"expected a number > 0, got {v}")
        if nonnegative and v < 0:
            raise self.ctx.error((*self.path, key), f"expected a number >= 0, got {v}")
        return float(v)

    def integer(self, key: str, default: Any = _REQUIRED, *, positive: bool = False) -> Any:
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if isinstance(v, bool) or not isinstance(v, int):
            raise self.ctx.error((*self.path, key), f"expected a whole number, got {_kind(v)}")
        if positive and v <= 0:
            raise self.ctx.error((*self.path, key), f"expected a whole number > 0, got {v}")
        return v

    def boolean(self, key: str, default: Any = _REQUIRED) -> Any:
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if not isinstance(v, bool):
            raise self.ctx.error((*self.path, key), f"expected true or false, got {_kind(v)}")
        return v

    def strings(self, key: str, default: Any = _REQUIRED) -> Any:
        """A string or a list of strings → tuple of strings."""
        v = self._get(key, default)
        if v is default and key not in self.data:
            return v
        if isinstance(v, str):
            return (v,)
        if not isinstance(v, list) or not all(isinstance(x, str) for x in v):
            raise self.ctx.error(
                (*self.path, key), f"expected a string or a list of strings, got {_kind(v)}"
            )
        return tuple(v)

    def expression(self, key: str) -> Expression:
        self.known.append(key)
        if key not in self.data:
            self._missing(key, " (an expression)")
        return self.ctx.expr((*self.path, key), self.data[key])

    def table(self, key: str, required: bool = False) -> _Table | None:
        self.known.append(key)
        if key not in self.data:
            if required:
                raise self.ctx.error((*self.path, key), "this table is required")
            return None
        return _Table(self.ctx, (*self.path, key), self.data[key])

    def done(self) -> None:
        for key in self.data:
            if key not in self.known:
                raise self.ctx.error(
                    (*self.path, key),
                    f"unknown key {key!r} (known here: {', '.join(sorted(set(self.known)))})",
                    suggest=_suggest(key, self.known),
                )


_TOP = ("analysis", "classes", "samples", "objects", "overlap_removal", "missing_pt", "step",
        "composites", "quantities", "histograms", "output", "uncertainties")


def _particle_ids(t: _Table, key: str, classes: Mapping[str, tuple[int, ...]],
                  default: Any = _REQUIRED) -> tuple[tuple[int, ...], tuple[str, ...]]:
    v = t.raw(key, default)
    if v is _REQUIRED:
        t._missing(key, " (particle classes or PDG ids)")
    items = v if isinstance(v, list) else [v]
    ids: list[int] = []
    names: list[str] = []
    for i, item in enumerate(items):
        sub = t.path + (key,) + ((i,) if isinstance(v, list) else ())
        if isinstance(item, bool):
            raise t.ctx.error(sub, f"expected a class name or a PDG id, got {_kind(item)}")
        if isinstance(item, int):
            if item == 0:
                raise t.ctx.error(sub, "0 is not a PDG id")
            ids.append(abs(item))
            names.append(str(abs(item)))
        elif isinstance(item, str):
            if item not in classes:
                raise t.ctx.error(
                    sub, f"unknown particle class {item!r} (known: {', '.join(sorted(classes))})",
                    suggest=_suggest(item, classes),
                )
            ids.extend(classes[item])
            names.append(item)
        else:
            raise t.ctx.error(sub, f"expected a class name or a PDG id, got {_kind(item)}")
    if not ids:
        raise t.ctx.error((*t.path, key), "expected at least one particle class or PDG id")
    return tuple(dict.fromkeys(ids)), tuple(names)


def _int_list(t: _Table, key: str) -> tuple[int, ...]:
    v = t.raw(key, [])
    items = v if isinstance(v, list) else [v]
    out: list[int] = []
    for i, item in enumerate(items):
        if isinstance(item, bool) or not isinstance(item, int):
            sub = t.path + (key,) + ((i,) if isinstance(v, list) else ())
            raise t.ctx.error(sub, f"expected a PDG id (whole number), got {_kind(item)}")
        out.append(abs(item))
    return tuple(out)


def _pair(t: _Table, key: str) -> tuple[float, float] | None:
    v = t.raw(key)
    if v is None:
        return None
    ok = (isinstance(v, list) and len(v) == 2
          and all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in v))
    if not ok:
        raise t.ctx.error((*t.path, key), f"expected [low, high] (two numbers), got {_kind(v)}")
    lo, hi = float(v[0]), float(v[1])
    if not lo < hi:
        raise t.ctx.error((*t.path, key), f"expected low < high, got [{v[0]}, {v[1]}]")
    return lo, hi


def _read_classes(top: _Table) -> dict[str, tuple[int, ...]]:
    classes = dict(PARTICLE_CLASSES)
    t = top.table("classes")
    if t is None:
        return classes
    for name in list(t.data):
        ids = _int_list(t, name)
        if not ids:
            raise t.ctx.error((*t.path, name), "expected a non-empty list of PDG ids")
        classes[name] = ids
    t.done()
    return classes


def _read_samples(top: _Table, base: Path, lumi: float | None) -> dict[str, SampleSpec]:
    t = top.table("samples", required=True)
    assert t is not None
    if not t.data:
        raise t.ctx.error(t.path, "declare at least one sample: [samples.NAME] with files = [...]")
    out: dict[str, SampleSpec] = {}
    for name in list(t.data):
        s = t.table(name)
        assert s is not None
        files = s.strings("files")
        if not files:
            raise s.ctx.error((*s.path, "files"), "expected at least one file")
        fmt = s.string("format", "lhe", choices=("lhe", "root"))
        ntuple = _read_ntuple_sample(s, fmt, base)
        out[name] = SampleSpec(
            name=name,
            files=tuple((base / f) if not Path(f).is_absolute() else Path(f) for f in files),
            label=s.string("label", name),
            cross_section_pb=s.number("cross_section_pb", None, positive=True),
            luminosity_fb=s.number("luminosity_fb", lumi, positive=True),
            toy=s.boolean("toy", False),
            format=fmt,
            **ntuple,
        )
        s.done()
    t.done()
    return out


def _read_ntuple_sample(s: _Table, fmt: str, base: Path) -> dict[str, Any]:
    """The ROOT-ntuple keys of a sample: ``input`` (the branch mapping), ``weights_give``,
    ``truth_files`` (see :mod:`evtkin.run.ntuple_input`)."""
    from evtkin.io.ntuple_mapping import NtupleMapping

    if fmt != "root":
        for key in ("input", "weights_give", "truth_files"):
            if s.has(key):
                raise s.ctx.error((*s.path, key), 'only for ROOT ntuples (format = "root")')
        return {}
    if not s.has("input"):
        s._missing("input", ' for format = "root" (the branch mapping: [samples.NAME.input])')
    raw = s.raw("input")
    where = _fmt_path((*s.path, "input"))
    try:
        mapping = NtupleMapping.from_dict(raw, where=where)
    except ConfigError as exc:
        # the mapping names the dotted key first: find its line
        msg = str(exc)
        key = msg.split(":", 1)[0]
        parts: list[str | int] = []
        for piece in key.split("."):
            head, _, idx = piece.partition("[")
            parts.append(head)
            if idx:
                parts.append(int(idx.rstrip("]")))
        line = s.ctx.lines.line(parts) if s.ctx.lines is not None else None
        at = f"{s.ctx.source}:{line}" if line is not None else s.ctx.source
        raise ConfigError(f"{at}: {msg}") from None
    truth = s.strings("truth_files", ())
    return {
        "input": mapping,
        "weights_give": s.string("weights_give", "mean", choices=("mean", "sum")),
        "truth_files": tuple((base / f) if not Path(f).is_absolute() else Path(f)
                             for f in truth),
    }


def _read_objects(top: _Table, classes: Mapping[str, tuple[int, ...]]) -> dict[str, ObjectSpec]:
    t = top.table("objects")
    out: dict[str, ObjectSpec] = {}
    if t is None:
        return out
    for name in list(t.data):
        if name in EVENT_FIELDS:
            raise t.ctx.error((*t.path, name), f"{name!r} is a reserved event field name")
        o = t.table(name)
        assert o is not None
        source = o.strings("from", None)
        if source is None or o.has("particles"):
            ids, names = _particle_ids(o, "particles", classes)
        else:
            ids, names = (), ()
        require = o.expression("require") if o.has("require") else None
        o.known.append("require")
        status_raw = o.raw("status", 1)
        status_list = status_raw if isinstance(status_raw, list) else [status_raw]
        if not status_list or not all(
            isinstance(x, int) and not isinstance(x, bool) for x in status_list
        ):
            raise o.ctx.error((*o.path, "status"),
                              f"expected a status code or a list of them, got {_kind(status_raw)}")
        iso_ids: tuple[int, ...] = ()
        iso_dr = None
        iso_pt = 0.0
        iso = o.table("isolation")
        iso_objs: tuple[str, ...] = ()
        if iso is not None:
            iso_objs = iso.strings("against_objects", ())
            if not iso_objs or iso.has("against"):
                iso_ids, _ = _particle_ids(iso, "against", classes)
            iso_dr = iso.number("within_dr", positive=True)
            iso_pt = iso.number("min_pt", 0.0, nonnegative=True)
            iso.done()
        radius = None
        clus = o.table("clustering")
        if clus is not None:
            clus.string("algorithm", "anti-kt", choices=("anti-kt",))
            radius = clus.number("radius", positive=True)
            clus.done()
        out[name] = ObjectSpec(
            name=name,
            pdgids=ids,
            classes=names,
            status=tuple(status_list),
            min_pt=o.number("min_pt", None, nonnegative=True),
            max_abs_eta=o.number("max_abs_eta", None, positive=True),
            max_abs_rapidity=o.number("max_abs_rapidity", None, positive=True),
            from_decay_of=_int_list(o, "from_decay_of"),
            isolation_against=iso_ids,
            isolation_dr=iso_dr,
            isolation_min_pt=iso_pt,
            cluster_radius=radius,
            source=source,
            require=require,
            isolation_objects=iso_objs,
        )
        o.done()
    t.done()
    return out


def _check_name(ctx: _Ctx, path: Path_, name: str, known: Iterable[str], what: str) -> None:
    known = list(known)
    if name not in known:
        raise ctx.error(path, f"{name!r} is not a defined {what} (defined: {', '.join(known)})",
                        suggest=_suggest(name, known))


def _read_overlap(top: _Table, objects: Mapping[str, ObjectSpec]) -> tuple[OverlapSpec, ...]:
    v = top.raw("overlap_removal", [])
    path: Path_ = ("overlap_removal",)
    if not isinstance(v, list):
        raise top.ctx.error(path, "expected [[overlap_removal]] entries (a list of tables)")
    out = []
    for i, item in enumerate(v):
        t = _Table(top.ctx, (*path, i), item)
        remove = t.string("remove")
        near = t.string("near")
        _check_name(t.ctx, (*t.path, "remove"), remove, objects, "object collection")
        _check_name(t.ctx, (*t.path, "near"), near, objects, "object collection")
        if remove == near:
            raise t.ctx.error((*t.path, "near"), "cannot remove a collection near itself")
        out.append(OverlapSpec(remove, near, t.number("within_dr", positive=True)))
        t.done()
    return tuple(out)


def _read_missing(top: _Table, classes: Mapping[str, tuple[int, ...]]) -> MissingPtSpec | None:
    t = top.table("missing_pt")
    if t is None:
        return None
    name = t.string("name", "met")
    ids, _ = _particle_ids(t, "particles", classes, default=["neutrinos"])
    source = t.string("from", None)
    t.done()
    return MissingPtSpec(name, ids, source)


def _read_steps(top: _Table) -> tuple[StepSpec, ...]:
    v = top.raw("step", [])
    path: Path_ = ("step",)
    if not isinstance(v, list):
        raise top.ctx.error(path, "expected [[step]] entries (a list of tables)")
    out: list[StepSpec] = []
    seen: set[str] = set()
    for i, item in enumerate(v):
        t = _Table(top.ctx, (*path, i), item)
        name = t.string("name")
        if name in seen or name == "all events":
            raise t.ctx.error((*t.path, "name"), f"step name {name!r} is used twice")
        seen.add(name)
        out.append(StepSpec(name, t.expression("require")))
        t.done()
    return tuple(out)


def _read_composites(top: _Table) -> dict[str, CompositeSpec]:
    t = top.table("composites")
    out: dict[str, CompositeSpec] = {}
    if t is None:
        return out
    for name in list(t.data):
        c = t.table(name)
        assert c is not None
        build = c.string("build", choices=COMPOSITE_BUILDS)
        opts: dict[str, Any] = {}
        if build == "pair":
            of = c.strings("of")
            if len(of) not in (1, 2):
                raise c.ctx.error((*c.path, "of"), "expected one collection or two collections")
            inputs = tuple(of)
            opts["mass_window"] = _pair(c, "mass_window")
            opts["min_dr"] = c.number("min_dr", None, nonnegative=True)
            opts["max_dr"] = c.number("max_dr", None, positive=True)
            opts["opposite_charge"] = c.boolean("opposite_charge", False)
            opts["same_flavour"] = c.boolean("same_flavour", False)
            opts["best_mass"] = c.number("best_mass", None, positive=True)
        elif build == "leptonic_w":
            inputs = (c.string("lepton"), c.string("missing_pt"))
            opts["w_mass"] = c.number("w_mass", DEFAULT_W_MASS, positive=True)
            opts["root"] = c.string("root", "smaller_abs_pz",
                                    choices=("smaller_abs_pz", "larger_abs_pz", "both"))
        else:  # ttbar_lepton_jets
            inputs = (c.string("lepton"), c.string("jets"), c.string("missing_pt"))
            opts["use_b_tags"] = c.boolean("use_b_tags", False)
            opts["neutrino_root"] = c.string("neutrino_root", "both",
                                             choices=("smaller_abs_pz", "larger_abs_pz", "both"))
            opts["w_mass"] = c.number("w_mass", DEFAULT_W_MASS, positive=True)
            opts["top_mass"] = c.number("top_mass", DEFAULT_TOP_MASS, positive=True)
            # resolutions entering the χ² (GeV); plain defaults, tune for detector-level input
            opts["w_resolution"] = c.number("w_resolution", 10.0, positive=True)
            opts["top_resolution"] = c.number("top_resolution", 15.0, positive=True)
            opts["max_jets"] = c.integer("max_jets", 6, positive=True)
        c.done()
        out[name] = CompositeSpec(name, build, inputs, opts)
    t.done()
    return out


def _read_quantities(top: _Table) -> dict[str, Expression]:
    t = top.table("quantities")
    out: dict[str, Expression] = {}
    if t is None:
        return out
    for name in list(t.data):
        t.known.append(name)
        out[name] = t.ctx.expr((*t.path, name), t.data[name])
    return out


def _edges(a: _Table) -> tuple[tuple[float, ...], bool]:
    if a.has("edges"):
        for k in ("bins", "range"):
            if a.has(k):
                raise a.ctx.error((*a.path, k), "give either edges or bins + range, not both")
        v = a.raw("edges")
        if (not isinstance(v, list) or len(v) < 2
                or not all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in v)):
            raise a.ctx.error((*a.path, "edges"), "expected a list of at least two numbers")
        edges = tuple(float(x) for x in v)
        if any(b <= x for x, b in itertools.pairwise(edges)):
            raise a.ctx.error((*a.path, "edges"), "expected strictly increasing bin edges")
        a.known.extend(["bins", "range"])
        return edges, False
    a.known.append("edges")
    n = a.integer("bins", positive=True)
    rng = _pair(a, "range")
    if rng is None:
        a._missing("range", " with bins (or give edges)")
        raise AssertionError  # pragma: no cover
    lo, hi = rng
    return tuple(lo + (hi - lo) * k / n for k in range(n + 1)), True


def _read_histograms(top: _Table, steps: tuple[StepSpec, ...],
                     samples: Mapping[str, SampleSpec]) -> dict[str, HistogramSpec]:
    t = top.table("histograms")
    out: dict[str, HistogramSpec] = {}
    if t is None:
        return out
    step_names = [s.name for s in steps]
    for name in list(t.data):
        h = t.table(name)
        assert h is not None
        axes = []
        for key in ("x", "y"):
            a = h.table(key, required=(key == "x"))
            if a is None:
                continue
            value = a.expression("value")
            edges, regular = _edges(a)
            axes.append(AxisDef(value, edges, regular, a.string("label", str(value)),
                                 a.string("unit", "")))
            a.done()
        after = h.string("after", None)
        if after is not None:
            _check_name(h.ctx, (*h.path, "after"), after, step_names, "step")
        only = h.strings("samples", None)
        if only is not None:
            for i, s in enumerate(only):
                _check_name(h.ctx, (*h.path, "samples", i), s, samples, "sample")
        out[name] = HistogramSpec(
            name=name,
            title=h.string("title", name),
            axes=tuple(axes),
            normalise=h.string("normalise", "xsec_per_bin", choices=NORMALISATIONS),
            after=after,
            samples=only,
            response=h.boolean("response", False),
        )
        h.done()
    t.done()
    return out


def _read_output(top: _Table, base: Path) -> OutputSpec:
    t = top.table("output")
    if t is None:
        return OutputSpec()
    directory = t.string("directory", None)
    formats = t.strings("formats", OUTPUT_FORMATS)
    for i, f in enumerate(formats):
        if f not in OUTPUT_FORMATS:
            raise t.ctx.error((*t.path, "formats", i), f"unknown output format {f!r} "
                              f"(known: {', '.join(OUTPUT_FORMATS)})",
                              suggest=_suggest(f, OUTPUT_FORMATS))
    plots = t.strings("plot_formats", ("png", "pdf"))
    for i, f in enumerate(plots):
        if f not in PLOT_FORMATS:
            raise t.ctx.error((*t.path, "plot_formats", i), f"unknown plot format {f!r} "
                              f"(known: {', '.join(PLOT_FORMATS)})",
                              suggest=_suggest(f, PLOT_FORMATS))
    t.done()
    return OutputSpec(base / directory if directory else None, tuple(formats), tuple(plots))


UNCERTAINTY_METHODS = ("envelope", "replicas_std", "replicas_68", "hessian_symmetric",
                       "hessian_asymmetric", "quadrature")


def _read_uncertainties(top: _Table, samples: Mapping[str, SampleSpec]
                        ) -> tuple[tuple[UncertaintySpec, ...], bool]:
    """``[uncertainties]``: ``automatic = bool`` and one sub-table per recipe (see
    :mod:`evtkin.hists.recipes` for the meaning; names are checked against the files there)."""
    t = top.table("uncertainties")
    if t is None:
        return (), True
    lines = t.ctx.lines
    out: list[UncertaintySpec] = []
    for name in list(t.data):
        if name == "automatic":
            continue
        u = t.table(name)
        assert u is not None
        method = u.string("method", choices=UNCERTAINTY_METHODS)
        at = {k: (lines.line((*u.path, k)) if lines is not None else None)
              for k in ("", "group", "ids", "of", "method", "samples", "drop_anticorrelated")}
        group = u.string("group", None)
        ids_raw = u.raw("ids")
        ids: tuple[str, ...] = ()
        if ids_raw is not None:
            ok = isinstance(ids_raw, list) and all(
                isinstance(x, (str, int)) and not isinstance(x, bool) for x in ids_raw)
            if not ok or not ids_raw:
                raise u.ctx.error((*u.path, "ids"), "expected a list of weight ids (strings or "
                                  f"whole numbers), got {_kind(ids_raw)}")
            ids = tuple(str(x) for x in ids_raw)
        of = u.strings("of", ())
        if method == "quadrature":
            if group is not None or ids:
                raise u.ctx.error((*u.path, "group" if group is not None else "ids"),
                                  "a quadrature combines other recipes: give of = [...] only")
            if not of:
                raise u.ctx.error((*u.path, "of"), "expected the names of the recipes to combine")
            for i, o in enumerate(of):
                before = [x.name for x in out if x.method != "quadrature"]
                _check_name(u.ctx, (*u.path, "of", i), o, before, "recipe declared above")
        else:
            if of:
                raise u.ctx.error((*u.path, "of"), "only method = 'quadrature' takes of = [...]")
            if (group is None) == (not ids):
                raise u.ctx.error((*u.path, "group"), "give exactly one of group = \"NAME\" (a "
                                  "weight group declared in the files) or ids = [...]")
        drop = u.boolean("drop_anticorrelated", False)
        if drop and method != "envelope":
            raise u.ctx.error((*u.path, "drop_anticorrelated"), "only for method = 'envelope'")
        only = u.strings("samples", None)
        if only is not None:
            for i, s in enumerate(only):
                _check_name(u.ctx, (*u.path, "samples", i), s, samples, "sample")
        u.done()
        out.append(UncertaintySpec(name, method, group, ids, drop, tuple(of), only, at))
    automatic = t.boolean("automatic", not out)
    t.done()
    return tuple(out), automatic


# --------------------------------------------------------------------------- name checks

def _check_expression_names(ctx: _Ctx, path: Path_, expr: Expression,
                            known: Mapping[str, str]) -> None:
    for name, col in expr.names.items():
        if name not in known:
            close = _suggest(name, known)
            hint = f"; did you mean {close!r}?" if close else ""
            exc = ExpressionError(f"unknown name {name!r}{hint}", expr.text, col)
            raise ctx._expr_error(path, exc)


def _check_names(ctx: _Ctx, cfg: AnalysisConfig) -> None:
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
    for name, q in cfg.quantities.items():
        if name in cfg.objects or name in cfg.composites or name in EVENT_FIELDS:
            raise ctx.error(("quantities", name), f"{name!r} is already defined elsewhere")
        _check_expression_names(ctx, ("quantities", name), q, known)
    for name, h in cfg.histograms.items():
        if h.normalise == "events":
            for sname in h.samples or tuple(cfg.samples):
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


def _check_ntuple_names(ctx: _Ctx, cfg: AnalysisConfig) -> None:
    """Objects, missing pT and response histograms against the samples' formats and mappings."""
    from evtkin.events import PARTICLE_FIELDS
    from evtkin.expr import ATTRIBUTES

    for oname, o in cfg.objects.items():
        for other in o.isolation_objects:
            _check_name(ctx, ("objects", oname, "isolation", "against_objects"), other,
                        [n for n in cfg.objects if n != oname], "object collection")
    for sname, spec in cfg.samples.items():
        if spec.format != "root":
            for oname, o in cfg.objects.items():
                if not o.pdgids:
                    raise ctx.error(("objects", oname), f"sample {sname!r} is an LHE file: give "
                                    "particles = [...] (from = ... is for ROOT ntuples)")
                if o.require is not None:
                    _check_expression_names(ctx, ("objects", oname, "require"), o.require,
                                            {n: "field" for n in (*PARTICLE_FIELDS, *ATTRIBUTES)})
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


def _check_met(ctx: _Ctx, cfg: AnalysisConfig, path: Path_, name: str) -> None:
    if cfg.missing_pt is None:
        raise ctx.error(path, "needs a [missing_pt] section")
    _check_name(ctx, path, name, [cfg.missing_pt.name], "missing-pT name")


# --------------------------------------------------------------------------- entry point

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
    a.done()
    classes = _read_classes(top)
    samples = _read_samples(top, base, lumi)
    objects = _read_objects(top, classes)
    overlap = _read_overlap(top, objects)
    missing = _read_missing(top, classes)
    steps = _read_steps(top)
    composites = _read_composites(top)
    quantities = _read_quantities(top)
    histograms = _read_histograms(top, steps, samples)
    output = _read_output(top, base)
    uncertainties, automatic = _read_uncertainties(top, samples)
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
    )
    _check_names(ctx, cfg)
    _check_ntuple_names(ctx, cfg)
    return cfg
