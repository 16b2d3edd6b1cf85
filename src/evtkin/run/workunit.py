"""The work unit: one input file of one sample, or a part of it (a byte range or an entry
range), the piece of a run that an executor hands to a worker."""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Any

__all__ = ["WorkUnit", "entry_ranges"]


@dataclass(frozen=True)
class WorkUnit:
    """One input file of one sample, or a part of it.

    ``first_event``/``max_events`` restrict the events of a whole-file unit.
    ``byte_range`` = ``(start, stop)``: decompressed byte offsets of a plain LHE file; the
    range starts at an ``<event`` tag and holds whole events only. ``entry_range`` =
    ``(start, stop)``: tree entries of a ROOT ntuple. ``part``/``n_parts`` number the parts
    of one file (part 0 records the file's checksum, unless ``checksum`` is false because
    the run computes it separately); ``size`` is the number of bytes on
    disk the unit covers (for throughput figures); ``index`` is the unit's position in the
    run.
    """

    sample: str
    file_index: int
    path: str
    first_event: int = 0
    max_events: int | None = None
    byte_range: tuple[int, int] | None = None
    entry_range: tuple[int, int] | None = None
    part: int = 0
    n_parts: int = 1
    size: int = 0
    format: str = "lhe"
    index: int = 0
    checksum: bool = True  # False: the run hashes the file elsewhere (see executors.execute)

    @property
    def starts_file(self) -> bool:
        return self.first_event == 0 and self.part == 0

    @property
    def label(self) -> str:
        """The file and, for a part, the range: for messages and the provenance."""
        if self.byte_range is not None:
            a, b = self.byte_range
            return f"{self.path} (bytes {a}-{b}, part {self.part + 1} of {self.n_parts})"
        if self.entry_range is not None:
            a, b = self.entry_range
            return f"{self.path} (entries {a}-{b}, part {self.part + 1} of {self.n_parts})"
        if self.first_event or self.max_events is not None:
            last = "end" if self.max_events is None else self.first_event + self.max_events
            return f"{self.path} (events {self.first_event}-{last})"
        return self.path

    def describe(self) -> dict[str, Any]:
        """A JSON-ready record of the unit."""
        return {
            "sample": self.sample, "file_index": self.file_index, "path": self.path,
            "byte_range": list(self.byte_range) if self.byte_range else None,
            "entry_range": list(self.entry_range) if self.entry_range else None,
            "part": self.part, "n_parts": self.n_parts,
        }


def entry_ranges(n_entries: int, parts: int) -> list[tuple[int, int]]:
    """Split ``n_entries`` entries into ``parts`` contiguous ranges (sizes differ by at most
    one)."""
    parts = max(1, min(int(parts), int(n_entries))) if n_entries else 1
    edges = [(n_entries * k) // parts for k in range(parts + 1)]
    return list(itertools.pairwise(edges))
