"""The command line: ``lintools <command>`` or ``python -m lintools <command>``.

Commands
--------
demo         run the whole job on the built-in inspection-station demo; writes a report folder
fit          fit a model to a CSV file, print the report, optionally write the model file
check        check a delivered model file (lintools JSON or PMML) against a refit on a CSV file
calibration  calibration report of a probability column; a reliability diagram with ``--plot``
folds        write a CSV file with a stratified fold-id column added
score        apply a model file (lintools JSON or PMML) to a CSV file and write the scores
stability    population stability index of a recent CSV file against a development one
selfcheck    qualify this installation: digits achieved on exact and certified cases
report       the sign-off document of a delivered logistic model: one HTML page and its JSON twin

Exit codes: 0 success, 1 a check failed (or a fit did not converge), 2 bad input.
Standard output carries only the requested output: the report, or with ``--json`` one
machine-readable JSON document (non-finite numbers become ``null``).  Standard error
carries errors, and, unless ``--quiet``, warnings (one line each, ``lintools: warning:``),
notes (which class is modelled, dropped lines, files written), progress lines of fits
that take longer than a second, and the caution paragraph.

Nothing is lost: no output may be an input of the same command or another of its
outputs, an existing output file is replaced only with ``--replace`` (checked before any
work is done), and every file is written to a temporary file and renamed into place.
An option that does not apply to the chosen model is refused.  Messages from the library
name the options, not its Python arguments (:mod:`lintools.cli.console`).

The subcommands live in this folder, one module each (``check``, ``calibration``,
``demo_command``, ``folds``, ``score``, ``stability``, ``selfcheck``, ``report_command``); shared pieces in
``common`` and
``console``.
"""

from __future__ import annotations

import argparse
import dataclasses
import functools
import sys
from typing import Any

import numpy as np

from .calibration import add_calibration_parser
from .check import add_check_parser
from .common import (
    Progress,
    add_fit_options,
    check_output_paths,
    class_note,
    precision_words,
    column_list,
    emit_json,
    fit_keywords,
    match_label,
    nonnegative,
    refuse_inapplicable,
)
from .console import CAUTION, Console, QuietPipe, report_text, translate, warnings_to_stderr
from .demo_command import add_demo_parser
from .folds import add_folds_parser
from .report_command import add_report_parser
from .score import add_score_parser
from .selfcheck import add_selfcheck_parser
from .stability import add_stability_parser
from .table_options import add_table_options, table_options
from ..models.kinds import KINDS
from ..support.errors import InputError, IterationLimitWarning, LintoolsError

__all__ = ["CAUTION", "build_parser", "main"]

#: ``--model`` values and the kinds of model they fit.
MODELS = {k.command: k.name for k in KINDS.values()}


def _fit_table(table: Any, args: argparse.Namespace, progress: Progress) -> Any:
    kind = KINDS[MODELS[args.model]]
    if kind.classifier:
        y: Any = list(table.target)
    elif not all(isinstance(v, (int, float)) for v in table.target):
        raise InputError(f"target column '{args.target}' holds text; a {args.model} model needs numbers")
    else:
        y = np.array(table.target, dtype=float)
    def labels() -> list:
        return sorted(set(table.target), key=str)

    words = fit_keywords(
        kind, args, progress, covariance=args.covariance or "classical",
        positive=lambda: match_label(args.positive, labels(), "--positive") if args.positive is not None else None,
        reference=lambda: _reference(args, labels()),
    )
    words.update(precision_words(kind, table, table.names, args.target))
    return kind.fit(table.X, y, weights=table.weights, intercept=not args.no_intercept, l2=args.l2,
                    names=table.names, **words)


def _reference(args: argparse.Namespace, labels: list) -> Any:
    """The ``reference`` argument of the softmax fit from ``--reference`` and ``--symmetric``."""
    if args.symmetric:
        return None
    if args.reference is None or (args.reference == "first" and "first" not in map(str, labels)):
        return "first"
    return match_label(args.reference, labels, "--reference")


def _cmd_fit(args: argparse.Namespace) -> int:
    from ..exchange.model_files import save
    from ..exchange.pmml import write_pmml
    from ..exchange.csv_table import read_table

    console: Console = args.console
    refuse_inapplicable(args, MODELS[args.model], f"--model {args.model}")
    if args.symmetric and args.reference is not None:
        raise InputError("--reference and --symmetric exclude each other (--symmetric pins no class); pass one")
    check_output_paths([("CSV file", args.csv)], [("--save", args.save), ("--save-pmml", args.save_pmml)],
                       args.replace)
    table = read_table(
        args.csv, target=args.target, features=column_list(args.features), weights=args.weights,
        drop_missing=args.drop_missing, written_decimals=True, **table_options(args, "categorical", "exclude"),
    )
    fit = _fit_table(table, args, Progress(args.quiet, "fit"))
    if any(f.name == "target" for f in dataclasses.fields(fit)):
        fit = dataclasses.replace(fit, target=args.target)  # so that a model file names its target column
    if table.reference_levels:  # so that model files name the text columns behind the indicator columns
        from ..support.categories import with_references

        fit = with_references(fit, table.reference_levels, "fit")
    note = class_note(fit, positive_hint="choose with --positive",
                      classes_hint="choose with --reference, or --symmetric with --l2")
    if note:
        console.note(note)
    if table.dropped:
        console.note(f"{table.dropped} line(s) with missing values dropped")
    if args.save:
        save(fit, args.save, replace=args.replace)
        console.note(f"model written to {args.save}")
    if args.save_pmml:
        write_pmml(fit, args.save_pmml, replace=args.replace)
        console.note(f"model written to {args.save_pmml}")
    shared = _collinearity(table, args) if args.collinearity else None
    seen = args.warnings_seen
    if args.json:
        emit_json({"fit": fit.to_dict(), "warnings": [text for _, text in seen],
                   "dropped_rows": table.dropped, "reference_levels": table.reference_levels,
                   **({"collinearity": shared} if args.collinearity else {})})
    else:
        print(report_text(fit))
        if args.collinearity:
            print(shared if isinstance(shared, str) else shared.report())
        if table.reference_levels:
            refs = ", ".join(f"{k}={v}" for k, v in table.reference_levels.items())
            print(f"reference levels of text columns: {refs}")
        console.caution()
    if not fit.convergence.converged or any(issubclass(c, IterationLimitWarning) for c, _ in seen):
        print("lintools: the fit did not converge; its numbers are not an optimum", file=sys.stderr)
        return 1
    return 0


def _collinearity(table: Any, args: argparse.Namespace) -> Any:
    """``fit --collinearity``: the design's collinearity record, or why it is not defined."""
    from ..metrics.collinearity import collinearity

    try:
        return collinearity(table.X, weights=table.weights, names=table.names, intercept=not args.no_intercept)
    except InputError as exc:
        return f"collinearity not computed: {exc}"


def _version() -> str:
    from ..support.version import __version__

    return f"lintools {__version__}"


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the command line (every subcommand)."""
    parser = argparse.ArgumentParser(prog="lintools", description="Fit and audit linear and logistic models.",
                                     allow_abbrev=False)
    parser.add_argument("--version", action="version", version=_version())
    # options are spelt out in full: an abbreviation never stands for --replace or another option
    sub = parser.add_subparsers(dest="command", required=True,
                                parser_class=functools.partial(argparse.ArgumentParser, allow_abbrev=False))

    def common(p: argparse.ArgumentParser) -> None:
        p.add_argument("--json", action="store_true", help="print one JSON document instead of text")
        p.add_argument("--quiet", action="store_true",
                       help="nothing on standard error but errors: no notes, warnings, progress or caution")
        if p.prog.split()[-1] not in ("demo", "selfcheck"):  # every other command reads a CSV file
            add_table_options(p)

    add_demo_parser(sub, common)

    fit = sub.add_parser("fit", help="fit a model to a CSV file and print the report")
    fit.add_argument("csv", help="CSV file with a header line")
    fit.add_argument("--target", required=True, help="the response column")
    fit.add_argument("--features", help="feature columns, comma-separated (default: all others)")
    fit.add_argument("--model", choices=list(MODELS), default="linear")
    fit.add_argument("--l2", type=nonnegative, default=0.0, help="ridge strength on the slopes (default 0)")
    fit.add_argument("--weights", help="column of case weights")
    fit.add_argument("--no-intercept", action="store_true", help="fit without an intercept")
    fit.add_argument("--drop-missing", action="store_true", help="drop lines with missing values instead of stopping")
    add_fit_options(fit, "the label whose probability is modelled (default: the larger of the two)")
    fit.add_argument("--reference",
                     help="softmax: the class whose coefficients are pinned at zero (default: first, the smallest)")
    fit.add_argument("--symmetric", action="store_true",
                     help="softmax: no class pinned at zero, each term's class values summing to zero (needs --l2 above 0)")
    fit.add_argument("--save", metavar="JSON", help="write the fitted model to this JSON model file")
    fit.add_argument("--save-pmml", metavar="PMML", help="write the fitted model to this PMML 4.4 file")
    fit.add_argument("--replace", action="store_true", help="replace existing --save and --save-pmml files")
    fit.add_argument("--collinearity", action="store_true",
                     help="also print variance inflation factors and condition indices of the design")
    common(fit)
    fit.set_defaults(run=_cmd_fit)

    add_check_parser(sub, common)
    add_calibration_parser(sub, common)
    add_folds_parser(sub, common)
    add_score_parser(sub, common)
    add_stability_parser(sub, common)
    add_selfcheck_parser(sub, common)
    add_report_parser(sub, common)
    return parser


def _run(args: argparse.Namespace) -> int:
    from ..support.threads import env_threads

    args.console = Console(args.quiet)
    try:
        env_threads()  # a bad LINTOOLS_THREADS is bad input before any work
        with warnings_to_stderr(args.console) as seen:
            args.warnings_seen = seen
            return args.run(args)
    except InputError as exc:
        print(f"lintools: bad input: {translate(str(exc))}", file=sys.stderr)
        return 2
    except LintoolsError as exc:
        print(f"lintools: {translate(str(exc))}", file=sys.stderr)
        return 1
    except OSError as exc:
        print(f"lintools: {exc}", file=sys.stderr)
        return 2
    except MemoryError:
        print("lintools: out of memory: the data are too large for this machine", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("lintools: interrupted", file=sys.stderr)
        return 130


def main(argv: list[str] | None = None) -> int:
    """Run the command line with ``argv`` (default: ``sys.argv[1:]``); return the exit code."""
    saved = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = out, err = QuietPipe(sys.stdout), QuietPipe(sys.stderr)
    try:
        try:
            args = build_parser().parse_args(argv)
        except SystemExit as exc:  # argparse: 2 on bad usage, 0 on --help and --version
            return int(exc.code or 0)
        args.argv = list(sys.argv[1:] if argv is None else argv)  # the command as given, for the audit
        return _run(args)
    finally:
        out.flush()
        err.flush()
        sys.stdout, sys.stderr = saved
