"""``evtkin merge``: the results folders of jobs that each read a part of the inputs add up to
the results of one run over all of them (Σw, Σw², counts, cutflows, cross sections, bands).

The per-event weights of IDWTUP = -4 files are XWGTUP / N with N the events of all files of a
sample together (Les Houches accord hep-ph/0109068, REFERENCES §1.4), so a merge that only
added normalised histograms would get them wrong; the scale envelope is the bin-by-bin min/max
of the members and the nominal (common practice, REFERENCES §2.11).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from evtkin.cli import main as cli_main
from evtkin.errors import ResultsError
from evtkin.output.tables import load_results
from evtkin.run.merge import merge_results
from evtkin.run.parts import parse_part, split_files
from evtkin.run.pipeline import run
from test_bands_pipeline_lhe import lhe_text, write

SCALE_IDS = [("s0", "muR=1 muF=1"), ("s1", "muR=2 muF=1"), ("s2", "muR=0.5 muF=1")]
GROUPS = [("scale_variation", "envelope", SCALE_IDS)]


def _file(d: Path, name: str, seed: int, n: int) -> Path:
    rng = np.random.default_rng(seed)
    scale = rng.uniform(0.0, 60.0, n)
    x = rng.uniform(0.5, 2.0, n) * np.where(rng.uniform(size=n) < 0.1, -1, 1)
    var = x[:, None] * rng.uniform(0.8, 1.2, (n, 3))
    return write(d / name, lhe_text(list(scale), list(x), idwtup=-4, groups=GROUPS,
                                    variations=var, processes=((3.0, 0.1, 1),)))


CONFIG = """
[analysis]
name = "merge test"
luminosity_fb = 2.0

[samples.a]
files = ["a0.lhe", "a1.lhe", "a2.lhe"]

[samples.b]
files = ["b0.lhe"]
cross_section_pb = 7.5

[objects.photons]
particles = ["photons"]

[[step]]
name = "scale above 5"
require = "scale > 5"

[[step]]
name = "scale below 50"
require = "scale < 50"

[histograms.h]
x = { value = "scale", edges = [0.0, 10.0, 20.0, 40.0] }
normalise = "xsec_per_bin"

[histograms.shape]
x = { value = "scale", bins = 6, range = [0.0, 60.0] }
normalise = "unit_area"
after = "scale above 5"

[histograms.n]
x = { value = "scale", bins = 3, range = [0.0, 60.0] }
normalise = "events"

[histograms.photon_pt]
x = { value = "photons[0].pt", bins = 4, range = [0.0, 20.0] }
normalise = "raw"
regions = "all"

[regions.low]
require = "scale < 30"

[systematics.pes]
objects = "photons"
kind = "energy_scale"
shift = 0.5

[uncertainties.pes]
method = "updown"
systematic = "pes"

[uncertainties.scale]
group = "scale_variation"
method = "envelope"

[output]
formats = ["json", "cutflow", "csv"]
"""


@pytest.fixture(scope="module")
def setup(tmp_path_factory):  # type: ignore[no-untyped-def]
    d = tmp_path_factory.mktemp("merge")
    for k, (name, n) in enumerate([("a0.lhe", 40), ("a1.lhe", 25), ("a2.lhe", 33),
                                   ("b0.lhe", 30)]):
        _file(d, name, k, n)
    cfg = d / "config.toml"
    cfg.write_text(CONFIG, encoding="utf-8")
    run(cfg, out=d / "full")
    run(cfg, out=d / "p1", part=(1, 2))
    run(cfg, out=d / "p2", part=(2, 2))
    return d


def _same(a: object, b: object) -> None:
    assert json.dumps(a, sort_keys=True) == json.dumps(b, sort_keys=True)


def test_two_parts_merge_to_the_single_run(setup) -> None:  # type: ignore[no-untyped-def]
    d = setup
    p1 = json.loads((d / "p1" / "provenance.json").read_text())
    p2 = json.loads((d / "p2" / "provenance.json").read_text())
    assert p1["inputs"]
    assert p2["inputs"]
    assert {i["path"] for i in p1["inputs"]}.isdisjoint(i["path"] for i in p2["inputs"])
    merged = merge_results(d / "merged", [d / "p1", d / "p2"])
    assert not merged.provenance["merge_warnings"]
    full = load_results(d / "full")
    got = load_results(d / "merged")
    assert set(got.samples) == {"a", "b"}
    for s, fs in full.samples.items():
        gs = got.samples[s]
        _same(gs.xsec, fs.xsec)
        _same(gs.cutflow, fs.cutflow)
        _same(gs.region_cutflows, fs.region_cutflows)
        assert "photon_pt@low" in fs.histograms
        assert gs.variations == fs.variations
        for h, fh in fs.histograms.items():
            gh = gs.histograms[h]
            assert np.array_equal(gh.values, fh.values)
            assert np.array_equal(gh.variances, fh.variances)
            assert gh.entries == fh.entries
            assert fh.counts is not None
            assert np.array_equal(gh.counts, fh.counts)
            assert set(gh.bands) == set(fh.bands)
            assert fh.bands
            for b in fh.bands:
                assert np.array_equal(gh.bands[b].down, fh.bands[b].down)
                assert np.array_equal(gh.bands[b].up, fh.bands[b].up)
    # the per-part results are not the full ones (IDWTUP = -4 divides by all events read)
    part = load_results(d / "p1").samples["a"]
    assert part.xsec["n_events"] < full.samples["a"].xsec["n_events"]
    prov = json.loads((d / "merged" / "provenance.json").read_text())
    assert sorted(Path(i["path"]).name for i in prov["inputs"]) == [
        "a0.lhe", "a1.lhe", "a2.lhe", "b0.lhe"]
    assert all(i["sha256"] for i in prov["inputs"])
    assert [m["part"] for m in prov["merged_from"]] == [{"index": 1, "of": 2},
                                                         {"index": 2, "of": 2}]
    assert (d / "merged" / "cutflow").is_dir()
    assert (d / "merged" / "partial.npz").is_file()


def test_a_merged_folder_merges_again(setup, tmp_path) -> None:  # type: ignore[no-untyped-def]
    d = setup
    merge_results(tmp_path / "m1", [d / "p1"])
    merge_results(tmp_path / "m2", [tmp_path / "m1", d / "p2"])
    full = load_results(d / "full").samples["a"].histograms["h"]
    got = load_results(tmp_path / "m2").samples["a"].histograms["h"]
    assert np.array_equal(got.values, full.values)


def test_missing_parts_warn(setup, tmp_path, capsys) -> None:  # type: ignore[no-untyped-def]
    assert cli_main(["merge", str(tmp_path / "m"), str(setup / "p1")]) == 0
    err = capsys.readouterr().err
    assert "read by none of the folders" in err
    assert "parts 2 of 2" in err


def test_the_same_inputs_twice_is_an_error(setup, tmp_path) -> None:  # type: ignore[no-untyped-def]
    with pytest.raises(ResultsError, match=r"read by both .*each input may be merged once"):
        merge_results(tmp_path / "m", [setup / "full", setup / "p1"])
    with pytest.raises(ResultsError, match="given twice"):
        merge_results(tmp_path / "m", [setup / "p1", setup / "p1"])


def test_another_config_is_an_error(setup, tmp_path, capsys) -> None:  # type: ignore[no-untyped-def]
    cfg = setup / "other.toml"
    cfg.write_text(CONFIG.replace("scale < 50", "scale < 45"), encoding="utf-8")
    run(cfg, out=tmp_path / "other", part=(2, 2))
    rc = cli_main(["merge", str(tmp_path / "m"), str(setup / "p1"), str(tmp_path / "other")])
    assert rc == 1
    err = capsys.readouterr().err
    assert "different configs" in err
    assert "sha256" in err


def test_a_folder_without_sums_is_an_error(tmp_path) -> None:  # type: ignore[no-untyped-def]
    with pytest.raises(ResultsError, match="no such results folder"):
        merge_results(tmp_path / "m", [tmp_path / "nothing"])


def test_parts_cover_every_file_once() -> None:
    files = [("a", 0, 50), ("a", 1, 10), ("b", 0, 30), ("b", 1, 30), ("c", 0, 5)]
    parts = split_files(files, 3)
    assert sorted(k for p in parts for k in p) == sorted((s, i) for s, i, _ in files)
    assert all(parts)
    assert split_files(files, 3) == parts  # every job computes the same split
    assert parse_part("2/5") == (2, 5)
    for bad in ("0/2", "3/2", "x", "1/0", "1-2"):
        with pytest.raises(ValueError, match="K/N"):
            parse_part(bad)


def test_an_ntuple_run_merges_back_to_itself(tmp_path) -> None:  # type: ignore[no-untyped-def]
    repo = Path(__file__).resolve().parents[1]
    one = run(repo / "configs" / "ttbar_reco.toml", out=tmp_path / "one", max_events=300)
    merged = merge_results(tmp_path / "merged", [tmp_path / "one"])
    for s, res in one.samples.items():
        for h, nh in res.histograms.items():
            assert np.array_equal(merged.samples[s].histograms[h].rows, nh.rows)
    prov = json.loads((tmp_path / "merged" / "provenance.json").read_text())
    assert prov["inputs"][0]["format"] == "root"  # the ntuple run information came back


def test_the_parts_reader_warnings_are_merged(setup, tmp_path, capsys) -> None:  # type: ignore[no-untyped-def]
    import shutil

    d = setup
    said = {  # what lenient reading records (one message per file, naming it)
        "p1": ["a0.lhe: skipped 1 damaged part(s) of the event stream, at line(s) 7; x",
               "the same message from both parts"],
        "p2": ["the same message from both parts",
               "b0.lhe: skipped 2 damaged part(s) of the event stream, at line(s) 9, 20; y"],
    }
    for name, messages in said.items():
        shutil.copytree(d / name, tmp_path / name)
        path = tmp_path / name / "provenance.json"
        prov = json.loads(path.read_text(encoding="utf-8"))
        assert prov["read_warnings"] == []  # the parts read undamaged files
        prov["read_warnings"] = messages
        path.write_text(json.dumps(prov), encoding="utf-8")
    merged = merge_results(tmp_path / "m", [tmp_path / "p1", tmp_path / "p2"])
    expected = [said["p1"][0], said["p1"][1], said["p2"][1]]  # each once, in folder order
    assert merged.provenance["read_warnings"] == expected
    written = json.loads((tmp_path / "m" / "provenance.json").read_text(encoding="utf-8"))
    assert written["read_warnings"] == expected
    # which part gave which
    by_part = {(e["part"]["index"], e["part"]["of"]): e["read_warnings"]
               for e in written["merged_from"]}
    assert by_part == {(1, 2): said["p1"], (2, 2): said["p2"]}
    # the command says them too, each once
    capsys.readouterr()
    assert cli_main(["merge", str(tmp_path / "m1"), str(tmp_path / "p1"),
                     str(tmp_path / "p2")]) == 0
    err = capsys.readouterr().err
    assert [x for x in err.splitlines() if x.startswith("warning: read by a part: ")] == [
        f"warning: read by a part: {m}" for m in expected]
    # a merged folder merged again keeps them, and a folder without any adds none
    again = merge_results(tmp_path / "m2", [tmp_path / "m"])
    assert again.provenance["read_warnings"] == expected
    plain = merge_results(tmp_path / "m3", [d / "p1", d / "p2"])
    assert plain.provenance["read_warnings"] == []
