"""Particle classes from PDG Monte Carlo numbers, by the digit rules of the PDG numbering scheme
(PDG Review, "Monte Carlo particle numbering scheme"; applied here from memory, checked in the tests
against the ``particle`` package).

A hadron's number reads ±n nr nL nq1 nq2 nq3 nJ (digits from the left, nJ last): mesons have
nq1 = 0 and quarks nq2 ≥ nq3 > 0, baryons three quark digits nq1 ≥ nq2 ≥ nq3 > 0; nJ = 2J + 1
(K0L = 130 and K0S = 310 are the exceptions with nJ = 0). Numbers below 100 (quarks, leptons,
bosons, generator codes), diquarks (nq3 = 0), nuclei (10-digit numbers) and numbers of new
particles (n ≥ 1, e.g. 1000021) are not hadrons here. A hadron holds a b (c) quark when one of
its quark digits is 5 (4).

All functions take integer numpy or awkward arrays (any shape) and return bool arrays.
"""

from __future__ import annotations

from typing import Any

import awkward as ak
import numpy as np

__all__ = [
    "has_bottom",
    "has_charm",
    "is_b_hadron",
    "is_baryon",
    "is_c_hadron",
    "is_charged_lepton",
    "is_hadron",
    "is_meson",
    "is_neutrino",
    "quark_digits",
]

Array = Any


def _apply(pdgid: Array, fn: Any) -> Any:
    if isinstance(pdgid, ak.Array):
        if pdgid.ndim == 1:
            return ak.Array(fn(np.asarray(ak.to_numpy(pdgid), dtype=np.int64)))
        counts = ak.num(pdgid, axis=1)
        flat = np.asarray(ak.to_numpy(ak.flatten(pdgid, axis=1)), dtype=np.int64)
        return ak.unflatten(fn(flat), counts)
    return fn(np.asarray(pdgid, dtype=np.int64))


def quark_digits(pdgid: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """``(nq1, nq2, nq3, nJ)`` of ``|pdgid|`` (numpy)."""
    a = np.abs(np.asarray(pdgid, dtype=np.int64))
    return (a // 1000) % 10, (a // 100) % 10, (a // 10) % 10, a % 10


def _hadron_parts(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    a = np.abs(a)
    q1, q2, q3, nj = quark_digits(a)
    # excited states carry nr/nL digits (e.g. 10441, 20213, 100443, 9000211): still hadrons;
    # a leading digit n of 1..8 in a 7-digit number (new particles) is not
    n7 = (a // 1_000_000) % 10
    plain = (a >= 100) & (a < 10_000_000) & ((n7 == 0) | (n7 == 9))
    spin_ok = (nj > 0) | (a == 130) | (a == 310)
    meson = plain & (q1 == 0) & (q2 > 0) & (q3 > 0) & spin_ok
    baryon = plain & (q1 > 0) & (q2 > 0) & (q3 > 0) & (nj > 0)
    return meson, baryon


def is_meson(pdgid: Array) -> Any:
    return _apply(pdgid, lambda a: _hadron_parts(a)[0])


def is_baryon(pdgid: Array) -> Any:
    return _apply(pdgid, lambda a: _hadron_parts(a)[1])


def _is_hadron(a: np.ndarray) -> np.ndarray:
    meson, baryon = _hadron_parts(a)
    return np.asarray(meson | baryon, dtype=np.bool_)


def is_hadron(pdgid: Array) -> Any:
    return _apply(pdgid, _is_hadron)


def _has_quark(a: np.ndarray, q: int) -> np.ndarray:
    q1, q2, q3, _ = quark_digits(a)
    return np.asarray(_is_hadron(a) & ((q1 == q) | (q2 == q) | (q3 == q)), dtype=np.bool_)


def has_bottom(pdgid: Array) -> Any:
    """Hadrons holding a b (or anti-b) quark, bottomonium included."""
    return _apply(pdgid, lambda a: _has_quark(a, 5))


def has_charm(pdgid: Array) -> Any:
    """Hadrons holding a c (or anti-c) quark, charmonium and b-c hadrons included."""
    return _apply(pdgid, lambda a: _has_quark(a, 4))


def is_b_hadron(pdgid: Array) -> Any:
    """B hadrons: hadrons with a b quark (bottomonium included)."""
    return has_bottom(pdgid)


def is_c_hadron(pdgid: Array) -> Any:
    """Charm hadrons: hadrons with a c quark and no b quark."""
    return _apply(pdgid, lambda a: _has_quark(a, 4) & ~_has_quark(a, 5))


def is_charged_lepton(pdgid: Array) -> Any:
    """e, μ, τ (11, 13, 15) and their antiparticles."""
    return _apply(pdgid, lambda a: np.isin(np.abs(a), (11, 13, 15)))


def is_neutrino(pdgid: Array) -> Any:
    """νe, νμ, ντ (12, 14, 16) and their antiparticles."""
    return _apply(pdgid, lambda a: np.isin(np.abs(a), (12, 14, 16)))
