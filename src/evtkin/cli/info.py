"""``evtkin info FILE [--json]``: what an LHE or HepMC file declares, and how many events it
holds (the format comes from the content)."""

from __future__ import annotations

import argparse
import json
from typing import Any

from evtkin.io.lhe_header import LHEInfo, lhe_info
from evtkin.io.sources import compressed_size, detect_compression

_WEIGHTING = {
    1: "weighted events, accept/reject by the consumer (mean weight = sigma)",
    -1: "weighted events with signs, accept/reject by the consumer",
    2: "weighted events, sigma per process from XSECUP",
    -2: "weighted events with signs, sigma per process from XSECUP",
    3: "unweighted events, sigma = sum of XSECUP",
    -3: "unweighted events with signs, sigma = sum of XSECUP",
    4: "weighted events passed through, mean weight = sigma",
    -4: "weighted events with signs passed through, mean weight = sigma",
}


def count_events(path: str) -> int:
    """Number of events in the LHE file ``path`` (``lhe_info(path, count=True)``): the
    number ``read_lhe`` delivers for a file it accepts."""
    n = lhe_info(path, count=True).n_events
    assert n is not None
    return n


def summary(path: str, *, count: bool = True) -> dict[str, Any]:
    """The JSON form of ``evtkin info``."""
    info = lhe_info(path, count=count)
    d = info.to_dict()
    d["compression"] = detect_compression(path) or "none"
    d["file_bytes"] = compressed_size(path)
    d["weighting_meaning"] = _WEIGHTING.get(info.weighting, "non-standard IDWTUP")
    d["n_weights_by_group"] = _weights_by_group(info)
    return d


def _weights_by_group(info: LHEInfo) -> dict[str, int]:
    out = {name: len(ids) for name, ids in info.weight_groups.items()}
    grouped = {i for ids in info.weight_groups.values() for i in ids}
    loose = sum(1 for w in info.weight_names if w not in grouped)
    if loose:
        out["(no group)"] = loose
    return out


def _human_size(n: int) -> str:
    size = float(n)
    for unit in ("B", "kB", "MB", "GB", "TB"):
        if size < 1000 or unit == "TB":
            return f"{size:.0f} {unit}" if unit == "B" else f"{size:.1f} {unit}"
        size /= 1000
    return f"{n} B"  # pragma: no cover


def render(d: dict[str, Any]) -> str:
    b1, b2 = d["beams"]
    e1, e2 = d["beam_energies"]
    lines = [
        f"file        {d['source']}  ({_human_size(d['file_bytes'])}, "
        f"compression: {d['compression']})",
        f"LHEF        version {d['version'] or '?'}",
        f"beams       {b1} ({e1:g} GeV) + {b2} ({e2:g} GeV),  sqrt(s) = {d['sqrt_s']:g} GeV",
        f"PDF         group {d['pdf_group'][0]}/{d['pdf_group'][1]}, "
        f"set {d['pdf_set'][0]}/{d['pdf_set'][1]}",
        f"weighting   IDWTUP = {d['weighting']}: {d['weighting_meaning']}",
        f"processes   {len(d['processes'])}",
    ]
    for p in d["processes"]:
        lines.append(
            f"  id {p['process_id']:>6}   sigma = {p['xsec_pb']:.6g} ± {p['xsec_err_pb']:.3g} pb"
            f"   max weight {p['max_weight']:.6g}"
        )
    lines.append(
        f"  total       sigma = {d['total_xsec_pb']:.6g} ± {d['total_xsec_err_pb']:.3g} pb"
    )
    if d["xsecinfo"]:
        lines.append("xsecinfo    " + ", ".join(f"{k}={v}" for k, v in d["xsecinfo"].items()))
    nw = len(d["weight_names"])
    lines.append(f"variation weights  {nw}")
    for g, k in d["n_weights_by_group"].items():
        lines.append(f"  {g}: {k}")
    if d["n_events"] is not None:
        lines.append(f"events      {d['n_events']}")
    return "\n".join(lines)


def is_hepmc(path: str) -> bool:
    """Whether the decompressed file starts (after blank lines) with a ``HepMC::`` line."""
    from evtkin.io.hepmc_header import open_stream

    with open_stream(path) as fh:
        head = fh.read(4096)
    return head.lstrip().startswith(b"HepMC::")


def hepmc_summary(path: str, *, count: bool = True) -> dict[str, Any]:
    """The JSON form of ``evtkin info`` for a HepMC file."""
    from evtkin.io.hepmc_header import hepmc_info

    d = hepmc_info(path, count=count).to_dict()
    d["format"] = "HepMC"
    d["compression"] = detect_compression(path) or "none"
    d["file_bytes"] = compressed_size(path)
    return d


def render_hepmc(d: dict[str, Any]) -> str:
    xs = d["xsec_pb"]
    lines = [
        f"file        {d['source']}  ({_human_size(d['file_bytes'])}, "
        f"compression: {d['compression']})",
        f"HepMC       {d['form']} (version {d['version'] or '?'})",
        f"units       {d['momentum_unit']}, {d['length_unit']} (read as GeV, mm)",
        "cross sect. " + (f"{xs:.6g} ± {d['xsec_err_pb']:.3g} pb (first event that has one)"
                          if xs is not None else "none in the first events"),
    ]  # fmt: skip
    for tool in d["tools"]:
        lines.append(f"tool        {tool}")
    for key, value in d["attributes"].items():
        lines.append(f"attribute   {key} = {value}")
    names = d["weight_names"]
    lines.append(f"weights     {len(names)}" + (f": {', '.join(names[:10])}" if names else ""))
    if len(names) > 10:
        lines[-1] += f", ... ({len(names) - 10} more)"
    if d["n_events"] is not None:
        lines.append(f"events      {d['n_events']}")
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    if is_hepmc(args.file):
        d = hepmc_summary(args.file, count=not args.no_count)
        print(json.dumps(d, indent=2) if args.json else render_hepmc(d))
        return 0
    d = summary(args.file, count=not args.no_count)
    if args.json:
        print(json.dumps(d, indent=2))
    else:
        print(render(d))
    return 0


def add_parser(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "info",
        help="summarise an LHE or HepMC file: beams, processes, cross sections, weights, events",
        description="Summarise an LHE file (plain or compressed): beams, sqrt(s), processes "
        "with their cross sections, weighting mode, variation weights by group, event count "
        "and file size. For a HepMC ASCII file (Asciiv3 or IO_GenEvent, told apart by its "
        "content): its form, units, cross section, tools, weight names and event count.",
    )
    p.add_argument("file", help="LHE or HepMC file (plain, gzip, zstd, bz2 or xz)")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    p.add_argument(
        "--no-count", action="store_true", help="do not read the file to count its events"
    )
    p.set_defaults(func=run)
