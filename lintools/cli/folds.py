"""``lintools folds``: a copy of a CSV file with a stratified fold-id column added.

The folds come from :func:`lintools.stratified_folds` on the label column (groups, when
given, are never split).  The new file holds every line of the input, unchanged, with
the fold id (0 to k-1) as its last field; it is written to a temporary file and renamed
into place, and it may be neither the input nor an existing file (unless ``--replace``).
The command prints the rows and the count of every class per fold, so the balance can be
seen without opening the file.
"""

from __future__ import annotations

import argparse
import csv
import io
from typing import Any

import numpy as np

from .common import MAX_SEED, check_output_paths, emit_json, whole
from .table_options import table_options
from ..support.errors import InputError


def _raw_rows(path: str, delimiter: str, max_bytes: int) -> list[list[str]]:
    """The fields of every line of the CSV file, as written (header first)."""
    from ..support.files import read_bounded

    raw = read_bounded(path, "CSV file", max_bytes)
    try:
        return list(csv.reader(io.StringIO(raw.decode("utf-8-sig"), newline=""), delimiter=delimiter))
    except (csv.Error, UnicodeDecodeError) as exc:
        raise InputError(f"{path!r} is not a readable CSV file ({exc})") from None


def _balance(labels: list, folds: np.ndarray, k: int) -> tuple[list[str], np.ndarray]:
    """The classes (as text, sorted) and the (k, classes) table of counts per fold."""
    classes = sorted({str(v) for v in labels})
    index = {c: j for j, c in enumerate(classes)}
    counts = np.zeros((k, len(classes)), dtype=np.int64)
    np.add.at(counts, (folds, [index[str(v)] for v in labels]), 1)
    return classes, counts


def _balance_text(classes: list[str], counts: np.ndarray) -> str:
    def line(name: str, row: np.ndarray) -> str:
        total = int(row.sum())
        parts = ", ".join(f"'{c}' {int(n)} ({100.0 * n / total:.1f}%)" for c, n in zip(classes, row))
        return f"{name}: {total} rows; {parts}"

    rows = [line(f"fold {j}", counts[j]) for j in range(counts.shape[0])]
    return "\n".join(rows + [line("all", counts.sum(axis=0))])


def run_folds(args: argparse.Namespace) -> int:
    """The ``folds`` subcommand."""
    from ..support.files import write_atomic
    from ..splitting.stratified import stratified_folds
    from ..exchange.csv_table import read_table

    check_output_paths([("CSV file", args.csv)], [("--out", args.out)], args.replace)
    extra = [args.label] + ([args.groups] if args.groups else [])
    options = table_options(args)
    table = read_table(args.csv, target=None, features=[], extra=extra, **options)
    rows = _raw_rows(args.csv, table.delimiter, options["max_bytes"])
    header = rows[0] if rows else []
    if args.column in [h.strip() for h in header]:
        raise InputError(f"the file already has a column named '{args.column}'; pass another --column")
    groups = table.extra[args.groups] if args.groups else None
    labels = list(table.extra[args.label])
    folds = stratified_folds(labels, k=args.k, seed=args.seed, groups=groups)
    by_line = dict(zip(table.lines.tolist(), folds.tolist()))
    text = io.StringIO(newline="")
    writer = csv.writer(text, delimiter=table.delimiter)  # the input's own separator
    writer.writerow(header + [args.column])
    for lineno, row in enumerate(rows[1:], start=2):
        if lineno in by_line:
            writer.writerow(row + [by_line[lineno]])
    write_atomic(args.out, text.getvalue(), replace=args.replace, label="--out", replace_hint="--replace")
    classes, counts = _balance(labels, folds, args.k)
    if args.json:
        emit_json({"folds": args.k, "rows_per_fold": counts.sum(axis=1), "written": args.out, "label": args.label,
                   "classes": classes, "class_counts_per_fold": counts})
    else:
        print(f"{len(folds)} rows in {args.k} folds, stratified on '{args.label}'; written to {args.out}")
        print(_balance_text(classes, counts))
    return 0


def add_folds_parser(sub: Any, common: Any) -> None:
    """Register the ``folds`` subcommand."""
    p = sub.add_parser("folds", help="add a stratified fold-id column to a CSV file")
    p.add_argument("csv", help="CSV file with a header line")
    p.add_argument("--label", required=True, help="the class-label column to stratify on")
    p.add_argument("--k", type=whole(2), default=5, help="number of folds (default 5)")
    p.add_argument("--seed", type=whole(0, MAX_SEED), default=0, help=f"seed of the split, 0 to {MAX_SEED} (default 0)")
    p.add_argument("--groups", help="column of group labels; a group is never split")
    p.add_argument("--column", default="fold", help="name of the new column (default 'fold')")
    p.add_argument("--out", required=True, help="the CSV file to write (a new file unless --replace)")
    p.add_argument("--replace", action="store_true", help="replace an existing --out file")
    common(p)
    p.set_defaults(run=run_folds)
