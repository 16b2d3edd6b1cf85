"""Object-level systematics re-run the selection, composites and histograms in the same pass:
a +x % jet energy shift equals a run on a file whose jet four-momenta were scaled by x %
beforehand (a four-vector times a number: pT and mass scale, η and φ stay — special
relativity); a zero shift is the nominal; the smearing is reproducible across executors and
chunk sizes; the up/down histograms form bands that combine in quadrature."""

from __future__ import annotations

from pathlib import Path

import awkward as ak
import numpy as np
import pytest

from evtkin.errors import ConfigError
from evtkin.run.executors import ProcessExecutor
from evtkin.run.pipeline import run
from ntuple_events import config, events, write

SHIFT = 0.04


@pytest.fixture(scope="module")
def files(tmp_path_factory):  # type: ignore[no-untyped-def]
    d = tmp_path_factory.mktemp("syst")
    cols = events(2000, seed=5)
    nominal = write(d / "nominal.root", cols)
    jets = cols["Jet"]
    f = 1.0 + SHIFT
    for sign, name in ((1.0, "up"), (-1.0, "down")):
        k = 1.0 + sign * SHIFT
        scaled = ak.zip({"pt": jets.pt * k, "eta": jets.eta, "phi": jets.phi,
                         "mass": jets.mass * k})
        write(d / f"{name}.root", {**cols, "Jet": scaled})
    assert f == 1.04
    return d, nominal


SYST = {"jes": {"objects": "jets", "kind": "energy_scale", "shift": SHIFT},
        "jer": {"objects": "jets", "kind": "smearing", "resolution": 0.15, "seed": 99},
        "jeff": {"objects": "jets", "kind": "efficiency", "drop": 0.1, "seed": 3}}
RECIPES = {"jes": {"method": "updown", "systematic": "jes"},
           "jer": {"method": "updown", "systematic": "jer"},
           "total": {"method": "quadrature", "of": ["jes", "jer"]}}


def test_energy_shift_equals_a_pre_scaled_file(files) -> None:  # type: ignore[no-untyped-def]
    d, nominal = files
    res = run(config([nominal], systematics=SYST, uncertainties=RECIPES))
    s = res.samples["s"]
    for side in ("up", "down"):
        alone = run(config([d / f"{side}.root"]))
        for h in ("ht", "jet_pt", "n_jets"):
            got = s.varied[f"jes_{side}"][h]
            want = alone.samples["s"].histograms[h]
            assert np.array_equal(got.values, want.values), (side, h)
            assert np.array_equal(got.variances, want.variances), (side, h)
    # the shift moves jets across the 30 GeV threshold: more selected events up than down
    up = s.varied["jes_up"]["n_jets"].values.sum()
    down = s.varied["jes_down"]["n_jets"].values.sum()
    assert up > s.histograms["n_jets"].values.sum() > down
    # the band: nominal + max(up - nominal, down - nominal, 0) (one ± pair)
    x0 = s.histograms["ht"].values
    xu, xd = s.varied["jes_up"]["ht"].values, s.varied["jes_down"]["ht"].values
    band = s.bands["ht"]["jes"]
    np.testing.assert_allclose(band.up, x0 + np.maximum.reduce([xu - x0, xd - x0, 0 * x0]))
    np.testing.assert_allclose(band.down, x0 - np.maximum.reduce([x0 - xu, x0 - xd, 0 * x0]))
    tot = s.bands["ht"]["total"]
    jer = s.bands["ht"]["jer"]
    np.testing.assert_allclose(tot.up - x0, np.hypot(band.up - x0, jer.up - x0))


def test_zero_shift_is_the_nominal(files) -> None:  # type: ignore[no-untyped-def]
    _, nominal = files
    syst = {"jes": {"objects": "jets", "kind": "energy_scale", "shift": 0.0}}
    s = run(config([nominal], systematics=syst)).samples["s"]
    for h, nh in s.histograms.items():
        for side in ("jes_up", "jes_down"):
            assert np.array_equal(s.varied[side][h].values, nh.values)
            assert np.array_equal(s.varied[side][h].variances, nh.variances)


def test_smearing_and_efficiency_are_reproducible(files, tmp_path) -> None:  # type: ignore[no-untyped-def]
    _, nominal = files
    cfg = config([nominal], systematics=SYST)
    a = run(cfg, step_size=301).samples["s"]
    b = run(cfg, step_size=2000, executor=ProcessExecutor(2), unit_bytes=20_000).samples["s"]
    for var in ("jer", "jeff"):
        for h in ("ht", "n_jets"):
            np.testing.assert_allclose(a.varied[var][h].values, b.varied[var][h].values,
                                       rtol=1e-12)
            assert a.varied[var][h].entries == b.varied[var][h].entries
        assert not np.array_equal(a.varied[var]["n_jets"].values, a.histograms["n_jets"].values)


def test_systematic_bands_reach_the_outputs(files, tmp_path) -> None:  # type: ignore[no-untyped-def]
    from evtkin.output.rootfile import read_root
    from evtkin.output.tables import load_results

    _, nominal = files
    run(config([nominal], systematics=SYST, uncertainties=RECIPES,
               output={"formats": ["json", "root", "csv"]}), out=tmp_path / "out")
    h = load_results(tmp_path / "out").samples["s"].histograms["ht"]
    assert h.bands["jes"].method == "updown"
    assert set(h.bands) == {"jes", "jer", "total"}
    assert "s__ht__jes_up" in read_root(tmp_path / "out" / "histograms.root")
    header = (tmp_path / "out" / "csv" / "s" / "ht.csv").read_text()
    assert "jes_down" in header


def test_systematic_config_errors(files, tmp_path: Path) -> None:  # type: ignore[no-untyped-def]
    _, nominal = files
    bad = {"jes": {"objects": "jet", "kind": "energy_scale", "shift": 0.02}}
    with pytest.raises(ConfigError, match=r"systematics\.jes\.objects: 'jet' is not a defined"):
        run(config([nominal], systematics=bad))
    bad = {"jer": {"objects": "jets", "kind": "smearing", "resolution": 0.1}}
    with pytest.raises(ConfigError, match=r"systematics\.jer\.seed: this key is required"):
        run(config([nominal], systematics=bad))
    with pytest.raises(ConfigError, match=r"uncertainties\.x\.systematic: 'nope' is not a"):
        run(config([nominal], systematics=SYST,
                   uncertainties={"x": {"method": "updown", "systematic": "nope"}}))
