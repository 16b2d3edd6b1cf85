"""Benchmark: evtkin's ROOT ntuple reader vs a plain ``uproot.iterate`` over the same branches.

Run: ``.venv/bin/python bench/bench_ntuple.py [n_events] [--keep]``. Writes a detector-like
ntuple (jets, electrons, muons, missing pT, weight, 10 variation weights, event number) to
/tmp, then times, in the same run:

1. ``uproot.iterate`` over every mapped branch (the baseline) vs ``read_ntuple`` of the whole
   mapping;
2. the same for the subset a jet analysis needs (``fields=["jets", "met"]``);
3. read + select + fill: ``read_ntuple`` then evtkin's object selection (jets pT > 30 GeV,
   |η| < 2.5, b-tag counting, leading-lepton choice), four cuts and 5 histograms with 10
   variation weights, vs the bare uproot read of the same branches.

4. end to end: ``evtkin.run`` (the Python API of ``evtkin run``) of a lepton+jets config on the
   same file (objects from the mapped collections, b-tags, isolation variable cut, overlap
   removal, χ² top-pair reconstruction, 6 histograms x 10 variations), with its own stage split
   (read / select+reconstruct / fill) vs the bare read of the branches it uses.

Also prints the bytes read (uproot's source counters) against the file size. Not a test: no
assertions; timings are the best of ``REPEAT`` runs with a warm page cache.
"""

from __future__ import annotations

import os
import sys
import time
from collections.abc import Callable
from typing import Any

import awkward as ak
import numpy as np
import uproot

from evtkin.io.ntuple import read_ntuple

REPEAT = 3
STEP = 100_000
N_VAR = 10
TYPES: dict[str, Any] = {
    "Jet": "var * {pt: float32, eta: float32, phi: float32, mass: float32, btag: bool}",
    "Electron": "var * {pt: float32, eta: float32, phi: float32, charge: int32, iso: float32}",
    "Muon": "var * {pt: float32, eta: float32, phi: float32, charge: int32, iso: float32}",
    "MET_pt": np.float32,
    "MET_phi": np.float32,
    "weight": np.float64,
    "var_weights": f"{N_VAR} * float32",
    "event": np.int64,
}
MAPPING: dict[str, Any] = {
    "tree": "events",
    "weight": "weight",
    "variation_weights": "var_weights",
    "event_number": "event",
    "collections": {
        "jets": {"pt": "Jet_pt", "eta": "Jet_eta", "phi": "Jet_phi", "mass": "Jet_mass",
                 "fields": {"btag": "Jet_btag"}},
        "electrons": {"pt": "Electron_pt", "eta": "Electron_eta", "phi": "Electron_phi",
                      "mass": 0.000511, "fields": {"charge": "Electron_charge",
                                                   "iso": "Electron_iso"}},
        "muons": {"pt": "Muon_pt", "eta": "Muon_eta", "phi": "Muon_phi", "mass": 0.10566,
                  "fields": {"charge": "Muon_charge", "iso": "Muon_iso"}},
    },
    "vectors": {"met": {"pt": "MET_pt", "phi": "MET_phi"}},
}


def _collection(rng: np.random.Generator, counts: np.ndarray, charge: bool) -> ak.Array:
    m = int(counts.sum())
    cols: dict[str, Any] = {
        "pt": rng.exponential(40.0, m).astype(np.float32) + 20,
        "eta": rng.uniform(-2.5, 2.5, m).astype(np.float32),
        "phi": rng.uniform(-np.pi, np.pi, m).astype(np.float32),
    }
    if charge:
        cols["charge"] = rng.choice(np.array([-1, 1], dtype=np.int32), m)
        cols["iso"] = rng.exponential(0.1, m).astype(np.float32)
    else:
        cols["mass"] = rng.uniform(2, 25, m).astype(np.float32)
        cols["btag"] = rng.random(m) < 0.25
    return ak.unflatten(ak.zip(cols), counts)


def write_sample(path: str, n: int, batch: int = 100_000) -> None:
    rng = np.random.default_rng(2024)
    with uproot.recreate(path) as f:
        tree = f.mktree("events", TYPES, title="evtkin benchmark data (synthetic)")
        for start in range(0, n, batch):
            k = min(batch, n - start)
            tree.extend({
                "Jet": _collection(rng, rng.poisson(5.0, k), charge=False),
                "Electron": _collection(rng, rng.poisson(0.6, k), charge=True),
                "Muon": _collection(rng, rng.poisson(0.6, k), charge=True),
                "MET_pt": rng.exponential(40.0, k).astype(np.float32),
                "MET_phi": rng.uniform(-np.pi, np.pi, k).astype(np.float32),
                "weight": rng.normal(1.0, 0.1, k),
                "var_weights": rng.normal(1.0, 0.05, (k, N_VAR)).astype(np.float32),
                "event": np.arange(start, start + k, dtype=np.int64),
            })  # fmt: skip


def _best(fn: Callable[[], Any]) -> tuple[float, Any]:
    best, out = float("inf"), None
    for _ in range(REPEAT):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def bare(path: str, branches: list[str]) -> tuple[int, int]:
    n = 0
    with uproot.open(path) as f:
        for arrays in f["events"].iterate(branches, step_size=STEP, library="ak", how=dict):
            n += len(next(iter(arrays.values())))
        return n, int(f.file.source.num_requested_bytes)


def evtkin_read(path: str, fields: list[str] | None) -> tuple[int, int, tuple[str, ...]]:
    r = read_ntuple(path, MAPPING, step_size=STEP, fields=fields)
    n = sum(len(c) for c in r)
    return n, r.stats.bytes_read, r.branches


def analysis(path: str) -> tuple[int, float]:
    """read + select + fill: a lepton+jets style selection and 5 histograms."""
    from evtkin.hists.fill import AxisSpec, HistAccumulator, HistSpec, fill_many
    from evtkin.select import objects as obj

    names = tuple(f"v{i}" for i in range(N_VAR))
    specs = {
        "jet1_pt": HistSpec("jet1_pt", (AxisSpec.regular(50, 0, 500, name="x"),)),
        "jet_eta": HistSpec("jet_eta", (AxisSpec.regular(50, -2.5, 2.5, name="x"),)),
        "n_bjets": HistSpec("n_bjets", (AxisSpec.regular(6, -0.5, 5.5, name="x"),)),
        "lep_pt": HistSpec("lep_pt", (AxisSpec.regular(40, 0, 400, name="x"),)),
        "met": HistSpec("met", (AxisSpec.regular(40, 0, 400, name="x"),)),
    }
    accs = {k: HistAccumulator(s, names) for k, s in specs.items()}
    passed = 0
    for ev in read_ntuple(path, MAPPING, step_size=STEP,
                          fields=["jets", "electrons", "muons", "met"]):  # fmt: skip
        jets = obj.select(ev.jets, pt_min=30.0, abs_eta_max=2.5)
        leptons = ak.concatenate([
            obj.select(ev.electrons[ev.electrons.iso < 0.15], pt_min=25.0, abs_eta_max=2.47),
            obj.select(ev.muons[ev.muons.iso < 0.15], pt_min=25.0, abs_eta_max=2.5),
        ], axis=1)  # fmt: skip
        nb = ak.to_numpy(ak.sum(jets.btag, axis=1))
        sel = ((ak.to_numpy(ak.num(leptons)) == 1) & (ak.to_numpy(ak.num(jets)) >= 4)
               & (nb >= 1) & (ak.to_numpy(ev.met.pt) > 20.0))  # fmt: skip
        rows = np.flatnonzero(sel)
        passed += rows.size
        w0 = ak.to_numpy(ev.weight)
        wv = np.asarray(ak.to_numpy(ev.weights), dtype=np.float64)
        js = jets[sel]
        njet = ak.to_numpy(ak.num(js))
        items = [
            (accs["jet1_pt"], [ak.to_numpy(js["pt"][:, 0])], rows),
            (accs["jet_eta"], [ak.to_numpy(ak.flatten(js["eta"]))], np.repeat(rows, njet)),
            (accs["n_bjets"], [nb[sel].astype(np.float64)], rows),
            (accs["lep_pt"], [ak.to_numpy(leptons[sel]["pt"][:, 0])], rows),
            (accs["met"], [ak.to_numpy(ev.met.pt[sel])], rows),
        ]
        fill_many(items, weight=w0, variations=wv)
    return passed, float(accs["met"]._w.sum())


def run_config(path: str) -> dict[str, Any]:
    """A lepton+jets analysis config on the benchmark file (a mapping as ``evtkin run`` reads)."""
    sample = {"format": "root", "files": [path], "input": MAPPING, "weights_give": "mean"}
    return {
        "analysis": {"name": "bench-ntuple", "step_size": STEP},
        "samples": {"bench": sample},
        "objects": {
            "leptons": {"from": ["electrons", "muons"], "require": "iso < 0.15",
                        "min_pt": 25.0, "max_abs_eta": 2.5},
            "jets": {"from": "jets", "min_pt": 30.0, "max_abs_eta": 2.5},
        },
        "overlap_removal": [{"remove": "jets", "near": "leptons", "within_dr": 0.4}],
        "missing_pt": {"name": "met", "from": "met"},
        "step": [
            {"name": "one lepton", "require": "count(leptons) == 1"},
            {"name": "four jets", "require": "count(jets) >= 4"},
            {"name": "b tag", "require": "sum(jets.btag) >= 1"},
            {"name": "met", "require": "met.pt > 20"},
        ],
        "composites": {"tt": {"build": "ttbar_lepton_jets", "lepton": "leptons", "jets": "jets",
                              "missing_pt": "met", "use_b_tags": False}},
        "histograms": {
            "jet1_pt": {"x": {"value": "jets[0].pt", "bins": 50, "range": [0, 500]}},
            "jet_eta": {"x": {"value": "jets.eta", "bins": 50, "range": [-2.5, 2.5]}},
            "n_bjets": {"x": {"value": "sum(jets.btag)", "bins": 6, "range": [-0.5, 5.5]}},
            "lep_pt": {"x": {"value": "leptons[0].pt", "bins": 40, "range": [0, 400]}},
            "met": {"x": {"value": "met.pt", "bins": 40, "range": [0, 400]}},
            "top_had_mass": {"x": {"value": "tt.top_had.mass", "bins": 40,
                                   "range": [100, 300]}},
        },
    }


def main(n: int = 1_000_000, keep: bool = False) -> None:
    path = f"/tmp/evtkin_bench_ntuple_{n}.root"
    if not os.path.exists(path):
        t = time.perf_counter()
        write_sample(path, n)
        print(f"wrote {n} events to {path} ({os.path.getsize(path) / 1e6:.0f} MB) "
              f"in {time.perf_counter() - t:.1f} s")
    size = os.path.getsize(path)
    r = read_ntuple(path, MAPPING)
    everything = list(r.branches)
    jet_only = list(read_ntuple(path, MAPPING, fields=["jets", "met"]).branches)
    analysis_branches = list(read_ntuple(path, MAPPING, fields=["jets", "electrons", "muons",
                                                                "met"]).branches)  # fmt: skip
    print(f"file {size / 1e6:.1f} MB, {n} events, step {STEP}, best of {REPEAT}")
    for label, fields, branches in (("all mapped branches", None, everything),
                                    ("jets + met only", ["jets", "met"], jet_only)):  # fmt: skip
        tb, (nb, bytes_b) = _best(lambda br=branches: bare(path, br))
        te, (ne, bytes_e, _) = _best(lambda f=fields: evtkin_read(path, f))
        assert nb == ne == n
        print(f"\n[{label}] {len(branches)} branches")
        print(f"  uproot.iterate  {tb:7.2f} s  {n / tb / 1e6:6.2f} M ev/s  "
              f"read {bytes_b / 1e6:7.1f} MB ({bytes_b / size:.0%} of the file)")
        print(f"  read_ntuple     {te:7.2f} s  {n / te / 1e6:6.2f} M ev/s  "
              f"read {bytes_e / 1e6:7.1f} MB ({bytes_e / size:.0%} of the file)")
        print(f"  ratio read_ntuple / uproot.iterate = {te / tb:.2f}")
    tb, _ = _best(lambda: bare(path, analysis_branches))
    ta, (passed, _) = _best(lambda: analysis(path))
    print(f"\n[read + select + fill] {len(analysis_branches)} branches, 5 histograms x "
          f"{N_VAR} variations, {passed} events selected")
    print(f"  uproot.iterate (bare read)  {tb:7.2f} s")
    print(f"  evtkin read+select+fill     {ta:7.2f} s")
    print(f"  ratio = {ta / tb:.2f}  (issue target: <= 2)")

    import evtkin.run.pipeline as pipeline
    from evtkin.config import load_config
    from evtkin.run.inputs.ntuple import config_fields

    cfg = load_config(run_config(path))
    run_fields = config_fields(cfg, cfg.samples["bench"].input)
    run_branches = list(read_ntuple(path, MAPPING, fields=run_fields).branches)
    tb, _ = _best(lambda: bare(path, run_branches))
    tr, res = _best(lambda: pipeline.run(cfg))
    st = res.provenance["stage_seconds"]
    inp = res.provenance["inputs"][0]
    print(f"\n[evtkin run, end to end] {len(run_branches)} branches, 6 histograms x {N_VAR} "
          f"variations, {res.samples['bench'].cutflow[-1]['n_raw']} events selected")
    print(f"  uproot.iterate (bare read)  {tb:7.2f} s")
    print(f"  evtkin run                  {tr:7.2f} s  (read {st['read']:.2f} s, select+reco "
          f"{st['select']:.2f} s, fill {st['fill']:.2f} s; {inp['bytes_read'] / 1e6:.1f} MB read)")
    print(f"  ratio = {tr / tb:.2f}; (select+reco+fill)/read = "
          f"{(st['select'] + st['fill']) / st['read']:.2f}")
    if not keep:
        os.remove(path)


if __name__ == "__main__":
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    main(int(args[0]) if args else 1_000_000, keep="--keep" in sys.argv)
