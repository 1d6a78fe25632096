"""``lintools report MODEL DATA --out REPORT.html``: the sign-off document of a delivered model.

One command runs the whole judgement of a delivered binary logistic model (a lintools
JSON model file or a PMML 4.4 regression model) on the development data:

* the refit and the cross-check of the delivered coefficients (as ``lintools check``);
* calibration of the delivered probabilities (as ``lintools calibration``);
* discrimination: ROC area with the accuracy ratio, Kolmogorov-Smirnov, gains;
* band tests (``--bands N|COLUMN``, default 10 quantile bands);
* with ``--recent CSV``: population stability of every input and of the probability;
* with ``--by COLUMN``: the main figures per segment, small segments flagged;
* the refit's convergence record and an audit block (SHA-256 of every input file, rows
  read and used, versions and platform, every option, the time of writing, the verdicts,
  the caution).

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

#: The name of the delivered model's probability among the compared columns.
SCORE = "delivered probability"


def twin_path(out: str) -> str:
    """The default JSON twin of an HTML path: the same name with the suffix ``.json``."""
    stem, ext = os.path.splitext(out)
    return (stem if ext.lower() in (".html", ".htm", ".xhtml") else out) + ".json"


def _input_columns(d: Any, table: Any, X: np.ndarray) -> dict[str, np.ndarray]:
    """The model's input columns as the CSV holds them: numbers, or a text column's cells."""
    from .stability import _columns

    if d.categorical_fields:
        fields = [f.name for f in d.categorical_fields]
        out: dict[str, np.ndarray] = {}
        for j, name in enumerate(d.names):
            field = next((f for f in fields if name.startswith(f + "=")), None)
            if field is None:
                out[name] = X[:, j]
            elif field not in out:
                out[field] = np.array(list(table.extra[field]), dtype=object)
        return out
    texts = set(table.reference_levels)
    plain = [n for n in table.names if not ("=" in n and n.split("=", 1)[0] in texts)]
    return _columns(table, tuple(plain) + tuple(texts))


def _interval(fit: Any, comparison: Any, level: float = 0.95) -> dict[str, Any]:
    """Wald interval of the refit's coefficients, intercept first (the comparison's order)."""
    from ..support import distributions as dist

    se = np.asarray(fit.standard_errors, dtype=float)
    if fit.with_intercept:
        se = np.r_[float(fit.intercept_standard_error), se]
    z = float(dist.normal_quantile(0.5 + level / 2))
    refit = np.asarray(comparison.refit, dtype=float)
    return {"level": level, "standard_error": se, "lower": refit - z * se, "upper": refit + z * se}


def _options(args: argparse.Namespace) -> dict[str, Any]:
    hidden = {"run", "console", "warnings_seen", "command", "argv"}
    return {f"--{k.replace('_', '-')}" if k not in ("model", "csv") else k: v
            for k, v in sorted(vars(args).items()) if k not in hidden}


def write_report(args: argparse.Namespace) -> dict[str, Any]:
    """Compute the document's numbers, write the HTML page and its JSON twin, and return
    the twin (as written) for the caller's summary."""
    from .calibration import calibration_report
    from .check import cross_check, read_delivered, read_refit_data
    from .report_facts import attempt, bands_argument, discrimination, segments, stability
    from ..document import charts as ch
    from ..document.audit import file_digest, versions, written_at
    from ..document.sections import render_page
    from ..exchange.model_files import MAX_BYTES as MODEL_BYTES
    from ..exchange.scoring import read_model
    from ..metrics.band_tests import band_tests
    from ..metrics.checks import hosmer_lemeshow
    from ..support.files import write_atomic

    twin = args.twin or twin_path(args.out)
    check_output_paths([("model file", args.model), ("CSV file", args.csv), ("--recent", args.recent)],
                       [("--out", args.out), ("--twin", twin)], args.replace)
    d = read_delivered(args.model)
    if KINDS[d.kind].classes != 2:
        raise InputError(f"the delivered model is a {KINDS[d.kind].words} model; the report judges binary "
                         "logistic models (their probabilities): use lintools check for the refit of this one")
    refuse_inapplicable(args, d.kind, "the delivered model")
    band_column = None if args.bands is None or args.bands.isdigit() else args.bands
    extra = list(dict.fromkeys(c for c in (args.by, band_column) if c))
    table, X, target = read_refit_data(args, d, extra=extra)
    cc = cross_check(args, d, table, X, target)
    fit, cmp = cc.fit, cc.comparison
    positive = fit.positive_class
    y, w = list(table.target), table.weights
    p = np.asarray(read_model(args.model).mean(X), dtype=float)  # the delivered model's probabilities
    cal = calibration_report(y, p, positive=positive, bins=args.bins, strategy=args.strategy, groups=args.groups,
                             weights=w)
    disc = discrimination(y, p, w, positive, args.gain_bands)
    notes: list[str] = []
    bands, band_source = bands_argument(args.bands, 10, table.extra)
    grades = attempt(notes, "band tests", lambda: band_tests(y, p, bands, weights=w, positive=positive))

    stab, recent, rtab = None, None, None
    if args.recent:
        rtab, rX, _ = read_refit_data(args, d, path=args.recent, extra=[args.by] if args.by else [], with_target=False)
        rp = np.asarray(read_model(args.model).mean(rX), dtype=float)
        dev_cols = {SCORE: p, **_input_columns(d, table, X)}
        recent_cols = {SCORE: rp, **_input_columns(d, rtab, rX)}
        stab = stability(dev_cols, recent_cols, (w, rtab.weights), args.stability_bins)
        recent = (rtab.extra[args.by] if args.by else None, rp, rtab.weights)
    segs = None
    if args.by:
        segs = segments(args.by, table.extra[args.by], y, p, w, positive, bands=bands,
                        recent=recent if args.recent else None, stability_bins=args.stability_bins,
                        calibration=lambda ys, ps, ws: hosmer_lemeshow(ys, ps, groups=args.groups, weights=ws,
                                                                       positive=positive))

    pos_words = f"{target} = {positive!s}"
    charts = {
        "coefficients": ch.coefficient_chart(cmp, "Delivered coefficients against the refit"),
        "reliability": ch.reliability_chart(cal.reliability, "Reliability of the delivered probabilities", pos_words),
        "roc": ch.roc_chart(y, p, "ROC curve of the delivered probabilities", weights=w, positive=positive),
        "gains": ch.gains_chart(disc["gains"], "Cumulative gains of the delivered probabilities"),
    }
    shown: list[str] = []
    if stab is not None:
        charts["stability"] = ch.stability_chart(stab, "Population stability: recent against development")
        shown = [n for n, r in stab.items() if n == SCORE or r.reading != "stable"]
        for name in shown:
            charts[f"stability bins of {name}"] = ch.stability_bins_chart(stab[name], name, f"Bins of {name}")

    exit_status = 0 if cc.agree else 1
    calibration = cal.to_json()
    calibration.pop("roc_area")  # in the discrimination section
    inputs = [file_digest(args.model, "delivered model", MODEL_BYTES),
              file_digest(args.csv, "development data", args.max_bytes)]
    if args.recent:
        inputs.append(file_digest(args.recent, "recent data", args.max_bytes))
    doc = clean({
        "title": args.title or f"Sign-off of {os.path.basename(args.model)} on {os.path.basename(args.csv)}",
        "verdict": {"coefficients": "agree" if not cc.reasons else "disagree", "reasons": list(cc.reasons),
                    "refit_converged": cc.converged, "exit_status": exit_status, "significance": args.significance,
                    "max_difference": args.max_difference,
                    "band_significance": None if grades is None else 1.0 - grades.level},
        "model": {"file": args.model, "format": d.file_format, "kind": d.kind, "target": target,
                  "positive": str(positive), "terms": list(cmp.terms)},
        "data": {"file": args.csv, "rows_read": int(table.lines.size + table.dropped),
                 "rows_used": int(table.lines.size), "dropped_rows": int(table.dropped), "weights": args.weights},
        "refit": fit.to_dict(), "refit_interval": _interval(fit, cmp), "comparison": cmp,
        "implied_l2": cc.implied, "implied_l2_words": cc.implied_text, "comparison_note": cc.note,
        "calibration": calibration, "discrimination": disc, "band_tests": grades, "band_source": band_source,
        "band_notes": notes,
        "stability": None if stab is None else {
            "file": args.recent, "rows_read": int(rtab.lines.size + rtab.dropped), "rows_used": int(rtab.lines.size),
            "bins": args.stability_bins, "score": SCORE, "columns": stab, "shown": shown,
            "bin_words": {n: ch.bin_words(stab[n]) for n in shown}},
        "segments": segs,
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
    disc = doc["discrimination"]
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
        print(f"  ROC area {disc['roc_area']['area']:.4f}, accuracy ratio {disc['roc_area']['accuracy_ratio']:.4f}, "
              f"Kolmogorov-Smirnov {disc['kolmogorov_smirnov']['statistic']:.4f}")
        args.console.caution()
    return int(doc["verdict"]["exit_status"])


def add_report_parser(sub: Any, common: Any) -> None:
    """Register the ``report`` subcommand."""
    p = sub.add_parser(
        "report", help="write the sign-off document (HTML and its JSON twin) of a delivered logistic model",
        description=(
            "Refit and cross-check the delivered model on the development data, judge the calibration and the "
            "discrimination of its probabilities, back-test them by band, compare the population of --recent with "
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
    p.add_argument("--recent", metavar="CSV", help="a recent sample (no target needed): population stability of "
                                                   "every input and of the delivered probability")
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
    p.add_argument("--bins", type=whole(1), default=10, help="bins of the reliability table (default 10)")
    p.add_argument("--strategy", choices=["width", "count"], default="width",
                   help="reliability bins of equal width (default) or of equal numbers of rows")
    p.add_argument("--groups", type=whole(3), default=10, help="risk groups of the Hosmer-Lemeshow test (default 10)")
    p.add_argument("--bands", metavar="N|COLUMN",
                   help="band tests on N quantile bands of the probabilities (default 10) or on a column of grades")
    p.add_argument("--gain-bands", type=whole(1), default=10, help="score bands of the gains table (default 10)")
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
