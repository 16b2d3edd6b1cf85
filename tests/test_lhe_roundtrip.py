"""Property test: random valid events written as LHE text read back exactly."""

from __future__ import annotations

import tempfile
from pathlib import Path

import awkward as ak
import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import evtkin
from lhe_textgen import minimal_file

finite = st.floats(allow_nan=False, allow_infinity=False, width=64)
int32 = st.integers(-(2**31), 2**31 - 1)
styles = st.sampled_from(["repr", "e10", "E17", "D", "plus"])


def ref(x: float, style: str) -> float:
    """What the text of ``x`` means: Python float() of it (D exponent read as E)."""
    return float(fmt(x, style).replace("D", "E"))


def fmt(x: float, style: str) -> str:
    if style == "repr":
        return repr(x)
    if style == "e10":
        return f"{x:.10e}"
    if style == "E17":
        return f"{x:.17E}"
    if style == "D":
        return f"{x:.12e}".replace("e", "D")
    return f"{x:+.15e}"


particle = st.tuples(int32, int32, st.integers(0, 50), st.integers(0, 50), int32, int32,
                     st.lists(finite, min_size=7, max_size=7))  # fmt: skip
event = st.tuples(
    st.integers(-1000, 1000),
    st.lists(finite, min_size=4, max_size=4),
    st.lists(particle, min_size=0, max_size=6),
    st.lists(finite, min_size=2, max_size=2),
    styles,
    st.sampled_from([" ", "\t", "  "]),
    st.sampled_from(["\n", "\r\n"]),
)

HEAD = "<header><initrwgt><weight id='u'/><weight id='v'/></initrwgt></header>\n"


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(event, min_size=0, max_size=12), st.integers(1, 5))
def test_random_events_round_trip(events, step):
    text = []
    for pid, evf, parts, wts, style, sep, nl in events:
        f = [fmt(x, style) for x in evf]
        text.append(f"<event>{nl}{sep}{len(parts)}{sep}{pid}{sep}{sep.join(f)}{nl}")
        for p in parts:
            ints = [str(v) for v in p[:6]]
            floats = [fmt(x, style) for x in p[6]]
            text.append(sep + sep.join(ints + floats) + nl)
        text.append(
            f"<rwgt><wgt id='v'>{fmt(wts[1], style)}</wgt>{nl}"
            f'<wgt id="u"> {fmt(wts[0], style)} </wgt></rwgt>{nl}</event>{nl}'
        )
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "r.lhe"
        path.write_text(minimal_file("".join(text), head=HEAD), newline="")
        chunks = list(evtkin.read_lhe(path, step_size=step))
    assert all(len(c) == step for c in chunks[:-1])
    got = ak.concatenate(chunks) if chunks else ak.Array([])
    assert len(got) == len(events)
    for e, (pid, evf, parts, wts, style, *_rest) in zip(got, events, strict=True):
        assert e.process_id == pid
        vals = np.array([e.weight, e.scale, e.alpha_qed, e.alpha_qcd])
        expect = np.array([ref(x, style) for x in evf])
        assert np.array_equal(vals.view(np.int64), expect.view(np.int64))
        expect = np.array([ref(x, style) for x in wts])
        assert np.array_equal(e.weights.to_numpy().view(np.int64), expect.view(np.int64))
        assert len(e.particles) == len(parts)
        for q, p in zip(e.particles, parts, strict=True):
            assert [q.pdgid, q.status, q.mother1 + 1, q.mother2 + 1, q.color1, q.color2] == list(
                p[:6]
            )
            fl = np.array([q[f] for f in ("px", "py", "pz", "energy", "mass", "lifetime", "spin")])
            expect = np.array([ref(x, style) for x in p[6]])
            assert np.array_equal(fl.view(np.int64), expect.view(np.int64))
