"""``evtkin toy``: write the seeded toy samples (demo and test data, never physics results)."""

from __future__ import annotations

import argparse
import time

from evtkin.errors import EvtkinError

DEFAULT_OUTPUT = {
    "ttbar": "toy_ttbar.lhe.gz",
    "deformed": "toy_ttbar_deformed.lhe.gz",
    "drellyan": "toy_drellyan.lhe.gz",
    "ntuple": "toy_ttbar_reco.root",
    "shower": "toy_shower.hepmc.gz",
}


def add_parser(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "toy",
        help="write seeded toy samples (LHE v3 files, a detector-level ROOT ntuple, "
        "particle-level HepMC events)",
        description="Write seeded toy samples for demos and tests. They are toy data, "
        "not physics predictions; every file says so in its header. "
        "'evtkin toy shower INPUT.lhe[.gz] -o OUTPUT.hepmc[.gz]' turns the events of an LHE "
        "file into particle-level events (toy shower, hadronisation, decays; HepMC Asciiv3).",
    )
    p.add_argument("sample", choices=sorted(DEFAULT_OUTPUT), help="which sample to write")
    p.add_argument("input", nargs="?", default=None,
                   help="shower: the LHE file whose events are showered")  # fmt: skip
    p.add_argument("-n", "--events", type=int, default=None,
                   help="number of events (default 20000; shower: every event of the input)")
    p.add_argument("--seed", type=int, default=1, help="random seed (same seed, same file)")
    p.add_argument("--sqrt-s", type=float, default=13000.0, help="collider energy in GeV")
    p.add_argument("--weights", choices=("unweighted", "weighted", "negative"),
                   default="unweighted", help="event weight mode (IDWTUP 3, 4, -4)")  # fmt: skip
    p.add_argument("--negative-fraction", type=float, default=0.15,
                   help="fraction of negative weights in --weights negative")  # fmt: skip
    p.add_argument("--deform-c", type=float, default=1.0,
                   help="deformed sample: coefficient c in 1 + c*shat/Lambda^2")  # fmt: skip
    p.add_argument("--deform-lambda", type=float, default=3000.0,
                   help="deformed sample: scale Lambda in GeV")  # fmt: skip
    p.add_argument("--mll", type=float, nargs=2, default=(60.0, 120.0), metavar=("LOW", "HIGH"),
                   help="Drell-Yan dilepton mass window in GeV")  # fmt: skip
    p.add_argument("--precision", type=int, default=None,
                   help="significant digits of LHE floats (default: exact round trip)")
    p.add_argument("--integration-points", type=int, default=400_000, metavar="N",
                   help="trial points that estimate sigma and the largest weight")  # fmt: skip
    p.add_argument("--from-lhe", default=None, metavar="FILE",
                   help="ntuple: smear the events of this LHE file instead of sampling new ones")
    p.add_argument("-o", "--output", default=None, help="output path (.gz: gzip)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from evtkin.toy import samples
    from evtkin.toy.ttbar import Deformation

    if args.events is not None and args.events <= 0:
        raise EvtkinError(f"--events must be positive, got {args.events}")
    out = args.output or DEFAULT_OUTPUT[args.sample]
    t0 = time.perf_counter()
    if args.sample == "shower":
        return _shower(args, out, t0)
    if args.input is not None:
        raise EvtkinError(f"'evtkin toy {args.sample}' takes no input file (got {args.input!r})")
    if args.events is None:
        args.events = 20_000
    try:
        if args.sample == "ntuple":
            n = samples.write_ntuple_sample(out, args.events, seed=args.seed, sqrt_s=args.sqrt_s,
                                            source=args.from_lhe,
                                            n_integration=args.integration_points)  # fmt: skip
            print(f"wrote {n} events to {out} (toy data) in {time.perf_counter() - t0:.1f} s")
            return 0
        common = dict(seed=args.seed, sqrt_s=args.sqrt_s, mode=args.weights,
                      negative_fraction=args.negative_fraction, precision=args.precision,
                      n_integration=args.integration_points)  # fmt: skip
        if args.sample == "drellyan":
            info = samples.write_drellyan(out, args.events, m_low=args.mll[0], m_high=args.mll[1],
                                          **common)  # type: ignore[arg-type]  # fmt: skip
        else:
            deform = (Deformation(args.deform_c, args.deform_lambda)
                      if args.sample == "deformed" else None)  # fmt: skip
            info = samples.write_ttbar(out, args.events, deformation=deform,
                                       **common)  # type: ignore[arg-type]
    except ValueError as exc:
        raise EvtkinError(str(exc)) from exc
    sigma = sum(p.xsec_pb for p in info.processes)
    print(f"wrote {args.events} events to {out} (toy data; sigma = {sigma:.4g} pb, "
          f"IDWTUP = {info.weighting}) in {time.perf_counter() - t0:.1f} s")  # fmt: skip
    return 0


def _shower(args: argparse.Namespace, out: str, t0: float) -> int:
    import os

    from evtkin.toy.shower import write_shower

    if args.input is None:
        raise EvtkinError("evtkin toy shower needs an input LHE file: "
                          "evtkin toy shower INPUT.lhe[.gz] -o OUTPUT.hepmc[.gz]")  # fmt: skip
    if not os.path.exists(args.input):
        raise EvtkinError(f"{args.input}: no such file")
    precision = 8 if args.precision is None else args.precision
    n = write_shower(args.input, out, seed=args.seed, n_events=args.events, precision=precision)
    print(f"wrote {n} particle-level events to {out} (toy data) in "
          f"{time.perf_counter() - t0:.1f} s")  # fmt: skip
    return 0
