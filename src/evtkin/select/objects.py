"""Object definitions: particle classes by PDG id, thresholds, pT ordering, isolation, overlap
removal and missing transverse momentum.

All functions take jagged awkward arrays ``[event][object]`` of four-momentum records (see
:mod:`evtkin.select.kinematics` for the accepted fields) and work on whole arrays.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

import awkward as ak
import numpy as np

from evtkin._jit import kernel
from evtkin.errors import ConfigError
from evtkin.select import kinematics as kin

__all__ = [
    "PDG_CLASSES",
    "apply_overlap_removal",
    "isolated",
    "match_pdgid",
    "missing_pt",
    "pdgids_of",
    "remove_overlaps",
    "select",
    "sort_by_pt",
]

# Particle classes by PDG Monte Carlo particle number (PDG review "Monte Carlo particle numbering
# scheme"): 1-6 quarks d u s c b t, 11-16 leptons e ν_e μ ν_μ τ ν_τ, 21 gluon, 22 photon.
# Matching is on |pdgid| unless asked otherwise, so each class holds particles and antiparticles.
PDG_CLASSES: dict[str, tuple[int, ...]] = {
    "electrons": (11,),
    "muons": (13,),
    "taus": (15,),
    "charged_leptons": (11, 13, 15),
    "light_leptons": (11, 13),
    "neutrinos": (12, 14, 16),
    "light_quarks": (1, 2, 3, 4),
    "gluons": (21,),
    "b_quarks": (5,),
    "top_quarks": (6,),
    "photons": (22,),
    "jets": (1, 2, 3, 4, 21),
    "jets_with_b": (1, 2, 3, 4, 5, 21),
    "w_bosons": (24,),
    "z_bosons": (23,),
    "higgs_bosons": (25,),
}

Array = Any


def pdgids_of(
    spec: str | Iterable[int], classes: Mapping[str, Sequence[int]] | None = None
) -> tuple[int, ...]:
    """Resolve a class name (of ``classes``, default :data:`PDG_CLASSES`) or an iterable of ids."""
    table = PDG_CLASSES if classes is None else classes
    if isinstance(spec, str):
        if spec not in table:
            raise ConfigError(
                f"unknown particle class {spec!r}; expected one of {', '.join(sorted(table))} "
                "or a list of PDG ids"
            )
        return tuple(int(i) for i in table[spec])
    return tuple(int(i) for i in spec)


def match_pdgid(pdgid: Array, ids: str | Iterable[int], *, signed: bool = False) -> Array:
    """Boolean mask: ``pdgid`` is one of ``ids`` (compared on |id| unless ``signed``)."""
    wanted = pdgids_of(ids)
    values = pdgid if signed else np.abs(pdgid)
    mask = values != values  # all False, same shape
    for i in wanted:
        mask = mask | (values == (i if signed else abs(i)))
    return mask


def sort_by_pt(objs: Array, *, ascending: bool = False) -> Array:
    """Sort each event's objects by pT (descending by default; stable for ties)."""
    view = None if ascending else _flat_view(objs)
    if view is not None:
        counts, flat = view
        return _select_flat(counts, flat, np.ones(len(flat), dtype=bool), True)
    order = ak.argsort(kin.pt(objs), axis=-1, ascending=ascending, stable=True)
    return objs[order]


def _flat_view(objs: Array) -> tuple[np.ndarray, ak.Array] | None:
    """``(counts, flat records)`` of a plain jagged ``[event][object]`` record array (no missing
    lists or objects); ``None`` for other layouts."""
    if not isinstance(objs, ak.Array) or objs.ndim != 2:
        return None
    layout = objs.layout
    if not layout.is_list or layout.content.is_option or not ak.fields(objs):
        return None
    counts = ak.to_numpy(ak.num(objs, axis=1)).astype(np.int64)
    return counts, ak.flatten(objs, axis=1)


@kernel()
def _order_desc_kernel(values: np.ndarray, offsets: np.ndarray) -> np.ndarray:
    """Per event (``offsets``), the positions ordered by decreasing value; stable insertion sort
    (events hold a handful of objects). NaN values go last."""
    order = np.arange(values.shape[0])
    for ev in range(offsets.shape[0] - 1):
        lo, hi = offsets[ev], offsets[ev + 1]
        for i in range(lo + 1, hi):
            cur = order[i]
            v = values[cur]
            j = i - 1
            while j >= lo:
                w = values[order[j]]
                # move w right when v must come first: v > w, or w is NaN and v is not
                if v > w or (w != w and v == v):
                    order[j + 1] = order[j]
                    j -= 1
                else:
                    break
            order[j + 1] = cur
    return order


def _select_flat(
    counts: np.ndarray, flat: ak.Array, keep: np.ndarray, sort: bool
) -> ak.Array:
    """Keep the flat objects where ``keep`` and, with ``sort``, order each event's objects by
    decreasing pT (stable for ties), as one take on the flat records."""
    n = counts.size
    event = np.repeat(np.arange(n, dtype=np.int64), counts)
    idx = np.flatnonzero(keep)
    ev = event[idx]
    offsets = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(ev, minlength=n), out=offsets[1:])
    if sort:
        ptv = np.ascontiguousarray(kin._np(kin.pt(flat[idx])))
        idx = idx[_order_desc_kernel(ptv, offsets)]
    # sorted output is a final object collection: gather its fields once here rather than
    # through an index node at every later use (cuts, overlap removal, composites)
    content = (ak.to_packed(flat[idx]) if sort else flat[idx]).layout
    return ak.Array(ak.contents.ListOffsetArray(ak.index.Index64(offsets), content))


def _int_column(values: ak.Array) -> np.ndarray:
    """A flat integer column as int64 numpy (read from the buffer when it holds integers)."""
    layout = values.layout
    if layout.is_numpy and layout.data.ndim == 1 and layout.data.dtype.kind in "iu":
        return np.asarray(layout.data, dtype=np.int64)
    return kin._np(values).astype(np.int64)


def _isin(values: np.ndarray, wanted: np.ndarray) -> np.ndarray:
    """``np.isin(values, wanted)`` for int64 arrays; a lookup table when ``wanted`` holds a few
    small non-negative numbers (PDG ids, statuses), which is several times faster."""
    if wanted.size == 0 or wanted.min() < 0 or wanted.max() > 1024:
        return np.isin(values, wanted)
    table = np.zeros(int(wanted.max()) + 1, dtype=np.bool_)
    table[wanted] = True
    return _lookup_kernel(np.ascontiguousarray(values, dtype=np.int64), table)


@kernel()
def _lookup_kernel(values: np.ndarray, table: np.ndarray) -> np.ndarray:
    """``table[v]`` for every v (False outside the table)."""
    out = np.zeros(values.shape[0], dtype=np.bool_)
    n = table.shape[0]
    for i in range(values.shape[0]):
        v = values[i]
        if 0 <= v < n:
            out[i] = table[v]
    return out


def _kept(flat: ak.Array, keep: np.ndarray) -> tuple[Any, ak.Array]:
    """Positions still kept and the flat records there (no copy when all are kept)."""
    if keep.all():
        return slice(None), flat
    rows = np.flatnonzero(keep)
    return rows, flat[rows]


def _select_fast(
    particles: Array, pdgids: Any, status: Any, pt_min: float | None,
    abs_eta_max: float | None, abs_rapidity_max: float | None, mask: Array | None,
    signed: bool, sort: bool,
) -> Array | None:
    """:func:`select` on flat numpy columns (plain jagged input only; else ``None``): the jagged
    masking, argsort and take it replaces dominated the selection time."""
    view = _flat_view(particles)
    if view is None:
        return None
    counts, flat = view
    keep = np.ones(len(flat), dtype=bool)
    if pdgids is not None:
        ids = _int_column(flat["pdgid"])
        wanted = np.array(pdgids_of(pdgids), dtype=np.int64)
        keep &= _isin(ids if signed else np.abs(ids), wanted if signed else np.abs(wanted))
    if status is not None:
        statuses = (status,) if isinstance(status, (int, np.integer)) else tuple(status)
        keep &= _isin(_int_column(flat["status"]), np.array(statuses, np.int64))
    # each cut only looks at the objects that passed the previous ones (same result, less work)
    with np.errstate(invalid="ignore"):
        if pt_min is not None:
            rows, sub = _kept(flat, keep)
            keep[rows] = kin._np(kin.pt(sub)) > pt_min
        if abs_eta_max is not None:
            rows, sub = _kept(flat, keep)
            keep[rows] = np.abs(kin._np(kin.eta(sub))) < abs_eta_max
        if abs_rapidity_max is not None:
            rows, sub = _kept(flat, keep)
            keep[rows] = np.abs(kin._np(kin.rapidity(sub))) < abs_rapidity_max
    if mask is not None:
        m = ak.flatten(ak.fill_none(mask, False), axis=1)
        keep &= np.asarray(ak.to_numpy(ak.fill_none(m, False)), dtype=bool)
    return _select_flat(counts, flat, keep, sort)


def select(
    particles: Array,
    *,
    pdgids: str | Iterable[int] | None = None,
    status: int | Iterable[int] | None = None,
    pt_min: float | None = None,
    abs_eta_max: float | None = None,
    abs_rapidity_max: float | None = None,
    mask: Array | None = None,
    signed: bool = False,
    sort: bool = True,
) -> Array:
    """Select objects and return them pT-ordered (unless ``sort=False``).

    ``pdgids`` is a class name of :data:`PDG_CLASSES` or ids (matched on |id| unless ``signed``);
    ``status`` one status or several (LHEF ISTUP: 1 final state, 2 resonance, -1 incoming); the cuts
    are pT > ``pt_min``, |η| < ``abs_eta_max``, |y| < ``abs_rapidity_max``; ``mask`` is an extra
    jagged boolean mask of the same shape as ``particles``. ``None`` disables a condition.
    """
    fast = _select_fast(particles, pdgids, status, pt_min, abs_eta_max, abs_rapidity_max, mask,
                        signed, sort)
    if fast is not None:
        return fast
    keep = ak.ones_like(kin.pt(particles), dtype=bool)
    if pdgids is not None:
        keep = keep & match_pdgid(particles["pdgid"], pdgids, signed=signed)
    if status is not None:
        statuses = (status,) if isinstance(status, (int, np.integer)) else tuple(status)
        st = particles["status"]
        smask = st != st
        for s in statuses:
            smask = smask | (st == int(s))
        keep = keep & smask
    if pt_min is not None:
        keep = keep & (kin.pt(particles) > pt_min)
    if abs_eta_max is not None:
        keep = keep & (np.abs(kin.eta(particles)) < abs_eta_max)
    if abs_rapidity_max is not None:
        keep = keep & (np.abs(kin.rapidity(particles)) < abs_rapidity_max)
    if mask is not None:
        keep = keep & mask
    out = particles[keep]
    return sort_by_pt(out) if sort else out


@kernel()
def _near_kernel(
    a: np.ndarray,
    a_off: np.ndarray,
    b: np.ndarray,
    b_off: np.ndarray,
    dr: float,
    exclude_self: bool,
) -> np.ndarray:
    """Rows of ``a``/``b``: (rapidity or η, φ, four identity columns: px, py, pz, E or stored
    pT, η, φ, E/m). True where some b is within dr."""
    out = np.zeros(a.shape[0], dtype=np.bool_)
    dr2 = dr * dr
    for ev in range(a_off.shape[0] - 1):
        for i in range(a_off[ev], a_off[ev + 1]):
            for j in range(b_off[ev], b_off[ev + 1]):
                if exclude_self and (
                    a[i, 2] == b[j, 2]
                    and a[i, 3] == b[j, 3]
                    and a[i, 4] == b[j, 4]
                    and a[i, 5] == b[j, 5]
                ):
                    continue
                dphi = abs(a[i, 1] - b[j, 1])
                if dphi > math.pi:
                    dphi = 2.0 * math.pi - dphi
                deta = a[i, 0] - b[j, 0]
                if deta * deta + dphi * dphi < dr2:
                    out[i] = True
                    break
    return out


def _identity_names(objs: Array) -> tuple[str, ...] | None:
    fields, ptname = kin._collider_fields(objs)
    last = kin._first(fields, kin._ENERGY_NAMES) or kin._first(fields, kin._MASS_NAMES)
    return None if ptname is None or last is None else (ptname, "eta", "phi", last)


def _identity(objs: Array) -> list[Array]:
    """Four columns that identify an object (used to recognise an object in its own partner
    list): the stored coordinates of collider-coordinate records (pT, η, φ and energy or mass),
    else px, py, pz, E. Both collections of a comparison must use the same system; mixed
    systems fall back to px, py, pz, E."""
    names = _identity_names(objs)
    if names is not None:
        return [objs[n] for n in names]
    return list(kin.components(objs))


def _flat_table(objs: Array, use_rapidity: bool, cartesian: bool = False
                ) -> tuple[np.ndarray, np.ndarray]:
    view = _flat_view(objs)
    if view is not None:  # plain jagged records: the same columns from the flat records
        counts, flat = view
        offsets = np.zeros(counts.size + 1, dtype=np.int64)
        np.cumsum(counts, out=offsets[1:])
        names = None if cartesian else _identity_names(flat)
        idents = (list(kin.flat_components(flat)[1:]) if names is None
                  else [kin._np(flat[n]) for n in names])
        flat_cols = [
            kin._np(kin.rapidity(flat) if use_rapidity else kin.eta(flat)),
            kin._np(kin.phi(flat)),
            *idents,
        ]
        return np.ascontiguousarray(np.stack(flat_cols, axis=1)), offsets
    ident = list(kin.components(objs)) if cartesian else _identity(objs)
    counts = ak.to_numpy(ak.num(ident[0], axis=1)).astype(np.int64)
    offsets = np.zeros(counts.size + 1, dtype=np.int64)
    np.cumsum(counts, out=offsets[1:])
    cols = [
        kin.rapidity(objs) if use_rapidity else kin.eta(objs),
        kin.phi(objs),
        *ident,
    ]
    table = np.stack([ak.to_numpy(ak.flatten(c, axis=1)).astype(np.float64) for c in cols], axis=1)
    return np.ascontiguousarray(table), offsets


def _closest_distance_mask(
    objs: Array, others: Array, dr: float, *, use_rapidity: bool, exclude_self: bool
) -> Array:
    """Jagged mask over ``objs``: True where some object of ``others`` lies within ``dr``."""
    # identity columns must be comparable: stored coordinates only when both use the same ones
    same = _identity_names(objs) is not None and _identity_names(objs) == _identity_names(others)
    a, a_off = _flat_table(objs, use_rapidity, cartesian=not same)
    b, b_off = _flat_table(others, use_rapidity, cartesian=not same)
    if a_off.size != b_off.size:
        raise ValueError(
            f"objects and others must have the same number of events ({a_off.size - 1} "
            f"vs {b_off.size - 1})"
        )
    near = _near_kernel(a, a_off, b, b_off, float(dr), bool(exclude_self))
    return ak.unflatten(near, np.diff(a_off))


def isolated(
    objs: Array,
    others: Array,
    dr: float,
    *,
    use_rapidity: bool = False,
    exclude_self: bool = True,
) -> Array:
    """Jagged boolean mask over ``objs``: no object of ``others`` within ΔR < ``dr``
    (``[event][object]`` arrays with the same number of events).

    ``others`` may be the same collection or contain the objects themselves: with ``exclude_self``
    a partner with exactly the same four-momentum is taken to be the object itself and ignored.
    ΔR uses pseudorapidity unless ``use_rapidity``.
    """
    return ~_closest_distance_mask(
        objs, others, dr, use_rapidity=use_rapidity, exclude_self=exclude_self
    )


def remove_overlaps(
    objs: Array, reference: Array, dr: float, *, use_rapidity: bool = False
) -> Array:
    """Drop the objects of ``objs`` that lie within ΔR < ``dr`` of any object of ``reference``
    (e.g. jets near a selected lepton). Order within events is kept."""
    near = _closest_distance_mask(
        objs, reference, dr, use_rapidity=use_rapidity, exclude_self=False
    )
    return objs[~near]


def apply_overlap_removal(
    collections: Mapping[str, Array],
    steps: Sequence[tuple[str, str, float]],
    *,
    use_rapidity: bool = False,
) -> dict[str, Array]:
    """Apply overlap removal steps ``(target, reference, dr)`` in the declared order.

    Each step removes objects of ``collections[target]`` within ``dr`` of the *current* (already
    cleaned) ``collections[reference]``, so the order matters. Returns a new dict.
    """
    out = dict(collections)
    for n, (target, reference, dr) in enumerate(steps, start=1):
        for name in (target, reference):
            if name not in out:
                raise ConfigError(
                    f"overlap removal step {n}: unknown collection {name!r}; "
                    f"expected one of {', '.join(sorted(out))}"
                )
        out[target] = remove_overlaps(out[target], out[reference], dr, use_rapidity=use_rapidity)
    return out


def missing_pt(invisibles: Array, axis: int = -1) -> ak.Array:
    """Missing transverse momentum: the vector pT sum of the invisible objects per event (at
    generator level, the neutrinos), as ``vector`` ``Momentum2D`` records with fields ``px, py``
    (``.pt`` and ``.phi`` work)."""
    px, py = kin.transverse_components(invisibles)
    return ak.zip(
        {"px": ak.sum(px, axis=axis), "py": ak.sum(py, axis=axis)}, with_name="Momentum2D"
    )
