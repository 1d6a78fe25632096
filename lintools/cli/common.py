"""Pieces shared by the command-line subcommands (see :mod:`lintools.cli`).

Nothing here is public API: strict-JSON output, the progress callback for long fits, the
readers of numeric option values, the check of output paths, and small readers for
command-line values.
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import math
import os
import re
import sys
import time
from typing import Any, Callable, Iterable, Sequence

import numpy as np

from ..models.accuracy import Precision
from ..models.kinds import KINDS, ModelKind
from ..support.errors import InputError
from ..support.files import check_outputs

#: Seeds are whole numbers from 0 to this (they fit a signed 64-bit integer).
MAX_SEED = 2**63 - 1

_WHOLE = re.compile(r"[+-]?[0-9]+")
_DECIMAL = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")

#: A fit must have run this many seconds before its progress lines appear.
PROGRESS_DELAY = 1.0


def clean(value: Any) -> Any:
    """Make a value strict-JSON: arrays to lists, records to dicts, non-finite floats to None."""
    if isinstance(value, dict):
        return {str(k): clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [clean(v) for v in value]
    if isinstance(value, np.ndarray):
        return clean(value.tolist())
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (np.floating, float)):
        v = float(value)
        return v if math.isfinite(v) else None
    if isinstance(value, np.integer):
        return int(value)
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        if hasattr(value, "to_dict"):
            return clean(value.to_dict())
        return {f.name: clean(getattr(value, f.name)) for f in dataclasses.fields(value)}
    return value


def emit_json(doc: dict) -> None:
    """Print ``doc`` as one strict JSON document on standard output."""
    print(json.dumps(clean(doc), allow_nan=False, indent=1))


class Progress:
    """``on_iteration`` callback: prints to standard error once a fit has run for a second.

    Parameters
    ----------
    quiet : bool
        Print nothing (the ``--quiet`` option).
    label : str
        Names the fit in each line.
    clock : callable, optional
        Returns the time in seconds (default :func:`time.perf_counter`); tests pass a
        fake clock.
    stream : file-like, optional
        Where the lines go (default standard error, looked up at print time).
    """

    def __init__(self, quiet: bool, label: str = "fit", clock: Callable[[], float] | None = None,
                 stream: Any = None) -> None:
        self.quiet = quiet
        self.label = label
        self.clock = clock or time.perf_counter
        self.stream = stream
        self.start = self.clock()
        self.printed = 0

    def __call__(self, record: Any) -> None:
        if self.quiet:
            return
        elapsed = self.clock() - self.start
        if elapsed < PROGRESS_DELAY:
            return
        print(
            f"  {self.label}: iteration {record.iteration}, {elapsed:.1f} s: objective "
            f"{record.objective:.12g}, max |gradient| per unit weight {record.gradient_norm:.3g}",
            file=self.stream or sys.stderr,
            flush=True,
        )
        self.printed += 1


def column_list(text: str | None, option: str = "--features") -> list[str] | None:
    """Split a comma-separated list of column names (None stays None)."""
    if text is None:
        return None
    names = [t.strip() for t in text.split(",") if t.strip()]
    if not names:
        raise InputError(f"{option} is empty; pass column names separated by commas")
    return names


def match_label(text: str, labels: Sequence[Any], option: str) -> Any:
    """The label among ``labels`` whose text form is ``text`` (a command-line value)."""
    for label in labels:
        if str(label) == text:
            return label
    shown = ", ".join(repr(str(v)) for v in labels)
    raise InputError(f"{option} {text!r} is not one of the labels in the file ({shown}); pass one of them")


def probabilities_in_range(values: np.ndarray, lines: Sequence[int], column: str, where: str) -> np.ndarray:
    """``values`` (a numeric column read by :func:`lintools.read_table`), checked to be
    probabilities in [0, 1]; the message names the line of the first that is not."""
    bad = np.flatnonzero(~((values >= 0.0) & (values <= 1.0)))
    if bad.size:
        i = int(bad[0])
        raise InputError(f"{where!r} line {int(lines[i])}, column '{column}': {float(values[i])!r} is not a probability in [0, 1]")
    return values


def implied_words(implied: Any, total_weight: float) -> str:
    """One paragraph on an :class:`lintools.ImpliedPenalty` of delivered slopes.

    When the gradient of the unpenalised loss at the delivered slopes is below
    ``1e-8 * max(1, total weight)`` they already solve the unpenalised equations and no
    penalty is implied (the least-squares l2 is then rounding noise).
    """
    if implied.gradient_norm <= 1e-8 * max(1.0, float(total_weight)):
        return (f"Implied ridge strength: none; the delivered slopes solve the unpenalised equations on these "
                f"data (gradient norm {implied.gradient_norm:.3g}).")
    if implied.residual > 0.1 or implied.l2 <= 0.0:
        why = "is negative, which is no penalty" if implied.l2 <= 0.0 else "leaves a large residual"
        return (f"Implied ridge strength: no ridge penalty explains the delivered slopes; the best-fitting l2 "
                f"({implied.l2:.4g}) {why} (relative residual {implied.residual:.3g} in the penalised optimality "
                "condition), so they are not a shrunken version of the refit: they come from other data or "
                "another model.")
    return (f"Implied ridge strength: l2 {implied.l2:.6g} (relative residual {implied.residual:.3g}): the delivered "
            "slopes are close to a ridge optimum with that penalty; refit with --l2 to compare like with like.")


def _decimal(text: str, want: str) -> float:
    """A command-line number: ASCII digits, one decimal point, optional exponent; finite."""
    if not _DECIMAL.fullmatch(text.strip()):
        raise argparse.ArgumentTypeError(f"{text!r} is not a number; pass {want}")
    value = float(text)
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"{text!r} is too large; pass {want}")
    return value


def nonnegative(text: str) -> float:
    """Option type: a finite number >= 0."""
    value = _decimal(text, "a number >= 0")
    if value < 0:
        raise argparse.ArgumentTypeError(f"{text} is negative; pass a number >= 0")
    return value


def positive_number(text: str) -> float:
    """Option type: a finite number > 0."""
    value = _decimal(text, "a number > 0")
    if not value > 0:
        raise argparse.ArgumentTypeError(f"{text} is not above 0; pass a number > 0")
    return value


def fraction(text: str) -> float:
    """Option type: a number strictly between 0 and 1."""
    value = _decimal(text, "a number strictly between 0 and 1")
    if not 0.0 < value < 1.0:
        raise argparse.ArgumentTypeError(f"{text} is not strictly between 0 and 1; pass such a number")
    return value


def whole(low: int, high: int | None = None) -> Callable[[str], int]:
    """Option type: a whole number (ASCII digits) from ``low`` to ``high`` (no limit: None)."""
    span = f"from {low} to {high}" if high is not None else f">= {low}"

    def parse(text: str) -> int:
        digits = text.strip()
        if not _WHOLE.fullmatch(digits):
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number; pass a whole number {span}")
        too_long = len(digits.lstrip("+-").lstrip("0")) > 30  # beyond any limit; int() of it is slow
        value = 0 if too_long else int(digits)
        if too_long or value < low or (high is not None and value > high):
            raise argparse.ArgumentTypeError(f"{digits} is out of range; pass a whole number {span}")
        return value

    return parse


def check_output_paths(inputs: Iterable[tuple[str, Any]], outputs: Iterable[tuple[str, Any]], replace: bool) -> None:
    """Before any work is done: refuse an output that is an input or another output
    (:func:`lintools.support.files.check_outputs`), an existing output without ``--replace``, a
    folder given as an output file, and an output in a folder that does not exist.
    ``inputs`` and ``outputs`` are ``(option or argument, path)`` pairs; None paths are skipped."""
    outputs = list(outputs)
    check_outputs(inputs, outputs)
    for what, path in outputs:
        if path is None:
            continue
        if os.path.isdir(path):
            raise InputError(f"{what} {path!r} is a folder; pass the path of a file")
        if os.path.lexists(path) and not replace:
            raise InputError(f"{what} {path!r} exists; choose a new path or pass --replace to replace it")
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder):
            raise InputError(f"{what} {path!r} cannot be written: the folder {folder!r} does not exist")


#: Options of ``fit`` and ``check`` that apply to some kinds of model only (argparse
#: dest -> the kinds they apply to, from the kinds' ``options`` in the registry).
ONLY_FOR = {dest: tuple(k.name for k in KINDS.values() if dest in k.options)
            for dest in dict.fromkeys(d for k in KINDS.values() for d in k.options)}
COVARIANCES = ("classical", "HC0", "HC1", "HC2", "HC3")
SOLVERS = ("newton", "lbfgs", "gradient")


def add_fit_options(p: argparse.ArgumentParser, positive_help: str) -> None:
    """The fit settings that ``fit`` and ``check`` share; each applies to some kinds of model
    only (:data:`ONLY_FOR`), and is None (or False) when not given."""
    p.add_argument("--covariance", choices=COVARIANCES,
                   help="least squares: classical, HC0, HC1, HC2 or HC3 (default: fit classical, check the file's)")
    p.add_argument("--minimum-norm", action="store_true",
                   help="least squares: with aliased (linearly dependent) columns, the minimum-norm solution "
                        "instead of an error")
    p.add_argument("--weight-type", choices=("case", "precision"),
                   help="least squares: --weights are case weights (default; a weight of 2 is two copies of the "
                        "row) or precision weights (relative; only their ratios matter)")
    p.add_argument("--solver", choices=SOLVERS, help="logistic and softmax: newton (default), lbfgs or gradient")
    from ..models.driver import DEFAULT_TOL

    p.add_argument("--tol", type=positive_number,
                   help="logistic and softmax: stop when the max-abs gradient per unit case weight (intercept "
                        f"and standardised, centred columns) is at most this (default {DEFAULT_TOL:g})")
    p.add_argument("--max-iter", type=whole(1),
                   help="logistic and softmax: iteration limit (default 100; the gradient solvers need more)")
    p.add_argument("--firth", action="store_true",
                   help="logistic: Firth's bias-reduced estimates (finite under separation; not with --l2)")
    p.add_argument("--positive", help=f"logistic: {positive_help}")


def fit_options(args: argparse.Namespace) -> dict:
    """The solver settings given on the command line (the library's defaults stand for the others)."""
    given = {"solver": args.solver, "tol": args.tol, "max_iter": args.max_iter}
    return {k: v for k, v in given.items() if v is not None}


def refuse_inapplicable(args: argparse.Namespace, kind: str, where: str) -> None:
    """Refuse an option of :data:`ONLY_FOR` that was given but does not apply to ``kind``."""
    for dest, kinds in ONLY_FOR.items():
        value = getattr(args, dest, None)
        if value is not None and value is not False and kind not in kinds:
            applies = " and ".join(KINDS[k].words for k in kinds)
            raise InputError(f"--{dest.replace('_', '-')} does not apply to {where} (a {KINDS[kind].words} model); "
                             f"it applies to {applies} models only: leave it out")


def fit_keywords(kind: ModelKind, args: argparse.Namespace, progress: Any, *, covariance: str,
                 positive: Callable[[], Any], reference: Callable[[], Any]) -> dict:
    """The keyword arguments of ``kind.fit`` that come from the options applying to ``kind``
    (its ``options``); ``positive`` and ``reference`` give the class choices and are called
    (they may refuse) only for a kind that has them."""
    options = kind.options
    words: dict[str, Any] = {}
    if "covariance" in options:
        words["covariance"] = covariance
    if "minimum_norm" in options:
        words["rank_deficient"] = "minimum_norm" if args.minimum_norm else "raise"
    if "weight_type" in options:
        words["weight_type"] = args.weight_type or "case"
    if "solver" in options:
        words.update(on_iteration=progress, **fit_options(args))
    if "firth" in options:
        words["firth"] = args.firth
    if "positive" in options:
        words["positive"] = positive()
    if "reference" in options:
        words["reference"] = reference()
    return words


def precision_words(kind: ModelKind, table: Any, names: Sequence[str], target: str) -> dict:
    """``{"data_precision": ...}`` for a fit of ``kind`` on the columns ``names`` of a table read
    with its written decimals: each numeric column at half a unit of its least precise written
    decimal, indicator columns exact, and the target's rounding for a model of a response;
    empty when the table has no decimals (every kind's fit takes ``data_precision``)."""
    dec = getattr(table, "written_decimals", None)
    if dec is None:
        return {}
    y = None if kind.classifier else dec.get(target)
    return {"data_precision": Precision.written([dec.get(n) for n in names], y,
                                                f"the decimals written in {table.source}")}


def class_note(fit: Any, *, positive_hint: str, classes_hint: str) -> str | None:
    """Which class a fitted classifier models, in words, followed by how to choose it:
    ``positive_hint`` for a model of one class's probability, ``classes_hint`` for one of
    every class's; None for a model of a response."""
    kind = KINDS[fit.kind]
    if not kind.classifier:
        return None
    if kind.per_class:
        quoted = ", ".join(f"'{c!s}'" for c in fit.classes)
        ref = (f"the coefficients of class '{fit.reference_class!s}' are pinned at zero"
               if fit.reference_class is not None else "symmetric form, each term's class values summing to zero")
        return f"modelling the probabilities of classes {quoted}; {ref} ({classes_hint})"
    other = [c for c in fit.classes if c != fit.positive_class]
    against = f" against '{other[0]!s}'" if other else ""
    return f"modelling the probability of class '{fit.positive_class!s}'{against} ({positive_hint})"


#: A segment of ``--by`` with fewer rows than this per unit of its command's rule (a bin of
#: ``stability``, a class of ``calibration``, a coefficient of ``check``) is flagged as small.
#: Common practice: ten events per variable (Peduzzi et al. 1996, J. Clin. Epidemiol.
#: 49:1373-1379), and ten rows per bin for a population stability index.
SMALL_SEGMENT_ROWS = 10


def segments(*columns: Sequence[Any]) -> list[tuple[Any, tuple[np.ndarray, ...]]]:
    """The segments of ``--by``: every value met in any of ``columns`` (one per file), in
    sorted order, each with one boolean row mask per column; no value is dropped."""
    cols = [np.asarray(c, dtype=object) for c in columns]
    values = sorted(set().union(*(c.tolist() for c in cols)))
    return [(value, tuple(c == value for c in cols)) for value in values]


def segment_heading(by: str, value: Any, counts: str, small: str | None) -> str:
    """The first line of a segment's block: its column and value, its rows, and the flag
    of a small segment (``small`` says why; None when it is not small)."""
    return f"Segment {by} = {value}: {counts}" + (f"  SMALL: {small}" if small else "")


def refuse_segment_column(by: str | None, roles: Iterable[tuple[str | None, str]]) -> None:
    """Refuse a ``--by`` column that already has a role (``(column, role words)`` pairs)."""
    for name, role in roles:
        if by is not None and by == name:
            raise InputError(f"--by column '{by}' is also {role}; name another column to segment by")
