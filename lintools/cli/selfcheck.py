"""``lintools selfcheck``: qualify this installation against exact and certified answers.

A site that cannot install the test suite's oracle libraries (SciPy, scikit-learn,
statsmodels) can still show that lintools computes correctly on its machine, with its
NumPy and BLAS: the command runs the fixed cases of :mod:`lintools.cli.selfcheck_cases`
(least squares, logistic and softmax fits, probability metrics and a separated data set
that must be refused), prints the digits each achieves against its exact or certified
reference beside the digits required, and exits with 0 only when every check passes (1
otherwise).  It needs NumPy only, reads and writes no file, and takes about a second.
"""

from __future__ import annotations

import argparse
import platform
import sys
import time
from typing import Any

import numpy as np

from .common import emit_json
from .selfcheck_cases import Check, run_cases

__all__ = ["add_selfcheck_parser", "machine", "run_selfcheck"]

MEASURE = ("digits: the log relative error (McCullough 1998) against the exact or certified value, "
           "capped at the digits that value is given to (16 for an exact value, 15 for NIST's)")


def machine() -> dict[str, Any]:
    """What the digits depend on: Python, the platform, NumPy and the BLAS NumPy was built with."""
    blas = "unknown"
    try:
        info = np.__config__.CONFIG["Build Dependencies"]["blas"]
        blas = f"{info.get('name', 'unknown')} {info.get('version', '')}".strip()
        detail = info.get("openblas configuration")
        if detail:
            blas += f" ({detail})"
    except (AttributeError, KeyError, TypeError):
        pass
    return {"python": platform.python_version(), "platform": f"{platform.system()} {platform.machine()}",
            "numpy": np.__version__, "blas": blas,
            "long_double_digits": round(float(-np.log10(float(np.finfo(np.longdouble).eps))), 1)}


def _number(value: float | None) -> str:
    return "-" if value is None else f"{value:.1f}"


def _table(checks: list[Check]) -> str:
    wc = max(len("case"), *(len(c.case) for c in checks)) + 2
    wq = max(len("quantity"), *(len(c.quantity) for c in checks)) + 2
    head = "case".ljust(wc) + "quantity".ljust(wq) + "digits".rjust(7) + "required".rjust(10) + "  verdict  worst"
    lines = [head, "-" * len(head)]
    for c in checks:
        lines.append(c.case.ljust(wc) + c.quantity.ljust(wq) + _number(c.digits).rjust(7)
                     + _number(c.required).rjust(10) + ("  PASS     " if c.passed else "  FAIL     ") + c.worst)
    return "\n".join(lines)


def run_selfcheck(args: argparse.Namespace) -> int:
    """The ``selfcheck`` subcommand: 0 when every check passes, 1 otherwise."""
    start = time.perf_counter()
    checks = run_cases()
    seconds = time.perf_counter() - start
    failed = [c for c in checks if not c.passed]
    host = machine()
    if args.json:
        emit_json({"machine": host, "measure": MEASURE, "checks": checks,
                   "passed": not failed, "failed": len(failed), "seconds": round(seconds, 3)})
    else:
        print(f"lintools self-check on Python {host['python']}, {host['platform']}; NumPy {host['numpy']}; "
              f"BLAS {host['blas']}; long double {host['long_double_digits']} digits")
        print(MEASURE + "\n")
        print(_table(checks) + "\n")
        for c in failed:
            for text in c.warnings:
                print(f"  {c.case}: warned: {text}")
        sources = dict.fromkeys(c.source for c in checks if c.source != "-")
        print("references: " + "; ".join(sources))
        verdict = ("every check passed: this installation reproduces the exact and certified values to the "
                   "digits required" if not failed else
                   f"{len(failed)} check(s) FAILED: do not rely on this installation until the cause is found")
        print(f"{len(checks)} checks in {seconds:.1f} s; {verdict}")
    if failed:
        print(f"lintools: self-check failed: {', '.join(f'{c.case} ({c.quantity})' for c in failed)}",
              file=sys.stderr)
        return 1
    return 0


def add_selfcheck_parser(sub: Any, common: Any) -> None:
    """Register the ``selfcheck`` subcommand."""
    p = sub.add_parser(
        "selfcheck", help="qualify this installation: digits achieved on exact and certified cases",
        description="Runs fixed least-squares, logistic, softmax and metric cases whose answers are known exactly "
                    "(rational arithmetic) or certified (NIST StRD Longley), and a separated data set that must "
                    "be refused; prints the digits achieved and required per check. Exit 0 when all pass, 1 "
                    "otherwise. Needs NumPy only.",
    )
    common(p)
    p.set_defaults(run=run_selfcheck)
