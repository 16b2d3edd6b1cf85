"""Chunk memory reuse in the LHE reader: a chunk's memory is reused only once the caller has
let go of every view of it, and the values never change under the caller's feet."""

from __future__ import annotations

import gc

import awkward as ak
import numpy as np

from evtkin import read_lhe
from lhe_textgen import toy_events, toy_file_text


def _px_address(chunk: ak.Array) -> int:
    px = ak.to_numpy(ak.flatten(chunk.particles.px, axis=None))
    base = chunk.particles.px.layout.content.data
    assert np.shares_memory(px, base) or px.size == 0
    return int(base.__array_interface__["data"][0])


def test_held_views_keep_their_values(tmp_path) -> None:
    path = tmp_path / "held.lhe"
    path.write_text(toy_file_text(toy_events(n=60)))
    reference = ak.concatenate(list(read_lhe(path, step_size=60)))
    held = []
    for k, chunk in enumerate(read_lhe(path, step_size=5)):
        if k % 2 == 0:  # keep a numpy view of every other chunk, drop the rest
            held.append((k, chunk.particles.px.layout.content.data))
        del chunk
        gc.collect()
    for k, px in held:
        want = ak.to_numpy(ak.flatten(reference.particles.px[5 * k : 5 * k + 5]))
        assert np.array_equal(px[: want.size], want)  # exact: the memory was not reused


def test_memory_is_reused_when_chunks_are_dropped(tmp_path) -> None:
    path = tmp_path / "drop.lhe"
    path.write_text(toy_file_text(toy_events(n=40)))
    addresses = []
    values = []
    for chunk in read_lhe(path, step_size=4):
        addresses.append(_px_address(chunk))
        values.append(ak.to_list(chunk.particles.px))  # copies
        del chunk
    # the reader fills the next chunk while the caller still holds the previous one, so two
    # blocks alternate at most
    assert len(set(addresses)) <= 3 < len(addresses)
    reference = ak.to_list(ak.concatenate(list(read_lhe(path, step_size=40))).particles.px)
    assert [v for chunk in values for v in chunk] == reference
