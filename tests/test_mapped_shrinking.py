"""A plain file that shrinks while read_hepmc / read_lhe scan it from memory maps (rewritten in
place by another job) raises the reader's error naming the file and what was read (before:
a bare ``ValueError: mmap length is greater than file size``). Each reading runs in a child
process, so that a regression to touching pages past the new end (SIGBUS) fails this test
instead of ending the test run."""

from __future__ import annotations

import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

CHILD = textwrap.dedent(r"""
    import os, sys
    sys.path.insert(0, sys.argv[3])
    import evtkin
    from evtkin.errors import EvtkinError
    from evtkin.io import hepmc, lhe

    kind, path = sys.argv[1], sys.argv[2]
    if kind == "hepmc":
        from hepmc_textgen import random_events
        evtkin.write_hepmc(path, random_events(3000, seed=4), weight_names=("nominal", "muR2"))
        hepmc.BUFFER_BYTES = 1 << 16
        read = evtkin.read_hepmc
    else:
        from lhe_textgen import toy_events, toy_file_text
        with open(path, "w") as f:
            f.write(toy_file_text(toy_events(seed=4, n=6000)))
        lhe.BUFFER_BYTES = 1 << 16
        read = evtkin.read_lhe
    size = os.path.getsize(path)
    n = 0
    try:
        for k, chunk in enumerate(read(path, step_size=10, threads=0)):
            n += len(chunk)
            if k == 0:
                os.truncate(path, size // 3)  # as a job rewriting the file would
        print("no error", n, size)
    except EvtkinError as exc:
        print("error:", exc)
""")


@pytest.mark.parametrize("kind", ["hepmc", "lhe"])
def test_a_file_that_shrinks_while_mapped_raises(tmp_path: Path, kind: str) -> None:
    path = tmp_path / f"shrinking.{kind}"
    tests = Path(__file__).resolve().parent
    done = subprocess.run([sys.executable, "-c", CHILD, kind, str(path), str(tests)],
                          capture_output=True, text=True, timeout=300)
    # -7: SIGBUS; 1: an exception other than the reader's error
    assert done.returncode == 0, (done.returncode, done.stderr[-2000:])
    out = done.stdout.strip()
    assert out.startswith(f"error: {path}: the file shrank from "), out
    assert "while it was read" in out
