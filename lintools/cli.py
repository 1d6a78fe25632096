"""The command line.

``lintools demo``  fits the inspection-station demo and prints its reports.

Exit codes: 0 success, 1 a check failed, 2 bad input.
"""

from __future__ import annotations

import argparse
import sys

from ._errors import InputError, LintoolsError

CAUTION = (
    "Caution: statistical agreement is not model validation. Where these results feed "
    "decisions about people (credit, health, safety), local regulation and your "
    "organisation's model-risk practice decide what is required."
)


def _demo(args: argparse.Namespace) -> int:
    from .demo import inspection_data
    from .least_squares import least_squares

    data = inspection_data(n=args.rows, seed=args.seed)
    fit = least_squares(data.X, data.fill_deviation, names=data.names)
    print("Fill-volume deviation (ml) at the inspection station, by least squares\n")
    print(fit.report())
    print(CAUTION)
    return 0


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="lintools", description="Fit and audit linear and logistic models.")
    sub = parser.add_subparsers(dest="command", required=True)
    demo = sub.add_parser("demo", help="fit the built-in inspection-station demo and print the reports")
    demo.add_argument("--rows", type=int, default=2000, help="number of inspection records (default 2000)")
    demo.add_argument("--seed", type=int, default=20261201, help="seed of the data generator")
    demo.set_defaults(run=_demo)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.run(args)
    except InputError as exc:
        print(f"lintools: bad input: {exc}", file=sys.stderr)
        return 2
    except LintoolsError as exc:
        print(f"lintools: {exc}", file=sys.stderr)
        return 1
