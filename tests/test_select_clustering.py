"""evtkin.cluster_jets against a brute-force reference written here from the definition of the
generalised-kT family (M. Cacciari, G. P. Salam, G. Soyez, "The anti-kt jet clustering algorithm",
JHEP 04 (2008) 063; REFERENCES 2.10): at every step every pair distance d_ij = min(kt_i^2p,
kt_j^2p) ΔR_ij²/R² and every beam distance d_iB = kt_i^2p of the remaining pseudojets is computed,
the smallest is taken (a merge adds four-momenta, E-scheme; a beam step makes a jet). Ties follow
the order documented in evtkin.select.clustering: key (d, 0 for a beam / 1 for a pair, ΔR², lower
label, higher label), a merged pseudojet keeping the lower label."""

from __future__ import annotations

import math

import awkward as ak
import numba
import numpy as np
import pytest

import evtkin
from evtkin.select import clustering as C
from evtkin.select import jets as old_jets

P_OF = {"anti-kt": -1, "cambridge": 0, "kt": 1}


@numba.njit(cache=True)
def _brute(px, py, pz, e, radius, p):  # pragma: no cover - compiled
    n = px.shape[0]
    jx = px.copy()
    jy = py.copy()
    jz = pz.copy()
    je = e.copy()
    r2 = radius * radius
    active = np.ones(n, dtype=np.bool_)
    isjet = np.zeros(n, dtype=np.bool_)
    owner = np.arange(n)
    y = np.empty(n)
    ph = np.empty(n)
    kt = np.empty(n)
    for _step in range(n):
        for i in range(n):
            if active[i]:
                if je[i] > abs(jz[i]):
                    y[i] = 0.5 * math.log((je[i] + jz[i]) / (je[i] - jz[i]))
                else:
                    y[i] = 1e5 if jz[i] >= 0 else -1e5
                ph[i] = math.atan2(jy[i], jx[i])
                pt2 = jx[i] * jx[i] + jy[i] * jy[i]
                if p == 0:
                    kt[i] = 1.0
                elif p > 0:
                    kt[i] = pt2
                else:
                    kt[i] = math.inf if pt2 == 0.0 else 1.0 / pt2
        best = (math.inf, 2, 0.0, n, n)
        for i in range(n):
            if not active[i]:
                continue
            beam = (kt[i], 0, 0.0, i, i)
            if beam < best:
                best = beam
            for j in range(i + 1, n):
                if not active[j]:
                    continue
                dy = y[i] - y[j]
                dphi = abs(ph[i] - ph[j])
                if dphi > math.pi:
                    dphi = 2.0 * math.pi - dphi
                dr2 = dy * dy + dphi * dphi
                mk = min(kt[i], kt[j])
                d = math.inf if mk == math.inf else mk * (dr2 / r2)
                pair = (d, 1, dr2, i, j)
                if pair < best:
                    best = pair
        a = best[3]
        b = best[4]
        if best[1] == 0:
            active[a] = False
            isjet[a] = True
        else:
            jx[a] = jx[a] + jx[b]
            jy[a] = jy[a] + jy[b]
            jz[a] = jz[a] + jz[b]
            je[a] = je[a] + je[b]
            active[b] = False
            for k in range(n):
                if owner[k] == b:
                    owner[k] = a
        if not active.any():
            break
    return jx, jy, jz, je, isjet, owner


def reference(px, py, pz, e, radius, algorithm, min_pt=0.0):
    """[(four-momentum, constituents)] of one event, pT ordered (ties: smallest constituent)."""
    args = [np.ascontiguousarray(a, dtype=np.float64) for a in (px, py, pz, e)]
    jx, jy, jz, je, isjet, owner = _brute(*args, float(radius), P_OF[algorithm])
    slots = sorted(np.flatnonzero(isjet), key=lambda i: (-(jx[i] ** 2 + jy[i] ** 2), i))
    return [
        ((jx[i], jy[i], jz[i], je[i]), list(np.flatnonzero(owner == i)))
        for i in slots
        if math.sqrt(jx[i] ** 2 + jy[i] ** 2) >= min_pt
    ]


def as_event(px, py, pz, e):
    return ak.Array([{"px": a, "py": b, "pz": c, "energy": d}
                     for a, b, c, d in zip(px, py, pz, e, strict=True)])


def from_ypt(pt, y, phi, m=0.0):
    pt, y, phi, m = np.broadcast_arrays(*(np.asarray(v, dtype=np.float64) for v in (pt, y, phi, m)))
    mt = np.sqrt(pt * pt + m * m)
    return pt * np.cos(phi), pt * np.sin(phi), mt * np.sinh(y), mt * np.cosh(y)


def random_event(rng, n, y_max=3.0):
    pt = rng.exponential(5.0, n) + 0.05
    y = rng.uniform(-y_max, y_max, n)
    phi = rng.uniform(-math.pi, math.pi, n)
    m = rng.choice([0.0, 0.1396, 0.4937, 0.938], n)
    return from_ypt(pt, y, phi, m)


def assert_same(got_event, ref):
    """Same jets, same constituents, four-momenta to 1e-12 relative (the issue's criterion)."""
    assert len(got_event) == len(ref)
    for jet, (p4, cons) in zip(got_event, ref, strict=True):
        assert list(jet["constituents"]) == cons
        scale = max(abs(v) for v in p4) or 1.0
        for name, v in zip(("px", "py", "pz", "energy"), p4, strict=True):
            assert abs(jet[name] - v) <= 1e-12 * scale


def check_events(events, radius, algorithm, min_pt=0.0):
    arrays = [as_event(*ev) for ev in events]
    chunk = ak.Array([ak.to_list(a) for a in arrays])
    jets = evtkin.cluster_jets(chunk, radius=radius, algorithm=algorithm, min_pt=min_pt)
    assert len(jets) == len(events)
    for k, ev in enumerate(events):
        assert_same(ak.to_list(jets[k]), reference(*ev, radius, algorithm, min_pt))


@pytest.mark.parametrize("algorithm", ["anti-kt", "cambridge", "kt"])
@pytest.mark.parametrize("radius", [0.2, 0.4, 1.0, 2.5])
def test_random_small_events_match_brute_force(algorithm, radius):
    rng = np.random.default_rng(hash((algorithm, radius)) % 2**32)
    sizes = [1, 2, 3, 4, 7, 12, 25, 40, 80, 150]
    check_events([random_event(rng, n) for n in sizes], radius, algorithm, min_pt=0.0)


@pytest.mark.parametrize(("n", "algorithm", "radius"), [
    (400, "kt", 0.6), (600, "cambridge", 0.4), (1000, "anti-kt", 0.4), (2000, "anti-kt", 0.4),
])
def test_large_events_match_brute_force(n, algorithm, radius):
    rng = np.random.default_rng(n)
    check_events([random_event(rng, n, y_max=4.5)], radius, algorithm)


def tie_events():
    """Events with exact ties in d_ij, ΔR² and d_iB, and particles at φ = ±π."""
    evs = []
    # identical copies: every pair at ΔR = 0 with equal kt (label order decides)
    px, py, pz, e = from_ypt([10.0, 10.0, 10.0, 5.0, 5.0], [0.3, 0.3, 0.3, -1.0, -1.0],
                             [1.0, 1.0, 1.0, -2.0, -2.0])
    evs.append((px, py, pz, e))
    # a centre at φ = 0 and two equal particles mirrored in φ (atan2 is odd in y), pz = 0
    for dphi in (0.15, 0.3):
        c, s = math.cos(dphi), math.sin(dphi)
        evs.append((np.array([20.0, 8 * c, 8 * c, 8.0]), np.array([0.0, 8 * s, -8 * s, 0.0]),
                    np.zeros(4), np.array([20.0, 8.0, 8.0, 8.0])))
    # φ = +π (py = +0.0) and φ = −π (py = −0.0): the same direction, ΔR = 0
    evs.append((np.array([-10.0, -10.0, -3.0, 5.0]), np.array([0.0, -0.0, 1e-9, 0.0]),
                np.array([1.0, 1.0, 1.0, 1.0]), np.array([12.0, 12.0, 4.0, 6.0])))
    # particles on both sides of the φ = ±π cut
    phis = np.array([math.pi - 0.05, -math.pi + 0.05, math.pi - 0.2, -math.pi + 0.3, 3.0, -3.0])
    evs.append(from_ypt([30.0, 30.0, 5.0, 5.0, 1.0, 1.0], [0.0, 0.0, 0.1, -0.1, 0.0, 0.0], phis))
    # equal pT everywhere on a φ ring at y = 0: all beam distances tie
    k = np.arange(12)
    evs.append(from_ypt(np.full(12, 7.0), np.zeros(12), -math.pi + k * (2 * math.pi / 12)))
    # a grid of equal-pT particles with one spacing: many equal-ΔR pairs
    g = np.arange(-3, 4) * 0.2
    yy, ff = np.meshgrid(g, g)
    evs.append(from_ypt(np.full(yy.size, 3.0), np.zeros(yy.size), ff.ravel()))
    return evs


@pytest.mark.parametrize("algorithm", ["anti-kt", "cambridge", "kt"])
@pytest.mark.parametrize("radius", [0.3, 0.4, 1.0])
def test_exact_ties_and_phi_wrap_match_brute_force(algorithm, radius):
    check_events(tie_events(), radius, algorithm)


def test_pair_exactly_r_apart_stays_two_jets():
    # y = 0, φ = ±a: ΔR² = (2a)² exactly; with R = 2a, R² is the same number. At equal d the
    # beam step comes first (documented order), so the pair is not merged; just inside R it is.
    a = 0.2
    c, s = math.cos(a), math.sin(a)
    ev = ak.Array([[{"px": 10 * c, "py": 10 * s, "pz": 0.0, "energy": 10.0},
                    {"px": 10 * c, "py": -10 * s, "pz": 0.0, "energy": 10.0}]])
    phi = math.atan2(10 * s, 10 * c)
    r = 2 * phi
    for algorithm in P_OF:
        assert ak.num(evtkin.cluster_jets(ev, radius=r, algorithm=algorithm))[0] == 2
        inside = evtkin.cluster_jets(ev, radius=r * (1 + 1e-12), algorithm=algorithm)
        assert ak.num(inside)[0] == 1


def hard_event(rng):
    """Three hard partons' sprays plus a soft uniform background."""
    parts = []
    for pt, y0, phi0 in ((120.0, 0.0, 0.0), (80.0, 1.0, 2.5), (60.0, -1.2, -2.0)):
        n = 12
        z = rng.dirichlet(np.ones(n))
        parts.append(from_ypt(pt * z, y0 + rng.normal(0, 0.08, n), phi0 + rng.normal(0, 0.08, n)))
    parts.append(from_ypt(rng.uniform(0.2, 1.0, 200), rng.uniform(-3, 3, 200),
                          rng.uniform(-math.pi, math.pi, 200)))
    return tuple(np.concatenate([p[k] for p in parts]) for k in range(4))


def hard_jets(px, py, pz, e, algorithm, pt_cut=30.0):
    jets = evtkin.cluster_jets(ak.Array([ak.to_list(as_event(px, py, pz, e))]), radius=0.4,
                               algorithm=algorithm, min_pt=pt_cut)
    return ak.to_list(jets[0])


@pytest.mark.parametrize("algorithm", ["anti-kt", "cambridge", "kt"])
def test_infrared_safety_soft_particle_leaves_hard_jets(algorithm):
    rng = np.random.default_rng(7)
    ev = hard_event(rng)
    before = hard_jets(*ev, algorithm)
    assert len(before) == 3
    for y0, phi0 in ((0.05, 0.02), (1.1, 2.45), (0.0, 1.0), (2.0, -3.1)):
        soft = from_ypt([1e-6], [y0], [phi0])
        after = hard_jets(*(np.concatenate([a, s]) for a, s in zip(ev, soft, strict=True)),
                          algorithm)
        assert len(after) == len(before)
        n = len(ev[0])
        for b, a in zip(before, after, strict=True):
            assert [c for c in a["constituents"] if c != n] == b["constituents"]
            for f in ("px", "py", "pz", "energy"):
                assert abs(a[f] - b[f]) <= 2e-6  # the soft particle's own 1e-6 GeV at most


@pytest.mark.parametrize("algorithm", ["anti-kt", "cambridge", "kt"])
def test_collinear_safety_split_particle_leaves_hard_jets(algorithm):
    rng = np.random.default_rng(8)
    ev = hard_event(rng)
    before = hard_jets(*ev, algorithm)
    n = len(ev[0])
    for k in (0, 5, 13, 30):
        # two exactly collinear halves (halving is exact, so the direction is unchanged)
        halves = [a.copy() for a in ev]
        for col in halves:
            col[k] *= 0.5
        split = tuple(np.append(col, col[k]) for col in halves)
        after = hard_jets(*split, algorithm)
        assert len(after) == len(before)
        for b, a in zip(before, after, strict=True):
            assert [c for c in a["constituents"] if c != n] == b["constituents"]
            for f in ("px", "py", "pz", "energy"):
                assert a[f] == pytest.approx(b[f], rel=1e-12, abs=1e-12)


def test_anti_kt_hard_isolated_jet_is_a_cone_of_radius_r():
    rng = np.random.default_rng(9)
    radius = 0.4
    soft = from_ypt(rng.uniform(0.1, 0.5, 600), rng.uniform(-2.5, 2.5, 600),
                    rng.uniform(-math.pi, math.pi, 600))
    hard = from_ypt([150.0], [0.3], [1.0])
    ev = tuple(np.concatenate([h, s]) for h, s in zip(hard, soft, strict=True))
    chunk = ak.Array([ak.to_list(as_event(*ev))])
    jet = ak.to_list(evtkin.cluster_jets(chunk, radius=radius)[0])[0]
    assert 0 in jet["constituents"]
    px, py, pz, e = ev
    y = 0.5 * np.log((e + pz) / (e - pz))
    phi = np.arctan2(py, px)
    jy = 0.5 * math.log((jet["energy"] + jet["pz"]) / (jet["energy"] - jet["pz"]))
    jphi = math.atan2(jet["py"], jet["px"])
    dphi = np.abs(phi - jphi)
    dphi = np.where(dphi > math.pi, 2 * math.pi - dphi, dphi)
    dr = np.hypot(y - jy, dphi)
    inside = set(jet["constituents"])
    # the axis moves by ~ (soft pT in the cone / 150 GeV) * R, well below 0.01
    assert all(dr[i] < radius + 0.01 for i in inside)
    assert all(i in inside for i in np.flatnonzero(dr < radius - 0.01))
    assert np.count_nonzero(dr < radius - 0.01) > 10


def test_jet_records_behave_as_particles_and_are_pt_ordered():
    rng = np.random.default_rng(3)
    chunk = ak.Array([ak.to_list(as_event(*random_event(rng, n))) for n in (0, 5, 60)])
    jets = evtkin.cluster_jets(chunk, radius=0.4, min_pt=5.0)
    assert ak.num(jets)[0] == 0
    pt = jets.pt
    assert ak.all(pt >= 5.0)
    assert ak.all(pt[:, 1:] <= pt[:, :-1])
    assert np.allclose(ak.to_numpy(ak.flatten(pt)),
                       np.hypot(ak.flatten(jets.px), ak.flatten(jets.py)))
    # every particle in at most one jet; with min_pt = 0 in exactly one
    alljets = evtkin.cluster_jets(chunk, radius=0.4)
    for k, n in enumerate((0, 5, 60)):
        cons = sorted(c for j in ak.to_list(alljets[k]) for c in j["constituents"])
        assert cons == list(range(n))
    assert isinstance(jets.mass, ak.Array)


def test_chunking_does_not_change_jets():
    rng = np.random.default_rng(4)
    events = [ak.to_list(as_event(*random_event(rng, n))) for n in (3, 90, 0, 40, 200)]
    whole = evtkin.cluster_jets(ak.Array(events), algorithm="kt", radius=0.5)
    for k, ev in enumerate(events):
        one = evtkin.cluster_jets(ak.Array([ev]), algorithm="kt", radius=0.5)
        assert ak.to_list(one[0]) == ak.to_list(whole[k])


def test_same_jets_as_parton_level_clustering_code():
    # no ties in these random events: both implementations of the definition must agree
    rng = np.random.default_rng(11)
    chunk = ak.Array([ak.to_list(as_event(*random_event(rng, n))) for n in (2, 6, 9, 15)])
    for algorithm, p in P_OF.items():
        new = evtkin.cluster_jets(chunk, radius=0.4, algorithm=algorithm)
        old, _ = old_jets.cluster(chunk, 0.4, p=float(p))
        assert ak.to_list(ak.num(new)) == ak.to_list(ak.num(old))
        for f, g in (("px", "px"), ("py", "py"), ("pz", "pz"), ("energy", "E")):
            assert np.allclose(ak.to_numpy(ak.flatten(new[f])), ak.to_numpy(ak.flatten(old[g])),
                               rtol=1e-12, atol=1e-12)
        assert ak.to_list(ak.num(new.constituents, axis=2)) == ak.to_list(old.n_constituents)


def test_bad_arguments_are_named():
    ev = ak.Array([[{"px": 1.0, "py": 0.0, "pz": 0.0, "energy": 1.0}]])
    with pytest.raises(ValueError, match="unknown jet algorithm 'antikt'"):
        evtkin.cluster_jets(ev, algorithm="antikt")
    with pytest.raises(ValueError, match="radius"):
        evtkin.cluster_jets(ev, radius=0.0)
    with pytest.raises(ValueError, match="min_pt"):
        evtkin.cluster_jets(ev, min_pt=-1.0)
    nan = ak.Array([[{"px": math.nan, "py": 0.0, "pz": 0.0, "energy": 1.0}]])
    with pytest.raises(ValueError, match="non-finite px"):
        evtkin.cluster_jets(nan)
    with pytest.raises(ValueError, match="jagged"):
        evtkin.cluster_jets(ev[0])


def test_flat_entry_point_counts():
    px, py, pz, e = from_ypt([50.0, 30.0, 20.0], [0.0, 0.1, 2.0], [0.0, 0.1, 1.0])
    jx, _jy, _jz, _je, njets, cons, ncon = C.cluster_flat(px, py, pz, e, np.array([3, 0]))
    assert list(njets) == [2, 0]
    assert list(ncon) == [2, 1]
    assert list(cons) == [0, 1, 2]
    assert jx[0] == pytest.approx(px[0] + px[1], rel=1e-15)


def test_flat_entry_point_refuses_counts_that_do_not_match_the_particles():
    # counts adding up to more particles than given would read past the columns' ends
    px, py, pz, e = from_ypt([50.0, 30.0, 20.0], [0.0, 0.1, 2.0], [0.0, 0.1, 1.0])
    with pytest.raises(ValueError, match="add up to 4; px, py, pz, energy hold 3, 3, 3, 3"):
        C.cluster_flat(px, py, pz, e, np.array([3, 1]))
    with pytest.raises(ValueError, match="add up to 2"):
        C.cluster_flat(px, py, pz, e, np.array([2]))
    with pytest.raises(ValueError, match="counts must be >= 0"):
        C.cluster_flat(px, py, pz, e, np.array([4, -1]))
    with pytest.raises(ValueError, match="hold 3, 3, 2, 3"):
        C.cluster_flat(px, py, pz[:2], e, np.array([3]))
