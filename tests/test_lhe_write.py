"""LHE v3 writer: exact round trip through read_lhe/lhe_info, layout, gzip, determinism, errors."""

from __future__ import annotations

import gzip
import struct
from dataclasses import replace

import awkward as ak
import numpy as np
import pytest

import evtkin
from evtkin.io.lhe_write import ProcessInfo, RunInfo, write_lhe

# floats that stress a text round trip (common practice: extremes, subnormals, signed zero)
NASTY = [0.1, -0.0, 1e-300, 5e-324, 1.7976931348623157e308, 123456789.12345679, 1e16,
         -2.5e-7, 1 / 3, 6500.000000000001, 9.0]  # fmt: skip


def _events(n: int = 7, k: int = 3, seed: int = 4) -> ak.Array:
    rng = np.random.default_rng(seed)
    counts = rng.integers(1, 6, n)
    if n > 2:
        counts[2] = 0  # an event without particles
    tot = int(counts.sum())
    starts = np.repeat(np.cumsum(counts) - counts, counts)
    local = np.arange(tot) - starts
    mother = np.where(local > 0, rng.integers(0, np.maximum(local, 1)), -1)
    floats = rng.normal(size=(tot, 7)) * 10.0 ** rng.integers(-8, 8, (tot, 7))
    m = min(len(NASTY), floats.size)
    floats.ravel()[:m] = NASTY[:m]
    parts = ak.zip(
        {
            "pdgid": rng.choice([21, 1, -2, 6, -6, 11, -13, 24, 2212], tot).astype(np.int32),
            "status": rng.choice([-1, 1, 2], tot).astype(np.int32),
            "mother1": mother.astype(np.int32),
            "mother2": np.where(local > 1, mother, -1).astype(np.int32),
            "color1": rng.choice([0, 501, 502], tot).astype(np.int32),
            "color2": rng.choice([0, 503], tot).astype(np.int32),
            "px": floats[:, 0],
            "py": floats[:, 1],
            "pz": floats[:, 2],
            "energy": floats[:, 3],
            "mass": floats[:, 4],
            "lifetime": floats[:, 5],
            "spin": floats[:, 6],
        }
    )
    return ak.zip(
        {
            "process_id": rng.choice([3, 7], n).astype(np.int32),
            "weight": rng.normal(size=n) * 1e3,
            "scale": rng.random(n) * 500,
            "alpha_qed": np.full(n, 1 / 128),
            "alpha_qcd": rng.random(n) * 0.2,
            "weights": rng.normal(size=(n, k)),
            "particles": ak.unflatten(parts, counts),
        },
        depth_limit=1,
    )


def _info(k: int = 3) -> RunInfo:
    names = [f"w{i}" for i in range(k)]
    return RunInfo(
        beams=(2212, -2212),
        beam_energies=(6800.0, 6800.000000000001),
        pdf_group=(0, 0),
        pdf_set=(12345, 12345),
        weighting=-4,
        processes=[ProcessInfo(3, 12.5, 0.25, 40.0), ProcessInfo(7, 1 / 3, 0.01, 2.0)],
        weight_names=names,
        weight_groups={"scales": names[:2]},
        weight_descriptions={"w0": "muR=1 muF=1 <nominal> & co"},
        weight_group_combine={"scales": "envelope"},
    )


def _assert_same(a: ak.Array, b: ak.Array) -> None:
    assert len(a) == len(b)
    for f in ("process_id", "weight", "scale", "alpha_qed", "alpha_qcd", "weights"):
        x, y = ak.to_numpy(a[f]), ak.to_numpy(b[f])
        assert x.shape == y.shape, f
        assert x.tobytes() == np.asarray(y, dtype=x.dtype).tobytes(), f  # bit-identical
    for f in a.particles.fields:
        x = ak.to_numpy(ak.flatten(a.particles[f]))
        y = ak.to_numpy(ak.flatten(b.particles[f]))
        assert x.tobytes() == np.asarray(y, dtype=x.dtype).tobytes(), f
    assert ak.to_numpy(ak.num(a.particles)).tolist() == ak.to_numpy(ak.num(b.particles)).tolist()


def test_exact_round_trip_through_reader(tmp_path):
    ev = _events()
    path = tmp_path / "rt.lhe"
    assert write_lhe(path, ev, info=_info()) == len(ev)
    back = ak.concatenate(list(evtkin.read_lhe(path)))
    _assert_same(ev, back)


def test_run_info_round_trip(tmp_path):
    path = tmp_path / "info.lhe.gz"
    write_lhe(path, _events(), info=_info())
    info = evtkin.lhe_info(path)
    assert info.version == "3.0"
    assert tuple(info.beams) == (2212, -2212)
    assert tuple(info.beam_energies) == (6800.0, 6800.000000000001)
    assert tuple(info.pdf_set) == (12345, 12345)
    assert info.weighting == -4
    procs = {p.process_id: p for p in info.processes}
    assert procs[7].xsec_pb == 1 / 3  # exact
    assert procs[3].max_weight == 40.0
    assert list(info.weight_names) == ["w0", "w1", "w2"]
    assert list(info.weight_groups["scales"]) == ["w0", "w1"]


def test_text_layout_follows_lhef(tmp_path):
    """Field order of the event and particle lines: LHEF 1.0 (hep-ph/0609017), section 2;
    mothers are 1-based line numbers with 0 = none; v3 weights as <rwgt><wgt id>
    (arXiv:1405.1067)."""
    ev = _events(n=1, k=2, seed=11)
    path = tmp_path / "one.lhe"
    write_lhe(path, ev, info=_info(k=2))
    text = path.read_text()
    assert text.startswith('<LesHouchesEvents version="3.0">')
    assert text.rstrip().endswith("</LesHouchesEvents>")
    body = text.split("<event>\n", 1)[1].split("</event>", 1)[0].splitlines()
    nup, idprup, xwgtup, scalup, aqedup, aqcdup = body[0].split()
    p = ev[0].particles
    assert int(nup) == len(p)
    assert int(idprup) == ev[0].process_id
    assert float(xwgtup) == ev[0].weight
    assert float(scalup) == ev[0].scale
    assert float(aqcdup) == ev[0].alpha_qcd
    assert float(aqedup) == ev[0].alpha_qed
    for i, line in enumerate(body[1 : 1 + len(p)]):
        tok = line.split()
        assert len(tok) == 13
        assert int(tok[0]) == p.pdgid[i]
        assert int(tok[1]) == p.status[i]
        assert int(tok[2]) == p.mother1[i] + 1
        assert int(tok[3]) == p.mother2[i] + 1
        assert int(tok[4]) == p.color1[i]
        assert int(tok[5]) == p.color2[i]
        assert [float(t) for t in tok[6:11]] == [p.px[i], p.py[i], p.pz[i], p.energy[i], p.mass[i]]
        assert float(tok[11]) == p.lifetime[i]
        assert float(tok[12]) == p.spin[i]
    rest = body[1 + len(p) :]
    assert rest[0] == "<rwgt>"
    assert rest[-1] == "</rwgt>"
    assert rest[1].startswith('<wgt id="w0">')
    assert float(rest[2].split(">")[1].split("<")[0]) == ev[0].weights[1]
    init = text.split("<init>\n", 1)[1].split("</init>", 1)[0].splitlines()
    assert init[0].split()[8:] == ["-4", "2"]  # IDWTUP NPRUP (LHEF 1.0 <init> layout)
    assert init[1].split()[3] == "3"  # LPRUP is the 4th field of a process line
    assert "muR=1 muF=1 &lt;nominal&gt; &amp; co" in text  # escaped XML text


def test_gzip_deterministic_and_chunked(tmp_path):
    ev = _events(n=40, seed=3)
    a, b, c = tmp_path / "a.lhe.gz", tmp_path / "b.lhe.gz", tmp_path / "c.lhe"
    write_lhe(a, ev, info=_info())
    write_lhe(b, [ev[:13], ev[13:14], ev[14:]], info=_info())
    write_lhe(c, ev, info=_info())
    raw = a.read_bytes()
    assert raw[:2] == b"\x1f\x8b"  # gzip magic (RFC 1952)
    assert struct.unpack("<I", raw[4:8])[0] == 0  # MTIME field zero: reproducible
    assert raw == b.read_bytes()
    assert gzip.decompress(raw) == c.read_bytes()
    assert c.read_bytes()[:1] == b"<"  # no gzip without .gz
    write_lhe(tmp_path / "d.lhe", ev, info=_info(), gzip=True)
    assert (tmp_path / "d.lhe").read_bytes()[:2] == b"\x1f\x8b"


def test_rewrite_of_read_back_is_byte_identical(tmp_path):
    ev = _events(n=25, seed=8)
    first = tmp_path / "first.lhe"
    # plain description text: entity unescaping is the reader's business, not tested here
    write_lhe(first, ev, info=replace(_info(), weight_descriptions={"w0": "muR=1 muF=1"}))
    info = evtkin.lhe_info(first)
    second = tmp_path / "second.lhe"
    write_lhe(second, evtkin.read_lhe(first, step_size=4), info=info)
    assert first.read_bytes() == second.read_bytes()


def test_precision_option(tmp_path):
    ev = _events(n=5, seed=9)
    path = tmp_path / "p.lhe"
    write_lhe(path, ev, info=_info(), precision=8)
    back = ak.concatenate(list(evtkin.read_lhe(path)))
    x = ak.to_numpy(ak.flatten(ev.particles.px))
    y = ak.to_numpy(ak.flatten(back.particles.px))
    np.testing.assert_allclose(y, x, rtol=1e-7)
    assert not np.array_equal(x, y)


def test_errors(tmp_path):
    ev = _events()
    with pytest.raises(evtkin.LHEError, match="variation weights"):
        write_lhe(tmp_path / "x.lhe", ev, info=_info(k=2))
    bad = ak.with_field(ev, ak.with_field(ev.particles, ev.particles.mother1 + 10, "mother1"),
                        "particles")  # fmt: skip
    with pytest.raises(evtkin.LHEError, match="mother index"):
        write_lhe(tmp_path / "y.lhe", bad, info=_info())
    with pytest.raises(evtkin.LHEError, match="processes"):
        write_lhe(tmp_path / "z.lhe", ev, info=RunInfo(weight_names=["w0", "w1", "w2"]))
    with pytest.raises(evtkin.LHEError, match="header_text"):
        write_lhe(tmp_path / "h.lhe", ev, info=_info(), header_text="<event>")


def test_no_variation_weights(tmp_path):
    ev = _events(k=0)
    path = tmp_path / "nw.lhe"
    write_lhe(path, ev, info=RunInfo(processes=[ProcessInfo(3, 1.0, 0.1, 1.0)]))
    assert "<rwgt>" not in path.read_text()
    assert "<initrwgt>" not in path.read_text()
    back = ak.concatenate(list(evtkin.read_lhe(path)))
    assert ak.to_numpy(back.weights).shape == (len(ev), 0)
    assert ak.to_numpy(back.weight).tolist() == ak.to_numpy(ev.weight).tolist()


@pytest.mark.parametrize("name", ["cut.lhe", "cut.lhe.gz"])
def test_failed_write_leaves_no_file(tmp_path, name):
    # the events come from a generator that fails after its first chunk has been written
    target = tmp_path / name
    seen_while_writing: list[list[str]] = []

    def chunks():
        yield _events(n=40, seed=5)
        seen_while_writing.append(sorted(p.name for p in tmp_path.iterdir()))
        raise RuntimeError("the event source broke")

    with pytest.raises(RuntimeError, match="event source broke"):
        write_lhe(target, chunks(), info=_info())
    # the first chunk went to a hidden temporary file beside the target, not to the target
    assert len(seen_while_writing[0]) == 1
    assert seen_while_writing[0][0].startswith(f".{name}.")
    assert list(tmp_path.iterdir()) == []  # neither a half file nor the temporary one


def test_failed_write_keeps_an_existing_file(tmp_path):
    target = tmp_path / "old.lhe"
    write_lhe(target, _events(n=5, seed=1), info=_info())
    before = target.read_bytes()
    bad = _events(n=5, seed=2)
    bad = ak.with_field(bad, ak.with_field(bad.particles, bad.particles.mother1 + 10, "mother1"),
                        "particles")  # fmt: skip
    with pytest.raises(evtkin.LHEError, match="mother index"):
        write_lhe(target, [_events(n=30, seed=3), bad], info=_info())
    assert target.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["old.lhe"]
