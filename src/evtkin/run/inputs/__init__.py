"""Input sources of the run layer, one per ``[samples.NAME] format`` (the contract is in
:mod:`evtkin.run.inputs.base`; DEVELOPERS.md has the recipe for adding a format)."""

from __future__ import annotations

from evtkin.errors import ConfigError
from evtkin.run.inputs.base import InputSource, UnitReading
from evtkin.run.inputs.hepmc import HepMCSource
from evtkin.run.inputs.lhe import LHESource
from evtkin.run.inputs.ntuple import NtupleSource

__all__ = ["SOURCES", "InputSource", "UnitReading", "input_source"]

#: format name → its source
SOURCES: dict[str, InputSource] = {
    s.format: s for s in (LHESource(), NtupleSource(), HepMCSource())
}


def input_source(fmt: str) -> InputSource:
    """The input source of format ``fmt``."""
    source = SOURCES.get(fmt)
    if source is None:
        raise ConfigError(f"input format {fmt!r} is not supported by the run pipeline "
                          f"(known: {', '.join(SOURCES)})")
    return source
