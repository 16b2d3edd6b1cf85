"""Analysis configs: the vocabulary, and every error path (key path, line, suggestion)."""

from __future__ import annotations

import re
import sys
from pathlib import Path

import pytest

from evtkin.config import KeyLines, load_config
from evtkin.errors import ConfigError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

BASE = '''\
[analysis]
name = "dilepton test"
luminosity_fb = 10.0

[classes]
my_leptons = [11, 13]

[samples.dy]
files = ["dy.lhe"]
label = "Drell-Yan"
cross_section_pb = 1500.0
toy = true

[objects.leptons]
particles = ["my_leptons"]
min_pt = 20
max_abs_eta = 2.5
isolation = { against = "jets", within_dr = 0.4 }

[objects.jets]
particles = ["jets", 5]
min_pt = 30.0
max_abs_rapidity = 4.5

[[overlap_removal]]
remove = "jets"
near = "leptons"
within_dr = 0.4

[missing_pt]
name = "met"

[[step]]
name = "two leptons"
require = "count(leptons) >= 2"

[[step]]
name = "mass window"
require = "60 < mll < 120"

[composites.z]
build = "pair"
of = "leptons"
opposite_charge = true
best_mass = 91.188

[quantities]
mll = "mass(leptons[0] + leptons[1])"
ht_all = "ht(jets) + sum(leptons.pt)"

[histograms.mll]
title = "Dilepton mass"
x = { value = "mll", bins = 30, range = [60, 120], label = "m_ll", unit = "GeV" }
normalise = "xsec_per_bin"

[histograms.lead_pt_vs_y]
x = { value = "leptons[0].pt", edges = [0, 20, 50, 100, 500] }
y = { value = "z.rapidity", bins = 10, range = [-2.5, 2.5] }
normalise = "unit_area"
after = "two leptons"

[output]
formats = ["json", "csv"]
plot_formats = ["png"]
'''


def write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "analysis.toml"
    path.write_text(text, encoding="utf-8")
    return path


def line_of(text: str, fragment: str) -> int:
    """1-based line of the first line containing ``fragment`` (the test's own scan);
    ``"fragment#k"`` means the k-th such line."""
    fragment, _, nth = fragment.partition("#")
    k = int(nth or 1)
    for i, line in enumerate(text.splitlines(), start=1):
        if fragment in line:
            k -= 1
            if k == 0:
                return i
    raise AssertionError(fragment)


def error_for(tmp_path: Path, text: str) -> str:
    with pytest.raises(ConfigError) as info:
        load_config(write(tmp_path, text))
    return str(info.value)


def test_base_config_loads_and_means_what_it_says(tmp_path):
    cfg = load_config(write(tmp_path, BASE))
    assert cfg.name == "dilepton test"
    s = cfg.samples["dy"]
    assert s.files == (tmp_path / "dy.lhe",)  # relative to the config's folder
    assert (s.label, s.cross_section_pb, s.luminosity_fb, s.toy) == ("Drell-Yan", 1500.0, 10.0,
                                                                     True)
    lep = cfg.objects["leptons"]
    assert set(lep.pdgids) == {11, 13}
    assert lep.status == (1,)
    assert (lep.min_pt, lep.max_abs_eta, lep.isolation_dr) == (20.0, 2.5, 0.4)
    assert set(cfg.objects["jets"].pdgids) == {1, 2, 3, 4, 5, 21}
    assert [o.remove for o in cfg.overlap_removal] == ["jets"]
    assert [s.name for s in cfg.steps] == ["two leptons", "mass window"]
    assert cfg.composites["z"].options["best_mass"] == 91.188
    assert list(cfg.quantities) == ["mll", "ht_all"]
    h = cfg.histograms["mll"]
    assert len(h.axes[0].edges) == 31
    assert h.axes[0].regular
    assert h.axes[0].edges[0] == 60
    assert h.axes[0].edges[-1] == 120
    h2 = cfg.histograms["lead_pt_vs_y"]
    assert h2.axes[0].edges == (0, 20, 50, 100, 500)
    assert not h2.axes[0].regular
    assert (h2.normalise, h2.after) == ("unit_area", "two leptons")
    assert cfg.output.formats == ("json", "csv")
    assert len(cfg.sha256) == 64


def test_a_dict_config_loads_the_same(tmp_path):
    cfg = load_config(tomllib.loads(BASE), base_dir=tmp_path)
    assert cfg.samples["dy"].files == (tmp_path / "dy.lhe",)
    assert cfg.source == "<config dict>"


def test_key_lines_finds_every_kind_of_key():
    text = '''\
# comment
top = 1
[a]
b = "x # not a comment"
"quoted.key" = 2
c.d = [
  1,
  { e = 3 },
]
[[arr]]
f = """multi
line = 5
"""
g = 6
[[arr]]
f = 'lit'
[arr.sub]
h = 7
'''
    assert tomllib.loads(text)  # the text is valid TOML
    kl = KeyLines(text)
    assert kl.line(("top",)) == 2
    assert kl.line(("a",)) == 3
    assert kl.line(("a", "b")) == 4
    assert kl.line(("a", "quoted.key")) == 5
    assert kl.line(("a", "c", "d")) == 6
    assert kl.line(("a", "c", "d", 1)) == 8
    assert kl.line(("a", "c", "d", 1, "e")) == 8
    assert kl.line(("arr", 0)) == 10
    assert kl.line(("arr", 0, "g")) == 14
    assert kl.line(("arr", 1, "f")) == 16
    assert kl.line(("arr", 1, "sub", "h")) == 18
    assert kl.line(("arr", 1, "sub", "missing")) == 17  # falls back to the nearest parent


# every error: (replace this, with this) in BASE → fragments expected in the message, and the
# line (found by our own scan of the edited text) that the message must name
CASES = [
    # unknown keys, with suggestions
    ('min_pt = 20', 'min_ptt = 20', "objects.leptons.min_ptt", "did you mean 'min_pt'", "min_ptt"),
    ('[output]', '[outputs]', "outputs", "did you mean 'output'", "[outputs]"),
    ('toy = true', 'toy = true\ncolour = "red"', "samples.dy.colour", "unknown key 'colour'",
     "colour"),
    ('within_dr = 0.4 }', 'within_dR = 0.4 }', "isolation.within_dR",
     "did you mean 'within_dr'", "isolation = {"),
    ('normalise = "unit_area"', 'normalize = "unit_area"', "normalize",
     "did you mean 'normalise'", "normalize ="),
    ('bins = 10, range', 'bin = 10, range', "y.bin", "did you mean 'bins'", "y = {"),
    # bad values
    ('min_pt = 30.0', 'min_pt = "thirty"', "objects.jets.min_pt",
     "expected a number, got a string", 'min_pt = "thirty"'),
    ('min_pt = 30.0', 'min_pt = -3', "objects.jets.min_pt", "expected a number >= 0",
     "min_pt = -3"),
    ('toy = true', 'toy = "yes"', "samples.dy.toy", "expected true or false", 'toy = "yes"'),
    ('cross_section_pb = 1500.0', 'cross_section_pb = 0', "cross_section_pb",
     "expected a number > 0", "cross_section_pb"),
    ('normalise = "xsec_per_bin"', 'normalise = "xsec_per_bn"', "histograms.mll.normalise",
     "did you mean 'xsec_per_bin'", 'normalise = "xsec_per_bn"'),
    ('bins = 30,', 'bins = 2.5,', "histograms.mll.x.bins", "expected a whole number",
     "bins = 2.5"),
    ('range = [60, 120]', 'range = [120, 60]', "x.range", "expected low < high", "range = [120"),
    ('edges = [0, 20, 50, 100, 500]', 'edges = [0, 50, 20]', "x.edges", "strictly increasing",
     "edges = [0, 50, 20]"),
    ('edges = [0, 20, 50, 100, 500] }', 'edges = [0, 20], bins = 3 }', "x.bins",
     "either edges or bins", "edges = [0, 20]"),
    ('particles = ["my_leptons"]', 'particles = ["my_lepton"]', "objects.leptons.particles[0]",
     "did you mean 'my_leptons'", 'particles = ["my_lepton"]'),
    ('particles = ["jets", 5]', 'particles = ["jets", 0]', "objects.jets.particles[1]",
     "not a PDG id", 'particles = ["jets", 0]'),
    ('my_leptons = [11, 13]', 'my_leptons = [11, "mu"]', "classes.my_leptons[1]",
     "expected a PDG id", "my_leptons = [11"),
    ('files = ["dy.lhe"]', 'files = []', "samples.dy.files", "at least one file", "files = []"),
    ('files = ["dy.lhe"]', 'files = 3', "samples.dy.files", "string or a list of strings",
     "files = 3"),
    ('plot_formats = ["png"]', 'plot_formats = ["jpeg"]', "output.plot_formats[0]",
     "unknown plot format", 'plot_formats = ["jpeg"]'),
    ('build = "pair"', 'build = "pairs"', "composites.z.build", "did you mean 'pair'",
     'build = "pairs"'),
    ('after = "two leptons"', 'after = "two lepton"', "histograms.lead_pt_vs_y.after",
     "did you mean 'two leptons'", 'after = "two lepton"'),
    ('near = "leptons"', 'near = "lepton"', "overlap_removal[0].near",
     "did you mean 'leptons'", 'near = "lepton"'),
    ('of = "leptons"', 'of = "leptonz"', "composites.z.of", "did you mean 'leptons'",
     'of = "leptonz"'),
    ('name = "mass window"', 'name = "two leptons"', "step[1].name", "used twice",
     'name = "two leptons"#2'),
    # missing required keys
    ('require = "60 < mll < 120"', '', "step[1].require", "required", "[[step]]#2"),
    ('x = { value = "mll", bins', 'x = { bins', "histograms.mll.x.value", "required", "x = { bins"),
]


@pytest.mark.parametrize(("old", "new", "path", "fragment", "line_marker"), CASES)
def test_config_errors_name_key_line_and_suggestion(tmp_path, old, new, path, fragment,
                                                    line_marker):
    assert old in BASE
    text = BASE.replace(old, new, 1)
    msg = error_for(tmp_path, text)
    assert path in msg
    assert fragment in msg
    m = re.match(r".*analysis\.toml:(\d+): ", msg)
    assert m is not None, msg
    assert int(m.group(1)) == line_of(text, line_marker), msg


@pytest.mark.parametrize(
    ("old", "new", "path", "fragment", "caret_under"),
    [
        ('require = "60 < mll < 120"', 'require = "60 < mll < < 120"', "step[1].require",
         "expected a number, a name or '('", "<"),
        ('mll = "mass(leptons[0] + leptons[1])"', 'mll = "mass(leptons[0] + leptonz[1])"',
         "quantities.mll", "unknown name 'leptonz'; did you mean 'leptons'", "leptonz"),
        ('value = "leptons[0].pt"', 'value = "leptons[0].pt &"', "lead_pt_vs_y.x.value",
         "unexpected character '&'", "&"),
        ('ht_all = "ht(jets) + sum(leptons.pt)"', 'ht_all = "htt(jets)"', "quantities.ht_all",
         "did you mean 'ht'", "htt"),
    ],
)
def test_bad_expressions_show_a_caret(tmp_path, old, new, path, fragment, caret_under):
    text = BASE.replace(old, new, 1)
    msg = error_for(tmp_path, text)
    assert path in msg
    assert fragment in msg
    assert "bad expression" in msg
    expr_line, caret_line = msg.splitlines()[1:3]
    col = caret_line.index("^")
    assert expr_line[col:].startswith(caret_under), msg
    assert f"analysis.toml:{line_of(text, new)}:" in msg


def test_quantities_in_a_circle_are_rejected(tmp_path):
    text = BASE.replace('ht_all = "ht(jets) + sum(leptons.pt)"', 'a = "b + 1"\nb = "a * 2"')
    msg = error_for(tmp_path, text)
    assert "refer to each other" in msg
    assert "a → b → a" in msg


def test_names_defined_twice_are_rejected(tmp_path):
    text = BASE.replace("[composites.z]", "[composites.leptons]").replace("z.rapidity", "mll")
    assert "already defined" in error_for(tmp_path, text)
    text = BASE.replace('ht_all = "ht', 'jets = "ht')
    assert "already defined" in error_for(tmp_path, text)


def test_composites_need_missing_pt_when_they_use_it(tmp_path):
    text = BASE.replace('[missing_pt]\nname = "met"\n', "") + (
        '[composites.w]\nbuild = "leptonic_w"\nlepton = "leptons"\nmissing_pt = "met"\n')
    msg = error_for(tmp_path, text)
    assert "composites.w.missing_pt" in msg
    assert "[missing_pt]" in msg


def test_invalid_toml_and_missing_file(tmp_path):
    msg = error_for(tmp_path, BASE.replace("[output]", "[output"))
    assert "not valid TOML" in msg
    with pytest.raises(ConfigError, match="cannot read the config"):
        load_config(tmp_path / "nope.toml")
    with pytest.raises(ConfigError, match="samples"):
        load_config(write(tmp_path, "[analysis]\nname = 'x'\n"))
