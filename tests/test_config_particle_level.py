"""The particle-level vocabulary of ``[objects]`` and ``[missing_pt]``: what it reads, the
errors naming key and line (a recipe on an LHE sample, typos, bad values), and the objects it
builds on showered events and, in the parton-level reading, on LHE events."""

from __future__ import annotations

import math
from pathlib import Path

import awkward as ak
import numpy as np
import pytest

from evtkin.config import load_config
from evtkin.errors import ConfigError
from evtkin.select import build
from evtkin.select import particle_level as pl

REPO = Path(__file__).resolve().parents[1]
SHOWER = REPO / "samples" / "toy_ttbar_shower.hepmc.gz"
LHE = REPO / "samples" / "toy_ttbar.lhe.gz"

BASE = f'''\
[samples.ttbar]
files = ["{SHOWER}"]
format = "hepmc"
truth_files = ["{LHE}"]

[objects.leptons]
particles = ["light_leptons"]
prompt = true
dressing = {{ radius = 0.1 }}
min_pt = 25.0

[objects.jets]
particles = ["jets_with_b"]
min_pt = 25.0

[objects.jets.clustering]
algorithm = "anti-kt"
radius = 0.4
inputs = "stable"
exclude = ["leptons", "invisibles"]
ghosts = ["b"]

[missing_pt]
name = "met"
prompt = true

[histograms.n_jets]
x = {{ value = "count(jets)", bins = 10, range = [-0.5, 9.5] }}
'''


def write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "analysis.toml"
    path.write_text(text, encoding="utf-8")
    return path


def error_for(tmp_path: Path, text: str) -> str:
    with pytest.raises(ConfigError) as info:
        load_config(write(tmp_path, text))
    return str(info.value)


def line_of(text: str, fragment: str) -> int:
    return next(i for i, ln in enumerate(text.splitlines(), start=1) if fragment in ln)


def test_the_particle_level_keys_are_read(tmp_path: Path) -> None:
    cfg = load_config(write(tmp_path, BASE))
    lep, jets = cfg.objects["leptons"], cfg.objects["jets"]
    assert lep.prompt
    assert lep.dressing_radius == 0.1
    assert jets.cluster_inputs == "stable"
    assert jets.cluster_exclude == ("leptons", "invisibles")
    assert jets.ghosts == ("b",)
    assert jets.ghost_min_pt == 5.0  # the documented default (common practice: 5 GeV)
    assert cfg.missing_pt is not None
    assert cfg.missing_pt.prompt
    assert cfg.samples["ttbar"].truth_files == (LHE,)
    assert lep.particle_level == ("prompt", "dressing")


@pytest.mark.parametrize(("old", "new", "key"), [
    ("prompt = true\n", "prompt = true\n", "objects.leptons.prompt"),
    ("prompt = true\ndressing", "dressing", "objects.leptons.dressing"),
])
def test_a_particle_level_recipe_on_an_lhe_sample_names_the_key_and_line(
        tmp_path: Path, old: str, new: str, key: str) -> None:
    text = BASE.replace(f'files = ["{SHOWER}"]\nformat = "hepmc"\ntruth_files = ["{LHE}"]',
                        f'files = ["{LHE}"]').replace(old, new, 1)
    msg = error_for(tmp_path, text)
    word = key.rsplit(".", 1)[1]
    assert msg.startswith(f"{tmp_path / 'analysis.toml'}:{line_of(text, word + ' =')}: {key}:")
    assert "particle-level recipe" in msg
    assert "LHE file" in msg
    assert "'ttbar'" in msg


def test_stable_inputs_and_prompt_missing_pt_on_an_lhe_sample_are_refused(
        tmp_path: Path) -> None:
    lhe = BASE.replace(f'files = ["{SHOWER}"]\nformat = "hepmc"\ntruth_files = ["{LHE}"]',
                       f'files = ["{LHE}"]')
    no_leptons = lhe.replace("prompt = true\ndressing = { radius = 0.1 }\n", "")
    msg = error_for(tmp_path, no_leptons)
    assert f":{line_of(no_leptons, 'inputs =')}: objects.jets.clustering.inputs:" in msg
    only_met = no_leptons.replace('inputs = "stable"\nexclude = ["leptons", "invisibles"]\n'
                                  'ghosts = ["b"]\n', "")
    msg = error_for(tmp_path, only_met)
    assert f":{line_of(only_met, 'prompt = true')}: missing_pt.prompt:" in msg


@pytest.mark.parametrize(("old", "new", "expect", "at"), [
    ("dressing = {", "dresing = {", "unknown key 'dresing'", "dresing"),
    ("dressing = { radius", "dressing = { radios", "unknown key 'radios'", "radios"),
    ('"anti-kt"', '"antikt"', "did you mean 'anti-kt'?", "antikt"),
    ('inputs = "stable"', 'inputs = "all"', "expected one of 'selected', 'stable'",
     'inputs = "all"'),
    ('ghosts = ["b"]', 'ghosts = ["bottom"]', "expected one of 'b', 'c', 'tau', got 'bottom'",
     "bottom"),
    ('"leptons", "invisibles"', '"lepton", "invisibles"', "'lepton' is not a defined object "
     "collection (or 'invisibles')", '"lepton",'),
    ('"leptons", "invisibles"', '"jets", "invisibles"', "cannot be left out of itself",
     '"jets", "invisibles"'),
    ("prompt = true\n", 'prompt = "yes"\n', "expected true or false", '"yes"'),
    ("min_pt = 25.0\n\n[objects.jets]", "min_pt = 25.0\nclustering = { radius = 0.4 }\n\n"
     "[objects.jets]", "give dressing or clustering, not both", "dressing ="),
    ("dressing = { radius = 0.1 }", "dressing = { radius = 0.1 }\nisolation = { against = "
     '"photons", within_dr = 0.3, max_relative_pt = 0.1 }', "not with max_relative_pt",
     "isolation ="),
    ('ghosts = ["b"]\n', "ghost_min_pt = 3.0\n", "needs ghosts = [...]", "ghost_min_pt"),
])
def test_bad_particle_level_values_name_key_and_line(tmp_path: Path, old: str, new: str,
                                                     expect: str, at: str) -> None:
    text = BASE.replace(old, new, 1)
    assert text != BASE
    msg = error_for(tmp_path, text)
    assert expect in msg
    assert msg.startswith(f"{tmp_path / 'analysis.toml'}:{line_of(text, at)}: ")


def test_collections_excluding_each_other_in_a_circle_are_refused(tmp_path: Path) -> None:
    text = BASE + '''
[objects.other_jets]
clustering = { radius = 0.6, inputs = "stable", exclude = ["more_jets"] }

[objects.more_jets]
clustering = { radius = 0.8, inputs = "stable", exclude = ["other_jets"] }
'''
    msg = error_for(tmp_path, text)
    assert "leave each other out" in msg
    assert "other_jets → more_jets → other_jets" in msg


def test_truth_files_only_for_ntuples_and_hepmc(tmp_path: Path) -> None:
    text = BASE.replace('format = "hepmc"', 'format = "lhe"')
    msg = error_for(tmp_path, text)
    assert f":{line_of(text, 'truth_files')}: samples.ttbar.truth_files: only for ROOT ntuples " \
        "and HepMC samples" in msg


def test_stable_jets_with_truth_and_responses_need_particles(tmp_path: Path) -> None:
    text = BASE.replace('[objects.jets]\nparticles = ["jets_with_b"]\n', "[objects.jets]\n") + \
        "response = true\n"
    msg = error_for(tmp_path, text)
    assert "objects.jets.clustering.inputs" in msg
    assert "give particles = [...]" in msg
    # without a response histogram the parton-level reading is not needed
    load_config(write(tmp_path, BASE.replace('[objects.jets]\nparticles = ["jets_with_b"]\n',
                                             "[objects.jets]\n")))


# --------------------------------------------------------------------------- built objects

@pytest.fixture(scope="module")
def shower_chunk() -> ak.Array:
    from evtkin.io.hepmc import read_hepmc

    return next(iter(read_hepmc(SHOWER, step_size=60)))


def _objects(text: str, tmp_path: Path, particles: ak.Array) -> dict[str, ak.Array]:
    cfg = load_config(write(tmp_path, text))
    return build.particle_objects(particles, cfg.objects, cfg.overlap_removal, cfg.missing_pt)


def test_config_objects_follow_the_recipes(tmp_path: Path, shower_chunk: ak.Array) -> None:
    parts = shower_chunk["particles"]
    objs = _objects(BASE, tmp_path, parts)
    lep, jets, met = objs["leptons"], objs["jets"], objs["met"]
    # dressed: pT above the cut, dressed energy >= bare energy, ordered by pT
    lpt = np.hypot(ak.to_numpy(ak.flatten(lep.px)), ak.to_numpy(ak.flatten(lep.py)))
    assert lpt.size > 10
    assert lpt.min() > 25.0
    assert np.all(ak.to_numpy(ak.flatten(lep.energy - lep.bare_energy)) >= 0.0)
    two = lep[ak.num(lep) >= 2]
    assert np.all(ak.to_numpy(two.pt[:, 0]) >= ak.to_numpy(two.pt[:, 1]))
    # every lepton is a prompt stable e/μ of the record
    ids = ak.to_numpy(ak.flatten(parts.pdgid[lep.index]))
    assert set(np.abs(ids)) <= {11, 13}
    assert np.all(ak.to_numpy(ak.flatten(pl.prompt(parts)[lep.index])))
    # no jet holds a lepton, one of its photons or a neutrino
    for e in range(len(parts)):
        held = set(ak.to_list(ak.flatten(jets.constituents[e])))
        own = set(ak.to_list(lep.index[e])) | set(ak.to_list(ak.flatten(lep.photons[e])))
        assert not held & own
        nu = {i for i, p in enumerate(ak.to_list(parts.pdgid[e])) if abs(p) in (12, 14, 16)}
        assert not held & nu
    assert "btag" in ak.fields(jets)
    assert ak.sum(jets.btag) > 0
    # the prompt neutrinos' vector sum
    nu = parts[(np.abs(parts.pdgid) == 14) | (np.abs(parts.pdgid) == 12)
               | (np.abs(parts.pdgid) == 16)]
    nu = nu[(nu.status == 1) & pl.prompt(parts)[(np.abs(parts.pdgid) == 14)
                                               | (np.abs(parts.pdgid) == 12)
                                               | (np.abs(parts.pdgid) == 16)]]
    assert np.allclose(ak.to_numpy(met.px), ak.to_numpy(ak.sum(nu.px, axis=1)), atol=1e-9)


def test_relative_isolation_and_kt_family(tmp_path: Path, shower_chunk: ak.Array) -> None:
    parts = shower_chunk["particles"]
    text = BASE.replace("min_pt = 25.0\n\n[objects.jets]", "min_pt = 25.0\nisolation = { "
                        "within_dr = 0.3, max_relative_pt = 0.05 }\n\n[objects.jets]", 1)
    loose = _objects(BASE, tmp_path, parts)["leptons"]
    tight = _objects(text, tmp_path, parts)["leptons"]
    rel = pl.isolation(loose, parts, radius=0.3)
    assert ak.sum(ak.num(tight)) == ak.sum(rel < 0.05) < ak.sum(ak.num(loose))
    kt = _objects(BASE.replace('"anti-kt"', '"kt"'), tmp_path, parts)["jets"]
    ca = _objects(BASE.replace('"anti-kt"', '"cambridge"'), tmp_path, parts)["jets"]
    akt = _objects(BASE, tmp_path, parts)["jets"]
    # the same inputs: the algorithms differ in the clustering, not in what is clustered
    assert ak.to_list(ak.num(kt)) != ak.to_list(ak.num(akt)) or \
        not np.allclose(ak.to_numpy(ak.flatten(kt.px)), ak.to_numpy(ak.flatten(akt.px)))
    assert ak.sum(ak.num(ca)) > 0


def test_the_parton_level_reading_on_lhe_events_is_the_parton_config(tmp_path: Path) -> None:
    """On the LHE partner events (truth_files) the particle-level keys are not applied: the
    objects equal those of the same config without them."""
    from evtkin.io.lhe import read_lhe

    lhe = next(iter(read_lhe(LHE, step_size=200)))["particles"]
    plevel = _objects(BASE, tmp_path, lhe)
    parton_text = BASE.replace(f'files = ["{SHOWER}"]\nformat = "hepmc"\ntruth_files = '
                               f'["{LHE}"]', f'files = ["{LHE}"]').replace(
        "prompt = true\ndressing = { radius = 0.1 }\n", "").replace(
        'inputs = "stable"\nexclude = ["leptons", "invisibles"]\nghosts = ["b"]\n', "").replace(
        'name = "met"\nprompt = true', 'name = "met"')
    parton = _objects(parton_text, tmp_path, lhe)
    for name in ("leptons", "jets"):
        got = ak.to_list(plevel[name])
        assert got == ak.to_list(parton[name])
        assert sum(len(e) for e in got) > 50
    assert ak.to_list(plevel["jets"].btag) == ak.to_list(parton["jets"].btag)
    assert np.allclose(ak.to_numpy(plevel["met"].px), ak.to_numpy(parton["met"].px))
    assert not math.isnan(float(ak.sum(parton["met"].px)))


def test_excluding_a_particle_collection_and_prompt_inputs(tmp_path: Path,
                                                           shower_chunk: ak.Array) -> None:
    """A plain particle collection (prompt photons) left out of the clustering: no jet holds
    one of its particles; with prompt = true only prompt particles are clustered."""
    parts = shower_chunk["particles"]
    text = BASE.replace('exclude = ["leptons", "invisibles"]',
                        'exclude = ["leptons", "invisibles", "photons"]') + '''
[objects.photons]
particles = ["photons"]
prompt = true
min_pt = 0.1
'''
    objs = _objects(text, tmp_path, parts)
    photons, jets = objs["photons"], objs["jets"]
    assert ak.sum(ak.num(photons)) >= 5
    for e in range(len(parts)):
        held = set(ak.to_list(ak.flatten(jets.constituents[e])))
        assert not held & set(ak.to_list(photons.index[e]))
    prompt_text = text.replace('inputs = "stable"', 'inputs = "stable"\n') \
        .replace("[objects.jets]\n", "[objects.jets]\nprompt = true\n")
    pjets = _objects(prompt_text, tmp_path, parts)["jets"]
    flags = pl.prompt(parts)
    for e in range(len(parts)):
        held = ak.to_list(ak.flatten(pjets.constituents[e]))
        assert all(ak.to_list(flags[e][held])) if held else True
    # B-hadron decay products are not prompt: fewer constituents than without prompt
    assert ak.sum(pjets.n_constituents) < ak.sum(jets.n_constituents)
