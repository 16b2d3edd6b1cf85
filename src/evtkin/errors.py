"""Exceptions raised by evtkin. Every message names the file, line or config key at fault."""

from __future__ import annotations


class EvtkinError(Exception):
    """Base class of every error evtkin raises on purpose."""


class LHEError(EvtkinError, ValueError):
    """A Les Houches event file is malformed, truncated or not an LHE file."""


class ConfigError(EvtkinError, ValueError):
    """An analysis config is invalid: unknown key, bad value, bad expression."""


class NtupleError(EvtkinError, ValueError):
    """A ROOT ntuple does not match its declared mapping or cannot be read."""


class ResultsError(EvtkinError, ValueError):
    """A results folder is missing files or holds something evtkin did not write."""


class HepMCError(EvtkinError, ValueError):
    """A HepMC ASCII event file is malformed, truncated or not a HepMC file."""
