"""One progress bar over all work units of a run, with events/s and MB/s.

The bar counts finished units; its postfix shows the events read so far, the event rate
and the input throughput (bytes on disk of the finished units per second). Executors that
can report chunks as they are read (serial, local processes) move the event count between
unit completions; a Dask run updates per finished unit. The bar is quiet unless stderr is
a terminal (or ``enabled=True`` is asked for).
"""

from __future__ import annotations

import sys
import threading
import time
from typing import Any

__all__ = ["RunProgress"]


class RunProgress:
    """Progress of a run over ``n_units`` units covering ``n_bytes`` bytes of input."""

    def __init__(self, n_units: int, n_bytes: int, enabled: bool | None = None,
                 desc: str = "evtkin run") -> None:
        if enabled is None:
            enabled = bool(getattr(sys.stderr, "isatty", lambda: False)())
        self.enabled = enabled
        self.n_units = n_units
        self.n_bytes = n_bytes
        self.events = 0
        self.bytes_done = 0
        self._seen: dict[int, int] = {}  # events reported so far per unit index
        self._done: set[int] = set()
        self._lock = threading.Lock()
        self._t0 = time.perf_counter()
        self._last = 0.0
        self._bar: Any = None
        if enabled:
            from tqdm import tqdm

            self._bar = tqdm(total=n_units, unit=" units", desc=desc, dynamic_ncols=True,
                             file=sys.stderr, leave=True)

    def chunk(self, unit_index: int, n_events: int) -> None:
        """``n_events`` more events of unit ``unit_index`` are done (may come from any thread)."""
        with self._lock:
            if unit_index in self._done:  # a late message from a process: already counted
                return
            self._seen[unit_index] = self._seen.get(unit_index, 0) + n_events
            self.events += n_events
            self._refresh(force=False)

    def unit_done(self, unit_index: int, n_events: int, n_bytes: int) -> None:
        """Unit ``unit_index`` finished with ``n_events`` events read from ``n_bytes`` bytes."""
        with self._lock:
            self._done.add(unit_index)
            self.events += n_events - self._seen.pop(unit_index, 0)
            self.bytes_done += n_bytes
            if self._bar is not None:
                self._bar.update(1)
            self._refresh(force=True)

    def rates(self) -> tuple[float, float]:
        """(events per second, MB per second) since the start."""
        dt = max(time.perf_counter() - self._t0, 1e-9)
        return self.events / dt, self.bytes_done / dt / 1e6

    def _refresh(self, force: bool) -> None:
        if self._bar is None:
            return
        now = time.perf_counter()
        if not force and now - self._last < 0.5:
            return
        self._last = now
        evs, mbs = self.rates()
        self._bar.set_postfix_str(
            f"{_si(self.events)} events, {_si(evs)} ev/s, {mbs:.1f} MB/s", refresh=True
        )

    def close(self) -> None:
        if self._bar is not None:
            self._bar.close()
            self._bar = None

    def __enter__(self) -> RunProgress:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _si(x: float) -> str:
    for div, suffix in ((1e9, "G"), (1e6, "M"), (1e3, "k")):
        if abs(x) >= div:
            return f"{x / div:.3g}{suffix}"
    return f"{x:.3g}"
