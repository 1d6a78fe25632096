"""``lintools check``: a delivered model file against a refit on a CSV file.

The delivered file is a lintools JSON model file or a PMML 4.4 regression model; which
one is decided by the content (a JSON object starts with ``{``, XML with ``<``), never by
the file name.  The refit is the same kind of model (least squares, logistic, softmax)
with the delivered model's feature names as columns and its target column.  The verdict:

* the delivered coefficients **disagree** with the refit when the Wald test of "delivered
  = refit" rejects at ``--significance`` (default 0.05), or when ``--max-difference`` is
  given and the largest absolute difference in predicted probability (for least squares:
  in the predicted response) on the CSV rows exceeds it;
* otherwise they **agree** (exit 0); disagreement exits 1, bad input 2.

With ``--by COLUMN`` the refit and the comparison are repeated within each segment (each
value of that column), after the ones over all rows, and each segment gets its verdict.
The exit status follows all rows only: the segments are several more tests at the same
significance (with k segments the chance of at least one rejection by chance alone is
1 - (1 - significance)^k), and small segments have unstable refits.  A segment with fewer
than :data:`lintools.cli.common.SMALL_SEGMENT_ROWS` rows of its smallest class per
coefficient (least squares: rows per coefficient) is flagged as small (common practice:
ten events per variable); a segment whose refit or comparison cannot be done is listed
with the reason.  The ``--by`` column may not be the target, the weights or a column the
model uses (refused by name: within a segment it would be constant).
"""

from __future__ import annotations

import argparse
import dataclasses
import sys
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from .common import (
    Progress,
    add_fit_options,
    class_note,
    precision_words,
    emit_json,
    fit_keywords,
    fraction,
    implied_words,
    match_label,
    nonnegative,
    refuse_inapplicable,
    refuse_segment_column,
    segment_heading,
    segments,
    SMALL_SEGMENT_ROWS,
)
from .console import CAUTION, report_text
from ..models.kinds import KINDS
from ..support.errors import InputError, IterationLimitWarning, LintoolsError
from ..support.text import p_text

DEFAULT_SIGNIFICANCE = 0.05


@dataclass(frozen=True)
class Delivered:
    """What the check needs from a delivered model file, whatever its format."""

    kind: str
    names: tuple[str, ...]
    coefficients: np.ndarray
    intercept: Any  # None when the model has no intercept
    classes: tuple
    positive: Any
    target: str
    l2: float | None
    covariance_type: str | None
    file_format: str
    reference: Any = "first"  # softmax: the class pinned at zero (None: symmetric form)
    categorical_fields: tuple = ()  # the text columns behind indicator columns 'column=level'


def read_delivered(path: str) -> Delivered:
    """Read a lintools JSON model file or a PMML document, recognised by its first byte
    (see :func:`lintools.exchange.scoring.read_model`)."""
    from ..exchange.scoring import read_model

    m = read_model(path)
    if not hasattr(m, "source"):  # a fit record from a lintools JSON model file
        fit = m
        return Delivered(
            kind=fit.kind, names=tuple(fit.names), coefficients=np.asarray(fit.coefficients),
            intercept=fit.intercept if fit.with_intercept else None, classes=tuple(getattr(fit, "classes", ())),
            positive=getattr(fit, "positive_class", None), target=getattr(fit, "target", "y"), l2=float(fit.l2),
            covariance_type=getattr(fit, "covariance_type", None), file_format="lintools JSON model file",
            reference=getattr(fit, "reference_class", "first"), categorical_fields=tuple(fit.categorical_fields),
        )
    kind = KINDS[m.kind]
    reference: Any = "first"
    if kind.per_class:  # a class whose table is all zero was the reference class
        zero = [c for k, c in enumerate(m.classes)
                if not np.any(np.asarray(m.coefficients)[:, k]) and np.asarray(m.intercept)[k] == 0.0]
        reference = zero[0] if len(zero) == 1 else "first"
    return Delivered(
        kind=m.kind, names=tuple(m.names), coefficients=np.asarray(m.coefficients), intercept=m.intercept,
        classes=tuple(m.classes), positive=m.classes[0] if kind.classes == 2 else None, target=m.target,
        l2=None, covariance_type=None, file_format="PMML 4.4 RegressionModel", reference=reference,
        categorical_fields=tuple(m.categorical_fields),
    )


def _columns_for(names: tuple[str, ...], header: list[str], where: str) -> list[str]:
    """CSV columns behind the delivered names (``col=level`` names come from text column ``col``)."""
    cols: list[str] = []
    for name in names:
        col = name
        if name not in header and "=" in name and name.split("=", 1)[0] in header:
            col = name.split("=", 1)[0]
        if col not in header:
            raise InputError(
                f"the delivered model's feature '{name}' is not a column of {where!r} (its columns: "
                f"{', '.join(header)}); the refit needs every feature the model uses"
            )
        if col not in cols:
            cols.append(col)
    return cols


def read_refit_data(args: argparse.Namespace, d: Delivered, *, path: str | None = None, extra: Sequence[str] = (),
                    with_target: bool = True) -> tuple[Any, np.ndarray, str]:
    """Read the target and the delivered features; return (table, X in delivered order, target).

    ``path`` is the CSV file (default ``args.csv``); ``extra`` columns (and the ``--by``
    column) are read as text beside them (``table.extra``); ``with_target=False`` reads no
    target column (a sample without outcomes; the target name is still returned).
    """
    from .table_options import table_options
    from ..exchange.csv_table import read_header, read_table

    path = args.csv if path is None else path
    target = args.target or d.target
    wanted = target if with_target else None
    header = list(read_header(path, **table_options(args, "categorical", header=True)))
    by = list(dict.fromkeys(([args.by] if args.by else []) + list(extra)))
    if d.categorical_fields:  # the text columns are known: read them as the model does when it scores
        from ..exchange.scoring import model_inputs, read_inputs

        inputs = model_inputs(d.names, d.categorical_fields)
        _refuse_by(args, target, inputs.columns)
        absent = [c for c in inputs.columns if c not in header]
        if absent:
            raise InputError(f"the delivered model's input '{absent[0]}' is not a column of {path!r} (its "
                             f"columns: {', '.join(header)}); the refit needs every input the model uses")
        table, X = read_inputs(path, inputs, {**table_options(args, "categorical"), "written_decimals": with_target},
                               target=wanted,
                               weights=args.weights, extra=by, drop_missing=args.drop_missing)
        return table, X, target
    cols = _columns_for(d.names, header, path)
    _refuse_by(args, target, cols)
    kwargs = dict(target=wanted, features=cols, weights=args.weights, extra=by, drop_missing=args.drop_missing,
                  written_decimals=with_target, **table_options(args, "categorical"))
    table = read_table(path, **kwargs)
    if any(n not in d.names for n in table.names):  # a text column whose reference level differs from the delivered model's
        refs = {}
        for col, ref in table.reference_levels.items():
            levels = [ref] + [n.split("=", 1)[1] for n in table.names if n.startswith(col + "=")]
            absent = [lv for lv in levels if f"{col}={lv}" not in d.names]
            if len(absent) == 1:
                refs[col] = absent[0]
        table = read_table(path, **kwargs, reference_levels=refs)
    missing = [n for n in d.names if n not in table.names]
    extra = [n for n in table.names if n not in d.names]
    if missing or extra:
        raise InputError(
            f"the columns of {path!r} do not give the delivered features: "
            + (f"no column for {missing}" if missing else "")
            + ("; " if missing and extra else "")
            + (f"levels without a delivered coefficient {extra}" if extra else "")
            + "; the text columns must have the levels the delivered model was fitted on"
        )
    order = [table.names.index(n) for n in d.names]
    return table, table.X[:, order], target


def _refuse_by(args: argparse.Namespace, target: str, columns: Any) -> None:
    """Refuse a ``--by`` column that is the target, the weights or an input of the model."""
    refuse_segment_column(args.by, [(target, "the target column"), (args.weights, "the --weights column")]
                          + [(c, "a column the delivered model uses") for c in columns])


def _refit(d: Delivered, labels: list, weights: Any, X: np.ndarray, target: str, args: argparse.Namespace,
           progress: Progress, table: Any = None) -> Any:
    """The refit of the delivered kind of model on ``X`` and the target values ``labels``;
    its accuracy record at the decimals written in the file ``table`` was read from."""
    kind = KINDS[d.kind]
    l2 = args.l2 if args.l2 is not None else (d.l2 or 0.0)
    found = sorted(set(labels), key=str) if kind.classifier else []
    if not kind.classifier:
        if not all(isinstance(v, (int, float)) for v in labels):
            raise InputError(f"target column '{target}' holds text; a {kind.words} model needs numbers")
        y: Any = np.array(labels, dtype=float)
    elif kind.classes and len(found) != kind.classes:
        raise InputError(f"target column '{target}' has {len(found)} distinct labels; a {kind.words} model needs two")
    else:
        y = labels
    words = fit_keywords(
        kind, args, progress, covariance=args.covariance or d.covariance_type or "classical",
        positive=lambda: (match_label(args.positive, found, "--positive") if args.positive is not None
                          else _positive_in(d.positive, found)),
        reference=lambda: (d.reference if d.reference in ("first", None)
                           else match_label(str(d.reference), found, "the model's reference class")),
    )
    words.update(precision_words(kind, table, d.names, target))
    fit = kind.fit(X, y, weights=weights, intercept=d.intercept is not None, l2=l2, names=d.names, **words)
    return dataclasses.replace(fit, target=target)


def _positive_in(positive: Any, labels: list) -> Any:
    """The CSV label that stands for the delivered model's positive class."""
    for label in labels:
        if str(label) == str(positive):
            return label
    if isinstance(positive, (bool, np.bool_)) and set(labels) == {0, 1}:
        return int(positive)
    shown = ", ".join(repr(str(v)) for v in labels)
    raise InputError(
        f"the delivered model gives the probability of {str(positive)!r}, which is not a label of the "
        f"target column ({shown}); name the positive label with --positive"
    )


def _softmax_delivered(d: Delivered, fit: Any) -> tuple[np.ndarray, Any, str | None]:
    """Delivered softmax columns in the refit's class order.

    The comparison itself re-expresses them in the refit's parametrisation (reference
    column subtracted, or each term centred over the classes), which leaves the probabilities unchanged.
    """
    B = np.asarray(d.coefficients, dtype=float)
    b = None if d.intercept is None else np.asarray(d.intercept, dtype=float)
    order = []
    for c in fit.classes:
        hits = [k for k, dc in enumerate(d.classes) if str(dc) == str(c)]
        if len(hits) != 1:
            raise InputError(f"the delivered model has no class {str(c)!r} (its classes: {list(map(str, d.classes))})")
        order.append(hits[0])
    if len(d.classes) != len(fit.classes):
        raise InputError(f"the delivered model has {len(d.classes)} classes but the target column has "
                         f"{len(fit.classes)} ({', '.join(map(str, fit.classes))})")
    note = None
    ref = getattr(fit, "reference_class", None)
    if ref is not None and (np.any(B[:, order[fit.classes.index(ref)]]) or
                            (b is not None and b[order[fit.classes.index(ref)]] != 0.0)):
        note = (f"the delivered softmax coefficients are compared relative to the class {str(ref)!r} "
                "(its column subtracted from every column; the probabilities are unchanged)")
    return B[:, order], None if b is None else b[order], note


def _judge(d: Delivered, fit: Any, X: np.ndarray, labels: list, weights: Any, args: argparse.Namespace,
           warned: bool) -> dict:
    """The comparison of the delivered coefficients with ``fit`` on these rows and its
    verdict; ``warned``: an iteration-limit warning was raised by this refit."""
    from ..exchange.crosscheck import compare_coefficients

    kind = KINDS[d.kind]
    coef, intercept, note = d.coefficients, d.intercept, None
    if kind.per_class:
        coef, intercept, note = _softmax_delivered(d, fit)
    y = labels if kind.classifier else np.array(labels, dtype=float)
    cmp = compare_coefficients(fit, coef, intercept, X=X, y=y, weights=weights)
    reasons = []
    if cmp.wald_p_value < args.significance and cmp.all_within_data:
        extra = "every coefficient difference is within what the data determine at their precision, not a disagreement"
        note = extra if note is None else f"{note}; {extra}"
    elif cmp.wald_p_value < args.significance:
        reasons.append(f"the Wald test rejects 'delivered = refit' at significance {args.significance:g} "
                       f"(p-value {p_text(cmp.wald_p_value)})")
    gap = cmp.max_abs_prediction_difference
    if args.max_difference is not None and gap is not None and gap > args.max_difference:
        reasons.append(f"the largest difference in predicted {kind.predicts} ({gap:.3g}) exceeds --max-difference "
                       f"{args.max_difference:g}")
    converged = fit.convergence.converged and not warned
    return {"comparison": cmp, "note": note, "reasons": reasons, "converged": converged,
            "agree": not reasons and converged, "coef": coef, "intercept": intercept, "y": y}


def _iteration_warned(caught: list, since: int) -> bool:
    return any(issubclass(c, IterationLimitWarning) for c, _ in caught[since:])


@dataclass(frozen=True)
class CrossCheck:
    """The refit of a delivered model on all rows and its comparison with the delivered
    coefficients (shared by ``check`` and ``report``)."""

    fit: Any
    comparison: Any
    implied: Any
    implied_text: str | None
    note: str | None
    reasons: tuple[str, ...]
    converged: bool

    @property
    def agree(self) -> bool:
        return not self.reasons and self.converged


def cross_check(args: argparse.Namespace, d: Delivered, table: Any, X: np.ndarray, target: str) -> CrossCheck:
    """Refit ``d``'s kind of model on the table and compare: the Wald and score tests,
    prediction differences, the implied ridge strength, and the reasons to disagree at
    ``--significance`` and ``--max-difference``."""
    from ..exchange.crosscheck import implied_l2

    labels = list(table.target)
    caught = args.warnings_seen
    since = len(caught)
    fit = _refit(d, labels, table.weights, X, target, args, Progress(args.quiet, "refit"), table)
    chosen = "chosen with --positive" if args.positive is not None else "as in the model file; choose with --positive"
    note_words = class_note(fit, positive_hint=chosen, classes_hint="as in the model file")
    if note_words:
        args.console.note(note_words)
    whole = _judge(d, fit, X, labels, table.weights, args, _iteration_warned(caught, since))
    coef, intercept, y = whole["coef"], whole["intercept"], whole["y"]
    implied = None
    kind = KINDS[d.kind]
    if not kind.per_class and np.any(coef):  # a model of one output: its implied ridge strength
        yy = np.array([v == fit.positive_class for v in y]) if kind.classifier else y
        implied = implied_l2(X, yy, coef, intercept, model=d.kind, weights=table.weights)
    total = float(table.weights.sum()) if table.weights is not None else float(X.shape[0])
    implied_text = None if implied is None else implied_words(implied, total)
    return CrossCheck(fit, whole["comparison"], implied, implied_text, whole["note"], tuple(whole["reasons"]),
                      whole["converged"])


def run_check(args: argparse.Namespace) -> int:
    """The ``check`` subcommand."""
    d = read_delivered(args.model)
    refuse_inapplicable(args, d.kind, "the delivered model")
    table, X, target = read_refit_data(args, d)
    labels = list(table.target)
    caught = args.warnings_seen
    cc = cross_check(args, d, table, X, target)
    fit, cmp, implied, implied_text, note = cc.fit, cc.comparison, cc.implied, cc.implied_text, cc.note
    reasons, agree = list(cc.reasons), cc.agree
    blocks = _segment_blocks(d, fit, table, X, labels, target, args) if args.by else []

    if args.json:
        emit_json({
            "model": args.model, "format": d.file_format, "kind": d.kind, "target": target, "data": args.csv,
            "rows": int(X.shape[0]), "dropped_rows": table.dropped, "refit": fit.to_dict(),
            "comparison": cmp, "implied_l2": implied, "implied_l2_words": implied_text, "note": note,
            "tolerance": {"significance": args.significance, "max_difference": args.max_difference},
            "agree": agree, "reasons": reasons, "refit_converged": cc.converged,
            "by": args.by, "small_segment_rule": _small_rule(d) if args.by else None, "segments": blocks,
            "segments_disagreeing": [b["segment"] for b in blocks if b["agree"] is False],
            "warnings": [text for _, text in caught], "caution": CAUTION,
        })
    else:
        _print_text(args, d, fit, cmp, implied_text, note, reasons, target, X.shape[0], table.dropped)
        for block in blocks:
            _print_segment(args, d, block)
        if blocks:
            print(f"\nThe exit status follows all rows; {sum(b['agree'] is False for b in blocks)} of {len(blocks)} "
                  "segments disagree (each segment is one more test at the same significance)")
        args.console.caution()
    if not cc.converged:
        print("lintools: the refit did not converge; the comparison is not meaningful", file=sys.stderr)
        return 1
    return 0 if agree else 1


def _coefficients(d: Delivered) -> int:
    """Coefficients per class (per equation) of the delivered model, intercept included."""
    return len(d.names) + (d.intercept is not None)


def _small_rule(d: Delivered) -> str:
    unit = "rows of its smallest class per coefficient" if KINDS[d.kind].classifier else "rows per coefficient"
    return (f"fewer than {SMALL_SEGMENT_ROWS} {unit} ({_coefficients(d)} per equation; common practice: ten "
            "events per variable); its refit is unstable and its test has little power")


def _segment_blocks(d: Delivered, fit: Any, table: Any, X: np.ndarray, labels: list, target: str,
                    args: argparse.Namespace) -> list[dict]:
    """One block per segment of ``--by``: its refit, comparison and verdict, or the reason
    they could not be done; the small flag by :func:`_small_rule`."""
    blocks = []
    caught = args.warnings_seen
    for value, (rows,) in segments(table.extra[args.by]):
        seg_labels = [v for v, r in zip(labels, rows) if r]
        w = None if table.weights is None else table.weights[rows]
        if KINDS[d.kind].classifier:
            smallest = min(sum(1 for v in seg_labels if v == c) for c in fit.classes)
            size = smallest
        else:
            smallest = None
            size = len(seg_labels)
        block = {"segment": value, "rows": len(seg_labels), "smallest_class_rows": smallest,
                 "small": size < SMALL_SEGMENT_ROWS * _coefficients(d), "refit": None, "comparison": None,
                 "note": None, "reasons": [], "refit_converged": None, "agree": None, "problem": None}
        since = len(caught)
        try:
            seg_fit = _refit(d, seg_labels, w, X[rows], target, args, Progress(args.quiet, f"refit of {value}"),
                             table)
            judged = _judge(d, seg_fit, X[rows], seg_labels, w, args, _iteration_warned(caught, since))
        except (InputError, LintoolsError) as exc:  # e.g. one class only, separation, an aliased column
            block["problem"] = f"not compared: {exc}"
        else:
            block.update(refit=seg_fit.to_dict() if args.json else seg_fit, comparison=judged["comparison"],
                         note=judged["note"], reasons=judged["reasons"], refit_converged=judged["converged"],
                         agree=judged["agree"])
        blocks.append(block)
    return blocks


def _print_segment(args: argparse.Namespace, d: Delivered, block: dict) -> None:
    """A segment's block of the text report."""
    counts = f"{block['rows']} rows" + ("" if block["smallest_class_rows"] is None
                                        else f", {block['smallest_class_rows']} in its smallest class")
    print("\n" + segment_heading(args.by, block["segment"], counts, _small_rule(d) if block["small"] else None))
    if block["problem"]:
        print(f"  {block['problem']}")
        return
    print("Delivered minus the refit on this segment")
    print(block["comparison"].report())
    if block["note"]:
        print(f"Note: {block['note']}")
    if not block["refit_converged"]:
        print("Verdict on this segment: NOT MEANINGFUL: its refit did not converge")
    elif block["reasons"]:
        print("Verdict on this segment: DISAGREE: " + "; ".join(block["reasons"]))
    else:
        print("Verdict on this segment: AGREE within the tolerance")


def _print_text(args, d, fit, cmp, implied_text, note, reasons, target, n, dropped) -> None:
    print(f"Check of {args.model} ({d.file_format}, {d.kind} model of '{target}')")
    print(f"against a refit on {args.csv} ({n} rows{f', {dropped} dropped for missing values' if dropped else ''})\n")
    print("Refit")
    print(report_text(fit))
    print("Delivered minus refit (differences also in refit standard errors)")
    print(cmp.report())
    if note:
        print(f"Note: {note}")
    if implied_text is not None:
        print(implied_text)
    tol = f"significance {args.significance:g} for the Wald test"
    if args.max_difference is not None:
        tol += f"; largest prediction difference {args.max_difference:g}"
    print(f"\nTolerance: {tol}")
    if reasons:
        print("Verdict: DISAGREE: " + "; ".join(reasons))
    else:
        print("Verdict: AGREE within the tolerance")


def add_check_parser(sub: Any, common: Any) -> None:
    """Register the ``check`` subcommand."""
    p = sub.add_parser(
        "check",
        help="check a delivered model file (lintools JSON or PMML) against a refit on a CSV file",
        description=(
            "Refit the delivered model's kind of model on the CSV file (its feature names as columns, its "
            "target column), and compare: per-coefficient differences in standard errors, the Wald test of "
            "'delivered = refit', the score test at the delivered coefficients, and prediction differences. "
            "Exit 0 when they agree, 1 when they disagree (the Wald test rejects at --significance, or the "
            "largest prediction difference exceeds --max-difference) or the refit does not converge, "
            "2 for bad input."
        ),
    )
    p.add_argument("model", help="the delivered model file: lintools JSON or PMML 4.4 (recognised by content)")
    p.add_argument("csv", help="CSV file with a header line: the development data")
    p.add_argument("--target", help="the response column (default: the target named in the model file)")
    p.add_argument("--weights", help="column of case weights")
    p.add_argument("--l2", type=nonnegative, help="ridge strength of the refit (default: the model file's, else 0)")
    add_fit_options(p, "the label whose probability the model gives (default: from the file)")
    p.add_argument("--significance", type=fraction, default=DEFAULT_SIGNIFICANCE,
                   help="disagree when the Wald test's p-value is below this (default 0.05)")
    p.add_argument("--max-difference", type=nonnegative, default=None,
                   help="also disagree when the largest absolute difference in predicted probability "
                        "(least squares: predicted response) on the CSV rows exceeds this (default: not used)")
    p.add_argument("--by", metavar="COLUMN",
                   help="also refit and compare within each segment (each value of this column); the exit status "
                        "follows all rows, segment verdicts are printed; small segments are flagged")
    p.add_argument("--drop-missing", action="store_true", help="drop lines with missing values instead of stopping")
    common(p)
    p.set_defaults(run=run_check)
