"""Property-based fuzz test of the LHE reader's contract (issue 18 §7), small and seeded.

Each example mutates a valid LHE text (tests/lhe_fuzz.py) and checks: only LHEError /
LHEWarning escape, both scanners agree, every intact event is delivered. The long run is
``bench/fuzz_lhe.py`` (30 000 inputs and more).
"""

from __future__ import annotations

import random
import tempfile

from hypothesis import HealthCheck, given, seed, settings
from hypothesis import strategies as st

import lhe_fuzz


@seed(18)
@settings(
    max_examples=40,
    deadline=None,  # no timed assertions in the suite
    derandomize=True,
    suppress_health_check=[HealthCheck.too_slow],
)
@given(st.integers(min_value=0, max_value=2**32 - 1), st.integers(min_value=1, max_value=3))
def test_mutated_lhe_keeps_the_contract(case, n_ops):
    rng = random.Random(case)
    text, events = lhe_fuzz.base_text(rng, n_events=8)
    mutated = lhe_fuzz.mutate(text, rng, n_ops)
    with tempfile.TemporaryDirectory() as tmp:
        assert lhe_fuzz.check(mutated, events, tmp) == []


def test_the_oracle_sees_a_silent_loss(monkeypatch):
    # the check itself must be able to fail: a reader that drops the third event is caught
    import evtkin

    real = evtkin.read_lhe

    def lossy(*args, **kw):
        for chunk in real(*args, **kw):
            yield chunk[[i for i in range(len(chunk)) if float(chunk.weight[i]) != 3.0]]

    rng = random.Random(1)
    text, events = lhe_fuzz.base_text(rng, n_events=5)
    lhe_fuzz.reference(events)  # read with the real reader
    monkeypatch.setattr(evtkin, "read_lhe", lossy)
    with tempfile.TemporaryDirectory() as tmp:
        problems = lhe_fuzz.check(text, events, tmp)
    assert any("intact event(s) lost" in p for p in problems)
