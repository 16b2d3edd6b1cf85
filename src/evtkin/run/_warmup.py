"""Warm-up of the compiled kernels, run once in the forkserver of a local process pool.

Importing this module reads a two-event LHE text through :func:`evtkin.io.lhe.read_lhe`
and fills a few histograms (regular and variable axes, 1-D and 2-D, with and without row
maps), then one showered HepMC event through :func:`evtkin.io.hepmc.read_hepmc` and the
particle-level recipes, so that numba's start-up and the loading of the cached machine code
(several seconds for the byte scanners) happen once in the forkserver process. Every worker
forked from it starts with the kernels ready. Failures are ignored: a cold worker is only slower.
"""

from __future__ import annotations

import contextlib
import os
import tempfile

__all__ = ["warm", "warm_particle_level"]

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


#: one showered event (beams, a muon with a photon, a B hadron decaying to a pion and a
#: neutrino) for the HepMC scanner and the particle-level kernels
_TINY_HEPMC = b"""HepMC::Version 3.02.00
HepMC::Asciiv3-START_EVENT_LISTING
E 1 2 7
U GEV MM
P 1 0 2212 0 0 6499.9999 6500 0.93827209 4
P 2 0 2212 0 0 -6499.9999 6500 0.93827209 4
V -1 0 [1,2]
P 3 -1 13 30 5 3 30.6 0.105 1
P 4 -1 22 1 0.2 0.1 1.03 0 1
P 5 -1 511 -30 -5 2 30.9 5.279 2
V -2 0 [5]
P 6 -2 211 -20 -3 1 20.3 0.139 1
P 7 -2 14 -10 -2 1 10.2 0 1
HepMC::Asciiv3-END_EVENT_LISTING
"""


def warm_particle_level() -> None:
    """Load the HepMC scanner and the particle-level kernels (decay graph, dressing, ghost
    clustering, isolation) in this process."""
    from evtkin.io.hepmc import read_hepmc
    from evtkin.select import particle_level as pl

    fd, path = tempfile.mkstemp(prefix="evtkin-warm-", suffix=".hepmc")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(_TINY_HEPMC)
        for chunk in read_hepmc(path, threads=1):
            parts = chunk["particles"]
            leptons = pl.dressed_leptons(parts, radius=0.1)
            ghosts = pl.ghost_candidates(parts, min_pt=5.0)
            pl.particle_jets(parts, radius=0.4, ghosts=ghosts)
            pl.isolation(leptons, parts, radius=0.3)
            pl.missing_pt(parts, prompt_only=True)
    finally:
        os.unlink(path)


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
with contextlib.suppress(Exception):
    warm_particle_level()
