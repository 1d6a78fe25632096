"""``lintools report MODEL DATA --out REPORT.html``: the sign-off document of a delivered model.

One command runs the whole judgement of a delivered model (a lintools JSON model file or
a PMML 4.4 regression model) on the development data.  For every kind of model:

* the refit and the cross-check of the delivered coefficients (as ``lintools check``),
  with the delivered coefficients drawn against the refit's intervals;
* with ``--recent CSV``: population stability of every input and of the delivered
  scores; when the recent file has the target column, the judgement below repeated on
  it, out of time (without it, the page says that the outcomes are not known);
* with ``--by COLUMN``: the main figures per segment, small segments flagged;
* the refit's convergence record and an audit block (SHA-256 of every input file, rows
  read and used, versions and platform, every option, the time of writing, the verdicts,
  the caution).

The judgement of the delivered scores depends on the kind:

* binary logistic: calibration of the probability (as ``lintools calibration``),
  discrimination (ROC area with the accuracy ratio, Kolmogorov-Smirnov, gains) and band
  tests (``--bands N|COLUMN``, default 10 quantile bands);
* least squares: the residuals of the delivered prediction (summary, the line of observed
  on predicted with the mean residual, mean observed against mean predicted in ``--bins``
  bins of the prediction with Student-t intervals);
* softmax: per class (against all others) reliability, calibration line and ROC area;
  over the classes log-loss, Brier score and the table of observed against predicted
  classes.

It writes one self-contained HTML page (``--out``; figures as inline SVG, no script, no
external resource, a print stylesheet) and its JSON twin with every number (``--twin``,
default: ``--out`` with the suffix ``.json``).  Neither may be an input or an existing
file (unless ``--replace``); both are checked before any work and written atomically.
Exit status as ``check``: 0 when the delivered coefficients agree with a converged
refit, 1 when they disagree or the refit did not converge (the document is written
either way), 2 for bad input.
"""

from __future__ import annotations

import argparse
import json
import os
import shlex
from typing import Any

import numpy as np

from .common import add_fit_options, check_output_paths, clean, emit_json, fraction, nonnegative, refuse_inapplicable, whole
from .console import CAUTION
from ..models.kinds import KINDS
from ..support.errors import InputError

def twin_path(out: str) -> str:
    """The default JSON twin of an HTML path: the same name with the suffix ``.json``."""
    stem, ext = os.path.splitext(out)
    return (stem if ext.lower() in (".html", ".htm", ".xhtml") else out) + ".json"


def _options(args: argparse.Namespace) -> dict[str, Any]:
    hidden = {"run", "console", "warnings_seen", "command", "argv"}
    return {f"--{k.replace('_', '-')}" if k not in ("model", "csv") else k: v
            for k, v in sorted(vars(args).items()) if k not in hidden}


def _kind_parts(args: argparse.Namespace, d: Any, table: Any, X: np.ndarray, target: str, cc: Any, recent: Any,
                charts: dict) -> dict[str, Any]:
    """The part of the document of the delivered kind of model: a response (least
    squares), one probability (binary logistic) or one per class (softmax)."""
    from .report_binary import binary_parts
    from .report_classes import class_parts
    from .report_linear import linear_parts

    kind = KINDS[d.kind]
    parts = linear_parts if not kind.classifier else class_parts if kind.per_class else binary_parts
    return parts(args, d, table, X, target, cc, recent, charts)


def _refuse_binary_options(args: argparse.Namespace, d: Any) -> None:
    if KINDS[d.kind].classes != 2 and args.bands is not None:
        raise InputError(f"--bands does not apply to a {KINDS[d.kind].words} model (band tests judge the "
                         "probabilities of a binary logistic model): leave it out")


def write_report(args: argparse.Namespace) -> dict[str, Any]:
    """Compute the document's numbers, write the HTML page and its JSON twin, and return
    the twin (as written) for the caller's summary."""
    from .check import cross_check, read_delivered, read_refit_data
    from .report_parts import coefficient_interval, read_recent
    from ..document import charts as ch
    from ..document.audit import file_digest, versions, written_at
    from ..document.sections import render_page
    from ..exchange.model_files import MAX_BYTES as MODEL_BYTES
    from ..support.files import write_atomic

    twin = args.twin or twin_path(args.out)
    check_output_paths([("model file", args.model), ("CSV file", args.csv), ("--recent", args.recent)],
                       [("--out", args.out), ("--twin", twin)], args.replace)
    d = read_delivered(args.model)
    refuse_inapplicable(args, d.kind, "the delivered model")
    _refuse_binary_options(args, d)
    band_column = None if args.bands is None or args.bands.isdigit() else args.bands
    extra = list(dict.fromkeys(c for c in (args.by, band_column) if c))
    table, X, target = read_refit_data(args, d, extra=extra)
    cc = cross_check(args, d, table, X, target)
    fit, cmp = cc.fit, cc.comparison
    recent = read_recent(args, d, target)
    interval = coefficient_interval(fit, cmp)
    charts = {"coefficients": ch.coefficient_chart(cmp, "Delivered coefficients against the refit",
                                                   bars=(interval["lower"], interval["upper"],
                                                         interval["standard_error"]),
                                                   interval_words=f"{100 * interval['level']:g}% interval "
                                                                  f"({interval['distribution']})")}
    parts = _kind_parts(args, d, table, X, target, cc, recent, charts)
    exit_status = 0 if cc.agree else 1
    inputs = [file_digest(args.model, "delivered model", MODEL_BYTES),
              file_digest(args.csv, "development data", args.max_bytes)]
    if args.recent:
        inputs.append(file_digest(args.recent, "recent data", args.max_bytes))
    doc = clean({
        "title": args.title or f"Sign-off of {os.path.basename(args.model)} on {os.path.basename(args.csv)}",
        "verdict": {"coefficients": "agree" if not cc.reasons else "disagree", "reasons": list(cc.reasons),
                    "refit_converged": cc.converged, "exit_status": exit_status, "significance": args.significance,
                    "max_difference": args.max_difference, "band_significance": parts.pop("band_significance", None)},
        "model": {"file": args.model, "format": d.file_format, "kind": d.kind, "kind_words": KINDS[d.kind].words,
                  "target": target, "positive": parts.pop("positive", None), "classes": parts.pop("class_order", None),
                  "terms": list(cmp.terms)},
        "data": {"file": args.csv, "rows_read": int(table.lines.size + table.dropped),
                 "rows_used": int(table.lines.size), "dropped_rows": int(table.dropped), "weights": args.weights},
        "refit": fit.to_dict(), "refit_interval": interval, "comparison": cmp,
        "comparison_within_data": cmp.within_data,
        "implied_l2": cc.implied, "implied_l2_words": cc.implied_text, "comparison_note": cc.note,
        **parts,
        "charts": charts,
        "audit": {"inputs": inputs, "versions": versions(), "options": _options(args),
                  "command": "lintools " + shlex.join(getattr(args, "argv", None) or []),
                  "seeds": "none: no step of this report draws random numbers",
                  "written": written_at(), "caution": CAUTION},
    })
    page = render_page(doc, charts)
    write_atomic(twin, json.dumps(doc, allow_nan=False, indent=1) + "\n", replace=args.replace, label="--twin",
                 replace_hint="--replace")
    write_atomic(args.out, page, replace=args.replace, label="--out", replace_hint="--replace")
    args.console.note(f"sign-off document written to {args.out}, its numbers to {twin}")
    return doc


def run_report(args: argparse.Namespace) -> int:
    """The ``report`` subcommand."""
    doc = write_report(args)
    twin = args.twin or twin_path(args.out)
    summary = {"html": args.out, "twin": twin, "verdict": doc["verdict"],
               "warnings": [text for _, text in args.warnings_seen]}
    if args.json:
        emit_json(summary)
    else:
        v = doc["verdict"]
        print(f"Sign-off document of {args.model} on {args.csv}: {args.out} (numbers in {twin})")
        print(f"  delivered coefficients against the refit: {v['coefficients'].upper()}"
              + ("".join(f"; {r}" for r in v["reasons"])))
        print(f"  refit converged: {'yes' if v['refit_converged'] else 'NO'}")
        print("  " + _headline(doc))
        args.console.caution()
    return int(doc["verdict"]["exit_status"])


def _headline(doc: dict) -> str:
    """The main figure of the delivered scores, in one line."""
    if doc.get("discrimination"):
        disc = doc["discrimination"]
        return (f"ROC area {disc['roc_area']['area']:.4f}, accuracy ratio {disc['roc_area']['accuracy_ratio']:.4f}, "
                f"Kolmogorov-Smirnov {disc['kolmogorov_smirnov']['statistic']:.4f}")
    if doc.get("residuals"):
        r, line = doc["residuals"], doc["response_line"]
        slope = "" if line is None else f", slope of observed on predicted {line['slope']:.4f}"
        return f"mean residual {r['mean']:.4g}, root mean square residual {r['root_mean_square']:.4g}{slope}"
    o = doc["overall"]
    loss = "not defined" if o["log_loss"] is None else f"{o['log_loss']:.4f}"
    accuracy = "not defined" if o["confusion"] is None else f"{o['confusion']['accuracy']:.4f}"
    return f"log-loss {loss}, accuracy {accuracy}"


def add_report_parser(sub: Any, common: Any) -> None:
    """Register the ``report`` subcommand."""
    p = sub.add_parser(
        "report", help="write the sign-off document (HTML and its JSON twin) of a delivered model",
        description=(
            "Refit and cross-check the delivered model on the development data, judge its predictions (binary "
            "logistic: calibration, discrimination, band tests; least squares: residuals, observed on predicted, "
            "binned means; softmax: per-class calibration and ROC area, log-loss, table of classes), compare the population of --recent with "
            "the development one, repeat per segment of --by, and write one self-contained HTML page with its "
            "figures, its JSON twin with every number, and an audit block. Exit 0 when the delivered coefficients "
            "agree with a converged refit, 1 otherwise (the document is written either way), 2 for bad input."),
    )
    _report_options(p)
    common(p)
    p.set_defaults(run=run_report)


def _report_options(p: argparse.ArgumentParser) -> None:
    """The options of ``report`` (all but the shared ``--json``, ``--quiet`` and CSV options)."""
    from .check import DEFAULT_SIGNIFICANCE

    p.add_argument("model", help="the delivered model file: lintools JSON or PMML 4.4 (recognised by content)")
    p.add_argument("csv", help="CSV file with a header line: the development data, with the target column")
    p.add_argument("--out", required=True, metavar="HTML", help="the HTML document to write")
    p.add_argument("--twin", metavar="JSON", help="the JSON twin to write (default: --out with the suffix .json)")
    p.add_argument("--recent", metavar="CSV", help="a recent sample: population stability of every input and of the "
                   "delivered scores; with the target column also judged out of time")
    p.add_argument("--by", metavar="COLUMN", help="also judge each segment of this column (and of --recent)")
    p.add_argument("--title", help="the document's title (default: from the file names)")
    p.add_argument("--target", help="the response column (default: the target named in the model file)")
    p.add_argument("--weights", help="column of case weights (in --recent too)")
    p.add_argument("--l2", type=nonnegative, help="ridge strength of the refit (default: the model file's, else 0)")
    add_fit_options(p, "the label whose probability the model gives (default: from the file)")
    p.add_argument("--significance", type=fraction, default=DEFAULT_SIGNIFICANCE,
                   help="disagree when the Wald test's p-value is below this (default 0.05)")
    p.add_argument("--max-difference", type=nonnegative, default=None,
                   help="also disagree when the largest difference in predicted probability exceeds this")
    p.add_argument("--bins", type=whole(1), default=10, help="bins of the reliability tables, or of the predictions of a least-squares model (default 10)")
    p.add_argument("--strategy", choices=["width", "count"], default="width",
                   help="reliability bins of equal width (default) or of equal numbers of rows")
    p.add_argument("--groups", type=whole(3), default=10, help="risk groups of the Hosmer-Lemeshow test (binary logistic; default 10)")
    p.add_argument("--bands", metavar="N|COLUMN",
                   help="band tests on N quantile bands of the probabilities (default 10) or on a column of grades")
    p.add_argument("--gain-bands", type=whole(1), default=10, help="score bands of the gains table (binary logistic; default 10)")
    p.add_argument("--stability-bins", type=whole(1), default=10,
                   help="quantile bins of the stability index (default 10)")
    p.add_argument("--replace", action="store_true", help="replace existing --out and --twin files")
    p.add_argument("--drop-missing", action="store_true", help="drop lines with missing values instead of stopping")


def report_args(argv: list[str], caller: argparse.Namespace) -> argparse.Namespace:
    """The parsed options of ``lintools report ARGV`` for a command that writes the document
    itself (the demo): its console and the warnings it has seen are the caller's."""
    from .table_options import add_table_options

    p = argparse.ArgumentParser(prog="lintools report", allow_abbrev=False)
    _report_options(p)
    p.add_argument("--json", action="store_true")
    p.add_argument("--quiet", action="store_true")
    add_table_options(p)
    args = p.parse_args(argv)
    args.console, args.warnings_seen, args.argv = caller.console, caller.warnings_seen, ["report", *argv]
    return args
