"""Event tables (skims): the selected events' declared quantities and weights, as Parquet
(awkward) and as a ROOT TTree (uproot), checked against the arrays written into the input."""

from __future__ import annotations

import awkward as ak
import numpy as np
import pytest
import uproot

from evtkin.run.pipeline import run
from ntuple_events import config, events, write


@pytest.fixture(scope="module")
def skimmed(tmp_path_factory):  # type: ignore[no-untyped-def]
    d = tmp_path_factory.mktemp("skims")
    cols = events(1200, seed=21)
    path = write(d / "s.root", cols)
    skims = {"sel": {"after": "two jets",
                     "columns": {"lead_pt": "jets[0].pt", "n_mu": "count(mu)",
                                 "jet_pt": "jets.pt", "mu2_pt": "mu[1].pt",
                                 "npv": "n_vertices"}}}
    cfg = config([path], skims=skims)
    run(cfg, out=d / "out", step_size=250)
    return cols, d / "out"


def _expected(cols):  # type: ignore[no-untyped-def]
    """The same selection with numpy/awkward on the input arrays (by hand)."""
    jets = cols["Jet"]
    good = jets[(jets.pt > 30.0) & (abs(jets.eta) < 2.5)]
    good = good[ak.argsort(good.pt, ascending=False)]
    mu = cols["Mu"][cols["Mu"].pt > 10.0]
    mu = mu[ak.argsort(mu.pt, ascending=False)]
    sel = ak.to_numpy(ak.num(good) >= 2)
    mu2 = ak.to_numpy(ak.fill_none(ak.pad_none(mu.pt, 2)[:, 1], np.nan))
    return {"lead_pt": ak.to_numpy(good.pt[:, :1][sel][:, 0]),
            "n_mu": ak.to_numpy(ak.num(mu))[sel].astype(float),
            "jet_pt": ak.to_list(good.pt[sel]), "mu2_pt": mu2[sel],
            "npv": cols["nPV"][sel].astype(float), "weight": cols["w"][sel]}


def test_parquet_table_holds_the_selected_events(skimmed) -> None:  # type: ignore[no-untyped-def]
    cols, out = skimmed
    want = _expected(cols)
    t = ak.from_parquet(out / "skims" / "sel" / "s.parquet")
    assert len(t) == len(want["weight"]) > 0
    for k in ("lead_pt", "n_mu", "mu2_pt", "npv", "weight"):
        np.testing.assert_array_equal(ak.to_numpy(t[k]), want[k], err_msg=k)
    assert ak.to_list(t["jet_pt"]) == want["jet_pt"]
    assert np.all(ak.to_numpy(t["file_index"]) == 0)


def test_root_tree_holds_the_same_rows(skimmed) -> None:  # type: ignore[no-untyped-def]
    cols, out = skimmed
    want = _expected(cols)
    tree = uproot.open(out / "skims" / "sel" / "s.root")["sel"]
    got = tree.arrays(library="ak")
    for k in ("lead_pt", "n_mu", "mu2_pt", "npv", "weight"):
        np.testing.assert_array_equal(ak.to_numpy(got[k]), want[k], err_msg=k)
    assert ak.to_list(got["jet_pt"]) == want["jet_pt"]
    assert ak.to_list(got["n_jet_pt"]) == [len(x) for x in want["jet_pt"]]
    assert not (out / "skims" / ".parts").exists()


def test_a_part_write_that_fails_leaves_no_part_file(tmp_path, monkeypatch) -> None:  # type: ignore[no-untyped-def]
    from evtkin.run import skims

    def half_then_fail(array, path, *args, **kw):  # type: ignore[no-untyped-def]
        with open(path, "wb") as fh:
            fh.write(b"PAR1 half a file")
        raise OSError("disk full")

    cols = {"x": ak.Array(np.arange(4.0))}
    args = (tmp_path, "sel", "s", 1, 2, cols, np.ones(4, dtype=bool), 0,
            np.ones(4, dtype=np.int32), np.ones(4), np.zeros((4, 0)), ())
    monkeypatch.setattr(skims.ak, "to_parquet", half_then_fail)
    with pytest.raises(OSError, match="disk full"):
        skims.write_part(*args)
    part_dir = tmp_path / skims.PARTS / "sel" / "s"
    assert list(part_dir.iterdir()) == []  # neither the part nor its temporary file
    monkeypatch.undo()
    written = skims.write_part(*args)
    assert written is not None
    assert written.parent == part_dir
    assert ak.to_list(ak.from_parquet(written)["x"]) == [0.0, 1.0, 2.0, 3.0]
