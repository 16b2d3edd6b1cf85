"""read_hepmc / write_hepmc / hepmc_info: round trips, both ASCII forms, units, chunking,
byte ranges.

Format facts from A. Buckley et al., "The HepMC3 event record library for Monte Carlo
event generators", Comput. Phys. Commun. 260 (2021) 107310 (# from memory for the exact
line layouts: Asciiv3 ``E/U/W/A/P/V`` lines with negative vertex ids; IO_GenEvent
``E/N/U/C/V/P`` lines with barcodes, each vertex followed by its particles).
"""

from __future__ import annotations

import gzip
import itertools
from pathlib import Path

import awkward as ak
import numpy as np
import pytest

import evtkin
from evtkin.io.hepmc import PDF_FIELDS, hepmc_byte_ranges
from hepmc_textgen import random_events

NAMES = ("nominal", "muR2")


def _read_all(path: Path, **kw: object) -> ak.Array:
    chunks = list(evtkin.read_hepmc(path, **kw))  # type: ignore[arg-type]
    return ak.concatenate(chunks) if len(chunks) > 1 else chunks[0]


def _same(a: ak.Array, b: ak.Array) -> None:
    assert a.fields == b.fields
    for f in a.fields:
        x, y = a[f], b[f]
        if f in ("particles", "vertices"):
            for g in ak.fields(x):
                assert ak.to_list(ak.num(x, axis=1)) == ak.to_list(ak.num(y, axis=1))
                np.testing.assert_array_equal(ak.to_numpy(ak.flatten(x[g])),
                                              ak.to_numpy(ak.flatten(y[g])))  # fmt: skip
        else:
            np.testing.assert_array_equal(ak.to_numpy(x), ak.to_numpy(y))


@pytest.mark.parametrize("form", ["Asciiv3", "IO_GenEvent"])
def test_round_trip_exact(tmp_path: Path, form: str) -> None:
    ev = random_events(40, seed=3, grouped=form == "IO_GenEvent")
    path = tmp_path / "a.hepmc"
    assert evtkin.write_hepmc(path, ev, form=form, weight_names=NAMES) == 40
    got = _read_all(path)
    assert len(got) == 40
    info = evtkin.hepmc_info(path, count=True)
    assert info.form == form
    assert info.weight_names == NAMES
    assert info.n_events == 40
    assert info.xsec_pb == 12.5
    np.testing.assert_array_equal(got.event_number, ev.event_number)
    np.testing.assert_array_equal(ak.to_numpy(got.weights), ak.to_numpy(ev.weights))
    np.testing.assert_array_equal(got.weight, ak.to_numpy(ev.weights)[:, 0])
    # the same columns by name, in the order hepmc_info gives
    assert tuple(ak.fields(got.named_weights)) == NAMES
    np.testing.assert_array_equal(ak.to_numpy(got.named_weights[NAMES[1]]),
                                  ak.to_numpy(ev.weights)[:, 1])
    for f in ("scale", "alpha_qcd", "alpha_qed", "xsec_pb", "xsec_err_pb", "signal_process_id",
              *PDF_FIELDS):  # (NaN where absent: equal NaNs compare equal here)
        np.testing.assert_array_equal(got[f], ev[f], err_msg=f)
    have = ~np.isnan(ak.to_numpy(ev.pdf_x1))
    assert 0 < have.sum() < len(ev)  # events with and without PDF info and process id
    assert np.all((ak.to_numpy(got.signal_process_id) >= 0) == have)
    for f in ("pdgid", "status", "prod_vertex", "end_vertex", "px", "py", "pz", "energy", "mass"):
        assert ak.to_list(got.particles[f]) == ak.to_list(ev.particles[f]), f
    for f in ("x", "y", "z", "t", "status"):
        assert ak.to_list(got.vertices[f]) == ak.to_list(ev.vertices[f]), f
    # the same behaviour as LHE particles
    np.testing.assert_allclose(ak.flatten(got.particles.pt),
                               ak.flatten(np.hypot(ev.particles.px, ev.particles.py)))  # fmt: skip


def test_gzip_and_deterministic_bytes(tmp_path: Path) -> None:
    ev = random_events(10, seed=4)
    a, b = tmp_path / "a.hepmc.gz", tmp_path / "b.hepmc.gz"
    evtkin.write_hepmc(a, ev, weight_names=NAMES)
    evtkin.write_hepmc(b, ev, weight_names=NAMES)
    assert a.read_bytes() == b.read_bytes()
    assert a.read_bytes()[:2] == b"\x1f\x8b"  # RFC 1952: gzip magic
    # compression detected by content, not by name
    plain = tmp_path / "plain.gz"
    plain.write_bytes(gzip.decompress(a.read_bytes()))
    _same(_read_all(a), _read_all(plain))


UNITS_TEXT = b"""HepMC::Version 3.02.00
HepMC::Asciiv3-START_EVENT_LISTING
E 7 1 3
U MEV CM
P 1 0 11 1000 2000 3000 4000 0.511 4
P 2 0 -11 -1000 -2000 -3000 4000 0.511 4
V -1 0 [1,2] @ 1 2 3 4
P 3 -1 23 0 0 0 8000 8000 1
HepMC::Asciiv3-END_EVENT_LISTING
"""


def test_unit_conversion(tmp_path: Path) -> None:
    path = tmp_path / "u.hepmc"
    path.write_bytes(UNITS_TEXT)
    ev = _read_all(path)
    p = ev.particles[0]
    # 1 GeV = 1000 MeV, 1 cm = 10 mm (SI prefixes)
    assert p.px.tolist() == [1.0, -1.0, 0.0]
    assert p["mass"].tolist() == [0.511 / 1000, 0.511 / 1000, 8.0]
    v = ev.vertices[0]
    assert [v.x[0], v.y[0], v.z[0], v.t[0]] == [10.0, 20.0, 30.0, 40.0]
    assert ev.weight.tolist() == [1.0]  # no W line: unit weight
    info = evtkin.hepmc_info(path)
    assert (info.momentum_unit, info.length_unit) == ("MEV", "CM")


V2_TEXT = b"""HepMC::Version 2.06.09
HepMC::IO_GenEvent-START_EVENT_LISTING
E 3 -1 9.1e+01 1.2e-01 -1 0 0 2 10001 10002 0 1 0.5
N 1 "0"
U GEV MM
C 4.5e+02 3.0e+00
F 21 21 0.1 0.2 91 1 1 0 0
V -1 0 0 0 0 0 2 1 0
P 10001 2212 0 0 6500 6500 0.938 4 0 0 -1 0
P 10002 2212 0 0 -6500 6500 0.938 4 0 0 -1 0
P 10003 23 0 0 10 100 91 2 0 0 -2 0
V -2 0 0 0 1 0.5 0 2 0
P 10004 11 1 0 5 50 0 1 0 0 0 0
P 10005 -11 -1 0 5 50 0 1 0 0 0 1 1 501
HepMC::IO_GenEvent-END_EVENT_LISTING
"""


def test_io_genevent_form(tmp_path: Path) -> None:
    path = tmp_path / "v2.hepmc"
    path.write_bytes(V2_TEXT)
    ev = _read_all(path)
    assert ev.event_number.tolist() == [3]
    assert ev.scale.tolist() == [91.0]
    assert ev.alpha_qcd.tolist() == [0.12]
    assert np.isnan(ev.alpha_qed[0])  # -1 = unset
    assert ev.xsec_pb.tolist() == [450.0]
    p = ev.particles[0]
    assert p.pdgid.tolist() == [2212, 2212, 23, 11, -11]
    assert p.prod_vertex.tolist() == [-1, -1, 0, 1, 1]
    assert p.end_vertex.tolist() == [0, 0, 1, -1, -1]
    assert ev.vertices[0].z.tolist() == [0.0, 1.0]
    # E line field 6 is the signal process id; F id1 id2 x1 x2 scalePDF xf1 xf2 id_pdf1
    # id_pdf2 (HepMC2 IO_GenEvent layout, # from memory)
    assert ev.signal_process_id.tolist() == [0]
    assert [ev[f][0] for f in PDF_FIELDS] == [21, 21, 0.1, 0.2, 91.0, 1.0, 1.0, 0, 0]
    info = evtkin.hepmc_info(path)
    assert info.form == "IO_GenEvent"
    assert info.weight_names == ("0",)
    assert ak.fields(ev.named_weights) == ["0"]


V3_PDF_TEXT = b"""HepMC::Version 3.02.00
HepMC::Asciiv3-START_EVENT_LISTING
E 1 1 3
U GEV MM
A 0 signal_process_id 81
A 0 GenPdfInfo 21 -2 0.0125 0.25 172.5 1.75 0.0625 303400 303401
P 1 0 21 0 0 87.5 87.5 0 4
P 2 0 -2 0 0 -1750 1750 0 4
V -1 0 [1,2]
P 3 -1 23 0 0 -1662.5 1837.5 91.1876 1
E 2 1 3
U GEV MM
P 1 0 21 0 0 10 10 0 4
P 2 0 21 0 0 -10 10 0 4
V -1 0 [1,2]
P 3 -1 25 0 0 0 20 20 1
HepMC::Asciiv3-END_EVENT_LISTING
"""

V2_OLD_PDF_TEXT = V2_TEXT.replace(b"F 21 21 0.1 0.2 91 1 1 0 0", b"F 1 -1 0.5 0.25 20 0.75 0.5")


def test_process_id_and_pdf_info(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Asciiv3 event attributes signal_process_id and GenPdfInfo ("id1 id2 x1 x2 scale xf1 xf2
    # pdf_id1 pdf_id2", HepMC3 GenPdfInfo, # from memory); an event without them gets -1, NaN, 0
    path = tmp_path / "pdf.hepmc"
    path.write_bytes(V3_PDF_TEXT)
    ev = _read_all(path)
    assert ev.signal_process_id.tolist() == [81, -1]
    first = [ev[f][0] for f in PDF_FIELDS]
    assert first == [21, -2, 0.0125, 0.25, 172.5, 1.75, 0.0625, 303400, 303401]
    second = [ev[f][1] for f in PDF_FIELDS]
    assert second[:2] == [0, 0]
    assert second[-2:] == [0, 0]
    assert all(np.isnan(x) for x in second[2:7])
    # an older IO_GenEvent F line without the PDF set ids: the ids read as 0
    old = tmp_path / "old.hepmc"
    old.write_bytes(V2_OLD_PDF_TEXT)
    ev = _read_all(old)
    assert [ev[f][0] for f in PDF_FIELDS] == [1, -1, 0.5, 0.25, 20.0, 0.75, 0.5, 0, 0]
    # the compiled scanner and the Python fallback read the same
    compiled = [_read_all(p) for p in (path, old)]
    from evtkin.io import hepmc
    from evtkin.io.hepmc_fallback import scan_py

    monkeypatch.setattr(hepmc, "_KERNEL", scan_py)
    monkeypatch.setattr(hepmc, "_KIND", "fallback")
    assert hepmc.scanner_kind() == "fallback"
    for p, ref in zip((path, old), compiled, strict=True):
        _same(_read_all(p), ref)


@pytest.mark.parametrize("threads", [0, 1, 2])
def test_step_sizes_give_identical_arrays(tmp_path: Path, threads: int) -> None:
    ev = random_events(120, seed=5)
    path = tmp_path / "s.hepmc"
    evtkin.write_hepmc(path, ev, weight_names=NAMES)
    ref = _read_all(path, step_size=1000, threads=threads)
    for step in (1, 3, 7):
        chunks = list(evtkin.read_hepmc(path, step_size=step, threads=threads))
        assert [len(c) for c in chunks[:-1]] == [step] * (len(chunks) - 1)
        _same(ak.concatenate(chunks), ref)


def test_small_buffers_cut_between_events(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from evtkin.io import hepmc

    ev = random_events(60, seed=6)
    path = tmp_path / "b.hepmc"
    evtkin.write_hepmc(path, ev, weight_names=NAMES)
    ref = _read_all(path)
    monkeypatch.setattr(hepmc, "BUFFER_BYTES", 700)  # smaller than some events
    _same(_read_all(path, threads=2), ref)


def test_byte_ranges_give_the_whole_file(tmp_path: Path) -> None:
    ev = random_events(80, seed=7)
    path = tmp_path / "r.hepmc"
    evtkin.write_hepmc(path, ev, weight_names=NAMES)
    ref = _read_all(path)
    for parts in (1, 3, 7):
        ranges = hepmc_byte_ranges(path, parts)
        assert ranges[0][0] == evtkin.hepmc_info(path).events_offset
        pieces = [c for r in ranges for c in evtkin.read_hepmc(path, byte_range=r)]
        _same(ak.concatenate(pieces), ref)
    # arbitrary, unaligned ranges that tile the file read every event once
    size = path.stat().st_size
    cuts = [0, 1000, 1001, 5000, size // 2, size]
    pieces = [c for r in itertools.pairwise(cuts) for c in evtkin.read_hepmc(path, byte_range=r)]
    _same(ak.concatenate(pieces), ref)


def test_default_step_is_bounded_by_bytes(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from evtkin.io import hepmc

    ev = random_events(50, seed=8)
    path = tmp_path / "d.hepmc"
    evtkin.write_hepmc(path, ev, weight_names=NAMES)
    per_event = path.stat().st_size / 50
    monkeypatch.setattr(hepmc, "CHUNK_TEXT_BYTES", int(10 * per_event))
    sizes = [len(c) for c in evtkin.read_hepmc(path)]
    assert sum(sizes) == 50
    assert 5 <= sizes[0] <= 20


def _respell(text: bytes, seed: int) -> bytes:
    """Every token of the P and V lines spelled another way that means the same number:
    blanks doubled or tabs, '+' on non-negative numbers, floats with 18 significant digits
    in exponent form (exactly the same double: 17 digits after the point always round-trip,
    # common practice (IEEE 754 binary64 needs at most 17 significant digits)) or with a
    mantissa past 18 digits (the scanner's slow path); some lines end in CRLF."""
    rng = np.random.default_rng(seed)
    out = []
    for line in text.split(b"\n"):
        if line[:2] in (b"P ", b"V "):
            toks = line.split(b" ")
            new = [toks[0]]
            for t in toks[1:]:
                if b"." in t:
                    r = rng.integers(3)
                    x = float(t)
                    t = (f"{x:.17e}".encode() if r == 0 else
                         t + b"0" * 12 + (b"e0" if r == 2 else b"") if r else t)  # fmt: skip
                if t[:1].isdigit() and rng.integers(2):
                    t = b"+" + t
                new.append(t)
            seps = [b" ", b"  ", b"\t"]
            line = new[0] + b"".join(seps[rng.integers(3)] + t for t in new[1:])
            if rng.integers(4) == 0:
                line += b"\r"
        out.append(line)
    return b"\n".join(out)


@pytest.mark.parametrize("threads", [0, 2])
def test_token_spellings_read_alike(tmp_path: Path, threads: int) -> None:
    # the compiled scanner's fast path for plain P/V lines and its general path must give
    # the same columns: the same events with their tokens re-spelled read identically
    ev = random_events(40, seed=11)
    plain = tmp_path / "plain.hepmc"
    evtkin.write_hepmc(plain, ev, weight_names=NAMES)
    other = tmp_path / "respelled.hepmc"
    other.write_bytes(_respell(plain.read_bytes(), seed=3))
    assert other.read_bytes() != plain.read_bytes()
    _same(_read_all(other, threads=threads), _read_all(plain, threads=threads))
