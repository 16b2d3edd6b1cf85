"""read_lhe: field mapping, standard coverage (issue 2 §3), chunking, compression, physics."""

from __future__ import annotations

import bz2
import gzip
import lzma
import math
from pathlib import Path

import awkward as ak
import numpy as np
import pytest
import zstandard

import evtkin
from evtkin.events import PARTICLE_FIELDS
from evtkin.io import lhe as lhe_mod
from evtkin.io.lhe_fallback import scan_kernel_py
from lhe_textgen import G_T, G_W, G_Z, M_T, M_W, M_Z, minimal_file, toy_file_text

FIXTURE = Path(__file__).parent / "data" / "lhe" / "aurora_toy.lhe"


def read_all(path, **kw) -> ak.Array:
    chunks = list(evtkin.read_lhe(path, **kw))
    if not chunks:
        return ak.Array([])
    return ak.concatenate(chunks)


def write(tmp_path: Path, text: str, name: str = "f.lhe") -> Path:
    p = tmp_path / name
    p.write_bytes(text.encode())
    return p


@pytest.fixture
def fallback(monkeypatch):
    """Force the numpy/Python scanner."""
    monkeypatch.setattr(lhe_mod, "_KERNEL", scan_kernel_py)
    monkeypatch.setattr(lhe_mod, "_KIND", "fallback")


def same(a: ak.Array, b: ak.Array) -> bool:
    """Exact equality, NaN == NaN, including the types."""
    if a.type != b.type:
        return False
    fa, fb = ak.to_packed(a), ak.to_packed(b)
    ba, bb = ak.to_buffers(fa), ak.to_buffers(fb)
    if ba[0] != bb[0] or ba[1] != bb[1]:
        return False
    return all(np.array_equal(ba[2][k], bb[2][k], equal_nan=True) for k in ba[2])


# ------------------------------------------------------------------ field mapping

ONE_EVENT = """<event>
 4 17 +2.5e+00 1.234e+02 7.8125e-03 1.18e-01
 21 -1 0 0 501 502 0.0 0.0 +1.0e+02 1.0e+02 0.0 0.0 9.0
 -1 -1 0 0 0 501 0.0 0.0 -5.0e+01 5.0e+01 0.0 0.0 1.0
 24 2 1 2 0 502 1.5 -2.5 3.5 85.0 80.0 0.125 -1.0
 11 1 3 3 0 0 1.0 2.0 3.0 3.7416573867739413 0.0 0.0 -1.0
</event>
"""


def test_field_order_follows_lhef(tmp_path):
    # LHEF 1.0 (hep-ph/0609017, sec. 2, the <event> block; from memory): the event line is
    # NUP IDPRUP XWGTUP SCALUP AQEDUP AQCDUP, each particle line
    # IDUP ISTUP MOTHUP(1) MOTHUP(2) ICOLUP(1) ICOLUP(2) PUP(1..5) VTIMUP SPINUP
    ev = read_all(write(tmp_path, minimal_file(ONE_EVENT)))
    assert len(ev) == 1
    e = ev[0]
    assert e.process_id == 17
    assert e.weight == 2.5
    assert e.scale == 123.4
    assert e.alpha_qed == 0.0078125
    assert e.alpha_qcd == 0.118
    p = e.particles
    assert p.pdgid.tolist() == [21, -1, 24, 11]
    assert p.status.tolist() == [-1, -1, 2, 1]
    # the file's 1-based MOTHUP with 0 = none becomes 0-based with -1 = none
    assert p.mother1.tolist() == [-1, -1, 0, 2]
    assert p.mother2.tolist() == [-1, -1, 1, 2]
    assert p.color1.tolist() == [501, 0, 0, 0]
    assert p.color2.tolist() == [502, 501, 502, 0]
    w = p[2]
    assert (w["px"], w["py"], w["pz"], w["energy"], w["mass"]) == (1.5, -2.5, 3.5, 85.0, 80.0)
    assert w["lifetime"] == 0.125
    assert p.spin.tolist() == [9.0, 1.0, -1.0, -1.0]


def test_types_match_contract(tmp_path):
    ev = read_all(write(tmp_path, minimal_file(ONE_EVENT)))
    t = str(ev.type)
    assert "process_id: int32" in t
    for f in ("weight", "scale", "alpha_qed", "alpha_qcd"):
        assert f"{f}: float64" in t
    assert "weights: 0 * float64" in t  # regular, zero columns when the file has none
    assert "named_weights: {}" in t  # a record without fields
    assert "particles: var * Particle[pdgid: int32, status: int32, mother1: int32" in t
    assert ak.fields(ev.particles) == list(PARTICLE_FIELDS)


def test_vector_behaviour(tmp_path):
    ev = read_all(write(tmp_path, minimal_file(ONE_EVENT)))
    p = ev.particles[0]
    w = p[2]
    # pT, eta, phi, rapidity from the textbook definitions (common practice)
    pt = math.hypot(1.5, -2.5)
    pabs = math.sqrt(1.5**2 + 2.5**2 + 3.5**2)
    assert w.pt == pytest.approx(pt, rel=1e-15)
    assert w.eta == pytest.approx(math.atanh(3.5 / pabs), rel=1e-12)
    assert w.phi == pytest.approx(math.atan2(-2.5, 1.5), rel=1e-15)
    assert w.rapidity == pytest.approx(0.5 * math.log((85 + 3.5) / (85 - 3.5)), rel=1e-12)
    # .mass is the four-vector mass; ["mass"] the file's column
    assert w.mass == pytest.approx(math.sqrt(85.0**2 - pabs**2), rel=1e-14)
    assert w["mass"] == 80.0
    e = p[3]
    dphi = math.atan2(2.0, 1.0) - math.atan2(-2.5, 1.5)
    dphi = (dphi + math.pi) % (2 * math.pi) - math.pi
    deta = e.eta - w.eta
    assert w.deltaR(e) == pytest.approx(math.hypot(deta, dphi), rel=1e-12)
    s = p[0] + p[1]
    assert s.mass == pytest.approx(math.sqrt(150.0**2 - 50.0**2), rel=1e-14)


# ------------------------------------------------------------------ standard coverage §3


def test_header_text_never_read_as_events(tmp_path):
    head = (
        "<!-- <event>\n 1 1 1 1 1 1\n</event> -->\n"
        "<header>\n<card><![CDATA[ <event> 2 2 2 </event> <init> ]]></card>\n"
        "<note> <event> free text </event> </note>\n</header>\n"
    )
    body = "<!-- between events: <event> 1 2 </event> -->\n" + ONE_EVENT + ONE_EVENT
    ev = read_all(write(tmp_path, minimal_file(body, head=head)))
    assert len(ev) == 2
    assert ev.process_id.tolist() == [17, 17]


def test_event_attributes_unknown_tags_hash_lines_scales(tmp_path):
    body = ONE_EVENT.replace("<event>", '<event npLO=" -1 " npNLO="1" note=\'a>b\'>').replace(
        "</event>",
        "# 0.5 1 2 trailing information line\n"
        "<scales muf='91.2' mur='45.6' mups='91.2'>\n</scales>\n"
        "<mystery a='1'>\n 1 2 3\n <inner> 4 </inner>\n</mystery>\n"
        "<pdfinfo p1='21' p2='-1'/>\n"
        "<!-- 7 8 9 -->\n"
        "</event>",
    )
    ev = read_all(write(tmp_path, minimal_file(body)))
    assert len(ev) == 1
    assert ak.num(ev.particles).tolist() == [4]


def test_eventgroup_events_read_as_normal(tmp_path):
    body = "<eventgroup nreal='1' ncounter='1'>\n" + ONE_EVENT + ONE_EVENT + "</eventgroup>\n"
    body += ONE_EVENT
    ev = read_all(write(tmp_path, minimal_file(body)))
    assert len(ev) == 3


def test_fortran_exponents_signs_tabs_crlf(tmp_path):
    body = (
        "<event>\r\n"
        "\t1\t+3\t+1.5D+00\t9.1188d1\t7.8125D-3\t.118\r\n"
        "\t+11\t+1\t+0\t0\t0\t0\t+1.D0\t-2.0E+0\t3e0\t+4.5d0\t0\t0\t9.\r\n"
        "</event>\r\n"
    )
    ev = read_all(write(tmp_path, minimal_file(body).replace("\n", "\r\n")))
    assert ev.weight.tolist() == [1.5]
    assert ev.scale.tolist() == [91.188]
    assert ev.alpha_qed.tolist() == [0.0078125]
    assert ev.alpha_qcd.tolist() == [0.118]
    p = ev.particles[0, 0]
    assert (p.pdgid, p.status, p.mother1) == (11, 1, -1)
    assert (p["px"], p["py"], p["pz"], p["energy"], p.spin) == (1.0, -2.0, 3.0, 4.5, 9.0)


RWGT_HEAD = """<header>
<initrwgt>
<weightgroup name='scale'>
<weight id="a1">muR=2</weight>
<weight id="a2">muR=0.5</weight>
</weightgroup>
<weight id="b1">free</weight>
</initrwgt>
</header>
"""


def test_rwgt_columns_follow_declaration_order(tmp_path):
    body = ONE_EVENT.replace(
        "</event>",
        "<rwgt>\n<wgt id='b1'>3.0</wgt>\n<wgt id=\"a1\"> 1.0e0 </wgt><wgt id='a2'>2D0</wgt>\n"
        "</rwgt>\n</event>",
    )
    missing = ONE_EVENT.replace("</event>", "<rwgt><wgt id='a2'>-7</wgt></rwgt>\n</event>")
    path = write(tmp_path, minimal_file(body + missing, head=RWGT_HEAD))
    ev = read_all(path)
    assert evtkin.lhe_info(path).weight_names == ("a1", "a2", "b1")
    assert ev.weights[0].tolist() == [1.0, 2.0, 3.0]
    w1 = ev.weights[1].to_numpy()
    assert np.isnan(w1[0])
    assert w1[1] == -7.0
    assert np.isnan(w1[2])
    assert str(ev.weights.type) == "2 * 3 * float64"
    # the same columns by weight id (LHEF 3.0, arXiv:1405.1067: <wgt id='...'>)
    assert ak.fields(ev.named_weights) == ["a1", "a2", "b1"]
    assert ev.named_weights["b1"].tolist()[0] == 3.0
    assert ev.named_weights.a2.tolist() == [2.0, -7.0]


def test_v2_weights_list_with_weightinfo(tmp_path):
    init = (
        "<init>\n 11 -11 125 125 0 0 0 0 1 1\n 2.0 0.1 2.0 1\n"
        "<weightinfo name='central'/>\n<weightinfo name='up' mur='2'/>\n"
        "<weightinfo name='down' mur='0.5'/>\n</init>\n"
    )
    body = ONE_EVENT.replace("</event>", "<weights>\n 1.0 2.0\n 3.0 </weights>\n</event>")
    path = write(tmp_path, minimal_file(body, init=init, version="2.0"))
    assert evtkin.lhe_info(path).weight_names == ("central", "up", "down")
    ev = read_all(path)
    assert ev.weights.tolist() == [[1.0, 2.0, 3.0]]
    assert ev.named_weights.tolist() == [{"central": 1.0, "up": 2.0, "down": 3.0}]


def test_unnamed_v2_weights_are_named_by_position(tmp_path):
    # LHEF 2.0 (arXiv:1405.1067, from memory): a <weights> block without <weightinfo>
    body = ONE_EVENT.replace("</event>", "<weights> 7.0 8.0 </weights>\n</event>")
    ev = read_all(write(tmp_path, minimal_file(body, version="2.0")))
    assert ev.weights.tolist() == [[7.0, 8.0]]
    assert ev.named_weights.tolist() == [{"0": 7.0, "1": 8.0}]


def test_v3_weights_list_with_initrwgt(tmp_path):
    body = ONE_EVENT.replace("</event>", "<weights> 4 5 6 </weights>\n</event>")
    ev = read_all(write(tmp_path, minimal_file(body, head=RWGT_HEAD)))
    assert ev.weights.tolist() == [[4.0, 5.0, 6.0]]


def test_zero_event_file_yields_nothing(tmp_path):
    path = write(tmp_path, minimal_file(""))
    assert list(evtkin.read_lhe(path)) == []


def test_event_without_particles(tmp_path):
    body = "<event>\n 0 3 1.0 1.0 0.0078 0.118\n</event>\n" + ONE_EVENT
    ev = read_all(write(tmp_path, minimal_file(body)))
    assert ak.num(ev.particles).tolist() == [0, 4]


# ------------------------------------------------------------------ chunking


def test_chunks_exact_size_and_identical(tmp_path):
    ref = read_all(FIXTURE, step_size=1000)
    assert len(ref) == 24
    for step in (1, 3, 5, 24, 25, 100_000):
        chunks = list(evtkin.read_lhe(FIXTURE, step_size=step))
        sizes = [len(c) for c in chunks]
        assert all(s == step for s in sizes[:-1])
        assert 0 < sizes[-1] <= step
        assert sum(sizes) == 24
        assert same(ak.concatenate(chunks), ref)


def test_small_buffers_and_threads_give_identical_arrays(tmp_path, monkeypatch):
    text = toy_file_text(None)
    # many events so that buffers are cut between events many times
    head, rest = text.split("</init>\n", 1)
    events = rest.rsplit("</LesHouchesEvents>", 1)[0]
    path = write(tmp_path, head + "</init>\n" + events * 40 + "</LesHouchesEvents>\n")
    ref = read_all(path, threads=1)
    assert len(ref) == 960
    for buf in (700, 4096, 10_000):
        monkeypatch.setattr(lhe_mod, "BUFFER_BYTES", buf)
        for threads in (1, 2):
            got = read_all(path, step_size=97, threads=threads)
            assert same(got, ref)


def test_fallback_identical_to_compiled(tmp_path, monkeypatch):
    ref = read_all(FIXTURE)
    monkeypatch.setattr(lhe_mod, "_KERNEL", scan_kernel_py)
    monkeypatch.setattr(lhe_mod, "_KIND", "fallback")
    assert lhe_mod.scanner_kind() == "fallback"
    got = read_all(FIXTURE, step_size=7)
    assert same(got, ref)


def test_compiled_scanner_is_used_by_default():
    assert lhe_mod.scanner_kind() == "numba"


# ------------------------------------------------------------------ compression


def _compressors():
    return {
        "gzip": gzip.compress,
        "bz2": bz2.compress,
        "xz": lzma.compress,
        "zstd": lambda b: zstandard.ZstdCompressor().compress(b),
    }


@pytest.mark.parametrize("kind", ["gzip", "bz2", "xz", "zstd"])
def test_compressed_files_read_identically(tmp_path, kind):
    raw = FIXTURE.read_bytes()
    path = tmp_path / "events.dat"  # no telling extension: detection by magic bytes
    path.write_bytes(_compressors()[kind](raw))
    assert same(read_all(path), read_all(FIXTURE))
    assert evtkin.lhe_info(path).weight_names == ("mur2", "mur05", "pdf1")


def test_multi_member_gzip_is_one_stream(tmp_path):
    raw = FIXTURE.read_bytes()
    cut = raw.index(b"<event>", len(raw) // 2)
    path = tmp_path / "multi.lhe.gz"
    path.write_bytes(gzip.compress(raw[:cut]) + gzip.compress(raw[cut:]))
    assert same(read_all(path), read_all(FIXTURE))


def test_multi_frame_zstd_is_one_stream(tmp_path):
    raw = FIXTURE.read_bytes()
    cut = len(raw) // 3
    c = zstandard.ZstdCompressor()
    path = tmp_path / "multi.zst"
    path.write_bytes(c.compress(raw[:cut]) + c.compress(raw[cut:]))
    assert same(read_all(path), read_all(FIXTURE))


# ------------------------------------------------------------------ physics checks on the fixture


def test_energy_momentum_relation_on_fixture():
    p = ak.flatten(read_all(FIXTURE).particles)
    px, py, pz, e, m = (p[f].to_numpy() for f in ("px", "py", "pz", "energy", "mass"))
    # special relativity: E^2 = p^2 + m^2 (PDG kinematics review); fixture printed to 11 digits
    lhs = e**2
    rhs = px**2 + py**2 + pz**2 + m**2
    np.testing.assert_allclose(lhs, rhs, rtol=1e-8, atol=1e-8)


def test_momentum_balance_incoming_vs_outgoing():
    ev = read_all(FIXTURE)
    p = ev.particles
    for f in ("px", "py", "pz", "energy"):
        incoming = ak.sum(p[f][p.status == -1], axis=1).to_numpy()
        outgoing = ak.sum(p[f][p.status == 1], axis=1).to_numpy()
        # four-momentum conservation; resonances (status 2) are intermediate, not counted
        np.testing.assert_allclose(outgoing, incoming, rtol=1e-9, atol=1e-7)


def test_resonance_masses_against_pdg_2024():
    p = ak.flatten(read_all(FIXTURE).particles)
    res = p[p.status == 2]
    pid = np.abs(res.pdgid.to_numpy())
    m = res.mass.to_numpy()  # four-vector mass
    # PDG 2024 (Phys. Rev. D 110, 030001): m_Z = 91.1880, Gamma_Z = 2.4955; m_W = 80.3692,
    # Gamma_W = 2.085; m_t = 172.57, Gamma_t = 1.42 GeV. The fixture draws resonance
    # masses within 5 widths of the pole.
    for code, mass, width in ((23, M_Z, G_Z), (24, M_W, G_W), (6, M_T, G_T)):
        sel = m[pid == code]
        assert sel.size > 0
        assert np.all(np.abs(sel - mass) < 5 * width)
        assert abs(np.median(sel) - mass) < 2 * width
    np.testing.assert_allclose(m, res["mass"].to_numpy(), rtol=1e-9)
    # independent check of the constants used by the fixture (PDG 2024 summary values)
    assert (M_Z, M_W, M_T) == (91.1880, 80.3692, 172.57)


def test_daughters_point_at_their_resonance():
    ev = read_all(FIXTURE)
    p = ev.particles
    # LHEF: decay products carry the line of their mother; here 0-based
    muons = p[(abs(p.pdgid) == 13)]
    mothers = p[muons.mother1]
    assert ak.all((abs(mothers.pdgid) == 23) | (abs(mothers.pdgid) == 24))
    # a resonance's mass equals the invariant mass of its daughters (energy-momentum
    # conservation in the decay)
    z = ev[ev.process_id == 1].particles
    mumu = z[:, 3] + z[:, 4]
    np.testing.assert_allclose(mumu.mass.to_numpy(), z[:, 2].mass.to_numpy(), rtol=1e-8)
