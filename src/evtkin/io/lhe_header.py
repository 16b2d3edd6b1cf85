"""Run-level information of a Les Houches event file: everything before the first event.

``lhe_info(path)`` reads only the start of the file (up to ``</init>``) and returns an
:class:`LHEInfo`. Field meanings follow the Les Houches accord (HEPRUP common block,
hep-ph/0109068) as laid out in LHEF 1.0 (hep-ph/0609017): the first ``<init>`` line is
``IDBMUP(1:2) EBMUP(1:2) PDFGUP(1:2) PDFSUP(1:2) IDWTUP NPRUP``, then NPRUP lines
``XSECUP XERRUP XMAXUP LPRUP``. Weight declarations come from LHEF 3.0
(arXiv:1405.1067) ``<initrwgt>``/``<weightgroup>``/``<weight id=...>`` (``type=`` accepted
for the group name as in early drafts) and from 2.0 ``<weightinfo name=...>``.

The scan that finds ``<init>`` skips XML comments, CDATA sections and the whole
``<header>`` block, so text such as ``<event>`` inside parameter cards or comments is
never mistaken for an event.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import BinaryIO

from evtkin.errors import LHEError
from evtkin.io.sources import Source, compressed_size, open_binary, read_error, source_name

__all__ = ["LHEInfo", "Process", "count_events", "lhe_info", "read_preamble"]


@dataclass(frozen=True)
class Process:
    """One ``<init>`` process line: LPRUP, XSECUP, XERRUP, XMAXUP (cross sections in pb)."""

    process_id: int
    xsec_pb: float
    xsec_err_pb: float
    max_weight: float


@dataclass(frozen=True)
class LHEInfo:
    """Everything an LHE file declares before its first event.

    ``beams``, ``beam_energies`` (GeV), ``pdf_group``, ``pdf_set`` are pairs for beams 1
    and 2; ``weighting`` is IDWTUP; ``weight_names`` are the variation-weight ids in
    declaration order (the column order of ``read_lhe(...).weights``); ``weight_groups``
    maps a group name to its ids (ids outside any group are not listed there).
    """

    source: str
    version: str
    beams: tuple[int, int]
    beam_energies: tuple[float, float]
    pdf_group: tuple[int, int]
    pdf_set: tuple[int, int]
    weighting: int
    processes: tuple[Process, ...]
    weight_names: tuple[str, ...] = ()
    weight_groups: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    #: human-readable text (or the attributes, if there is no text) of each weight id
    weight_descriptions: Mapping[str, str] = field(default_factory=dict)
    #: ``<weightgroup combine=...>`` of each group, where given
    weight_group_combine: Mapping[str, str] = field(default_factory=dict)
    #: attributes of ``<xsecinfo>`` (LHEF 2.0/3.0), e.g. ``totxsec``, ``neve``
    xsecinfo: Mapping[str, str] = field(default_factory=dict)
    #: ``(name, version)`` of each ``<generator>`` tag in ``<init>``
    generators: tuple[tuple[str, str | None], ...] = ()
    #: byte offset (in the decompressed stream) just after ``</init>``
    events_offset: int = 0
    #: 1-based line number of the line holding ``</init>``
    init_end_line: int = 0
    #: number of events (``lhe_info(..., count=True)`` only; else ``None``)
    n_events: int | None = None

    @property
    def total_xsec_pb(self) -> float:
        """Sum of the declared process cross sections XSECUP, in pb."""
        return math.fsum(p.xsec_pb for p in self.processes)

    @property
    def total_xsec_err_pb(self) -> float:
        """Quadratic sum of the declared errors XERRUP, in pb."""
        return math.sqrt(math.fsum(p.xsec_err_pb**2 for p in self.processes))

    @property
    def sqrt_s(self) -> float:
        """Centre-of-mass energy in GeV for head-on beams of negligible mass: sqrt(4 E1 E2)."""
        e1, e2 = self.beam_energies
        return math.sqrt(4.0 * e1 * e2)

    def to_dict(self) -> dict[str, object]:
        """A JSON-ready dictionary of every field plus the derived totals."""
        return {
            "source": self.source,
            "version": self.version,
            "beams": list(self.beams),
            "beam_energies": list(self.beam_energies),
            "sqrt_s": self.sqrt_s,
            "pdf_group": list(self.pdf_group),
            "pdf_set": list(self.pdf_set),
            "weighting": self.weighting,
            "processes": [
                {
                    "process_id": p.process_id,
                    "xsec_pb": p.xsec_pb,
                    "xsec_err_pb": p.xsec_err_pb,
                    "max_weight": p.max_weight,
                }
                for p in self.processes
            ],
            "total_xsec_pb": self.total_xsec_pb,
            "total_xsec_err_pb": self.total_xsec_err_pb,
            "weight_names": list(self.weight_names),
            "weight_groups": {k: list(v) for k, v in self.weight_groups.items()},
            "xsecinfo": dict(self.xsecinfo),
            "generators": [list(g) for g in self.generators],
            "n_events": self.n_events,
        }


# --------------------------------------------------------------------------- scanning

_READ_FIRST = 1 << 16
_MAX_PREAMBLE = 1 << 30  # a header larger than 1 GB is certainly not one

_TAG_NAME = re.compile(rb"<\s*(/?)\s*([A-Za-z_][\w:.-]*)")


def _line_of(data: bytes, pos: int) -> int:
    return data.count(b"\n", 0, pos) + 1


class _NeedMore(Exception):
    """The preamble scan reached the end of the bytes read so far."""


def _find(data: bytes, needle: bytes, start: int) -> int:
    i = data.find(needle, start)
    if i < 0:
        raise _NeedMore
    return i


def _scan(data: bytes, eof: bool, name: str) -> tuple[str, int, int, int, int, int]:
    """Locate the preamble parts in ``data``.

    Returns ``(version, root_end, header_start, header_end, init_start, init_end)``:
    byte ranges of the ``<header>`` content (-1 if absent) and ``<init>`` content; the
    events start at ``init_end + len("</init>")``. Raises ``_NeedMore`` if more bytes
    are needed.
    """
    n = len(data)
    pos = 0
    version = ""
    root_end = -1
    header = (-1, -1)
    while True:
        lt = data.find(b"<", pos)
        if lt < 0:
            if data[pos:].strip() and root_end < 0:
                raise LHEError(
                    f"{name}: line {_line_of(data, pos)}: not an LHE file: expected "
                    "'<LesHouchesEvents version=...>'"
                )
            raise _NeedMore
        if root_end < 0 and data[pos:lt].strip():
            raise LHEError(
                f"{name}: line {_line_of(data, pos)}: not an LHE file: expected "
                "'<LesHouchesEvents version=...>'"
            )
        if data.startswith(b"<!--", lt):
            pos = _find(data, b"-->", lt + 4) + 3
            continue
        if data.startswith(b"<![CDATA[", lt):
            pos = _find(data, b"]]>", lt + 9) + 3
            continue
        if data.startswith(b"<?", lt) or data.startswith(b"<!", lt):
            pos = _find(data, b">", lt) + 1
            continue
        if n - lt < 64 and not eof and data.find(b">", lt) < 0:
            raise _NeedMore
        m = _TAG_NAME.match(data, lt)
        if m is None:
            if root_end < 0:
                raise LHEError(
                    f"{name}: line {_line_of(data, lt)}: not an LHE file: expected "
                    "'<LesHouchesEvents version=...>'"
                )
            pos = lt + 1
            continue
        closing, tag = m.group(1), m.group(2).decode("ascii", "replace")
        gt = _find(data, b">", m.end())
        if root_end < 0:
            if closing or tag != "LesHouchesEvents":
                raise LHEError(
                    f"{name}: line {_line_of(data, lt)}: not an LHE file: expected "
                    f"'<LesHouchesEvents version=...>', found '<{closing.decode()}{tag}'"
                )
            try:
                attrs = parse_attributes(data[m.end() : gt].decode("utf-8", "replace"))
            except BadText as exc:
                raise LHEError(f"{name}: line {_line_of(data, lt)}: {exc}") from None
            version = attrs.get("version", "")
            root_end = gt + 1
            pos = root_end
            continue
        if closing:
            if tag == "LesHouchesEvents":
                raise LHEError(
                    f"{name}: line {_line_of(data, lt)}: the file ends without an <init> block"
                )
            pos = gt + 1
            continue
        if tag == "header":
            if data[gt - 1 : gt] == b"/":
                pos = gt + 1
                continue
            start = gt + 1
            end = _skip_to_close(data, start, b"</header", name)
            header = (start, end)
            pos = _find(data, b">", end) + 1
            continue
        if tag == "init":
            start = gt + 1
            end = _skip_to_close(data, start, b"</init", name)
            close_gt = _find(data, b">", end)
            return version, root_end, header[0], header[1], start, close_gt + 1
        if tag in ("event", "eventgroup"):
            raise LHEError(
                f"{name}: line {_line_of(data, lt)}: <{tag}> before the <init> block; "
                "an LHE file needs <init> first"
            )
        # any other element before <init>: skip it with its content
        if data[gt - 1 : gt] == b"/":
            pos = gt + 1
        else:
            end = _skip_to_close(data, gt + 1, b"</" + tag.encode(), name)
            pos = _find(data, b">", end) + 1


def _skip_to_close(data: bytes, start: int, close: bytes, name: str) -> int:
    """Position of ``close`` after ``start``, skipping comments and CDATA sections."""
    pos = start
    while True:
        lt = _find(data, b"<", pos)
        if data.startswith(b"<!--", lt):
            pos = _find(data, b"-->", lt + 4) + 3
        elif data.startswith(b"<![CDATA[", lt):
            pos = _find(data, b"]]>", lt + 9) + 3
        elif data.startswith(close, lt):
            after = data[lt + len(close) : lt + len(close) + 1]
            if after in (b">", b" ", b"\t", b"\r", b"\n"):
                return lt
            if not after:
                raise _NeedMore
            pos = lt + 1
        else:
            pos = lt + 1


def read_preamble(stream: BinaryIO, name: str) -> tuple[bytes, tuple[str, int, int, int, int, int]]:
    """Read from ``stream`` until the end of ``</init>``.

    Returns ``(data, parts)`` where ``data`` holds everything read (possibly more than
    the preamble) and ``parts`` is the result of the scan (see ``_scan``).
    """
    data = b""
    want = _READ_FIRST
    eof = False
    while True:
        try:
            more = stream.read(want - len(data))
        except LHEError:
            raise  # the decoder's own message (cut short or corrupt, with the file name)
        except (OSError, EOFError, ValueError) as exc:
            raise LHEError(f"{name}: cannot read (corrupt compressed stream?): {exc}") from exc
        except Exception as exc:  # zstandard raises its own ZstdError
            raise LHEError(f"{name}: cannot read (corrupt compressed stream?): {exc}") from exc
        if more:
            data += more
        else:
            eof = True
        if not data:
            raise LHEError(f"{name}: the file is empty; expected an LHE file")
        try:
            return data, _scan(data, eof, name)
        except _NeedMore:
            if eof:
                raise LHEError(
                    f"{name}: line {_line_of(data, len(data))}: the file ends before the "
                    "end of its <init> block (no events)"
                    if b"<init" in data
                    else f"{name}: not an LHE file or cut short: no <init> block found"
                ) from None
            if len(data) > _MAX_PREAMBLE:
                raise LHEError(f"{name}: no </init> in the first 1 GB; not an LHE file") from None
            want = 2 * max(want, len(data))


# --------------------------------------------------------------------------- parsing

_ATTR = re.compile(r"""([A-Za-z_][\w:.-]*)\s*=\s*(?:"([^"]*)"|'([^']*)'|([^\s>/"']+))""")


# numeric references with at most 7 decimal / 6 hex digits (U+10FFFF is 1114111): longer
# ones are never valid and are left as they are, unconverted
_ENTITY = re.compile(r"&(lt|gt|amp|quot|apos|#[0-9]{1,7}|#[xX][0-9a-fA-F]{1,6});")
_NAMED = {"lt": "<", "gt": ">", "amp": "&", "quot": '"', "apos": "'"}


class BadText(ValueError):
    """Text of a preamble that cannot be decoded (the caller adds the file name)."""


def _xml_char(code: int) -> bool:
    """XML 1.0 sec. 2.2 ``Char``: tab, LF, CR, U+0020-D7FF, U+E000-FFFD, U+10000-10FFFF."""
    return (
        code in (0x9, 0xA, 0xD)
        or 0x20 <= code <= 0xD7FF
        or 0xE000 <= code <= 0xFFFD
        or 0x10000 <= code <= 0x10FFFF
    )


def _entity(m: re.Match[str]) -> str:
    name = m.group(1)
    if name[0] != "#":
        return _NAMED[name]
    code = int(name[2:], 16) if name[1] in "xX" else int(name[1:])
    if not _xml_char(code):  # a surrogate, NUL, U+FFFE, beyond U+10FFFF ...
        raise BadText(
            f"the character reference {m.group(0)!r} is not a valid XML character "
            "(XML 1.0 sec. 2.2)"
        )
    return chr(code)


def xml_unescape(text: str) -> str:
    """Replace the five XML entities and numeric character references (XML 1.0, sec. 4.6).

    Raises :class:`BadText` for a reference to a code point that is not an XML character
    (a surrogate, for example)."""
    return _ENTITY.sub(_entity, text) if "&" in text else text


def xml_escape(text: str) -> str:
    """``&``, ``<``, ``>`` as entities: the form a value takes inside XML text."""
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def parse_attributes(text: str) -> dict[str, str]:
    """Attributes of an XML-ish start tag (quoted with ``"`` or ``'``, or bare), unescaped."""
    out: dict[str, str] = {}
    for m in _ATTR.finditer(text):
        value = m.group(2) if m.group(2) is not None else m.group(3)
        if value is None:
            value = m.group(4)
        out[m.group(1)] = xml_unescape(value)
    return out


_COMMENT = re.compile(r"<!--.*?-->", re.S)
_CDATA = re.compile(r"<!\[CDATA\[.*?\]\]>", re.S)


def _blank_out(text: str, pattern: re.Pattern[str]) -> str:
    """Replace matches by spaces, keeping newlines so that line numbers stay valid."""
    return pattern.sub(lambda m: re.sub(r"[^\n]", " ", m.group(0)), text)


def _to_float(tok: str) -> float:
    return float(tok.replace("D", "E").replace("d", "e"))


def _numbers(line: str, kinds: str, name: str, lineno: int, what: str) -> list[float | int]:
    toks = line.split()
    if len(toks) != len(kinds):
        raise LHEError(
            f"{name}: line {lineno}: {what}: expected {len(kinds)} numbers, found {len(toks)}"
        )
    out: list[float | int] = []
    for tok, kind in zip(toks, kinds, strict=True):
        try:
            if kind == "i" and len(tok) > 12:  # far beyond 32 bits (and int()'s digit limit)
                raise ValueError(tok)
            out.append(int(tok) if kind == "i" else _to_float(tok))
        except ValueError:
            expected = "an integer" if kind == "i" else "a number"
            raise LHEError(
                f"{name}: line {lineno}: {what}: expected {expected}, found "
                f"{tok[:40] + ('...' if len(tok) > 40 else '')!r}"
            ) from None
    return out


_WEIGHT_TAGS = re.compile(
    r"<(/?)(initrwgt|weightgroup|weightinfo|weight)\b([^>]*?)(/?)>", re.S | re.I
)


def _parse_weights(
    text: str,
) -> tuple[list[str], dict[str, list[str]], dict[str, str], dict[str, str]]:
    """Weight ids in order, groups, descriptions and group combine rules."""
    names: list[str] = []
    groups: dict[str, list[str]] = {}
    descriptions: dict[str, str] = {}
    combine: dict[str, str] = {}
    group_stack: list[str] = []
    in_initrwgt = 0
    for m in _WEIGHT_TAGS.finditer(text):
        closing, tag, attr_text, selfclose = m.groups()
        tag = tag.lower()
        if tag == "initrwgt":
            in_initrwgt += -1 if closing else (0 if selfclose else 1)
            continue
        if tag == "weightgroup":
            if closing:
                if group_stack:
                    group_stack.pop()
                continue
            attrs = parse_attributes(attr_text)
            gname = attrs.get("name", attrs.get("type", f"group{len(groups) + 1}"))
            groups.setdefault(gname, [])
            if "combine" in attrs:
                combine[gname] = attrs["combine"]
            if not selfclose:
                group_stack.append(gname)
            continue
        if closing:
            continue
        if tag == "weight" and in_initrwgt <= 0 and not group_stack:
            continue  # a <weight> outside <initrwgt> is not a declaration
        attrs = parse_attributes(attr_text)
        wid = attrs.get("id") if tag == "weight" else attrs.get("name", attrs.get("id"))
        body = ""
        if not selfclose:
            end = text.find("</" + m.group(2), m.end())
            if end < 0:
                end = text.find("<", m.end())
            body = xml_unescape(text[m.end() : end if end >= 0 else len(text)].strip())
        if wid is None:
            wid = body or str(len(names))
        names.append(wid)
        descriptions[wid] = body or " ".join(f"{k}={v}" for k, v in attrs.items() if k != "id")
        if group_stack:
            groups[group_stack[-1]].append(wid)
    return names, groups, descriptions, combine


_GENERATOR = re.compile(r"<generator\b([^>]*?)(/?)>(.*?)(?:</generator>|(?=<)|$)", re.S)
_XSECINFO = re.compile(r"<xsecinfo\b([^>]*?)/?>", re.S)


def parse_preamble(data: bytes, parts: tuple[str, int, int, int, int, int], name: str) -> LHEInfo:
    """Build the :class:`LHEInfo` from the bytes and ranges found by ``read_preamble``."""
    try:
        return _parse_preamble(data, parts, name)
    except BadText as exc:
        raise LHEError(f"{name}: {exc}") from None


def _check_values(
    v: list[float | int], processes: list[Process], name: str, lineno: int
) -> None:
    """Header values within their meaning (LHEF 1.0 / Les Houches accord HEPRUP)."""
    for k in (0, 1, 4, 5, 6, 7, 8):
        if not -(2**31) <= int(v[k]) <= 2**31 - 1:
            raise LHEError(f"{name}: line {lineno}: <init> beam line: {v[k]} does not fit 32 bits")
    for k in (2, 3):
        e = float(v[k])
        if not (math.isfinite(e) and e >= 0.0):
            raise LHEError(
                f"{name}: line {lineno}: <init> beam line: EBMUP{k - 1} must be a "
                f"non-negative beam energy in GeV, found {e!r}"
            )
    for j, p in enumerate(processes, start=1):
        values = (p.xsec_pb, p.xsec_err_pb, p.max_weight)
        if not all(math.isfinite(x) for x in values) or p.xsec_err_pb < 0:
            raise LHEError(
                f"{name}: line {lineno + j}: <init> process line: XSECUP, XERRUP and XMAXUP "
                f"must be finite and XERRUP >= 0, found {values}"
            )
        if not -(2**31) <= p.process_id <= 2**31 - 1:
            raise LHEError(
                f"{name}: line {lineno + j}: <init> process line: LPRUP {p.process_id} "
                "does not fit 32 bits"
            )


def _parse_preamble(
    data: bytes, parts: tuple[str, int, int, int, int, int], name: str
) -> LHEInfo:
    version, _root_end, h0, h1, i0, events_offset = parts
    i1 = data.rfind(b"</init", i0, events_offset)
    init_line0 = _line_of(data, i0)
    init_text = _blank_out(data[i0:i1].decode("utf-8", "replace"), _COMMENT)
    init_text = _blank_out(init_text, _CDATA)

    # numeric HEPRUP lines: the non-blank lines before the first tag or '#' line
    lines = init_text.split("\n")
    numeric: list[tuple[int, str]] = []
    for k, raw in enumerate(lines):
        s = raw.strip()
        if not s:
            continue
        if s.startswith(("<", "#")):
            break
        numeric.append((init_line0 + k, s))
    if not numeric:
        raise LHEError(
            f"{name}: line {init_line0}: <init> block has no HEPRUP line; expected "
            "'IDBMUP1 IDBMUP2 EBMUP1 EBMUP2 PDFGUP1 PDFGUP2 PDFSUP1 PDFSUP2 IDWTUP NPRUP'"
        )
    lineno, first = numeric[0]
    v = _numbers(first, "iiffiiiiii", name, lineno, "<init> beam line")
    nprup = int(v[9])
    if nprup < 0 or len(numeric) - 1 != nprup:
        raise LHEError(
            f"{name}: line {lineno}: <init> declares NPRUP={nprup} process lines but "
            f"{len(numeric) - 1} follow"
        )
    processes = []
    for ln, text in numeric[1:]:
        x = _numbers(text, "fffi", name, ln, "<init> process line (XSECUP XERRUP XMAXUP LPRUP)")
        processes.append(Process(int(x[3]), float(x[0]), float(x[1]), float(x[2])))
    _check_values(v, processes, name, lineno)

    # weight declarations: <initrwgt> may sit in <header> (LHEF 3.0) or in <init>
    decl_text = init_text
    if h0 >= 0:
        header_text = _blank_out(data[h0:h1].decode("utf-8", "replace"), _COMMENT)
        header_text = _blank_out(header_text, _CDATA)
        decl_text = header_text + "\n" + init_text
    wnames, wgroups, wdesc, wcombine = _parse_weights(decl_text)
    if len(set(wnames)) != len(wnames):
        dup = sorted({w for w in wnames if wnames.count(w) > 1})
        raise LHEError(f"{name}: weight ids declared more than once: {', '.join(dup)}")

    xsecinfo: dict[str, str] = {}
    m = _XSECINFO.search(init_text)
    if m:
        xsecinfo = parse_attributes(m.group(1))
    generators = []
    for g in _GENERATOR.finditer(init_text):
        attrs = parse_attributes(g.group(1))
        gname = attrs.get("name") or xml_unescape(g.group(3).strip()) or "?"
        generators.append((gname, attrs.get("version")))

    return LHEInfo(
        source=name,
        version=version,
        beams=(int(v[0]), int(v[1])),
        beam_energies=(float(v[2]), float(v[3])),
        pdf_group=(int(v[4]), int(v[5])),
        pdf_set=(int(v[6]), int(v[7])),
        weighting=int(v[8]),
        processes=tuple(processes),
        weight_names=tuple(wnames),
        weight_groups={k: tuple(val) for k, val in wgroups.items()},
        weight_descriptions=wdesc,
        weight_group_combine=wcombine,
        xsecinfo=xsecinfo,
        generators=tuple(generators),
        events_offset=events_offset,
        init_end_line=_line_of(data, events_offset),
    )


def open_lhe(source: Source) -> tuple[BinaryIO, bytes, LHEInfo]:
    """Open ``source``, read and parse its preamble.

    Returns the open stream (positioned somewhere after ``</init>``), the bytes already
    read past ``</init>``, and the :class:`LHEInfo`.
    """
    name = source_name(source)
    stream = open_binary(source)
    try:
        data, parts = read_preamble(stream, name)
        info = parse_preamble(data, parts, name)
    except BaseException:
        stream.close()
        raise
    return stream, data[info.events_offset :], info


#: what the event count looks for outside comments: a comment start, or an ``</event``
#: close tag (XML 1.0 sec. 3.1: white space may precede its ``>``), recognised as the
#: scanners recognise it (the name followed by white space, ``>`` or ``/``)
_COUNT_MARKS = re.compile(rb"<!--|</event[ \t\r\n>/]")
_MARK_MAX = 8  # the longest mark, in bytes
_COUNT_BLOCK = 1 << 23


def count_events(stream: BinaryIO, rest: bytes) -> int:
    """Number of ``</event>`` close tags outside XML comments in ``rest`` followed by the
    rest of ``stream`` (a fast byte scan, no parsing): the number of events ``read_lhe``
    delivers for a file it accepts. Marks that straddle two read blocks count once."""
    n = 0
    in_comment = False
    tail = b""
    block = rest or stream.read(_COUNT_BLOCK)
    while True:
        data = tail + block
        # a mark starting before ``limit`` lies wholly in ``data``; later ones are
        # looked at again with the next block
        limit = len(data) - (_MARK_MAX - 1) if block else len(data)
        pos = 0
        while pos < limit:
            if in_comment:  # XML 1.0 sec. 2.5: a comment ends at the first '-->'
                e = data.find(b"-->", pos)
                if e < 0 or e >= limit:
                    break
                in_comment = False
                pos = e + 3
                continue
            m = _COUNT_MARKS.search(data, pos)
            if m is None or m.start() >= limit:
                break
            if m.group() == b"<!--":
                in_comment = True
            else:
                n += 1
            pos = m.end()
        if not block:
            return n
        tail = data[max(pos, limit) :]
        block = stream.read(_COUNT_BLOCK)


def lhe_info(source: Source, *, count: bool = False) -> LHEInfo:
    """Read the run information (``<init>``, weight declarations) of an LHE file.

    ``source`` is a path to a plain or compressed (gzip, zstd, bz2, xz) LHE file. Only
    the start of the file is read, unless ``count=True``: then the whole file is scanned
    and ``n_events`` holds the number of events (as many as ``read_lhe`` delivers for a
    file it accepts). Raises :class:`~evtkin.errors.LHEError` naming the file and line for
    a malformed preamble or a file that is not LHE.
    """
    compressed_size(source)  # a clear error for a missing file
    stream, rest, info = open_lhe(source)
    try:
        if count:
            info = replace(info, n_events=count_events(stream, rest))
    finally:
        stream.close()
    return info


__all__ += ["open_lhe", "parse_attributes", "parse_preamble", "read_error"]
