"""``lintools score``: apply a model file to a CSV file and write one scored row per input row.

The model is a lintools JSON model file or a PMML 4.4 regression model (lintools' own or
a supplier's), recognised by its content.  Its inputs are matched to the CSV columns by
name (:mod:`lintools.exchange.scoring`): a numeric input is a column of numbers; a categorical
input is a text column whose cells are mapped to the model's indicator columns.  Refused
by name, before anything is written: an input with no column, a column that is neither
an input, the ``--id`` column, the model's target nor ``--exclude``d (so that a file
meant for another model is not scored by accident), a cell that is not a number in a
numeric input, a category the model does not list (file, line, column and cell), and an
``--id`` value that two rows share.

A row with a missing value in an input cannot be scored: it is an error naming its line
and column, unless ``--blank-missing`` is given, which writes the row with empty score
cells (and counts them).  The output holds, for every data row of the input in order:
the ``--id`` column's text (or, without ``--id``, the row's ``line`` in the input), then

* least squares: ``linear_predictor`` and ``mean`` (equal: the predicted response);
* logistic: ``linear_predictor``, ``probability:<class>`` of the modelled class, ``label``;
* softmax: ``linear_predictor:<class>`` and ``probability:<class>`` for every class, ``label``;

``label`` being the most likely class.  Numbers are written as Python's ``repr`` of the
double (the shortest text that reads back as the same double), with the input's decimal
mark; the separator is the input's.  The file is written to a temporary file and renamed
into place; it may be neither an input nor an existing file (unless ``--replace``).
"""

from __future__ import annotations

import argparse
import csv
import io
from typing import Any

import numpy as np

from .common import check_output_paths, emit_json
from ..models.kinds import KINDS
from ..support.errors import InputError

#: the output column that stands for the row when no ``--id`` is given
LINE_COLUMN = "line"


def _output_columns(model: Any) -> list[str]:
    kind = KINDS[model.kind]
    if not kind.classifier:
        return ["linear_predictor", "mean"]
    if not kind.per_class:
        return ["linear_predictor", f"probability:{_positive(model)!s}", "label"]
    classes = [str(c) for c in model.classes]
    return [f"linear_predictor:{c}" for c in classes] + [f"probability:{c}" for c in classes] + ["label"]


def _positive(model: Any) -> Any:
    """The class whose probability a logistic model gives."""
    return model.positive_class if hasattr(model, "positive_class") else model.classes[0]


def _scores(model: Any, X: np.ndarray, number: Any) -> list[list[str]]:
    """The score cells of every row of ``X``, as text."""
    eta = np.asarray(model.linear_predictor(X), dtype=float)
    mean = np.asarray(model.mean(X), dtype=float)
    parts = [eta.reshape(len(X), -1), mean.reshape(len(X), -1)]
    cells = [[number(v) for v in row] for row in np.hstack(parts).tolist()]
    if KINDS[model.kind].classifier:
        for row, label in zip(cells, model.labels(X).tolist()):
            row.append(str(label))
    return cells


def _check_columns(path: str, header: list[str], needed: tuple[str, ...], allowed: set[str],
                   has_fields: bool) -> None:
    """Refuse an input without a column, and a column that is not used."""
    for column in needed:
        if column in header:
            continue
        hint = ""
        if not has_fields and "=" in column and column.split("=", 1)[0] in header:
            hint = (f"; '{column}' is an indicator column of the text column '{column.split('=', 1)[0]}', but the "
                    "model file does not record its levels: save the model with reference_levels= (lintools fit "
                    "--save and --save-pmml do), or give the indicator columns in the file")
        raise InputError(f"the model's input '{column}' is not a column of {path!r} (its columns: "
                         f"{', '.join(header)}){hint or '; the file must hold every input of the model, by name'}")
    unused = [c for c in header if c not in allowed]
    if unused:
        shown = ",".join(unused)
        raise InputError(f"{path!r} has columns the model does not use: {', '.join(map(repr, unused))} (its inputs: "
                         f"{', '.join(needed)}); leave them out with --exclude {shown} (an identifier, a note, the "
                         "outcome), or check that the file is meant for this model")


def _refuse_repeated(path: str, column: str, lines: list[int], ids: list[str]) -> None:
    """Refuse an identifier that two rows share: the scores could not be told apart."""
    first: dict[str, int] = {}
    for line, value in zip(lines, ids):
        if value in first:
            raise InputError(f"{path!r} line {line}: the --id column '{column}' repeats {value[:80]!r} (first on line "
                             f"{first[value]}); every row needs its own identifier: correct the file, or leave out "
                             "--id to identify the rows by their line")
        first[value] = line


def run_score(args: argparse.Namespace) -> int:
    """The ``score`` subcommand."""
    from .table_options import table_options
    from ..support.files import write_atomic
    from ..exchange.scoring import first_missing, model_inputs, read_inputs, read_model
    from ..exchange.csv_table import read_header, read_table

    check_output_paths([("model file", args.model), ("CSV file", args.csv)], [("--out", args.out)], args.replace)
    model = read_model(args.model)
    options = table_options(args, "exclude")
    inputs = model_inputs(model.names, model.categorical_fields)
    outputs = _output_columns(model)
    first = args.id if args.id is not None else LINE_COLUMN
    if first in outputs:
        raise InputError(f"--id '{first}' is also the name of a score column ({', '.join(outputs)}); the output "
                         "would have two columns of that name: rename the column in the file")
    header = list(read_header(args.csv, **table_options(args, "exclude", header=True)))
    if args.id is not None and args.id not in header:
        raise InputError(f"--id column '{args.id}' is not in {args.csv!r}; its columns are: {', '.join(header)}")
    if args.id is not None and args.id in inputs.columns:
        raise InputError(f"--id column '{args.id}' is an input of the model; name a column that identifies the rows")
    target = getattr(model, "target", None)
    allowed = set(inputs.columns) | {args.id, target} | set(options.get("exclude", []))
    _check_columns(args.csv, header, inputs.columns, allowed, bool(inputs.layouts))
    if getattr(model, "has_offset", False):
        args.console.warning("the model was fitted with an offset; the rows are scored without one (offset 0)")

    table, X = read_inputs(args.csv, inputs, options, drop_missing=True)
    plain = {k: v for k, v in options.items() if k != "exclude"}
    if table.dropped and not args.blank_missing:
        line, column = first_missing(args.csv, inputs.columns, table.lines, plain) or (0, "?")
        raise InputError(f"{args.csv!r} line {line}, column '{column}': missing value; the model cannot score a row "
                         "without all its inputs: fill it in, or pass --blank-missing to write such rows with empty "
                         "scores")
    if args.id is not None:
        ids = read_table(args.csv, target=None, features=[], extra=[args.id], drop_missing=True,
                         **{**plain, "missing_values": []})
        if ids.dropped:
            line, _ = first_missing(args.csv, [args.id], ids.lines, {**plain, "missing_values": []}) or (0, "")
            raise InputError(f"{args.csv!r} line {line}: the --id column '{args.id}' is empty; every row needs "
                             "its identifier: fill it in")
        every, labels = ids.lines, list(ids.extra[args.id])
        _refuse_repeated(args.csv, args.id, every.tolist(), labels)
    elif table.dropped:
        every = read_table(args.csv, target=None, features=[], extra=[], **plain).lines
        labels = [str(v) for v in every.tolist()]
    else:
        every, labels = table.lines, [str(v) for v in table.lines.tolist()]
    decimal = options.get("decimal", ".")

    def number(value: float) -> str:
        text = repr(float(value))
        return text.replace(".", ",") if decimal == "," else text

    scored = dict(zip(table.lines.tolist(), _scores(model, X, number)))
    blank = [""] * len(outputs)
    text = io.StringIO(newline="")
    writer = csv.writer(text, delimiter=table.delimiter)  # the input's own separator
    writer.writerow([first] + outputs)
    for line, label in zip(every.tolist(), labels):
        writer.writerow([label] + scored.get(line, blank))
    write_atomic(args.out, text.getvalue(), replace=args.replace, label="--out", replace_hint="--replace")
    n_blank = len(every) - len(scored)
    kind = KINDS[model.kind].words
    if args.json:
        emit_json({"model": args.model, "kind": model.kind, "data": args.csv, "rows": len(every),
                   "scored": len(scored), "blank_missing": n_blank, "written": args.out,
                   "columns": [first] + outputs, "warnings": [t for _, t in args.warnings_seen]})
    else:
        print(f"{len(every)} rows of {args.csv} scored with {args.model} ({kind} model of '{target}'); written to "
              f"{args.out}")
        if n_blank:
            print(f"{n_blank} rows with a missing input value written with empty scores (--blank-missing)")
        print("columns: " + ", ".join([first] + outputs))
    return 0


def add_score_parser(sub: Any, common: Any) -> None:
    """Register the ``score`` subcommand."""
    p = sub.add_parser(
        "score", help="apply a model file (lintools JSON or PMML) to a CSV file and write the scores",
        description=(
            "Score every row of the CSV file with the model: its inputs are the columns of the same names (a "
            "categorical input is a text column). Writes, per input row, the --id column (or the row's line), the "
            "linear predictor(s), the mean or the class probabilities, and for classifiers the most likely label."),
    )
    p.add_argument("model", help="the model file: lintools JSON or PMML 4.4 (recognised by content)")
    p.add_argument("csv", help="CSV file with a header line: the rows to score")
    p.add_argument("--out", required=True, help="the CSV file to write (a new file unless --replace)")
    p.add_argument("--id", metavar="NAME", help="a column copied to the output to identify the rows (default: the "
                                                "line number, as column 'line')")
    p.add_argument("--blank-missing", action="store_true",
                   help="write a row with a missing input value with empty scores (default: such a row is an error)")
    p.add_argument("--replace", action="store_true", help="replace an existing --out file")
    common(p)
    p.set_defaults(run=run_score)
