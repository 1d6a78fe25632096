"""``lintools demo``: the whole job on the bottling plant's inspection station.

Steps (data from :mod:`lintools.cli.demo_data`, generated from known true coefficients):

1. least squares of the fill-volume deviation, set beside the true coefficients;
2. binary logistic regression of a seal leak;
3. softmax regression of the defect class (when ``lintools.softmax`` is available);
4. the supplier's leak-risk model compared with the refit (Wald test, score test,
   prediction differences, implied ridge strength), the disagreement put in words;
5. a calibration report of the supplier's probabilities on the data;
6. stratified 5-fold cross-validated Brier score and ROC area of the refit logistic model;
7. a recent sample in which the nozzle age has drifted: the population stability index of
   every column of the data file against the development sample, and the band tests of the
   supplier's probabilities on the recent rows;
8. files: ``report.txt``, the model files (JSON and PMML), the supplier's PMML file, the
   data and the recent sample as CSV (to try ``lintools check``, ``lintools calibration``,
   ``lintools stability`` and ``lintools report`` on), the sign-off document of the
   supplier's model (``report.html`` and its JSON twin ``report.json``, as ``lintools
   report`` writes them, with the recent sample and per shift), and the reliability
   diagram ``reliability.png`` when matplotlib is installed.

The folder must be new or empty unless ``--replace`` is given (then the demo's files in
it are replaced and nothing else is touched); every file is written to a temporary file
and renamed into place.  ``--rows`` is at most :data:`MAX_ROWS`.
"""

from __future__ import annotations

import argparse
import csv
import dataclasses
import io
import math
import os
import time
from typing import Any

import numpy as np

from ..support import distributions as dist
from .common import MAX_SEED, Progress, emit_json, whole
from .console import CAUTION
from .demo_words import calibration_words, comparison_words, truth_table
from ..support.errors import InputError
from ..support.text import p_text

DEFAULT_FOLDER = "lintools-demo"
#: Fewest and most inspection records the demo generates (``--rows``).
MIN_ROWS, MAX_ROWS = 200, 200_000


#: The score column of the demo's CSV files.
SCORE = "supplier_leak_probability"


def _columns(data: Any, supplier_p: np.ndarray) -> dict[str, np.ndarray]:
    """The columns of the demo's CSV files: numbers as floats, the labels as their text."""
    cols: dict[str, np.ndarray] = {name: data.X[:, j] for j, name in enumerate(data.names)}
    cols["fill_deviation"] = data.fill_deviation
    cols["leak"] = np.array([str(bool(v)) for v in data.leak], dtype=object)
    cols["defect"] = np.asarray(data.defect, dtype=object)
    cols[SCORE] = supplier_p
    cols["shift"] = np.asarray(data.shift, dtype=object)
    return cols


def _csv_text(data: Any, supplier_p: np.ndarray) -> str:
    cols = _columns(data, supplier_p)
    out = io.StringIO(newline="")
    w = csv.writer(out)
    w.writerow(list(cols))
    cells = [c.tolist() if c.dtype == object else [repr(float(v)) for v in c] for c in cols.values()]
    w.writerows(zip(*cells))
    return out.getvalue()


def recent_step(data: Any, recent: Any, supplier: Any) -> tuple[dict, Any, str]:
    """Population stability of every column of the recent sample against the development
    sample (10 bins at the development quantiles, labels by category), and the band tests
    of the supplier's probabilities on the recent rows (10 quantile bands); returns the
    records and their text."""
    from ..metrics.band_tests import band_tests
    from ..metrics.stability import population_stability
    from .stability import stability_table

    dev, new = _columns(data, supplier.mean(data.X)), _columns(recent, supplier.mean(recent.X))
    psi = {name: population_stability(dev[name], new[name]) for name in dev}
    grades = band_tests(recent.leak, new[SCORE], 10)
    top = max(data.names, key=lambda n: psi[n].index)
    parts = [f"{recent.X.shape[0]} recent records against the {data.X.shape[0]} above. Population stability of "
             "every column (10 bins at the development quantiles, labels by category; the readings below 0.1 "
             "stable, 0.1 to 0.25 moderate shift, above 0.25 major shift are common practice, not a test):", "",
             stability_table(psi, SCORE), "",
             f"The feature that moved most: '{top}' (index {psi[top].index:.3f}, {psi[top].reading}); its bins:",
             psi[top].report(),
             "Band tests of the supplier's leak probabilities on the recent rows:", grades.report()]
    return psi, grades, "\n".join(parts)


def _combine(estimates: np.ndarray, ses: np.ndarray, sizes: np.ndarray) -> tuple[float, float]:
    """Fold-size-weighted mean of fold estimates and its standard error, folds taken as independent."""
    share = sizes / sizes.sum()
    return float(share @ estimates), float(math.sqrt(float(share**2 @ ses**2)))


def cross_validate(X: np.ndarray, y: np.ndarray, names: tuple, k: int, seed: int, quiet: bool) -> dict:
    """Stratified k-fold Brier score and ROC area of the logistic refit, with intervals.

    For fold j (held out, n_j rows) the model is fitted on the other folds.  On the held-out
    rows: the Brier score B_j with standard error sd((p - o)^2) / sqrt(n_j), and the ROC
    area A_j with its DeLong standard error.  Across folds: the n_j-weighted means, with
    standard error sqrt(sum (n_j/n)^2 se_j^2), treating the held-out folds as independent
    test samples; the 95% interval is estimate +- 1.96 SE for the Brier score and on the
    logit scale for the area (as :func:`lintools.roc_auc`).  This interval covers the
    test-sample noise only, not the variation from refitting on other training folds: no
    unbiased estimate of the full variance of k-fold cross-validation exists (Bengio &
    Grandvalet 2004), so the spread of the fold estimates is shown beside it.
    """
    from ..metrics.scores import brier
    from ..metrics.discrimination import roc_auc
    from ..models.logistic import logistic
    from ..splitting.stratified import stratified_folds

    folds = stratified_folds(y, k=k, seed=seed)
    rows = []
    for j in range(k):
        test = folds == j
        fit = logistic(X[~test], y[~test], names=names, on_iteration=Progress(quiet, f"fold {j + 1} fit"))
        p = fit.mean(X[test])
        o = y[test].astype(float)
        sq = (p - o) ** 2
        auc = roc_auc(y[test], p)
        rows.append({"fold": j + 1, "rows": int(test.sum()), "positives": int(y[test].sum()),
                     "brier": float(brier(y[test], p).score), "brier_se": float(sq.std(ddof=1) / math.sqrt(sq.size)),
                     "auc": auc.area, "auc_se": auc.standard_error, "auc_lower": auc.lower, "auc_upper": auc.upper,
                     "converged": bool(fit.convergence.converged)})
    n = np.array([r["rows"] for r in rows], dtype=float)
    z = float(dist.normal_quantile(0.975))
    b, b_se = _combine(np.array([r["brier"] for r in rows]), np.array([r["brier_se"] for r in rows]), n)
    a, a_se = _combine(np.array([r["auc"] for r in rows]), np.array([r["auc_se"] for r in rows]), n)
    centre, half = math.log(a / (1 - a)), z * a_se / (a * (1 - a))
    return {
        "k": k, "folds": rows,
        "brier": b, "brier_se": b_se, "brier_interval": (b - z * b_se, b + z * b_se),
        "auc": a, "auc_se": a_se,
        "auc_interval": (1 / (1 + math.exp(-(centre - half))), 1 / (1 + math.exp(-(centre + half)))),
        "brier_fold_sd": float(np.std([r["brier"] for r in rows], ddof=1)),
        "auc_fold_sd": float(np.std([r["auc"] for r in rows], ddof=1)),
    }


def _cv_text(cv: dict) -> str:
    lines = ["fold   rows  leaks      Brier   std err   ROC area   std err   95% interval (DeLong, logit)",
             "-" * 88]
    for r in cv["folds"]:
        lines.append(f"{r['fold']:4d} {r['rows']:6d} {r['positives']:6d} {r['brier']:10.5f} {r['brier_se']:9.5f}"
                     f" {r['auc']:10.4f} {r['auc_se']:9.4f}   [{r['auc_lower']:.4f}, {r['auc_upper']:.4f}]")
    bl, bh = cv["brier_interval"]
    al, ah = cv["auc_interval"]
    stray = [str(r["fold"]) for r in cv["folds"] if not r["converged"]]
    if stray:
        lines.append(f"warning: the fit of fold(s) {', '.join(stray)} did not converge; their numbers are not an optimum's")
    lines += [
        "",
        f"{cv['k']}-fold estimate: Brier {cv['brier']:.5f} (std err {cv['brier_se']:.5f}, 95% interval "
        f"[{bl:.5f}, {bh:.5f}]); ROC area {cv['auc']:.4f} (std err {cv['auc_se']:.4f}, 95% interval "
        f"[{al:.4f}, {ah:.4f}])",
        f"spread of the fold estimates (standard deviation): Brier {cv['brier_fold_sd']:.5f}, "
        f"ROC area {cv['auc_fold_sd']:.4f}",
        "How the intervals are formed: each held-out fold gives a Brier score (std err = sd of the squared",
        "errors / sqrt(rows)) and a ROC area (DeLong std err); the estimate is their row-weighted mean, its",
        "std err sqrt(sum (n_j/n)^2 se_j^2) as for independent test samples, the interval estimate +- 1.96",
        "std err (the ROC area's on the logit scale). It covers the noise of the test rows, not the variation",
        "from refitting on other training folds, for which no unbiased estimate exists (Bengio & Grandvalet",
        "2004); compare it with the spread of the folds.",
    ]
    return "\n".join(lines)


def _softmax_step(data: Any, quiet: bool) -> tuple[Any, str]:
    """Softmax fit of the defect class, the class without a defect as the reference."""
    from .demo_data import DEFECT_CLASSES, true_defect_raw
    from ..models.softmax import softmax

    fit = softmax(data.X, list(data.defect), names=data.names, reference=DEFECT_CLASSES[0],
                     on_iteration=Progress(quiet, "defect fit"))
    fit = dataclasses.replace(fit, target="defect")
    B, b = true_defect_raw()
    order = [DEFECT_CLASSES.index(str(c)) for c in fit.classes]
    B, b = B[:, order], b[order]
    ref = fit.classes.index(fit.reference_class)
    B, b = B - B[:, [ref]], b - b[ref]  # the truth relative to the refit's reference class
    text = fit.report() + "\nTrue coefficients against the refit, per class (relative to the class "
    text += f"'{fit.reference_class}'):\n"
    R, se = np.asarray(fit.coefficients), np.asarray(fit.standard_errors)
    for k in (k for k in range(len(fit.classes)) if k != ref):
        text += f"\nclass '{fit.classes[k]}'\n" + truth_table(
            data.names, B[:, k], float(b[k]), R[:, k], float(np.asarray(fit.intercept)[k]), se[:, k],
            float(np.asarray(fit.intercept_standard_error)[k])) + "\n"
    return fit, text


def _prepare_folder(folder: str, replace: bool) -> None:
    """Create the output folder; refuse a file, or a non-empty folder unless ``replace``."""
    try:
        if os.path.lexists(folder) and not os.path.isdir(folder):
            raise InputError(f"--out {folder!r} is a file, not a folder; choose another --out")
        if os.path.isdir(folder) and os.listdir(folder) and not replace:
            raise InputError(f"the output folder {folder!r} is not empty; choose another --out, or pass --replace "
                             "to write the demo's files into it (files of the same names are replaced)")
        os.makedirs(folder, exist_ok=True)
    except OSError as exc:
        raise InputError(f"cannot create the output folder {folder!r}: {exc.strerror}") from None


class _Files:
    """The demo's files: each written atomically into the folder, listed in order."""

    def __init__(self, folder: str, replace: bool) -> None:
        self.folder, self.replace, self.written = folder, replace, []

    def path(self, name: str) -> str:
        return os.path.join(self.folder, name)

    def put(self, name: str, data: bytes | str) -> None:
        from ..support.files import write_atomic

        write_atomic(self.path(name), data, replace=self.replace, label="demo file", replace_hint="--replace")
        self.written.append(self.path(name))

    def model(self, stem: str, fit: Any) -> None:
        from ..exchange.model_files import save
        from ..exchange.pmml import write_pmml

        for ext, writer in ((".json", save), (".pmml", write_pmml)):
            writer(fit, self.path(stem + ext), replace=self.replace)
            self.written.append(self.path(stem + ext))


def run_demo(args: argparse.Namespace) -> int:
    """The ``demo`` subcommand."""
    from .calibration import PLOT_EXTRA, calibration_report, plot_reliability
    from ..exchange.crosscheck import compare_coefficients, implied_l2
    from .demo_data import (FEATURES, TRUE_FILL_DEVIATION, inspection_data, recent_inspection_data,
                            supplier_leak_record, true_leak_raw)
    from .report_command import report_args, write_report
    from ..models.least_squares import least_squares
    from ..models.logistic import logistic
    from ..exchange.pmml import write_pmml

    start = time.perf_counter()
    folder = args.out
    _prepare_folder(folder, args.replace)
    data = inspection_data(n=args.rows, seed=args.seed)
    quiet = args.quiet
    files = _Files(folder, args.replace)
    written = files.written
    notes: list[str] = []

    ls = dataclasses.replace(least_squares(data.X, data.fill_deviation, names=data.names), target="fill_deviation")
    ls_truth = truth_table(FEATURES, np.array([TRUE_FILL_DEVIATION[f] for f in FEATURES]), TRUE_FILL_DEVIATION["intercept"],
                           ls.coefficients, ls.intercept, ls.standard_errors, ls.intercept_standard_error)
    leak = logistic(data.X, data.leak, names=data.names, on_iteration=Progress(quiet, "leak fit"))
    leak = dataclasses.replace(leak, target="leak")
    slopes, b_true = true_leak_raw()
    leak_truth = truth_table(FEATURES, np.array([slopes[f] for f in FEATURES]), b_true, leak.coefficients,
                             leak.intercept, leak.standard_errors, leak.intercept_standard_error)
    defect, defect_text = _softmax_step(data, quiet)

    supplier = supplier_leak_record()
    cmp = compare_coefficients(leak, supplier.coefficients, supplier.intercept, X=data.X, y=data.leak)
    implied = implied_l2(data.X, data.leak, supplier.coefficients, supplier.intercept)
    p_sup = supplier.mean(data.X)
    cal = calibration_report(data.leak, p_sup)
    cv = cross_validate(data.X, data.leak, data.names, 5, args.seed, quiet)
    recent = recent_inspection_data(n=args.rows, seed=args.seed)
    psi, grades, recent_text = recent_step(data, recent, supplier)

    files.put("inspection.csv", _csv_text(data, p_sup))
    files.put("recent.csv", _csv_text(recent, supplier.mean(recent.X)))
    write_pmml(supplier, files.path("supplier_leak.pmml"), replace=args.replace)
    written.append(files.path("supplier_leak.pmml"))
    # the sign-off document of the supplier's model, with the recent sample and per shift
    write_report(report_args([files.path("supplier_leak.pmml"), files.path("inspection.csv"), "--recent",
                              files.path("recent.csv"), "--by", "shift", "--out", files.path("report.html"),
                              "--title", "Sign-off of the supplier's leak-risk model (demo data)", "--quiet"]
                             + (["--replace"] if args.replace else []), args))
    written += [files.path("report.html"), files.path("report.json")]
    files.model("fill_deviation", ls)
    files.model("leak", leak)
    files.model("defect", defect)
    png = io.BytesIO()
    try:
        plot_reliability(cal.reliability, png, "Supplier's leak probabilities on the inspection data")
    except InputError:
        notes.append(f"reliability.png not written: matplotlib is not installed ({PLOT_EXTRA})")
    else:
        files.put("reliability.png", png.getvalue())

    cmp_words = comparison_words(cmp, implied, leak, float(data.X.shape[0]))
    cal_words = calibration_words(cal)
    rule = "=" * 78
    sections = [
        "lintools demo: a bottling plant's inspection station (invented data)",
        f"{args.rows} inspection records generated with seed {args.seed} from known true coefficients.",
        f"Features: {', '.join(FEATURES)}.",
        "",
        rule, "1. Fill-volume deviation (ml): least squares", rule, ls.report(),
        "True coefficients that generated the data, against the fit:", ls_truth, "",
        rule, "2. Seal leak (yes/no): binary logistic regression", rule, leak.report(),
        "True coefficients that generated the data, against the fit:", leak_truth, "",
        rule, "3. Defect class: softmax regression", rule, defect_text,
        rule, "4. The supplier's leak-risk model against the refit", rule,
        "Delivered minus refit; differences also in the refit's standard errors.", cmp.report(), "",
        cmp_words, "",
        rule, "5. Calibration of the supplier's probabilities on these data", rule, cal.text(), cal_words, "",
        rule, "6. Stratified 5-fold cross-validation of the refit leak model", rule, _cv_text(cv), "",
        f"For comparison, the supplier's model on all rows (not fitted on them): Brier {cal.brier.score:.5f}, "
        f"ROC area {cal.roc_area.area:.4f} [{cal.roc_area.lower:.4f}, {cal.roc_area.upper:.4f}].", "",
        rule, "7. A recent sample: population stability and band tests", rule, recent_text,
        rule, "Files", rule, *written, files.path("report.txt"), *notes, "",
        f"Try: lintools check {os.path.join(folder, 'supplier_leak.pmml')} {os.path.join(folder, 'inspection.csv')}",
        f"     lintools calibration {os.path.join(folder, 'inspection.csv')} --label leak "
        "--probability supplier_leak_probability",
        f"     lintools stability {os.path.join(folder, 'inspection.csv')} {os.path.join(folder, 'recent.csv')} "
        "--probability supplier_leak_probability", "",
        f"     lintools report {os.path.join(folder, 'supplier_leak.pmml')} {os.path.join(folder, 'inspection.csv')} "
        f"--recent {os.path.join(folder, 'recent.csv')} --by shift --out signoff.html", "",
        CAUTION, "",
    ]
    files.put("report.txt", "\n".join(sections))
    elapsed = time.perf_counter() - start
    flagged = [t for t, z in zip(cmp.terms, cmp.difference_in_se) if abs(z) > _bonferroni(len(cmp.terms))]
    if args.json:
        emit_json({
            "folder": folder, "files": written, "notes": notes, "seconds": elapsed,
            "fill_deviation": ls.to_dict(), "leak": leak.to_dict(),
            "defect": defect.to_dict(),
            "supplier_comparison": cmp, "supplier_implied_l2": implied, "supplier_flagged_terms": flagged,
            "supplier_calibration": cal.to_json(), "cross_validation": cv, "recent_rows": recent.X.shape[0],
            "recent_stability": psi, "recent_band_tests": grades, "caution": CAUTION,
        })
        return 0
    al, ah = cv["auc_interval"]
    bl, bh = cv["brier_interval"]
    line = cal.calibration_line
    print("lintools demo: bottling plant inspection station (invented data)")
    print(f"  fill deviation, least squares: R-squared {ls.r_squared:.3f}, residual std error "
          f"{ls.residual_standard_error:.3f} ml")
    print(f"  seal leak, logistic: {int(data.leak.sum())} leaks in {args.rows} bottles, "
          f"{leak.convergence.message}")
    print(f"  defect class, softmax: {len(defect.classes)} classes, reference '{defect.reference_class}', "
          f"{defect.convergence.message}")
    print(f"  supplier's leak model against the refit: Wald chi-square {cmp.wald_statistic:.3g} "
          f"with {cmp.wald_degrees_of_freedom} degrees of freedom, p-value {p_text(cmp.wald_p_value)}; differs beyond noise in: "
          f"{', '.join(flagged) if flagged else 'no term'}")
    if line is not None:
        print(f"  supplier's calibration slope {line.slope:.3f} [{line.slope_interval[0]:.3f}, "
              f"{line.slope_interval[1]:.3f}], Brier {cal.brier.score:.4f}")
    print(f"  refit, stratified 5-fold: Brier {cv['brier']:.4f} [{bl:.4f}, {bh:.4f}], "
          f"ROC area {cv['auc']:.3f} [{al:.3f}, {ah:.3f}]")
    top = max(FEATURES, key=lambda n: psi[n].index)
    print(f"  recent sample: largest shift in '{top}' (population stability {psi[top].index:.3f}, "
          f"{psi[top].reading}); band tests of the supplier's probabilities reject in {grades.rejected[0]} of "
          f"{grades.tested[0]} bands (binomial, 5%)")
    print(f"  report and files in {folder}{os.sep} ({len(written)} files; {elapsed:.1f} s)")
    for n in notes:
        print(f"  note: {n}")
    args.console.caution()
    return 0


def _bonferroni(q: int) -> float:
    return float(dist.normal_quantile(1.0 - 0.05 / (2 * q)))


def add_demo_parser(sub: Any, common: Any) -> None:
    """Register the ``demo`` subcommand."""
    p = sub.add_parser(
        "demo", help="run the whole job on the built-in inspection-station demo and write a report folder",
        description="Fit the three models, compare the supplier's leak model with the refit, report the "
                    "calibration of the supplier's probabilities and the cross-validated Brier score and ROC "
                    "area of the refit; write report.txt, model files and a reliability diagram into a folder.",
    )
    p.add_argument("--out", default=DEFAULT_FOLDER,
                   help=f"output folder, new or empty unless --replace (default ./{DEFAULT_FOLDER}/)")
    p.add_argument("--replace", action="store_true",
                   help="write into a folder that is not empty (the demo's files in it are replaced)")
    p.add_argument("--rows", type=whole(MIN_ROWS, MAX_ROWS), default=2000,
                   help=f"number of inspection records, {MIN_ROWS} to {MAX_ROWS} (default 2000)")
    p.add_argument("--seed", type=whole(0, MAX_SEED), default=20261201,
                   help=f"seed of the data generator and the folds, 0 to {MAX_SEED} (default 20261201)")
    common(p)
    p.set_defaults(run=run_demo)
