"""Write HepMC ASCII event files (Asciiv3 by default, IO_GenEvent on request), optionally
gzipped, with deterministic bytes (gzip members carry no time stamp or file name).

Input: awkward chunks with the fields :func:`evtkin.read_hepmc` yields (``event_number``,
``weights``, ``scale``, ``alpha_qcd``, ``alpha_qed``, ``xsec_pb``, ``xsec_err_pb``,
``signal_process_id`` and the PDF info ``pdf_parton1 pdf_parton2 pdf_x1 pdf_x2 pdf_scale
pdf_xf1 pdf_xf2 pdf_set1 pdf_set2``, written where ``pdf_x1`` is not NaN;
``particles`` with ``pdgid status px py pz energy mass prod_vertex end_vertex``;
``vertices`` with ``x y z t status``); missing event fields are left out of the file.
Momenta are written in GeV, lengths in mm.

Asciiv3 needs every reference to point to a line above it: a vertex line is written just
before the first particle it produces (or after the particles when it produces none) and
lists its incoming particles, which must come earlier in the event's particle order.
Particles keep their order (ids 1, 2, ...); vertices are numbered -1, -2, ... in the order
they are written, which is their order when read back if the input lists them that way.
IO_GenEvent writes each vertex followed by its orphan incoming particles (those with no
production vertex) and its outgoing particles; every particle must touch a vertex.

The file is written beside the target under a temporary name and renamed into place when
complete (:mod:`evtkin.files`): a failed write leaves neither a part file nor the temporary one.
"""

from __future__ import annotations

import gzip as _gzip
import os
from collections.abc import Iterable, Sequence
from typing import IO, Any

import awkward as ak
import numpy as np

from evtkin.files import atomic_path
from evtkin.io.hepmc_scan import EV_INT_FIELDS, EV_INT_UNSET, PDF_FIELDS, PDF_FLOAT_FIELDS

__all__ = ["write_hepmc"]

_FORMS = ("Asciiv3", "IO_GenEvent")


def _fmt(precision: int | None) -> Any:
    if precision is None:
        return repr
    spec = f".{int(precision)}g"

    def f(x: float) -> str:
        return format(x, spec)

    return f


def write_hepmc(
    path: str | os.PathLike[str],
    events: ak.Array | Iterable[ak.Array],
    *,
    form: str = "Asciiv3",
    weight_names: Sequence[str] = (),
    precision: int | None = None,
    tools: Sequence[tuple[str, str, str]] = (),
    attributes: dict[str, str] | None = None,
    gzip: bool | None = None,
) -> int:
    """Write ``events`` (one awkward Array or an iterable of chunks) to ``path``; returns
    the number of events. ``precision``: significant digits of floats (default: the
    shortest text that reads back exactly). ``tools``: (name, version, description)
    triples and ``attributes``: run attributes (both Asciiv3 only). ``gzip``: compress
    (default: when the path ends in ``.gz``)."""
    if form not in _FORMS:
        raise ValueError(f"form must be one of {_FORMS}, got {form!r}")
    path = os.fspath(path)
    use_gzip = path.endswith(".gz") if gzip is None else bool(gzip)
    chunks = [events] if isinstance(events, ak.Array) else events
    fmt = _fmt(precision)
    names = [str(n) for n in weight_names]
    total = 0
    # a temporary file beside the target, renamed into place when complete: a write that
    # fails (a bad chunk, an exception from the events' generator) leaves no file behind
    with atomic_path(path) as tmp, open(tmp, "wb") as raw:
        out: IO[bytes] | _gzip.GzipFile
        if use_gzip:
            out = _gzip.GzipFile(filename="", mode="wb", fileobj=raw, mtime=0, compresslevel=6)
        else:
            out = raw
        try:
            out.write(_header(form, names, tools, attributes or {}).encode())
            for chunk in chunks:
                text = _format_chunk(chunk, form, names, fmt)
                out.write(text.encode())
                total += len(chunk)
            end = "Asciiv3" if form == "Asciiv3" else "IO_GenEvent"
            out.write(f"HepMC::{end}-END_EVENT_LISTING\n\n".encode())
        finally:
            if use_gzip:
                out.close()
    return total


def _header(form: str, names: list[str], tools: Sequence[tuple[str, str, str]],
            attributes: dict[str, str]) -> str:  # fmt: skip
    if form == "Asciiv3":
        lines = ["HepMC::Version 3.02.00", "HepMC::Asciiv3-START_EVENT_LISTING"]
        if names:
            for n in names:
                if not n or any(ch.isspace() for ch in n):
                    raise ValueError(f"Asciiv3 weight names cannot be empty or hold spaces: {n!r}")
            lines.append("W " + " ".join(names))
        for name, version, description in tools:
            lines.append(f"T {name}\\|{version}\\|{description}")
        for key, value in attributes.items():
            lines.append(f"A {key} {value}")
    else:
        lines = ["HepMC::Version 2.06.09", "HepMC::IO_GenEvent-START_EVENT_LISTING"]
    return "\n".join(lines) + "\n"


def _get(chunk: ak.Array, field: str, n: int, default: float, dtype: Any = np.float64) -> list[Any]:
    if field in ak.fields(chunk):
        return np.asarray(ak.to_numpy(chunk[field]), dtype=dtype).tolist()  # type: ignore[no-any-return]
    return [default] * n


#: event fields written besides weights and particles, with their values where a chunk has none
_EVENT_FLOATS = ("scale", "alpha_qcd", "alpha_qed", "xsec_pb", "xsec_err_pb", *PDF_FLOAT_FIELDS)
_EVENT_INTS = dict(zip(EV_INT_FIELDS, EV_INT_UNSET, strict=True))


def _pdf_text(ev: dict[str, Any], fmt: Any) -> str | None:
    """``id1 id2 x1 x2 scale xf1 xf2 set1 set2``, or None where the event has no PDF info."""
    if ev["pdf_x1"] != ev["pdf_x1"]:
        return None
    return " ".join(fmt(ev[f]) if f in PDF_FLOAT_FIELDS else str(ev[f]) for f in PDF_FIELDS)


def _format_chunk(chunk: ak.Array, form: str, names: list[str], fmt: Any) -> str:
    n = len(chunk)
    nums = (np.asarray(chunk["event_number"], dtype=np.int64).tolist()
            if "event_number" in ak.fields(chunk) else list(range(n)))  # fmt: skip
    k = len(names)
    if k:
        w = np.asarray(ak.to_numpy(chunk["weights"]), dtype=np.float64).reshape(n, -1)
        if w.shape[1] != k:
            raise ValueError(f"the events hold {w.shape[1]} weights but {k} names are given")
    else:
        w = np.zeros((n, 0))
    cols = {f: _get(chunk, f, n, np.nan) for f in _EVENT_FLOATS}
    cols.update({f: _get(chunk, f, n, d, np.int64) for f, d in _EVENT_INTS.items()})
    p = chunk["particles"]
    v = chunk["vertices"]
    p_off = np.asarray(ak.num(p, axis=1))
    v_off = np.asarray(ak.num(v, axis=1))
    p_off = np.concatenate([[0], np.cumsum(p_off)])
    v_off = np.concatenate([[0], np.cumsum(v_off)])
    flat_p = ak.flatten(p)
    flat_v = ak.flatten(v)
    pdg = np.asarray(flat_p["pdgid"]).tolist()
    pst = np.asarray(flat_p["status"]).tolist()
    prod = np.asarray(flat_p["prod_vertex"]).tolist()
    endv = np.asarray(flat_p["end_vertex"]).tolist()
    mom = [np.asarray(flat_p[f], dtype=np.float64).tolist()
           for f in ("px", "py", "pz", "energy", "mass")]  # fmt: skip
    vst = np.asarray(flat_v["status"]).tolist()
    vpos = [np.asarray(flat_v[f], dtype=np.float64).tolist() for f in ("x", "y", "z", "t")]
    wl = w.tolist()
    parts: list[str] = []
    for e in range(n):
        pa, pb, va, vb = int(p_off[e]), int(p_off[e + 1]), int(v_off[e]), int(v_off[e + 1])
        weights = wl[e]
        ev = {f: col[e] for f, col in cols.items()}
        if form == "Asciiv3":
            parts.append(_event_v3(int(nums[e]), weights, ev, pa, pb, va, vb, pdg, pst, prod,
                                   endv, mom, vst, vpos, fmt))  # fmt: skip
        else:
            parts.append(_event_v2(int(nums[e]), names, weights, ev, pa, pb, va, vb, pdg, pst,
                                   prod, endv, mom, vst, vpos, fmt))  # fmt: skip
    return "".join(parts)


def _pos_zero(vpos: list[list[float]], j: int) -> bool:
    return vpos[0][j] == 0.0 and vpos[1][j] == 0.0 and vpos[2][j] == 0.0 and vpos[3][j] == 0.0


def _event_v3(num: int, weights: list[float], ev: dict[str, Any], pa: int, pb: int, va: int,
              vb: int, pdg: list[int], pst: list[int], prod: list[int], endv: list[int],
              mom: list[list[float]], vst: list[int], vpos: list[list[float]],
              fmt: Any) -> str:  # fmt: skip
    nv = vb - va
    incoming: list[list[int]] = [[] for _ in range(nv)]
    for i in range(pa, pb):
        if endv[i] >= 0:
            if endv[i] >= nv:
                raise ValueError(f"event {num}: end_vertex {endv[i]} out of range")
            incoming[endv[i]].append(i - pa + 1)
    lines = [f"E {num} {nv} {pb - pa}", "U GEV MM"]
    if weights:
        lines.append("W " + " ".join(fmt(x) for x in weights))
    xs, xe = ev["xsec_pb"], ev["xsec_err_pb"]
    if xs == xs:
        lines.append(f"A 0 GenCrossSection {fmt(xs)} {fmt(xe if xe == xe else 0.0)}")
    for field, name in (("scale", "event_scale"), ("alpha_qcd", "alphaQCD"),
                        ("alpha_qed", "alphaQED")):  # fmt: skip
        if ev[field] == ev[field]:
            lines.append(f"A 0 {name} {fmt(ev[field])}")
    if ev["signal_process_id"] >= 0:
        lines.append(f"A 0 signal_process_id {ev['signal_process_id']}")
    pdf = _pdf_text(ev, fmt)
    if pdf is not None:
        lines.append(f"A 0 GenPdfInfo {pdf}")
    vid = [0] * nv  # file id of each vertex, 0 = not written yet
    written = 0

    def vertex_line(j: int, limit: int) -> str:
        nonlocal written
        for pid in incoming[j]:
            if pid > limit:
                raise ValueError(f"event {num}: particle {pid} enters vertex {j} but comes "
                                 "after the vertex's products (not in graph order)")  # fmt: skip
        written += 1
        vid[j] = -written
        g = va + j
        text = f"V {-written} {vst[g]} [{','.join(map(str, incoming[j]))}]"
        if not _pos_zero(vpos, g):
            text += " @ " + " ".join(fmt(vpos[d][g]) for d in range(4))
        return text

    for i in range(pa, pb):
        pv = prod[i]
        if pv >= 0:
            if pv >= nv:
                raise ValueError(f"event {num}: prod_vertex {pv} out of range")
            if vid[pv] == 0:
                lines.append(vertex_line(pv, i - pa))
            parent = vid[pv]
        else:
            parent = 0
        momenta = " ".join(fmt(mom[d][i]) for d in range(5))
        lines.append(f"P {i - pa + 1} {parent} {pdg[i]} {momenta} {pst[i]}")
    for j in range(nv):  # vertices that produce nothing
        if vid[j] == 0:
            lines.append(vertex_line(j, pb - pa))
    return "\n".join(lines) + "\n"


def _event_v2(num: int, names: list[str], weights: list[float], ev: dict[str, Any], pa: int,
              pb: int, va: int, vb: int, pdg: list[int], pst: list[int], prod: list[int],
              endv: list[int], mom: list[list[float]], vst: list[int], vpos: list[list[float]],
              fmt: Any) -> str:  # fmt: skip
    nv = vb - va
    orphans: list[list[int]] = [[] for _ in range(nv)]
    outgoing: list[list[int]] = [[] for _ in range(nv)]
    for i in range(pa, pb):
        if prod[i] >= 0:
            outgoing[prod[i]].append(i)
        elif endv[i] >= 0:
            orphans[endv[i]].append(i)
        else:
            raise ValueError(f"event {num}: particle {i - pa} touches no vertex "
                             "(IO_GenEvent cannot write it)")  # fmt: skip

    def unset(x: float) -> str:
        return fmt(x) if x == x else "-1"

    head = (f"E {num} -1 {unset(ev['scale'])} {unset(ev['alpha_qcd'])} {unset(ev['alpha_qed'])} "
            f"{ev['signal_process_id']} 0 {nv} 0 0 0 {len(weights)}")  # fmt: skip
    if weights:
        head += " " + " ".join(fmt(x) for x in weights)
    lines = [head]
    if names:
        lines.append(f"N {len(names)} " + " ".join('"' + n.replace('"', "'") + '"' for n in names))
    lines.append("U GEV MM")
    xs, xe = ev["xsec_pb"], ev["xsec_err_pb"]
    if xs == xs:
        lines.append(f"C {fmt(xs)} {fmt(xe if xe == xe else 0.0)}")
    pdf = _pdf_text(ev, fmt)
    if pdf is not None:
        lines.append(f"F {pdf}")
    for j in range(nv):
        g = va + j
        lines.append(f"V {-(j + 1)} {vst[g]} " + " ".join(fmt(vpos[d][g]) for d in range(4))
                     + f" {len(orphans[j])} {len(outgoing[j])} 0")  # fmt: skip
        for i in orphans[j] + outgoing[j]:
            end = -(endv[i] + 1) if endv[i] >= 0 else 0
            lines.append(f"P {i - pa + 1} {pdg[i]} " + " ".join(fmt(mom[d][i]) for d in range(5))
                         + f" {pst[i]} 0 0 {end} 0")  # fmt: skip
    return "\n".join(lines) + "\n"
