"""LHEF 2.0 ``<eventgroup>`` blocks through the pipeline: one statistical unit.

LHEF 2.0 (arXiv:1003.1643; REFERENCES §1.7): the events of a group (an NLO real-emission event and
its counter-events) are one statistical unit, so the weights of a group's events that land in the
same bin are summed before squaring for Σw². Per-event weights for IDWTUP = -4: XWGTUP / N
(hep-ph/0609017 / hep-ph/0109068, REFERENCES §1.4).
"""

from __future__ import annotations

import awkward as ak
import numpy as np
import pytest

from evtkin.io.lhe import read_lhe
from evtkin.run.inputs import lhe as lhe_input
from evtkin.run.pipeline import run
from test_bands_pipeline_lhe import config, lhe_text, write

# group A = events 0, 1, 2; group B = events 3, 4
SCALE = [5.0, 6.0, 25.0, 7.0, 30.0]
X = [1.0, -0.5, 2.0, 1.0, 1.0]
GROUPS = [[0, 1, 2], [3, 4]]
FIRST = [0, 0, 0, 3, 3]  # reader contract: group = global index of the group's first event
# hand, w = XWGTUP / 5: bin [0, 20) holds A: 0.2 - 0.1 and B: 0.2; bin [20, 40) A: 0.4, B: 0.2
SUMW = [0.3, 0.6]
SUMW2_GROUPED = [(0.2 - 0.1) ** 2 + 0.2**2, 0.4**2 + 0.2**2]  # 0.05, 0.20
SUMW2_INDEPENDENT = [0.2**2 + 0.1**2 + 0.2**2, 0.4**2 + 0.2**2]  # 0.09, 0.20


def _file(tmp_path):  # type: ignore[no-untyped-def]
    var = np.array(X)[:, None] * 2.0  # one variation weight: twice the nominal
    return write(tmp_path / "g.lhe", lhe_text(
        SCALE, X, idwtup=-4, eventgroups=GROUPS, variations=var,
        groups=[("alt", None, [("v1", "twice the nominal")])]))


def test_pipeline_sums_group_weights_per_bin_before_squaring(tmp_path, monkeypatch) -> None:  # type: ignore[no-untyped-def]
    f = _file(tmp_path)
    original = lhe_input.lhe_chunks

    def with_groups(*args, **kwargs):  # type: ignore[no-untyped-def]
        for chunk in original(*args, **kwargs):
            if "group" not in ak.fields(chunk):  # what the reader exposes for <eventgroup>
                chunk = ak.with_field(chunk, np.array(FIRST[: len(chunk)]), "group")
            yield chunk

    monkeypatch.setattr(lhe_input, "lhe_chunks", with_groups)
    s = run(config([f], uncertainties={"automatic": False})).samples["s"]
    h = s.histograms["h"]
    assert h.rows[0][1:3] == pytest.approx(SUMW)
    assert h.row_variances[0][1:3] == pytest.approx(SUMW2_GROUPED)
    assert h.row_variances[1][1:3] == pytest.approx([4 * v for v in SUMW2_GROUPED])  # variation
    assert h.rows[1][1:3] == pytest.approx([2 * v for v in SUMW])


def test_without_groups_events_are_independent(tmp_path, monkeypatch) -> None:  # type: ignore[no-untyped-def]
    f = _file(tmp_path)
    original = lhe_input.lhe_chunks

    def without_groups(*args, **kwargs):  # type: ignore[no-untyped-def]
        for chunk in original(*args, **kwargs):
            yield chunk[[n for n in ak.fields(chunk) if n != "group"]]

    monkeypatch.setattr(lhe_input, "lhe_chunks", without_groups)
    h = run(config([f])).samples["s"].histograms["h"]
    assert h.row_variances[0][1:3] == pytest.approx(SUMW2_INDEPENDENT)


def _reader_exposes_groups() -> bool:
    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as d:
        f = write(Path(d) / "probe.lhe", lhe_text(SCALE, X, idwtup=-4, eventgroups=GROUPS))
        return "group" in ak.fields(next(iter(read_lhe(f))))


@pytest.mark.skipif(not _reader_exposes_groups(),
                    reason="the LHE reader does not expose <eventgroup> indices yet")
def test_real_reader_groups_reach_the_histograms(tmp_path) -> None:  # type: ignore[no-untyped-def]
    f = _file(tmp_path)
    chunk = next(iter(read_lhe(f)))
    assert ak.to_list(chunk["group"]) == FIRST
    h = run(config([f], uncertainties={"automatic": False})).samples["s"].histograms["h"]
    assert h.row_variances[0][1:3] == pytest.approx(SUMW2_GROUPED)
