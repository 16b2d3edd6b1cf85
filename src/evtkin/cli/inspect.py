"""``evtkin inspect FILE.root``: list the trees and branches of a ROOT file and suggest a mapping.

The suggested mapping is TOML text for the ntuple input table (see
:mod:`evtkin.io.ntuple_mapping`): jagged branches named ``Prefix_pt``, ``Prefix_eta``,
``Prefix_phi`` (and ``Prefix_mass``/``Prefix_m``), or ``Prefix_px/_py/_pz/_E``, become a
collection ``prefixs`` whose other ``Prefix_*`` jagged branches are extra fields; per-event
``Prefix_pt/Prefix_phi`` (or ``_px/_py``) pairs become vectors; a per-event number called
``weight`` is the event weight, an array branch whose name contains ``weight`` the variation
weights, ``event``/``event_number``/``evt`` the event number. Other per-event branches are
listed as commented-out scalars. Nothing is read but the file's metadata.
"""

from __future__ import annotations

import argparse
import re
from dataclasses import dataclass, field

from evtkin.errors import NtupleError

__all__ = ["BranchInfo", "TreeInfo", "add_parser", "inspect_file", "run", "suggest_mapping"]

_SEPARATORS = ("_", ".")
_POLAR = {"pt": ("pt",), "eta": ("eta",), "phi": ("phi",), "mass": ("mass", "m")}
_CARTESIAN = {"px": ("px",), "py": ("py",), "pz": ("pz",), "energy": ("e", "energy")}
_EVENT_NAMES = ("event", "event_number", "eventnumber", "evt", "evtnum", "event_id")


@dataclass(frozen=True)
class BranchInfo:
    """One branch: name, type text, kind (``flat``/``jagged``/``other``), counter, bytes."""

    name: str
    type: str
    kind: str
    dtype_kind: str  # numpy dtype kind ("f", "i", "u", "b") or "" for other
    shape: tuple[int, ...]
    counter: str | None
    compressed_bytes: int


@dataclass
class TreeInfo:
    """One TTree of a file."""

    name: str
    title: str
    entries: int
    branches: list[BranchInfo] = field(default_factory=list)


def inspect_file(path: str) -> tuple[list[TreeInfo], dict[str, str]]:
    """The TTrees of ``path`` (with their branches) and the other objects (name -> class)."""
    import os

    import uproot

    from evtkin.io.ntuple import branch_type

    if not os.path.isfile(path):
        raise NtupleError(f"{path}: no such file")
    try:
        f = uproot.open(path, object_cache=None, array_cache=None)
    except Exception as exc:
        raise NtupleError(f"{path}: cannot open as a ROOT file ({type(exc).__name__}: "
                          f"{' '.join(str(exc).split())[:300]})") from None
    trees: list[TreeInfo] = []
    others: dict[str, str] = {}
    with f:
        try:
            classes = f.classnames()
        except Exception as exc:
            raise NtupleError(f"{path}: cannot read the file's directory ({exc})") from None
        seen: set[str] = set()
        for key, cls in classes.items():
            name = key.rsplit(";", 1)[0]
            if name in seen:  # older cycles of the same object
                continue
            seen.add(name)
            if cls != "TTree":
                others[name] = cls
                continue
            try:
                tree = f[name]
                info = TreeInfo(name, str(tree.title or ""), int(tree.num_entries))
                for b in tree.itervalues(recursive=True):
                    bt = branch_type(b)
                    counter = getattr(b, "count_branch", None)
                    try:
                        size = int(b.compressed_bytes)
                    except Exception:
                        size = 0
                    info.branches.append(BranchInfo(
                        b.name, bt.describe(), bt.kind, bt.dtype.kind if bt.dtype else "",
                        bt.shape, counter.name if counter is not None else None, size,
                    ))  # fmt: skip
            except Exception as exc:
                raise NtupleError(
                    f"{path}: tree {name!r}: cannot read its metadata ({exc})"
                ) from None
            trees.append(info)
    return trees, others


# --------------------------------------------------------------------------- the suggestion

def _split(name: str) -> tuple[str, str] | None:
    """``Prefix_suffix`` -> (Prefix, suffix) at the last separator."""
    cut = max(name.rfind(s) for s in _SEPARATORS)
    if cut <= 0 or cut == len(name) - 1:
        return None
    return name[:cut], name[cut + 1 :]


def _ident(prefix: str) -> str:
    word = re.sub(r"[^A-Za-z0-9_]", "_", prefix).strip("_").lower() or "objects"
    if word[0].isdigit():
        word = "c_" + word
    return word


def _plural(prefix: str) -> str:
    word = _ident(prefix)
    return word if word.endswith("s") else word + "s"


def _coords(members: dict[str, BranchInfo], system: dict[str, tuple[str, ...]],
            optional: str | None) -> dict[str, str] | None:
    out = {}
    lower = {k.lower(): b for k, b in members.items()}
    for coord, keys in system.items():
        hit = next((lower[k] for k in keys if k in lower and lower[k].dtype_kind in "iuf"
                    and not lower[k].shape), None)  # fmt: skip
        if hit is None:
            if coord == optional:
                continue
            return None
        out[coord] = hit.name
    return out


def _toml_key(name: str) -> str:
    return name if re.match(r"^[A-Za-z0-9_-]+$", name) else '"' + name.replace('"', '\\"') + '"'


def _q(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def suggest_mapping(tree: TreeInfo) -> str:
    """TOML text of a mapping skeleton for ``tree`` (parses and validates as it is)."""
    counters = {b.counter for b in tree.branches if b.counter}
    numeric = [b for b in tree.branches if b.kind != "other" and b.dtype_kind in "biuf"
               and b.name not in counters]  # fmt: skip
    lines = [f"tree = {_q(tree.name)}", 'units = "GeV"    # or "MeV"']
    used: set[str] = set()

    flat = [b for b in numeric if b.kind == "flat"]
    scalar_numbers = [b for b in flat if not b.shape and b.dtype_kind in "iuf"]
    weight = next((b for b in scalar_numbers if b.name.lower() == "weight"), None) or next(
        (b for b in scalar_numbers if "weight" in b.name.lower()), None)
    if weight is not None:
        lines.append(f"weight = {_q(weight.name)}")
        used.add(weight.name)
    else:
        lines.append("# weight = \"BRANCH\"    # no weight branch found: every event weighs 1")
    variation = next((b for b in numeric if "weight" in b.name.lower() and b.name not in used
                      and b.dtype_kind in "iuf" and (b.kind == "jagged" or len(b.shape) == 1)),
                     None)  # fmt: skip
    if variation is not None:
        lines.append(f"variation_weights = {_q(variation.name)}")
        used.add(variation.name)
    event = next((b for b in scalar_numbers if b.name.lower() in _EVENT_NAMES
                  and b.dtype_kind in "iu"), None)  # fmt: skip
    if event is not None:
        lines.append(f"event_number = {_q(event.name)}")
        used.add(event.name)

    # jagged groups -> collections
    groups: dict[str, dict[str, BranchInfo]] = {}
    for b in numeric:
        if b.kind == "jagged" and b.name not in used:
            parts = _split(b.name)
            if parts:
                groups.setdefault(parts[0], {})[parts[1]] = b
    names: set[str] = set()
    not_vectors: list[str] = []
    for prefix, members in groups.items():
        coords = _coords(members, _POLAR, "mass") or _coords(members, _CARTESIAN, None)
        if coords is None:
            not_vectors += [b.name for b in members.values()]
            continue
        cname = _plural(prefix)
        while cname in names:
            cname += "_"
        names.add(cname)
        lines += ["", f"[collections.{cname}]"]
        for coord, branch in coords.items():
            lines.append(f"{coord} = {_q(branch)}")
            used.add(branch)
        if "pt" in coords and "mass" not in coords:
            lines.append(f"mass = 0.0    # no {prefix} mass branch: a fixed mass in GeV")
        extras = [b for b in members.values() if b.name not in used]
        if extras:
            lines.append(f"[collections.{cname}.fields]")
            for b in extras:
                field_name = _ident(_split(b.name)[1])  # type: ignore[index]
                if field_name in ("x", "y", "z", "t", "e", "m", "energy", "mass", "tau", "rho",
                                  "theta", "rapidity"):  # fmt: skip
                    field_name += "_"
                lines.append(f"{_toml_key(field_name)} = {_q(b.name)}")
                used.add(b.name)

    # flat groups -> per-event vectors
    fgroups: dict[str, dict[str, BranchInfo]] = {}
    for b in scalar_numbers:
        if b.name not in used and (parts := _split(b.name)):
            fgroups.setdefault(parts[0], {})[parts[1]] = b
    for prefix, members in fgroups.items():
        coords = _coords(members, {"pt": ("pt",), "phi": ("phi",)}, None) or _coords(
            members, {"px": ("px",), "py": ("py",)}, None)
        if coords is None:
            continue
        vname = _ident(prefix)
        while vname in names:
            vname += "_"
        names.add(vname)
        lines += ["", f"[vectors.{vname}]"]
        for coord, branch in coords.items():
            lines.append(f"{coord} = {_q(branch)}")
            used.add(branch)

    rest = [b for b in flat if b.name not in used]
    if rest:
        lines += ["", "[scalars]    # per-event values: uncomment what the analysis uses"]
        for b in rest:
            sname = _ident(b.name)
            if sname in ("weight", "weights", "process_id", "event_number") or sname in names:
                sname += "_"
            lines.append(f"# {_toml_key(sname)} = {_q(b.name)}    # {b.type}")
    if not_vectors:
        lines += ["", "# jagged branches without a four-vector (add them as fields of a "
                  "collection if they belong to one):"]
        lines += [f"#   {n}" for n in not_vectors]
    if not names:
        lines += ["", "# no four-vector collections recognised: add [collections.NAME] tables "
                  "with pt/eta/phi/mass or px/py/pz/energy branches"]
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------- command

def _size(n: int) -> str:
    for unit in ("B", "kB", "MB", "GB"):
        if n < 1000 or unit == "GB":
            return f"{n:.0f} {unit}" if unit == "B" else f"{n:.1f} {unit}"
        n /= 1000  # type: ignore[assignment]
    return f"{n} B"  # pragma: no cover


def add_parser(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "inspect",
        help="list the trees and branches of a ROOT file and suggest an input mapping",
        description="List the TTrees of a ROOT file with their branches (type per event, "
        "entries, compressed size) and print a suggested input mapping (TOML) to edit.",
    )
    p.add_argument("file", help="ROOT file")
    p.add_argument("--tree", default=None, help="suggest the mapping for this tree "
                   "(default: the tree with the most branches)")  # fmt: skip
    p.add_argument("--mapping-only", action="store_true",
                   help="print only the suggested mapping (TOML)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    trees, others = inspect_file(args.file)
    if not trees:
        raise NtupleError(f"{args.file}: holds no TTree"
                          + (f" (objects: {', '.join(others)})" if others else ""))
    if args.tree is not None:
        chosen = next((t for t in trees if t.name == args.tree), None)
        if chosen is None:
            raise NtupleError(f"{args.file}: no tree {args.tree!r} (TTrees: "
                              f"{', '.join(t.name for t in trees)})")
    else:
        chosen = max(trees, key=lambda t: len(t.branches))
    if not args.mapping_only:
        out: list[str] = [f"file: {args.file}"]
        for t in trees:
            out.append("")
            title = f" \"{t.title}\"" if t.title else ""
            out.append(f"TTree {t.name!r}{title}: {t.entries} entries, {len(t.branches)} "
                       "branches")
            width = max((len(b.name) for b in t.branches), default=4)
            twidth = max((len(b.type) for b in t.branches), default=4)
            out.append(f"  {'branch':<{width}}  {'type per event':<{twidth}}  {'size':>9}  note")
            for b in t.branches:
                note = f"counted by {b.counter}" if b.counter else ""
                if b.kind == "other":
                    note = "not readable as numbers"
                out.append(f"  {b.name:<{width}}  {b.type:<{twidth}}  "
                           f"{_size(b.compressed_bytes):>9}  {note}".rstrip())
        if others:
            out.append("")
            out.append("other objects: " + ", ".join(f"{k} ({v})" for k, v in others.items()))
        out += ["", f"# suggested input mapping for tree {chosen.name!r} (TOML; edit it)"]
        print("\n".join(out))
    print(suggest_mapping(chosen), end="")
    return 0
