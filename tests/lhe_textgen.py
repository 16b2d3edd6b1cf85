"""Helpers for the LHE reader tests: kinematically consistent toy events and LHE text.

The scenario is invented ("aurora" toy runs); the physics inputs are PDG 2024 values
(S. Navas et al., Phys. Rev. D 110, 030001 (2024)). Events are exact two-body decay
chains built with the rest-frame formulas of the PDG kinematics review (two-body
decays) and boosts along z, so E^2 = p^2 + m^2 and momentum balance hold to rounding.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

# PDG 2024 masses and widths (GeV)
M_Z, G_Z = 91.1880, 2.4955
M_W, G_W = 80.3692, 2.085
M_T, G_T = 172.57, 1.42
M_MU = 0.1056583755
M_B = 4.78  # a generator-level b mass (pole-mass scheme), not checked against PDG


@dataclass
class Particle:
    pdgid: int
    status: int
    mother1: int  # 1-based as in the file, 0 = none
    mother2: int
    color1: int
    color2: int
    p: tuple[float, float, float, float]  # px, py, pz, E
    mass: float
    lifetime: float = 0.0
    spin: float = 9.0


@dataclass
class Event:
    process_id: int
    weight: float
    scale: float
    aqed: float
    aqcd: float
    particles: list[Particle]
    rwgt: list[tuple[str, float]] = field(default_factory=list)


def _bw(rng: np.random.Generator, m: float, g: float) -> float:
    # Cauchy (non-relativistic Breit-Wigner) truncated to +-5 widths
    while True:
        x = m + 0.5 * g * math.tan(math.pi * (rng.random() - 0.5))
        if abs(x - m) < 5 * g:
            return x


def _two_body(rng, parent, m1, m2):
    """Decay four-vector ``parent`` isotropically into masses m1, m2 (lab frame)."""
    px, py, pz, e = parent
    mm = math.sqrt(max(e * e - px * px - py * py - pz * pz, 0.0))
    # PDG kinematics review, two-body decays: p* and E1
    pstar = math.sqrt((mm**2 - (m1 + m2) ** 2) * (mm**2 - (m1 - m2) ** 2)) / (2 * mm)
    cos = 2 * rng.random() - 1
    sin = math.sqrt(1 - cos * cos)
    phi = 2 * math.pi * rng.random()
    d = (pstar * sin * math.cos(phi), pstar * sin * math.sin(phi), pstar * cos)
    out = []
    for sign, m in ((1, m1), (-1, m2)):
        q = (sign * d[0], sign * d[1], sign * d[2])
        eq = math.sqrt(pstar * pstar + m * m)
        out.append(_boost(q, eq, parent, mm))
    return out


def _boost(q, eq, parent, mm):
    """Boost (q, eq) from the rest frame of ``parent`` (mass mm) to the lab."""
    bx, by, bz = parent[0] / parent[3], parent[1] / parent[3], parent[2] / parent[3]
    b2 = bx * bx + by * by + bz * bz
    if b2 == 0:
        return (q[0], q[1], q[2], eq)
    gamma = parent[3] / mm
    bp = bx * q[0] + by * q[1] + bz * q[2]
    g2 = (gamma - 1) / b2
    x = q[0] + g2 * bp * bx + gamma * bx * eq
    y = q[1] + g2 * bp * by + gamma * by * eq
    z = q[2] + g2 * bp * bz + gamma * bz * eq
    return (x, y, z, gamma * (eq + bp))


def _onshell(p3, m):
    return (p3[0], p3[1], p3[2], math.sqrt(p3[0] ** 2 + p3[1] ** 2 + p3[2] ** 2 + m * m))


def z_event(rng: np.random.Generator) -> Event:
    """u ubar -> Z -> mu- mu+ (process 1)."""
    m = _bw(rng, M_Z, G_Z)
    y = rng.uniform(-1.5, 1.5)
    e1, e2 = 0.5 * m * math.exp(y), 0.5 * m * math.exp(-y)
    z = (0.0, 0.0, e1 - e2, e1 + e2)
    mu1, mu2 = _two_body(rng, z, M_MU, M_MU)
    parts = [
        Particle(2, -1, 0, 0, 501, 0, (0.0, 0.0, e1, e1), 0.0),
        Particle(-2, -1, 0, 0, 0, 501, (0.0, 0.0, -e2, e2), 0.0),
        Particle(23, 2, 1, 2, 0, 0, z, m),
        Particle(13, 1, 3, 3, 0, 0, _onshell(mu1, M_MU), M_MU, spin=-1.0),
        Particle(-13, 1, 3, 3, 0, 0, _onshell(mu2, M_MU), M_MU, spin=1.0),
    ]
    return Event(1, 812.5, m, 0.0078125, 0.1180, parts)


def tt_event(rng: np.random.Generator) -> Event:
    """g g -> t tbar, t -> W+ b -> mu+ nu b, tbar -> W- bbar -> mu- nubar bbar (process 2)."""
    mt1, mt2 = _bw(rng, M_T, G_T), _bw(rng, M_T, G_T)
    shat = mt1 + mt2 + rng.uniform(5.0, 400.0)
    y = rng.uniform(-1.0, 1.0)
    e1, e2 = 0.5 * shat * math.exp(y), 0.5 * shat * math.exp(-y)
    tot = (0.0, 0.0, e1 - e2, e1 + e2)
    t, tb = _two_body(rng, tot, mt1, mt2)
    mw1, mw2 = _bw(rng, M_W, G_W), _bw(rng, M_W, G_W)
    wp, b = _two_body(rng, t, mw1, M_B)
    wm, bb = _two_body(rng, tb, mw2, M_B)
    mup, nu = _two_body(rng, wp, M_MU, 0.0)
    mum, nub = _two_body(rng, wm, M_MU, 0.0)
    parts = [
        Particle(21, -1, 0, 0, 501, 502, (0.0, 0.0, e1, e1), 0.0),
        Particle(21, -1, 0, 0, 503, 501, (0.0, 0.0, -e2, e2), 0.0),
        Particle(6, 2, 1, 2, 503, 0, t, mt1),
        Particle(-6, 2, 1, 2, 0, 502, tb, mt2),
        Particle(24, 2, 3, 3, 0, 0, wp, mw1),
        Particle(5, 1, 3, 3, 503, 0, _onshell(b, M_B), M_B),
        Particle(-24, 2, 4, 4, 0, 0, wm, mw2),
        Particle(-5, 1, 4, 4, 0, 502, _onshell(bb, M_B), M_B),
        Particle(-13, 1, 5, 5, 0, 0, _onshell(mup, M_MU), M_MU),
        Particle(14, 1, 5, 5, 0, 0, _onshell(nu, 0.0), 0.0),
        Particle(13, 1, 7, 7, 0, 0, _onshell(mum, M_MU), M_MU),
        Particle(-14, 1, 7, 7, 0, 0, _onshell(nub, 0.0), 0.0),
    ]
    return Event(2, -61.25 if rng.random() < 0.2 else 61.25, shat / 2, 0.0078125, 0.1080, parts)


def fmt(x: float) -> str:
    """The number style of the fixtures: sign and 10-digit mantissa."""
    return f"{x:+.10e}"


def event_text(ev: Event, *, weights_block: str = "rwgt") -> str:
    lines = ["<event>"]
    lines.append(
        f" {len(ev.particles)} {ev.process_id} {fmt(ev.weight)} {fmt(ev.scale)} "
        f"{fmt(ev.aqed)} {fmt(ev.aqcd)}"
    )
    for p in ev.particles:
        lines.append(
            f" {p.pdgid:8d} {p.status:2d} {p.mother1:4d} {p.mother2:4d} {p.color1:4d} "
            f"{p.color2:4d} {fmt(p.p[0])} {fmt(p.p[1])} {fmt(p.p[2])} {fmt(p.p[3])} "
            f"{fmt(p.mass)} {p.lifetime:.4e} {p.spin:.4e}"
        )
    if ev.rwgt:
        if weights_block == "rwgt":
            lines.append("<rwgt>")
            lines += [f" <wgt id='{i}'> {fmt(v)} </wgt>" for i, v in ev.rwgt]
            lines.append("</rwgt>")
        else:
            lines.append("<weights> " + " ".join(fmt(v) for _, v in ev.rwgt) + " </weights>")
    lines.append("</event>")
    return "\n".join(lines) + "\n"


INIT_TOY = (
    "<init>\n"
    " 2212 2212 +6.8000000000e+03 +6.8000000000e+03 0 0 303600 303600 -4 2\n"
    " +8.1250000000e+02 +2.5000000000e+00 +8.1250000000e+02 1\n"
    " +6.1250000000e+01 +4.0000000000e-01 +6.1250000000e+01 2\n"
    "<generator name='evtkin-toy' version='0.1'>evtkin toy sampler</generator>\n"
    "<xsecinfo neve='24' totxsec='873.75'/>\n"
    "</init>\n"
)

HEADER_TOY = """<LesHouchesEvents version="3.0">
<!-- evtkin test fixture: toy run "aurora", invented scenario; not real data.
     This comment mentions <event> and </event> on purpose. -->
<header>
<runcard><![CDATA[
  # run card of the aurora toy run
  nevents = 24
  <event> this line is card text, not an event </event>
]]></runcard>
<initrwgt>
<weightgroup name="scale_variation" combine="envelope">
<weight id="mur2"> muR=2.0 muF=1.0 </weight>
<weight id="mur05"> muR=0.5 muF=1.0 </weight>
</weightgroup>
<weightgroup type="pdf_members" combine="hessian">
<weight id="pdf1"> member 1 </weight>
</weightgroup>
</initrwgt>
</header>
"""


def toy_events(seed: int = 20240501, n: int = 24) -> list[Event]:
    rng = np.random.default_rng(seed)
    out = []
    for i in range(n):
        ev = z_event(rng) if i % 2 == 0 else tt_event(rng)
        ev.rwgt = [
            ("mur2", ev.weight * 0.9),
            ("mur05", ev.weight * 1.1),
            ("pdf1", ev.weight * 1.02),
        ]
        out.append(ev)
    return out


def toy_file_text(events: list[Event] | None = None) -> str:
    evs = toy_events() if events is None else events
    return HEADER_TOY + INIT_TOY + "".join(event_text(e) for e in evs) + "</LesHouchesEvents>\n"


def minimal_file(
    body: str, *, init: str | None = None, head: str = "", version: str = "3.0"
) -> str:
    """An LHE file around ``body`` (event text) with a one-process ``<init>``."""
    init = init or ("<init>\n 2212 2212 6500 6500 0 0 0 0 3 1\n 1.5 0.1 1.5 7\n</init>\n")
    return f'<LesHouchesEvents version="{version}">\n{head}{init}{body}</LesHouchesEvents>\n'


if __name__ == "__main__":  # regenerate tests/data/lhe/aurora_toy.lhe
    import pathlib

    path = pathlib.Path(__file__).parent / "data" / "lhe" / "aurora_toy.lhe"
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(toy_file_text())
    print(path)
