"""Object-level variations (energy scale, smearing, efficiency loss) and binned lookup tables."""

from __future__ import annotations

from pathlib import Path

import awkward as ak
import numpy as np
import pytest
from scipy import stats

import evtkin.events  # noqa: F401  (vector behaviours)
from evtkin.errors import ConfigError
from evtkin.select.lookup import read_table
from evtkin.select.variations import counter_normal, drop_objects, scale_energy, smear


def _jets(n: int = 3000, seed: int = 1) -> ak.Array:
    rng = np.random.default_rng(seed)
    counts = rng.integers(0, 5, n)
    m = int(counts.sum())
    rec = ak.zip({"pt": rng.uniform(20, 200, m), "eta": rng.uniform(-2.5, 2.5, m),
                  "phi": rng.uniform(-np.pi, np.pi, m), "mass": rng.uniform(2, 20, m),
                  "btag": rng.random(m) < 0.3}, with_name="Momentum4D")
    return ak.unflatten(rec, counts)


def test_energy_scale_multiplies_the_four_momentum() -> None:
    jets = _jets()
    up = scale_energy(jets, 0.05)
    flat, fup = ak.flatten(jets), ak.flatten(up)
    # a Lorentz vector times a number: pT, E, m scale, η and φ do not (special relativity)
    assert np.allclose(ak.to_numpy(fup.pt), 1.05 * ak.to_numpy(flat.pt), rtol=1e-15)
    assert np.allclose(ak.to_numpy(fup.energy), 1.05 * ak.to_numpy(flat.energy), rtol=1e-12)
    assert np.allclose(ak.to_numpy(fup.mass), 1.05 * ak.to_numpy(flat.mass), rtol=1e-12)
    assert np.array_equal(ak.to_numpy(fup.eta), ak.to_numpy(flat.eta))
    assert ak.to_list(fup.btag) == ak.to_list(flat.btag)
    assert scale_energy(jets, 0.0) is jets
    cart = ak.zip({"px": flat.px, "py": flat.py, "pz": flat.pz, "energy": flat.energy},
                  with_name="Momentum4D")
    c_up = scale_energy(ak.unflatten(cart, ak.num(jets)), 0.05)
    assert np.allclose(ak.to_numpy(ak.flatten(c_up).pt), ak.to_numpy(fup.pt), rtol=1e-12)


def test_smearing_is_gaussian_and_independent_of_how_the_events_are_split() -> None:
    jets = _jets(20000)
    s = smear(jets, 0.1, seed=7)
    ratio = ak.to_numpy(ak.flatten(s.pt)) / ak.to_numpy(ak.flatten(jets.pt))
    assert abs(ratio.mean() - 1.0) < 0.003
    assert abs(ratio.std() - 0.1) < 0.003
    # same objects, any chunking: the same numbers
    parts = [smear(jets[a:b], 0.1, seed=7) for a, b in ((0, 777), (777, 5000), (5000, 20000))]
    assert ak.to_list(ak.concatenate(parts).pt) == ak.to_list(s.pt)
    assert ak.to_list(smear(jets, 0.1, seed=8).pt) != ak.to_list(s.pt)
    # the hashed normals pass a Kolmogorov–Smirnov test against N(0, 1) (scipy reference)
    g = counter_normal(jets, seed=3)
    assert stats.kstest(g, "norm").pvalue > 0.001


def test_dropping_objects_removes_the_declared_fraction() -> None:
    jets = _jets(20000)
    kept = drop_objects(jets, 0.2, seed=5)
    n0, n1 = int(ak.sum(ak.num(jets))), int(ak.sum(ak.num(kept)))
    # binomial: the kept fraction is 0.8 within 5 standard deviations (textbook)
    assert abs(n1 / n0 - 0.8) < 5 * np.sqrt(0.8 * 0.2 / n0)
    assert ak.to_list(drop_objects(jets[:100], 0.2, seed=5).pt) == ak.to_list(kept[:100].pt)
    assert int(ak.sum(ak.num(drop_objects(jets, 0.0, seed=5)))) == n0


TABLE = """
format = "evtkin-table"
axes = [{ name = "pt", edges = [20.0, 30.0, 50.0] },
        { name = "abs_eta", edges = [0.0, 1.2, 2.4] }]
values = [[0.9, 0.8], [0.95, 0.85]]
errors = [[0.01, 0.02], [0.03, 0.04]]
"""


def test_table_lookup_at_hand_chosen_points(tmp_path: Path) -> None:
    path = tmp_path / "sf.toml"
    path.write_text(TABLE)
    t = read_table(path, "sf")
    pt = np.array([20.0, 29.9, 30.0, 49.0, 10.0, 500.0, np.nan])
    eta = np.array([0.0, 1.2, 1.19, 2.3, 0.5, 3.0, 0.1])
    # lower edges inclusive, upper exclusive; outside: the nearest bin (the default)
    expect = [0.9, 0.8, 0.95, 0.85, 0.9, 0.85]
    got = t.lookup_flat(pt, eta)
    assert got[:6].tolist() == expect
    assert np.isnan(got[6])
    assert t.lookup_flat(pt[:1], eta[:1], errors=True).tolist() == [0.01]
    jets = ak.Array([[{"pt": 25.0, "eta": -2.0}, {"pt": 40.0, "eta": 0.3}], [],
                     [{"pt": 60.0, "eta": 1.3}]])
    assert ak.to_list(t(jets.pt, abs(jets.eta))) == [[0.8, 0.95], [], [0.85]]
    path.write_text(TABLE + "outside = 1.0\n")
    assert read_table(path).lookup_flat(np.array([10.0, 25.0]), np.array([0.5, 0.5])).tolist() \
        == [1.0, 0.9]


@pytest.mark.parametrize(("text", "message"), [
    (TABLE.replace("[[0.9, 0.8], [0.95, 0.85]]", "[[0.9, 0.8]]"),
     "values: shape 1 x 2 does not match the axes' bins 2 x 2"),
    (TABLE.replace("[20.0, 30.0, 50.0]", "[20.0, 50.0, 30.0]"), "must increase strictly"),
    (TABLE.replace('"evtkin-table"', '"other"'), "format: expected"),
    (TABLE + "colour = 1\n", "unknown key 'colour'"),
    (TABLE + "outside = \"wrap\"\n", "outside: expected"),
])
def test_bad_tables_name_the_file_and_key(tmp_path: Path, text: str, message: str) -> None:
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(ConfigError, match=str(path).replace(".", r"\.") + ".*" + message):
        read_table(path)


def test_lookup_and_prod_in_expressions(tmp_path: Path) -> None:
    from evtkin.expr import ExpressionError, evaluate, parse

    path = tmp_path / "sf.toml"
    path.write_text(TABLE)
    t = read_table(path, "sf")
    jets = ak.Array([[{"pt": 25.0, "eta": -2.0}, {"pt": 40.0, "eta": 0.3}], [],
                     [{"pt": 60.0, "eta": 1.3}]])
    names = {"sf": t, "jets": jets}
    got = evaluate("prod(lookup(sf, jets.pt, abs(jets.eta)))", names)
    assert np.allclose(ak.to_numpy(got), [0.8 * 0.95, 1.0, 0.85], rtol=1e-15)
    with pytest.raises(ExpressionError, match="table 'sf' has 2 axes"):
        evaluate("lookup(sf, jets.pt)", names)
    with pytest.raises(ExpressionError, match="name of a table first"):
        parse("lookup(1, jets.pt)")
