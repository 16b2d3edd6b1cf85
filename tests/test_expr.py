"""The safe expression language: parsing, errors with carets, column-wise evaluation vs numpy."""

from __future__ import annotations

import math

import awkward as ak
import numpy as np
import pytest

from evtkin.expr import ExpressionError, evaluate, parse

RNG = np.random.default_rng(7)


def _p4(px, py, pz, m, pdgid=None):
    """Records with px, py, pz, E (E from the mass) and optionally a pdgid."""
    e = np.sqrt(px**2 + py**2 + pz**2 + m**2)
    fields = {"px": px, "py": py, "pz": pz, "energy": e}
    if pdgid is not None:
        fields["pdgid"] = pdgid
    return fields


@pytest.fixture
def jets():
    counts = np.array([3, 0, 1, 2, 4])
    n = counts.sum()
    f = _p4(RNG.normal(0, 40, n), RNG.normal(0, 40, n), RNG.normal(0, 80, n), np.full(n, 5.0),
            np.array([1, 21, -2, 5, 21, 3, -1, 2, 21, 4]))
    flat = ak.zip(f, with_name="Momentum4D")
    return ak.unflatten(flat, counts), {k: np.asarray(v) for k, v in f.items()}, counts


def _np_lists(flat, counts):
    out, start = [], 0
    for c in counts:
        out.append(flat[start:start + c])
        start += c
    return out


def test_arithmetic_and_precedence_match_python():
    x = ak.Array([1.0, 2.0, 3.5])
    y = np.array([2.0, -1.0, 0.5])
    got = evaluate("1 + 2 * x ** 2 / 4 - -y", {"x": x, "y": ak.Array(y)})
    want = 1 + 2 * np.array([1.0, 2.0, 3.5]) ** 2 / 4 + y  # Python's own precedence
    np.testing.assert_allclose(ak.to_numpy(got), want, rtol=1e-15)
    assert evaluate("2 ** 3 ** 2", {}) == 2**3**2  # right-associative like Python
    assert evaluate("-2 ** 2", {}) == -(2**2)
    assert evaluate("(1 + 2) * 3", {}) == 9
    assert math.isclose(evaluate("2 * pi", {}), 2 * math.pi)
    assert evaluate("1.5e2 + .5", {}) == 150.5


def test_math_functions_vs_numpy():
    v = np.array([0.3, 1.7, 4.0])
    x = ak.Array(v)
    for fn, ref in [("abs", np.abs), ("sqrt", np.sqrt), ("log", np.log), ("exp", np.exp),
                    ("cos", np.cos), ("sin", np.sin)]:
        with np.errstate(invalid="ignore"):
            want = ref(v - 1)
        np.testing.assert_allclose(ak.to_numpy(evaluate(f"{fn}(x - 1)", {"x": x})), want,
                                   rtol=1e-15, equal_nan=True)
    np.testing.assert_array_equal(ak.to_numpy(evaluate("min(x, 1)", {"x": x})), np.minimum(v, 1))
    np.testing.assert_array_equal(ak.to_numpy(evaluate("max(x, 1, 2)", {"x": x})),
                                  np.maximum(np.maximum(v, 1), 2))


def test_comparisons_chains_and_logic():
    v = np.array([50.0, 70.0, 95.0, 130.0])
    x = ak.Array(v)
    got = ak.to_numpy(evaluate("60 < x < 120", {"x": x}))
    np.testing.assert_array_equal(got, (v > 60) & (v < 120))
    got = ak.to_numpy(evaluate("x <= 50 or x >= 130 and not x == 95", {"x": x}))
    np.testing.assert_array_equal(got, (v <= 50) | ((v >= 130) & ~(v == 95)))
    got = ak.to_numpy(evaluate("not (x != 70)", {"x": x}))
    np.testing.assert_array_equal(got, v == 70)


def test_collections_index_attribute_reductions(jets):
    arr, f, counts = jets
    pt = np.hypot(f["px"], f["py"])
    lists = _np_lists(pt, counts)
    def expect(k, minimum):
        return [pytest.approx(lst[k]) if len(lst) >= minimum else None for lst in lists]

    assert evaluate("jets[0].pt", {"jets": arr}).to_list() == expect(0, 1)
    assert evaluate("jets[-1].pt", {"jets": arr}).to_list() == expect(-1, 1)
    assert evaluate("jets[2].pt", {"jets": arr}).to_list() == expect(2, 3)
    assert evaluate("count(jets)", {"jets": arr}).to_list() == list(counts)
    np.testing.assert_allclose(
        ak.to_numpy(evaluate("sum(jets.pt)", {"jets": arr})), [lst.sum() for lst in lists])
    np.testing.assert_allclose(
        ak.to_numpy(evaluate("ht(jets)", {"jets": arr})), [lst.sum() for lst in lists])
    mx = evaluate("max(jets.pt)", {"jets": arr}).to_list()
    assert mx == [pytest.approx(lst.max()) if len(lst) else None for lst in lists]
    # per-object values keep the jagged structure
    got = evaluate("jets.pt * 2", {"jets": arr}).to_list()
    assert got == [pytest.approx(list(lst * 2)) for lst in lists]


def test_four_vector_sums_and_pair_functions_vs_numpy(jets):
    arr, f, counts = jets
    off = np.concatenate([[0], np.cumsum(counts)])
    ok = counts >= 2
    i0, i1 = off[:-1][ok], off[:-1][ok] + 1
    e, px, py, pz = f["energy"], f["px"], f["py"], f["pz"]
    m2 = (e[i0] + e[i1]) ** 2 - (px[i0] + px[i1]) ** 2 - (py[i0] + py[i1]) ** 2 \
        - (pz[i0] + pz[i1]) ** 2
    got = np.array(evaluate("mass(jets[0] + jets[1])", {"jets": arr})[ok].to_list())
    np.testing.assert_allclose(got, np.sqrt(m2), rtol=1e-12)
    # ΔR with pseudorapidity, Δφ wrapped (textbook definitions)
    eta = np.arcsinh(pz / np.hypot(px, py))
    phi = np.arctan2(py, px)
    dphi = (phi[i0] - phi[i1] + np.pi) % (2 * np.pi) - np.pi
    want = np.sqrt((eta[i0] - eta[i1]) ** 2 + dphi**2)
    got = np.array(evaluate("deltaR(jets[0], jets[1])", {"jets": arr})[ok].to_list())
    np.testing.assert_allclose(got, want, rtol=1e-12)
    got = np.array(evaluate("abs(deltaPhi(jets[0], jets[1]))", {"jets": arr})[ok].to_list())
    np.testing.assert_allclose(got, np.abs(dphi), rtol=1e-12)
    # difference of objects: (a + b) - b == a
    got = np.array(evaluate("((jets[0] + jets[1]) - jets[1]).px", {"jets": arr})[ok].to_list())
    np.testing.assert_allclose(got, px[i0], rtol=1e-12, atol=1e-12)


def test_cos_theta_star_of_back_to_back_decay_at_rest():
    # a parent at rest decaying along +z: the daughter's helicity angle relative to a
    # boost along +z is +1 for the forward daughter (textbook two-body kinematics)
    d = ak.zip({"px": [0.0], "py": [0.0], "pz": [30.0], "energy": [50.0]}, with_name="Momentum4D")
    parent = ak.zip({"px": [0.0], "py": [0.0], "pz": [60.0], "energy": [math.hypot(60, 100)]},
                    with_name="Momentum4D")
    got = evaluate("cos_theta_star(d, p)", {"d": d, "p": parent}).to_list()[0]
    assert got == pytest.approx(1.0, abs=1e-9)  # a daughter along the flight direction is forward


def test_charge_from_pdgid(jets):
    arr, _, _ = jets
    lep = ak.zip({"px": [[1.0, 2.0]], "py": [[0.0, 1.0]], "pz": [[0.0, 0.0]],
                  "energy": [[3.0, 3.0]], "pdgid": [[11, -13]]})
    # PDG numbering scheme: 11 = e⁻ (charge -1), -13 = μ⁺ (+1), -2 = ū (-2/3)
    assert evaluate("leptons.charge", {"leptons": lep}).to_list() == [[-1.0, 1.0]]
    # the first object of event 2 is a b quark (pdgid 5, charge -1/3)
    assert evaluate("jets[0].charge", {"jets": arr[2:3]}).to_list() == [pytest.approx(-1 / 3)]


def test_names_are_collected_with_columns():
    e = parse("mass(z) > 60 and count(jets) >= 2")
    assert e.names == {"z": 5, "jets": 23}


@pytest.mark.parametrize(
    ("text", "column", "fragment"),
    [
        ("x +", 3, "expected a number, a name or '('"),
        ("x && y", 2, "write 'and'"),
        ("x = 3", 2, "write '=='"),
        ("foo(x)", 0, "unknown function 'foo'"),
        ("maxx(x)", 0, "did you mean 'max'"),
        ("(x + 1", 6, "expected ')'"),
        ("x 3", 2, "unexpected '3'"),
        ("jets[x]", 5, "whole-number index"),
        ("deltaR(a)", 0, "takes 2 argument(s), 1 given"),
        ("", 0, "empty expression"),
        ("1.2.3", 0, "bad number"),
        ("2x", 1, "cannot run into a name"),
        ("a.", 2, "attribute name"),
        ("x $ 2", 2, "unexpected character '$'"),
    ],
)
def test_parse_errors_point_at_the_token(text, column, fragment):
    with pytest.raises(ExpressionError) as info:
        parse(text)
    err = info.value
    assert err.column == column
    assert fragment in str(err)
    lines = str(err).splitlines()
    assert lines[1].strip() == text.strip()
    # the caret sits under the offending column (both lines share a 4-space indent)
    assert lines[2].index("^") - 4 == column


@pytest.mark.parametrize(
    ("text", "column", "fragment"),
    [
        ("jets[0].ptt", 8, "did you mean 'pt'"),
        ("y + 1", 0, "unknown name 'y'"),
        ("jets * 2", 5, "between objects and numbers"),
        ("count(x)", 0, "count() needs a collection"),
        ("sqrt(jets)", 0, "needs a number"),
        ("jets and x", 0, "cannot be used as true/false"),
        ("x[0]", 1, "only a collection"),
        ("mass(x)", 0, "needs objects"),
        ("-jets", 0, "cannot negate"),
    ],
)
def test_evaluation_errors_point_at_the_token(jets, text, column, fragment):
    arr, _, _ = jets
    with pytest.raises(ExpressionError) as info:
        evaluate(text, {"jets": arr, "x": ak.Array(np.ones(len(arr)))})
    assert info.value.column == column
    assert fragment in str(info.value)


def test_no_python_evaluation_is_possible():
    # things Python would evaluate are rejected by the tokenizer/parser
    for text in ["__import__('os')", "x.__class__", "[1, 2]", "lambda: 1", "'a'"]:
        with pytest.raises(ExpressionError):
            evaluate(text, {"x": ak.Array([1.0])})
