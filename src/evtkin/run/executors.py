"""Executors: run work units and hand back their partial results.

An executor takes a picklable :class:`~evtkin.run.plan.Plan` and a list of
:class:`~evtkin.run.units.WorkUnit` and yields one
:class:`~evtkin.run.partial.PartialResult` per unit, in any order; the pipeline merges
them (the merge is associative). Only the serial executor exists today. A process pool or
a Dask client fits the same shape: submit ``process_unit(plan, unit)`` per unit (both
arguments pickle), gather the results, merge; progress is then reported per finished unit
instead of per chunk.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from typing import Protocol

from evtkin.run.partial import PartialResult
from evtkin.run.plan import Plan
from evtkin.run.units import WorkUnit, process_unit

__all__ = ["Executor", "SerialExecutor", "get_executor"]

Progress = Callable[[int], None]


class Executor(Protocol):
    """Anything that turns units into partial results."""

    def run(self, plan: Plan, units: Sequence[WorkUnit],
            progress: Progress | None = None) -> Iterator[PartialResult]:
        ...  # pragma: no cover


class SerialExecutor:
    """Process the units one after another in this process (progress per chunk)."""

    def run(self, plan: Plan, units: Sequence[WorkUnit],
            progress: Progress | None = None) -> Iterator[PartialResult]:
        for unit in units:
            yield process_unit(plan, unit, progress)


def get_executor(name: str = "serial") -> Executor:
    """The executor called ``name`` (only ``"serial"`` for now)."""
    if name == "serial":
        return SerialExecutor()
    raise ValueError(f"unknown executor {name!r}; available: 'serial'")
