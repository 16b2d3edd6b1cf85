"""Keep docs/config.md honest: its examples load and run, its error messages are the real ones,
and every table, key and allowed value the config reader accepts is documented.

The complete examples (```toml blocks whose first line starts with ``# complete example``) name
the shipped files in ``samples/`` relative to the repository root, so they are loaded with
``base_dir`` = the repository root and evaluated on the first events of those files.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path
from typing import Any

import awkward as ak
import numpy as np
import pytest

from evtkin import config as cfgmod
from evtkin.errors import ConfigError
from evtkin.expr import ATTRIBUTES, FUNCTIONS

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

REPO = Path(__file__).resolve().parents[1]
DOC = REPO / "docs" / "config.md"
TEXT = DOC.read_text(encoding="utf-8")
N_EVENTS = 300  # events per sample evaluated for each example

_FENCE = re.compile(r"^```(\w*)\n(.*?)^```\s*$", re.S | re.M)


def _blocks() -> list[tuple[str, str]]:
    """Every fenced block of the page as (language, text), in order."""
    return [(m.group(1), m.group(2)) for m in _FENCE.finditer(TEXT)]


def _first_line(text: str) -> str:
    return text.lstrip().splitlines()[0] if text.strip() else ""


COMPLETE = [b for lang, b in _blocks() if lang == "toml"
            and _first_line(b).startswith("# complete example")]


def _errors() -> list[tuple[str, str]]:
    blocks = _blocks()
    out = []
    for k, (lang, b) in enumerate(blocks):
        if lang == "toml" and _first_line(b).startswith("# error example"):
            nxt = blocks[k + 1]
            assert nxt[0] == "text", f"error example {_first_line(b)!r} needs a ```text block"
            out.append((b, nxt[1]))
    return out


ERRORS = _errors()


def _title(block: str) -> str:
    return _first_line(block).split(":", 1)[-1].strip()


def _sections() -> dict[str, str]:
    """Level-2 heading → its text (up to the next level-2 heading)."""
    parts = re.split(r"^## ", TEXT, flags=re.M)
    return {p.splitlines()[0].strip(): p for p in parts[1:]}


SECTIONS = _sections()


def _section(fragment: str) -> str:
    hits = [body for head, body in SECTIONS.items() if fragment in head]
    assert len(hits) == 1, f"docs/config.md needs exactly one '## ' section with {fragment!r}"
    return hits[0]


def _load(tmp_path: Path, text: str) -> Any:
    path = tmp_path / "config.toml"
    path.write_text(text, encoding="utf-8")
    return cfgmod.load_config(path, base_dir=REPO)


# --------------------------------------------------------------------------- examples

def test_page_has_examples_of_every_kind() -> None:
    # at least: overview, objects, composites, histograms, uncertainties, ROOT ntuple
    assert len(COMPLETE) >= 6
    assert len(ERRORS) >= 3


def test_every_toml_block_is_valid_toml() -> None:
    for lang, block in _blocks():
        if lang == "toml":
            tomllib.loads(block)  # fragments too must be valid TOML


def _first_chunk(plan: Any, name: str) -> Any:
    spec = plan.config.samples[name]
    if spec.format == "root":
        from evtkin.io.ntuple import read_ntuple
        from evtkin.run.inputs.ntuple import config_fields

        reader = read_ntuple(spec.files[0], spec.input, step_size=N_EVENTS, entry_start=0,
                             entry_stop=N_EVENTS, fields=config_fields(plan.config, spec.input))
        try:
            return next(iter(reader))
        finally:
            reader.close()
    if spec.format == "hepmc":
        from evtkin.io.hepmc import read_hepmc

        return next(iter(read_hepmc(spec.files[0], step_size=N_EVENTS)))
    from evtkin.io.lhe import read_lhe

    return next(iter(read_lhe(spec.files[0], step_size=N_EVENTS)))


@pytest.mark.parametrize("block", COMPLETE, ids=[_title(b) for b in COMPLETE])
def test_complete_example_loads_and_runs(tmp_path: Path, block: str) -> None:
    from evtkin.hists.recipes import check_config_against_files
    from evtkin.run.plan import analyse_chunk, build_plan, hist_entries

    cfg = _load(tmp_path, block)
    assert cfg.samples
    assert cfg.histograms
    for spec in cfg.samples.values():
        for f in spec.files:
            assert f.is_file(), f"{_title(block)}: sample file {f} does not exist"
    check_config_against_files(cfg)  # recipe groups and ids against the files' headers
    plan = build_plan(cfg)
    filled = 0
    for name in cfg.samples:
        chunk = _first_chunk(plan, name)
        view, masks = analyse_chunk(plan, chunk)
        assert len(masks) == len(plan.cutflow_rows)
        assert len(masks) == 1 + len(cfg.steps) + sum(len(r.steps) for r in cfg.regions.values())
        for hname in plan.histograms_for(name):
            h = plan.histogram(hname)
            row = plan.row_of(hname)
            if not h.regions:
                assert row == ([s.name for s in cfg.steps].index(h.after) + 1
                               if h.after is not None else len(cfg.steps))
            values, rows = hist_entries(view, hname, masks[row])
            assert len(values) == len(h.axes)
            assert all(len(v) == len(rows) for v in values)
            filled += len(rows)
        for q in cfg.quantities.values():
            view.evaluate(q, "quantity")
    assert filled > 0, f"{_title(block)}: no histogram got any entry from {N_EVENTS} events"


def _example(word: str) -> str:
    hits = [b for b in COMPLETE if word in _first_line(b)]
    assert len(hits) == 1, word
    return hits[0]


def test_leptonic_w_example_meets_the_w_mass_constraint(tmp_path: Path) -> None:
    """The page says: with real roots m(ℓν) = w_mass, with complex roots (real part) above it."""
    from evtkin.run.plan import analyse_chunk, build_plan

    cfg = _load(tmp_path, _example("W and top-pair reconstruction"))
    assert cfg.composites["w_lep"].options["w_mass"] == pytest.approx(80.3692)  # PDG 2024 m_W
    plan = build_plan(cfg)
    view, _ = analyse_chunk(plan, _first_chunk(plan, "ttbar"))
    m = ak.to_numpy(ak.drop_none(view.resolve("w_lep").mass)).astype(float)
    assert m.size > 20
    # PDG 2024: m_W = 80.3692 GeV; the quadratic constraint reproduces it to rounding
    assert np.all(m >= 80.3692 * (1 - 1e-6))
    assert np.mean(np.abs(m - 80.3692) < 1e-6) > 0.3


def test_pair_example_respects_its_window(tmp_path: Path) -> None:
    """Documented: mass_window keeps low <= m < high; min_dr keeps ΔR >= min_dr."""
    from evtkin.run.plan import analyse_chunk, build_plan

    cfg = _load(tmp_path, _example("W and top-pair reconstruction"))
    plan = build_plan(cfg)
    view, _ = analyse_chunk(plan, _first_chunk(plan, "ttbar"))
    lj = view.resolve("lepton_jet")
    m = ak.to_numpy(ak.flatten(lj.mass)).astype(float)
    assert m.size > 0
    assert m.min() >= 40.0
    assert m.max() < 160.0
    d0, d1 = ak.flatten(lj.d0), ak.flatten(lj.d1)
    # textbook: ΔR = √(Δη² + Δφ²), Δφ wrapped into (−π, π]
    dphi = np.angle(np.exp(1j * (ak.to_numpy(d0.phi) - ak.to_numpy(d1.phi))))
    dr = np.hypot(ak.to_numpy(d0.eta) - ak.to_numpy(d1.eta), dphi)
    assert dr.min() >= 0.4 - 1e-12


@pytest.mark.parametrize(("block", "expected"), ERRORS, ids=[_title(b) for b, _ in ERRORS])
def test_error_example_gives_the_documented_message(tmp_path: Path, block: str,
                                                    expected: str) -> None:
    with pytest.raises(ConfigError) as info:
        _load(tmp_path, block)
    got = str(info.value).replace(str(tmp_path / "config.toml"), "config.toml")
    assert got.rstrip() == expected.rstrip()


# --------------------------------------------------------------------------- keys

# The keys src/evtkin/config/ accepts, per table. The readers keep them inside their
# functions (not as module-level constants), so they are listed here from reading it;
# test_listed_keys_match_what_config_reads checks this list against what the reader asks for.
KEYS: dict[str, tuple[str, ...]] = {
    "analysis": ("name", "description", "note", "luminosity_fb", "step_size", "weight"),
    "samples": ("files", "label", "format", "cross_section_pb", "luminosity_fb", "toy", "input",
                "weights_give", "truth_files", "weight", "data"),
    "objects": ("particles", "status", "min_pt", "max_abs_eta", "max_abs_rapidity",
                "from_decay_of", "isolation", "clustering", "require", "from", "prompt",
                "dressing"),
    "objects.isolation": ("against", "against_objects", "within_dr", "min_pt",
                          "max_relative_pt"),
    "objects.clustering": ("algorithm", "radius", "inputs", "exclude", "ghosts",
                           "ghost_min_pt"),
    "objects.dressing": ("radius",),
    "overlap_removal": ("remove", "near", "within_dr"),
    "missing_pt": ("name", "particles", "from", "prompt"),
    "step": ("name", "require"),
    "composites.pair": ("build", "of", "mass_window", "min_dr", "max_dr", "opposite_charge",
                        "same_flavour", "best_mass"),
    "composites.leptonic_w": ("build", "lepton", "missing_pt", "w_mass", "root"),
    "composites.ttbar_lepton_jets": ("build", "lepton", "jets", "missing_pt", "use_b_tags",
                                     "neutrino_root", "w_mass", "top_mass", "w_resolution",
                                     "top_resolution", "max_jets"),
    "histograms": ("title", "x", "y", "normalise", "after", "samples", "response", "regions",
                   "plot"),
    "histograms.plot": cfgmod.PLOT_KEYS,
    "plot": (*cfgmod.PLOT_KEYS, "sqrt_s_gev"),
    "measured": ("label", "toy", "tables"),
    "histograms.axis": ("value", "bins", "range", "edges", "label", "unit"),
    "output": ("directory", "formats", "plot_formats"),
    "uncertainties": ("automatic",),
    "uncertainties.recipe": ("method", "group", "ids", "drop_anticorrelated", "of", "samples",
                             "systematic"),
    "regions": ("after", "require", "steps"),
    "systematics": ("objects", "kind", "shift", "resolution", "drop", "seed"),
    "skims": ("columns", "after", "region", "formats", "samples", "variation_weights"),
}

# where each table is documented (a fragment of its '## ' heading)
HOME = {
    "analysis": "`[analysis]`", "samples": "`[samples.NAME]`", "objects": "`[objects.NAME]`",
    "overlap_removal": "`[[overlap_removal]]`", "missing_pt": "`[missing_pt]`",
    "step": "`[[step]]`", "composites": "`[composites.NAME]`", "histograms": "`[histograms.NAME]`",
    "output": "`[output]`", "uncertainties": "`[uncertainties]`", "classes": "`[classes]`",
    "quantities": "`[quantities]`", "regions": "`[regions.NAME]`",
    "tables": "Event weights and tables", "systematics": "`[systematics.NAME]`",
    "skims": "`[skims.NAME]`", "plot": "`[plot]`",
    "measured": "`[measured.NAME]`",
}


def test_every_top_level_table_has_a_section() -> None:
    tops = cfgmod._TOP  # the module-level tuple of accepted top-level names
    assert set(tops) == set(HOME)
    for name in tops:
        _section(HOME[name])


@pytest.mark.parametrize("table", sorted(KEYS))
def test_every_key_is_documented_in_its_section(table: str) -> None:
    body = _section(HOME[table.split(".")[0]])
    missing = [k for k in KEYS[table] if f"`{k}`" not in body]
    assert not missing, f"[{table}] keys not documented in their section: {missing}"


def _record_known(monkeypatch: pytest.MonkeyPatch) -> dict[str, set[str]]:
    """Patch the reader's table class to record the keys it asks for, per generic table."""
    seen: dict[str, set[str]] = {}
    original = cfgmod._Table.done
    users = {"samples", "objects", "composites", "histograms", "uncertainties", "regions",
             "systematics", "skims", "measured"}

    def done(self: Any) -> None:
        p = self.path
        known = set(self.known)
        key: str | None = None
        if len(p) == 1 and p[0] in ("analysis", "missing_pt", "output", "plot"):
            key = p[0]
        elif len(p) == 1 and p[0] == "uncertainties":
            key = "uncertainties"
            known = {k for k in known if not isinstance(self.data.get(k), dict)}
        elif len(p) == 2 and p[0] in ("overlap_removal", "step"):
            key = p[0]
        elif len(p) == 2 and p[0] == "composites":
            key = f"composites.{self.data['build']}"
        elif len(p) == 2 and p[0] == "uncertainties":
            key = "uncertainties.recipe"
        elif len(p) == 2 and p[0] in users:
            key = p[0]
        elif len(p) == 3 and p[0] == "objects":
            key = f"objects.{p[2]}"
        elif len(p) == 3 and p[0] == "histograms":
            key = "histograms.plot" if p[2] == "plot" else "histograms.axis"
        if key is not None:
            seen.setdefault(key, set()).update(known)
        original(self)

    monkeypatch.setattr(cfgmod._Table, "done", done)
    return seen


def test_listed_keys_match_what_config_reads(tmp_path: Path,
                                             monkeypatch: pytest.MonkeyPatch) -> None:
    seen = _record_known(monkeypatch)
    for block in COMPLETE:
        _load(tmp_path, block)
    assert set(seen) == set(KEYS), "the complete examples should use every kind of table"
    for table, known in seen.items():
        extra = known - set(KEYS[table])
        assert not extra, f"evtkin.config reads [{table}] keys {extra} not listed (nor documented)"


def test_allowed_values_and_names_are_documented() -> None:
    from evtkin.hists.recipes import AUTO_COMBINE
    from evtkin.io import ntuple_mapping

    words = {
        "normalisations": cfgmod.NORMALISATIONS,
        "composite builds": cfgmod.COMPOSITE_BUILDS,
        "output formats": cfgmod.OUTPUT_FORMATS,
        "plot formats": cfgmod.PLOT_FORMATS,
        "uncertainty methods": cfgmod.UNCERTAINTY_METHODS,
        "event fields": tuple(cfgmod.EVENT_FIELDS),
        "particle classes": tuple(cfgmod.PARTICLE_CLASSES),
        "functions": tuple(FUNCTIONS),
        "attributes": tuple(ATTRIBUTES),
        "ntuple input keys": ntuple_mapping._TOP_KEYS,
        "reserved ntuple names": ntuple_mapping.RESERVED_FIELDS,
        "weight-group combine values": tuple(AUTO_COMBINE),
    }
    for what, names in words.items():
        missing = [n for n in names if not re.search(rf"`\"?\.?{re.escape(n)}(\(|\"?`)", TEXT)]
        assert not missing, f"{what} not documented: {missing}"


def test_particle_class_table_matches_the_ids() -> None:
    body = _section("`[classes]`")
    for name, ids in cfgmod.PARTICLE_CLASSES.items():
        row = re.search(rf"^\| `{name}` \| ([0-9, ]+) \|", body, re.M)
        assert row, f"class {name} has no row"
        assert tuple(int(x) for x in row.group(1).split(",")) == tuple(ids), name
    # PDG Monte Carlo numbering scheme: e 11, ν_e 12, μ 13, ν_μ 14, τ 15, ν_τ 16, γ 22, Z 23
    assert cfgmod.PARTICLE_CLASSES["neutrinos"] == (12, 14, 16)
    assert cfgmod.PARTICLE_CLASSES["photons"] == (22,)


def _default(section: str, key: str) -> str:
    """The default column of ``key``'s row in the first table of ``section`` listing it."""
    rows = re.findall(rf"^\| `{key}` \|([^|]*)\|([^|]*)\|", _section(section), re.M)
    assert rows, f"{key} has no row in {section}"
    return rows[0][1].strip()


def test_documented_numeric_defaults_are_the_real_ones(tmp_path: Path) -> None:
    cfg = _load(tmp_path, _example("W and top-pair reconstruction").replace(
        "w_resolution = 5.0", "").replace("top_resolution = 8.0", "").replace(
        "max_jets = 6", ""))
    tt = cfg.composites["tt"].options
    home = "`[composites.NAME]`"
    for key in ("w_resolution", "top_resolution", "max_jets"):
        assert float(_default(home, key)) == tt[key], key
    # PDG 2024 (Phys. Rev. D 110, 030001): m_W = 80.3692 GeV, m_t = 172.57 GeV
    assert tt["w_mass"] == 80.3692
    assert _default(home, "w_mass").startswith("80.3692")
    assert tt["top_mass"] == 172.57
    assert _default(home, "top_mass").startswith("172.57")
    assert _default(home, "neutrino_root") == f'`"{tt["neutrino_root"]}"`'
    assert _default(home, "root") == '`"smaller_abs_pz"`'
    assert cfg.composites["w_lep"].options["root"] == "smaller_abs_pz"
    from evtkin.run.plan import DEFAULT_STEP_SIZE

    assert int(_default("`[analysis]`", "step_size").replace(" ", "")) == DEFAULT_STEP_SIZE
    spec = cfgmod.HistogramSpec.__dataclass_fields__["normalise"].default
    assert _default("`[histograms.NAME]`", "normalise") == f'`"{spec}"`'
    out = cfgmod.OutputSpec()
    assert _default("`[output]`", "plot_formats") == "`" + str(list(out.plot_formats)).replace(
        "'", '"') + "`"
