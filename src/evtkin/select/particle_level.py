"""Particle-level objects from the stable particles of showered events, columnar over a chunk.

The recipes follow common practice for fiducial definitions at particle level:

* **stable** particles have status 1;
* **prompt** particles do not descend (through the decay graph, :mod:`evtkin.select.decay_graph`)
  from a hadron; beam particles (status 4) do not count as such hadrons. A particle from a τ that
  comes from a hadron descends from that hadron too, so it is not prompt either; a particle from a
  prompt τ is prompt;
* **dressed leptons**: each (prompt) stable photon within ΔR < R (η–φ) of a (prompt) stable charged
  lepton is added to the nearest such lepton (ties: the lepton listed first), once; the records
  keep the bare four-vector as ``bare_px, bare_py, bare_pz, bare_energy`` and the photons' indices;
* **missing pT** from the stable invisible particles (neutrinos and declared PDG ids), prompt only
  or all;
* **jets** from the stable particles not excluded (typically the dressed leptons with their photons
  and the invisibles), any of the generalised-kT algorithms of :mod:`evtkin.select.clustering`;
* **ghost labels**: weakly decaying B hadrons (the last B hadron of a chain: none of its children
  is a B hadron), charm hadrons (likewise) and hadronically decaying τ leptons (the last τ of a
  chain with no electron or muon among its children) above a pT threshold (5 GeV, common practice)
  join the clustering with their four-momenta scaled by 1e-20, so they change no jet; a jet holding
  one is labelled;
* **isolation**: the scalar pT sum of the stable visible particles within ΔR < R of an object,
  without the object's own particles, over the object's pT.

All index fields (``index``, ``photons``, ``constituents``) count particles within the event.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from typing import Any

import awkward as ak
import numpy as np

from evtkin._jit import kernel
from evtkin.select import clustering
from evtkin.select import decay_graph as dg
from evtkin.select import objects as obj
from evtkin.select import pdgid as pid

__all__ = [
    "GHOST_SCALE",
    "INVISIBLE_PDGIDS",
    "bare",
    "dressed_leptons",
    "from_hadron",
    "ghost_candidates",
    "isolation",
    "last_in_chain",
    "missing_pt",
    "particle_jets",
    "prompt",
    "stable",
]

Array = Any

#: ghosts join the clustering with their four-momenta times this factor
GHOST_SCALE = 1e-20
#: neutrinos (PDG Monte Carlo numbering scheme)
INVISIBLE_PDGIDS: tuple[int, ...] = (12, 14, 16)
_ETA_CAP = 1.0e5


def _flat(particles: Array, name: str, dtype: Any = np.float64) -> np.ndarray:
    return np.asarray(ak.to_numpy(ak.flatten(particles[name], axis=1)), dtype=dtype)


def _counts(particles: Array) -> np.ndarray:
    return np.asarray(ak.to_numpy(ak.num(particles, axis=1)), dtype=np.int64)


def _unflat(values: np.ndarray, counts: np.ndarray) -> ak.Array:
    return ak.unflatten(values, counts)


def stable(particles: Array) -> ak.Array:
    """Jagged bool: status 1."""
    return particles["status"] == 1


def from_hadron(particles: Array, graph: dg.DecayGraph | None = None) -> ak.Array:
    """Jagged bool: the particle has a hadron among its ancestors (beam particles, status 4,
    excepted)."""
    g = graph if graph is not None else dg.decay_graph(particles)
    ids = _flat(particles, "pdgid", np.int64)
    status = _flat(particles, "status", np.int64)
    return _unflat(dg.has_ancestor_flat(pid.is_hadron(ids) & (status != 4), g), g.counts)


def prompt(particles: Array, graph: dg.DecayGraph | None = None) -> ak.Array:
    """Jagged bool: not descended from a hadron (see the module docstring)."""
    return ~from_hadron(particles, graph)


def _last_in_chain_flat(kind: np.ndarray, g: dg.DecayGraph) -> np.ndarray:
    child_kind = kind[g.child_index]
    per = np.diff(g.child_start)
    owner = np.repeat(np.arange(len(kind)), per)
    has = np.zeros(len(kind), dtype=np.bool_)
    has[owner[child_kind]] = True
    return kind & ~has


def last_in_chain(particles: Array, kind: Array, graph: dg.DecayGraph | None = None) -> ak.Array:
    """Jagged bool: ``kind`` is true for the particle and for none of its children (the
    weakly decaying member of a chain such as B* → B γ)."""
    g = graph if graph is not None else dg.decay_graph(particles)
    flat = np.asarray(ak.to_numpy(ak.flatten(kind, axis=1)), dtype=np.bool_)
    return _unflat(_last_in_chain_flat(flat, g), g.counts)


def _eta_phi(px: np.ndarray, py: np.ndarray, pz: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    pt = np.hypot(px, py)
    with np.errstate(divide="ignore", invalid="ignore"):
        eta = np.where(pt > 0, np.arcsinh(pz / np.where(pt > 0, pt, 1.0)),
                       np.where(pz >= 0, _ETA_CAP, -_ETA_CAP))
    return eta, np.arctan2(py, px)


@kernel()
def _nearest_within(
    a_eta: np.ndarray, a_phi: np.ndarray, a_off: np.ndarray,
    b_eta: np.ndarray, b_phi: np.ndarray, b_off: np.ndarray, radius: float,
) -> np.ndarray:
    """For every a (event k: a_off[k] .. a_off[k+1]) the flat index of the nearest b of the same
    event with ΔR < radius (ties: the first b), or -1."""
    out = np.full(a_eta.shape[0], -1, dtype=np.int64)
    r2 = radius * radius
    for ev in range(a_off.shape[0] - 1):
        for i in range(a_off[ev], a_off[ev + 1]):
            best = r2
            for j in range(b_off[ev], b_off[ev + 1]):
                dphi = abs(a_phi[i] - b_phi[j])
                if dphi > math.pi:
                    dphi = 2.0 * math.pi - dphi
                deta = a_eta[i] - b_eta[j]
                d2 = deta * deta + dphi * dphi
                if d2 < best:
                    best = d2
                    out[i] = j
    return out


def _positions(mask: np.ndarray, counts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Flat particle numbers where ``mask`` holds and the per-event offsets of that subset."""
    where = np.flatnonzero(mask)
    event_of = np.repeat(np.arange(len(counts)), counts)
    sub = np.bincount(event_of[where], minlength=len(counts)).astype(np.int64)
    off = np.zeros(len(counts) + 1, dtype=np.int64)
    np.cumsum(sub, out=off[1:])
    return where, off


def dressed_leptons(
    particles: Array,
    *,
    radius: float = 0.1,
    pdgids: Iterable[int] = (11, 13),
    prompt_only: bool = True,
    graph: dg.DecayGraph | None = None,
) -> ak.Array:
    """Stable charged leptons (|PDG id| in ``pdgids``) dressed with the stable photons within
    ΔR < ``radius`` (each photon to the nearest lepton, once); with ``prompt_only`` both leptons
    and photons must be prompt. Records ``px, py, pz, energy`` (dressed), ``bare_px, bare_py,
    bare_pz, bare_energy``, ``pdgid``, ``charge``, ``index`` (the lepton's particle index) and
    ``photons`` (the photons' particle indices), in particle order, with the ``Particle``
    behaviour."""
    import evtkin.events  # noqa: F401  (the Particle behaviour)

    if not radius >= 0.0:
        raise ValueError(f"dressing radius must be >= 0, got {radius!r}")
    counts = _counts(particles)
    offsets = np.zeros(len(counts) + 1, dtype=np.int64)
    np.cumsum(counts, out=offsets[1:])
    ids = _flat(particles, "pdgid", np.int64)
    status = _flat(particles, "status", np.int64)
    px, py, pz, e = (_flat(particles, f) for f in ("px", "py", "pz", "energy"))
    ok = status == 1
    if prompt_only:
        g = graph if graph is not None else dg.decay_graph(particles)
        ok &= ~dg.has_ancestor_flat(pid.is_hadron(ids) & (status != 4), g)
    wanted = np.abs(np.array(tuple(pdgids), dtype=np.int64))
    lep, lep_off = _positions(ok & np.isin(np.abs(ids), wanted), counts)
    pho, pho_off = _positions(ok & (ids == 22), counts)
    # η and φ of the leptons and photons only (a small part of the particles)
    l_eta, l_phi = _eta_phi(px[lep], py[lep], pz[lep])
    p_eta, p_phi = _eta_phi(px[pho], py[pho], pz[pho])
    near = _nearest_within(p_eta, p_phi, pho_off, l_eta, l_phi, lep_off, float(radius))
    used = near >= 0
    dressed = [c[lep].copy() for c in (px, py, pz, e)]
    for col, full in zip(dressed, (px, py, pz, e), strict=True):
        np.add.at(col, near[used], full[pho[used]])
    # photon indices per lepton, in particle order
    owner = near[used]
    order = np.argsort(owner, kind="stable")
    per_lepton = np.bincount(owner, minlength=len(lep)).astype(np.int64)
    event_of = np.repeat(np.arange(len(counts)), counts)
    photon_local = (pho[used] - offsets[:-1][event_of[pho[used]]])[order]
    lep_counts = np.diff(lep_off)
    local = lep - offsets[:-1][event_of[lep]]
    charge = -np.sign(ids[lep])  # e-, μ- (positive ids) have charge -1
    rec = ak.zip(
        {
            "px": dressed[0], "py": dressed[1], "pz": dressed[2], "energy": dressed[3],
            "bare_px": px[lep], "bare_py": py[lep], "bare_pz": pz[lep], "bare_energy": e[lep],
            "pdgid": ids[lep], "charge": charge.astype(np.int64), "index": local,
            "photons": ak.unflatten(photon_local, per_lepton),
        },
        depth_limit=1,
        with_name="Particle",
    )
    return ak.unflatten(rec, lep_counts)


def bare(leptons: Array) -> ak.Array:
    """The bare four-vectors of dressed leptons, as ``Momentum4D`` records."""
    return ak.zip({"px": leptons["bare_px"], "py": leptons["bare_py"], "pz": leptons["bare_pz"],
                   "energy": leptons["bare_energy"]}, with_name="Momentum4D")


def missing_pt(
    particles: Array,
    *,
    pdgids: Iterable[int] = INVISIBLE_PDGIDS,
    prompt_only: bool = False,
    graph: dg.DecayGraph | None = None,
) -> ak.Array:
    """The vector pT sum of the stable invisible particles (|PDG id| in ``pdgids``), prompt only
    or all: ``Momentum2D`` records ``px, py`` per event."""
    ids = particles["pdgid"]
    wanted = np.abs(np.array(tuple(pdgids), dtype=np.int64))
    counts = _counts(particles)
    mask = np.isin(np.abs(_flat(particles, "pdgid", np.int64)), wanted)
    mask &= _flat(particles, "status", np.int64) == 1
    if prompt_only:
        mask &= ~np.asarray(ak.to_numpy(ak.flatten(from_hadron(particles, graph))), dtype=bool)
    del ids
    return obj.missing_pt(particles[_unflat(mask, counts)])


def ghost_candidates(
    particles: Array,
    *,
    min_pt: float = 5.0,
    labels: Iterable[str] = ("b", "c", "tau"),
    graph: dg.DecayGraph | None = None,
) -> dict[str, ak.Array]:
    """Jagged bool masks of the particles that serve as ghosts, per label: ``"b"`` the last B
    hadron of each chain, ``"c"`` the last charm hadron, ``"tau"`` the last τ of a chain that
    decays to hadrons (no e or μ among its children); all with pT > ``min_pt``."""
    g = graph if graph is not None else dg.decay_graph(particles)
    ids = _flat(particles, "pdgid", np.int64)
    px, py = _flat(particles, "px"), _flat(particles, "py")
    hard = np.hypot(px, py) > min_pt
    out: dict[str, ak.Array] = {}
    for label in labels:
        if label == "b":
            kind = _last_in_chain_flat(pid.is_b_hadron(ids), g)
        elif label == "c":
            kind = _last_in_chain_flat(pid.is_c_hadron(ids), g)
        elif label == "tau":
            tau = _last_in_chain_flat(np.abs(ids) == 15, g)
            lep_child = np.isin(np.abs(ids[g.child_index]), (11, 13))
            owner = np.repeat(np.arange(len(ids)), np.diff(g.child_start))
            leptonic = np.zeros(len(ids), dtype=np.bool_)
            leptonic[owner[lep_child]] = True
            kind = tau & ~leptonic
        else:
            raise ValueError(f"unknown ghost label {label!r}; expected 'b', 'c' or 'tau'")
        out[label] = _unflat(kind & hard, g.counts)
    return out


def particle_jets(
    particles: Array,
    *,
    radius: float = 0.4,
    algorithm: str = "anti-kt",
    min_pt: float = 0.0,
    exclude: Array | None = None,
    ghosts: Mapping[str, Array] | None = None,
) -> ak.Array:
    """Jets from the stable particles (less those where the jagged bool ``exclude`` holds), with
    ghosts: ``ghosts`` maps a label to a jagged bool mask of ghost particles (see
    :func:`ghost_candidates`). Records ``px, py, pz, energy, constituents`` (particle indices,
    ghosts not listed; a jet of ghosts alone is dropped), ``n_constituents`` and ``n_<label>``
    (ghosts held) per label, plus ``btag`` / ``ctag`` / ``tautag`` (a ghost of that label held)
    for the labels given."""
    import evtkin.events  # noqa: F401

    counts = _counts(particles)
    nev = len(counts)
    cols = [_flat(particles, f) for f in ("px", "py", "pz", "energy")]
    take = _flat(particles, "status", np.int64) == 1
    if exclude is not None:
        take &= ~np.asarray(ak.to_numpy(ak.flatten(exclude, axis=1)), dtype=bool)
    labels = list(ghosts) if ghosts else []
    # per input: the particle number (flat) and its kind (0 real, k = ghost of labels[k - 1])
    pieces_idx = [np.flatnonzero(take)]
    pieces_kind = [np.zeros(len(pieces_idx[0]), dtype=np.int64)]
    for k, label in enumerate(labels, start=1):
        assert ghosts is not None
        gmask = np.asarray(ak.to_numpy(ak.flatten(ghosts[label], axis=1)), dtype=bool)
        where = np.flatnonzero(gmask)
        pieces_idx.append(where)
        pieces_kind.append(np.full(len(where), k, dtype=np.int64))
    idx = np.concatenate(pieces_idx)
    kind = np.concatenate(pieces_kind)
    event_of = np.repeat(np.arange(nev), counts)
    # event by event: the real inputs first, then the ghosts (a stable sort on the event)
    order = np.lexsort((np.arange(len(idx)), event_of[idx]))
    idx = idx[order]
    kind = kind[order]
    in_counts = np.bincount(event_of[idx], minlength=nev).astype(np.int64)
    scale = np.where(kind > 0, GHOST_SCALE, 1.0)
    fx, fy, fz, fe = (c[idx] * scale for c in cols)
    jx, jy, jz, je, njets, cons, ncon = clustering.cluster_flat(
        fx, fy, fz, fe, in_counts, radius=radius, algorithm=algorithm, min_pt=min_pt
    )
    in_off = np.zeros(nev + 1, dtype=np.int64)
    np.cumsum(in_counts, out=in_off[1:])
    p_off = np.zeros(nev + 1, dtype=np.int64)
    np.cumsum(counts, out=p_off[1:])
    jet_event = np.repeat(np.arange(nev), njets)
    con_event = np.repeat(jet_event, ncon)
    con_jet = np.repeat(np.arange(len(jx)), ncon)
    flat_in = cons + in_off[:-1][con_event]
    con_kind = kind[flat_in]
    real = con_kind == 0
    local = idx[flat_in] - p_off[:-1][con_event]
    n_real = np.bincount(con_jet[real], minlength=len(jx)).astype(np.int64)
    fields: dict[str, Any] = {
        "px": jx, "py": jy, "pz": jz, "energy": je,
        "constituents": ak.unflatten(local[real], n_real),
        "n_constituents": n_real,
    }
    tag_names = {"b": "btag", "c": "ctag", "tau": "tautag"}
    for k, label in enumerate(labels, start=1):
        held = np.bincount(con_jet[con_kind == k], minlength=len(jx)).astype(np.int64)
        fields[f"n_{label}"] = held
        fields[tag_names.get(label, f"{label}tag")] = held > 0
    rec = ak.zip(fields, depth_limit=1, with_name="Particle")
    # jets of ghosts alone (a hadron away from every particle) are no jets
    keep = n_real > 0
    kept_per_event = np.bincount(jet_event[keep], minlength=nev).astype(np.int64)
    return ak.unflatten(rec[keep], kept_per_event)


@kernel()
def _cone_sums(
    o_eta: np.ndarray, o_phi: np.ndarray, o_event: np.ndarray, o_skip_start: np.ndarray,
    o_skip: np.ndarray, p_eta: np.ndarray, p_phi: np.ndarray, p_pt: np.ndarray,
    p_use: np.ndarray, p_off: np.ndarray, radius: float,
) -> np.ndarray:
    """Scalar pT sum of the usable particles of the object's event within ΔR < radius, without
    the object's own particles (event-local indices ``o_skip[o_skip_start[i]:...]``)."""
    out = np.zeros(o_eta.shape[0])
    r2 = radius * radius
    for i in range(o_eta.shape[0]):
        ev = o_event[i]
        base = p_off[ev]
        total = 0.0
        for j in range(base, p_off[ev + 1]):
            if not p_use[j]:
                continue
            own = False
            for k in range(o_skip_start[i], o_skip_start[i + 1]):
                if o_skip[k] == j - base:
                    own = True
                    break
            if own:
                continue
            dphi = abs(o_phi[i] - p_phi[j])
            if dphi > math.pi:
                dphi = 2.0 * math.pi - dphi
            deta = o_eta[i] - p_eta[j]
            if deta * deta + dphi * dphi < r2:
                total += p_pt[j]
        out[i] = total
    return out


def isolation(
    objects: Array,
    particles: Array,
    *,
    radius: float = 0.3,
    invisible_pdgids: Iterable[int] = INVISIBLE_PDGIDS,
) -> ak.Array:
    """Relative isolation of each object: the scalar pT sum of the stable visible particles
    (not in ``invisible_pdgids``) within ΔR < ``radius`` (η–φ) of the object, over the
    object's pT. The object's own particles are left out: its ``index`` and ``photons`` fields
    when it has them (dressed leptons, or particles carrying an ``index`` field)."""
    counts = _counts(particles)
    p_off = np.zeros(len(counts) + 1, dtype=np.int64)
    np.cumsum(counts, out=p_off[1:])
    px, py, pz = (_flat(particles, f) for f in ("px", "py", "pz"))
    p_eta, p_phi = _eta_phi(px, py, pz)
    ids = np.abs(_flat(particles, "pdgid", np.int64))
    use = (_flat(particles, "status", np.int64) == 1)
    use &= ~np.isin(ids, np.abs(np.array(tuple(invisible_pdgids), dtype=np.int64)))
    o_counts = np.asarray(ak.to_numpy(ak.num(objects, axis=1)), dtype=np.int64)
    ox, oy, oz = (np.asarray(ak.to_numpy(ak.flatten(objects[f], axis=1)), dtype=np.float64)
                  for f in ("px", "py", "pz"))
    o_eta, o_phi = _eta_phi(ox, oy, oz)
    o_event = np.repeat(np.arange(len(o_counts)), o_counts)
    fields = ak.fields(objects)
    skip_lists: list[ak.Array] = []
    if "index" in fields:
        skip_lists.append(ak.unflatten(ak.flatten(objects["index"], axis=1), 1))
    if "photons" in fields:
        skip_lists.append(ak.flatten(objects["photons"], axis=1))
    if skip_lists:
        skips = ak.concatenate(skip_lists, axis=1) if len(skip_lists) > 1 else skip_lists[0]
        per = np.asarray(ak.to_numpy(ak.num(skips, axis=1)), dtype=np.int64)
        skip = np.asarray(ak.to_numpy(ak.flatten(skips, axis=1)), dtype=np.int64)
    else:
        per = np.zeros(len(ox), dtype=np.int64)
        skip = np.zeros(0, dtype=np.int64)
    start = np.zeros(len(ox) + 1, dtype=np.int64)
    np.cumsum(per, out=start[1:])
    sums = _cone_sums(o_eta, o_phi, o_event, start, skip, p_eta, p_phi, np.hypot(px, py), use,
                      p_off, float(radius))
    opt = np.hypot(ox, oy)
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.where(opt > 0, sums / np.where(opt > 0, opt, 1.0), np.inf)
    return ak.unflatten(rel, o_counts)
