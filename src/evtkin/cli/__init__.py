"""Command-line front end: ``evtkin COMMAND ...``.

Each command lives in its own module under ``evtkin.cli`` and provides
``add_parser(subparsers)`` (which sets ``func`` on its parser) and the function
it points to. Nothing outside this package imports it.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from evtkin._version import __version__
from evtkin.errors import EvtkinError

# command modules, in the order --help lists them
COMMANDS: list[str] = ["info", "run", "plot", "merge", "compare", "toy", "inspect"]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="evtkin",
        description=(
            "Turn event files (LHE, ROOT ntuples) into analysis histograms, plots and tables."
        ),
    )
    parser.add_argument("--version", action="version", version=f"evtkin {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        importlib.import_module(f"evtkin.cli.{name}").add_parser(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "func", None) is None:
        parser.print_help()
        return 2
    try:
        return int(args.func(args) or 0)
    except EvtkinError as exc:
        print(f"evtkin: error: {exc}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("evtkin: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
