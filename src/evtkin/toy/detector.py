"""Toy detector response: parton-level top-pair events -> a detector-level ROOT ntuple.

**Toy model, not a detector simulation.** Each final-state object is smeared on its own; there
is no parton shower, no hadronisation, no jet clustering, no pile-up. Numbers are round,
typical-looking values (common practice), not a description of any real experiment.

* Jets: one jet per final-state quark (|pdg id| 1-5). Energy resolution
  ``sigma_E/E = 100%/sqrt(E/GeV) (+) 5%`` (stochastic and constant terms added in quadrature);
  the four-momentum is scaled by the smeared/true energy ratio (direction kept). Kept if
  pT > 25 GeV and |eta| < 2.5. b-tag flag: efficiency 70 % for b, 15 % for c, 1 % for light.
* Electrons: efficiency 90 %, ``sigma_E/E = 10%/sqrt(E/GeV) (+) 0.7%``; kept if pT > 10 GeV and
  |eta| < 2.47. Muons: efficiency 95 %, ``sigma_pT/pT = 1% (+) 0.01% x pT/GeV``; pT > 10 GeV,
  |eta| < 2.5. Taus are not reconstructed (their momentum is simply lost).
* Missing transverse momentum: vector sum of the neutrino pT plus a Gaussian smearing of each
  component with ``sigma = 0.5 sqrt(sum E_T / GeV)`` GeV, sum over visible final-state partons.

ROOT file layout (TTree ``events``, written with uproot ``mktree``/``extend``; jagged
collections share one counter each):

==================  =========================================================
branch              content
==================  =========================================================
``nJet``            int32, jets per event
``Jet_pt``          var * float32, GeV, sorted by decreasing pT
``Jet_eta``         var * float32
``Jet_phi``         var * float32
``Jet_mass``        var * float32, GeV
``Jet_btag``        var * bool, b-tag flag
``Jet_flavour``     var * int32, |pdg id| of the parton the jet came from (truth)
``nElectron``       int32; ``Electron_pt``, ``_eta``, ``_phi`` (float32), ``_charge`` (int32)
``nMuon``           int32; ``Muon_pt``, ``_eta``, ``_phi`` (float32), ``_charge`` (int32)
``MET_pt``          float32, GeV
``MET_phi``         float32
``weight``          float64, the event weight (XWGTUP of the parton-level event)
``event``           int64, event number (0-based, in file order)
==================  =========================================================

The file also holds a string ``README`` saying that it is toy data, and the tree title says so.
"""

from __future__ import annotations

from collections.abc import Iterable

import awkward as ak
import numpy as np

from evtkin.files import atomic_path
from evtkin.toy.constants import TOY_NOTICE

__all__ = ["simulate", "write_ntuple"]

TREE = "events"
JET_PT_MIN, JET_ETA_MAX = 25.0, 2.5
BTAG_EFF = {5: 0.70, 4: 0.15}  # other quark flavours: MISTAG
MISTAG = 0.01
ELE_EFF, ELE_ETA_MAX = 0.90, 2.47
MU_EFF, MU_ETA_MAX = 0.95, 2.5
LEP_PT_MIN = 10.0
MET_RES = 0.5  # GeV^(1/2)


def _kin(px: np.ndarray, py: np.ndarray, pz: np.ndarray, e: np.ndarray
         ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    pt = np.hypot(px, py)
    p = np.sqrt(pt * pt + pz * pz)
    eta = np.arcsinh(pz / np.where(pt > 0, pt, 1e-300))
    phi = np.arctan2(py, px)
    mass = np.sqrt(np.maximum(e * e - p * p, 0.0))
    return pt, eta, phi, mass


def _collection(counts_of: np.ndarray, n: int, fields: dict[str, np.ndarray],
                order: np.ndarray) -> ak.Array:
    """Jagged collection from flat per-object arrays (``counts_of`` = event index of each)."""
    counts = np.bincount(counts_of, minlength=n)
    rec = ak.unflatten(ak.zip({k: v[order] for k, v in fields.items()}), counts)
    return ak.to_packed(rec[ak.argsort(rec.pt, axis=1, ascending=False)])


def simulate(events: ak.Array, rng: np.random.Generator) -> dict[str, ak.Array]:
    """Detector-level collections for parton-level events (``read_lhe`` record layout)."""
    n = len(events)
    parts = events.particles
    counts = ak.to_numpy(ak.num(parts, axis=1))
    flat = ak.flatten(parts)
    ev = np.repeat(np.arange(n), counts)
    pid = ak.to_numpy(flat.pdgid).astype(np.int64)
    fs = ak.to_numpy(flat.status) == 1
    px, py, pz, e = (ak.to_numpy(flat[f]).astype(np.float64) for f in ("px", "py", "pz", "energy"))
    apid = np.abs(pid)
    out: dict[str, ak.Array] = {}

    # jets
    sel = np.flatnonzero(fs & (apid >= 1) & (apid <= 5))
    ej = e[sel]
    res = np.hypot(1.0 / np.sqrt(ej), 0.05)
    k = np.maximum(1.0 + res * rng.standard_normal(len(sel)), 0.05)
    pt, eta, phi, mass = _kin(px[sel] * k, py[sel] * k, pz[sel] * k, ej * k)
    flav = apid[sel]
    eff = np.select([flav == 5, flav == 4], [BTAG_EFF[5], BTAG_EFF[4]], MISTAG)
    btag = rng.random(len(sel)) < eff
    keep = (pt > JET_PT_MIN) & (np.abs(eta) < JET_ETA_MAX)
    out["Jet"] = _collection(
        ev[sel][keep], n,
        {"pt": pt.astype(np.float32), "eta": eta.astype(np.float32), "phi": phi.astype(np.float32),
         "mass": mass.astype(np.float32), "btag": btag, "flavour": flav.astype(np.int32)},
        keep,
    )  # fmt: skip

    # leptons
    for name, code, eff_, eta_max in (("Electron", 11, ELE_EFF, ELE_ETA_MAX),
                                      ("Muon", 13, MU_EFF, MU_ETA_MAX)):  # fmt: skip
        sel = np.flatnonzero(fs & (apid == code))
        pt0, eta0, phi0, _ = _kin(px[sel], py[sel], pz[sel], e[sel])
        res = np.hypot(0.1 / np.sqrt(e[sel]), 0.007) if code == 11 else np.hypot(0.01, 0.0001 * pt0)
        pt1 = pt0 * np.maximum(1.0 + res * rng.standard_normal(len(sel)), 0.01)
        found = rng.random(len(sel)) < eff_
        keep = found & (pt1 > LEP_PT_MIN) & (np.abs(eta0) < eta_max)
        charge = np.where(pid[sel] > 0, -1, 1).astype(np.int32)
        out[name] = _collection(
            ev[sel][keep], n,
            {"pt": pt1.astype(np.float32), "eta": eta0.astype(np.float32),
             "phi": phi0.astype(np.float32), "charge": charge},
            keep,
        )  # fmt: skip

    # missing transverse momentum
    nu = fs & np.isin(apid, (12, 14, 16))
    vis = fs & ~nu
    mex = np.bincount(ev[nu], weights=px[nu], minlength=n)
    mey = np.bincount(ev[nu], weights=py[nu], minlength=n)
    sum_et = np.bincount(ev[vis], weights=np.hypot(px[vis], py[vis]), minlength=n)
    sigma = MET_RES * np.sqrt(sum_et)
    met_x = mex + sigma * rng.standard_normal(n)
    met_y = mey + sigma * rng.standard_normal(n)
    out["MET_pt"] = ak.Array(np.hypot(met_x, met_y).astype(np.float32))
    out["MET_phi"] = ak.Array(np.arctan2(met_y, met_x).astype(np.float32))
    out["weight"] = ak.Array(ak.to_numpy(events.weight).astype(np.float64))
    return out


_TYPES = {
    "Jet": "var * {pt: float32, eta: float32, phi: float32, mass: float32, btag: bool, "
    "flavour: int32}",
    "Electron": "var * {pt: float32, eta: float32, phi: float32, charge: int32}",
    "Muon": "var * {pt: float32, eta: float32, phi: float32, charge: int32}",
    "MET_pt": "float32",
    "MET_phi": "float32",
    "weight": "float64",
    "event": "int64",
}


def write_ntuple(path: str, chunks: Iterable[ak.Array], *, seed: int) -> int:
    """Smear each chunk of parton-level events and write the ``events`` TTree; returns the
    number of events. Random numbers come from ``SeedSequence([seed, 7, chunk index])``."""
    import uproot

    n_done = 0
    with atomic_path(path) as tmp, uproot.recreate(tmp) as f:
        f["README"] = TOY_NOTICE
        tree = f.mktree(TREE, dict(_TYPES), title="evtkin toy data - not a physics prediction")
        for i, chunk in enumerate(chunks):
            rng = np.random.default_rng(np.random.SeedSequence([seed, 7, i]))
            cols = simulate(chunk, rng)
            cols["event"] = ak.Array(np.arange(n_done, n_done + len(chunk), dtype=np.int64))
            tree.extend(cols)
            n_done += len(chunk)
    return n_done
