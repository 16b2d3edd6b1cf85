"""Cross-section bookkeeping vs hand computations on small invented weight tables.

Source of the rules: the Les Houches accord, hep-ph/0109068 (event weights, IDWTUP), as summarised
in REFERENCES §1.4; N_eff = (Σw)²/Σw² from REFERENCES §2.11.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from evtkin.hists.fill import AxisSpec, HistAccumulator, HistSpec
from evtkin.hists.xsec import (
    FileTotals,
    ProcessDecl,
    RunDecl,
    combine_files,
    effective_entries,
    normalisation_factors,
)


def _run(idwtup: int, procs: list[tuple[int, float, float]], tot: float | None = None) -> RunDecl:
    return RunDecl(idwtup, tuple(ProcessDecl(i, x, e) for i, x, e in procs), tot, "toy.lhe")


def _weights(res, pid, x):  # type: ignore[no-untyped-def]
    return res.event_weights(np.asarray(pid), np.asarray(x, dtype=float))


@pytest.mark.parametrize("idwtup", [1, 4])
def test_weighted_modes_mean_of_xwgtup_is_sigma(idwtup: int) -> None:
    # LHA hep-ph/0109068, IDWTUP=±1/±4: mean XWGTUP estimates σ → w = XWGTUP/N
    pid, x = [1, 1, 1], [2.0, 4.0, 6.0]
    res = normalisation_factors(_run(idwtup, [(1, 4.0, 0.5)]), FileTotals.from_arrays(pid, x))
    assert _weights(res, pid, x).tolist() == pytest.approx([2 / 3, 4 / 3, 2.0])
    assert res.sigma_pb == pytest.approx(4.0)  # hand: (2+4+6)/3
    assert not res.warnings  # agrees with Σ XSECUP = 4 pb


def test_negative_weights_mode_minus4_neff() -> None:
    # IDWTUP=-4: signs kept; N_eff = (Σw)²/Σw²
    pid, x = [1, 1, 1], [3.0, -1.0, 4.0]
    res = normalisation_factors(_run(-4, [(1, 2.0, 0.1)]), FileTotals.from_arrays(pid, x))
    w = _weights(res, pid, x)
    assert w.tolist() == pytest.approx([1.0, -1 / 3, 4 / 3])
    assert res.sigma_pb == pytest.approx(2.0)
    assert res.sum_w2 == pytest.approx((9 + 1 + 16) / 9)
    assert res.n_eff == pytest.approx(2.0**2 / (26 / 9))  # hand: 36/26
    assert res.n_eff == pytest.approx(effective_entries(w.sum(), (w * w).sum()))


def test_negative_weights_histogram_error_is_sqrt_sumw2_not_sqrt_n() -> None:
    # REFERENCES §2.11: MC error = sqrt(Σw²); with weights ±c in one bin: Σw = c·(n+ − n−)
    w = np.array([1.0, 1.0, 1.0, -1.0, -1.0]) * 0.25
    acc = HistAccumulator(HistSpec("x", (AxisSpec.regular(1, 0, 1, name="x"),)))
    acc.fill(np.full(5, 0.5), weight=w)
    assert acc.sumw[0][1] == pytest.approx(0.25)
    assert math.sqrt(acc.sumw2[0][1]) == pytest.approx(0.25 * math.sqrt(5))  # not sqrt(N)·w̄
    assert math.sqrt(acc.sumw2[0][1]) != pytest.approx(math.sqrt(abs(acc.sumw[0][1])))
    assert effective_entries(w.sum(), (w * w).sum()) == pytest.approx(1.0 / 5.0)  # (0.25)²/0.3125


def test_mode2_two_processes() -> None:
    # IDWTUP=+2: σ_p from XSECUP(p), XWGTUP relative within p → w = x·XSECUP(p)/Σ_p x
    pid, x = [1, 2, 1], [1.0, 2.0, 3.0]
    res = normalisation_factors(_run(2, [(1, 10.0, 1.0), (2, 5.0, 0.5)]),
                                FileTotals.from_arrays(pid, x))
    assert _weights(res, pid, x).tolist() == pytest.approx([2.5, 5.0, 7.5])
    assert res.sigma_pb == pytest.approx(15.0)
    assert res.sigma_err_pb == pytest.approx(math.hypot(1.0, 0.5))  # stated XERRUP in quadrature


@pytest.mark.parametrize("xw", [1.0, 3.0, 12.0])  # accord value 1, and the files' σ/N or σ
def test_mode3_unweighted_any_constant_xwgtup(xw: float) -> None:
    # IDWTUP=+3: σ_tot = Σ XSECUP = 12 pb, 4 events → every event weighs 3 pb
    pid = [1, 2, 1, 1]
    x = [xw] * 4
    res = normalisation_factors(_run(3, [(1, 9.0, 0.3), (2, 3.0, 0.1)]),
                                FileTotals.from_arrays(pid, x))
    assert _weights(res, pid, x).tolist() == pytest.approx([3.0] * 4)
    assert res.sigma_pb == pytest.approx(12.0)


def test_mode_minus3_sum_vs_count() -> None:
    # IDWTUP=-3, XWGTUP=±1, σ = 10 pb, signs (+,+,+,−). REFERENCES §1.4 asks to document:
    # "sum" (default): Σw = σ → w = ±σ/(n+ − n−) = ±5; "count": w = ±σ/N = ±2.5
    pid, x = [1, 1, 1, 1], [1.0, 1.0, 1.0, -1.0]
    tot = FileTotals.from_arrays(pid, x)
    s = normalisation_factors(_run(-3, [(1, 10.0, 0.0)]), tot)
    assert _weights(s, pid, x).tolist() == pytest.approx([5, 5, 5, -5])
    assert s.sigma_pb == pytest.approx(10.0)
    c = normalisation_factors(_run(-3, [(1, 10.0, 0.0)]), tot, mode3_norm="count")
    assert _weights(c, pid, x).tolist() == pytest.approx([2.5, 2.5, 2.5, -2.5])
    assert c.sigma_pb == pytest.approx(5.0)


def test_declared_totxsec_mismatch_is_recorded_with_the_matching_convention() -> None:
    # a file that bends the rule (REFERENCES §1.4): IDWTUP=-4 but Σ XWGTUP = σ
    pid = [1] * 4
    x = [50.0, 30.0, -10.0, 30.0]  # Σ = 100 = totxsec, mean = 25
    run = _run(-4, [(1, 100.0, 1.0)], tot=100.0)
    res = normalisation_factors(run, FileTotals.from_arrays(pid, x))
    assert res.sigma_pb == pytest.approx(25.0)
    assert any("disagrees" in w and "'sum'" in w for w in res.warnings)
    fixed = normalisation_factors(run, FileTotals.from_arrays(pid, x), convention="sum")
    assert fixed.sigma_pb == pytest.approx(100.0)
    assert not fixed.warnings
    assert any("agrees" in line for line in fixed.log)


def test_user_override() -> None:
    pid, x = [1, 1], [1.0, 3.0]
    res = normalisation_factors(_run(1, [(1, 0.0, 0.0)]), FileTotals.from_arrays(pid, x),
                                override_pb=8.0)
    assert _weights(res, pid, x).tolist() == pytest.approx([2.0, 6.0])
    assert res.sigma_pb == 8.0
    assert any("overridden" in line for line in res.log)


def test_bad_idwtup_is_an_error() -> None:
    with pytest.raises(ValueError, match="IDWTUP = 7"):
        normalisation_factors(_run(7, [(1, 1.0, 0.0)]), FileTotals.from_arrays([1], [1.0]))


def test_totals_merge_over_chunks() -> None:
    pid = np.array([1, 2, 1, 2, 2])
    x = np.array([1.0, -2.0, 3.0, 4.0, 5.0])
    whole = FileTotals.from_arrays(pid, x)
    parts = FileTotals.from_arrays(pid[:2], x[:2]) + FileTotals.from_arrays(pid[2:], x[2:])
    assert parts == whole
    assert whole.n_events == {1: 2, 2: 3}
    assert whole.n_negative == 1
    assert whole.sum_w2[2] == 4.0 + 16.0 + 25.0


def test_identical_files_combine_to_the_single_file_result() -> None:
    pid, x = [1, 2, 1], [1.0, 2.0, 3.0]
    for idw in (1, -4, 2, 3):
        run = _run(idw, [(1, 10.0, 1.0), (2, 5.0, 0.5)])
        t = FileTotals.from_arrays(pid, x)
        single = normalisation_factors(run, t)
        both = combine_files([(run, t), (run, t)])
        # each copy of an event gets half the single-file weight; σ unchanged
        assert both.sigma_pb == pytest.approx(single.sigma_pb, rel=1e-12)
        for ff in both.file_factors or []:
            for i, f in ff.items():
                assert f == pytest.approx(single.factors[i] / 2, rel=1e-12)


def test_split_unweighted_sample_equals_single_equivalent_file() -> None:
    # file A: σ = 10 pb, 4 events; file B: σ = 12 pb, 2 events (XWGTUP conventions differ).
    # combined by event counts: σ = (4·10 + 2·12)/6; one equivalent file declares that σ.
    a = (_run(3, [(1, 10.0, 0.2)]), FileTotals.from_arrays([1] * 4, [1.0] * 4))
    b = (_run(3, [(1, 12.0, 0.3)]), FileTotals.from_arrays([1] * 2, [6.0] * 2))
    comb = combine_files([a, b])
    sig = (4 * 10 + 2 * 12) / 6
    single = normalisation_factors(_run(3, [(1, sig, 0.0)]),
                                   FileTotals.from_arrays([1] * 6, [1.0] * 6))
    assert comb.sigma_pb == pytest.approx(sig) == pytest.approx(single.sigma_pb)
    wa = comb.event_weights([1] * 4, [1.0] * 4, file_index=0)
    wb = comb.event_weights([1] * 2, [6.0] * 2, file_index=1)
    assert np.allclose(np.concatenate([wa, wb]), single.event_weights([1] * 6, [1.0] * 6))


def test_split_weighted_sample_is_the_pooled_mean() -> None:
    # IDWTUP=4: σ = mean over all events of both files (the accord's estimator for one run)
    xa, xb = [1.0, 2.0, 3.0], [4.0, 5.0]
    run = _run(4, [(1, 3.0, 0.0)])
    comb = combine_files([(run, FileTotals.from_arrays([1] * 3, xa)),
                          (run, FileTotals.from_arrays([1] * 2, xb))])
    assert comb.sigma_pb == pytest.approx(3.0)  # hand: 15/5
    assert comb.file_factors == [{1: pytest.approx(0.2)}, {1: pytest.approx(0.2)}]


def test_inverse_variance_combination() -> None:
    # two files with σ = 10 ± 1 and 13 ± 2 → (10/1 + 13/4)/(1 + 1/4) = 10.6 (textbook weighted mean)
    a = (_run(3, [(1, 10.0, 1.0)]), FileTotals.from_arrays([1] * 4, [1.0] * 4))
    b = (_run(3, [(1, 13.0, 2.0)]), FileTotals.from_arrays([1] * 4, [1.0] * 4))
    comb = combine_files([a, b], weighting="inverse_variance")
    assert comb.sigma_pb == pytest.approx(10.6)
    assert comb.sigma_err_pb == pytest.approx(1 / math.sqrt(1.25))


def test_no_declared_cross_section_needs_a_user_value() -> None:
    # IDWTUP = 3 takes σ from Σ XSECUP (hep-ph/0109068); XSECUP = 0 declares nothing
    run = _run(3, [(1, 0.0, 0.0)])
    tot = FileTotals.from_arrays([1, 1, 1, 1], [1.0, 1.0, 1.0, 1.0])
    with pytest.raises(ValueError, match="cross_section_pb"):
        combine_files([(run, tot)])
    res = combine_files([(run, tot)], override_pb=8.0)
    assert res.sigma_pb == pytest.approx(8.0)
    assert _weights(res, [1, 1], [1.0, 1.0]).tolist() == pytest.approx([2.0, 2.0])  # hand: 8/4
    assert res.declared_pb is None
    assert not any("agrees" in line for line in res.log)


def test_combined_record_lists_every_file() -> None:
    a = (_run(-4, [(1, 2.0, 0.2)]), FileTotals.from_arrays([1, 1], [1.0, 3.0]))
    b = (_run(-4, [(1, 3.0, 0.3)]), FileTotals.from_arrays([1, 1, 1], [3.0, -1.0, 7.0]))
    res = combine_files([a, b])
    files = res.to_dict()["files"]
    assert [f["n_events"] for f in files] == [2, 3]
    assert [f["n_negative"] for f in files] == [0, 1]
    assert [f["sigma_pb"] for f in files] == pytest.approx([2.0, 3.0])  # mean XWGTUP per file
    # events weighting α = (2/5, 3/5): σ = 0.4·2 + 0.6·3 = 2.6 = pooled mean (1+3+3-1+7)/5
    assert res.sigma_pb == pytest.approx(2.6)
    assert res.declared_err_pb == pytest.approx(math.hypot(0.4 * 0.2, 0.6 * 0.3))
