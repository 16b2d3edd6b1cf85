"""Random small HepMC events (as awkward records) for the reader's tests.

Each event: two beam particles (status 4) entering vertex 0, which produces a few
particles; some of those decay (status 2) at a further vertex into two or three
products. Particles are listed in graph order (every vertex's incoming particles before
its products) and vertices in the order their first product appears, so the events
round-trip exactly through both ASCII forms of ``write_hepmc``.
"""

from __future__ import annotations

import awkward as ak
import numpy as np


def random_events(n: int, seed: int = 1, k: int = 2, *, grouped: bool = False) -> ak.Array:
    """``n`` events; ``grouped``: particles ordered vertex by vertex (IO_GenEvent order)."""
    rng = np.random.default_rng(seed)
    out = []
    for e in range(n):
        parts: list[dict] = []
        verts: list[dict] = []

        def particle(pdg: int, status: int, prod: int, end: int = -1,
                     parts: list[dict] = parts) -> int:  # fmt: skip
            px, py, pz = rng.normal(0, 20, 3)
            m = float(abs(rng.normal(0, 1)))
            parts.append({"pdgid": pdg, "status": status, "prod_vertex": prod,
                          "end_vertex": end, "px": px, "py": py, "pz": pz,
                          "energy": float(np.sqrt(px * px + py * py + pz * pz + m * m)),
                          "mass": m})  # fmt: skip
            return len(parts) - 1

        verts.append({"status": 0, "x": 0.0, "y": 0.0, "z": 0.0, "t": 0.0})
        particle(2212, 4, -1, 0)
        particle(2212, 4, -1, 0)
        prods = [particle(int(rng.choice([1, 2, 21, 11, -13, 22])), 1, 0)
                 for _ in range(int(rng.integers(1, 5)))]  # fmt: skip
        for i in prods:
            if rng.random() < 0.5:
                parts[i]["status"] = 2
                verts.append({"status": int(rng.integers(0, 3)), "x": float(rng.normal()),
                              "y": float(rng.normal()), "z": float(rng.normal()),
                              "t": float(abs(rng.normal()))})  # fmt: skip
                parts[i]["end_vertex"] = len(verts) - 1
        for i in prods:
            v = parts[i]["end_vertex"]
            if v >= 0:
                for _ in range(int(rng.integers(2, 4))):
                    particle(int(rng.choice([211, -211, 111, 22])), 1, v)
        if grouped:
            order = sorted(range(len(parts)),
                           key=lambda j: (parts[j]["prod_vertex"] if parts[j]["prod_vertex"] >= 0
                                          else parts[j]["end_vertex"], j))  # fmt: skip
            parts = [parts[j] for j in order]
        out.append({
            "event_number": e + 1,
            "weights": [float(x) for x in rng.normal(1, 0.1, k)],
            "scale": float(rng.uniform(10, 100)),
            "alpha_qcd": 0.118,
            "alpha_qed": 1 / 128.0,
            "xsec_pb": 12.5,
            "xsec_err_pb": 0.25,
            "particles": parts,
            "vertices": verts,
        })  # fmt: skip
    return ak.Array(out)
