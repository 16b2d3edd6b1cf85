"""Object-level systematic variations: energy-scale shifts, resolution smearing, efficiency loss.

Each function takes a jagged collection of Momentum4D records and returns the varied
collection (same layout and fields; only the four-momentum, or which objects remain,
changes):

* :func:`scale_energy`: every object's four-momentum times ``1 + shift`` (pt, mass and energy
  scale, η and φ stay): a relative energy-scale shift;
* :func:`smear`: the four-momentum times ``1 + resolution · g`` with ``g`` a standard normal
  number per object (truncated so that the factor stays above 0);
* :func:`drop_objects`: each object is removed with probability ``drop``.

The random numbers are not drawn from a stream: each object's number is a hash of the seed,
the salt of the variation and the bits of the object's own stored momentum coordinates
(``counter_uniform``). So the same object gets the same number whatever the chunk size, the
work units or the number of workers: a run is reproducible across ``--jobs`` and
``--step-size``. The hash is splitmix64 (Steele, Lea, Flood, "Fast splittable pseudorandom
number generators", OOPSLA 2014), whose output passes standard statistical test batteries.
"""

from __future__ import annotations

from typing import Any

import awkward as ak
import numpy as np

__all__ = ["counter_normal", "counter_uniform", "drop_objects", "salt_of", "scale_energy", "smear",
           "vary"]

_M64 = np.uint64(0xFFFFFFFFFFFFFFFF)
_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_C1 = np.uint64(0xBF58476D1CE4E5B9)
_C2 = np.uint64(0x94D049BB133111EB)
_CARTESIAN = ("px", "py", "pz", "energy")
_POLAR = ("pt", "eta", "phi", "mass")


def _mix(z: np.ndarray) -> np.ndarray:
    """The splitmix64 finaliser (uint64 in, uint64 out; wraps modulo 2⁶⁴)."""
    with np.errstate(over="ignore"):
        z = (z ^ (z >> np.uint64(30))) * _C1
        z = (z ^ (z >> np.uint64(27))) * _C2
        out: np.ndarray = z ^ (z >> np.uint64(31))
        return out


def _key(objs: Any, seed: int, salt: int) -> np.ndarray:
    """One uint64 per object from the seed, the salt and its stored coordinates."""
    fields = ak.fields(objs)
    names = _CARTESIAN if all(f in fields for f in _CARTESIAN[:3]) else _POLAR
    with np.errstate(over="ignore"):
        h = np.full(len(ak.flatten(objs[names[0]], axis=None)),
                    _mix(np.uint64(seed & 0xFFFFFFFFFFFFFFFF) ^ (np.uint64(salt) * _GOLDEN)),
                    dtype=np.uint64)
        for f in names[:3]:
            if f not in fields:
                continue
            x = np.ascontiguousarray(ak.to_numpy(ak.flatten(objs[f], axis=None)),
                                     dtype=np.float64)
            h = _mix((h + _GOLDEN) ^ x.view(np.uint64))
    return h


def counter_uniform(objs: Any, seed: int, salt: int = 0) -> np.ndarray:
    """A uniform number in (0, 1) per object (flat, in object order), from the hash."""
    h = _key(objs, seed, salt)
    out: np.ndarray = ((h >> np.uint64(11)).astype(np.float64) + 0.5) * (1.0 / 9007199254740992.0)
    return out


def counter_normal(objs: Any, seed: int, salt: int = 0) -> np.ndarray:
    """A standard normal number per object (Box–Muller on two hashed uniforms)."""
    u1 = counter_uniform(objs, seed, 2 * salt + 1)
    u2 = counter_uniform(objs, seed, 2 * salt + 2)
    out: np.ndarray = np.sqrt(-2.0 * np.log(u1)) * np.cos(2.0 * np.pi * u2)
    return out


def _times(objs: Any, factor: Any) -> Any:
    """Every object's four-momentum times ``factor`` (a number, or one per object, flat)."""
    fields = ak.fields(objs)
    scaled: tuple[str, ...]
    if all(f in fields for f in _CARTESIAN):
        scaled = _CARTESIAN
    elif all(f in fields for f in ("pt", "eta", "phi")):
        scaled = tuple(f for f in ("pt", "mass", "energy") if f in fields)
    else:
        raise TypeError(f"objects without four-momentum fields (have {', '.join(fields)})")
    if not isinstance(factor, (int, float)):
        factor = ak.unflatten(np.asarray(factor, dtype=np.float64), ak.num(objs, axis=1))
    out = objs
    for f in scaled:
        out = ak.with_field(out, out[f] * factor, f)
    return out


def scale_energy(objs: Any, shift: float) -> Any:
    """Four-momenta times ``1 + shift`` (e.g. ``shift = 0.02``: +2 % energy scale)."""
    if shift == 0.0:
        return objs
    return _times(objs, 1.0 + float(shift))


def smear(objs: Any, resolution: float, seed: int, salt: int = 0) -> Any:
    """Four-momenta times ``1 + resolution · g`` (g standard normal per object, the factor
    kept ≥ 1e-6): an extra relative resolution."""
    g = counter_normal(objs, seed, salt)
    return _times(objs, np.maximum(1.0 + float(resolution) * g, 1e-6))


def drop_objects(objs: Any, drop: float, seed: int, salt: int = 0) -> Any:
    """Each object is kept with probability ``1 - drop`` (an efficiency loss)."""
    u = counter_uniform(objs, seed, salt)
    keep = ak.unflatten(u >= float(drop), ak.num(objs, axis=1))
    return objs[keep]


def salt_of(name: str) -> int:
    """A fixed number for a variation's name (the same in every process and run)."""
    import zlib

    return zlib.crc32(name.encode("utf-8"))


def vary(objs: Any, kind: str, size: float, *, sign: float = 1.0, seed: int = 0,
         name: str = "") -> Any:
    """One declared variation of a collection: ``kind`` ``"energy_scale"`` (shift
    ``sign · size``), ``"smearing"`` (resolution ``size``) or ``"efficiency"`` (drop
    probability ``size``); the random kinds use ``seed`` and the variation's ``name``."""
    if kind == "energy_scale":
        return scale_energy(objs, sign * size)
    if kind == "smearing":
        return smear(objs, size, seed, salt_of(name))
    if kind == "efficiency":
        return drop_objects(objs, size, seed, salt_of(name))
    raise ValueError(f"unknown variation kind {kind!r}")
