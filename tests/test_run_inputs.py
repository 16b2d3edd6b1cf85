"""The run layer's input-source contract (evtkin.run.inputs): one source per config format, and
a new source written against the contract alone runs through the one unit loop with the same
results as the built-in one."""

from __future__ import annotations

import itertools
from collections.abc import Iterator, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from evtkin.config import SAMPLE_FORMATS, SampleSpec, load_config
from evtkin.errors import ConfigError
from evtkin.hists.xsec import FileTotals, XsecResult
from evtkin.io.lhe import read_lhe
from evtkin.io.lhe_header import lhe_info
from evtkin.run import inputs
from evtkin.run.inputs import InputSource, UnitReading, input_source
from evtkin.run.inputs.base import limit_events
from evtkin.run.inputs.lhe import LHESource
from evtkin.run.partial import FileRecord, merge_all
from evtkin.run.pipeline import finalise
from evtkin.run.plan import Plan, build_plan
from evtkin.run.units import make_units, process_unit
from evtkin.run.workunit import WorkUnit
from run_helpers import drell_yan, write_lhe
from test_run import dy_config


def test_every_config_format_has_a_source_and_back() -> None:
    assert set(SAMPLE_FORMATS) == set(inputs.SOURCES)
    for fmt in SAMPLE_FORMATS:
        assert input_source(fmt).format == fmt


def test_an_unknown_format_is_a_config_error() -> None:
    with pytest.raises(ConfigError, match="input format 'nope' is not supported"):
        input_source("nope")


class _InMemoryReading(UnitReading):
    """All events of the file read at once, handed out in chunks of 7 (another chunking than
    the reader's, which the results must not depend on)."""

    def __init__(self, unit: WorkUnit) -> None:
        self.unit = unit
        self.info = lhe_info(unit.path)
        self.closed = False

    def chunks(self) -> Iterator[Any]:
        events = next(iter(read_lhe(self.unit.path, step_size=10**6)))
        pieces = (events[i:i + 7] for i in range(0, len(events), 7))
        return limit_events(pieces, self.unit.first_event, self.unit.max_events)

    def variation_names(self) -> tuple[str, ...]:
        return tuple(self.info.weight_names)

    def file_info(self, n_events: int) -> Any:
        return self.info

    def close(self) -> None:
        self.closed = True


class _InMemorySource(InputSource):
    format = "lhe"

    def __init__(self) -> None:
        self.readings: list[_InMemoryReading] = []

    def work_units(self, spec: SampleSpec, file_index: int, path: str, size: int, parts: int,
                   max_events: int | None) -> list[WorkUnit]:
        n = sum(len(c) for c in read_lhe(path, step_size=10**6)) if parts > 1 else 0
        if parts <= 1 or not n:
            return super().work_units(spec, file_index, path, size, parts, max_events)
        edges = [n * k // parts for k in range(parts + 1)]
        return [WorkUnit(spec.name, file_index, path, a, b - a, part=k, n_parts=parts,
                         size=size // parts, format=self.format)
                for k, (a, b) in enumerate(itertools.pairwise(edges))]

    def open(self, plan: Plan, unit: WorkUnit, *, read_threads: int | None = None,
             with_truth: bool = False) -> UnitReading:
        reading = _InMemoryReading(unit)
        self.readings.append(reading)
        return reading

    def cross_section(self, spec: SampleSpec, records: Sequence[FileRecord],
                      totals: Sequence[FileTotals]) -> XsecResult:
        return LHESource().cross_section(spec, records, totals)  # σ as for LHE files


def _sums(plan: Plan, units: list[WorkUnit]) -> dict[str, Any]:
    samples = finalise(plan, merge_all(process_unit(plan, u) for u in units))
    s = samples["dy"]
    return {"sigma": s.xsec.sigma_pb if s.xsec else None,
            "cutflow": [r["n_raw"] for r in s.cutflow],
            **{h: (a.sumw, a.sumw2) for h, a in s.weighted.items()}}


def test_a_new_source_runs_through_the_one_unit_loop(tmp_path: Path,
                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    f = write_lhe(tmp_path / "dy.lhe", drell_yan(400, seed=5, weights="mixed", n_var=2),
                  idwtup=-4, xsec_pb=0.0, weight_ids=("up", "down"))
    plan = build_plan(load_config(dy_config([f])), step_size=50)
    expected = _sums(plan, make_units(plan))
    fake = _InMemorySource()
    monkeypatch.setitem(inputs.SOURCES, "lhe", fake)
    units = make_units(plan, unit_bytes=-(-f.stat().st_size // 3))  # three parts
    assert [(u.first_event, u.max_events) for u in units] == [(0, 133), (133, 133), (266, 134)]
    got = _sums(plan, units)
    assert len(fake.readings) == 3
    assert all(r.closed for r in fake.readings)
    assert got["sigma"] == pytest.approx(expected["sigma"], rel=1e-12)
    assert got["cutflow"] == expected["cutflow"]
    for name in ("mll", "lep_pt", "pt_eta"):
        np.testing.assert_allclose(got[name][0], expected[name][0], rtol=1e-12, atol=1e-300)
        np.testing.assert_allclose(got[name][1], expected[name][1], rtol=1e-12, atol=1e-300)
