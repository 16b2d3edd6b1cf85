"""``evtkin run CONFIG``: run an analysis config and write its results folder."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

__all__ = ["add_parser", "main"]


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value <= 0:
        raise argparse.ArgumentTypeError(f"expected a number > 0, got {value}")
    return value


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "run",
        help="run an analysis config over its samples",
        description="Run the analysis described by CONFIG (TOML) over its samples and write "
        "histograms (ROOT, JSON, CSV), cutflow tables, plots and a provenance record.",
    )
    p.add_argument("config", metavar="CONFIG", help="analysis config (TOML)")
    p.add_argument("--out", metavar="DIR", help="results folder (default: [output] directory "
                   "of the config, else 'evtkin-output' next to it)")
    p.add_argument("--max-events", metavar="N", type=_positive,
                   help="read at most N events from each input file")
    p.add_argument("--step-size", metavar="N", type=_positive,
                   help="events per chunk (memory vs overhead; results do not depend on it)")
    p.set_defaults(func=main)
    return p


def main(args: argparse.Namespace) -> int:
    from evtkin.config import load_config
    from evtkin.run.pipeline import run

    cfg = load_config(args.config)
    out = Path(args.out) if args.out else (cfg.output.directory
                                           or Path(args.config).resolve().parent / "evtkin-output")
    result = run(cfg, out=out, max_events=args.max_events, step_size=args.step_size,
                 progress=None)
    for name, s in result.samples.items():
        sigma = f"{s.xsec.sigma_pb:.6g} pb" if s.xsec is not None else "n/a"
        print(f"{name}: {s.n_events} events, σ = {sigma}, "
              f"{s.cutflow[-1]['n_raw'] if s.cutflow else 0} selected")
        if s.xsec is not None:
            for w in s.xsec.warnings:
                print(f"  warning: {w}", file=sys.stderr)
    print(f"results written to {out}")
    return 0
