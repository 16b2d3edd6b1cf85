"""``evtkin inspect``: the listing and the suggested mapping (which must parse and read)."""

from __future__ import annotations

import sys
from pathlib import Path

import awkward as ak
import numpy as np
import pytest
import uproot

from evtkin.cli import main
from evtkin.io.ntuple import read_ntuple
from evtkin.io.ntuple_mapping import NtupleMapping
from test_ntuple_helpers import DETECTOR_TYPES, detector_like, write_tree

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib


@pytest.fixture(scope="module")
def sample(tmp_path_factory: pytest.TempPathFactory) -> Path:
    n = 400
    cols = detector_like(n, seed=11)
    rng = np.random.default_rng(12)
    counts = rng.integers(0, 3, n)
    m = int(counts.sum())
    px, py, pz = (rng.normal(0, 30, m) for _ in range(3))
    cols["Photon"] = ak.unflatten(ak.zip({"px": px, "py": py, "pz": pz,
                                          "E": np.sqrt(px**2 + py**2 + pz**2),
                                          "iso": rng.random(m)}), counts)  # fmt: skip
    cols["scale_weights"] = rng.normal(1, 0.1, (n, 2))
    types = {**DETECTOR_TYPES,
             "Photon": "var * {px: float64, py: float64, pz: float64, E: float64, iso: float32}",
             "scale_weights": "2 * float64"}  # fmt: skip
    path = tmp_path_factory.mktemp("inspect") / "reco.root"
    write_tree(path, types, [cols], title="evtkin test tree")
    with uproot.update(path) as f:
        f.mktree("meta", {"run": np.int32}).extend({"run": np.array([7], dtype=np.int32)})
    return path


def test_listing_shows_trees_branches_types_and_entries(sample: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    assert main(["inspect", str(sample)]) == 0
    out = capsys.readouterr().out
    tree = uproot.open(f"{sample}:events")
    # independent: entry counts and branch names straight from uproot
    assert f"TTree 'events' \"evtkin test tree\": {tree.num_entries} entries, " \
           f"{len(tree.keys())} branches" in out
    assert "TTree 'meta': 1 entries, 1 branches" in out
    branch_names = tree.keys()
    for name in branch_names:
        assert f"\n  {name} " in out
    lines = {ln.split()[0]: ln for ln in out.splitlines() if ln.startswith("  ")}
    assert "var * float32" in lines["Jet_pt"]
    assert "counted by nJet" in lines["Jet_pt"]
    assert "3 * float64" in lines["varw"]
    assert "int64" in lines["event"]


def test_suggested_mapping_parses_and_reads_the_file(sample: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    assert main(["inspect", "--mapping-only", str(sample)]) == 0
    text = capsys.readouterr().out
    table = tomllib.loads(text)
    assert table["tree"] == "events"
    assert table["weight"] == "weight"
    assert table["event_number"] == "event"
    assert table["variation_weights"] == "scale_weights"
    assert table["collections"]["jets"] == {
        "pt": "Jet_pt", "eta": "Jet_eta", "phi": "Jet_phi", "mass": "Jet_mass",
        "fields": {"btag": "Jet_btag"}}
    assert table["collections"]["electrons"]["mass"] == 0.0
    assert table["collections"]["electrons"]["fields"] == {"charge": "Electron_charge"}
    assert table["collections"]["photons"] == {
        "px": "Photon_px", "py": "Photon_py", "pz": "Photon_pz", "energy": "Photon_E",
        "fields": {"iso": "Photon_iso"}}
    assert table["vectors"]["met"] == {"pt": "MET_pt", "phi": "MET_phi"}
    assert "# n_vertices" not in text
    assert '# npv = "nPV"' in text
    mapping = NtupleMapping.from_dict(table)
    chunk = next(iter(read_ntuple(sample, mapping)))
    ref = uproot.open(f"{sample}:events").arrays(["Jet_pt", "Photon_px", "Photon_py"])
    assert ak.all(chunk.jets["pt"] == ref.Jet_pt)
    # photon pT from px, py: pT = sqrt(px² + py²)   # textbook
    assert ak.all(abs(chunk.photons.pt - np.hypot(ref.Photon_px, ref.Photon_py)) < 1e-12)
    assert chunk.weights.type.content.size == 2


def test_tree_option_and_errors(sample: Path, tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    assert main(["inspect", "--mapping-only", "--tree", "meta", str(sample)]) == 0
    text = capsys.readouterr().out
    assert tomllib.loads(text)["tree"] == "meta"
    assert "no four-vector collections recognised" in text
    assert main(["inspect", "--tree", "nope", str(sample)]) == 1
    assert "no tree 'nope'" in capsys.readouterr().err
    assert main(["inspect", str(tmp_path / "missing.root")]) == 1
    assert "missing.root: no such file" in capsys.readouterr().err
    junk = tmp_path / "junk.root"
    junk.write_bytes(b"\0" * 100)
    assert main(["inspect", str(junk)]) == 1
    assert "cannot open as a ROOT file" in capsys.readouterr().err
