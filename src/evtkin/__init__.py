"""evtkin: event files to analysis plots.

The public API is listed in ``__all__``. Names are imported lazily so that
``import evtkin`` stays fast (the compiled LHE scanner and plotting libraries
load only when used).
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from evtkin._version import __version__
from evtkin.errors import (
    ConfigError,
    EvtkinError,
    HepMCError,
    LHEError,
    NtupleError,
    ResultsError,
)

# public name -> module that defines it
_LAZY: dict[str, str] = {
    "read_lhe": "evtkin.io.lhe",
    "lhe_info": "evtkin.io.lhe_header",
    "LHEInfo": "evtkin.io.lhe_header",
    "write_lhe": "evtkin.io.lhe_write",
    "read_hepmc": "evtkin.io.hepmc",
    "hepmc_info": "evtkin.io.hepmc_header",
    "HepMCInfo": "evtkin.io.hepmc_header",
    "write_hepmc": "evtkin.io.hepmc_write",
    "run": "evtkin.run.pipeline",
    "cluster_jets": "evtkin.select.clustering",
    "compare_results": "evtkin.output.compare_run",
    "load_results": "evtkin.output.results",
    "Results": "evtkin.output.results",
    "SampleHists": "evtkin.output.results",
    "HistBand": "evtkin.output.results",
    "density": "evtkin.hists.histview",
}

__all__ = [
    "ConfigError",
    "EvtkinError",
    "HepMCError",
    "HepMCInfo",
    "HistBand",
    "LHEError",
    "LHEInfo",
    "NtupleError",
    "Results",
    "ResultsError",
    "SampleHists",
    "__version__",
    "cluster_jets",
    "compare_results",
    "density",
    "hepmc_info",
    "lhe_info",
    "load_results",
    "read_hepmc",
    "read_lhe",
    "run",
    "write_hepmc",
    "write_lhe",
]

if TYPE_CHECKING:  # pragma: no cover
    from evtkin.hists.histview import density
    from evtkin.io.hepmc import read_hepmc
    from evtkin.io.hepmc_header import HepMCInfo, hepmc_info
    from evtkin.io.hepmc_write import write_hepmc
    from evtkin.io.lhe import read_lhe
    from evtkin.io.lhe_header import LHEInfo, lhe_info
    from evtkin.io.lhe_write import write_lhe
    from evtkin.output.compare_run import compare_results
    from evtkin.output.results import HistBand, Results, SampleHists, load_results
    from evtkin.run.pipeline import run
    from evtkin.select.clustering import cluster_jets


def __getattr__(name: str) -> Any:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'evtkin' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(__all__)
