"""What a run gives back: :class:`RunResult` (``result[sample][histogram]``) and one
:class:`SampleResult` per sample (normalised histograms, σ, cutflow, bands, responses). Built by
:mod:`evtkin.run.pipeline`, written by :mod:`evtkin.run.outputs`."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from evtkin.hists.fill import HistAccumulator
from evtkin.hists.normalise import NormalisedHist
from evtkin.hists.xsec import XsecResult
from evtkin.run.partial import PartialResult

__all__ = ["RunResult", "SampleResult"]


@dataclass
class SampleResult:
    """Everything evtkin knows about one sample after a run (normalised)."""

    name: str
    label: str
    luminosity_fb: float | None
    toy: bool
    xsec: XsecResult | None
    variations: tuple[str, ...]
    histograms: dict[str, NormalisedHist]
    #: per histogram: Σw, Σw² with the normalised per-event weights (before the normalisation mode)
    weighted: dict[str, HistAccumulator]
    cutflow: list[dict[str, Any]]
    n_events: int
    #: per histogram: uncertainty bands (name → Band) from the resolved recipes
    bands: dict[str, dict[str, Any]] = field(default_factory=dict)
    #: per 1-D histogram: the same bands formed from unit-area shapes, each variation
    #: normalised on its own (what a shape-only comparison draws)
    shape_bands: dict[str, dict[str, Any]] = field(default_factory=dict)
    #: the recipes applied to this sample and notes on how they were resolved
    recipes: list[Any] = field(default_factory=list)
    uncertainty_notes: list[str] = field(default_factory=list)
    #: per histogram marked ``response = true``: evtkin.hists.response.Response
    responses: dict[str, Any] = field(default_factory=dict)


@dataclass
class RunResult:
    """What :func:`run` returns: ``result[sample][histogram]`` is a ``hist.Hist`` (Weight storage,
    normalised as the config asks)."""

    samples: dict[str, SampleResult]
    provenance: dict[str, Any]
    out: Path | None = None
    seconds: dict[str, float] = field(default_factory=dict)
    #: the merged, not yet normalised sums (written as ``partial.npz`` for ``evtkin merge``)
    partial: PartialResult | None = None

    def __getitem__(self, sample: str) -> dict[str, Any]:
        return self.hists(sample)

    def hists(self, sample: str) -> dict[str, Any]:
        """``{histogram name: hist.Hist}`` of one sample (nominal weight)."""
        s = self.samples[sample]
        return {name: _to_hist(nh) for name, nh in s.histograms.items()}

    @property
    def histograms(self) -> dict[str, dict[str, Any]]:
        return {name: self.hists(name) for name in self.samples}


def _to_hist(nh: NormalisedHist, variation: int = 0) -> Any:
    acc = HistAccumulator(nh.spec, nh.variations, nh.entries,
                          np.ascontiguousarray(np.moveaxis(nh.values, 0, -1)),
                          np.ascontiguousarray(np.moveaxis(nh.variances, 0, -1)))
    return acc.to_hist(variation)
