"""``[samples.NAME]``: files, labels, cross sections, formats, ROOT-ntuple mappings."""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

from evtkin.config.schema import SAMPLE_FORMATS, SampleSpec
from evtkin.config.tables import _fmt_path, _Table
from evtkin.errors import ConfigError

#: what a folder given in ``files`` contributes: its files with these endings, by format
_FOLDER_SUFFIXES = {"lhe": (".lhe", ".lhe.gz", ".lhe.zst", ".lhe.bz2", ".lhe.xz", ".lhef"),
                    "root": (".root",),
                    "hepmc": (".hepmc", ".hepmc.gz", ".hepmc.zst", ".hepmc.bz2", ".hepmc.xz",
                              ".hepmc3", ".hepmc2")}
#: a sample without ``format``: its folders contribute LHE and HepMC files, and the format is
#: recognised from the first file's content
_FOLDER_SUFFIXES["auto"] = _FOLDER_SUFFIXES["lhe"] + _FOLDER_SUFFIXES["hepmc"]
#: a HepMC ASCII file starts with this line (HepMC 2 and 3 ASCII forms), after the version line
_HEPMC_START = re.compile(rb"^HepMC::(Asciiv3|IO_GenEvent)-START_EVENT_LISTING", re.M)
_SNIFF_BYTES = 4096
_GLOB = set("*?[")


def _expand_files(s: _Table, files: tuple[str, ...], fmt: str, base: Path,
                  warnings: list[str]) -> tuple[Path, ...]:
    """``files`` entries → paths: a glob pattern gives its matches (sorted), a folder its
    files of the sample's format (sorted); a file listed twice is read once, with a warning."""
    out: list[Path] = []
    where: dict[Path, int] = {}
    for i, f in enumerate(files):
        path = Path(f) if Path(f).is_absolute() else base / f
        key = (*s.path, "files", i) if len(files) > 1 else (*s.path, "files")
        if _GLOB & set(f):
            anchor = Path(path.anchor) if path.is_absolute() else base
            pattern = str(path.relative_to(anchor)) if path.is_absolute() else f
            found = sorted(p for p in anchor.glob(pattern) if p.is_file())
            if not found:
                raise s.ctx.error(key, f"the pattern {f!r} matches no file (in {anchor})")
        elif path.is_dir():
            found = sorted(p for p in path.iterdir()
                           if p.is_file() and p.name.lower().endswith(_FOLDER_SUFFIXES[fmt]))
            if not found:
                raise s.ctx.error(key, f"the folder {path} holds no "
                                  f"{' / '.join(_FOLDER_SUFFIXES[fmt])} files")
        else:
            found = [path]
        for p in found:
            ident = p.resolve() if p.exists() else p
            if ident in where:
                warnings.append(f"{_fmt_path(key)}: {p} is listed twice (also by entry "
                                f"{where[ident]} of files); it is read once")
                continue
            where[ident] = i
            out.append(p)
    return tuple(out)


def _read_samples(top: _Table, base: Path, lumi: float | None,
                  warnings: list[str] | None = None) -> dict[str, SampleSpec]:
    if warnings is None:
        warnings = []
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
        fmt = s.string("format", None, choices=SAMPLE_FORMATS)
        paths = _expand_files(s, files, fmt or "auto", base, warnings)
        if fmt is None:
            fmt = _format_of_content(paths)
        data = s.boolean("data", False)
        if data:
            for key, what in (("cross_section_pb", "cross section"),
                              ("weight", "event weight"),
                              ("truth_files", "generator-level truth")):
                if s.has(key):
                    raise s.ctx.error((*s.path, key), f"a data sample (data = true) counts "
                                      f"events with weight 1 and has no {what}; remove {key}")
        ntuple = _read_ntuple_sample(s, fmt, base)
        weight = s.expression("weight") if s.has("weight") else None
        s.known.append("weight")
        out[name] = SampleSpec(
            name=name,
            files=paths,
            label=s.string("label", name),
            cross_section_pb=s.number("cross_section_pb", None, positive=True),
            luminosity_fb=s.number("luminosity_fb", lumi, positive=True),
            toy=s.boolean("toy", False),
            format=fmt,
            weight=weight,
            data=data,
            **ntuple,
        )
        s.done()
    t.done()
    return out


def _format_of_content(paths: tuple[Path, ...]) -> str:
    """The format of a sample that names none: ``"hepmc"`` when its first file (decompressed)
    begins with a HepMC header, else ``"lhe"`` (a file that cannot be read yet is left to the
    reader to report)."""
    from evtkin.io.sources import open_binary

    if not paths or not paths[0].is_file():
        return "lhe"
    try:
        with open_binary(paths[0]) as fh:
            head = fh.read(_SNIFF_BYTES)
    except Exception:  # unreadable: the reader names the problem later
        return "lhe"
    return "hepmc" if _HEPMC_START.search(head) else "lhe"


def _read_ntuple_sample(s: _Table, fmt: str, base: Path) -> dict[str, Any]:
    """The ROOT-ntuple keys of a sample: ``input`` (the branch mapping), ``weights_give``,
    ``truth_files`` (see :mod:`evtkin.run.inputs.ntuple`)."""
    from evtkin.io.ntuple_mapping import NtupleMapping

    if fmt != "root":
        for key in ("input", "weights_give") + (("truth_files",) if fmt != "hepmc" else ()):
            if s.has(key):
                where = ('only for ROOT ntuples and HepMC samples' if key == "truth_files"
                         else 'only for ROOT ntuples (format = "root")')
                raise s.ctx.error((*s.path, key), where)
        if fmt == "hepmc" and s.has("truth_files"):
            return {"truth_files": _truth_paths(s, base)}
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
    return {
        "input": mapping,
        "weights_give": s.string("weights_give", "mean", choices=("mean", "sum")),
        "truth_files": _truth_paths(s, base),
    }


def _truth_paths(s: _Table, base: Path) -> tuple[Path, ...]:
    truth = s.strings("truth_files", ())
    return tuple((base / f) if not Path(f).is_absolute() else Path(f) for f in truth)
