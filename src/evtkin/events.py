"""The event model: particle records that behave as ``vector`` Lorentz vectors.

LHE particle records (see ``evtkin.read_lhe``) carry the fields ``pdgid, status,
mother1, mother2, color1, color2, px, py, pz, energy, mass, lifetime, spin`` and the
awkward record name ``Particle``. Importing this module (``evtkin.io.lhe`` does it)
calls ``vector.register_awkward()`` and registers ``Particle`` in the global
``ak.behavior`` as a subclass of vector's ``Momentum4D`` awkward behaviour, so on any
chunk::

    p = chunk.particles
    p.pt, p.eta, p.phi, p.rapidity, p.mass, p.p, p.mt, p[:, 0].deltaR(p[:, 1])
    (p[:, 2] + p[:, 3]).mass          # sums are plain vector Momentum4D objects

How the coordinates are chosen
------------------------------
vector picks the coordinate system from field names. Plain ``Momentum4D`` refuses a
record that has both ``energy`` and ``mass`` ("specify t= or tau=, but not more than
one"), because both can serve as the temporal coordinate. ``Particle`` relaxes that
check: the coordinates are always the Cartesian ``px, py, pz, energy`` (vector already
prefers ``energy`` over ``mass`` when both are present). Consequently:

* ``p.mass`` (attribute access) is the **four-vector mass** sqrt(E² - p²) computed
  from ``px, py, pz, energy`` (signed: negative for space-like vectors, as vector
  does), because behaviour properties take precedence over record fields;
* ``p["mass"]`` (item access) is the **mass column written in the file** (PUP(5), the
  "generated" mass). The two agree to rounding for well-formed files.

Binary operations between ``Particle`` and ``Particle`` (or plain ``Momentum4D``)
records are registered as well, so ``p1 + p2``, ``p1.deltaR(p2)``,
``p1.boostCM_of_p4(p2)`` and ``ak.sum(p, axis=1)`` work. Every operation that returns
vectors (sums, boosts, rotations, scaling) returns plain ``Momentum4D`` records holding
only the four coordinates: the file's columns (``pdgid``, ``mass``, ...) do not
describe a transformed vector, so they are not carried along.
"""

from __future__ import annotations

import itertools
from typing import Any

import awkward as ak
import vector
from vector.backends.awkward import MomentumArray4D, MomentumRecord4D

__all__ = ["PARTICLE_FIELDS", "ParticleArray", "ParticleRecord", "named_weights", "register"]

#: the fields of an LHE particle record, in LHEF particle-line order
PARTICLE_FIELDS: tuple[str, ...] = (
    "pdgid",
    "status",
    "mother1",
    "mother2",
    "color1",
    "color2",
    "px",
    "py",
    "pz",
    "energy",
    "mass",
    "lifetime",
    "spin",
)

_COORDS = ("px", "py", "pz", "energy")
_ACCEPTED = (frozenset(_COORDS), frozenset(("x", "y", "z", "t")))


def _check_particle_fields(self: Any) -> None:
    layout = self.layout.array if isinstance(self, ak.Record) else self.layout
    fields = set(ak.fields(layout))  # a layout, not an Array: no behaviour re-entry
    if not any(accepted <= fields for accepted in _ACCEPTED):
        raise TypeError(
            f"a Particle record needs the fields px, py, pz, energy; got {sorted(fields)}"
        )


def _coordinates_only(self: Any) -> Any:
    """The same vectors as plain ``Momentum4D`` records holding only px, py, pz, energy."""
    fields = ak.fields(self)
    names = _COORDS if all(f in fields for f in _COORDS) else ("x", "y", "z", "t")
    if isinstance(self, ak.Record):
        return ak.Record({n: self[n] for n in names}, with_name="Momentum4D")
    return ak.zip({n: self[n] for n in names}, with_name="Momentum4D")


class ParticleArray(MomentumArray4D):  # type: ignore[misc]
    """Array of ``Particle`` records: vector Momentum4D with (px, py, pz, energy)."""

    def __awkward_validation__(self) -> None:
        _check_particle_fields(self)

    def _wrap_result(self, cls: Any, result: Any, returns: Any, num_vecargs: Any) -> Any:
        # transformed vectors (boosts, rotations, sums) are plain Momentum4D records:
        # the file's columns (pdgid, mass, ...) do not describe them any more
        return MomentumArray4D._wrap_result(
            _coordinates_only(self), cls, result, returns, num_vecargs
        )


class ParticleRecord(MomentumRecord4D):  # type: ignore[misc]
    """A single ``Particle`` record: vector Momentum4D with (px, py, pz, energy)."""

    def __awkward_validation__(self) -> None:
        _check_particle_fields(self)

    def _wrap_result(self, cls: Any, result: Any, returns: Any, num_vecargs: Any) -> Any:
        return MomentumRecord4D._wrap_result(
            _coordinates_only(self), cls, result, returns, num_vecargs
        )


def named_weights(wts: Any, names: tuple[str, ...]) -> Any:
    """The ``named_weights`` column of a chunk (awkward layout): one float64 field per
    variation weight, named by its id, in the column order of the ``n x k`` ``weights``
    column and over the same memory (column views, no copy); a record without fields when
    there are no variation weights. ``chunk.named_weights["id"]`` is one weight,
    ``ak.fields(chunk.named_weights)`` the ids."""
    if len(names) != wts.shape[1]:
        raise ValueError(f"{wts.shape[1]} variation weights but {len(names)} names")
    contents = ak.contents
    return contents.RecordArray([contents.NumpyArray(wts[:, j]) for j in range(len(names))],
                                [str(n) for n in names], length=wts.shape[0])


_registered = False


def register() -> None:
    """Register vector's awkward behaviours and the ``Particle`` record (idempotent)."""
    global _registered
    if _registered:
        return
    vector.register_awkward()
    source = vector.backends.awkward.behavior
    extra: dict[Any, Any] = {}
    for key, value in source.items():
        if isinstance(key, tuple) and "Momentum4D" in key:
            slots = [i for i, k in enumerate(key) if k == "Momentum4D"]
            # every combination of Momentum4D/Particle in the slots, except all-Momentum4D
            for choice in itertools.product((False, True), repeat=len(slots)):
                if not any(choice):
                    continue
                new = list(key)
                for slot, use in zip(slots, choice, strict=True):
                    if use:
                        new[slot] = "Particle"
                extra[tuple(new)] = value
    ak.behavior.update(extra)
    ak.behavior["Particle"] = ParticleRecord
    ak.behavior["*", "Particle"] = ParticleArray
    _registered = True


register()
