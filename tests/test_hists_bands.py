"""Uncertainty bands vs hand computations on small invented tables.

Formulas: PDF4LHC15 recommendations (Butterworth et al., arXiv:1510.03865) for replicas and Hessian
sets; 7-point scale envelope (common practice, REFERENCES §2.11)."""

from __future__ import annotations

import numpy as np
import pytest

from evtkin.hists.bands import (
    envelope,
    hessian_asymmetric,
    hessian_symmetric,
    parse_scale_factors,
    quadrature,
    replicas_68,
    replicas_std,
    scale_envelope,
)

X0 = np.array([10.0, 20.0])


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("muR=2.0 muF=0.5", (2.0, 0.5)),
        ("MUR=0.5_MUF=1.0", (0.5, 1.0)),
        ("MUR=0.5_MUF=1.0_PDF=12345", (0.5, 1.0)),
        (' mur="2" muf="1" ', (2.0, 1.0)),
        ("mu_r = 1e0, mu_f = 2", (1.0, 2.0)),
        ("member 3", None),
        ("muR=2", None),
    ],
)
def test_parse_scale_factors(text: str, expected: tuple[float, float] | None) -> None:
    assert parse_scale_factors(text) == expected


def test_seven_point_envelope_drops_anticorrelated() -> None:
    names = ["muR=1 muF=2", "muR=1 muF=0.5", "muR=2 muF=1", "muR=0.5 muF=1",
             "muR=2 muF=2", "muR=0.5 muF=0.5", "muR=0.5 muF=2", "muR=2 muF=0.5"]
    members = np.array([[11, 21], [9.5, 19], [10.5, 18], [9, 22],
                        [12, 20], [8.5, 20.5], [30, 5], [1, 40]], dtype=float)
    factors = [parse_scale_factors(n) for n in names]
    b = scale_envelope(X0, members, factors, names)
    # hand: without (0.5, 2) and (2, 0.5): bin 1 ∈ [8.5, 12], bin 2 ∈ [18, 22]
    assert b.down.tolist() == [8.5, 18.0]
    assert b.up.tolist() == [12.0, 22.0]
    assert b.method == "envelope7"
    assert "muR=0.5 muF=2" not in b.members
    full = scale_envelope(X0, members, factors, names, drop_anticorrelated=False)
    assert full.down.tolist() == [1.0, 5.0]
    assert full.up.tolist() == [30.0, 40.0]


def test_envelope_contains_nominal() -> None:
    b = envelope(X0, np.array([[11.0, 21.0], [12.0, 22.0]]))
    assert b.down.tolist() == [10.0, 20.0]
    assert b.up.tolist() == [12.0, 22.0]


def test_replica_standard_deviation() -> None:
    # PDF4LHC15 (arXiv:1510.03865): δ = sqrt(1/(N−1) Σ (X_k − <X>)²); replicas 9, 10, 11, 14
    reps = np.array([[9.0, 20.0], [10.0, 20.0], [11.0, 20.0], [14.0, 20.0]])
    b = replicas_std(X0, reps)
    mean = 11.0
    hand = np.sqrt(((9 - mean) ** 2 + (10 - mean) ** 2 + 0 + (14 - mean) ** 2) / 3)
    assert b.up[0] == pytest.approx(10.0 + hand)
    assert b.down[0] == pytest.approx(10.0 - hand)
    assert b.up[1] == b.down[1] == 20.0


def test_replica_68_interval() -> None:
    # 68 % interval: 16th/84th percentiles of the replicas (PDF4LHC15); reference numpy
    reps = np.stack([np.arange(1.0, 101.0), np.full(100, 20.0)], axis=1)
    b = replicas_68(np.array([50.0, 20.0]), reps)
    lo, hi = np.percentile(np.arange(1.0, 101.0), [15.865525393145708, 84.13447460685429])
    assert b.down[0] == pytest.approx(lo)
    assert b.up[0] == pytest.approx(hi)
    assert 16.0 < b.down[0] < 17.0
    assert 84.0 < b.up[0] < 85.0


def test_hessian_symmetric() -> None:
    # PDF4LHC15 eq. for symmetric Hessian sets: δ = sqrt(Σ_k (X_k − X_0)²) → sqrt(1 + 4 + 4) = 3
    mem = np.array([[11.0, 20.0], [8.0, 20.0], [12.0, 23.0]])
    b = hessian_symmetric(X0, mem)
    assert b.up.tolist() == pytest.approx([13.0, 23.0])
    assert b.down.tolist() == pytest.approx([7.0, 17.0])


def test_hessian_asymmetric_pairs() -> None:
    # asymmetric master formula (arXiv:1510.03865): pairs (+,−) = (12, 9) and (10.5, 10.5)
    mem = np.array([[12.0, 20.0], [9.0, 21.0], [10.5, 19.0], [10.5, 18.0]])
    b = hessian_asymmetric(X0, mem)
    # bin 1: δ+ = sqrt(2² + 0.5²), δ− = sqrt(1² + 0); bin 2: δ+ = sqrt(1²+0), δ− = sqrt(0+2²)
    assert b.up.tolist() == pytest.approx([10 + np.sqrt(4.25), 21.0])
    assert b.down.tolist() == pytest.approx([9.0, 18.0])
    with pytest.raises(ValueError, match="pairs"):
        hessian_asymmetric(X0, mem[:3])


def test_quadrature_combination() -> None:
    scale = envelope(X0, np.array([[13.0, 16.0]]))  # +3 / −4
    pdf = hessian_symmetric(X0, np.array([[14.0, 23.0]]))  # ±4, ±3
    tot = quadrature(X0, [scale, pdf])
    assert tot.up.tolist() == pytest.approx([10 + 5.0, 20 + 3.0])  # sqrt(3²+4²), sqrt(0+3²)
    assert tot.down.tolist() == pytest.approx([10 - 4.0, 20 - 5.0])
