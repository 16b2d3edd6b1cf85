"""The shipped toy samples tell the story the demo promises.

The deformed top-pair sample is the standard sampler with every weight multiplied by
1 + shat/Lambda^2 (Lambda = 1 TeV, samples/README.md). Compared shape-only with the standard
sample, the weighted-histogram chi-square test (Gagunashvili, NIM A 614 (2010) 287) must find the
deformation in the distributions that depend on shat (m_tt, top pT, rapidity gap) and must not
find it in the resonance line shapes, which do not depend on shat.
"""

from __future__ import annotations

from pathlib import Path

import pytest

import evtkin

ROOT = Path(__file__).resolve().parents[1]
CONFIG = ROOT / "configs" / "ttbar_truth.toml"


@pytest.fixture(scope="module")
def shape_comparison(tmp_path_factory: pytest.TempPathFactory) -> dict[str, float]:
    out = tmp_path_factory.mktemp("truth")
    evtkin.run(CONFIG, out=out)
    cs = evtkin.compare_results([out], out=out / "compare", shape_only=True, report=False)
    return {e.name: e.comparisons[0].chi2.p_value for e in cs.entries}


def test_deformation_found_in_the_mass_tail(shape_comparison: dict[str, float]) -> None:
    # the shat-dependent distributions are rejected as having the same shape
    assert shape_comparison["m_tt"] < 1e-6
    assert shape_comparison["top_pt"] < 1e-6
    assert shape_comparison["abs_dy"] < 1e-3


def test_deformation_not_found_where_nothing_changed(shape_comparison: dict[str, float]) -> None:
    # Breit-Wigner line shapes do not depend on shat: a test at the 1 % level must pass them
    assert shape_comparison["top_mass"] > 0.01
    assert shape_comparison["w_mass"] > 0.01
