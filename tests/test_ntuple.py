"""ROOT ntuple reader: event model, kinematics, chunking, selective reads, mapping options."""

from __future__ import annotations

import copy
from pathlib import Path

import awkward as ak
import numpy as np
import pytest
import uproot

from evtkin.errors import ConfigError
from evtkin.io.ntuple import describe_ntuple, read_ntuple
from evtkin.io.ntuple_mapping import NtupleMapping
from test_ntuple_helpers import DETECTOR_MAPPING, write_detector, write_tree


@pytest.fixture(scope="module")
def two_files(tmp_path_factory: pytest.TempPathFactory) -> list[Path]:
    d = tmp_path_factory.mktemp("ntuples")
    return [write_detector(d / "a.root", 2500, seed=1, batches=3),
            write_detector(d / "b.root", 1700, seed=2, first_event=2500, batches=2)]


def _uproot_concat(files: list[Path], branches: list[str]) -> ak.Array:
    # independent reference: uproot's own concatenation of the same branches
    return uproot.concatenate([f"{p}:events" for p in files], branches, library="ak")


# --------------------------------------------------------------------------- event model

def test_chunk_has_lhe_like_layout(two_files: list[Path]) -> None:
    chunk = next(iter(read_ntuple(two_files[0], DETECTOR_MAPPING, step_size=1000)))
    assert ak.fields(chunk) == ["weight", "weights", "named_weights", "process_id",
                                "event_number", "jets", "electrons", "met", "n_vertices"]
    assert str(ak.type(chunk.weights)) == "1000 * 3 * float64"
    assert chunk.weight.type.content.primitive == "float64"
    assert chunk.process_id.type.content.primitive == "int32"
    assert np.all(ak.to_numpy(chunk.process_id) == 0)
    jets = chunk.jets
    assert ak.parameters(jets.layout.content)["__record__"] == "Momentum4D"
    assert ak.fields(jets) == ["pt", "eta", "phi", "mass", "btag"]
    assert jets.btag.type.content.content.primitive == "bool"
    # constant mass and constant extra field broadcast to every electron
    e = ak.flatten(chunk.electrons)
    assert np.all(ak.to_numpy(e["mass"]) == 0.000511)
    assert np.all(ak.to_numpy(e["pdgid"]) == 11)
    assert ak.parameters(chunk.met.layout)["__record__"] == "Momentum2D"


def test_values_match_uproot(two_files: list[Path]) -> None:
    ref = _uproot_concat(two_files, ["Jet_pt", "Jet_btag", "Electron_charge", "MET_pt",
                                     "MET_phi", "weight", "event", "varw", "nPV"])
    chunks = list(read_ntuple(two_files, DETECTOR_MAPPING, step_size=777))
    got = ak.concatenate(chunks)
    assert len(got) == len(ref) == 4200
    np.testing.assert_array_equal(ak.to_numpy(got.event_number), ak.to_numpy(ref.event))
    np.testing.assert_array_equal(ak.to_numpy(got.weight), ak.to_numpy(ref.weight))
    np.testing.assert_array_equal(ak.to_numpy(got.weights), ak.to_numpy(ref.varw))
    np.testing.assert_array_equal(ak.to_numpy(got.n_vertices), ak.to_numpy(ref.nPV))
    assert ak.all(ak.num(got.jets) == ak.num(ref.Jet_pt))
    # float32 branches are widened to float64 exactly
    assert ak.all(got.jets["pt"] == ref.Jet_pt)
    assert ak.all(got.jets.btag == ref.Jet_btag)
    assert ak.all(got.electrons.charge == ref.Electron_charge)
    # Momentum2D from (pt, phi): px = pt cos(phi)   # textbook polar -> Cartesian
    pt = ak.to_numpy(ref.MET_pt).astype(np.float64)
    phi = ak.to_numpy(ref.MET_phi).astype(np.float64)
    np.testing.assert_allclose(ak.to_numpy(got.met.px), pt * np.cos(phi), rtol=1e-12)
    np.testing.assert_allclose(ak.to_numpy(got.met.py), pt * np.sin(phi), rtol=1e-12)


# --------------------------------------------------------------------------- chunking

def test_chunks_exact_size_across_files(two_files: list[Path]) -> None:
    sizes = [len(c) for c in read_ntuple(two_files, DETECTOR_MAPPING, step_size=1000)]
    # 4200 entries in total (2500 + 1700, counted independently by uproot below)
    total = sum(uproot.open(f"{p}:events").num_entries for p in two_files)
    assert total == 4200
    assert sizes == [1000, 1000, 1000, 1000, 200]


def test_entry_range_counts_over_the_file_list(two_files: list[Path]) -> None:
    r = read_ntuple(two_files, DETECTOR_MAPPING, step_size=600, entry_start=2300,
                    entry_stop=3100, fields=["event_number"])
    chunks = list(r)
    assert [len(c) for c in chunks] == [600, 200]
    ev = np.concatenate([ak.to_numpy(c.event_number) for c in chunks])
    # the files number their events 0..2499 and 2500..4199 in file order
    np.testing.assert_array_equal(ev, np.arange(2300, 3100))
    assert r.stats.entries == 800
    assert [f.entries for f in r.stats.files] == [200, 600]


def test_entry_range_inside_second_file_skips_reading_the_first(two_files: list[Path]) -> None:
    r = read_ntuple(two_files, DETECTOR_MAPPING, entry_start=3000, fields=["event_number"])
    ev = np.concatenate([ak.to_numpy(c.event_number) for c in r])
    np.testing.assert_array_equal(ev, np.arange(3000, 4200))
    assert r.stats.files[0].entries == 0


def test_stop_before_start_reads_nothing(two_files: list[Path]) -> None:
    assert list(read_ntuple(two_files, DETECTOR_MAPPING, entry_start=5000)) == []


def test_step_size_does_not_change_the_events(two_files: list[Path]) -> None:
    a = ak.concatenate(list(read_ntuple(two_files, DETECTOR_MAPPING, step_size=4200)))
    b = ak.concatenate(list(read_ntuple(two_files, DETECTOR_MAPPING, step_size=333)))
    assert ak.array_equal(a, b)


# --------------------------------------------------------------------------- selective reads

def test_fields_limit_the_branches_and_the_bytes(two_files: list[Path]) -> None:
    full = read_ntuple(two_files[0], DETECTOR_MAPPING)
    for _ in full:
        pass
    part = read_ntuple(two_files[0], DETECTOR_MAPPING, fields=["jets.pt", "met"])
    chunk = next(part)
    part.close()
    assert ak.fields(chunk) == ["weight", "weights", "named_weights", "process_id", "jets",
                                "met"]
    assert ak.fields(chunk.jets) == ["pt", "eta", "phi", "mass"]
    assert set(part.branches) == {"weight", "varw", "Jet_pt", "Jet_eta", "Jet_phi", "Jet_mass",
                                  "MET_pt", "MET_phi"}
    # an independent measure of what the branches occupy: uproot's compressed basket sizes
    tree = uproot.open(f"{two_files[0]}:events")
    wanted = sum(tree[b].compressed_bytes for b in part.branches)
    everything = sum(tree[b].compressed_bytes for b in full.branches)
    assert wanted <= part.stats.bytes_read < wanted + 20_000  # baskets + header/metadata
    assert everything <= full.stats.bytes_read
    assert part.stats.bytes_read < full.stats.bytes_read
    assert part.stats.requests > 0


def test_collection_extra_field_selection(two_files: list[Path]) -> None:
    r = read_ntuple(two_files[0], DETECTOR_MAPPING, fields=["electrons.charge"])
    chunk = next(r)
    r.close()
    assert ak.fields(chunk.electrons) == ["pt", "eta", "phi", "mass", "charge"]
    assert "Electron_charge" in r.branches
    assert "Jet_pt" not in r.branches


def test_unknown_field_is_config_error(two_files: list[Path]) -> None:
    with pytest.raises(ConfigError, match=r"no field 'btg'.*did you mean 'btag'"):
        read_ntuple(two_files[0], DETECTOR_MAPPING, fields=["jets.btg"])
    with pytest.raises(ConfigError, match=r"no 'jet'.*did you mean 'jets'"):
        read_ntuple(two_files[0], DETECTOR_MAPPING, fields=["jet"])


# --------------------------------------------------------------------------- kinematics

def _vectors(n: int, seed: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    counts = rng.integers(0, 5, n)
    m = int(counts.sum())
    pt = rng.uniform(20.0, 400.0, m)
    eta = rng.uniform(-3.0, 3.0, m)
    phi = rng.uniform(-np.pi, np.pi, m)
    mass = rng.uniform(5.0, 50.0, m)
    px, py, pz = pt * np.cos(phi), pt * np.sin(phi), pt * np.sinh(eta)
    e = np.sqrt(px**2 + py**2 + pz**2 + mass**2)
    return dict(counts=counts, pt=pt, eta=eta, phi=phi, mass=mass, px=px, py=py, pz=pz, e=e)


def test_polar_and_cartesian_mappings_give_the_same_kinematics(tmp_path: Path) -> None:
    v = _vectors(3000, seed=5)
    counts = v["counts"]

    def jag(x: np.ndarray) -> ak.Array:
        return ak.unflatten(x, counts)

    path = write_tree(
        tmp_path / "both.root",
        {"J": "var * {pt: float64, eta: float64, phi: float64, m: float64, "
              "px: float64, py: float64, pz: float64, E: float64}"},
        [{"J": ak.zip({"pt": jag(v["pt"]), "eta": jag(v["eta"]), "phi": jag(v["phi"]),
                       "m": jag(v["mass"]), "px": jag(v["px"]), "py": jag(v["py"]),
                       "pz": jag(v["pz"]), "E": jag(v["e"])})}],
    )  # fmt: skip
    polar = {"collections": {"j": {"pt": "J_pt", "eta": "J_eta", "phi": "J_phi", "m": "J_m"}}}
    cart = {"collections": {"j": {"px": "J_px", "py": "J_py", "pz": "J_pz", "E": "J_E"}}}
    a = ak.flatten(next(iter(read_ntuple(path, polar, step_size=10_000))).j)
    b = ak.flatten(next(iter(read_ntuple(path, cart, step_size=10_000))).j)
    for name in ("pt", "eta", "phi", "rapidity", "px", "pz", "E"):
        np.testing.assert_allclose(ak.to_numpy(getattr(a, name)), ak.to_numpy(getattr(b, name)),
                                   rtol=1e-12, atol=1e-12, err_msg=name)
    # the mass from (px, py, pz, E) is sqrt(E² - p²): rounding of E² and p² (relative 2^-53
    # each) gives |Δm| ≈ eps·E²/m (numerical analysis of the difference, from memory); the
    # directly stored mass has no such loss. Allow 4× that bound and check it is also < 1e-9.
    eps = np.finfo(np.float64).eps
    e, m = v["e"], v["mass"]
    dm = np.abs(ak.to_numpy(a.mass) - ak.to_numpy(b.mass))
    assert np.all(dm <= 4 * eps * e * e / m + 1e-12 * m)
    assert np.all(dm / m < 1e-9)
    # both against textbook formulas (PDG review "Kinematics"): pT = sqrt(px²+py²),
    # η = asinh(pz/pT), φ = atan2(py, px), m = sqrt(E² - |p|²)
    np.testing.assert_allclose(ak.to_numpy(b.pt), np.hypot(v["px"], v["py"]), rtol=1e-14)
    np.testing.assert_allclose(ak.to_numpy(b.eta), np.arcsinh(v["pz"] / np.hypot(v["px"],
                               v["py"])), rtol=1e-12)  # fmt: skip
    np.testing.assert_allclose(ak.to_numpy(b.phi), np.arctan2(v["py"], v["px"]), rtol=1e-14)
    np.testing.assert_allclose(ak.to_numpy(a.mass), v["mass"], rtol=0)
    np.testing.assert_allclose(ak.to_numpy(a.E), v["e"], rtol=1e-13)
    # pair invariant masses through vector, both mappings
    ca = next(iter(read_ntuple(path, polar, step_size=10_000))).j
    cb = next(iter(read_ntuple(path, cart, step_size=10_000))).j
    two = ak.num(ca) >= 2
    pa, pb = ca[two][:, 0] + ca[two][:, 1], cb[two][:, 0] + cb[two][:, 1]
    ma, mb, ep = ak.to_numpy(pa.mass), ak.to_numpy(pb.mass), ak.to_numpy(pb.E)
    assert len(ma) > 500
    assert np.all(np.abs(ma - mb) <= 4 * eps * ep * ep / ma + 1e-12 * ma)


def test_mev_units(tmp_path: Path) -> None:
    path = write_tree(tmp_path / "mev.root",
                      {"J": "var * {pt: float64, eta: float64, phi: float64, m: float64}",
                       "met": np.float64, "metphi": np.float64},
                      [{"J": ak.Array([[{"pt": 45_000.0, "eta": 0.5, "phi": 1.0, "m": 4_000.0}],
                                       []]),
                        "met": np.array([12_345.0, 0.0]), "metphi": np.array([0.5, -1.0])}])
    mapping = {"units": "MeV",
               "collections": {"j": {"pt": "J_pt", "eta": "J_eta", "phi": "J_phi", "m": "J_m"}},
               "vectors": {"met": {"pt": "met", "phi": "metphi"}}}
    chunk = next(iter(read_ntuple(path, mapping)))
    # 1 GeV = 1000 MeV; angles are not scaled
    assert chunk.j["pt"][0, 0] == pytest.approx(45.0)
    assert chunk.j["mass"][0, 0] == pytest.approx(4.0)
    assert chunk.j["eta"][0, 0] == 0.5
    assert chunk.met.pt[0] == pytest.approx(12.345)
    assert chunk.met.phi[0] == 0.5


def test_ntuple_collections_work_in_the_select_layer(two_files: list[Path]) -> None:
    from evtkin.select import kinematics as kin
    from evtkin.select import objects as obj

    chunk = next(iter(read_ntuple(two_files[0], DETECTOR_MAPPING, step_size=2500)))
    good = obj.select(chunk.jets, pt_min=50.0, abs_eta_max=2.0)
    tagged = good[good.btag]
    ref = uproot.open(f"{two_files[0]}:events").arrays(["Jet_pt", "Jet_eta", "Jet_btag"])
    # independent count with plain awkward on uproot's arrays
    expect = (ref.Jet_pt > 50.0) & (abs(ref.Jet_eta) < 2.0) & ref.Jet_btag
    np.testing.assert_array_equal(ak.to_numpy(ak.num(tagged)), ak.to_numpy(ak.sum(expect, 1)))
    # select() orders by decreasing pT; its pT agrees with the stored value
    pts = ak.to_numpy(ak.flatten(kin.pt(good)))
    np.testing.assert_allclose(pts, ak.to_numpy(ak.flatten(good["pt"])), rtol=1e-14)
    assert ak.all(good["pt"][:, :-1] >= good["pt"][:, 1:])


# --------------------------------------------------------------------------- weights

def test_variation_weights_from_a_list_of_branches(tmp_path: Path) -> None:
    rng = np.random.default_rng(3)
    cols = {"w": rng.random(50), "up": rng.random(50), "dn": rng.random(50),
            "x": rng.random(50)}
    path = write_tree(tmp_path / "w.root", {k: np.float64 for k in cols}, [cols])
    mapping = {"weight": "w", "variation_weights": ["up", "dn"],
               "variation_names": ["scale_up", "scale_down"], "scalars": {"x": "x"}}
    r = read_ntuple(path, mapping)
    chunk = next(r)
    np.testing.assert_array_equal(ak.to_numpy(chunk.weights),
                                  np.column_stack([cols["up"], cols["dn"]]))
    assert r.variation_names == ("scale_up", "scale_down")
    # the same weights by name, fields in the column order
    assert ak.fields(chunk.named_weights) == ["scale_up", "scale_down"]
    np.testing.assert_array_equal(ak.to_numpy(chunk.named_weights["scale_down"]), cols["dn"])
    info = describe_ntuple(path, mapping)
    assert info.entries == 50
    assert info.variation_names == ("scale_up", "scale_down")


def test_no_weight_branch_means_unit_weights_and_no_variations(tmp_path: Path) -> None:
    path = write_tree(tmp_path / "u.root", {"x": np.float64}, [{"x": np.arange(7.0)}])
    r = read_ntuple(path, {"scalars": {"x": "x"}, "process_id": 4})
    chunk = next(r)
    assert ak.to_list(chunk.weight) == [1.0] * 7
    assert str(ak.type(chunk.weights)) == "7 * 0 * float64"
    assert ak.fields(chunk.named_weights) == []
    assert len(chunk.named_weights) == 7
    assert ak.to_list(chunk.process_id) == [4] * 7
    assert r.variation_names == ()


def test_constant_length_jagged_variation_branch(tmp_path: Path) -> None:
    w = np.arange(12.0).reshape(4, 3)
    path = write_tree(tmp_path / "j.root", {"vw": "var * float64", "x": np.float64},
                      [{"vw": ak.Array(w.tolist()), "x": np.zeros(4)}])
    r = read_ntuple(path, {"variation_weights": "vw", "scalars": {"x": "x"}}, step_size=3)
    chunks = list(r)
    got = np.concatenate([ak.to_numpy(c.weights) for c in chunks])
    np.testing.assert_array_equal(got, w)
    assert r.variation_names == ("vw_0", "vw_1", "vw_2")
    assert all(ak.fields(c.named_weights) == ["vw_0", "vw_1", "vw_2"] for c in chunks)
    assert describe_ntuple(path, {"variation_weights": "vw", "scalars": {"x": "x"}}
                           ).variation_names == ("vw_0", "vw_1", "vw_2")


# --------------------------------------------------------------------------- mapping

@pytest.mark.parametrize(
    ("change", "message"),
    [
        (lambda m: m.update(wieght="w"), r"input\.wieght: unknown key \(did you mean 'weight'"),
        (lambda m: m["collections"]["jets"].update(px="Jet_px"),
         r"input\.collections\.jets: mixes both systems"),
        (lambda m: m["collections"]["jets"].pop("eta"), r"input\.collections\.jets\.eta: missing"),
        (lambda m: m["collections"]["jets"].update(eta=3), r"collections\.jets\.eta: expected a "
         "branch name"),
        (lambda m: m["collections"]["jets"]["fields"].update(E="x"), r"jets\.fields\.E: 'E' is a "
         "four-vector coordinate name"),
        (lambda m: m["scalars"].update(weight="w"),
         r"input\.scalars\.weight: 'weight' is reserved"),
        (lambda m: m["scalars"].update(met="x"), r"input\.scalars\.met: the name 'met' is already "
         r"used by input\.vectors\.met"),
        (lambda m: m.update(units="TeV"), r"input\.units: expected one of GeV, MeV"),
        (lambda m: m.update(variation_weights=["a", "b"], variation_names=["x"]),
         r"input\.variation_names: 1 names for 2"),
        (lambda m: m["vectors"]["met"].pop("phi"), r"input\.vectors\.met\.phi: missing"),
        (lambda m: m.update(collections={}, vectors={}, scalars={}), r"maps no collections"),
    ],
)
def test_mapping_validation_names_the_key(change, message) -> None:  # type: ignore[no-untyped-def]
    m = copy.deepcopy(DETECTOR_MAPPING)
    change(m)
    with pytest.raises(ConfigError, match=message):
        NtupleMapping.from_dict(m)


def test_mapping_where_prefix() -> None:
    with pytest.raises(ConfigError, match=r"^samples\.reco\.input\.collections\.j\.pt: expected"):
        NtupleMapping.from_dict({"collections": {"j": {"pt": 1, "eta": "a", "phi": "b",
                                                      "mass": "c"}}},
                                where="samples.reco.input")


def test_chunks_span_small_and_empty_files(tmp_path: Path) -> None:
    sizes = [3, 0, 4, 5]
    paths = []
    for i, n in enumerate(sizes):
        batch = {"J": ak.Array([[{"pt": float(j), "eta": 0.0, "phi": 0.0}] * (j % 3)
                                for j in range(n)]),
                 "x": np.arange(n) + 100.0 * i}  # fmt: skip
        paths.append(write_tree(tmp_path / f"s{i}.root",
                                {"J": "var * {pt: float64, eta: float64, phi: float64}",
                                 "x": np.float64}, [batch] if n else []))  # fmt: skip
    mapping = {"collections": {"j": {"pt": "J_pt", "eta": "J_eta", "phi": "J_phi", "mass": 0}},
               "scalars": {"x": "x"}}
    r = read_ntuple(paths, mapping, step_size=5)
    chunks = list(r)
    assert [len(c) for c in chunks] == [5, 5, 2]
    assert ak.to_list(ak.concatenate([c.x for c in chunks])) == [
        0, 1, 2, 200, 201, 202, 203, 300, 301, 302, 303, 304]
    assert ak.to_list(chunks[1].j["pt"]) == [[2.0, 2.0], [], [], [1.0], [2.0, 2.0]]
    assert [f.entries for f in r.stats.files] == sizes
