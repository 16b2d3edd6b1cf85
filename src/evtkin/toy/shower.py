"""A seeded toy parton shower and hadronisation of our own: LHE events -> particle-level
HepMC events. TOY DATA for demos and tests, invented here; not a physics model to quote.

Per event (every vertex conserves four-momentum to rounding; particles are listed so that
each vertex's incoming particles come before its products):

1. **Beams**: two protons (status 4) of the LHE beam energies; each splits into its hard
   parton and a beam remnant (status 11) carrying the rest of its four-momentum.
2. **Hard process**: the LHE record (incoming partons, resonances, their decays), status 3.
3. **Gluon emissions** off each colour-connected pair of light quarks from a W decay:
   dipole emissions ordered in transverse momentum (Sudakov factor with the double
   logarithm, alpha_s = 0.2), each one a vertex ``(i, k) -> (i', g, k')`` that keeps i and
   k on shell; stopped at kT = 1 GeV. b quarks do not radiate (a crude dead cone).
4. **Photon emissions** off charged leptons, the same way with alpha = 1/137 and the
   lepton's partner (neutrino or the other lepton) as recoiler: dressing matters.
5. **Hadronisation**: one vertex takes every coloured parton and both remnants; out come
   hadrons along each light parton (a flat toy fragmentation function, Gaussian pT of
   0.35 GeV), a weakly decaying B hadron per b quark (energy fraction from a Beta(7, 2)
   toy fragmentation function) with a few companions, a soft underlying event (pT from a
   Gamma distribution of mean 0.6 GeV, flat in |eta| < 4.5) and forward remnant hadrons
   (a leading nucleon and pions) that absorb the rest of the four-momentum exactly.
   Charges are balanced so that the stable particles carry the beams' charge +2.
6. **Decays** with PDG c tau (B hadrons fly ~0.45 mm): B -> charm hadron + pions, or
   semileptonically + lepton + neutrino; charm hadrons, tau, K0S -> pions/kaons;
   pi0 -> gamma gamma (PDG branching fraction) or the Dalitz decay; status 2 for the
   decayed, 1 for the stable.

Every random draw comes from one ``numpy.random.Generator`` seeded by ``seed``: the same
input and seed give the same events.
"""

from __future__ import annotations

import math
from typing import Any

import awkward as ak
import numpy as np

from evtkin.toy import hadrons as H

__all__ = ["Record", "shower_events"]

ALPHA_S = 0.2
ALPHA_EM = 1 / 137.035999
KT_CUT_GEV = 1.0
PT_FRAG = 0.35
UE_MEAN = 180.0
UE_ETA = 4.5
ST_BEAM, ST_STABLE, ST_DECAYED, ST_HARD, ST_INTER = 4, 1, 2, 3, 11

_LIGHT_PDG = np.array([x[0] for x in H.LIGHT])
_LIGHT_P = np.array([x[1] for x in H.LIGHT]) / sum(x[1] for x in H.LIGHT)


class Record:
    """One event's particles and vertices, appended in graph order."""

    def __init__(self) -> None:
        self.pdg: list[int] = []
        self.status: list[int] = []
        self.p: list[np.ndarray] = []  # (4,) px py pz E
        self.m: list[float] = []
        self.prod: list[int] = []
        self.end: list[int] = []
        self.vpos: list[np.ndarray] = []
        self.vstatus: list[int] = []

    def vertex(self, incoming: list[int], pos: np.ndarray | None = None) -> int:
        v = len(self.vpos)
        self.vpos.append(np.zeros(4) if pos is None else pos)
        self.vstatus.append(0)
        for i in incoming:
            self.end[i] = v
        return v

    def add(self, pdg: int, status: int, p: np.ndarray, m: float, prod: int) -> int:
        self.pdg.append(int(pdg))
        self.status.append(status)
        self.p.append(np.asarray(p, dtype=np.float64))
        self.m.append(float(m))
        self.prod.append(prod)
        self.end.append(-1)
        return len(self.pdg) - 1

    def add_many(self, pdgs: list[int], status: int, p: np.ndarray, masses: list[float],
                 prod: int) -> None:  # fmt: skip
        """Append the particles ``pdgs`` with momenta ``p`` (n, 4), all made at ``prod``."""
        n = len(pdgs)
        self.pdg += pdgs
        self.status += [status] * n
        self.p += list(np.asarray(p, dtype=np.float64))
        self.m += masses
        self.prod += [prod] * n
        self.end += [-1] * n


# ------------------------------------------------------------------ kinematics


def _boost(p: np.ndarray, beta: np.ndarray) -> np.ndarray:
    """Boost four-vectors ``p`` (..., 4) by velocity ``beta`` (3,)."""
    b2 = float(beta @ beta)
    if b2 <= 0.0:
        out: np.ndarray = p.copy()
        return out
    gamma = 1.0 / math.sqrt(1.0 - b2)
    bp = p[..., :3] @ beta
    g2 = (gamma - 1.0) / b2
    out = np.empty_like(p)
    out[..., :3] = p[..., :3] + np.multiply.outer(g2 * bp + gamma * p[..., 3], beta)
    out[..., 3] = gamma * (p[..., 3] + bp)
    return out


def _mass2(p: np.ndarray) -> float:
    return float(p[3] * p[3] - p[:3] @ p[:3])


def _on_shell(p3: np.ndarray, m: float) -> np.ndarray:
    return np.array([p3[0], p3[1], p3[2], math.sqrt(float(p3 @ p3) + m * m)])


def _cross(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return np.array([a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2],
                     a[0] * b[1] - a[1] * b[0]])  # fmt: skip


def _perp(n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    a = np.array([1.0, 0.0, 0.0]) if abs(n[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    e1 = _cross(n, a)
    e1 /= math.sqrt(float(e1 @ e1))
    return e1, _cross(n, e1)


def _two_body(P: np.ndarray, m1: float, m2: float, rng: np.random.Generator,
              axis: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:  # fmt: skip
    """``P`` -> (p1, p2) with masses m1, m2: isotropic in P's rest frame (or along
    ``axis``, a direction in that frame)."""
    M = math.sqrt(max(_mass2(P), 0.0))
    lam = (M * M - (m1 + m2) ** 2) * (M * M - (m1 - m2) ** 2)
    q = math.sqrt(max(lam, 0.0)) / (2 * M)
    if axis is None:
        cos = rng.uniform(-1, 1)
        phi = rng.uniform(0, 2 * math.pi)
        sin = math.sqrt(1 - cos * cos)
        axis = np.array([sin * math.cos(phi), sin * math.sin(phi), cos])
    p1 = np.array([*(q * axis), math.sqrt(q * q + m1 * m1)])
    p2 = np.array([*(-q * axis), math.sqrt(q * q + m2 * m2)])
    del p2  # the second product takes the rest: exact conservation
    p1 = _boost(p1, P[:3] / P[3])
    return p1, P - p1


def _boost_rows(p: np.ndarray, beta: np.ndarray) -> np.ndarray:
    """Boost each four-vector ``p[j]`` (n, 4) by its own velocity ``beta[j]`` (n, 3)."""
    b2 = np.einsum("ij,ij->i", beta, beta)
    safe = np.where(b2 > 0.0, b2, 1.0)
    gamma = 1.0 / np.sqrt(1.0 - b2)
    bp = np.einsum("ij,ij->i", p[:, :3], beta)
    g2 = np.where(b2 > 0.0, (gamma - 1.0) / safe, 0.0)
    out = np.empty_like(p)
    out[:, :3] = p[:, :3] + (g2 * bp + gamma * p[:, 3])[:, None] * beta
    out[:, 3] = gamma * (p[:, 3] + bp)
    return out


def _mass2_rows(p: np.ndarray) -> np.ndarray:
    m2: np.ndarray = p[:, 3] * p[:, 3] - np.einsum("ij,ij->i", p[:, :3], p[:, :3])
    return m2


def _n_body_rows(P: np.ndarray, masses: list[float], rng: np.random.Generator) -> np.ndarray:
    """Each of ``P`` (k, 4) -> len(masses) momenta, (k, len(masses), 4), for k parents at
    once: the toy phase space of successive isotropic two-body splits (the last product
    takes the rest: exact conservation)."""
    k, n = len(P), len(masses)
    out = np.empty((k, n, 4))
    cur = P
    for j in range(n - 1):
        M = np.sqrt(np.maximum(_mass2_rows(cur), 0.0))
        if j == n - 2:
            m_rest = np.full(k, masses[-1])
        else:
            rest_min = sum(masses[j + 1 :])
            m_rest = rng.uniform(rest_min, np.maximum(M - masses[j], rest_min))
        m1 = masses[j]
        lam = (M * M - (m1 + m_rest) ** 2) * (M * M - (m1 - m_rest) ** 2)
        q = np.sqrt(np.maximum(lam, 0.0)) / (2 * M)
        cos = rng.uniform(-1, 1, k)
        phi = rng.uniform(0, 2 * math.pi, k)
        sin = np.sqrt(1 - cos * cos)
        p1 = np.column_stack([q * sin * np.cos(phi), q * sin * np.sin(phi), q * cos,
                              np.sqrt(q * q + m1 * m1)])  # fmt: skip
        p1 = _boost_rows(p1, cur[:, :3] / cur[:, 3:4])
        out[:, j] = p1
        cur = cur - p1
    out[:, n - 1] = cur
    return out


def _on_shell_rows(p3: np.ndarray, masses: np.ndarray) -> np.ndarray:
    e = np.sqrt(np.einsum("ij,ij->i", p3, p3) + masses * masses)
    return np.column_stack([p3, e])


def _emit(pi: np.ndarray, mi: float, pk: np.ndarray, mk: float, kt: float, eta: float,
          phi: float) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:  # fmt: skip
    """Dipole emission of a massless quantum: (i', emitted, k') with i', k' on shell and
    i' + emitted + k' = i + k; None if the phase space is closed."""
    P = pi + pk
    M2 = _mass2(P)
    if (mi + mk) ** 2 >= M2:
        return None
    M = math.sqrt(M2)
    beta = P[:3] / P[3]
    pi_r = _boost(pi, -beta)
    n = pi_r[:3] / np.linalg.norm(pi_r[:3])
    e1, e2 = _perp(n)
    eg = kt * math.cosh(eta)
    g = np.array([*(kt * math.sinh(eta) * n + kt * (math.cos(phi) * e1 + math.sin(phi) * e2)),
                  eg])  # fmt: skip
    Q = np.array([0.0, 0.0, 0.0, M]) - g
    MQ2 = _mass2(Q)
    if Q[3] <= 0 or (mi + mk) ** 2 * 1.0001 >= MQ2:
        return None
    bq = Q[:3] / Q[3]
    nq = _boost(pi_r, -bq)[:3]
    nq /= np.linalg.norm(nq)
    a, _b = _two_body(Q, mi, mk, np.random.default_rng(0), axis=nq)
    a, g = _boost(a, beta), _boost(g, beta)
    return a, g, P - a - g


# ------------------------------------------------------------------ one event


class _Event:
    def __init__(self, rng: np.random.Generator) -> None:
        self.rec = Record()
        self.rng = rng

    # --- dipole cascades
    def cascade(self, pair: list[int], alpha: float, color: float, cut2: float,
                emitted: int, status: int) -> list[int]:  # fmt: skip
        """Ordered emissions off the chain ``pair``; returns the final chain."""
        rec, rng = self.rec, self.rng
        chain = list(pair)
        a = alpha * color / math.pi
        t_cur = math.inf
        for _ in range(400):
            best = (-1.0, -1)
            for d in range(len(chain) - 1):
                i, k = chain[d], chain[d + 1]
                s = _mass2(rec.p[i] + rec.p[k])
                if s <= cut2:
                    continue
                lcur = math.log(s / min(t_cur, s))
                l2 = lcur * lcur - 2.0 * math.log(rng.uniform()) / a
                t = s * math.exp(-math.sqrt(l2))
                if t > best[0]:
                    best = (t, d)
            t, d = best
            if t < cut2:
                break
            t_cur = t
            i, k = chain[d], chain[d + 1]
            s = _mass2(rec.p[i] + rec.p[k])
            half = 0.5 * math.log(s / t)
            got = _emit(rec.p[i], rec.m[i], rec.p[k], rec.m[k], math.sqrt(t),
                        rng.uniform(-half, half), rng.uniform(0, 2 * math.pi))  # fmt: skip
            if got is None:
                continue
            v = rec.vertex([i, k])
            rec.status[i] = rec.status[k] = ST_INTER
            ni = rec.add(rec.pdg[i], status, got[0], rec.m[i], v)
            ng = rec.add(emitted, status, got[1], 0.0, v)
            nk = rec.add(rec.pdg[k], status, got[2], rec.m[k], v)
            chain[d : d + 2] = [ni, ng, nk]
        return chain

    # --- hadronisation
    def _light(self, n: int) -> list[int]:
        return [int(x) for x in self.rng.choice(_LIGHT_PDG, size=n, p=_LIGHT_P)]

    def _along(self, direction: np.ndarray, energy: float, pdgs: list[int]) -> np.ndarray:
        """Momenta (n, 4) of hadrons ``pdgs`` sharing ``energy`` along ``direction``."""
        rng = self.rng
        k = len(pdgs)
        masses = np.array([H.mass(x) for x in pdgs])
        kinetic = max(energy - masses.sum(), 0.0)
        frac = rng.dirichlet(np.ones(k)) if k > 1 else np.ones(1)
        e = masses + kinetic * frac
        p = np.sqrt(np.maximum(e * e - masses * masses, 1e-12))
        n = direction / np.linalg.norm(direction)
        e1, e2 = _perp(n)
        pt = np.minimum(np.abs(rng.normal(0, PT_FRAG, k)), 0.5 * p)
        phi = rng.uniform(0, 2 * math.pi, k)
        pl = np.sqrt(p * p - pt * pt)
        p3 = (pl[:, None] * n + (pt * np.cos(phi))[:, None] * e1
              + (pt * np.sin(phi))[:, None] * e2)  # fmt: skip
        return _on_shell_rows(p3, masses)

    def hadronise(self, partons: list[int], b_quarks: list[int], remnants: list[int],
                  q_target: int) -> None:  # fmt: skip
        rec, rng = self.rec, self.rng
        incoming = partons + b_quarks + remnants
        P_in = np.sum([rec.p[i] for i in incoming], axis=0)
        for _attempt in range(20):
            groups: list[tuple[str, Any, float, list[int]]] = []
            for i in partons:
                e = rec.p[i][3]
                n = int(rng.poisson(0.6 + 0.9 * math.log1p(e)))
                if n:
                    groups.append(("jet", rec.p[i][:3], e, self._light(n)))
            for i in b_quarks:
                pb = rec.p[i]
                bh = int(rng.choice(H.B_HADRONS, p=H.B_FRACTIONS))
                bh = bh if rec.pdg[i] < 0 else H.conj(bh)  # b-bar -> B0, B+, ...; b -> B0bar
                z = rng.beta(7.0, 2.0)
                groups.append(("b", pb[:3], z * pb[3], [bh]))
                n = int(rng.poisson(1.0 + 0.8 * math.log1p(pb[3])))
                if n:
                    groups.append(("jet", pb[:3], (1 - z) * pb[3], self._light(n)))
            ue = self._light(int(rng.poisson(UE_MEAN)))
            rem: list[list[int]] = []
            for _r in remnants:
                lead = int(rng.choice([2212, 2112], p=[0.6, 0.4]))
                rem.append([lead, *self._light(int(rng.poisson(6.0)))])
            # balance the charge with pions of the underlying event and the remnants
            total = sum(H.charge(x) for g in groups for x in g[3]) + sum(map(H.charge, ue))
            total += sum(H.charge(x) for r in rem for x in r)
            pools = [ue, *rem]
            while total != q_target:
                step = 1 if q_target > total else -1
                lists = [(pl, j) for pl in pools for j, x in enumerate(pl)
                         if x in ((111, -211) if step > 0 else (111, 211))]  # fmt: skip
                if not lists:
                    ue.append(211 if step > 0 else -211)
                    total += step
                    continue
                pl, j = lists[int(rng.integers(len(lists)))]
                pl[j] = {111: 211, -211: 111} [pl[j]] if step > 0 else {111: -211, 211: 111}[pl[j]]
                total += step
            # kinematics: jets, b hadrons, underlying event (blocks of momenta, whole arrays)
            out_pdg: list[int] = []
            out_p: list[np.ndarray] = []
            for kind, direction, energy, pdgs in groups:
                if kind == "b":
                    m = H.mass(pdgs[0])
                    pmag = math.sqrt(max(energy * energy - m * m, 0.25 * energy * energy))
                    d = direction / np.linalg.norm(direction)
                    out_pdg.append(pdgs[0])
                    out_p.append(_on_shell(pmag * d, m)[None, :])
                else:
                    out_pdg += pdgs
                    out_p.append(self._along(direction, energy, pdgs))
            n_ue = len(ue)
            pt = rng.gamma(2.0, 0.3, n_ue)
            eta = rng.uniform(-UE_ETA, UE_ETA, n_ue)
            phi = rng.uniform(0, 2 * math.pi, n_ue)
            p3 = np.column_stack([pt * np.cos(phi), pt * np.sin(phi), pt * np.sinh(eta)])
            out_pdg += ue
            out_p.append(_on_shell_rows(p3, np.array([H.mass(x) for x in ue])))
            # remnant hadrons take the rest exactly
            P_rest = P_in - np.concatenate(out_p).sum(axis=0)
            rest_pdgs = [x for r in rem for x in r]
            masses = np.array([H.mass(x) for x in rest_pdgs])
            if P_rest[3] <= 0 or _mass2(P_rest) <= (masses.sum() * 1.01) ** 2:
                continue
            approx = np.concatenate([self._along(rec.p[ri][:3], rec.p[ri][3], r)
                                     for r, ri in zip(rem, remnants, strict=True)])  # fmt: skip
            moved = _match_total(approx, masses, P_rest)
            if moved is None:
                continue
            out_pdg += rest_pdgs
            out_p.append(moved)
            break
        else:  # pragma: no cover - never seen; keeps the loop finite
            raise RuntimeError("toy hadronisation found no valid configuration")
        v = rec.vertex(incoming)
        rec.add_many(out_pdg, ST_STABLE, np.concatenate(out_p), [H.mass(x) for x in out_pdg], v)

    # --- decays
    def decay_all(self) -> None:
        """Decay every unstable particle, one generation at a time (B -> charm -> K0S ->
        pi0 ...): the channels drawn per species, the flight lengths and the products'
        momenta drawn for the whole generation at once (grouped by channel)."""
        rec, rng = self.rec, self.rng
        start = 0
        while True:
            todo = [i for i in range(start, len(rec.pdg))
                    if rec.status[i] == ST_STABLE and H.unstable(rec.pdg[i])]  # fmt: skip
            start = len(rec.pdg)
            if not todo:
                return
            pdgs = np.array([rec.pdg[i] for i in todo])
            prods: list[tuple[int, ...]] = [()] * len(todo)
            for species in np.unique(pdgs).tolist():
                sel = np.flatnonzero(pdgs == species)
                chans, fr = _channels(species)
                for j, c in zip(sel.tolist(), rng.choice(len(chans), size=len(sel), p=fr).tolist(),
                                strict=True):  # fmt: skip
                    prods[j] = chans[c]
            P = np.array([rec.p[i] for i in todo])
            m = np.array([rec.m[i] for i in todo])
            length = np.array([H.ctau(x) for x in pdgs.tolist()]) * rng.exponential(size=len(todo))
            origin = np.array([rec.vpos[rec.prod[i]] if rec.prod[i] >= 0 else np.zeros(4)
                               for i in todo])  # fmt: skip
            pos = origin + P * (length / m)[:, None]
            by_channel: dict[tuple[int, ...], list[int]] = {}
            for j, pr in enumerate(prods):
                by_channel.setdefault(pr, []).append(j)
            moms: list[np.ndarray] = [P] * len(todo)
            for pr, js in by_channel.items():
                got = _n_body_rows(P[js], _masses(pr), rng)
                for r, j in enumerate(js):
                    moms[j] = got[r]
            for j, i in enumerate(todo):
                v = rec.vertex([i], pos[j])
                rec.status[i] = ST_DECAYED
                rec.add_many(list(prods[j]), ST_STABLE, moms[j], _masses(prods[j]), v)


_CHANNELS: dict[int, tuple[list[tuple[int, ...]], np.ndarray]] = {}
_MASSES: dict[tuple[int, ...], list[float]] = {}


def _channels(pdg: int) -> tuple[list[tuple[int, ...]], np.ndarray]:
    """The decay channels' products of ``pdg`` and their probabilities (memoised)."""
    got = _CHANNELS.get(pdg)
    if got is None:
        a = abs(pdg)
        if a in H.B_HADRONS:
            chans = H.b_decays(pdg)
        else:
            chans = H.DECAYS[a]
            if pdg < 0:
                chans = [(f, tuple(H.conj(x) for x in pr)) for f, pr in chans]
        fr = np.array([c[0] for c in chans])
        got = _CHANNELS[pdg] = ([c[1] for c in chans], fr / fr.sum())
    return got


def _masses(pdgs: tuple[int, ...]) -> list[float]:
    got = _MASSES.get(pdgs)
    if got is None:
        got = _MASSES[pdgs] = [H.mass(x) for x in pdgs]
    return got


def _match_total(p: np.ndarray, masses: np.ndarray, target: np.ndarray) -> np.ndarray | None:
    """Momenta near ``p`` (n, 4) with the same masses whose sum is exactly ``target``:
    boost to their rest frame, scale the three-momenta to the target mass, boost on."""
    tot = p.sum(axis=0)
    if tot[3] <= 0 or _mass2(tot) <= 0:
        return None
    r = _boost(p, -tot[:3] / tot[3])
    q2 = np.sum(r[:, :3] ** 2, axis=1)
    M = math.sqrt(_mass2(target))
    lam = 1.0
    for _ in range(60):  # Newton on sum sqrt(m^2 + lam^2 q^2) = M
        e = np.sqrt(masses**2 + lam * lam * q2)
        f = e.sum() - M
        df = float(np.sum(lam * q2 / e))
        if df <= 0:
            return None
        step = f / df
        lam = max(lam - step, 0.5 * lam)
        if abs(step) < 1e-15 * max(lam, 1.0):
            break
    r3 = r[:, :3] * lam
    e = np.sqrt(masses**2 + np.sum(r3 * r3, axis=1))
    out = _boost(np.column_stack([r3, e]), target[:3] / target[3])
    out[-1] = target - out[:-1].sum(axis=0)  # the last one absorbs the rounding
    return out


# ------------------------------------------------------------------ from LHE events

_REMNANT = {2: 2101, 1: 2203}  # proton minus a u: (ud) diquark; minus a d: (uu)


def _signed_mass(p: np.ndarray) -> float:
    m2 = _mass2(p)
    return math.sqrt(m2) if m2 >= 0 else -math.sqrt(-m2)


def _charged_lepton(pdg: int) -> bool:
    return abs(pdg) in (11, 13, 15)


def shower_one(lhe_event: Any, beam_energies: tuple[float, float],
               rng: np.random.Generator) -> Record:  # fmt: skip
    """One particle-level event from one LHE event (an awkward record)."""
    E = _Event(rng)
    rec = E.rec
    lp = lhe_event["particles"]
    pdg = np.asarray(lp["pdgid"]).tolist()
    st = np.asarray(lp["status"]).tolist()
    mo = np.asarray(lp["mother1"]).tolist()
    mom = np.column_stack([np.asarray(lp[f], dtype=np.float64)
                           for f in ("px", "py", "pz", "energy")])  # fmt: skip
    mass = np.asarray(lp["mass"], dtype=np.float64).tolist()
    mp = H.mass(2212)
    here: dict[int, int] = {}
    remnants = []
    for side, e_beam in zip((1.0, -1.0), beam_energies, strict=True):
        pb = np.array([0.0, 0.0, side * math.sqrt(e_beam * e_beam - mp * mp), e_beam])
        ib = rec.add(2212, ST_BEAM, pb, mp, -1)
        j = next(j for j in range(len(pdg)) if st[j] == -1 and mom[j, 2] * side > 0)
        v = rec.vertex([ib])
        here[j] = rec.add(pdg[j], ST_HARD, mom[j], mass[j], v)
        rem = pb - mom[j]
        remnants.append(rec.add(_REMNANT.get(pdg[j], 2101), ST_INTER, rem, _signed_mass(rem), v))
    # the hard process and the resonance decays, in LHE order
    incoming = [j for j in range(len(pdg)) if st[j] == -1]
    queue = [(-1, [j for j in range(len(pdg)) if st[j] != -1 and mo[j] in incoming])]
    pairs: list[list[int]] = []
    while queue:
        parent, kids = queue.pop(0)
        v = rec.vertex([here[j] for j in incoming] if parent < 0 else [here[parent]])
        for j in kids:
            final = st[j] == 1 and not (abs(pdg[j]) <= 5 or pdg[j] == 21)
            here[j] = rec.add(pdg[j], ST_STABLE if final else ST_HARD, mom[j], mass[j], v)
        if parent >= 0 and len(kids) == 2:
            pairs.append([here[j] for j in kids])
        for j in kids:
            if st[j] == 2:
                queue.append((j, [d for d in range(len(pdg)) if mo[d] == j and st[d] != -1]))
    partons: list[int] = []
    b_quarks = [here[j] for j in range(len(pdg)) if st[j] == 1 and abs(pdg[j]) == 5]
    for pair in pairs:
        ids = [abs(rec.pdg[i]) for i in pair]
        if all(x <= 4 for x in ids):  # a light quark pair from a W
            partons += E.cascade(pair, ALPHA_S, 4.0 / 3.0, KT_CUT_GEV**2, 21, ST_INTER)
        elif any(_charged_lepton(rec.pdg[i]) for i in pair):
            E.cascade(pair, ALPHA_EM, 1.0, 0.01, 22, ST_STABLE)
    leftover = [here[j] for j in range(len(pdg)) if st[j] == 1 and pdg[j] == 21]
    q_target = 2 - sum(H.charge(rec.pdg[i]) for i in range(len(rec.pdg))
                       if rec.status[i] == ST_STABLE)  # fmt: skip
    E.hadronise(partons + leftover, b_quarks, remnants, q_target)
    E.decay_all()
    return rec


def _to_chunk(records: list[Record], lhe: Any, first_number: int) -> ak.Array:
    n = len(records)
    p_counts = [len(r.pdg) for r in records]
    v_counts = [len(r.vpos) for r in records]
    cat_i = {f: np.concatenate([np.asarray(getattr(r, f), dtype=np.int32) for r in records])
             for f in ("pdg", "status", "prod", "end")}  # fmt: skip
    p4 = np.concatenate([np.array(r.p) for r in records])
    m = np.concatenate([np.asarray(r.m) for r in records])
    vp = np.concatenate([np.array(r.vpos).reshape(-1, 4) for r in records])
    vs = np.concatenate([np.asarray(r.vstatus, dtype=np.int32) for r in records])
    particles = ak.unflatten(ak.zip({
        "pdgid": cat_i["pdg"], "status": cat_i["status"], "prod_vertex": cat_i["prod"],
        "end_vertex": cat_i["end"], "px": p4[:, 0], "py": p4[:, 1], "pz": p4[:, 2],
        "energy": p4[:, 3], "mass": m,
    }), p_counts)  # fmt: skip
    vertices = ak.unflatten(ak.zip({"status": vs, "x": vp[:, 0], "y": vp[:, 1], "z": vp[:, 2],
                                    "t": vp[:, 3]}), v_counts)  # fmt: skip
    return ak.zip({
        "event_number": np.arange(first_number, first_number + n, dtype=np.int64),
        "weights": lhe["weights"], "scale": lhe["scale"], "alpha_qcd": lhe["alpha_qcd"],
        "alpha_qed": lhe["alpha_qed"], "signal_process_id": lhe["process_id"],
        "particles": particles, "vertices": vertices,
    }, depth_limit=1)  # fmt: skip


def shower_events(lhe_path: str, *, seed: int, n_events: int | None = None,
                  chunk_events: int = 50) -> tuple[Any, Any]:  # fmt: skip
    """(LHE info, iterator of particle-level awkward chunks) for the events of an LHE
    file (the first ``n_events``)."""
    from evtkin.io.lhe import read_lhe
    from evtkin.io.lhe_header import lhe_info

    info = lhe_info(lhe_path)
    rng = np.random.default_rng(seed)
    beams = (float(info.beam_energies[0]), float(info.beam_energies[1]))

    def chunks() -> Any:
        done = 0
        for lhe in read_lhe(lhe_path, step_size=chunk_events, threads=0):
            if n_events is not None and done >= n_events:
                return
            if n_events is not None:
                lhe = lhe[: n_events - done]
            records = [shower_one(lhe[i], beams, rng) for i in range(len(lhe))]
            yield _to_chunk(records, lhe, done + 1)
            done += len(lhe)

    return info, chunks()


TOOL = "evtkin-toy-shower"
NOTICE = ("TOY DATA: evtkin's own seeded toy shower and hadronisation (invented for demos and "
          "tests), not a physics prediction")  # fmt: skip


def write_shower(lhe_path: str, out_path: str, *, seed: int, n_events: int | None = None,
                 precision: int | None = 8, form: str = "Asciiv3") -> int:  # fmt: skip
    """Shower the events of ``lhe_path`` into the HepMC file ``out_path`` (.gz: gzip);
    returns the number of events written."""
    import os

    from evtkin._version import __version__
    from evtkin.io.hepmc_write import write_hepmc

    info, chunks = shower_events(lhe_path, seed=seed, n_events=n_events)
    xs = float(sum(p.xsec_pb for p in info.processes))
    xe = float(math.sqrt(sum(p.xsec_err_pb**2 for p in info.processes)))

    def with_xsec() -> Any:
        for c in chunks:
            n = len(c)
            c = ak.with_field(c, np.full(n, xs), "xsec_pb")
            yield ak.with_field(c, np.full(n, xe), "xsec_err_pb")

    return write_hepmc(
        out_path, with_xsec(), form=form, weight_names=[str(w) for w in info.weight_names],
        precision=precision, tools=[(TOOL, __version__, NOTICE)],
        attributes={"toy_data": "true", "toy_seed": str(seed),
                    "toy_input": os.path.basename(lhe_path)},
    )  # fmt: skip
