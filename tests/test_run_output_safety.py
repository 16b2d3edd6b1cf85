"""Output folders and damaged inputs in a run (issue 18 §4, §6): the folder is checked and
locked before any work, INCOMPLETE folders are refused, file names never collide, and a run
can read damaged LHE files leniently."""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys

import pytest

import evtkin
from evtkin.cli import main
from evtkin.errors import ConfigError, EvtkinError, ResultsError
from evtkin.files import LOCK_NAME
from evtkin.io.lhe import LHEWarning
from evtkin.output.compare_run import compare_results
from evtkin.run.pipeline import run
from test_run import dy_config, dy_file, dy_sample  # noqa: F401 - fixtures


def small(files):
    cfg = dy_config(files, output={"formats": ["json"]})
    cfg["histograms"] = {"mll": cfg["histograms"]["mll"]}
    return cfg


def test_out_onto_a_file_fails_before_reading(tmp_path):
    bad_input = tmp_path / "not_lhe.lhe"
    bad_input.write_text("this is not an event file\n")
    target = tmp_path / "results"
    target.write_text("a regular file")
    with pytest.raises(ResultsError, match=r"results: is a file, not a folder"):
        run(small([bad_input]), out=target)


def test_second_run_on_the_same_folder_fails_at_once(tmp_path, dy_file):  # noqa: F811
    out = tmp_path / "out"
    out.mkdir()
    # a live process (this one) holds the lock
    import socket

    (out / LOCK_NAME).write_text(f"{socket.gethostname()} {os.getpid()}\n")
    with pytest.raises(ResultsError, match=rf"process {os.getpid()} .* is writing to this folder"):
        run(small([dy_file]), out=out)
    assert not (out / "results.json").exists()


def test_stale_lock_of_a_dead_process_is_taken_over(tmp_path, dy_file):  # noqa: F811
    import socket

    child = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                           capture_output=True, text=True, check=True)
    dead = int(child.stdout)  # the child has exited: its pid names no running process
    out = tmp_path / "out"
    out.mkdir()
    (out / LOCK_NAME).write_text(f"{socket.gethostname()} {dead}\n")
    run(small([dy_file]), out=out, max_events=200)
    assert (out / "results.json").is_file()
    assert not (out / LOCK_NAME).exists()  # released at the end


def test_incomplete_folder_is_refused_unless_allowed(tmp_path, dy_file):  # noqa: F811
    out = tmp_path / "out"
    run(small([dy_file]), out=out, max_events=200)
    (out / "INCOMPLETE").write_text("interrupted")
    with pytest.raises(ResultsError, match="marked INCOMPLETE"):
        evtkin.load_results(out)
    with pytest.raises(ResultsError, match="marked INCOMPLETE"):
        compare_results([out], out=tmp_path / "cmp")
    assert evtkin.load_results(out, allow_incomplete=True)
    assert main(["compare", str(out), "--out", str(tmp_path / "cmp2"), "--jobs", "1"]) == 1
    assert main(["plot", str(out), "--jobs", "1", "--formats", "png"]) == 1
    assert not (out / "plots").exists()
    assert main(["plot", str(out), "--jobs", "1", "--formats", "png", "--allow-incomplete"]) == 0
    assert list((out / "plots").glob("*.png"))


@pytest.mark.parametrize(("section", "a", "b"), [("samples", "x y", "x_y"),
                                                 ("histograms", "m/ll", "m_ll")])
def test_names_that_collide_as_file_names(tmp_path, dy_file, section, a, b):  # noqa: F811
    cfg = small([dy_file])
    first = next(iter(cfg[section].values()))
    cfg[section] = {a: first, b: first}
    with pytest.raises(ConfigError, match=rf"{b!r} and {a!r} give the same file name"):
        run(cfg)


def test_lenient_run_reads_a_damaged_file(tmp_path, dy_file):  # noqa: F811
    import gzip

    text = gzip.decompress(dy_file.read_bytes()).decode()
    # damage the 11th event: its </event> line removed (it would swallow the 12th)
    starts = [i for i in range(len(text)) if text.startswith("<event>", i)][:12]
    eleventh = text[starts[10]:starts[11]]
    damaged = text[:starts[10]] + eleventh.replace("</event>\n", "", 1) + text[starts[11]:]
    path = tmp_path / "damaged.lhe"
    path.write_text(damaged)
    with pytest.raises(EvtkinError, match="the event is not closed"):
        run(small([path]))
    with pytest.warns(LHEWarning, match=r"skipped 1 damaged part"):
        res = run(small([path]), lenient=True, jobs=1)
    assert res.samples["dy"].cutflow[0]["n_raw"] == 1499  # every intact event
    assert json.loads(json.dumps(res.provenance))["lenient"] is True


def test_skip_bad_keeps_the_events_of_a_unit_that_fails_late(tmp_path, dy_file):  # noqa: F811
    import gzip

    text = gzip.decompress(dy_file.read_bytes())
    cut = text[: len(text) * 2 // 3]  # cut short inside an event, ~1000 events before
    path = tmp_path / "cut.lhe"
    path.write_bytes(cut)
    complete = cut.count(b"</event>")
    line = cut[: cut.rindex(b"<event>")].count(b"\n") + 1
    with pytest.raises(EvtkinError, match="cut short"):
        run(small([path]), step_size=100, jobs=1)
    with pytest.warns(LHEWarning, match=rf"line {line}: the file is cut short"):
        res = run(small([path]), step_size=100, jobs=1, skip_bad=True)
    (rec,) = res.provenance["skipped"]
    assert "cut short" in rec["error"]
    # every complete event is kept (also those of the chunk the cut falls in), and listed
    kept = res.samples["dy"].cutflow[0]["n_raw"]
    assert kept == rec["events_kept"] == complete
    assert complete % 100  # the cut falls inside a chunk of 100
    (damage,) = rec["damaged"]
    assert f"line {line}:" in damage


def _damage_events(text: str, which: list[int]) -> str:
    """``text`` with the event lines of events number ``which`` (0-based) made malformed."""
    starts = [m.start() for m in re.finditer("<event>", text)]
    out = []
    last = 0
    for k in which:
        i = text.index("\n", starts[k]) + 1  # the event line
        out.append(text[last:i] + "x")
        last = i
    return "".join(out) + text[last:]


@pytest.mark.parametrize("jobs", [1, 2])
def test_skip_bad_keeps_every_intact_event_of_a_damaged_unit(tmp_path, dy_file, jobs):  # noqa: F811
    import gzip

    text = gzip.decompress(dy_file.read_bytes()).decode()
    n = text.count("</event>")
    path = tmp_path / "damaged.lhe"
    path.write_text(_damage_events(text, [250, 700]))
    lines = [line_no for line_no, line in enumerate(path.read_text().splitlines(), 1)
             if line.startswith("x")]
    with pytest.warns(LHEWarning, match=r"skipped 2 damaged part") as rec_w:
        res = run(small([path]), step_size=100, jobs=jobs, skip_bad=True, unit_bytes=None)
    # once, in this process, whatever process read the unit
    assert len([w for w in rec_w if issubclass(w.category, LHEWarning)]) == 1
    (rec,) = res.provenance["skipped"]
    assert f"line {lines[0]}:" in rec["error"]  # the strict reading stopped at the first
    # the events before, between and after the two damaged ones are all analysed
    assert res.samples["dy"].cutflow[0]["n_raw"] == rec["events_kept"] == n - 2
    (damage,) = rec["damaged"]
    assert f"line(s) {lines[0]}, {lines[1]};" in damage
    assert res.provenance["read_warnings"] == [damage]
    # the same numbers as a lenient reading of the whole file
    with pytest.warns(LHEWarning):
        lenient = run(small([path]), step_size=100, jobs=1, lenient=True)
    assert lenient.samples["dy"].cutflow == res.samples["dy"].cutflow
    assert lenient.provenance["skipped"] == []


def test_lenient_warnings_of_worker_processes_reach_the_caller(tmp_path, dy_file):  # noqa: F811
    import gzip

    text = gzip.decompress(dy_file.read_bytes()).decode()
    path = tmp_path / "damaged.lhe"
    path.write_text(_damage_events(text, [10]))
    line = next(i for i, x in enumerate(path.read_text().splitlines(), 1) if x.startswith("x"))
    # two units in two worker processes: the damaged one warns in its worker
    size = path.stat().st_size
    with pytest.warns(LHEWarning, match=rf"skipped 1 damaged part.* line\(s\) {line};") as rec:
        res = run(small([path]), lenient=True, jobs=2, unit_bytes=size // 2 + 1)
    assert res.provenance["execution"]["units"] == 2
    assert len([w for w in rec if issubclass(w.category, LHEWarning)]) == 1
    (msg,) = res.provenance["read_warnings"]
    assert f"line(s) {line};" in msg
    assert res.samples["dy"].cutflow[0]["n_raw"] == text.count("</event>") - 1
