"""Scaling out: work units, executors (serial, local processes, a real Dask LocalCluster),
failing units and interrupted output, progress. Small LHE files are written by the tests
(see run_helpers); every comparison is against the plain serial whole-file run."""

from __future__ import annotations

import hashlib
import itertools
import json
import re
from pathlib import Path

import numpy as np
import pytest

from evtkin.config import load_config
from evtkin.errors import ConfigError
from evtkin.io.lhe import LHEWarning
from evtkin.run.executors import (
    DaskExecutor,
    ProcessExecutor,
    SerialExecutor,
    UnitError,
    execute,
)
from evtkin.run.pipeline import run
from evtkin.run.plan import build_plan
from evtkin.run.progress import RunProgress
from evtkin.run.units import entry_ranges, lhe_byte_ranges, make_units
from run_helpers import drell_yan, write_lhe

N_EVENTS = 1200
WEIGHT_IDS = ("up", "down", "alt")


@pytest.fixture(scope="module")
def sample():
    return drell_yan(N_EVENTS, seed=23, weights="mixed", n_var=3)


@pytest.fixture(scope="module")
def files(tmp_path_factory, sample):
    """Three plain files of one sample (400 events each)."""
    d = tmp_path_factory.mktemp("scale")
    out = []
    for k in range(3):
        sl = slice(k * N_EVENTS // 3, (k + 1) * N_EVENTS // 3)
        out.append(write_lhe(d / f"part{k}.lhe", sample.subset(sl), idwtup=-4, xsec_pb=0.0,
                             weight_ids=WEIGHT_IDS))
    return out


def config(paths, **extra):
    cfg = {
        "analysis": {"name": "scale test"},
        "samples": {"dy": {"files": [str(f) for f in paths], "luminosity_fb": 2.0}},
        "objects": {"leptons": {"particles": ["charged_leptons"], "min_pt": 20.0,
                                "max_abs_eta": 2.4}},
        "step": [{"name": "two leptons", "require": "count(leptons) >= 2"},
                 {"name": "window", "require": "70 < mass(leptons[0] + leptons[1]) < 110"}],
        "histograms": {
            "mll": {"x": {"value": "mass(leptons[0] + leptons[1])", "bins": 8,
                          "range": [70, 110]}, "normalise": "xsec_per_bin"},
            "lep_pt": {"x": {"value": "leptons.pt", "edges": [0, 20, 30, 45, 70, 120]},
                       "normalise": "raw", "after": "two leptons"},
        },
        "output": {"formats": ["json"]},
    }
    cfg.update(extra)
    return cfg


def flat(res):
    """Σw, Σw² (nominal and variations, weighted before normalisation) and cutflow counts."""
    s = res.samples["dy"]
    hists = {n: (a.sumw.copy(), a.sumw2.copy(), a.entries) for n, a in s.weighted.items()}
    return hists, [r["n_raw"] for r in s.cutflow], [r["sum_w"] for r in s.cutflow]


def assert_same(a, b):
    ha, na, wa = a
    hb, nb, wb = b
    assert na == nb  # cutflow counts: exactly
    np.testing.assert_allclose(wb, wa, rtol=1e-12, atol=0)
    assert ha.keys() == hb.keys()
    for name, (w, w2, n) in ha.items():
        assert hb[name][2] == n
        np.testing.assert_allclose(hb[name][0], w, rtol=1e-12, atol=1e-300)
        np.testing.assert_allclose(hb[name][1], w2, rtol=1e-12, atol=1e-300)


@pytest.fixture(scope="module")
def reference(files):
    return flat(run(config(files)))


# ----------------------------------------------------------------------------- splitting

def test_byte_ranges_cover_the_events_exactly(files, sample):
    path = files[0]
    data = path.read_bytes()
    ranges = lhe_byte_ranges(path, 5)
    assert len(ranges) == 5
    # LHEF 1.0 (hep-ph/0609017): every event is one <event> ... </event> block after </init>
    first = data.index(b"<event>")
    assert ranges[0][0] == first
    assert ranges[-1][1] == len(data)
    n = 0
    for (a, b), (c, _) in zip(ranges, [*ranges[1:], (len(data), 0)], strict=True):
        assert b == c  # contiguous, no gap, no overlap
        assert data[a:a + 7] == b"<event>"
        assert data[a - 1:a] == b"\n"
        n += data[a:b].count(b"<event>")
        assert data[a:b].count(b"<event>") == data[a:b].count(b"</event>")  # whole events
    assert n == N_EVENTS // 3
    # more parts than events: never an empty or repeated range
    tiny = write_lhe(path.parent / "three.lhe", sample.subset(slice(0, 3)), idwtup=-4,
                     xsec_pb=0.0, weight_ids=WEIGHT_IDS)
    few = lhe_byte_ranges(tiny, 10)
    assert len(few) == 3
    assert all(tiny.read_bytes()[a:b].count(b"</event>") == 1 for a, b in few)


def test_entry_ranges_split_evenly():
    # common practice: contiguous ranges covering [0, n), sizes differing by at most one
    r = entry_ranges(10, 3)
    assert r == [(0, 3), (3, 6), (6, 10)]
    assert entry_ranges(2, 5) == [(0, 1), (1, 2)]
    assert entry_ranges(0, 4) == [(0, 0)]


def test_units_split_plain_files_not_compressed_ones(files, sample, tmp_path):
    gz = write_lhe(tmp_path / "whole.lhe.gz", sample.subset(slice(0, 300)), idwtup=-4,
                   xsec_pb=0.0, weight_ids=WEIGHT_IDS)
    plan = build_plan(load_config(config([*files, gz])))
    units = make_units(plan, unit_bytes=files[0].stat().st_size // 4)
    plain = [u for u in units if u.path == str(files[0])]
    assert len(plain) >= 3
    assert all(u.byte_range is not None for u in plain)
    assert [u.part for u in plain] == list(range(len(plain)))
    assert next(u for u in units if u.path == str(gz)).byte_range is None  # gzip: whole file
    assert [u.index for u in units] == list(range(len(units)))
    # default (one worker): one unit per file; max_events: whole files
    assert len(make_units(plan)) == 4
    limited = build_plan(load_config(config(files)), max_events=50)
    assert all(u.byte_range is None for u in make_units(limited, unit_bytes=1000))


def test_byte_range_units_give_the_whole_file_results(files, reference):
    size = files[0].stat().st_size
    res = run(config(files), unit_bytes=size // 5, step_size=101)
    assert_same(reference, flat(res))
    ex = res.provenance["execution"]
    assert ex["units"] >= 12
    assert set(ex["split_files"]) == {str(f) for f in files}
    # each file's checksum and event count are still recorded once
    inputs = res.provenance["inputs"]
    assert [i["events"] for i in inputs] == [N_EVENTS // 3] * 3
    # hashlib (reference implementation of FIPS 180-4 SHA-256) over the bytes on disk
    assert [i["sha256"] for i in inputs] == [hashlib.sha256(f.read_bytes()).hexdigest()
                                             for f in files]


# ----------------------------------------------------------------------------- executors

def test_serial_processes_and_dask_agree(files, reference):
    size = files[0].stat().st_size
    serial = flat(run(config(files), unit_bytes=size // 2, executor=SerialExecutor()))
    procs = run(config(files), unit_bytes=size // 2, executor=ProcessExecutor(2))
    assert procs.provenance["execution"]["kind"] == "processes"
    assert procs.provenance["execution"]["workers"] == 2
    # every process that ran units reports its peak RSS; how many of the two got a unit is
    # the scheduler's business (on a loaded machine one may take all six before the other
    # has started)
    rss = procs.provenance["execution"]["peak_rss_mb_per_worker"]
    assert 1 <= len(rss) <= 2
    assert all(v > 0 for v in rss)
    dask = run(config(files), unit_bytes=size // 2, executor=DaskExecutor("local", n_workers=2))
    assert dask.provenance["execution"] == {**dask.provenance["execution"], "kind": "dask",
                                            "workers": 2}
    for other in (serial, flat(procs), flat(dask)):
        assert_same(reference, other)
    # the checksums are computed apart from the units (a parent thread, a Dask task) and
    # still match hashlib (reference SHA-256, FIPS 180-4) over the bytes on disk
    want = [hashlib.sha256(f.read_bytes()).hexdigest() for f in files]
    for res in (procs, dask):
        assert [i["sha256"] for i in res.provenance["inputs"]] == want


def test_a_dask_worker_with_two_threads_keeps_every_units_warnings(files, tmp_path):
    """Units running at the same time in two threads of one Dask worker: the same results
    as serial reading, and every damaged part's warning in the provenance, once."""
    from distributed import LocalCluster

    damaged = [_corrupt_copy(f, tmp_path / f"damaged{i}.lhe", event=40 + 100 * i)
               for i, f in enumerate(files)]
    size = damaged[0].stat().st_size
    with pytest.warns(LHEWarning):
        serial = run(config(damaged), unit_bytes=size // 4, lenient=True,
                     executor=SerialExecutor())
    want = serial.provenance["read_warnings"]
    assert len(want) == 3  # one damaged part in each file
    with LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                      dashboard_address=None) as cluster, pytest.warns(LHEWarning) as shown:
        dask = run(config(damaged), unit_bytes=size // 4, lenient=True,
                   executor=DaskExecutor(cluster.scheduler_address))
    assert dask.provenance["execution"]["units"] >= 12
    assert sorted(dask.provenance["read_warnings"]) == sorted(want)
    assert sorted({str(w.message) for w in shown if issubclass(w.category, LHEWarning)}) \
        == sorted(want)
    assert_same(flat(serial), flat(dask))


def test_process_pool_reports_a_failing_unit(files, tmp_path):
    bad = tmp_path / "bad.lhe"
    bad.write_bytes(files[1].read_bytes().replace(b"91.0 0.0078125", b"91.0 0.0O78125", 1))
    with pytest.raises(UnitError, match=re.escape(str(bad))):
        run(config([files[0], bad, files[2]]), executor=ProcessExecutor(2))


# ----------------------------------------------------------------------------- failures

def _corrupt_copy(src: Path, dst: Path, event: int) -> Path:
    """A copy of ``src`` with a letter in the weight of event number ``event`` (0-based)."""
    data = src.read_bytes()
    pos = -1
    for _ in range(event + 1):
        pos = data.index(b"<event>", pos + 1)
    line_end = data.index(b"\n", data.index(b"\n", pos) + 1)
    line = data[data.index(b"\n", pos) + 1:line_end]
    fields = line.split()
    fields[2] = b"x" + fields[2]  # XWGTUP is the 3rd number of the event line (LHEF 1.0)
    dst.write_bytes(data[:data.index(b"\n", pos) + 1] + b" ".join(fields) + data[line_end:])
    return dst


def test_default_stops_naming_file_and_range(files, tmp_path):
    bad = _corrupt_copy(files[1], tmp_path / "corrupt.lhe", event=350)
    size = bad.stat().st_size
    with pytest.raises(UnitError) as err:
        run(config([files[0], bad]), unit_bytes=size // 4)
    msg = str(err.value)
    assert str(bad) in msg
    assert re.search(r"bytes \d+-\d+, part 4 of 4", msg), msg  # event 350 of 400: last part
    assert "line" in msg
    assert "--skip-bad" in msg


def test_skip_bad_lists_what_was_skipped(files, tmp_path, sample):
    bad = _corrupt_copy(files[1], tmp_path / "corrupt.lhe", event=10)
    broken_gz = tmp_path / "broken.lhe.gz"
    good_gz = write_lhe(tmp_path / "good.lhe.gz", sample.subset(slice(0, 200)), idwtup=-4,
                        xsec_pb=0.0, weight_ids=WEIGHT_IDS)
    broken_gz.write_bytes(good_gz.read_bytes()[: good_gz.stat().st_size // 2])  # cut short
    out = tmp_path / "out"
    size = bad.stat().st_size
    with pytest.warns(LHEWarning) as caught:
        res = run(config([files[0], bad, broken_gz]), unit_bytes=size // 2, skip_bad=True,
                  out=out)
    skipped = res.provenance["skipped"]
    assert {s["path"] for s in skipped} == {str(bad), str(broken_gz)}
    bad_parts = [s for s in skipped if s["path"] == str(bad)]
    assert len(bad_parts) == 1
    assert bad_parts[0]["part"] == 0
    assert bad_parts[0]["byte_range"]
    assert all(s["error"] for s in skipped)
    # the failing units were read again leniently: every intact event is kept, and what
    # was left out is named (the damaged event of the corrupt file, the cut of the gzip)
    assert "skipped 1 damaged part" in bad_parts[0]["damaged"][0]
    (gz,) = [s for s in skipped if s["path"] == str(broken_gz)]
    assert "cut short" in gz["damaged"][0]
    assert {str(w.message) for w in caught} == {s["damaged"][0] for s in skipped}
    inputs = {i["path"]: i["events"] for i in res.provenance["inputs"]}
    assert inputs[str(files[0])] == N_EVENTS // 3
    assert inputs[str(bad)] == N_EVENTS // 3 - 1
    assert inputs[str(broken_gz)] == gz["events_kept"]
    assert 0 < gz["events_kept"] < 200
    # written records list the skipped units too
    prov = json.loads((out / "provenance.json").read_text())
    assert {s["path"] for s in prov["skipped"]} == {str(bad), str(broken_gz)}
    results = json.loads((out / "results.json").read_text())
    assert {s["path"] for s in results["skipped"]} == {str(bad), str(broken_gz)}


def test_config_errors_are_never_skipped(files):
    cfg = config(files, quantities={"oops": "leptons.pt + jets"})
    cfg["histograms"]["oops"] = {"x": {"value": "oops", "bins": 2, "range": [0, 1]}}
    with pytest.raises(ConfigError):
        run(cfg, skip_bad=True)


# ----------------------------------------------------------------------------- output, progress

def test_interrupted_output_is_recognisable_and_has_no_half_files(files, tmp_path,
                                                                   monkeypatch):
    out = tmp_path / "out"
    run(config(files, output={"formats": ["json", "csv", "root"]}), out=out)
    assert (out / "provenance.json").is_file()
    assert not (out / "INCOMPLETE").exists()
    from evtkin.output import rootfile

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(rootfile, "write_results_root", interrupted)
    with pytest.raises(KeyboardInterrupt):
        run(config(files, output={"formats": ["json", "csv", "root"]}), out=out)
    assert (out / "INCOMPLETE").is_file()
    assert not (out / "provenance.json").exists()  # written last: the run is not complete
    leftovers = [p for p in out.rglob("*") if p.name.startswith(".") or p.suffix == ".tmp"]
    assert leftovers == []


def test_progress_bar_shows_rates_and_is_quiet_off_terminal(capsys):
    p = RunProgress(2, 3_000_000, enabled=True)
    p.chunk(0, 500)
    p.unit_done(0, 1000, 1_000_000)
    p.chunk(0, 500)  # a late message for a finished unit is not counted twice
    p.unit_done(1, 200, 2_000_000)
    p.close()
    err = capsys.readouterr().err
    assert "2/2" in err
    assert "ev/s" in err
    assert "MB/s" in err
    assert p.events == 1200
    assert p.bytes_done == 3_000_000
    quiet = RunProgress(1, 10, enabled=None)  # stderr is captured here: not a terminal
    quiet.unit_done(0, 5, 10)
    quiet.close()
    assert capsys.readouterr().err == ""


def test_cli_jobs_and_skip_bad(files, tmp_path, capsys):
    from evtkin.cli import main

    bad = tmp_path / "empty.lhe"
    bad.write_text("this is not an event file\n")
    cfg_path = tmp_path / "scale.toml"
    cfg_path.write_text(_toml(config([files[0], bad])))
    rc = main(["run", str(cfg_path), "--jobs", "1", "--skip-bad", "--out", str(tmp_path / "o")])
    assert rc == 0
    err = capsys.readouterr().err
    assert f"skipped: {bad}" in err
    assert "1 work unit(s) skipped" in err
    rc = main(["run", str(cfg_path), "--jobs", "1", "--out", str(tmp_path / "o2")])
    assert rc == 1
    assert str(bad) in capsys.readouterr().err


def test_execute_rejects_bad_unit_size(files):
    plan = build_plan(load_config(config(files)))
    with pytest.raises(ConfigError, match="unit size"):
        execute(plan, unit_bytes=0)


def _toml(cfg) -> str:
    """A minimal TOML writer for the test config (tables, arrays of tables, scalars)."""
    def val(v):
        if isinstance(v, str):
            return json.dumps(v)
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, list):
            return "[" + ", ".join(val(x) for x in v) + "]"
        if isinstance(v, dict):
            return "{" + ", ".join(f"{k} = {val(x)}" for k, x in v.items()) + "}"
        return repr(v)

    lines = []
    for key, v in cfg.items():
        if key == "step":
            for st in v:
                lines += ["[[step]]", *[f"{k} = {val(x)}" for k, x in st.items()]]
        elif isinstance(v, dict) and all(isinstance(x, dict) for x in v.values()):
            for name, tbl in v.items():
                lines += [f"[{key}.{name}]", *[f"{k} = {val(x)}" for k, x in tbl.items()]]
        else:
            lines += [f"[{key}]", *[f"{k} = {val(x)}" for k, x in v.items()]]
    return "\n".join(lines) + "\n"


def test_cli_executor_choice():
    from evtkin.cli.run import make_executor
    from evtkin.run.executors import SMALL_INPUT_BYTES

    assert isinstance(make_executor(input_bytes=1000), SerialExecutor)  # small: one process
    big = make_executor(input_bytes=2 * SMALL_INPUT_BYTES)
    assert isinstance(big, ProcessExecutor)
    assert big.workers >= 1
    assert make_executor(jobs=3, input_bytes=10).workers == 3  # an explicit --jobs is kept
    one = make_executor(jobs=1, input_bytes=10**12)
    assert isinstance(one, SerialExecutor)
    assert one.read_threads == 0  # --jobs 1: one core, the reader parses in the run's thread
    assert big.read_threads == 0  # a worker process per core, one thread each
    assert make_executor(input_bytes=1000).read_threads is None  # small input: reader threads
    dask = make_executor(dask="local", jobs=2)
    assert isinstance(dask, DaskExecutor)
    assert dask.n_workers == 2


@pytest.mark.slow  # ~30 s: two runs of the shipped 20 000-event ntuple config
def test_root_ntuple_entry_range_units_give_the_whole_file_results():
    """The shipped toy ntuple split into entry ranges: the same cutflow and histograms."""
    root = Path(__file__).resolve().parents[1]
    cfg = load_config(root / "configs" / "ttbar_reco.toml")
    units = make_units(build_plan(cfg), unit_bytes=400_000)
    ranges = [u.entry_range for u in units]
    assert len(units) >= 4
    assert all(r is not None for r in ranges)
    # common practice: contiguous entry ranges from 0 to the tree's entry count
    assert ranges[0][0] == 0
    assert all(a[1] == b[0] for a, b in itertools.pairwise(ranges))
    whole = run(cfg)
    split = run(cfg, unit_bytes=400_000)
    assert split.provenance["execution"]["units"] == len(units)
    for name, s in whole.samples.items():
        assert ranges[-1][1] == s.n_events
        assert [r["n_raw"] for r in split.samples[name].cutflow] == [r["n_raw"] for r in s.cutflow]
        for h, acc in s.weighted.items():
            np.testing.assert_allclose(split.samples[name].weighted[h].sumw, acc.sumw,
                                       rtol=1e-12, atol=1e-300)
