"""Splitting a run's input files into parts for separate jobs (``evtkin run --part K/N``).

Every input file of every sample goes to exactly one of N parts: the files are dealt out by
size (largest first, each to the part with the fewest bytes so far; ties to the lower part
and the earlier file), so the parts take about the same time. The assignment depends only
on the config's file list and the file sizes, so every job of a batch computes the same
split. ``evtkin merge`` adds the parts' results back into the result of one run.
"""

from __future__ import annotations

from collections.abc import Sequence

from evtkin.errors import ConfigError

__all__ = ["parse_part", "split_files"]


def parse_part(text: str) -> tuple[int, int]:
    """``"K/N"`` (1 ≤ K ≤ N) → ``(K, N)``; anything else is a ConfigError."""
    k_text, sep, n_text = text.partition("/")
    try:
        k, n = int(k_text), int(n_text)
    except ValueError:
        k = n = 0
    if not sep or n < 1 or not 1 <= k <= n:
        raise ConfigError(f"--part: expected K/N with 1 <= K <= N (e.g. 2/5), got {text!r}")
    return k, n


def split_files(files: Sequence[tuple[str, int, int]], n: int) -> list[set[tuple[str, int]]]:
    """``files`` = ``(sample, file index, size in bytes)`` in config order → the N parts, each a
    set of ``(sample, file index)``."""
    load = [0] * n
    parts: list[set[tuple[str, int]]] = [set() for _ in range(n)]
    order = sorted(range(len(files)), key=lambda j: (-files[j][2], j))
    for j in order:
        sample, index, size = files[j]
        p = min(range(n), key=lambda q: (load[q], q))
        parts[p].add((sample, index))
        load[p] += size
    return parts
