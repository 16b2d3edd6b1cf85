"""The declared mapping from ROOT ntuple branches to evtkin's event model.

A mapping is built from a plain dict (the TOML table the config layer hands over) with
:meth:`NtupleMapping.from_dict`. Every key is optional except the collections you want::

    tree = "events"                  # default: the only TTree in the file
    units = "GeV"                    # or "MeV": momenta/energies/masses are divided by 1000
    weight = "weight"                # nominal event weight branch (or a number; default 1.0)
    variation_weights = ["w_up", "w_down"]   # scalar branches, or ONE branch holding a
                                             # fixed-size (or constant-length jagged) array
    variation_names = ["up", "down"]  # optional; default: the branch names / "<branch>_<i>"
    event_number = "event"           # optional: output field ``event_number`` (int64)
    process_id = 0                   # a branch or an integer (default 0): field ``process_id``

    [collections.jets]               # one jagged collection per table
    pt = "Jet_pt"                    # either pt, eta, phi, mass (``m`` accepted) ...
    eta = "Jet_eta"
    phi = "Jet_phi"
    mass = "Jet_mass"                # ... a branch or a number in the mapping's units
    # px = "...", py = "...", pz = "...", energy = "..." (``E`` accepted) is the other choice
    [collections.jets.fields]        # extra per-object fields: name -> branch (or a number)
    btag = "Jet_btag"

    [collections.muons]              # flat per-object branches mu1_pt, mu2_pt, ...: one
    slots = 2                        # number per event and slot; ``{i}`` in a branch name is
    pt = "mu{i}_pt"                  # the slot number (``slots = N``: 1..N, or a list of them)
    eta = "mu{i}_eta"                # a slot holds an object when its pt (cartesian: energy)
    phi = "mu{i}_phi"                # is a number > 0; empty slots (0, negative, NaN) are
    mass = 0.1057                    # left out

    [vectors.met]                    # per-event transverse vectors: pt, phi or px, py
    pt = "MET_pt"
    phi = "MET_phi"

    [scalars]                        # per-event values or fixed-size arrays: name -> branch
    n_vertices = "nPV"

Output field names: ``weight``, ``weights``, ``process_id``, ``event_number`` (if mapped),
then the collection, vector and scalar names. Collections become jagged records with the
``vector`` behaviour ``Momentum4D`` holding the coordinate fields (``pt, eta, phi, mass`` or
``px, py, pz, energy``) plus the extra fields; vectors become ``Momentum2D`` records.

Validation errors are :class:`~evtkin.errors.ConfigError` naming the key (``where`` prefix,
e.g. ``input.collections.jets.pt``).
"""

from __future__ import annotations

import difflib
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

from evtkin.errors import ConfigError

__all__ = [
    "RESERVED_FIELDS",
    "CollectionMap",
    "NtupleMapping",
    "VectorMap",
]

#: output fields every chunk has (or may have); no collection/vector/scalar may use these names
RESERVED_FIELDS = ("weight", "weights", "process_id", "event_number")

#: coordinate systems of a collection: output field name -> accepted mapping keys
_SYSTEMS_4D: dict[str, dict[str, tuple[str, ...]]] = {
    "ptetaphim": {"pt": ("pt",), "eta": ("eta",), "phi": ("phi",), "mass": ("mass", "m")},
    "cartesian": {"px": ("px",), "py": ("py",), "pz": ("pz",), "energy": ("energy", "E")},
}
_SYSTEMS_2D: dict[str, dict[str, tuple[str, ...]]] = {
    "ptphi": {"pt": ("pt",), "phi": ("phi",)},
    "cartesian": {"px": ("px",), "py": ("py",)},
}
#: coordinates that carry an energy dimension (scaled by ``units``)
ENERGY_LIKE = frozenset({"pt", "mass", "px", "py", "pz", "energy"})
#: names ``vector`` reads as coordinates: extra fields may not use them
_VECTOR_NAMES = frozenset({
    "x", "y", "z", "t", "px", "py", "pz", "E", "e", "energy", "pt", "rho", "phi", "eta",
    "theta", "tau", "M", "m", "mass", "rapidity",
})  # fmt: skip
_TOP_KEYS = ("tree", "units", "weight", "variation_weights", "variation_names", "event_number",
             "process_id", "collections", "vectors", "scalars")  # fmt: skip
_UNITS = {"GeV": 1.0, "MeV": 1e-3}
#: the placeholder for the slot number in the branch names of a flat collection
SLOT = "{i}"


def _slots(value: Any, where: str) -> tuple[int, ...]:
    if isinstance(value, int) and not isinstance(value, bool):
        if value < 1:
            raise ConfigError(f"{where}: expected a number of slots >= 1, got {value}")
        return tuple(range(1, value + 1))
    if (isinstance(value, (list, tuple)) and value
            and all(isinstance(v, int) and not isinstance(v, bool) and v >= 0 for v in value)):
        if len(set(value)) != len(value):
            raise ConfigError(f"{where}: a slot number is listed twice")
        return tuple(int(v) for v in value)
    raise ConfigError(f"{where}: expected a whole number N (slots 1..N) or a list of slot "
                      f"numbers >= 0, got {value!r}")
_NAME = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")

Source = str | float  # a branch name, or a constant


def _suggest(word: str, options: Iterable[str]) -> str:
    close = difflib.get_close_matches(word, list(options), n=3, cutoff=0.6)
    return f" (did you mean {' or '.join(repr(c) for c in close)}?)" if close else ""


def _unknown_keys(table: Mapping[str, Any], allowed: Iterable[str], where: str) -> None:
    allowed = tuple(allowed)
    for key in table:
        if key not in allowed:
            raise ConfigError(
                f"{where}.{key}: unknown key{_suggest(str(key), allowed)}; "
                f"expected one of {', '.join(allowed)}"
            )


def _branch(value: Any, where: str) -> str:
    if not isinstance(value, str) or not value.strip():
        raise ConfigError(f"{where}: expected a branch name (a non-empty string), got {value!r}")
    return value


def _branch_or_number(value: Any, where: str) -> Source:
    if isinstance(value, bool):
        raise ConfigError(f"{where}: expected a branch name or a number, got {value!r}")
    if isinstance(value, (int, float)):
        return value
    return _branch(value, where)


def _table(value: Any, where: str) -> Mapping[str, Any]:
    if not isinstance(value, Mapping):
        raise ConfigError(f"{where}: expected a table, got {type(value).__name__} {value!r}")
    return value


def _field_name(name: Any, where: str) -> str:
    if not isinstance(name, str) or not _NAME.match(name):
        raise ConfigError(
            f"{where}: {name!r} is not a usable name (letters, digits and _, not starting "
            "with a digit)"
        )
    return name


def _coordinates(
    table: Mapping[str, Any], systems: Mapping[str, Mapping[str, tuple[str, ...]]], where: str
) -> tuple[str, dict[str, Source]]:
    """Pick the coordinate system from the keys present; every coordinate must be given."""
    present = {k for k in table if any(k in keys for s in systems.values()
                                       for keys in s.values())}  # fmt: skip
    choices = []
    for system, coords in systems.items():
        if any(k in keys for keys in coords.values() for k in present):
            choices.append(system)
    if len(choices) != 1:
        wanted = " or ".join("/".join(k[0] for k in s.values()) for s in systems.values())
        what = "mixes both systems" if choices else "has no coordinates"
        raise ConfigError(f"{where}: {what}; give {wanted}")
    system = choices[0]
    out: dict[str, Source] = {}
    for name, keys in systems[system].items():
        given = [k for k in keys if k in table]
        if not given:
            label = "/".join(k[0] for k in systems[system].values())
            raise ConfigError(f"{where}.{keys[0]}: missing; the {label} system needs it")
        if len(given) > 1:
            raise ConfigError(f"{where}: give {' or '.join(given)}, not both")
        key = given[0]
        # only a mass may be a constant (e.g. leptons without a mass branch)
        value = table[key]
        out[name] = (_branch_or_number(value, f"{where}.{key}") if name == "mass"
                     else _branch(value, f"{where}.{key}"))  # fmt: skip
    return system, out


@dataclass(frozen=True)
class CollectionMap:
    """A jagged collection: coordinate sources and extra fields (name -> branch or constant)."""

    name: str
    system: str  # "ptetaphim" or "cartesian"
    coords: dict[str, Source]
    fields: dict[str, Source] = field(default_factory=dict)
    #: flat layout: the slot numbers put for ``{i}`` in each branch name (empty: jagged)
    slots: tuple[int, ...] = ()

    @property
    def flat(self) -> bool:
        """True for one flat branch per object slot (``mu1_pt``, ``mu2_pt``, ...)."""
        return bool(self.slots)

    @property
    def presence(self) -> str:
        """The coordinate that tells a filled slot (pt, or the energy for cartesian)."""
        return "pt" if self.system == "ptetaphim" else "energy"

    def slot_branches(self, src: str) -> list[str]:
        """The branch of every slot for a flat source (``mu{i}_pt`` → ``mu1_pt``, ...)."""
        return [src.replace(SLOT, str(k)) for k in self.slots]

    def branches(self, extras: Iterable[str] | None = None) -> dict[str, str]:
        """``{output field: branch}`` of the coordinates and the chosen extras (default all)."""
        keep = self.fields if extras is None else {k: self.fields[k] for k in extras}
        return {k: v for k, v in {**self.coords, **keep}.items() if isinstance(v, str)}


@dataclass(frozen=True)
class VectorMap:
    """A per-event transverse vector (``pt, phi`` or ``px, py``)."""

    name: str
    system: str  # "ptphi" or "cartesian"
    coords: dict[str, str]


@dataclass(frozen=True)
class NtupleMapping:
    """Which branches feed which fields of the event model (see the module docstring)."""

    tree: str | None = None
    units: str = "GeV"
    weight: Source | None = None
    variation_weights: tuple[str, ...] | str | None = None
    variation_names: tuple[str, ...] | None = None
    event_number: str | None = None
    process_id: Source = 0
    collections: dict[str, CollectionMap] = field(default_factory=dict)
    vectors: dict[str, VectorMap] = field(default_factory=dict)
    scalars: dict[str, str] = field(default_factory=dict)
    where: str = "input"

    @property
    def scale(self) -> float:
        """Factor that turns the file's momentum unit into GeV."""
        return _UNITS[self.units]

    @classmethod
    def from_dict(cls, table: Mapping[str, Any], where: str = "input") -> NtupleMapping:
        """Validate a plain dict (a TOML table); errors name the key as ``where.key...``."""
        table = _table(table, where)
        _unknown_keys(table, _TOP_KEYS, where)
        tree = table.get("tree")
        if tree is not None:
            tree = _branch(tree, f"{where}.tree")
        units = table.get("units", "GeV")
        if units not in _UNITS:
            raise ConfigError(f"{where}.units: expected one of {', '.join(_UNITS)}, got {units!r}")
        weight = table.get("weight")
        if weight is not None:
            weight = _branch_or_number(weight, f"{where}.weight")
        var = table.get("variation_weights")
        variations: tuple[str, ...] | str | None = None
        n_var: int | None = None
        if isinstance(var, str):
            variations = _branch(var, f"{where}.variation_weights")
        elif var is not None:
            if not isinstance(var, (list, tuple)):
                raise ConfigError(
                    f"{where}.variation_weights: expected a list of branch names or one branch "
                    f"holding an array per event, got {var!r}"
                )
            variations = tuple(_branch(v, f"{where}.variation_weights[{i}]")
                               for i, v in enumerate(var))  # fmt: skip
            n_var = len(variations)
        names = table.get("variation_names")
        vnames: tuple[str, ...] | None = None
        if names is not None:
            if not isinstance(names, (list, tuple)) or not all(isinstance(s, str) for s in names):
                raise ConfigError(f"{where}.variation_names: expected a list of strings")
            if variations is None:
                raise ConfigError(f"{where}.variation_names: given without variation_weights")
            if n_var is not None and len(names) != n_var:
                raise ConfigError(
                    f"{where}.variation_names: {len(names)} names for {n_var} variation weights"
                )
            if len(set(names)) != len(names):
                raise ConfigError(f"{where}.variation_names: names must be unique")
            vnames = tuple(names)
        event = table.get("event_number")
        if event is not None:
            event = _branch(event, f"{where}.event_number")
        pid = table.get("process_id", 0)
        if isinstance(pid, (float, bool)):
            raise ConfigError(f"{where}.process_id: expected a branch name or an integer")
        pid = _branch_or_number(pid, f"{where}.process_id")

        used: dict[str, str] = {}

        def claim(name: str, key: str) -> str:
            name = _field_name(name, key)
            if name in RESERVED_FIELDS:
                raise ConfigError(f"{key}: {name!r} is reserved ({', '.join(RESERVED_FIELDS)})")
            if name in used:
                raise ConfigError(f"{key}: the name {name!r} is already used by {used[name]}")
            used[name] = key
            return name

        collections: dict[str, CollectionMap] = {}
        for cname, ctab in _table(table.get("collections", {}), f"{where}.collections").items():
            key = f"{where}.collections.{cname}"
            claim(cname, key)
            ctab = _table(ctab, key)
            coord_keys = [k for s in _SYSTEMS_4D.values() for ks in s.values() for k in ks]
            _unknown_keys(ctab, (*coord_keys, "fields", "slots"), key)
            slots = _slots(ctab["slots"], f"{key}.slots") if "slots" in ctab else ()
            system, coords = _coordinates(ctab, _SYSTEMS_4D, key)
            extras: dict[str, Source] = {}
            for fname, src in _table(ctab.get("fields", {}), f"{key}.fields").items():
                fkey = f"{key}.fields.{fname}"
                _field_name(fname, fkey)
                if fname in _VECTOR_NAMES:
                    raise ConfigError(
                        f"{fkey}: {fname!r} is a four-vector coordinate name; choose another "
                        "name for an extra field"
                    )
                extras[fname] = _branch_or_number(src, fkey)
            for what, sources in (("", coords), ("fields.", extras)):
                for fname, src in sources.items():
                    if not isinstance(src, str):
                        continue
                    if slots and SLOT not in src:
                        raise ConfigError(
                            f"{key}.{what}{fname}: {src!r} has no {SLOT} for the slot number; "
                            f"with slots every branch name holds {SLOT} (e.g. 'mu{SLOT}_pt')")
                    if not slots and SLOT in src:
                        raise ConfigError(
                            f"{key}.{what}{fname}: {src!r} holds {SLOT} but the collection "
                            f"declares no slots (add e.g. slots = 2 for {src.replace(SLOT, '1')}"
                            f", {src.replace(SLOT, '2')})")
            collections[cname] = CollectionMap(cname, system, coords, extras, slots)

        vectors: dict[str, VectorMap] = {}
        for vname, vtab in _table(table.get("vectors", {}), f"{where}.vectors").items():
            key = f"{where}.vectors.{vname}"
            claim(vname, key)
            vtab = _table(vtab, key)
            _unknown_keys(vtab, ("pt", "phi", "px", "py"), key)
            system, coords2 = _coordinates(vtab, _SYSTEMS_2D, key)
            vectors[vname] = VectorMap(vname, system, {k: str(v) for k, v in coords2.items()})

        scalars: dict[str, str] = {}
        for sname, src in _table(table.get("scalars", {}), f"{where}.scalars").items():
            key = f"{where}.scalars.{sname}"
            claim(sname, key)
            scalars[sname] = _branch(src, key)

        if not (collections or vectors or scalars):
            raise ConfigError(
                f"{where}: maps no collections, vectors or scalars; add at least one "
                f"[{where}.collections.NAME] table"
            )
        return cls(tree, units, weight, variations, vnames, event, pid, collections, vectors,
                   scalars, where)  # fmt: skip

    # ------------------------------------------------------------------ field selection

    def field_names(self) -> list[str]:
        """Every name ``fields=`` accepts: collections, ``collection.field``, vectors, scalars."""
        out: list[str] = []
        for c in self.collections.values():
            out.append(c.name)
            out += [f"{c.name}.{f}" for f in (*c.coords, *c.fields)]
        out += list(self.vectors) + list(self.scalars)
        if self.event_number is not None:
            out.append("event_number")
        return out

    def select(self, fields: Iterable[str] | None) -> Selection:
        """Resolve a list of needed names (see :func:`~evtkin.io.ntuple.read_ntuple`)."""
        if fields is None:
            return Selection(
                {c: None for c in self.collections}, set(self.vectors), set(self.scalars),
                self.event_number is not None,
            )
        colls: dict[str, set[str] | None] = {}
        vectors: set[str] = set()
        scalars: set[str] = set()
        event = False
        for item in fields:
            head, _, sub = str(item).partition(".")
            if head in ("weight", "weights", "process_id"):
                continue  # always read
            if head == "event_number" and self.event_number is not None and not sub:
                event = True
            elif head in self.collections:
                c = self.collections[head]
                if not sub:
                    colls[head] = None
                    continue
                if sub in c.coords:
                    colls.setdefault(head, set())
                elif sub in c.fields:
                    have = colls.setdefault(head, set())
                    if have is not None:
                        have.add(sub)
                else:
                    raise ConfigError(
                        f"{self.where}.collections.{head}: no field {sub!r}"
                        f"{_suggest(sub, (*c.coords, *c.fields))}; it has "
                        f"{', '.join((*c.coords, *c.fields))}"
                    )
            elif head in self.vectors and not sub:
                vectors.add(head)
            elif head in self.scalars and not sub:
                scalars.add(head)
            else:
                names = self.field_names()
                raise ConfigError(
                    f"{self.where}: the ntuple mapping has no {item!r}{_suggest(str(item), names)}"
                    f"; it maps {', '.join(names)}"
                )
        return Selection(colls, vectors, scalars, event)


@dataclass(frozen=True)
class Selection:
    """What one read produces: collections (``None`` = all extra fields), vectors, scalars."""

    collections: dict[str, set[str] | None]
    vectors: set[str]
    scalars: set[str]
    event_number: bool
