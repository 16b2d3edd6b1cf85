"""Drive a toy sampler: integrate, unweight, assign weights, stream event chunks.

A sampler provides ``trials(rng, n) -> Trials`` (hard-process phase-space points with their
weights in pb, drawn by importance sampling) and ``build(trials, rng, weight) -> ak.Array``
(full events for the given trial points and nominal weights). The driver turns these into
one of three weight modes (:data:`evtkin.toy.record.WEIGHT_MODES`):

* ``unweighted`` (IDWTUP = 3): hit-or-miss unweighting against the largest weight of the
  integration run; every event has XWGTUP = sigma (pb), so both the "sigma/N" and the
  "mean XWGTUP" normalisations give sigma;
* ``weighted`` (IDWTUP = 4): the trial points themselves with their weights; XSECUP is the
  mean of exactly the written weights;
* ``negative`` (IDWTUP = -4): unweighted events, a fraction ``f`` of them (drawn at random,
  independently of the kinematics) with negative sign and |XWGTUP| = sigma/(1 - 2f), so the
  expected mean is still sigma. This mimics the sign structure of NLO samples without their
  physics; XERRUP includes the extra statistical error from the signs.

Seeds: every random stream is ``SeedSequence([seed, purpose, chunk])``, so files are
byte-identical for the same seed and options.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Protocol

import awkward as ak
import numpy as np

from evtkin.io.lhe_write import ProcessInfo, RunInfo
from evtkin.toy.record import WEIGHT_MODES, Variations

__all__ = ["Trials", "generate"]

TRIAL_CHUNK = 100_000
_INTEGRATION, _PRODUCTION, _DECAY = 0, 1, 2


@dataclass
class Trials:
    """Hard-process points: ``weight`` (pb), ``process_id`` and sampler-specific arrays."""

    weight: np.ndarray
    process_id: np.ndarray
    data: dict[str, np.ndarray] = field(default_factory=dict)

    def take(self, idx: np.ndarray) -> Trials:
        data = {k: v[idx] for k, v in self.data.items()}
        return Trials(self.weight[idx], self.process_id[idx], data)


class Sampler(Protocol):
    process_ids: tuple[int, ...]
    beam_energy: float
    variations: Variations

    def trials(self, rng: np.random.Generator, n: int) -> Trials: ...

    def build(self, trials: Trials, rng: np.random.Generator, weight: np.ndarray) -> ak.Array: ...


def _rng(seed: int, purpose: int, chunk: int) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence([seed, purpose, chunk]))


@dataclass
class _Sums:
    n: int = 0
    sums: dict[int, float] = field(default_factory=dict)
    sums2: dict[int, float] = field(default_factory=dict)
    wmax: dict[int, float] = field(default_factory=dict)

    def add(self, tr: Trials, pids: tuple[int, ...]) -> None:
        self.n += len(tr.weight)
        for p in pids:
            w = np.where(tr.process_id == p, tr.weight, 0.0)
            self.sums[p] = self.sums.get(p, 0.0) + float(w.sum())
            self.sums2[p] = self.sums2.get(p, 0.0) + float((w * w).sum())
            self.wmax[p] = max(self.wmax.get(p, 0.0), float(w.max(initial=0.0)))

    def xsec(self, p: int) -> tuple[float, float]:
        mean = self.sums[p] / self.n
        var = max(self.sums2[p] / self.n - mean * mean, 0.0)
        return mean, float(np.sqrt(var / self.n))


def generate(
    sampler: Sampler,
    n_events: int,
    *,
    seed: int,
    mode: str = "unweighted",
    negative_fraction: float = 0.15,
    n_integration: int = 400_000,
    chunk_events: int = 50_000,
) -> tuple[RunInfo, Iterator[ak.Array]]:
    """Return the run information and an iterator over event chunks (see module docstring)."""
    if mode not in WEIGHT_MODES:
        raise ValueError(f"weight mode must be one of {sorted(WEIGHT_MODES)}, got {mode!r}")
    if not 0.0 <= negative_fraction < 0.5:
        raise ValueError("negative_fraction must be in [0, 0.5)")
    pids = sampler.process_ids
    sums = _Sums()
    if mode == "weighted":  # integrate over exactly the trial points that will be written
        sizes = _sizes(n_events, TRIAL_CHUNK)
        for k, size in enumerate(sizes):
            sums.add(sampler.trials(_rng(seed, _PRODUCTION, k), size), pids)
    else:
        for k, size in enumerate(_sizes(n_integration, TRIAL_CHUNK)):
            sums.add(sampler.trials(_rng(seed, _INTEGRATION, k), size), pids)
    xsecs = {p: sums.xsec(p) for p in pids}
    sigma = sum(v[0] for v in xsecs.values())
    w_max = max(sums.wmax.values())

    if mode == "unweighted":
        procs = [ProcessInfo(p, xsecs[p][0], xsecs[p][1], sigma) for p in pids]
    elif mode == "weighted":
        procs = [ProcessInfo(p, xsecs[p][0], xsecs[p][1], sums.wmax[p]) for p in pids]
    else:
        big_w = sigma / (1.0 - 2.0 * negative_fraction)
        # error of the mean of +-W signs with P(-) = f, split over processes by their share
        sign_err = 2.0 * big_w * np.sqrt(negative_fraction * (1 - negative_fraction) / n_events)
        procs = [
            ProcessInfo(p, xsecs[p][0],
                        float(np.hypot(xsecs[p][1], sign_err * xsecs[p][0] / sigma)), big_w)
            for p in pids
        ]  # fmt: skip
    var = sampler.variations
    info = RunInfo(
        beams=(2212, 2212),
        beam_energies=(sampler.beam_energy, sampler.beam_energy),
        pdf_group=(-1, -1),
        pdf_set=(-1, -1),
        weighting=WEIGHT_MODES[mode],
        processes=procs,
        weight_names=var.names,
        weight_groups=var.groups,
        weight_descriptions=var.text,
        weight_group_combine=var.combine,
    )
    return info, _stream(sampler, n_events, seed, mode, sigma, w_max, negative_fraction,
                         chunk_events)  # fmt: skip


def _sizes(n: int, step: int) -> list[int]:
    return [min(step, n - s) for s in range(0, n, step)]


def _stream(
    sampler: Sampler, n_events: int, seed: int, mode: str, sigma: float, w_max: float,
    f_neg: float, chunk_events: int,
) -> Iterator[ak.Array]:
    pending: list[ak.Array] = []
    n_pending = 0
    done = 0
    k = 0
    while done + n_pending < n_events:
        need = n_events - done - n_pending
        prod = _rng(seed, _PRODUCTION, k)
        dec = _rng(seed, _DECAY, k)
        if mode == "weighted":
            tr = sampler.trials(prod, min(TRIAL_CHUNK, need))
            weight = tr.weight
        else:
            tr = sampler.trials(prod, TRIAL_CHUNK)
            keep = dec.random(len(tr.weight)) * w_max < tr.weight
            tr = tr.take(np.flatnonzero(keep)[:need])
            weight = np.full(len(tr.weight), sigma)
            if mode == "negative":
                sign = np.where(dec.random(len(weight)) < f_neg, -1.0, 1.0)
                weight = sign * sigma / (1.0 - 2.0 * f_neg)
        k += 1
        if len(weight):
            pending.append(sampler.build(tr, dec, weight))
            n_pending += len(weight)
        while n_pending >= chunk_events or (done + n_pending == n_events and n_pending):
            merged = ak.concatenate(pending) if len(pending) > 1 else pending[0]
            out, rest = merged[:chunk_events], merged[chunk_events:]
            pending = [rest] if len(rest) else []
            n_pending = len(rest)
            done += len(out)
            yield out
