"""Exceptions raised by evtkin (every message names the file, line or config key at fault)
and the readers' warnings channel.

A reader that tolerates damage (``strict=False``) says so with :func:`warn_reading`. Outside
a run that is a plain :func:`warnings.warn`; a unit of a run opens
:func:`collect_reading_warnings` around its reading and gets the messages as data, to keep
with its result. The collection is per thread, so units running at the same time in the
threads of one process (a Dask worker with several threads) each keep their own, which
``warnings.catch_warnings`` (one process-wide state) cannot promise.
"""

from __future__ import annotations

import threading
import warnings
from collections.abc import Iterator
from contextlib import contextmanager


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


_SINKS = threading.local()


def warn_reading(message: str, category: type[Warning], stacklevel: int = 1) -> None:
    """Report something a reader tolerated: into this thread's innermost open
    :func:`collect_reading_warnings` if there is one, else as ``warnings.warn(message,
    category)`` attributed ``stacklevel`` frames above the caller (1: the caller)."""
    sink: list[tuple[str, str]] | None = getattr(_SINKS, "current", None)
    if sink is not None:
        sink.append((category.__name__, str(message)))
        return
    warnings.warn(message, category, stacklevel=stacklevel + 1)


@contextmanager
def collect_reading_warnings() -> Iterator[list[tuple[str, str]]]:
    """Collect, as ``(category name, message)`` in order, what :func:`warn_reading` reports
    in this thread until the block ends (nested blocks: the innermost collects)."""
    outer = getattr(_SINKS, "current", None)
    sink: list[tuple[str, str]] = []
    _SINKS.current = sink
    try:
        yield sink
    finally:
        _SINKS.current = outer
