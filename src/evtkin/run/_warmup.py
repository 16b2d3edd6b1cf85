"""Warm-up of the compiled kernels, run once in the forkserver of a local process pool.

Importing this module reads a two-event LHE text through :func:`evtkin.io.lhe.read_lhe`
and fills a few histograms (regular and variable axes, 1-D and 2-D, with and without row
maps), so that numba's start-up and the loading of the cached machine code (several seconds
for the byte scanner) happen once in the forkserver process. Every worker forked from it
starts with the kernels ready. Failures are ignored: a cold worker is only slower.
"""

from __future__ import annotations

import contextlib
import os
import tempfile

__all__ = ["warm"]

_TINY = b"""<LesHouchesEvents version="3.0">
<header>
<initrwgt><weightgroup name="w"><weight id="a"> a </weight></weightgroup></initrwgt>
</header>
<init>
2212 2212 6500.0 6500.0 -1 -1 -1 -1 3 1
1.0 0.1 1.0 1
</init>
<event>
3 1 1.0 91.0 0.0078125 0.118
2 -1 0 0 501 0 0.0 0.0 40.0 40.0 0.0 0.0 9.0
-2 -1 0 0 0 501 0.0 0.0 -50.0 50.0 0.0 0.0 9.0
13 1 1 2 0 0 1.5e1 -2.0 -10.0 18.1 0.105 0.0 9.0
<rwgt><wgt id="a"> 1.1 </wgt></rwgt>
</event>
<event>
3 1 -1.0 91.0 0.0078125 0.118
21 -1 0 0 501 502 0.0 0.0 40.0 40.0 0.0 0.0 9.0
21 -1 0 0 502 501 0.0 0.0 -50.0 50.0 0.0 0.0 9.0
11 1 1 2 0 0 1.5 -2.0 -10.0 10.3 0.0 0.0 9.0
<rwgt><wgt id="a"> -0.9 </wgt></rwgt>
</event>
</LesHouchesEvents>
"""


def warm() -> None:
    """Load the compiled kernels of the reader and the histogram filler in this process."""
    import numpy as np

    from evtkin.hists.fill import AxisSpec, HistAccumulator, HistSpec, fill_many
    from evtkin.io.lhe import read_lhe

    fd, path = tempfile.mkstemp(prefix="evtkin-warm-", suffix=".lhe")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(_TINY)
        for _chunk in read_lhe(path, threads=1):
            pass
    finally:
        os.unlink(path)
    reg = AxisSpec.regular(4, 0.0, 1.0, name="x")
    var = AxisSpec.variable([0.0, 0.5, 1.0], name="y")
    x = np.array([0.1, 0.7])
    w = np.array([1.0, -1.0])
    wv = np.array([[1.1], [-0.9]])
    items = [
        (HistAccumulator(HistSpec("a", (reg,)), ("a",)), [x], None),
        (HistAccumulator(HistSpec("b", (var,)), ("a",)), [x], np.array([0, 1])),
        (HistAccumulator(HistSpec("c", (reg, var)), ("a",)), [x, x], None),
    ]
    fill_many(items, weight=w, variations=wv)
    # the physics modules: imported here, their kernels load on first use in a worker
    import evtkin.run.plan  # noqa: F401


with contextlib.suppress(Exception):  # a cold worker is only slower
    warm()
