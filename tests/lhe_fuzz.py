"""Mutation fuzzing of the LHE reader: the contract of issue 18, checked on one input.

Used by ``tests/test_lhe_fuzz.py`` (a short seeded hypothesis run) and by
``bench/fuzz_lhe.py`` (a long run). A valid LHE v3 text (:func:`base_text`; events of
several shapes: ``<rwgt>`` or ``<weights>``, optional blocks, comments, Fortran ``D``
exponents and long mantissas) is damaged by a few random mutations (:func:`mutate`: byte
edits, deleted / doubled / moved lines, inserted markup, long or huge number tokens, a
cut), and :func:`check` reads the result with both scanners, strict and lenient. The
contract:

* only :class:`~evtkin.errors.LHEError` (strict) or :class:`~evtkin.io.lhe.LHEWarning`
  (lenient) comes out, never another exception;
* both scanners give the same verdict (both raise, or both deliver the same events);
* every intact event (its text unchanged and not inside a comment) is delivered, with
  its own values, when the strict read passes and always by the lenient read;
* a strict read that passes delivers the same events as the lenient read, and as many as
  ``evtkin info`` counts.
"""

from __future__ import annotations

import math
import os
import random
import tempfile
import time
import warnings
from dataclasses import dataclass, field

import awkward as ak

import evtkin
from evtkin.errors import LHEError
from evtkin.io import lhe as lhe_mod
from evtkin.io.lhe import LHEWarning
from evtkin.io.lhe_fallback import scan_kernel_py

HEAD = (
    '<LesHouchesEvents version="3.0">\n<header>\n<initrwgt>\n'
    "<weightgroup name='scale'>\n<weight id='a'>muR=2</weight>\n<weight id='b'>muR=0.5</weight>\n"
    "</weightgroup>\n</initrwgt>\n</header>\n"
    "<init>\n 2212 2212 6500 6500 0 0 0 0 3 1\n 1.5 0.1 1.5 7\n</init>\n"
)

#: markup a mutation may insert at a line start
SNIPPETS = (
    "<event>\n", "</event>\n", "<rwgt>\n", "</rwgt>\n", "<wgt id='a'>", "</wgt>\n",
    "<wgt id='b'> 7 </wgt>\n", "<weights> 1 2 </weights>\n", "<scales a='1'>\n", "</scales>\n",
    "<!--", "-->\n", "<!-- x -->\n", "# note\n", "<mgrwt>\n", "</mgrwt>\n",
    '<LesHouchesEvents version="3.0">\n', "</LesHouchesEvents>\n", "<event/>\n", "<", ">",
    " 1 2 3 4 5 6\n", " 11 1 0 0 0 0 1 2 3 4 0 0 9\n", "<scales a='1>\n", "&#xD800;",
    "</event\t>\n", "</event \n >\n", "# <!--\n", "# </event>\n", "# <event>\n",
    "# a <!-- b --> c\n", "<!-->\n",
)  # fmt: skip
#: number-like tokens a mutation may put in place of a number
TOKENS = (
    "1" * 3000 + "x", "9" * 25, "4294967297", "-2147483649", "1e999", "nan", "1.0D+03",
    "1.5-300", "0x10", "--1", "1..2", ".", "+", "1e", "99999999999999999999", "00000000011",
    "1" * 400, "1.0e-400",
)  # fmt: skip
ALPHABET = b"0123456789 .-+eEdD\n<>/#'\"=!abcwgtidrsvn\t\r"


def _event(k: int, rng: random.Random) -> str:
    """A valid event whose XWGTUP is ``k`` (so that every event's text is unique)."""
    nup = rng.choice((1, 2, 3))
    lines = [f"<event>\n {nup} {rng.randint(1, 9)} {k}.0 91.1880 0.0078125 0.118\n"]
    for j in range(nup):
        px = rng.choice(("1.5", "-2.25E+01", "3.0D-02", "0.12345678901234567890123", "7"))
        lines.append(f" {11 + j} 1 0 0 {501 + j} 0 {px} 0.5 -1.25 45.0 0.0 0.0 9.0\n")
    shape = rng.randrange(6)
    if shape == 1:
        lines.append("<scales pt_clust_1='10.5' muf='91.2'> </scales>\n")
    elif shape == 2:
        lines.append("<!-- an in-event comment -->\n# a hash line\n")
    elif shape == 3:
        lines.append("<mgrwt>\n<rscale> 2 0.1 </rscale>\n</mgrwt>\n")
    if rng.random() < 0.3:
        lines.append(f"<weights> {k}.5 {k}.25 </weights>\n")
    else:
        lines.append(f"<rwgt>\n<wgt id='a'> {k}.5 </wgt>\n<wgt id='b'>{k}.25</wgt>\n</rwgt>\n")
    lines.append("</event>\n")
    return "".join(lines)


def base_text(rng: random.Random, n_events: int = 12) -> tuple[str, list[str]]:
    """A valid file and the texts of its events."""
    events = [_event(k, rng) for k in range(1, n_events + 1)]
    parts = [HEAD]
    for i, e in enumerate(events):
        parts.append(e)
        if i % 5 == 2:
            parts.append("<!-- between events -->\n")
    parts.append("</LesHouchesEvents>\n")
    return "".join(parts), events


def mutate(text: str, rng: random.Random, n_ops: int | None = None) -> str:
    """``text`` with 1-3 random mutations after ``</init>``."""
    start = text.index("</init>") + len("</init>\n")
    for _ in range(n_ops or rng.randint(1, 3)):
        n = len(text)
        if n <= start:
            break
        op = rng.randrange(8)
        if op == 0:  # byte edits
            b = bytearray(text.encode("latin-1"))
            for _ in range(rng.randint(1, 3)):
                p = rng.randrange(start, len(b))
                r = rng.random()
                if r < 0.4:
                    b[p] = rng.choice(ALPHABET)
                elif r < 0.7:
                    del b[p]
                else:
                    b.insert(p, rng.choice(ALPHABET))
            text = b.decode("latin-1")
            continue
        head, body = text[:start], text[start:]
        lines = body.splitlines(keepends=True)
        if not lines:
            continue
        i = rng.randrange(len(lines))
        if op == 1:  # delete a line
            del lines[i]
        elif op == 2:  # double a line
            lines.insert(i, lines[i])
        elif op == 3:  # move a line
            line = lines.pop(i)
            lines.insert(rng.randrange(len(lines) + 1), line)
        elif op == 4:  # insert markup
            lines.insert(i, rng.choice(SNIPPETS))
        elif op == 5:  # a number token replaced
            toks = lines[i].split(" ")
            cand = [j for j, t in enumerate(toks) if t.strip()[:1].isdigit()]
            if cand:
                j = rng.choice(cand)
                toks[j] = rng.choice(TOKENS) + ("\n" if toks[j].endswith("\n") else "")
                lines[i] = " ".join(toks)
        elif op == 6:  # cut the file short
            text = text[: rng.randrange(start, n)]
            continue
        else:  # join two lines
            if i + 1 < len(lines):
                lines[i] = lines[i].rstrip("\n") + " " + lines.pop(i + 1)
        text = head + "".join(lines)
    return text


def _inside_comment(text: str, pos: int) -> bool:
    # XML 1.0 sec. 2.5: a comment ends at the first '-->' after its '<!--' (in '<!-->' the
    # '-->' overlaps the opening and does not close it)
    o = text.rfind("<!--", 0, pos)
    return o >= 0 and text.find("-->", o + 4, pos) < 0


def _records(arrays: list[ak.Array]) -> list[str]:
    return [repr(r) for arr in arrays for r in arr.to_list()]


@dataclass
class Outcome:
    kind: str  # "ok", "error" or "foreign"
    records: list[str] = field(default_factory=list)
    message: str = ""
    warnings: list[str] = field(default_factory=list)
    seconds: float = 0.0


#: the reader's buffer size during fuzzing: small, so that events straddle buffers
FUZZ_BUFFER = 1 << 11


def _read(path: str, strict: bool, scanner: str) -> Outcome:
    lhe_mod._kernel()
    saved = lhe_mod._KERNEL, lhe_mod._KIND, lhe_mod.BUFFER_BYTES
    lhe_mod.BUFFER_BYTES = FUZZ_BUFFER
    if scanner == "fallback":
        lhe_mod._KERNEL, lhe_mod._KIND = scan_kernel_py, "fallback"
    t0 = time.perf_counter()
    try:
        with warnings.catch_warnings(record=True) as rec:
            warnings.simplefilter("always")
            try:
                arrays = list(evtkin.read_lhe(path, strict=strict, threads=0, step_size=7))
                out = Outcome("ok", _records(arrays))
            except LHEError as exc:
                out = Outcome("error", message=str(exc))
            except Exception as exc:  # the contract: nothing else escapes
                out = Outcome("foreign", message=f"{type(exc).__name__}: {exc}")
        out.warnings = [
            str(w.message) if issubclass(w.category, LHEWarning) else f"FOREIGN {w.category}"
            for w in rec
        ]
    finally:
        lhe_mod._KERNEL, lhe_mod._KIND, lhe_mod.BUFFER_BYTES = saved
    out.seconds = time.perf_counter() - t0
    if out.seconds > SLOWEST[0]:
        SLOWEST[0], SLOWEST[1] = out.seconds, os.path.getsize(path)
    return out


#: the slowest read so far: (seconds, input bytes)
SLOWEST: list[float] = [0.0, 0]


_REFERENCE: dict[str, list[str]] = {}


def reference(events: list[str]) -> list[str]:
    """The records of the valid events (read once from an unmutated file)."""
    key = "".join(events)
    if key not in _REFERENCE:
        with tempfile.TemporaryDirectory() as tmp:
            path = os.path.join(tmp, "ref.lhe")
            with open(path, "w", encoding="latin-1") as fh:
                fh.write(HEAD + key + "</LesHouchesEvents>\n")
            out = _read(path, True, "numba")
        assert out.kind == "ok", out.message
        assert len(out.records) == len(events)
        _REFERENCE.clear()
        _REFERENCE[key] = out.records
    return _REFERENCE[key]


def check(text: str, events: list[str], workdir: str, max_seconds: float = math.inf) -> list[str]:
    """The contract's violations for the mutated ``text`` (empty: none)."""
    ref = reference(events)
    path = os.path.join(workdir, "fuzz.lhe")
    with open(path, "w", encoding="latin-1") as fh:
        fh.write(text)
    intact = []
    for i, e in enumerate(events):
        p = text.find(e)
        if p >= 0 and text.count(e) == 1 and not _inside_comment(text, p):
            intact.append(ref[i])
    groups = "<eventgroup" in text  # a stray group changes what an event is: no intact check
    problems: list[str] = []
    outs: dict[tuple[str, bool], Outcome] = {}
    for scanner in ("numba", "fallback"):
        for strict in (True, False):
            o = outs[scanner, strict] = _read(path, strict, scanner)
            label = f"{scanner} strict={strict}"
            if o.kind == "foreign":
                problems.append(f"{label}: foreign exception {o.message}")
            if any(w.startswith("FOREIGN") for w in o.warnings):
                problems.append(f"{label}: foreign warning {o.warnings}")
            if not strict and o.kind != "ok":
                problems.append(f"{label}: lenient read raised {o.message}")
            if o.kind == "ok" and not groups:
                got = set(o.records)
                lost = [r for r in intact if r not in got]
                if lost:
                    problems.append(f"{label}: {len(lost)} intact event(s) lost: {lost[0][:120]}")
            if o.seconds > max_seconds:
                problems.append(f"{label}: took {o.seconds:.1f} s")
    for strict in (True, False):
        a, b = outs["numba", strict], outs["fallback", strict]
        if a.kind != b.kind:
            problems.append(f"strict={strict}: verdicts differ: numba {a.kind} {a.message[:200]!r}"
                            f" / fallback {b.kind} {b.message[:200]!r}")
        elif a.records != b.records:
            problems.append(f"strict={strict}: the scanners deliver different events")
        elif len(a.warnings) != len(b.warnings):
            problems.append(f"strict={strict}: warnings differ: {a.warnings} / {b.warnings}")
    if outs["numba", True].kind == "ok":  # the event count of evtkin info agrees
        from evtkin.cli.info import count_events
        from evtkin.io import lhe_header

        n_read = len(outs["numba", True].records)
        saved = lhe_header._COUNT_BLOCK
        try:
            for block in (saved, 5):  # small read blocks: marks straddle them
                lhe_header._COUNT_BLOCK = block
                n = count_events(path)
                if n != n_read:
                    problems.append(f"count: evtkin info counts {n} events (read blocks of "
                                    f"{block} bytes), read_lhe delivers {n_read}")
        finally:
            lhe_header._COUNT_BLOCK = saved
    for scanner in ("numba", "fallback"):
        s, le = outs[scanner, True], outs[scanner, False]
        if s.kind == "ok" and le.kind == "ok" and s.records != le.records:
            problems.append(f"{scanner}: strict and lenient reads deliver different events")
    return problems


def message_differs(text: str, workdir: str) -> bool:
    """Whether the two scanners' strict error messages differ (a softer agreement)."""
    path = os.path.join(workdir, "fuzz.lhe")
    with open(path, "w", encoding="latin-1") as fh:
        fh.write(text)
    a, b = _read(path, True, "numba"), _read(path, True, "fallback")
    return a.kind == b.kind == "error" and a.message != b.message


def fuzz_case(seed: int) -> tuple[str, list[str]]:
    """The mutated text of case ``seed`` and the events of its base file."""
    rng = random.Random(seed)
    text, events = base_text(rng)
    return mutate(text, rng), events
