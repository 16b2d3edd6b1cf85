"""Memory for the readers' buffers and chunks: fresh anonymous maps, and a pool of the free
blocks of finished reads kept for the next read in the process.

A fresh block is an anonymous memory map of its own, private, returned to the system as soon
as its last view goes. Not ``np.empty``, for two reasons measured in the readers: freed
large arrays raise the C allocator's mapping threshold, and the next ones then come from
(per-thread) heaps that keep their pages (peak RSS of the HepMC reader grew by ~200 MB with
two threads); and numpy asks the kernel for transparent huge pages on large arrays, which
made filling a fresh chunk slower and far more variable (0.8-1.0 s instead of 0.7-0.8 s for
the 316 MB LHE benchmark file on two threads: page compaction on first touch). Private, not
shared: first touching a page of shared memory measured ~1.5x slower, and a process forked
later (the run layer's workers) writes into copies of private pages, never into its
parent's or a sibling's.

The run layer reads unit after unit; the pages of a kept block are touched already (a read
of a 34 MB HepMC byte range touched ~33 MB of fresh pages, ~20% of its CPU time).
"""

from __future__ import annotations

import mmap
import sys
import threading

import numpy as np

__all__ = ["SparePool", "anonymous_map", "fresh_block"]

_PRIVATE = (mmap.MAP_PRIVATE | getattr(mmap, "MAP_ANONYMOUS", getattr(mmap, "MAP_ANON", 0))
            if hasattr(mmap, "MAP_PRIVATE") else None)  # fmt: skip


def anonymous_map(nbytes: int) -> mmap.mmap:
    """``nbytes`` of fresh, private, anonymous memory (at least one byte)."""
    n = max(int(nbytes), 1)
    if _PRIVATE is None:  # (no MAP_PRIVATE: not a POSIX system)
        return mmap.mmap(-1, n)
    return mmap.mmap(-1, n, flags=_PRIVATE)


def fresh_block(nbytes: int) -> np.ndarray:
    """``nbytes`` of fresh memory as a ``uint8`` array over a map of its own."""
    return np.frombuffer(anonymous_map(nbytes), dtype=np.uint8)


class SparePool:
    """Free blocks of finished reads, kept for later reads in the process (one pool per
    reader module; thread-safe). A block is handed out only once no view of it is left."""

    def __init__(self) -> None:
        self.blocks: list[np.ndarray] = []
        self.lock = threading.Lock()

    def take(self, nbytes: int) -> np.ndarray | None:
        """The smallest kept block of at least ``nbytes`` that no view refers to (taken out
        of the pool), else None."""
        with self.lock:
            blocks = self.blocks
            best = -1
            for i in range(len(blocks)):
                size = blocks[i].nbytes
                fits = size >= nbytes and (best < 0 or size < blocks[best].nbytes)
                # references: the list and getrefcount's argument (none left from views)
                if fits and sys.getrefcount(blocks[i]) == 2:
                    best = i
            return blocks.pop(best) if best >= 0 else None

    def keep(self, blocks: list[np.ndarray], limit: int) -> None:
        """Add ``blocks``; keep the newest ``limit``."""
        with self.lock:
            self.blocks.extend(blocks)
            del self.blocks[: max(0, len(self.blocks) - limit)]
