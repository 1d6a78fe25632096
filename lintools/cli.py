"""The command line: ``lintools <command>`` or ``python -m lintools <command>``.

Commands
--------
demo         run the whole job on the built-in inspection-station demo; writes a report folder
fit          fit a model to a CSV file, print the report, optionally write the model file
check        check a delivered model file (lintools JSON or PMML) against a refit on a CSV file
calibration  calibration report of a probability column; a reliability diagram with ``--plot``
folds        write a CSV file with a stratified fold-id column added

Exit codes: 0 success, 1 a check failed (or a fit did not converge), 2 bad input.
``--json`` prints one machine-readable JSON document on standard output instead of text
(non-finite numbers become ``null``).  Per-iteration progress goes to standard error for
fits that take longer than a second, unless ``--quiet``.

The subcommands live in ``_cli_check.py``, ``_cli_calibration.py`` and ``_cli_demo.py``;
shared pieces in ``_cli_common.py``.
"""

from __future__ import annotations

import argparse
import csv
import dataclasses
import sys
import warnings
from typing import Any

import numpy as np

from ._cli_calibration import add_calibration_parser
from ._cli_check import add_check_parser
from ._cli_common import CAUTION, Progress, column_list, emit_json
from ._cli_demo import add_demo_parser
from ._cli_table import add_table_options, table_options
from ._errors import InputError, IterationLimitWarning, LintoolsError

__all__ = ["CAUTION", "build_parser", "main"]


def _fit_table(table: Any, args: argparse.Namespace, progress: Progress) -> Any:
    from . import least_squares

    if args.model == "linear":
        if not all(isinstance(v, (int, float)) for v in table.target):
            raise InputError(f"target column '{args.target}' holds text; a linear model needs numbers")
        return least_squares(
            table.X, np.array(table.target, dtype=float), weights=table.weights, l2=args.l2,
            covariance=args.covariance, names=table.names,
        )
    import lintools

    fn = getattr(lintools, args.model)
    return fn(
        table.X, list(table.target), weights=table.weights, l2=args.l2, solver=args.solver, tol=args.tol,
        max_iter=args.max_iter, names=table.names, on_iteration=progress,
        **({"positive": _positive(table, args)} if args.model == "logistic" else {}),
    )


def _positive(table: Any, args: argparse.Namespace) -> Any:
    from ._cli_common import match_label

    return match_label(args.positive, sorted(set(table.target), key=str), "--positive") if args.positive else None


def _cmd_fit(args: argparse.Namespace) -> int:
    from .io import save
    from .table import read_table

    table = read_table(
        args.csv, target=args.target, features=column_list(args.features), weights=args.weights,
        drop_missing=args.drop_missing, **table_options(args, "categorical", "exclude"),
    )
    progress = Progress(args.quiet, "fit")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fit = _fit_table(table, args, progress)
    if any(f.name == "target" for f in dataclasses.fields(fit)):
        fit = dataclasses.replace(fit, target=args.target)  # so that a model file names its target column
    if args.save:
        save(fit, args.save)
    if args.save_pmml:
        from .pmml import write_pmml

        write_pmml(fit, args.save_pmml)
    converged = bool(fit.convergence.converged)
    if args.json:
        emit_json({"fit": fit.to_dict(), "warnings": [str(w.message) for w in caught],
                    "dropped_rows": table.dropped, "reference_levels": table.reference_levels})
    else:
        for w in caught:
            print(f"warning: {w.message}", file=sys.stderr)
        if table.dropped:
            print(f"{table.dropped} line(s) with missing values dropped", file=sys.stderr)
        print(fit.report())
        if table.reference_levels:
            refs = ", ".join(f"{k}={v}" for k, v in table.reference_levels.items())
            print(f"reference levels of text columns: {refs}")
        for path in (args.save, args.save_pmml):
            if path:
                print(f"model written to {path}")
        print(CAUTION)
    if not converged or any(issubclass(w.category, IterationLimitWarning) for w in caught):
        print("lintools: the fit did not converge; its numbers are not an optimum", file=sys.stderr)
        return 1
    return 0


def _cmd_folds(args: argparse.Namespace) -> int:
    from .splitting import stratified_folds
    from .table import read_table

    extra = [args.label] + ([args.groups] if args.groups else [])
    table = read_table(args.csv, target=None, features=[], extra=extra, **table_options(args))
    groups = table.extra[args.groups] if args.groups else None
    folds = stratified_folds(list(table.extra[args.label]), k=args.k, seed=args.seed, groups=groups)
    with open(args.csv, newline="", encoding="utf-8-sig") as fh:
        rows = list(csv.reader(fh))
    header = rows[0]
    if args.column in [h.strip() for h in header]:
        raise InputError(f"the file already has a column named '{args.column}'; pass another --column")
    by_line = dict(zip(table.lines.tolist(), folds.tolist()))
    with open(args.out, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(header + [args.column])
        for lineno, row in enumerate(rows[1:], start=2):
            if lineno in by_line:
                writer.writerow(row + [by_line[lineno]])
    counts = np.bincount(folds, minlength=args.k).tolist()
    if args.json:
        emit_json({"folds": args.k, "rows_per_fold": counts, "written": args.out})
    else:
        print(f"{len(folds)} rows in {args.k} folds (rows per fold: {counts}); written to {args.out}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="lintools", description="Fit and audit linear and logistic models.")
    sub = parser.add_subparsers(dest="command", required=True)

    def common(p: argparse.ArgumentParser) -> None:
        p.add_argument("--json", action="store_true", help="print one JSON document instead of text")
        p.add_argument("--quiet", action="store_true", help="no progress lines on standard error")
        if p.prog.split()[-1] != "demo":  # every other command reads a CSV file
            add_table_options(p)

    add_demo_parser(sub, common)

    fit = sub.add_parser("fit", help="fit a model to a CSV file and print the report")
    fit.add_argument("csv", help="CSV file with a header line")
    fit.add_argument("--target", required=True, help="the response column")
    fit.add_argument("--features", help="feature columns, comma-separated (default: all others)")
    fit.add_argument("--model", choices=["linear", "logistic", "softmax"], default="linear")
    fit.add_argument("--l2", type=float, default=0.0, help="ridge strength on the slopes (default 0)")
    fit.add_argument("--weights", help="column of case weights")
    fit.add_argument("--covariance", default="classical", help="linear model: classical, HC0, HC1, HC2 or HC3")
    fit.add_argument("--solver", default="newton", help="logistic and softmax: newton, lbfgs or gradient")
    fit.add_argument("--tol", type=float, default=1e-10,
                     help="logistic and softmax: stop when the max-abs (scale-free) gradient is below this (default 1e-10)")
    fit.add_argument("--max-iter", type=int, default=100,
                     help="logistic and softmax: iteration limit (default 100; the gradient solvers need more)")
    fit.add_argument("--drop-missing", action="store_true", help="drop lines with missing values instead of stopping")
    fit.add_argument("--positive", help="logistic: the label whose probability is modelled (default: the larger)")
    fit.add_argument("--save", help="write the fitted model to this JSON model file")
    fit.add_argument("--save-pmml", help="write the fitted model to this PMML 4.4 file")
    common(fit)
    fit.set_defaults(run=_cmd_fit)

    add_check_parser(sub, common)
    add_calibration_parser(sub, common)

    folds = sub.add_parser("folds", help="add a stratified fold-id column to a CSV file")
    folds.add_argument("csv", help="CSV file with a header line")
    folds.add_argument("--label", required=True, help="the class-label column to stratify on")
    folds.add_argument("--k", type=int, default=5, help="number of folds (default 5)")
    folds.add_argument("--seed", type=int, default=0)
    folds.add_argument("--groups", help="column of group labels; a group is never split")
    folds.add_argument("--column", default="fold", help="name of the new column (default 'fold')")
    folds.add_argument("--out", required=True, help="the CSV file to write")
    common(folds)
    folds.set_defaults(run=_cmd_folds)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: 2 on bad usage, 0 on --help
        return int(exc.code or 0)
    try:
        return args.run(args)
    except InputError as exc:
        print(f"lintools: bad input: {exc}", file=sys.stderr)
        return 2
    except LintoolsError as exc:
        print(f"lintools: {exc}", file=sys.stderr)
        return 1
    except OSError as exc:
        print(f"lintools: {exc}", file=sys.stderr)
        return 2
