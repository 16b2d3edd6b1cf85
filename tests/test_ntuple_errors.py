"""ROOT ntuple reader: bad input gives an NtupleError naming the file, the tree and the branch."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import awkward as ak
import numpy as np
import pytest
import uproot

from evtkin.errors import NtupleError
from evtkin.io.ntuple import describe_ntuple, read_ntuple
from test_ntuple_helpers import DETECTOR_MAPPING, write_detector, write_tree

JETS = {"collections": {"jets": {"pt": "Jet_pt", "eta": "Jet_eta", "phi": "Jet_phi",
                                 "mass": "Jet_mass"}}}


@pytest.fixture(scope="module")
def good(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return write_detector(tmp_path_factory.mktemp("bad") / "good.root", 3000, seed=4, batches=3)


def _read_all(path: Path | list[Path], mapping: dict, **kw) -> None:  # type: ignore[type-arg]
    for _ in read_ntuple(path, mapping, **kw):
        pass


def test_missing_branch_suggests_close_names(good: Path) -> None:
    mapping = {"collections": {"jets": {"pt": "Jet_Pt", "eta": "Jet_eta", "phi": "Jet_phi",
                                        "mass": "Jet_mass"}}}
    with pytest.raises(NtupleError) as info:
        _read_all(good, mapping)
    msg = str(info.value)
    assert str(good) in msg
    assert "tree 'events'" in msg
    assert "no branch 'Jet_Pt'" in msg
    assert "input.collections.jets.pt" in msg
    assert "did you mean 'Jet_pt'" in msg


def test_missing_tree_lists_the_trees(good: Path) -> None:
    with pytest.raises(NtupleError, match=r"good\.root: no tree 'event'; did you mean 'events'"):
        _read_all(good, {**JETS, "tree": "event"})


def test_jagged_branch_mapped_as_scalar(good: Path) -> None:
    with pytest.raises(NtupleError) as info:
        _read_all(good, {"scalars": {"x": "Jet_pt"}})
    msg = str(info.value)
    assert re.search(r"good\.root: tree 'events': branch 'Jet_pt' \(mapped by input\.scalars\.x\)"
                     r" is jagged \(var \* float32 per event\)", msg)


def test_scalar_branch_mapped_as_collection_coordinate(good: Path) -> None:
    mapping = {"collections": {"jets": {"pt": "MET_pt", "eta": "Jet_eta", "phi": "Jet_phi",
                                        "mass": "Jet_mass"}}}
    with pytest.raises(NtupleError, match=r"tree 'events': branch 'MET_pt' \(mapped by "
                       r"input\.collections\.jets\.pt\) is not jagged \(float32 per event\)"):
        _read_all(good, mapping)


def test_weight_must_be_numeric_scalar(good: Path) -> None:
    with pytest.raises(NtupleError, match=r"branch 'varw' \(mapped by input\.weight\) is "
                       r"3 \* float64 per event"):
        _read_all(good, {**JETS, "weight": "varw"})
    with pytest.raises(NtupleError, match=r"branch 'Jet_btag' \(mapped by "
                       r"input\.collections\.jets\.pt\) holds var \* bool"):
        _read_all(good, {"collections": {"jets": {"pt": "Jet_btag", "eta": "Jet_eta",
                                                  "phi": "Jet_phi", "mass": "Jet_mass"}}})


def test_mismatched_jagged_lengths_name_branches_and_entry(tmp_path: Path) -> None:
    # two bare jagged branches get separate counters, so their lengths can disagree
    pt = [[50.0, 40.0]] * 10 + [[30.0]] * 5
    eta = [[0.1, 0.2]] * 10 + [[0.3]] * 3 + [[0.3, 0.4]] + [[0.5]]
    path = write_tree(tmp_path / "mismatch.root",
                      {"Jet_pt": "var * float64", "Jet_eta": "var * float64",
                       "Jet_phi": "var * float64"},
                      [{"Jet_pt": ak.Array(pt), "Jet_eta": ak.Array(eta), "Jet_phi": ak.Array(pt)}])
    mapping = {"collections": {"jets": {"pt": "Jet_pt", "eta": "Jet_eta", "phi": "Jet_phi",
                                        "mass": 0.0}}}
    with pytest.raises(NtupleError) as info:
        _read_all(path, mapping, step_size=4)
    msg = str(info.value)
    assert "mismatch.root: tree 'events'" in msg
    assert "'Jet_pt' and 'Jet_eta'" in msg
    # entry 13 (0-based) is the first where the counts differ: 1 vs 2
    assert "first at entry 13 (1 vs 2 values)" in msg


def test_variable_length_variation_branch(tmp_path: Path) -> None:
    path = write_tree(tmp_path / "vw.root", {"vw": "var * float64", "x": np.float64},
                      [{"vw": ak.Array([[1.0, 2.0], [1.0, 2.0], [3.0]]), "x": np.zeros(3)}])
    with pytest.raises(NtupleError, match=r"branch 'vw' \(mapped by input\.variation_weights\): "
                       r"entry 2 holds 1 variation weights, expected 2"):
        _read_all(path, {"variation_weights": "vw", "scalars": {"x": "x"}})


def test_files_with_different_types(tmp_path: Path, good: Path) -> None:
    other = write_tree(tmp_path / "other.root",
                       {"Jet_pt": "var * float64", "Jet_eta": "var * float32",
                        "Jet_phi": "var * float32", "Jet_mass": "var * float32"},
                       [{k: ak.Array([[1.0]]) for k in ("Jet_pt", "Jet_eta", "Jet_phi",
                                                         "Jet_mass")}])  # fmt: skip
    with pytest.raises(NtupleError, match=r"other\.root: tree 'events': branch 'Jet_pt' holds "
                       r"var \* float64 but var \* float32 in .*good\.root"):
        _read_all([good, other], JETS)


def test_truncated_file_names_file_tree_and_branch(tmp_path: Path, good: Path) -> None:
    cut = tmp_path / "cut.root"
    shutil.copy(good, cut)
    size = cut.stat().st_size
    with cut.open("r+b") as f:
        f.truncate(size // 3)
    with pytest.raises(NtupleError) as info:
        _read_all(cut, DETECTOR_MAPPING)
    msg = str(info.value)
    assert str(cut) in msg
    assert "tree 'events'" in msg
    assert re.search(r"branch '\w+' \(mapped by input\.[\w.\[\]]+\)", msg)
    assert "corrupt or truncated" in msg


def test_file_cut_inside_its_header(tmp_path: Path, good: Path) -> None:
    cut = tmp_path / "stub.root"
    cut.write_bytes(good.read_bytes()[:300])
    with pytest.raises(NtupleError, match=r"stub\.root.*(corrupt|truncated)"):
        _read_all(cut, JETS)


def test_corrupt_basket_names_the_branch(tmp_path: Path, good: Path) -> None:
    bad = tmp_path / "corrupt.root"
    shutil.copy(good, bad)
    # overwrite the middle of the second basket of Jet_eta (uproot gives its position)
    branch = uproot.open(f"{good}:events")["Jet_eta"]
    seek = int(branch.member("fBasketSeek")[1])
    nbytes = int(branch.member("fBasketBytes")[1])
    with bad.open("r+b") as f:
        f.seek(seek + nbytes // 2)
        f.write(b"\x5a" * 64)
    with pytest.raises(NtupleError) as info:
        _read_all(bad, JETS, step_size=500)
    msg = str(info.value)
    assert re.search(r"corrupt\.root: tree 'events': branch 'Jet_eta' \(mapped by "
                     r"input\.collections\.jets\.eta\): cannot read entries \d+-\d+", msg)


def test_not_a_root_file(tmp_path: Path) -> None:
    path = tmp_path / "text.root"
    path.write_text("this is not a ROOT file\n" * 20)
    with pytest.raises(NtupleError, match=r"text\.root: tree 'events': cannot open as a ROOT file"):
        _read_all(path, {**JETS, "tree": "events"})


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(NtupleError, match=r"nothere\.root: no such file"):
        describe_ntuple(tmp_path / "nothere.root", JETS)


def test_bad_arguments(good: Path) -> None:
    with pytest.raises(ValueError, match="step_size"):
        read_ntuple(good, JETS, step_size=0)
    with pytest.raises(NtupleError, match="no input files"):
        read_ntuple([], JETS)
