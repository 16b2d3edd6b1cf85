"""Write the toy samples to disk: LHE files for top pairs, Drell-Yan and deformed top pairs,
and the detector-level ROOT ntuple. Every file says in its header that it is toy data.

Sample names belong to an invented scenario: the run "aurora" of an imaginary 13 TeV
proton-proton collider campaign.
"""

from __future__ import annotations

import os
from collections.abc import Iterator

import awkward as ak

from evtkin.io.lhe_write import RunInfo, write_lhe
from evtkin.toy.constants import TOY_NOTICE
from evtkin.toy.drellyan import DrellYanSampler
from evtkin.toy.driver import generate
from evtkin.toy.ttbar import Deformation, TTbarSampler

__all__ = ["ttbar_events", "write_drellyan", "write_ntuple_sample", "write_ttbar"]

SAMPLE_NAMES = {
    "ttbar": "aurora_toy_ttbar",
    "deformed": "aurora_toy_ttbar_deformed",
    "drellyan": "aurora_toy_dy_ll",
    "ntuple": "aurora_toy_ttbar_reco",
}


def _header(sample: str, params: dict[str, object]) -> str:
    attrs = " ".join(f'{k}="{v}"' for k, v in params.items())
    return f'<evtkin_toy sample="{sample}" {attrs}>\n{TOY_NOTICE}\n</evtkin_toy>'


def ttbar_events(
    n_events: int, *, seed: int, sqrt_s: float = 13000.0, mode: str = "unweighted",
    negative_fraction: float = 0.15, deformation: Deformation | None = None,
    chunk_events: int = 50_000, n_integration: int = 400_000,
) -> tuple[RunInfo, Iterator[ak.Array]]:
    """Run information and a stream of top-pair event chunks (see :mod:`evtkin.toy.ttbar`)."""
    sampler = TTbarSampler(sqrt_s=sqrt_s, deformation=deformation)
    return generate(sampler, n_events, seed=seed, mode=mode, negative_fraction=negative_fraction,
                    chunk_events=chunk_events, n_integration=n_integration)  # fmt: skip


def write_ttbar(
    path: str | os.PathLike[str], n_events: int, *, seed: int, sqrt_s: float = 13000.0,
    mode: str = "unweighted", negative_fraction: float = 0.15,
    deformation: Deformation | None = None, precision: int | None = None,
    n_integration: int = 400_000,
) -> RunInfo:
    """Write a top-pair LHE sample (``deformation`` set: the deformed variant).

    ``n_integration`` trial points estimate sigma and the largest weight (not used by the
    ``weighted`` mode, which integrates over exactly the written events)."""
    info, chunks = ttbar_events(n_events, seed=seed, sqrt_s=sqrt_s, mode=mode,
                                negative_fraction=negative_fraction, deformation=deformation,
                                n_integration=n_integration)  # fmt: skip
    params: dict[str, object] = {"seed": seed, "events": n_events, "sqrt_s_GeV": sqrt_s,
                                 "weights": mode}  # fmt: skip
    if mode == "negative":
        params["negative_fraction"] = negative_fraction
    name = SAMPLE_NAMES["ttbar"]
    if deformation is not None:
        name = SAMPLE_NAMES["deformed"]
        params["deformation"] = f"1 + {deformation.c} shat/({deformation.lam} GeV)^2"
    write_lhe(path, chunks, info=info, header_text=_header(name, params), comment=TOY_NOTICE,
              precision=precision)  # fmt: skip
    return info


def write_drellyan(
    path: str | os.PathLike[str], n_events: int, *, seed: int, sqrt_s: float = 13000.0,
    mode: str = "unweighted", negative_fraction: float = 0.15, m_low: float = 60.0,
    m_high: float = 120.0, precision: int | None = None, n_integration: int = 400_000,
) -> RunInfo:
    """Write a Drell-Yan LHE sample (see :mod:`evtkin.toy.drellyan`)."""
    sampler = DrellYanSampler(sqrt_s=sqrt_s, m_low=m_low, m_high=m_high)
    info, chunks = generate(sampler, n_events, seed=seed, mode=mode,
                            negative_fraction=negative_fraction,
                            n_integration=n_integration)  # fmt: skip
    params: dict[str, object] = {"seed": seed, "events": n_events, "sqrt_s_GeV": sqrt_s,
                                 "weights": mode, "mll_GeV": f"{m_low}-{m_high}"}  # fmt: skip
    write_lhe(path, chunks, info=info, header_text=_header(SAMPLE_NAMES["drellyan"], params),
              comment=TOY_NOTICE, precision=precision)  # fmt: skip
    return info


def write_ntuple_sample(
    path: str | os.PathLike[str], n_events: int, *, seed: int, sqrt_s: float = 13000.0,
    source: str | os.PathLike[str] | None = None, n_integration: int = 400_000,
) -> int:
    """Write the detector-level ntuple: from the LHE file ``source`` (read with
    :func:`evtkin.read_lhe`) or, if ``None``, from freshly sampled unweighted top pairs."""
    from evtkin.toy.detector import write_ntuple

    if source is not None:
        from evtkin.io.lhe import read_lhe

        chunks: Iterator[ak.Array] = read_lhe(source, step_size=50_000)
    else:
        _, chunks = ttbar_events(n_events, seed=seed, sqrt_s=sqrt_s, n_integration=n_integration)
    return write_ntuple(os.fspath(path), chunks, seed=seed)
