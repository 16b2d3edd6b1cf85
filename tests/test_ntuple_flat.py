"""Flat per-object ntuple branches (``mu1_pt``, ``mu2_pt``, ...) grouped into a collection by
the declared slot pattern: the reader against the arrays written, and a whole run against the
same events stored as jagged branches (the layout evtkin already reads)."""

from __future__ import annotations

from pathlib import Path

import awkward as ak
import numpy as np
import pytest

from evtkin.errors import ConfigError, NtupleError
from evtkin.io.ntuple import read_ntuple
from evtkin.io.ntuple_mapping import NtupleMapping
from evtkin.run.pipeline import run
from test_ntuple_helpers import write_tree

N = 400


def _events(seed: int = 3) -> dict[str, np.ndarray]:
    """Up to three muons per event; an empty slot holds pt = 0 (or -999 / NaN)."""
    rng = np.random.default_rng(seed)
    n_mu = rng.integers(0, 4, N)
    cols: dict[str, np.ndarray] = {}
    for k in (1, 2, 3):
        there = n_mu >= k
        pt = np.sort(rng.uniform(5, 120, (N, 3)), axis=1)[:, ::-1][:, k - 1]
        cols[f"mu{k}_pt"] = np.where(there, pt, [0.0, -999.0, np.nan][k - 1]).astype(np.float32)
        cols[f"mu{k}_eta"] = rng.uniform(-2.4, 2.4, N).astype(np.float32)
        cols[f"mu{k}_phi"] = rng.uniform(-np.pi, np.pi, N).astype(np.float32)
        cols[f"mu{k}_q"] = rng.choice(np.array([-1, 1], np.int32), N)
    cols["w"] = rng.uniform(0.5, 1.5, N)
    return cols


def _flat_file(path: Path) -> Path:
    cols = _events()
    return write_tree(path, {k: v.dtype for k, v in cols.items()}, [cols])


def _jagged_file(path: Path) -> Path:
    """The same muons as jagged branches (filled slots only, in slot order)."""
    cols = _events()
    pt = np.stack([cols[f"mu{k}_pt"] for k in (1, 2, 3)], axis=1)
    keep = np.isfinite(pt) & (pt > 0)
    counts = keep.sum(axis=1)

    def jag(name: str) -> ak.Array:
        x = np.stack([cols[f"mu{k}_{name}"] for k in (1, 2, 3)], axis=1)
        return ak.unflatten(x[keep], counts)

    muons = ak.zip({"pt": jag("pt"), "eta": jag("eta"), "phi": jag("phi"), "q": jag("q")})
    return write_tree(path, {"Mu": "var * {pt: float32, eta: float32, phi: float32, q: int32}",
                             "w": "float64"}, [{"Mu": muons, "w": cols["w"]}])


FLAT = {"weight": "w", "collections": {"muons": {
    "slots": 3, "pt": "mu{i}_pt", "eta": "mu{i}_eta", "phi": "mu{i}_phi",
    "mass": 0.1056583755,  # PDG 2024: m_μ = 105.6583755 MeV
    "fields": {"charge": "mu{i}_q"}}}}
JAGGED = {"weight": "w", "collections": {"muons": {
    "pt": "Mu_pt", "eta": "Mu_eta", "phi": "Mu_phi", "mass": 0.1056583755,
    "fields": {"charge": "Mu_q"}}}}


def test_flat_slots_become_a_collection_of_the_filled_slots(tmp_path: Path) -> None:
    path = _flat_file(tmp_path / "flat.root")
    cols = _events()
    got = ak.concatenate(list(read_ntuple(path, FLAT, step_size=150)))
    pt = np.stack([cols[f"mu{k}_pt"] for k in (1, 2, 3)], axis=1).astype(np.float64)
    filled = np.isfinite(pt) & (pt > 0)
    assert filled.sum() > 0
    assert (~filled).sum() > 0
    assert ak.to_list(ak.num(got.muons)) == filled.sum(axis=1).tolist()
    assert np.array_equal(ak.to_numpy(ak.flatten(got.muons.pt)), pt[filled])
    q = np.stack([cols[f"mu{k}_q"] for k in (1, 2, 3)], axis=1)
    assert np.array_equal(ak.to_numpy(ak.flatten(got.muons.charge)), q[filled])
    assert ak.parameters(got.muons.layout.content)["__record__"] == "Momentum4D"
    # only the slot branches of what is asked for are read
    r = read_ntuple(path, FLAT, fields=["muons.pt"])
    assert set(r.branches) == {"w", "mu1_pt", "mu2_pt", "mu3_pt", "mu1_eta", "mu2_eta",
                               "mu3_eta", "mu1_phi", "mu2_phi", "mu3_phi"}
    r.close()


def test_a_run_on_flat_branches_equals_one_on_jagged_branches(tmp_path: Path) -> None:
    flat = _flat_file(tmp_path / "flat.root")
    jag = _jagged_file(tmp_path / "jagged.root")

    def cfg(path: Path, mapping: dict) -> dict:  # type: ignore[type-arg]
        return {"samples": {"m": {"format": "root", "files": [str(path)], "input": mapping,
                                  "weights_give": "sum"}},
                "objects": {"mu": {"from": "muons", "min_pt": 10.0}},
                "step": [{"name": "two muons", "require": "count(mu) >= 2"}],
                "composites": {"z": {"build": "pair", "of": "mu", "opposite_charge": True}},
                "histograms": {
                    "pt2": {"x": {"value": "mu[1].pt", "bins": 12, "range": [0.0, 120.0]}},
                    "m": {"x": {"value": "z.mass", "bins": 10, "range": [0.0, 200.0]}}}}

    a = run(cfg(flat, FLAT))
    b = run(cfg(jag, JAGGED))
    for h in ("pt2", "m"):
        assert np.array_equal(a["m"][h].values(flow=True), b["m"][h].values(flow=True))
        assert np.array_equal(a["m"][h].variances(flow=True), b["m"][h].variances(flow=True))
    assert a.samples["m"].cutflow == b.samples["m"].cutflow
    assert a.samples["m"].cutflow[1]["n_raw"] > 0


@pytest.mark.parametrize(("change", "message"), [
    ({"pt": "mu1_pt"}, r"collections\.muons\.pt: 'mu1_pt' has no \{i\}"),
    ({"slots": 0}, r"collections\.muons\.slots: expected a number of slots >= 1"),
    ({"slots": [1, 1]}, "listed twice"),
    ({"slots": None}, r"collections\.muons\.pt: 'mu\{i\}_pt' holds \{i\} but the collection "
                      "declares no slots"),
])
def test_flat_mapping_errors_name_the_key(change, message) -> None:  # type: ignore[no-untyped-def]
    table = {k: dict(v) for k, v in FLAT["collections"].items()}  # type: ignore[attr-defined]
    for k, v in change.items():
        if v is None:
            table["muons"].pop(k)
        else:
            table["muons"][k] = v
    with pytest.raises(ConfigError, match=message):
        NtupleMapping.from_dict({"collections": table})


def test_a_missing_slot_branch_names_the_mapping_key(tmp_path: Path) -> None:
    path = _flat_file(tmp_path / "flat.root")
    mapping = {"collections": {"muons": {**FLAT["collections"]["muons"], "slots": 4}}}  # type: ignore[index]
    with pytest.raises(NtupleError, match=r"no branch 'mu4_pt' \(mapped by input\.collections"
                                          r"\.muons\.pt\)"):
        next(iter(read_ntuple(path, mapping)))
