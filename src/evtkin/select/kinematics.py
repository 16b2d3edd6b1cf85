"""Kinematic helpers on awkward arrays of four-momenta.

Every function here accepts any awkward array of records (jagged or flat, option types allowed)
whose fields name a four-momentum in one of these ways:

* Cartesian: ``px, py, pz`` (or ``x, y, z``) plus ``energy`` / ``E`` / ``e`` / ``t``, or a mass
  field (``mass`` / ``M`` / ``m`` / ``tau``) when no energy field is present;
* collider: ``pt`` (or ``rho``), ``eta``, ``phi`` plus ``mass`` / ``M`` / ``m`` / ``tau`` or an
  energy field.

Extra fields (``pdgid``, ``status``, ``charge``, ``btag``, ...) are ignored. The records do not need
a ``vector`` behaviour: the LHE particle records carry both ``energy`` and ``mass``, a combination
the ``vector`` Momentum4D validation rejects, so the physics is computed from the fields directly.
Results that are four-momenta come back as ``vector`` ``Momentum4D`` records ``px, py, pz, E``.

Conventions: energies and momenta in GeV, angles in radians, Δφ wrapped into (-π, π], a negative
mass² gives a negative mass (signed square root, as ``vector`` does).
"""

from __future__ import annotations

from typing import Any

import awkward as ak
import numpy as np
import vector

vector.register_awkward()

__all__ = [
    "add_p4",
    "boost_to_rest_frame",
    "collins_soper_cos_theta",
    "components",
    "cos_theta_star",
    "delta_eta",
    "delta_phi",
    "delta_r",
    "delta_r_rapidity",
    "delta_rapidity",
    "energy",
    "eta",
    "helicity_angle",
    "ht",
    "invariant_mass",
    "make_p4",
    "mass",
    "mass2",
    "p",
    "phi",
    "pt",
    "rapidity",
    "sum_p4",
    "transverse_components",
    "transverse_mass",
    "wrap_phi",
]

_ENERGY_NAMES = ("energy", "E", "e", "t")
_MASS_NAMES = ("mass", "M", "m", "tau")

Array = Any  # awkward Array (or numpy-like) of numbers or records


def _fields(obj: Array) -> list[str]:
    try:
        return list(ak.fields(obj))
    except TypeError:
        return []


def _first(fields: list[str], names: tuple[str, ...]) -> str | None:
    for name in names:
        if name in fields:
            return name
    return None


def _collider_fields(obj: Array) -> tuple[list[str], str | None]:
    """``(fields, pt field name)`` when ``obj`` stores collider coordinates ``pt`` (or ``rho``),
    ``eta``, ``phi`` and no Cartesian ``px, py, pz``; the name is ``None`` otherwise.

    Detector-level collections (ntuples) usually store pT, η and φ: reading them directly avoids
    converting to Cartesian components and back, which dominated the selection time.
    """
    fields = _fields(obj)
    if "eta" not in fields or "phi" not in fields or "px" in fields or "x" in fields:
        return fields, None
    if "pt" in fields:
        return fields, "pt"
    if "rho" in fields:
        return fields, "rho"
    return fields, None


def components(obj: Array) -> tuple[Array, Array, Array, Array]:
    """Return ``(px, py, pz, E)`` of records holding a four-momentum (see the module docstring).

    Raises ``TypeError`` naming the fields found when no known coordinate set is present.
    """
    fields = _fields(obj)
    efield = _first(fields, _ENERGY_NAMES)
    mfield = _first(fields, _MASS_NAMES)
    if {"px", "py", "pz"} <= set(fields) or {"x", "y", "z"} <= set(fields):
        if "px" in fields:
            px, py, pz = obj["px"], obj["py"], obj["pz"]
        else:
            px, py, pz = obj["x"], obj["y"], obj["z"]
    elif {"pt", "eta", "phi"} <= set(fields) or {"rho", "eta", "phi"} <= set(fields):
        ptv = obj["pt"] if "pt" in fields else obj["rho"]
        px = ptv * np.cos(obj["phi"])
        py = ptv * np.sin(obj["phi"])
        pz = ptv * np.sinh(obj["eta"])
    else:
        raise TypeError(
            "expected records with px, py, pz (or pt, eta, phi) and an energy or mass field; "
            f"got fields {fields}"
        )
    if efield is not None:
        e = obj[efield]
    elif mfield is not None:
        m = obj[mfield]
        e = np.sqrt(np.maximum(px * px + py * py + pz * pz + m * np.abs(m), 0.0))
    else:
        raise TypeError(
            f"expected an energy field {_ENERGY_NAMES} or a mass field {_MASS_NAMES}; "
            f"got fields {fields}"
        )
    return px, py, pz, e


def _layout_numpy(layout: Any) -> np.ndarray | None:
    """Float64 numpy values of a flat layout (plain numbers, possibly behind index or option
    nodes; missing values as NaN) read straight from its buffers; ``None`` for other layouts."""
    if layout.is_numpy:
        data = layout.data
        if data.ndim != 1 or data.dtype.kind not in "biuf":
            return None
        return np.asarray(data, dtype=np.float64)
    if layout.is_indexed or layout.is_option:
        if layout.is_unknown or not hasattr(layout, "content"):
            return None
        if layout.is_option:
            if layout.is_indexed:
                index = np.asarray(layout.index.data, dtype=np.int64)
            else:
                index = np.asarray(layout.to_IndexedOptionArray64().index.data, dtype=np.int64)
        else:
            index = np.asarray(layout.index.data, dtype=np.int64)
        inner = _layout_numpy(layout.content)
        if inner is None:
            return None
        if not layout.is_option:
            return inner[index]
        missing = index < 0
        if inner.size == 0:
            return np.full(index.size, np.nan) if missing.all() else None
        out = inner[np.where(missing, 0, index)]
        out[missing] = np.nan
        return out
    return None


def _np(values: Array) -> np.ndarray:
    """A flat awkward/numpy column as float64 numpy, missing values as NaN."""
    if isinstance(values, ak.Array):
        fast = _layout_numpy(values.layout)
        if fast is not None:
            return fast
        values = ak.to_numpy(ak.fill_none(values, np.nan))
    return np.asarray(values, dtype=np.float64)


def flat_components(obj: Array) -> tuple[np.ndarray | None, np.ndarray, np.ndarray, np.ndarray,
                                         np.ndarray]:
    """``(counts, px, py, pz, E)`` as flat float64 numpy arrays.

    ``obj`` holds one record per event (``counts`` is ``None``; a missing record gives NaN) or
    a jagged ``[event][object]`` collection (``counts`` per event; a missing list counts as
    empty). The conversion runs on the flat numpy columns, which is much cheaper than awkward
    arithmetic on jagged or option-typed arrays.
    """
    counts = None
    flat = obj
    if isinstance(obj, ak.Array) and obj.ndim == 2:
        filled = ak.fill_none(obj, [], axis=0) if obj.layout.is_option else obj
        counts = ak.to_numpy(ak.num(filled, axis=1)).astype(np.int64)
        flat = ak.flatten(filled, axis=1)
    fields = _fields(flat)
    efield = _first(fields, _ENERGY_NAMES)
    mfield = _first(fields, _MASS_NAMES)
    if {"px", "py", "pz"} <= set(fields) or {"x", "y", "z"} <= set(fields):
        names = ("px", "py", "pz") if "px" in fields else ("x", "y", "z")
        px, py, pz = (_np(flat[n]) for n in names)
    elif {"pt", "eta", "phi"} <= set(fields) or {"rho", "eta", "phi"} <= set(fields):
        ptv = _np(flat["pt"] if "pt" in fields else flat["rho"])
        ph, et = _np(flat["phi"]), _np(flat["eta"])
        px, py, pz = ptv * np.cos(ph), ptv * np.sin(ph), ptv * np.sinh(et)
    else:
        raise TypeError(
            "expected records with px, py, pz (or pt, eta, phi) and an energy or mass field; "
            f"got fields {fields}"
        )
    if efield is not None:
        e = _np(flat[efield])
    elif mfield is not None:
        m = _np(flat[mfield])
        e = np.sqrt(np.maximum(px * px + py * py + pz * pz + m * np.abs(m), 0.0))
    else:
        raise TypeError(
            f"expected an energy field {_ENERGY_NAMES} or a mass field {_MASS_NAMES}; "
            f"got fields {fields}"
        )
    return counts, px, py, pz, e


def _plain_records(obj: Array) -> bool:
    """True for an awkward array of records (one per event, maybe missing, or a jagged
    collection) whose fields hold no missing values themselves."""
    if not isinstance(obj, ak.Array) or not _fields(obj):
        return False
    layout = obj.layout
    inner = layout.content if obj.ndim == 2 and layout.is_list else layout
    if inner.is_option and obj.ndim == 1:
        inner = inner.content
    while inner.is_indexed:
        inner = inner.content
    return bool(inner.is_record) and not any(inner.content(f).is_option for f in inner.fields)


def _component_fields(fields: list[str]) -> list[str] | None:
    """The fields :func:`flat_components` reads (``None`` when it would raise)."""
    last = _first(fields, _ENERGY_NAMES) or _first(fields, _MASS_NAMES)
    if last is None:
        return None
    if {"px", "py", "pz"} <= set(fields):
        return ["px", "py", "pz", last]
    if {"x", "y", "z"} <= set(fields):
        return ["x", "y", "z", last]
    if {"pt", "eta", "phi"} <= set(fields) or {"rho", "eta", "phi"} <= set(fields):
        return ["pt" if "pt" in fields else "rho", "eta", "phi", last]
    return None


def _field_missing(obj: Array) -> np.ndarray | None:
    """For one record per event whose four-momentum fields may be missing (e.g. records zipped
    from optional columns): the events where they are, when all of them are missing in the same
    events (any awkward arithmetic on them then gives None exactly there); else ``None``."""
    if not isinstance(obj, ak.Array) or obj.ndim != 1:
        return None
    used = _component_fields(_fields(obj))
    if used is None:
        return None
    missing = None
    for name in used:
        col = obj[name]
        if col.ndim != 1 or _fields(col):
            return None
        none = np.asarray(ak.to_numpy(ak.is_none(col, axis=0)), dtype=bool)
        if missing is None:
            missing = none
        elif not np.array_equal(missing, none):
            return None
    return missing


def _per_event_flat(*objs: Array) -> tuple[list[tuple[np.ndarray, ...]], np.ndarray | None] | None:
    """``(px, py, pz, E)`` numpy columns of each of ``objs`` (one record per event each, maybe
    missing) and the events where any is missing (``None`` when no input can be missing);
    ``None`` when some input has another layout."""
    if not all(isinstance(o, ak.Array) and o.ndim == 1 and _plain_records(o) for o in objs):
        return None
    cols: list[tuple[np.ndarray, ...]] = [flat_components(o)[1:] for o in objs]
    missing: np.ndarray | None = None
    for o in objs:
        if o.layout.is_option:
            none = np.asarray(ak.to_numpy(ak.is_none(o, axis=0)), dtype=bool)
            missing = none if missing is None else missing | none
    return cols, missing


def _as_event_array(values: np.ndarray, missing: np.ndarray | None) -> ak.Array:
    out = ak.Array(values)
    return out if missing is None else ak.mask(out, ~missing)


def _numpy_path(obj: Array, compute: Any) -> Array | None:
    """Evaluate ``compute(px, py, pz, E)`` on flat numpy columns and give the result the shape
    of ``obj`` (one record per event, None kept; or a jagged collection of plain records).
    ``None`` when ``obj`` has another layout (the awkward path then handles it)."""
    if not _plain_records(obj):
        missing = _field_missing(obj)
        if missing is None:
            return None  # other missing values inside the records: the awkward path
        _, px, py, pz, e = flat_components(obj)
        with np.errstate(divide="ignore", invalid="ignore"):
            return ak.mask(ak.Array(compute(px, py, pz, e)), ~missing)
    layout = obj.layout
    if obj.ndim == 1:
        _, px, py, pz, e = flat_components(obj)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = ak.Array(compute(px, py, pz, e))
        if layout.is_option:
            out = ak.mask(out, ~ak.to_numpy(ak.is_none(obj, axis=0)))
        return out
    if obj.ndim == 2 and layout.is_list and not layout.content.is_option:
        counts, px, py, pz, e = flat_components(obj)
        with np.errstate(divide="ignore", invalid="ignore"):
            return ak.unflatten(compute(px, py, pz, e), counts)
    return None


def transverse_components(obj: Array) -> tuple[Array, Array]:
    """``(px, py)`` of records that may be two-dimensional (e.g. missing pT)."""
    fields = _fields(obj)
    if "px" in fields and "py" in fields:
        return obj["px"], obj["py"]
    if "x" in fields and "y" in fields:
        return obj["x"], obj["y"]
    if ("pt" in fields or "rho" in fields) and "phi" in fields:
        ptv = obj["pt"] if "pt" in fields else obj["rho"]
        return ptv * np.cos(obj["phi"]), ptv * np.sin(obj["phi"])
    raise TypeError(f"expected records with px, py (or pt, phi); got fields {fields}")


def make_p4(px: Array, py: Array, pz: Array, e: Array, **extra: Array) -> ak.Array:
    """Zip components into ``vector`` ``Momentum4D`` records ``px, py, pz, E`` plus ``extra``."""
    return ak.zip({"px": px, "py": py, "pz": pz, "E": e, **extra}, with_name="Momentum4D")


# ---------- single-object quantities


def pt(obj: Array) -> Array:
    """Transverse momentum √(px² + py²) (the stored ``pt`` field when there is one)."""
    fields = _fields(obj)
    if "pt" in fields and "px" not in fields:
        return obj["pt"]
    if "pz" in fields or "z" in fields:
        fast = _numpy_path(obj, lambda x, y, z, e: np.sqrt(x * x + y * y))
        if fast is not None:
            return fast
    px, py = transverse_components(obj)
    return np.sqrt(px * px + py * py)


def phi(obj: Array) -> Array:
    """Azimuth atan2(py, px) in (-π, π] (the stored ``phi`` field when there is one)."""
    fields = _fields(obj)
    if "phi" in fields and "px" not in fields and "x" not in fields:
        return obj["phi"]
    if "pz" in fields or "z" in fields:
        fast = _numpy_path(obj, lambda x, y, z, e: np.arctan2(y, x))
        if fast is not None:
            return fast
    px, py = transverse_components(obj)
    return np.arctan2(py, px)


def p(obj: Array) -> Array:
    """Magnitude of the three-momentum."""
    px, py, pz, _ = components(obj)
    return np.sqrt(px * px + py * py + pz * pz)


def energy(obj: Array) -> Array:
    """Energy."""
    return components(obj)[3]


def eta(obj: Array) -> Array:
    """Pseudorapidity asinh(pz/pT) (±inf along the beam; the stored ``eta`` field of records in
    collider coordinates)."""
    _, ptname = _collider_fields(obj)
    if ptname is not None:
        return obj["eta"]
    fast = _numpy_path(obj, lambda x, y, z, e: np.arcsinh(z / np.sqrt(x * x + y * y)))
    if fast is not None:
        return fast
    px, py, pz, _ = components(obj)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.arcsinh(pz / np.sqrt(px * px + py * py))


def rapidity(obj: Array) -> Array:
    """Rapidity ½ ln((E + pz)/(E − pz)) (±inf when E = |pz|).

    Records in collider coordinates with a mass field and no energy field use the equivalent
    y = asinh(pT sinh η / m_T), m_T = √(pT² + m²) (E = m_T cosh y, pz = m_T sinh y)."""
    fields, ptname = _collider_fields(obj)
    mfield = _first(fields, _MASS_NAMES)
    if ptname is not None and mfield is not None and _first(fields, _ENERGY_NAMES) is None:
        ptv, m = obj[ptname], obj[mfield]
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.arcsinh(ptv * np.sinh(obj["eta"]) / np.sqrt(ptv * ptv + m * np.abs(m)))
    fast = _numpy_path(obj, lambda x, y, z, e: 0.5 * np.log((e + z) / (e - z)))
    if fast is not None:
        return fast
    _, _, pz, e = components(obj)
    with np.errstate(divide="ignore", invalid="ignore"):
        return 0.5 * np.log((e + pz) / (e - pz))


def mass2(obj: Array) -> Array:
    """Invariant mass squared E² − |p|²."""
    fast = _numpy_path(obj, lambda x, y, z, e: e * e - (x * x + y * y + z * z))
    if fast is not None:
        return fast
    px, py, pz, e = components(obj)
    return e * e - (px * px + py * py + pz * pz)


def mass(obj: Array) -> Array:
    """Invariant mass; a negative mass² gives a negative mass (signed square root). Records in
    collider coordinates with a mass field and no energy field return that field."""
    fields, ptname = _collider_fields(obj)
    mfield = _first(fields, _MASS_NAMES)
    if ptname is not None and mfield is not None and _first(fields, _ENERGY_NAMES) is None:
        return obj[mfield]

    def signed(x: Array, y: Array, z: Array, e: Array) -> Array:
        m2 = e * e - (x * x + y * y + z * z)
        return np.sign(m2) * np.sqrt(np.abs(m2))

    fast = _numpy_path(obj, signed)
    if fast is not None:
        return fast
    m2 = mass2(obj)
    return np.sign(m2) * np.sqrt(np.abs(m2))


# ---------- pair quantities


def wrap_phi(dphi: Array) -> Array:
    """Wrap an angle difference into (-π, π]."""
    return np.pi - np.mod(np.pi - dphi, 2.0 * np.pi)


def delta_phi(a: Array, b: Array) -> Array:
    """φ(a) − φ(b) wrapped into (-π, π]. Broadcasts like awkward arithmetic."""
    return wrap_phi(phi(a) - phi(b))


def delta_eta(a: Array, b: Array) -> Array:
    """η(a) − η(b)."""
    return eta(a) - eta(b)


def delta_rapidity(a: Array, b: Array) -> Array:
    """y(a) − y(b)."""
    return rapidity(a) - rapidity(b)


def delta_r(a: Array, b: Array) -> Array:
    """ΔR = √(Δη² + Δφ²) with pseudorapidity η (the experimental convention)."""
    return np.sqrt(delta_eta(a, b) ** 2 + delta_phi(a, b) ** 2)


def delta_r_rapidity(a: Array, b: Array) -> Array:
    """ΔR = √(Δy² + Δφ²) with rapidity y (the distance used by anti-kT)."""
    return np.sqrt(delta_rapidity(a, b) ** 2 + delta_phi(a, b) ** 2)


def add_p4(*objs: Array) -> ak.Array:
    """Four-momentum sum of several objects (broadcast against each other) as ``Momentum4D``."""
    if not objs:
        raise ValueError("add_p4 needs at least one object")
    px, py, pz, e = components(objs[0])
    for obj in objs[1:]:
        qx, qy, qz, qe = components(obj)
        px, py, pz, e = px + qx, py + qy, pz + qz, e + qe
    return make_p4(px, py, pz, e)


def invariant_mass(*objs: Array) -> Array:
    """Invariant mass of the sum of several objects."""
    return mass(add_p4(*objs))


def transverse_mass(a: Array, b: Array) -> Array:
    """Transverse mass m_T² = m_a² + m_b² + 2 (E_T,a E_T,b − pT_a·pT_b), E_T = √(m² + pT²).

    ``b`` may be a two-dimensional object (missing pT, fields px, py or pt, phi): its mass is taken
    as zero. For massless a and b this is the familiar 2 pT_a pT_b (1 − cos Δφ).
    """
    ax, ay = transverse_components(a)
    bx, by = transverse_components(b)
    ma2 = np.maximum(mass2(a), 0.0)
    try:
        mb2 = np.maximum(mass2(b), 0.0)
    except TypeError:
        mb2 = 0.0 * bx
    eta_ = np.sqrt(ma2 + ax * ax + ay * ay)
    etb = np.sqrt(mb2 + bx * bx + by * by)
    mt2 = ma2 + mb2 + 2.0 * (eta_ * etb - ax * bx - ay * by)
    return np.sqrt(np.maximum(mt2, 0.0))


# ---------- collections


def sum_p4(objs: Array, axis: int = -1) -> ak.Array:
    """Four-momentum sum over a jagged axis (per event by default) as ``Momentum4D``.

    Empty lists sum to the zero vector.
    """
    px, py, pz, e = components(objs)
    return make_p4(
        ak.sum(px, axis=axis), ak.sum(py, axis=axis), ak.sum(pz, axis=axis), ak.sum(e, axis=axis)
    )


def ht(objs: Array, axis: int = -1) -> Array:
    """H_T: the scalar sum of pT over a jagged axis (per event by default)."""
    return ak.sum(pt(objs), axis=axis)


# ---------- frames and angles


def boost_to_rest_frame(obj: Array, frame: Array) -> ak.Array:
    """Boost ``obj`` into the rest frame of the four-momentum ``frame`` (pure boost, no rotation).

    With β = p_F/E_F and γ = E_F/m_F:
    E' = γ (E − β·p),  p' = p + β [γ² (β·p)/(γ + 1) − γ E].
    """
    px, py, pz, e = components(obj)
    fx, fy, fz, fe = components(frame)
    fm = np.sqrt(np.maximum(fe * fe - fx * fx - fy * fy - fz * fz, 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        bx, by, bz = fx / fe, fy / fe, fz / fe
        gamma = fe / fm
    bp = bx * px + by * py + bz * pz
    coef = gamma * gamma * bp / (gamma + 1.0) - gamma * e
    return make_p4(px + bx * coef, py + by * coef, pz + bz * coef, gamma * (e - bp))


def _dot4(a: tuple[Array, ...], b: tuple[Array, ...]) -> Array:
    return a[3] * b[3] - a[0] * b[0] - a[1] * b[1] - a[2] * b[2]


def _helicity_cos(d: tuple[Array, ...], par: tuple[Array, ...], g: tuple[Array, ...]) -> Array:
    """cos of the angle between d and −g, both in the rest frame of par (from invariants)."""
    m2p = _dot4(par, par)
    with np.errstate(divide="ignore", invalid="ignore"):
        ed = _dot4(d, par) / np.sqrt(m2p)  # energy of d in the parent frame
        eg = _dot4(g, par) / np.sqrt(m2p)  # energy of g in the parent frame
        pd = np.sqrt(np.maximum(ed * ed - _dot4(d, d), 0.0))
        pg = np.sqrt(np.maximum(eg * eg - _dot4(g, g), 0.0))
        dot3 = ed * eg - _dot4(d, g)  # three-vector dot product in the parent frame
        return -dot3 / (pd * pg)


def helicity_angle(daughter: Array, parent: Array, grandparent: Array) -> Array:
    """cos θ*: the angle of ``daughter`` in the ``parent`` rest frame with respect to the direction
    of ``parent`` in the ``grandparent`` rest frame (e.g. lepton in W frame vs W in top frame).

    Computed from Lorentz invariants: in the parent frame the parent's direction in the grandparent
    frame is opposite to the grandparent's momentum, so cos θ* = −(p̂_d · p̂_g)|_parent frame. This is
    free of the Wigner rotation that appears when the daughter is boosted to the parent frame
    straight from the lab while the parent direction is taken in the grandparent frame.
    """
    flat = _per_event_flat(daughter, parent, grandparent)
    if flat is not None:  # numpy columns: much cheaper than awkward arithmetic on option types
        (d, par, g), missing = flat
        return _as_event_array(_helicity_cos(d, par, g), missing)
    return _helicity_cos(components(daughter), components(parent), components(grandparent))


def cos_theta_star(daughter: Array, parent: Array, reference: Array | None = None) -> Array:
    """cos θ* of ``daughter`` in the rest frame of ``parent``.

    Without ``reference`` the axis is the parent's flight direction in the lab (helicity frame).
    With a four-momentum ``reference`` the axis is the parent's direction in the reference's rest
    frame (same as :func:`helicity_angle`).
    """
    flat = _per_event_flat(daughter, parent, *(() if reference is None else (reference,)))
    if flat is not None:  # numpy columns: much cheaper than awkward arithmetic on option types
        cols, missing = flat
        d, par = cols[0], cols[1]
    else:
        d, par = components(daughter), components(parent)
    if reference is None:
        zero = 0.0 * par[0]
        lab = (zero, zero, zero, zero + 1.0)  # an observer at rest in the lab
        out = _helicity_cos(d, par, lab)
    else:
        out = _helicity_cos(d, par, cols[2] if flat is not None else components(reference))
    return out if flat is None else _as_event_array(out, missing)


def collins_soper_cos_theta(lepton: Array, antilepton: Array) -> Array:
    """cos θ of the negative lepton in the Collins–Soper frame of the pair (Collins, Soper,
    Phys. Rev. D 16 (1977) 2219), signed by the pair's pz as usual at pp colliders.

    The z axis bisects the angle between the two beam directions seen in the pair rest frame
    (beam A along +z, beam B along −z in the lab), so the result is exact for massive leptons; for
    massless ones it equals 2 (l⁺_1 l⁻_2 − l⁻_1 l⁺_2)/(Q √(Q² + Q_T²)), l± = (E ± pz)/√2.
    """
    lx, ly, lz, le = components(lepton)
    ax, ay, az, ae = components(antilepton)
    pair = make_p4(lx + ax, ly + ay, lz + az, le + ae)
    zero = 0.0 * lx
    beam_a = boost_to_rest_frame(make_p4(zero, zero, zero + 1.0, zero + 1.0), pair)
    beam_b = boost_to_rest_frame(make_p4(zero, zero, zero - 1.0, zero + 1.0), pair)
    lep = boost_to_rest_frame(make_p4(lx, ly, lz, le), pair)

    def unit(v: Array) -> tuple[Array, Array, Array]:
        norm = np.sqrt(v.px * v.px + v.py * v.py + v.pz * v.pz)
        return v.px / norm, v.py / norm, v.pz / norm

    with np.errstate(divide="ignore", invalid="ignore"):
        a, b, ell = unit(beam_a), unit(beam_b), unit(lep)
        zx, zy, zz = a[0] - b[0], a[1] - b[1], a[2] - b[2]
        zn = np.sqrt(zx * zx + zy * zy + zz * zz)
        cos = (ell[0] * zx + ell[1] * zy + ell[2] * zz) / zn
    return ak.where(pair.pz < 0, -cos, cos)
