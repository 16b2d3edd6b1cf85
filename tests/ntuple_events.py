"""Helpers (no tests): small seeded ROOT ntuples with jets and muons, written with uproot, and
configs that read them (for the weight, systematics and event-table tests)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import awkward as ak
import numpy as np

from test_ntuple_helpers import write_tree

TYPES = {"Jet": "var * {pt: float64, eta: float64, phi: float64, mass: float64}",
         "Mu": "var * {pt: float64, eta: float64, phi: float64}", "w": "float64",
         "nPV": "int32"}


def events(n: int, seed: int = 11) -> dict[str, Any]:
    rng = np.random.default_rng(seed)
    nj = rng.integers(0, 7, n)
    mj = int(nj.sum())
    jets = ak.unflatten(ak.zip({"pt": rng.uniform(15, 250, mj), "eta": rng.uniform(-3, 3, mj),
                                "phi": rng.uniform(-np.pi, np.pi, mj),
                                "mass": rng.uniform(2, 25, mj)}), nj)
    nm = rng.integers(0, 3, n)
    mm = int(nm.sum())
    mu = ak.unflatten(ak.zip({"pt": rng.uniform(5, 120, mm), "eta": rng.uniform(-2.4, 2.4, mm),
                              "phi": rng.uniform(-np.pi, np.pi, mm)}), nm)
    return {"Jet": jets, "Mu": mu, "w": rng.uniform(0.5, 1.5, n),
            "nPV": rng.integers(1, 60, n).astype(np.int32)}


def write(path: Path, cols: dict[str, Any]) -> Path:
    return write_tree(path, TYPES, [cols])


MAPPING = {"weight": "w",
           "collections": {
               "jets": {"pt": "Jet_pt", "eta": "Jet_eta", "phi": "Jet_phi", "mass": "Jet_mass"},
               "muons": {"pt": "Mu_pt", "eta": "Mu_eta", "phi": "Mu_phi",
                         "mass": 0.1056583755}},  # PDG 2024: m_μ = 105.6583755 MeV
           "scalars": {"n_vertices": "nPV"}}


def config(files: list[Path], **extra: Any) -> dict[str, Any]:
    cfg: dict[str, Any] = {
        "samples": {"s": {"format": "root", "files": [str(f) for f in files],
                          "input": MAPPING, "weights_give": "sum"}},
        "objects": {"jets": {"from": "jets", "min_pt": 30.0, "max_abs_eta": 2.5},
                    "mu": {"from": "muons", "min_pt": 10.0}},
        "step": [{"name": "two jets", "require": "count(jets) >= 2"}],
        "histograms": {
            "ht": {"x": {"value": "ht(jets)", "bins": 20, "range": [0.0, 1000.0]},
                   "normalise": "raw"},
            "jet_pt": {"x": {"value": "jets.pt", "bins": 25, "range": [0.0, 250.0]},
                       "normalise": "raw"},
            "n_jets": {"x": {"value": "count(jets)", "bins": 7, "range": [-0.5, 6.5]},
                       "normalise": "raw"},
        },
    }
    for k, v in extra.items():
        if isinstance(v, dict) and isinstance(cfg.get(k), dict):
            cfg[k] = {**cfg[k], **v}
        else:
            cfg[k] = v
    return cfg
