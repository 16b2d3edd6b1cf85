"""One analysed chunk into a partial result: event weights, regions, object-level
variations and event-table parts, the same for every input format.

:func:`fill_chunk` is called by the unit loops once per chunk. It analyses the chunk
(:func:`evtkin.run.plan.analyse_chunk`: objects, common steps, regions), multiplies the weights
as written by the config's event-weight expressions, fills totals (with the weights as
written: σ comes from the generator), cutflow rows and histograms per process, re-runs objects,
selection and histograms for every object-level variation (nominal weight only, under the
histogram name ``NAME~VARIATION``), and writes the selected events of every event table to a
part file (:mod:`evtkin.run.skims`).

A data sample (``[samples.NAME] data = true``) is counted: every event has weight 1 whatever
the file says, without variation weights, event-weight expressions or object-level variations.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from evtkin.hists.fill import HistAccumulator, fill_many
from evtkin.run.partial import Cutflow, PartialResult, ProcessTotals
from evtkin.run.plan import ChunkView, Plan, analyse_chunk, event_weight, hist_entries

__all__ = ["VARIED", "fill_by_process", "fill_chunk", "varied_name"]

#: joins a histogram name and an object-level variation in partial results
VARIED = "~"


def varied_name(hist: str, variation: str) -> str:
    return f"{hist}{VARIED}{variation}"


def fill_chunk(plan: Plan, result: PartialResult, sample: str, file_index: int, chunk: Any,
               w0: np.ndarray, wv: np.ndarray, variations: tuple[str, ...],
               group: np.ndarray | None = None, *, unit_index: int = 0, chunk_index: int = 0,
               view: ChunkView | None = None, seconds: dict[str, float] | None = None,
               ) -> tuple[ChunkView, list[np.ndarray]]:
    """Analyse one chunk and add it to ``result`` (see the module docstring); returns the view
    and the cutflow masks (for response matrices). ``seconds``: adds the time of the
    selection (``"select"``) and of the filling (``"fill"``)."""
    import time

    t0 = time.perf_counter()
    data = plan.config.samples[sample].data
    if data:  # counted events: weight 1, Σw² = N (no statistical groups either)
        w0, wv, variations, group = np.ones(len(w0)), np.zeros((len(w0), 0)), (), None
    view, masks = analyse_chunk(plan, chunk, view)
    names = plan.histograms_for(sample)
    entries = {name: hist_entries(view, name, masks[plan.row_of(name)]) for name in names}
    f = None if data else event_weight(plan, view, sample)
    wf, wvf = (w0, wv) if f is None else (w0 * f, wv * f[:, None])
    t1 = time.perf_counter()
    fill_by_process(plan, result, sample, file_index, chunk, masks, entries, wf, wvf,
                    variations, group, totals_weights=(w0, wv))
    t2 = time.perf_counter()
    if seconds is not None:
        seconds["select"] = seconds.get("select", 0.0) + t1 - t0
        seconds["fill"] = seconds.get("fill", 0.0) + t2 - t1
    for vname, sys, sign in () if data else plan.variations:
        vview = ChunkView(plan, chunk, variation=(vname, sys, sign))
        vview, vmasks = analyse_chunk(plan, chunk, vview)
        ventries = {varied_name(name, vname): hist_entries(vview, name, vmasks[plan.row_of(name)])
                    for name in names}
        vf = event_weight(plan, vview, sample)
        fill_by_process(plan, result, sample, file_index, chunk, None, ventries,
                        w0 if vf is None else w0 * vf, np.zeros((len(w0), 0)), (), group,
                        totals_weights=None)
    if plan.skim_dir is not None and plan.config.skims:
        _skim(plan, view, masks, sample, file_index, chunk, wf, wvf, variations, unit_index,
              chunk_index)
    return view, masks


def _skim(plan: Plan, view: ChunkView, masks: list[np.ndarray], sample: str, file_index: int,
          chunk: Any, w: np.ndarray, wv: np.ndarray, variations: tuple[str, ...],
          unit_index: int, chunk_index: int) -> None:
    import awkward as ak

    from evtkin.run.skims import skim_columns, write_part

    assert plan.skim_dir is not None
    pid = np.asarray(ak.to_numpy(chunk["process_id"]), dtype=np.int64)
    for skim in plan.config.skims.values():
        if skim.samples is not None and sample not in skim.samples:
            continue
        mask = masks[plan.skim_row(skim)]
        if not mask.any():
            continue
        cols = skim_columns(view.evaluate, skim, len(view))
        names = variations if skim.variation_weights else ()
        write_part(plan.skim_dir, skim.name, sample, unit_index, chunk_index, cols, mask,
                   file_index, pid, w, wv if names else np.zeros((len(w), 0)), names)


def fill_by_process(
    plan: Plan,
    result: PartialResult,
    sample: str,
    file_index: int,
    chunk: Any,
    masks: Any | None,
    entries: dict[str, Any],
    w0: np.ndarray,
    wv: np.ndarray,
    variations: tuple[str, ...],
    group: np.ndarray | None = None,
    *,
    totals_weights: tuple[np.ndarray, np.ndarray] | bool | None = True,
) -> None:
    """Add one analysed chunk to ``result``, separately for each process id it holds.

    Totals (for the cross-section bookkeeping), cutflow counters and histograms are kept per
    (sample, file, process id), so that each gets its own normalisation factor after the merge.
    ``w0``/``wv`` fill the cutflow and the histograms; the totals take ``totals_weights`` (the
    weights as written, before the event-weight expressions; ``True``: ``w0``/``wv``; ``None``:
    no totals). ``masks=None`` adds no cutflow (object-level variations). A histogram name
    ``NAME~VARIATION`` has the spec of ``NAME``.
    """
    n_rows = len(plan.cutflow_rows)
    import awkward as ak

    pid = np.asarray(ak.to_numpy(chunk["process_id"]), dtype=np.int64)
    pids = [int(pid[0])] if np.all(pid == pid[0]) else [int(p) for p in np.unique(pid)]
    totals = (w0, wv) if totals_weights is True else totals_weights
    for p in pids:
        key = (sample, file_index, p)
        in_p = None if len(pids) == 1 else pid == p
        if isinstance(totals, tuple):
            _add_totals(result, key, totals[0], totals[1], in_p)
        if masks is not None:
            _add_cutflow(result, key, masks, w0, in_p, n_rows)
        items = []
        for name, (values, rows) in entries.items():
            if in_p is not None:
                sel = in_p[rows]
                values, rows = [v[sel] for v in values], rows[sel]
            hkey = (sample, name, file_index, p)
            acc = result.hists.get(hkey)
            if acc is None:
                spec = plan.hist_specs[name.split("~", 1)[0]]
                acc = result.hists[hkey] = HistAccumulator(spec, variations)
            items.append((acc, values, rows))
        fill_many(items, weight=w0, variations=wv, group=group)


def _add_totals(result: PartialResult, key: tuple[str, int, int], w0: np.ndarray,
                wv: np.ndarray, sel: np.ndarray | None) -> None:
    w = w0 if sel is None else w0[sel]
    v = wv if sel is None else wv[sel]
    # Σw² as a numpy reduction, not np.dot: a BLAS dot product starts the BLAS library's
    # threads, which then spin on the other cores (measured: +6 % CPU over the wall time of
    # a one-core run, taken from the other worker when workers share the cores)
    add = ProcessTotals(int(w.size), float(w.sum()), float(np.square(w).sum()),
                        float(np.abs(w).sum()), int(np.count_nonzero(w < 0)), v.sum(axis=0))
    result.totals[key] = result.totals[key] + add if key in result.totals else add


def _add_cutflow(result: PartialResult, key: tuple[str, int, int], masks: list[np.ndarray],
                 w0: np.ndarray, sel: np.ndarray | None, n_rows: int) -> None:
    cf = Cutflow.empty(n_rows)
    for i, m in enumerate(masks):
        mm = m if sel is None else m & sel
        w = w0[mm]
        cf.n_raw[i] = int(np.count_nonzero(mm))
        cf.sum_w[i] = float(w.sum())
        cf.sum_w2[i] = float(np.square(w).sum())
    result.cutflows[key] = result.cutflows[key] + cf if key in result.cutflows else cf
