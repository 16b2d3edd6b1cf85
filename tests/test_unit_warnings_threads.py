"""Reader warnings of units that run at the same time in threads of one process (a Dask
worker with several threads): each unit keeps exactly its own, none is lost, whatever the
order in which the units start and finish."""

from __future__ import annotations

import dataclasses
import gzip
import threading
import warnings
from collections.abc import Callable
from pathlib import Path

from evtkin.config import load_config
from evtkin.errors import collect_reading_warnings, warn_reading
from evtkin.io.lhe import LHEWarning
from evtkin.run.partial import PartialResult
from evtkin.run.plan import build_plan
from evtkin.run.units import make_units, process_unit
from test_run import dy_config, dy_file, dy_sample  # noqa: F401 - fixtures
from test_run_output_safety import _damage_events


def _run_both(a: Callable[[], None], b: Callable[[], None],
              after: Callable[[], None] | None = None) -> list[warnings.WarningMessage]:
    """Run ``a`` and ``b`` in two threads (then ``after``); the warnings shown meanwhile."""
    threads = [threading.Thread(target=a), threading.Thread(target=b)]
    with warnings.catch_warnings(record=True) as shown:
        warnings.simplefilter("always")
        for t in threads:
            t.start()
        for t in threads:
            t.join(60)
        if after is not None:
            after()
    return shown


def test_collections_of_two_threads_stay_apart() -> None:
    """A enters, B enters, A leaves, B warns, B leaves: the order that nested
    ``warnings.catch_warnings`` blocks of two threads get wrong."""
    a_in, b_in, a_out = threading.Event(), threading.Event(), threading.Event()
    got: dict[str, list[tuple[str, str]]] = {}

    def a() -> None:
        with collect_reading_warnings() as sink:
            a_in.set()
            b_in.wait(5)
            warn_reading("from A", LHEWarning)
        got["a"] = list(sink)
        a_out.set()

    def b() -> None:
        a_in.wait(5)
        with collect_reading_warnings() as sink:
            b_in.set()
            a_out.wait(5)
            warn_reading("from B", LHEWarning)
        got["b"] = list(sink)

    shown = _run_both(a, b, after=lambda: warn_reading("outside", LHEWarning))
    # with no collection open, a plain warning
    assert got == {"a": [("LHEWarning", "from A")], "b": [("LHEWarning", "from B")]}
    assert [str(w.message) for w in shown] == ["outside"]


def test_units_in_threads_keep_their_own_reader_warnings(tmp_path: Path,
                                                        dy_file: Path) -> None:  # noqa: F811
    text = gzip.decompress(dy_file.read_bytes()).decode()
    files = []
    for name, at in (("a", [5]), ("b", [30, 60])):
        path = tmp_path / f"{name}.lhe"
        path.write_text(_damage_events(text, at))
        files.append(path)
    cfg = load_config(dy_config(files))
    plan = dataclasses.replace(build_plan(cfg, step_size=20), lenient=True)
    unit_a, unit_b = make_units(plan)
    a_started, b_started, a_done = threading.Event(), threading.Event(), threading.Event()
    results: dict[str, PartialResult] = {}

    def progress_a(_n: int) -> None:  # A waits inside its reading until B reads too
        a_started.set()
        b_started.wait(10)

    def progress_b(_n: int) -> None:  # B finishes its reading only after A has finished
        b_started.set()
        a_done.wait(10)

    def run_a() -> None:
        results["a"] = process_unit(plan, unit_a, progress_a)
        a_done.set()

    def run_b() -> None:
        a_started.wait(10)
        results["b"] = process_unit(plan, unit_b, progress_b)

    shown = _run_both(run_a, run_b)
    assert not [w for w in shown if issubclass(w.category, LHEWarning)]  # none escaped
    (wa,) = results["a"].warnings
    (wb,) = results["b"].warnings
    assert wa[0] == wb[0] == "LHEWarning"
    assert "a.lhe: skipped 1 damaged part" in wa[1]
    assert "b.lhe: skipped 2 damaged part" in wb[1]
    n = text.count("</event>")  # every intact event of each file is analysed
    assert (results["a"].n_events(), results["b"].n_events()) == (n - 1, n - 2)
