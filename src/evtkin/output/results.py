"""The library view of a run's results: mappings of samples to mappings of ``hist.Hist``.

:func:`evtkin.run` returns, and :func:`load_results` reads back from a results folder, the same
types with equal contents::

    result = evtkin.run("configs/drell_yan.toml")        # or evtkin.load_results("dy-results")
    list(result)                  # sample names; result.keys(), .items(), .values(), len, in
    s = result["dy"]              # SampleHists: a mapping of histogram name -> hist.Hist
    h = s["mll"]                  # per-bin contents: h.sum() = σ of the selected events (pb)
    s.bands["mll"]["scale"].up    # a band edge, a hist.Hist with the same axes and contents
    evtkin.density(h)             # the density view (dσ/dm in pb/GeV), see evtkin.hists.histview

What a histogram carries (axis names, units, normalisation) is described in
:mod:`evtkin.hists.histview`. The results folder itself is unchanged (docs/results-format.md);
the axis names (the config's ``value`` of each axis) come from the config text recorded in
``provenance.json``.
"""

from __future__ import annotations

import json
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import tomllib

from evtkin.errors import ResultsError
from evtkin.hists.bands import Band
from evtkin.hists.histview import make_hist
from evtkin.output import tables

__all__ = ["HistBand", "Results", "SampleHists", "from_record", "load_results",
           "quantities_from_config_text"]


@dataclass(frozen=True, eq=False)
class HistBand:
    """An uncertainty band of one histogram: ``down`` and ``up`` are ``hist.Hist`` objects
    (Double storage) with the histogram's axes, in its per-bin contents (flow bins included
    in ``.values(flow=True)``). ``members``: the variation weights that formed it.
    Rebinning a band edge adds the edges of its bins, which is the band of the sum only where
    every variation moves all merged bins the same way (e.g. an overall scale)."""

    name: str
    method: str
    members: tuple[str, ...]
    down: Any = field(repr=False)
    up: Any = field(repr=False)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, HistBand):
            return NotImplemented
        return (self.name, self.method, self.members) == (other.name, other.method,
                                                          other.members) and \
            bool(self.down == other.down) and bool(self.up == other.up)

    __hash__ = None  # type: ignore[assignment]


class SampleHists(Mapping[str, Any]):
    """One sample's histograms: a mapping of histogram name → ``hist.Hist`` (Weight storage,
    per-bin contents), with the sample's bookkeeping as attributes: ``name``, ``label``,
    ``luminosity_fb``, ``xsec`` (σ, its error, Σw, N_eff, ... as in results.json),
    ``variations`` (variation-weight names), ``cutflow`` (rows as in results.json),
    ``bands`` (histogram name → band name → :class:`HistBand`) and ``shape_bands`` (the same
    for unit-area shapes, each variation normalised on its own; 1-D only) and ``data`` (a data
    sample: counted events with weight 1, no cross section)."""

    def __init__(self, name: str, hists: Mapping[str, Any], *, label: str = "",
                 luminosity_fb: float | None = None, xsec: Mapping[str, Any] | None = None,
                 variations: Sequence[str] = (), cutflow: Sequence[Mapping[str, Any]] = (),
                 bands: Mapping[str, Mapping[str, HistBand]] | None = None,
                 shape_bands: Mapping[str, Mapping[str, HistBand]] | None = None,
                 data: bool = False) -> None:
        self.name = name
        self.data = bool(data)
        self.label = label or name
        self.luminosity_fb = luminosity_fb
        self.xsec: dict[str, Any] = dict(xsec or {})
        self.variations = tuple(variations)
        self.cutflow = [dict(r) for r in cutflow]
        self.bands = {h: dict(b) for h, b in (bands or {}).items()}
        self.shape_bands = {h: dict(b) for h, b in (shape_bands or {}).items()}
        self._hists = dict(hists)

    def __getitem__(self, name: str) -> Any:
        try:
            return self._hists[name]
        except KeyError:
            raise KeyError(f"sample {self.name!r} has no histogram {name!r}; it has: "
                           f"{', '.join(self._hists) or 'none'}") from None

    def __iter__(self) -> Iterator[str]:
        return iter(self._hists)

    def __len__(self) -> int:
        return len(self._hists)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, SampleHists):
            return NotImplemented
        mine = (self.name, self.label, self.luminosity_fb, self.xsec, self.variations,
                self.cutflow, self.bands, self.shape_bands, self.data)
        theirs = (other.name, other.label, other.luminosity_fb, other.xsec, other.variations,
                  other.cutflow, other.bands, other.shape_bands, other.data)
        if mine != theirs or list(self._hists) != list(other._hists):
            return False
        return all(bool(h == other._hists[k]) and h.metadata == other._hists[k].metadata
                   for k, h in self._hists.items())

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"SampleHists({self.name!r}: {', '.join(self._hists)})"


class Results(Mapping[str, SampleHists]):
    """The results of a run: a mapping of sample name → :class:`SampleHists`.

    ``meta``: the top-level entries of results.json (analysis, note, ...); ``provenance``:
    the provenance record (``None`` when a folder has none). Two results are equal when their
    samples are (histograms, bands, cross sections, cutflows); ``meta`` and ``provenance``
    (times, paths) are not compared."""

    def __init__(self, samples: Mapping[str, SampleHists] | None = None, *,
                 meta: Mapping[str, Any] | None = None,
                 provenance: Mapping[str, Any] | None = None) -> None:
        self._samples_view: dict[str, SampleHists] | None = (
            None if samples is None else dict(samples))
        self.meta: dict[str, Any] = dict(meta or {})
        self.provenance: Any = None if provenance is None else dict(provenance)

    def _view(self) -> dict[str, SampleHists]:
        """The samples (a subclass may build them on first use)."""
        return self._samples_view if self._samples_view is not None else {}

    def __getitem__(self, sample: str) -> SampleHists:
        view = self._view()
        try:
            return view[sample]
        except KeyError:
            raise KeyError(f"no sample {sample!r}; samples: {', '.join(view) or 'none'}"
                           ) from None

    def __iter__(self) -> Iterator[str]:
        return iter(self._view())

    def __len__(self) -> int:
        return len(self._view())

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, Results):
            return NotImplemented
        a, b = self._view(), other._view()
        return list(a) == list(b) and all(a[k] == b[k] for k in a)

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"{type(self).__name__}({', '.join(self._view())})"


# --------------------------------------------------------------------------- building

def quantities_from_config_text(text: str | None) -> dict[str, tuple[str, ...]]:
    """Histogram name → the ``value`` of each axis, read from a config's text (TOML, or the
    JSON a mapping config is recorded as); ``{}`` when the text does not parse."""
    if not text:
        return {}
    data: Any
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError:
        try:
            data = json.loads(text)
        except ValueError:
            return {}
    hists = data.get("histograms") if isinstance(data, dict) else None
    out: dict[str, tuple[str, ...]] = {}
    if not isinstance(hists, dict):
        return out
    for name, h in hists.items():
        if not isinstance(h, dict):
            continue
        values = []
        for key in ("x", "y"):
            a = h.get(key)
            if isinstance(a, dict) and isinstance(a.get("value"), str):
                values.append(a["value"].strip())
            elif a is not None:
                values.append("")
        out[str(name)] = tuple(values)
    return out


def _plain(obj: Any) -> Any:
    """``obj`` as results.json holds it (non-finite numbers → None, tuples → lists)."""
    return json.loads(json.dumps(tables._clean(obj), default=tables._default, allow_nan=False))


def _band_hists(kind: str, hname: str, hr: tables.HistResult, bands: Mapping[str, Band],
                quantities: Sequence[str], sample: str) -> dict[str, HistBand]:
    out = {}
    norm = hr.normalisation if kind == "bands" else "unit_area"
    for bname, b in bands.items():
        edges = []
        for side, arr in (("down", b.down), ("up", b.up)):
            edges.append(make_hist(
                name=f"{hname}:{bname}:{side}", title=f"{hr.title}: {bname} {side}",
                axes=hr.axes, quantities=quantities, values=arr, variances=None,
                normalisation=norm, y_label=hr.y_label, y_unit=hr.y_unit,
                norm_includes_flow=hr.norm_includes_flow, sample=sample, storage="double"))
        out[bname] = HistBand(bname, b.method, tuple(str(m) for m in b.members), *edges)
    return out


def from_record(record: tables.Results, *, config_text: str | None = None,
                provenance: Mapping[str, Any] | None = None) -> dict[str, SampleHists]:
    """The samples of a plain results record (as written to / read from results.json) as
    :class:`SampleHists`; ``config_text`` names the axes (see the module docstring)."""
    quantities = quantities_from_config_text(config_text)
    samples = {}
    for sname, s in record.samples.items():
        hists: dict[str, Any] = {}
        bands: dict[str, dict[str, HistBand]] = {}
        shape_bands: dict[str, dict[str, HistBand]] = {}
        for hname, hr in s.histograms.items():
            q = list(quantities.get(hname, ()))
            q = [q[i] if i < len(q) and q[i] else a.name for i, a in enumerate(hr.axes)]
            hists[hname] = make_hist(
                name=hname, title=hr.title, axes=hr.axes, quantities=q, values=hr.values,
                variances=hr.variances, normalisation=hr.normalisation, y_label=hr.y_label,
                y_unit=hr.y_unit, entries=hr.entries, norm_includes_flow=hr.norm_includes_flow,
                sample=sname)
            if hr.bands:
                bands[hname] = _band_hists("bands", hname, hr, hr.bands, q, sname)
            if hr.shape_bands:
                shape_bands[hname] = _band_hists("shape_bands", hname, hr, hr.shape_bands, q,
                                                 sname)
        samples[sname] = SampleHists(
            sname, hists, label=s.label or sname, luminosity_fb=s.luminosity_fb,
            xsec=_plain(s.xsec), variations=[str(v) for v in s.variations],
            cutflow=_plain(tables._cutflow_rows(s.cutflow)) if s.cutflow else [],
            bands=bands, shape_bands=shape_bands, data=s.data)
    return samples


def load_results(folder: str | Path, *, allow_incomplete: bool = False) -> Results:
    """Read a results folder (or its ``results.json``) back into the types
    :func:`evtkin.run` returns: a :class:`Results` mapping of :class:`SampleHists` of
    ``hist.Hist``, equal to the in-memory result of the run that wrote it.

    A folder marked ``INCOMPLETE`` raises :class:`ResultsError` unless
    ``allow_incomplete``."""
    p = Path(folder)
    record = tables.read_results(p, allow_incomplete=allow_incomplete)
    root = p if p.is_dir() else p.parent
    provenance = None
    prov_path = root / "provenance.json"
    if prov_path.is_file():
        try:
            provenance = json.loads(prov_path.read_text(encoding="utf-8"))
        except (OSError, ValueError) as exc:
            raise ResultsError(f"{prov_path}: cannot read the provenance ({exc})") from None
    text = None
    if isinstance(provenance, dict):
        text = (provenance.get("config") or {}).get("text")
    samples = from_record(record, config_text=text, provenance=provenance)
    return Results(samples, meta=record.meta, provenance=provenance)

