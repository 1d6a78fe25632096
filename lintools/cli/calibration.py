"""``lintools calibration``: how well a column of probabilities matches the labels.

Text always: the reliability table (observed frequency with Wilson intervals against the
mean forecast per bin), the Brier score with Murphy's decomposition, the binned
calibration error, the Hosmer-Lemeshow test, Cox's calibration line and
Spiegelhalter's z test, and the ROC area with its DeLong interval.  With ``--plot PATH``
a reliability diagram is written as PNG; that needs matplotlib (the ``plot`` extra).

The probabilities are read as those of the positive label: the larger of the two labels
unless ``--positive`` names it; the command says which (on standard error), and warns
when the ROC area is below 0.5, the mark of probabilities of the other class.

With ``--by COLUMN`` the whole report (and the band tests of ``--bands``) is repeated for
each segment (each value of that column), after the one over all rows, with the positive
label of all rows.  A segment with fewer than
:data:`lintools.cli.common.SMALL_SEGMENT_ROWS` rows of either class is flagged as small
(common practice: ten events per variable); it is reported, never dropped, and a statistic
that cannot be computed in it is listed with its reason.  The ``--by`` column may not be the
label, probability or weights column (refused by name); it may be the ``--bands`` column.
"""

from __future__ import annotations

import argparse
import io
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..document.png import PLOT_EXTRA
from .common import (
    SMALL_SEGMENT_ROWS,
    check_output_paths,
    emit_json,
    match_label,
    probabilities_in_range,
    refuse_segment_column,
    segment_heading,
    segments,
    whole,
)
from ..support.errors import InputError, LintoolsError
from ..support.text import p_text



@dataclass(frozen=True)
class CalibrationReport:
    """Every calibration statistic the command prints; a missing one carries its reason."""

    rows: int
    positive: Any
    reliability: Any
    brier: Any
    calibration_error: float
    hosmer_lemeshow: Any
    calibration_line: Any
    spiegelhalter: Any
    roc_area: Any
    notes: tuple[str, ...]

    def text(self) -> str:
        """The report as text."""
        parts = [self.reliability.report(), self.brier.report(),
                 f"calibration error (equal-width bins, mean |observed - forecast|): {self.calibration_error:.6g}\n"]
        for name in ("hosmer_lemeshow", "calibration_line"):
            value = getattr(self, name)
            if value is not None:
                parts.append(value.report())
        s = self.spiegelhalter
        if s is not None:
            parts.append(f"Spiegelhalter z test: z {s.statistic:.4f}, p-value {p_text(s.p_value)} (Brier {s.brier:.6g}, "
                         f"expected under calibration {s.expected_brier:.6g})\n")
        if self.roc_area is not None:
            parts.append(self.roc_area.report())
        parts += [f"not computed: {n}\n" for n in self.notes]
        return "\n".join(parts)

    def to_json(self) -> dict:
        """A JSON-ready dictionary (the calibration line without its two inner fits)."""
        line = None
        if self.calibration_line is not None:
            import dataclasses

            line = {f.name: getattr(self.calibration_line, f.name) for f in dataclasses.fields(self.calibration_line)
                    if f.name not in ("line_fit", "offset_fit")}
        return {"rows": self.rows, "positive": str(self.positive), "reliability": self.reliability,
                "brier": self.brier, "calibration_error": self.calibration_error,
                "hosmer_lemeshow": self.hosmer_lemeshow, "calibration_line": line,
                "spiegelhalter": self.spiegelhalter, "roc_area": self.roc_area, "notes": list(self.notes)}


def calibration_report(y: Any, p: np.ndarray, *, positive: Any = None, bins: int = 10, strategy: str = "width",
                       groups: int = 10, weights: Any = None) -> CalibrationReport:
    """Compute the statistics of the calibration report (used by the command and the demo)."""
    from ..support.outcomes import binary_outcome
    from ..metrics.scores import brier
    from ..metrics.bins import calibration_error, reliability
    from ..metrics.checks import calibration_line, hosmer_lemeshow, spiegelhalter
    from ..metrics.discrimination import roc_auc

    table = reliability(y, p, bins=bins, strategy=strategy, weights=weights, positive=positive)
    b = brier(y, p, weights=weights, bins=bins, positive=positive)  # Murphy terms over the same bins
    ece = calibration_error(y, p, bins=bins, strategy=strategy, weights=weights, positive=positive)
    notes = []

    def attempt(name: str, fn: Any) -> Any:
        try:
            return fn()
        except (InputError, LintoolsError) as exc:
            notes.append(f"{name}: {exc}")
            return None

    hl = attempt("Hosmer-Lemeshow test", lambda: hosmer_lemeshow(y, p, groups=groups, weights=weights, positive=positive))
    line = attempt("calibration line", lambda: calibration_line(y, p, weights=weights, positive=positive))
    sp = attempt("Spiegelhalter test", lambda: spiegelhalter(y, p, weights=weights, positive=positive))
    auc = attempt("ROC area", lambda: roc_auc(y, p, weights=weights, positive=positive))
    _, (_, pos) = binary_outcome(y, positive)
    return CalibrationReport(rows=len(p), positive=pos, reliability=table, brier=b, calibration_error=float(ece),
                             hosmer_lemeshow=hl, calibration_line=line, spiegelhalter=sp, roc_area=auc,
                             notes=tuple(notes))


def plot_reliability(table: Any, path: Any, title: str = "Reliability diagram",
                     positive: str = "the positive class") -> None:
    """Write a reliability diagram of ``table`` (a :class:`ReliabilityTable`) as PNG to
    ``path`` (a file name, replaced if it exists, or a binary file object).

    The figure is :func:`lintools.document.charts.reliability_chart` (the same series as
    the sign-off document's SVG figure) drawn by matplotlib: every bin that has weight
    with its interval, the diagonal, and the rows per bin on a log scale.  Without
    matplotlib an :class:`InputError` names the ``plot`` extra.
    """
    from ..document.charts import reliability_chart
    from ..document.png import chart_png

    data = chart_png(reliability_chart(table, title, positive))
    if hasattr(path, "write"):
        path.write(data)
    else:
        from ..support.files import write_atomic

        write_atomic(path, data, replace=True, label="diagram")


def swapped_class_warning(rep: CalibrationReport) -> str | None:
    """The warning for a ROC area below 0.5: the forecasts rank the other class higher."""
    if rep.roc_area is None or not rep.roc_area.area < 0.5:
        return None
    return (f"the ROC area is {rep.roc_area.area:.3g}, below 0.5: the probabilities may be for the other class: "
            f"see --positive (they are read as those of class '{rep.positive!s}')")


def run_calibration(args: argparse.Namespace) -> int:
    """The ``calibration`` subcommand."""
    from ..support.files import write_atomic
    from .table_options import table_options
    from ..exchange.csv_table import read_table

    if args.plot is not None:  # fail before any work when the extra is missing
        try:
            import matplotlib  # noqa: F401
        except ImportError:
            raise InputError(f"--plot needs matplotlib, which is not installed: {PLOT_EXTRA}") from None
    check_output_paths([("CSV file", args.csv)], [("--plot", args.plot)], args.replace)
    if args.label == args.probability:
        raise InputError("--label and --probability name the same column; pass two columns")
    refuse_segment_column(args.by, [(args.label, "the --label column (a segment would hold one class)"),
                                    (args.probability, "the --probability column"),
                                    (args.weights, "the --weights column")])
    # the probability column is read as a feature and the weights as weights: the reader's
    # strict number rules (and --decimal, --missing-values) hold for them as for a fit
    band_column = None if args.bands is None or args.bands.isdigit() else args.bands
    extra = list(dict.fromkeys(c for c in (band_column, args.by) if c))  # the same column is read once
    table = read_table(args.csv, target=args.label, features=[args.probability], weights=args.weights,
                       extra=extra, drop_missing=args.drop_missing,
                       **table_options(args, "categorical"))
    if table.names != (args.probability,):
        raise InputError(f"{args.csv!r}: the probability column '{args.probability}' holds text, not numbers; "
                         "pass the column of predicted probabilities with --probability")
    p = probabilities_in_range(table.X[:, 0], table.lines, args.probability, args.csv)
    w = table.weights
    y = list(table.target)
    positive = match_label(args.positive, sorted(set(y), key=str), "--positive") if args.positive else None
    rep = calibration_report(y, p, positive=positive, bins=args.bins, strategy=args.strategy,
                             groups=args.groups, weights=w)
    if band_column is None and args.bands is not None and int(args.bands) < 1:
        raise InputError("--bands 0: pass a number of quantile bands of 1 or more, or a column of grades")
    every = np.ones(len(y), dtype=bool)
    grades = _grades(args, table, band_column, y, p, w, positive, every)
    blocks = _segment_blocks(args, table, band_column, y, p, w, rep.positive) if args.by else []
    console = args.console
    how = "chosen with --positive" if positive is not None else "the larger label; choose with --positive"
    console.note(f"taking '{args.probability}' as the probability of class '{rep.positive!s}' ({how})")
    swapped = swapped_class_warning(rep)
    if swapped:
        console.warning(swapped)
    if args.plot is not None:
        png = io.BytesIO()  # drawn in memory, then written atomically
        plot_reliability(rep.reliability, png, f"Reliability of {args.probability} for {args.label}",
                         f"{args.label} = {rep.positive!s}")
        write_atomic(args.plot, png.getvalue(), replace=args.replace, label="--plot", replace_hint="--replace")
        console.note(f"reliability diagram written to {args.plot}")
    if args.json:
        doc = rep.to_json()
        doc.update({"data": args.csv, "label": args.label, "probability": args.probability,
                    "dropped_rows": table.dropped, "plot": args.plot, "band_tests": grades, "by": args.by,
                    "small_segment_rule": _SMALL_RULE if args.by else None, "segments": blocks,
                    "warnings": [text for _, text in args.warnings_seen] + ([swapped] if swapped else [])})
        emit_json(doc)
    else:
        print(f"Calibration of '{args.probability}' against '{args.label}' (positive label {rep.positive}) "
              f"in {args.csv}: {rep.rows} rows" + (f", {table.dropped} dropped for missing values" if table.dropped else "")
              + "\n")
        print(rep.text())
        if grades is not None:
            print(grades.report())
        for block in blocks:
            _print_segment(args, block)
        console.caution()
    return 0


_SMALL_RULE = (f"fewer than {SMALL_SEGMENT_ROWS} rows of either class (common practice: ten events per "
               "variable); its figures are unstable")


def _grades(args: argparse.Namespace, table: Any, band_column: str | None, y: list, p: np.ndarray, w: Any,
            positive: Any, rows: np.ndarray) -> Any:
    """The band tests of ``--bands`` on the rows of the mask ``rows`` (None without ``--bands``):
    the grades of the column, or that many quantile bands of these rows' probabilities."""
    if args.bands is None:
        return None
    from ..metrics.band_tests import band_tests

    bands = np.asarray(table.extra[band_column], dtype=object)[rows].tolist() if band_column else int(args.bands)
    return band_tests([v for v, r in zip(y, rows) if r], p[rows], bands,
                      weights=None if w is None else w[rows], positive=positive)


def _segment_blocks(args: argparse.Namespace, table: Any, band_column: str | None, y: list, p: np.ndarray,
                    w: Any, positive: Any) -> list[dict]:
    """One block per segment of ``--by``: its rows and class counts, the small flag, its
    calibration report and band tests, or the reason each could not be computed."""
    blocks = []
    for value, (rows,) in segments(table.extra[args.by]):
        ys = [v for v, r in zip(y, rows) if r]
        positives = sum(1 for v in ys if v == positive)
        block = {"segment": value, "rows": len(ys), "positives": positives, "negatives": len(ys) - positives,
                 "small": min(positives, len(ys) - positives) < SMALL_SEGMENT_ROWS, "report": None,
                 "band_tests": None, "notes": []}
        try:
            block["report"] = calibration_report(ys, p[rows], positive=positive, bins=args.bins,
                                                 strategy=args.strategy, groups=args.groups,
                                                 weights=None if w is None else w[rows])
        except (InputError, LintoolsError) as exc:  # e.g. every weight of the segment is zero
            block["notes"].append(f"calibration report not computed: {exc}")
        try:
            block["band_tests"] = _grades(args, table, band_column, y, p, w, positive, rows)
        except (InputError, LintoolsError) as exc:
            block["notes"].append(f"band tests not computed: {exc}")
        if block["report"] is not None:
            block["report"] = block["report"].to_json() if args.json else block["report"]
        blocks.append(block)
    return blocks


def _print_segment(args: argparse.Namespace, block: dict) -> None:
    """A segment's block of the text report."""
    counts = (f"{block['rows']} rows, {block['positives']} of the positive label and {block['negatives']} "
              "of the other")
    print(segment_heading(args.by, block["segment"], counts, _SMALL_RULE if block["small"] else None) + "\n")
    if block["report"] is not None:
        print(block["report"].text())
    if block["band_tests"] is not None:
        print(block["band_tests"].report())
    for note in block["notes"]:
        print(note + "\n")


def add_calibration_parser(sub: Any, common: Any) -> None:
    """Register the ``calibration`` subcommand."""
    p = sub.add_parser(
        "calibration",
        help="calibration report of a probability column against a label column of a CSV file",
        description=(
            "The reliability table (always, as text), the Brier score and its decomposition, the calibration "
            "error, the Hosmer-Lemeshow test, the calibration line, Spiegelhalter's test and the ROC area. "
            f"--plot writes a reliability diagram as PNG; it needs matplotlib ({PLOT_EXTRA})."
        ),
    )
    p.add_argument("csv", help="CSV file with a header line")
    p.add_argument("--label", required=True, help="the column of observed labels (two classes)")
    p.add_argument("--probability", required=True, help="the column of forecast probabilities of the positive label")
    p.add_argument("--positive", help="the positive label (default: the larger of the two labels)")
    p.add_argument("--weights", help="column of case weights")
    p.add_argument("--bins", type=whole(1), default=10, help="bins of the reliability table (default 10)")
    p.add_argument("--strategy", choices=["width", "count"], default="width",
                   help="bins of equal width (default) or of equal numbers of rows")
    p.add_argument("--groups", type=whole(3), default=10, help="risk groups of the Hosmer-Lemeshow test (default 10)")
    p.add_argument("--bands", metavar="N|COLUMN",
                   help="also back-test the probabilities band by band (exact binomial and Jeffreys tests): N "
                        "quantile bands of the probabilities, or a column of rating grades")
    p.add_argument("--by", metavar="COLUMN",
                   help="also report each segment (each value of this column) after all rows; segments with "
                        f"fewer than {SMALL_SEGMENT_ROWS} rows of a class are flagged as small")
    p.add_argument("--plot", metavar="PNG", help=f"write a reliability diagram to this PNG file ({PLOT_EXTRA})")
    p.add_argument("--replace", action="store_true", help="replace an existing --plot file")
    p.add_argument("--drop-missing", action="store_true", help="drop lines with missing values instead of stopping")
    common(p)
    p.set_defaults(run=run_calibration)
