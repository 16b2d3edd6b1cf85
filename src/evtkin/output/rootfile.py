"""ROOT output: TH1D/TH2D with Σw² (``fSumw2``) and flow bins, written through uproot.

Keys are flat: ``<sample>__<hist>`` for the nominal, ``<sample>__<hist>__<band>_up`` /
``..._down`` for band edges (zero variances) and ``<sample>__<hist>__entries`` for the raw number
of fills per bin (variances = the counts). The histogram title is the title; axis titles carry
labels and units (y/z: the normalised quantity).
The file is written under a temporary name and renamed.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from evtkin.errors import ResultsError
from evtkin.files import atomic_path, safe_name
from evtkin.output.tables import HistResult, Results

__all__ = ["read_root", "root_key", "th_object", "write_results_root", "write_root"]


def root_key(sample: str, hist: str, band: str | None = None, side: str | None = None) -> str:
    key = f"{safe_name(sample)}__{safe_name(hist)}"
    return key if band is None else f"{key}__{safe_name(band)}_{side}"


def _taxis(name: str, title: str, edges: np.ndarray) -> Any:
    from uproot.writing.identify import to_TAxis

    n = int(edges.size - 1)
    regular = np.allclose(np.diff(edges), (edges[-1] - edges[0]) / n, rtol=1e-12, atol=0.0)
    return to_TAxis(name, title, n, float(edges[0]), float(edges[-1]),
                    None if regular else edges.astype(np.float64))


def th_object(name: str, h: HistResult, values: np.ndarray | None = None,
              variances: np.ndarray | None = None) -> Any:
    """An uproot TH1D/TH2D model of ``h`` (or of other contents with the same binning)."""
    from uproot.writing.identify import to_TH1x, to_TH2x

    v = np.asarray(h.values if values is None else values, dtype=np.float64)
    s2 = np.asarray(h.variances if variances is None else variances, dtype=np.float64)
    from uproot.writing.identify import to_TAxis

    title = h.title
    inner = v[(slice(1, -1),) * h.ndim]
    tsumw = float(np.sum(inner))
    tsumw2 = float(np.sum(s2[(slice(1, -1),) * h.ndim]))
    entries = float(h.entries)
    xa = _taxis("xaxis", h.axes[0].title, h.axes[0].edges)
    if h.ndim == 1:
        centres = 0.5 * (h.axes[0].edges[1:] + h.axes[0].edges[:-1])
        return to_TH1x(
            name, title, v, entries, tsumw, tsumw2, float(np.sum(inner * centres)),
            float(np.sum(inner * centres**2)), s2, xa,
            fYaxis=to_TAxis("yaxis", h.y_title, 1, 0.0, 1.0),
        )
    ya = _taxis("yaxis", h.axes[1].title, h.axes[1].edges)
    cx = 0.5 * (h.axes[0].edges[1:] + h.axes[0].edges[:-1])
    cy = 0.5 * (h.axes[1].edges[1:] + h.axes[1].edges[:-1])
    # ROOT's global bin = ix + (nx + 2) * iy: x runs fastest -> transpose our (x, y) C-order
    return to_TH2x(
        name, title, np.ascontiguousarray(v.T).ravel(), entries, tsumw, tsumw2,
        float(np.sum(inner * cx[:, None])), float(np.sum(inner * cx[:, None] ** 2)),
        float(np.sum(inner * cy[None, :])), float(np.sum(inner * cy[None, :] ** 2)),
        float(np.sum(inner * cx[:, None] * cy[None, :])),
        np.ascontiguousarray(s2.T).ravel(), xa, ya,
        fZaxis=to_TAxis("zaxis", h.y_title, 1, 0.0, 1.0),
    )


def write_root(path: str | os.PathLike[str], objects: Mapping[str, HistResult],
               *, with_bands: bool = True) -> Path:
    """Write ``{key: HistResult}`` (nominal + band up/down if ``with_bands``) atomically."""
    import uproot

    p = Path(path)
    with atomic_path(p) as tmp, uproot.recreate(tmp) as f:
        for key, h in objects.items():
            f[key] = th_object(key, h)
            counts = getattr(h, "counts", None)
            if counts is not None:
                n = np.asarray(counts, dtype=np.float64)
                f[f"{key}__entries"] = th_object(f"{key}__entries", h, n, n)
            if with_bands:
                zero = np.zeros_like(h.values)
                for bname, b in h.bands.items():
                    for side, arr in (("up", b.up), ("down", b.down)):
                        k = f"{key}__{safe_name(bname)}_{side}"
                        f[k] = th_object(k, h, arr, zero)
    return p


def write_results_root(folder: str | os.PathLike[str], results: Results,
                       filename: str = "histograms.root") -> Path:
    """``histograms.root`` of a results folder, keys from :func:`root_key`."""
    objs = {root_key(s, h): hr for s, sr in results.samples.items()
            for h, hr in sr.histograms.items()}
    return write_root(Path(folder) / filename, objs)


def read_root(path: str | os.PathLike[str]) -> dict[str, dict[str, Any]]:
    """Every TH1/TH2 in the file: ``{key: {classname, title, values, variances, edges}}``
    (values/variances with flow, edges one array per axis)."""
    import uproot

    try:
        f = uproot.open(path)
    except (OSError, ValueError) as exc:
        raise ResultsError(f"{path}: cannot open as a ROOT file ({exc})") from None
    out: dict[str, dict[str, Any]] = {}
    with f:
        for key, cls in f.classnames(cycle=False).items():
            if not cls.startswith(("TH1", "TH2")):
                continue
            obj = f[key]
            axes = [obj.axis(i) for i in range(2 if cls.startswith("TH2") else 1)]
            out[key] = {
                "classname": cls,
                "title": obj.member("fTitle"),
                "values": np.asarray(obj.values(flow=True)),
                "variances": np.asarray(obj.variances(flow=True)),
                "edges": [np.asarray(a.edges()) for a in axes],
                "axis_titles": [a.member("fTitle") for a in axes],
            }
    return out
