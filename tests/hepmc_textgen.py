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
            # about half the events carry no process id and no PDF info (-1, NaN and 0s)
            **_process_and_pdf(rng, rng.random() < 0.5),
            "particles": parts,
            "vertices": verts,
        })  # fmt: skip
    return ak.Array(out)


def _process_and_pdf(rng: np.random.Generator, have: bool) -> dict:
    if not have:
        return {"signal_process_id": -1, "pdf_parton1": 0, "pdf_parton2": 0,
                "pdf_x1": np.nan, "pdf_x2": np.nan, "pdf_scale": np.nan, "pdf_xf1": np.nan,
                "pdf_xf2": np.nan, "pdf_set1": 0, "pdf_set2": 0}  # fmt: skip
    x1, x2 = rng.uniform(1e-4, 0.9, 2)
    return {"signal_process_id": int(rng.integers(0, 600)),
            "pdf_parton1": int(rng.choice([21, 1, -2, 3])),
            "pdf_parton2": int(rng.choice([21, -1, 2, -3])),
            "pdf_x1": float(x1), "pdf_x2": float(x2), "pdf_scale": float(rng.uniform(5, 500)),
            "pdf_xf1": float(rng.uniform(0, 3)), "pdf_xf2": float(rng.uniform(0, 3)),
            "pdf_set1": int(rng.choice([0, 303400])), "pdf_set2": int(rng.choice([0, 303400]))}
