"""Command line: ``python -m vicino demo [--out DIR]``."""

from __future__ import annotations

import argparse
import sys

from . import __version__


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="vicino", description="Spatial weights, lags and autocorrelation.")
    parser.add_argument("--version", action="version", version=f"vicino {__version__}")
    sub = parser.add_subparsers(dest="command", required=True)
    demo = sub.add_parser("demo", help="run the worked example on an invented region")
    demo.add_argument("--out", default="vicino-demo-out", help="folder for the CSV tables (default: %(default)s)")
    demo.add_argument("--seed", type=int, default=7, help="seed of the invented data and permutations")
    demo.add_argument("--permutations", type=int, default=999, help="permutations for Moran's I")
    args = parser.parse_args(argv)
    if args.command == "demo":
        from .demo import run

        run(args.out, seed=args.seed, permutations=args.permutations)
    return 0


if __name__ == "__main__":
    sys.exit(main())
