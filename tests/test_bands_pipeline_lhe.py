"""Helpers (no tests): tiny LHE files with hand-made weight tables for the pipeline checks.

The text follows LHEF 1.0 (hep-ph/0609017: ``<init>`` line ``IDBMUP(1,2) EBMUP(1,2) PDFGUP(1,2)
PDFSUP(1,2) IDWTUP NPRUP`` then ``XSECUP XERRUP XMAXUP LPRUP`` per process; event line
``NUP IDPRUP XWGTUP SCALUP AQEDUP AQCDUP``), LHEF 2.0 (arXiv:1003.1643: ``<xsecinfo totxsec>``,
``<eventgroup>``) and LHEF 3.0 (arXiv:1405.1067: ``<initrwgt>``/``<weightgroup>``, per-event
``<rwgt><wgt id>``). Every event is one outgoing photon; SCALUP is set by the test and histogrammed
directly, so which bin an event lands in is known by construction.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np


def lhe_text(
    scale: Sequence[float],
    xwgtup: Sequence[float],
    *,
    idwtup: int = -4,
    processes: Sequence[tuple[float, float, int]] = ((0.0, 0.0, 1),),
    process_id: Sequence[int] | None = None,
    groups: Sequence[tuple[str, str | None, Sequence[tuple[str, str]]]] = (),
    variations: Any = None,
    totxsec: float | None = None,
    eventgroups: Sequence[Sequence[int]] | None = None,
) -> str:
    """LHE v3 text. ``groups``: ``(name, combine, [(id, description), ...])``; ``variations``:
    ``(n, V)`` weights in declaration order; ``eventgroups``: lists of event indices to wrap in
    ``<eventgroup>`` blocks (consecutive)."""
    n = len(scale)
    pid = list(process_id) if process_id is not None else [processes[0][2]] * n
    ids = [wid for _g, _c, ws in groups for wid, _d in ws]
    var = np.zeros((n, 0)) if variations is None else np.asarray(variations, dtype=float)
    assert var.shape == (n, len(ids))
    out = ['<LesHouchesEvents version="3.0">', "<header>", "<!-- evtkin test file -->"]
    if groups:
        out.append("<initrwgt>")
        for name, combine, ws in groups:
            c = f' combine="{combine}"' if combine else ""
            out.append(f'<weightgroup name="{name}"{c}>')
            out += [f'<weight id="{wid}"> {desc} </weight>' for wid, desc in ws]
            out.append("</weightgroup>")
        out.append("</initrwgt>")
    out += ["</header>", "<init>", f"2212 2212 6500.0 6500.0 -1 -1 -1 -1 {idwtup} {len(processes)}"]
    out += [f"{x!r} {e!r} 1.0 {p}" for x, e, p in processes]
    if totxsec is not None:
        out.append(f'<xsecinfo neve="{n}" totxsec="{totxsec!r}"/>')
    out.append("</init>")
    starts: dict[int, int] = {}
    ends: set[int] = set()
    for g in eventgroups or ():
        starts[g[0]] = len(g)
        ends.add(g[-1])
    for i in range(n):
        if i in starts:
            out.append(f'<eventgroup nreal="1" ncounter="{starts[i] - 1}">')
        out.append("<event>")
        out.append(f"1 {pid[i]} {float(xwgtup[i])!r} {float(scale[i])!r} 0.0078125 0.118")
        out.append("22 1 0 0 0 0 10.0 0.0 0.0 10.0 0.0 0.0 9.0")
        if ids:
            out.append("<rwgt>")
            out += [f'<wgt id="{w}"> {float(var[i, c])!r} </wgt>' for c, w in enumerate(ids)]
            out.append("</rwgt>")
        out.append("</event>")
        if i in ends:
            out.append("</eventgroup>")
    out.append("</LesHouchesEvents>")
    return "\n".join(out) + "\n"


def write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def config(files: Sequence[Path], *, edges: Sequence[float] = (0.0, 20.0, 40.0),
           normalise: str = "raw", **extra: Any) -> dict[str, Any]:
    """A config histogramming SCALUP of every event of one sample ``s``."""
    sample: dict[str, Any] = {"files": [str(f) for f in files]}
    sample.update(extra.pop("sample", {}))
    cfg: dict[str, Any] = {
        "analysis": {"name": "bands test"},
        "samples": {"s": sample},
        "histograms": {"h": {"x": {"value": "scale", "edges": list(edges)},
                             "normalise": normalise}},
    }
    cfg.update(extra)
    return cfg
