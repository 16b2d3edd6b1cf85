"""Toy Drell-Yan sampler vs the LO q qbar -> gamma*/Z -> l+ l- results (REFERENCES 2.4)."""

from __future__ import annotations

import awkward as ak
import numpy as np
import pytest
import vector
from scipy import stats

from evtkin.toy.drellyan import DrellYanSampler
from evtkin.toy.driver import generate
from evtkin.toy.pdfs import ToyPDF

vector.register_awkward()
M_Z, G_Z = 91.1880, 2.4955  # PDG 2024
ALPHA, SW2, G_F = 1 / 128, 0.23153, 1.1663788e-5  # REFERENCES 2.4 test-number inputs; G_F PDG


def _events(lo: float, hi: float, n: int, seed: int) -> ak.Array:
    _, chunks = generate(DrellYanSampler(m_low=lo, m_high=hi), n, seed=seed, n_integration=60_000)
    return ak.concatenate(list(chunks))


def _cos_theta(ev: ak.Array) -> tuple[np.ndarray, np.ndarray]:
    """cos of the angle between l- and the incoming quark in the dilepton rest frame, and the
    |pdg id| of the quark."""
    p = ev.particles
    v = ak.zip({"px": p.px, "py": p.py, "pz": p.pz, "E": p.energy}, with_name="Momentum4D")
    quark_is_first = ak.to_numpy(p.pdgid[:, 0]) > 0
    quark = ak.where(quark_is_first, v[:, 0], v[:, 1])
    lminus = ak.where(p.pdgid[:, 3] > 0, v[:, 3], v[:, 4])
    z = v[:, 3] + v[:, 4]
    lq = lminus.boostCM_of_p4(z).to_Vector3D().unit()
    qq = quark.boostCM_of_p4(z).to_Vector3D().unit()
    flav = np.abs(np.where(quark_is_first, ak.to_numpy(p.pdgid[:, 0]), ak.to_numpy(p.pdgid[:, 1])))
    return ak.to_numpy(lq.dot(qq)), flav


# REFERENCES 2.4 test numbers (alpha = 1/128, sin^2 = 0.23153): A_FB for u ubar and d dbar
@pytest.mark.parametrize(
    ("lo", "hi", "afb_u", "afb_d"),
    [(M_Z - 0.25, M_Z + 0.25, 0.0734, 0.1031), (199.5, 200.5, 0.668, 0.603)],
)
def test_forward_backward_asymmetry(lo, hi, afb_u, afb_d):
    ev = _events(lo, hi, 16_000, seed=31)
    c, flav = _cos_theta(ev)
    for q, afb in ((2, afb_u), (1, afb_d)):
        x = c[flav == q]
        n = len(x)
        assert n > 2000
        # (1/sigma) dsigma/dcos = (3/8)(1 + cos^2) + A_FB cos  =>  A_FB = (N_F - N_B)/N
        measured = (np.sum(x > 0) - np.sum(x < 0)) / n
        err = np.sqrt((1 - measured**2) / n)
        assert abs(measured - afb) < 4 * err, (q, measured, afb, err)

        def cdf(t, a=afb):
            return (3 / 8) * (t + t**3 / 3 + 4 / 3) + a * (t**2 - 1) / 2

        assert stats.kstest(x, cdf).pvalue > 1e-3
    # the photon-only shape (A_FB = 0) is rejected at 200 GeV
    if lo > 150:
        res = stats.kstest(c, lambda t: (3 / 8) * (t + t**3 / 3 + 4 / 3))
        assert res.pvalue < 1e-6


def _a0(shat: np.ndarray, q: float, t3q: float) -> np.ndarray:
    """REFERENCES 2.4: A0 of the LO angular distribution (written here independently)."""
    vl, al = -0.5 + 2 * SW2, -0.5
    vq, aq = t3q - 2 * q * SW2, t3q
    kappa = np.sqrt(2) * G_F * M_Z**2 / (4 * np.pi * ALPHA)
    den = (shat - M_Z**2) ** 2 + (G_Z * M_Z) ** 2
    chi1 = kappa * shat * (shat - M_Z**2) / den
    chi2 = kappa**2 * shat**2 / den
    return q**2 - 2 * q * vl * vq * chi1 + (al**2 + vl**2) * (aq**2 + vq**2) * chi2


def test_z_line_shape():
    """m_ll follows (2 m / s) sum_q L_qq(tau) 4 pi alpha^2 A0/(9 s^) (REFERENCES 2.4 with the
    toy parton luminosity), checked by a chi-square test of a histogram."""
    lo, hi, nbins = 70.0, 110.0, 20
    ev = _events(lo, hi, 20_000, seed=47)
    m = ak.to_numpy(ev.particles.mass[:, 2])
    counts, edges = np.histogram(m, bins=nbins, range=(lo, hi))

    pdf, s = ToyPDF(), 13000.0**2
    grid = np.linspace(lo, hi, nbins * 16 + 1)
    dens = np.empty_like(grid)
    u = (np.arange(800) + 0.5) / 400 - 1  # midpoint rule in y (x = 1 at the ends)
    for i, mass in enumerate(grid):
        tau = mass**2 / s
        y = u * (-0.5 * np.log(tau))
        x1, x2 = np.sqrt(tau) * np.exp(y), np.sqrt(tau) * np.exp(-y)
        f1, f2 = pdf.densities(x1, mass), pdf.densities(x2, mass)
        total = 0.0
        for code, (q, t3) in {1: (-1 / 3, -0.5), 2: (2 / 3, 0.5), 3: (-1 / 3, -0.5),
                              4: (2 / 3, 0.5)}.items():  # fmt: skip
            lum = np.sum(f1[code] * f2[-code] + f1[-code] * f2[code]) * (y[1] - y[0])
            total += lum * _a0(mass**2, q, t3)
        dens[i] = 2 * mass / s * total / mass**2
    cum = np.concatenate([[0], np.cumsum((dens[1:] + dens[:-1]) / 2 * np.diff(grid))])
    prob = np.diff(cum[:: 16]) / cum[-1]
    expected = prob * len(m)
    chi2 = np.sum((counts - expected) ** 2 / expected)
    assert stats.chi2.sf(chi2, nbins - 1) > 1e-3, chi2
    # the peak sits at M_Z: the fullest bin contains 91.188
    peak = np.argmax(counts)
    assert edges[peak] <= M_Z < edges[peak + 1]


def test_drellyan_record_and_weights():
    ev = _events(60.0, 120.0, 3000, seed=5)
    p = ev.particles
    assert ak.all(ak.num(p) == 5)
    assert np.all(ak.to_numpy(p.pdgid[:, 2]) == 23)
    assert np.all(ak.to_numpy(p.pdgid[:, 3]) == -ak.to_numpy(p.pdgid[:, 4]))
    assert set(np.unique(ak.to_numpy(ev.process_id))) == {11, 13}
    assert np.all(ak.to_numpy(p.mother1[:, 3:]) == 2)
    mom = np.stack([ak.to_numpy(p[f]) for f in ("px", "py", "pz", "energy")], axis=-1)
    np.testing.assert_allclose(mom[:, 0] + mom[:, 1], mom[:, 3] + mom[:, 4], atol=1e-9)
    e2 = mom[:, :, 3] ** 2
    p2m2 = (mom[:, :, :3] ** 2).sum(-1) + ak.to_numpy(p.mass) ** 2
    assert np.max(np.abs(e2 - p2m2) / mom[:, :2, 3].sum(axis=1)[:, None] ** 2) < 1e-12
    # colour singlet: the quark's colour tag is the antiquark's anticolour
    c1, c2 = ak.to_numpy(p.color1), ak.to_numpy(p.color2)
    assert np.all(c1[:, 0] + c1[:, 1] == 501)
    assert np.all(c2[:, 0] + c2[:, 1] == 501)
    # LO Drell-Yan has no alpha_s: muR-only variations equal the nominal weight exactly
    w = ak.to_numpy(ev.weights)
    nominal = ak.to_numpy(ev.weight)
    np.testing.assert_allclose(w[:, 1], nominal, rtol=1e-14)
    np.testing.assert_allclose(w[:, 2], nominal, rtol=1e-14)
    assert not np.allclose(w[:, 3], nominal)  # muF variations move the densities
