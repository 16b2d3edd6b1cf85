"""``responses.json``: the response matrices of a run (see :mod:`evtkin.hists.response`)."""

from __future__ import annotations

import json
from collections.abc import Mapping
from pathlib import Path

from evtkin.files import atomic_write_text
from evtkin.hists.response import Response

__all__ = ["write_responses"]


def write_responses(folder: str | Path, responses: Mapping[str, Mapping[str, Response]]
                    ) -> Path | None:
    """``responses.json`` from ``{sample: {histogram: Response}}``: per sample and histogram
    the matrix, truth and reco histograms, efficiency and purity (see
    :meth:`evtkin.hists.response.Response.to_dict`). Nothing is written without any."""
    data = {s: {h: r.to_dict() for h, r in per.items()} for s, per in responses.items()}
    data = {s: d for s, d in data.items() if d}
    if not data:
        return None
    doc = {"about": "response matrices: rows = truth bin, columns = reconstructed bin, flow "
                    "bins included; contents in pb (σ-normalised Σw); efficiency and purity per "
                    "in-range bin", "samples": data}
    return atomic_write_text(Path(folder) / "responses.json",
                             json.dumps(doc, indent=1, allow_nan=False) + "\n")
