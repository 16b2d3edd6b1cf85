"""Write Les Houches event files (LHEF version 3.0 text, optionally gzipped).

``write_lhe(path, events, info=...)`` takes the record layout that :func:`evtkin.read_lhe`
yields (one awkward Array, or an iterable of such chunks), so selected events can be
written back out. Layout written (LHEF 1.0, hep-ph/0609017; 3.0, arXiv:1405.1067)::

    <LesHouchesEvents version="3.0">
    <!-- comment -->
    <header>
    ...header_text...
    <initrwgt> <weightgroup name=.. combine=..> <weight id=..>text</weight> ... </initrwgt>
    </header>
    <init>
    IDBMUP(1,2) EBMUP(1,2) PDFGUP(1,2) PDFSUP(1,2) IDWTUP NPRUP
    XSECUP XERRUP XMAXUP LPRUP          (one line per process)
    </init>
    <event>
    NUP IDPRUP XWGTUP SCALUP AQEDUP AQCDUP
    IDUP ISTUP MOTHUP(1) MOTHUP(2) ICOLUP(1) ICOLUP(2) PUP(1..5) VTIMUP SPINUP   (NUP lines)
    <rwgt> <wgt id="..."> value </wgt> ... </rwgt>
    </event>
    </LesHouchesEvents>

Mothers are 0-based in the record (-1 = none) and 1-based in the file (0 = none).

Floats are written with Python's shortest round-trip representation (``repr``), so
``float(text)`` gives back the identical double. Formatting is done with one ``%``
operation per block of events (no per-value Python loop); on the 2-core development
machine this costs about 2 µs per number, i.e. ~20k top-pair events (12 particles,
28 variation weights) per ~4 s. Output is deterministic: the same input gives the same
bytes, and gzip members carry no time stamp or file name.
The file is written beside the target under a temporary name and renamed into place when
complete (:mod:`evtkin.files`): a failed write leaves neither a part file nor the temporary one.
"""

from __future__ import annotations

import gzip as _gzip
import io
import os
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import IO, Any
from xml.sax.saxutils import escape, quoteattr

import awkward as ak
import numpy as np

from evtkin.errors import LHEError
from evtkin.files import atomic_path

__all__ = ["ProcessInfo", "RunInfo", "write_lhe"]

PARTICLE_FIELDS: tuple[str, ...] = (
    "pdgid", "status", "mother1", "mother2", "color1", "color2",
    "px", "py", "pz", "energy", "mass", "lifetime", "spin",
)  # fmt: skip
_INT_FIELDS = 6  # the first six particle fields are integers
_BLOCK = 20_000  # events formatted per block (bounds the memory of the text buffers)


@dataclass(frozen=True)
class ProcessInfo:
    """One ``<init>`` process line: LPRUP, XSECUP (pb), XERRUP (pb), XMAXUP."""

    process_id: int
    xsec_pb: float
    xsec_err_pb: float
    max_weight: float


@dataclass(frozen=True)
class RunInfo:
    """Run-level information for :func:`write_lhe`.

    Field names match ``evtkin.io.lhe_header.LHEInfo``, so an object returned by
    :func:`evtkin.lhe_info` can be passed instead. ``weight_groups`` maps a group name to
    the ids it holds; ids of ``weight_names`` that are in no group are written outside
    any group. ``weight_descriptions`` (id -> text of ``<weight>``) and
    ``weight_group_combine`` (group -> ``combine`` attribute) are optional.
    """

    beams: tuple[int, int] = (2212, 2212)
    beam_energies: tuple[float, float] = (6500.0, 6500.0)
    pdf_group: tuple[int, int] = (-1, -1)
    pdf_set: tuple[int, int] = (-1, -1)
    weighting: int = 3
    processes: Sequence[ProcessInfo] = ()
    weight_names: Sequence[str] = ()
    weight_groups: Mapping[str, Sequence[str]] = field(default_factory=dict)
    weight_descriptions: Mapping[str, str] = field(default_factory=dict)
    weight_group_combine: Mapping[str, str] = field(default_factory=dict)
    version: str = "3.0"


def write_lhe(
    path: str | os.PathLike[str],
    events: ak.Array | Iterable[ak.Array],
    *,
    info: Any,
    gzip: bool | None = None,
    header_text: str | None = None,
    comment: str | None = None,
    compresslevel: int = 6,
    precision: int | None = None,
) -> int:
    """Write ``events`` to ``path`` as an LHE v3 file and return the number of events.

    ``events``: an awkward Array in the :func:`evtkin.read_lhe` record layout, or an
    iterable of such chunks (streamed; memory stays bounded). ``info``: a
    :class:`RunInfo` or any object with the same attributes (e.g. ``evtkin.lhe_info``'s
    result); ``weight_descriptions``/``weight_group_combine`` are used if present. The number
    of columns in ``events.weights`` must equal ``len(info.weight_names)``.
    ``gzip``: compress; by default when the path ends in ``.gz``. ``header_text`` is
    placed verbatim inside ``<header>``; ``comment`` goes into an XML comment before it.
    ``precision``: ``None`` (default) writes every float exactly (shortest round-trip
    text); an integer writes that many significant digits (smaller files, not exact).
    """
    if precision is not None and not 1 <= int(precision) <= 17:
        raise LHEError(f"write_lhe: precision must be None or 1..17, got {precision!r}")
    fcode = "%r" if precision is None else f"%.{int(precision)}g"
    path = os.fspath(path)
    use_gzip = path.endswith(".gz") if gzip is None else bool(gzip)
    names = [str(n) for n in getattr(info, "weight_names", ())]
    head = _header(info, names, header_text, comment)
    chunks: Iterable[ak.Array] = [events] if isinstance(events, ak.Array) else events
    n_written = 0
    # a temporary file beside the target, renamed into place when complete: a write that
    # fails (a bad chunk, an exception from the events' generator) leaves no file behind
    with atomic_path(path) as tmp, open(tmp, "wb") as raw:
        out: IO[bytes] | _gzip.GzipFile
        if use_gzip:
            out = _gzip.GzipFile(filename="", mode="wb", fileobj=raw, mtime=0,
                                 compresslevel=compresslevel)
        else:
            out = raw
        try:
            out.write(head.encode("utf-8"))
            for chunk in chunks:
                for start in range(0, len(chunk), _BLOCK):
                    block = chunk[start : start + _BLOCK]
                    out.write(
                        _format_events(block, names, path, n_written, fcode).encode("ascii")
                    )
                    n_written += len(block)
            out.write(b"</LesHouchesEvents>\n")
        finally:
            if use_gzip:
                out.close()
    return n_written


def _header(info: Any, names: list[str], header_text: str | None, comment: str | None) -> str:
    buf = io.StringIO()
    buf.write('<LesHouchesEvents version="3.0">\n')
    if comment:
        if "--" in comment:
            raise LHEError("write_lhe: comment must not contain '--' (not allowed in XML comments)")
        buf.write(f"<!--\n{comment.rstrip()}\n-->\n")
    buf.write("<header>\n")
    if header_text:
        if "</header>" in header_text or "<event" in header_text:
            raise LHEError("write_lhe: header_text must not contain '</header>' or '<event'")
        buf.write(header_text.rstrip("\n") + "\n")
    if names:
        buf.write(_initrwgt(info, names))
    buf.write("</header>\n<init>\n")
    beams = tuple(int(b) for b in info.beams)
    energies = tuple(float(e) for e in info.beam_energies)
    pdfg = tuple(int(v) for v in info.pdf_group)
    pdfs = tuple(int(v) for v in info.pdf_set)
    procs = list(info.processes)
    if not procs:
        raise LHEError("write_lhe: info.processes is empty; <init> needs at least one process")
    ints = " ".join(str(v) for v in (*pdfg, *pdfs, int(info.weighting), len(procs)))
    buf.write(f"{beams[0]} {beams[1]} {energies[0]!r} {energies[1]!r} {ints}\n")
    for p in procs:
        buf.write(
            f"{float(p.xsec_pb)!r} {float(p.xsec_err_pb)!r} {float(p.max_weight)!r} "
            f"{int(p.process_id)}\n"
        )
    buf.write("</init>\n")
    return buf.getvalue()


def _initrwgt(info: Any, names: list[str]) -> str:
    groups: Mapping[str, Sequence[str]] = getattr(info, "weight_groups", None) or {}
    text: Mapping[str, str] = getattr(info, "weight_descriptions", None) or {}
    combine: Mapping[str, str] = getattr(info, "weight_group_combine", None) or {}
    if len(set(names)) != len(names):
        raise LHEError("write_lhe: info.weight_names contains duplicate ids")
    known = set(names)
    lines = ["<initrwgt>"]
    grouped: set[str] = set()
    for gname, ids in groups.items():
        ids = [str(i) for i in ids]
        missing = [i for i in ids if i not in known]
        if missing:
            raise LHEError(
                f"write_lhe: weight group {gname!r} lists ids {missing} "
                "that are not in info.weight_names"
            )
        attrs = f"name={quoteattr(str(gname))}"
        if gname in combine:
            attrs += f" combine={quoteattr(str(combine[gname]))}"
        lines.append(f"<weightgroup {attrs}>")
        lines += [f"<weight id={quoteattr(i)}>{escape(text.get(i, i))}</weight>" for i in ids]
        lines.append("</weightgroup>")
        grouped.update(ids)
    lines += [
        f"<weight id={quoteattr(i)}>{escape(text.get(i, i))}</weight>"
        for i in names
        if i not in grouped
    ]
    lines.append("</initrwgt>")
    return "\n".join(lines) + "\n"


def _column(array: ak.Array, name: str, where: str, dtype: type) -> np.ndarray:
    try:
        values = array[name]
    except Exception as exc:  # awkward raises several types for a missing field
        raise LHEError(f"write_lhe: {where} has no field {name!r}") from exc
    return np.asarray(ak.to_numpy(values), dtype=dtype)


def _format_events(
    block: ak.Array, names: list[str], path: str, first: int, fcode: str = "%r"
) -> str:
    """Format one block of events as LHE text (all ``<event>`` blocks, concatenated)."""
    n = len(block)
    if n == 0:
        return ""
    particles = block["particles"]
    counts = np.asarray(ak.to_numpy(ak.num(particles, axis=1)), dtype=np.int64)
    flat = ak.flatten(particles, axis=1)
    ints = np.stack(
        [_column(flat, f, "particles", np.int64) for f in PARTICLE_FIELDS[:_INT_FIELDS]], axis=1
    )
    floats = np.stack(
        [_column(flat, f, "particles", np.float64) for f in PARTICLE_FIELDS[_INT_FIELDS:]], axis=1
    )
    # mothers: 0-based record (-1 = none) -> 1-based file (0 = none)
    ev_of = np.repeat(np.arange(n), counts)
    for col in (2, 3):
        m = ints[:, col]
        bad = (m < -1) | (m >= counts[ev_of])
        if bad.any():
            i = int(ev_of[np.argmax(bad)])
            raise LHEError(
                f"write_lhe: {path}: event {first + i} has a mother index outside "
                f"[-1, {int(counts[i]) - 1}]"
            )
        ints[:, col] = m + 1

    proc = _column(block, "process_id", "event record", np.int64)
    head_f = np.stack(
        [_column(block, f, "event record", np.float64)
         for f in ("weight", "scale", "alpha_qed", "alpha_qcd")],
        axis=1,
    )  # fmt: skip
    k = len(names)
    if k:
        try:
            wts = np.asarray(ak.to_numpy(block["weights"]), dtype=np.float64).reshape(n, -1)
        except Exception as exc:
            raise LHEError("write_lhe: events.weights must be a regular n x k array") from exc
        if wts.shape[1] != k:
            raise LHEError(
                f"write_lhe: events carry {wts.shape[1]} variation weights but "
                f"info.weight_names declares {k}"
            )

    # one % operation per kind of line; repr gives the shortest exact float text
    head_vals = np.empty((n, 6), dtype=object)
    head_vals[:, 0] = counts.tolist()
    head_vals[:, 1] = proc.tolist()
    head_vals[:, 2:] = head_f.tolist()
    head_t = "<event>\n%d %d " + " ".join([fcode] * 4) + "\n"
    heads = (head_t * n % tuple(head_vals.ravel().tolist())).split("\n")

    p_vals = np.empty((len(ints), 13), dtype=object)
    p_vals[:, :_INT_FIELDS] = ints.tolist()
    p_vals[:, _INT_FIELDS:] = floats.tolist()
    p_t = "%8d %2d %4d %4d %4d %4d " + " ".join([fcode] * 7) + "\n"
    p_lines = ((p_t) * len(ints)
               % tuple(p_vals.ravel().tolist())).split("\n")  # fmt: skip

    tail_per_event = 1
    if k:
        tmpl = "<rwgt>\n" + "".join(
            f"<wgt id={quoteattr(i).replace('%', '%%')}> {fcode} </wgt>\n" for i in names
        ) + "</rwgt>\n</event>\n"
        tails = (tmpl * n % tuple(wts.ravel().tolist())).split("\n")
        tail_per_event = k + 3
    else:
        tails = ["</event>"] * n + [""]

    # interleave: per event 2 head lines, counts[i] particle lines, tail lines
    per_event = 2 + counts + tail_per_event
    starts = np.zeros(n, dtype=np.int64)
    np.cumsum(per_event[:-1], out=starts[1:])
    lines = np.empty(int(per_event.sum()) + 1, dtype=object)
    lines[-1] = ""
    head_pos = (starts[:, None] + np.arange(2)).ravel()
    lines[head_pos] = heads[:-1]
    part_pos = np.repeat(starts + 2, counts) + (np.arange(len(ints)) - np.repeat(
        np.cumsum(counts) - counts, counts))
    lines[part_pos] = p_lines[:-1]
    tail_pos = (starts[:, None] + 2 + counts[:, None] + np.arange(tail_per_event)).ravel()
    lines[tail_pos] = tails[:-1]
    return "\n".join(lines.tolist())
