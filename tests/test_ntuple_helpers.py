"""Helpers (no tests here) for the ntuple reader tests: small ROOT ntuples written with uproot
``mktree``/``extend`` (never ``file[key] = data``, which writes an RNTuple in uproot >= 5.7)."""

from __future__ import annotations

import itertools
from pathlib import Path
from typing import Any

import awkward as ak
import numpy as np


def write_tree(path: Path, types: dict[str, Any], batches: list[dict[str, Any]],
               tree: str = "events", **mktree: Any) -> Path:
    """Write one TTree with explicit branch types and one ``extend`` per batch."""
    import uproot

    with uproot.recreate(path) as f:
        t = f.mktree(tree, types, **mktree)
        for batch in batches:
            t.extend(batch)
    return path


def detector_like(n: int, seed: int, first_event: int = 0) -> dict[str, Any]:
    """Columns with the layout of the toy detector ntuple (Jet/Electron records, MET, weight,
    event number) plus three variation weights in one fixed-size branch."""
    rng = np.random.default_rng(seed)
    nj = rng.integers(0, 6, n)
    mj = int(nj.sum())
    jets = ak.unflatten(ak.zip({
        "pt": rng.uniform(25, 300, mj).astype(np.float32),
        "eta": rng.uniform(-2.5, 2.5, mj).astype(np.float32),
        "phi": rng.uniform(-np.pi, np.pi, mj).astype(np.float32),
        "mass": rng.uniform(2, 30, mj).astype(np.float32),
        "btag": rng.random(mj) < 0.3,
    }), nj)  # fmt: skip
    ne = rng.integers(0, 3, n)
    me = int(ne.sum())
    ele = ak.unflatten(ak.zip({
        "pt": rng.uniform(10, 150, me).astype(np.float32),
        "eta": rng.uniform(-2.4, 2.4, me).astype(np.float32),
        "phi": rng.uniform(-np.pi, np.pi, me).astype(np.float32),
        "charge": rng.choice(np.array([-1, 1], dtype=np.int32), me),
    }), ne)  # fmt: skip
    return {
        "Jet": jets,
        "Electron": ele,
        "MET_pt": rng.uniform(0, 200, n).astype(np.float32),
        "MET_phi": rng.uniform(-np.pi, np.pi, n).astype(np.float32),
        "weight": rng.normal(1.0, 0.2, n),
        "event": np.arange(first_event, first_event + n, dtype=np.int64),
        "varw": rng.normal(1.0, 0.1, (n, 3)),
        "nPV": rng.integers(1, 60, n).astype(np.int32),
    }


DETECTOR_TYPES: dict[str, Any] = {
    "Jet": "var * {pt: float32, eta: float32, phi: float32, mass: float32, btag: bool}",
    "Electron": "var * {pt: float32, eta: float32, phi: float32, charge: int32}",
    "MET_pt": np.float32,
    "MET_phi": np.float32,
    "weight": np.float64,
    "event": np.int64,
    "varw": "3 * float64",
    "nPV": np.int32,
}

DETECTOR_MAPPING: dict[str, Any] = {
    "tree": "events",
    "weight": "weight",
    "variation_weights": "varw",
    "event_number": "event",
    "collections": {
        "jets": {"pt": "Jet_pt", "eta": "Jet_eta", "phi": "Jet_phi", "mass": "Jet_mass",
                 "fields": {"btag": "Jet_btag"}},
        "electrons": {"pt": "Electron_pt", "eta": "Electron_eta", "phi": "Electron_phi",
                      "mass": 0.000511, "fields": {"charge": "Electron_charge", "pdgid": 11}},
    },
    "vectors": {"met": {"pt": "MET_pt", "phi": "MET_phi"}},
    "scalars": {"n_vertices": "nPV"},
}


def write_detector(path: Path, n: int, seed: int, first_event: int = 0,
                   batches: int = 1) -> Path:
    """A detector-like file of ``n`` events written in ``batches`` extend calls."""
    cols = detector_like(n, seed, first_event)
    edges = np.linspace(0, n, batches + 1).astype(int)
    parts = [{k: v[a:b] for k, v in cols.items()} for a, b in itertools.pairwise(edges)]
    return write_tree(path, DETECTOR_TYPES, parts)
