"""``lintools stability DEV RECENT``: has the population moved since the model was built?

Every column of the development file (or those of ``--columns``, and the score column of
``--probability``) is compared with the same column of the recent file by the population
stability index (:func:`lintools.population_stability`): numeric columns in bins at the
development sample's weighted quantiles, text columns by category.  Both files are read
with the same options and the rules of :func:`lintools.read_table`; a text column is
compared by its categories (rebuilt from the reader's indicator columns).

With ``--by COLUMN`` the comparison is repeated within each segment (the values of that
column in either file) after the one over all rows.  A segment with fewer than
:data:`lintools.cli.common.SMALL_SEGMENT_ROWS` rows per bin in either file is flagged as
small (its index is inflated by chance); a segment absent from one file is flagged and not
compared.
"""

from __future__ import annotations

import argparse
from typing import Any

import numpy as np

from .common import SMALL_SEGMENT_ROWS, column_list, emit_json, segment_heading, segments
from ..support.errors import InputError


def _columns(table: Any, header: tuple[str, ...]) -> dict[str, np.ndarray]:
    """Each source column of a table read by :func:`read_table`: numbers as floats, text
    columns as their categories (object arrays), rebuilt from the indicator columns."""
    out: dict[str, np.ndarray] = {}
    index = {name: j for j, name in enumerate(table.names)}
    for name in header:
        if name in index:
            out[name] = table.X[:, index[name]]
        elif name in table.reference_levels:
            values = np.full(table.X.shape[0], table.reference_levels[name], dtype=object)
            for level_name, j in index.items():
                if level_name.startswith(name + "=") and level_name not in header:
                    values[table.X[:, j] == 1.0] = level_name[len(name) + 1:]
            out[name] = values
    return out


def _read(path: str, args: argparse.Namespace, features: list[str] | None) -> tuple[Any, dict[str, np.ndarray]]:
    from .table_options import table_options
    from ..exchange.csv_table import read_header, read_table

    extra = [args.by] if args.by else []
    table = read_table(path, target=None, features=features, weights=args.weights, extra=extra,
                       drop_missing=args.drop_missing, **table_options(args, "categorical", "exclude"))
    return table, _columns(table, read_header(path, **table_options(args, "categorical", "exclude", header=True)))


def _compare(dev: dict, recent: dict, names: list[str], rows: tuple[np.ndarray, np.ndarray],
             weights: tuple[Any, Any], bins: int, files: tuple[str, str]) -> dict[str, Any]:
    from ..metrics.stability import population_stability

    out = {}
    for name in names:
        e, a = dev[name][rows[0]], recent[name][rows[1]]
        if (e.dtype == object) != (a.dtype == object):
            kinds = ["text" if v.dtype == object else "numbers" for v in (e, a)]
            raise InputError(f"column '{name}' holds {kinds[0]} in {files[0]!r} but {kinds[1]} in {files[1]!r}; "
                             "declare it with --categorical to compare it by category in both")
        w = None if weights[0] is None else weights[0][rows[0]]
        v = None if weights[1] is None else weights[1][rows[1]]
        out[name] = population_stability(e, a, bins=bins, weights=w, actual_weights=v)
    return out


def stability_table(results: dict[str, Any], score: str | None) -> str:
    """One line per column: its bins, index and reading (the score column marked)."""
    width = max(8, *(len(n) for n in results)) + 2
    lines = ["column".ljust(width) + "bins".rjust(6) + "index".rjust(10) + "  reading", "-" * (width + 30)]
    for name, r in results.items():
        tag = " (score)" if name == score else ""
        lines.append(name.ljust(width) + str(len(r.contribution)).rjust(6) + f"{r.index:.4f}".rjust(10)
                     + f"  {r.reading}{tag}")
    return "\n".join(lines)


def run_stability(args: argparse.Namespace) -> int:
    """The ``stability`` subcommand."""
    from ..metrics.stability import READING_BANDS

    chosen = column_list(args.columns, "--columns")
    if chosen is not None and args.probability and args.probability not in chosen:
        chosen = [args.probability] + chosen
    dev_table, dev = _read(args.dev, args, chosen)
    names = [n for n in dev if n != args.by]
    if args.probability and args.probability not in names:
        raise InputError(f"--probability column '{args.probability}' is not a feature column of {args.dev!r} "
                         "(excluded, or the weights or --by column?); name a column of scores")
    if args.probability:
        if dev[args.probability].dtype == object:
            raise InputError(f"--probability column '{args.probability}' holds text in {args.dev!r}; pass the "
                             "column of scores")
        names = [args.probability] + [n for n in names if n != args.probability]
    if not names:
        raise InputError(f"{args.dev!r} has no column to compare; name them with --columns")
    recent_table, recent = _read(args.recent, args, names)
    files = (args.dev, args.recent)
    weights = (dev_table.weights, recent_table.weights)
    every = (np.ones(dev_table.X.shape[0], dtype=bool), np.ones(recent_table.X.shape[0], dtype=bool))
    overall = _compare(dev, recent, names, every, weights, args.bins, files)
    segments_done = []
    if args.by:
        small = SMALL_SEGMENT_ROWS * args.bins
        for value, rows in segments(dev_table.extra[args.by], recent_table.extra[args.by]):
            counts = (int(rows[0].sum()), int(rows[1].sum()))
            entry = {"segment": value, "dev_rows": counts[0], "recent_rows": counts[1],
                     "small": min(counts) < small, "columns": None, "note": None}
            if min(counts) == 0:
                entry["note"] = f"absent from {files[counts.index(0)]!r}: not compared"
            else:
                try:
                    entry["columns"] = _compare(dev, recent, names, rows, weights, args.bins, files)
                except InputError as exc:  # e.g. every weight of the segment is zero
                    entry["note"] = f"not compared: {exc}"
            segments_done.append(entry)
    low, high = READING_BANDS
    if args.json:
        emit_json({"dev": args.dev, "recent": args.recent, "score": args.probability, "bins": args.bins,
                   "dev_rows": dev_table.X.shape[0], "recent_rows": recent_table.X.shape[0],
                   "dropped_rows": [dev_table.dropped, recent_table.dropped], "columns": overall, "by": args.by,
                   "segments": segments_done, "warnings": [text for _, text in args.warnings_seen]})
        return 0
    print(f"Population stability of {args.recent!r} ({recent_table.X.shape[0]} rows) against {args.dev!r} "
          f"({dev_table.X.shape[0]} rows), {len(names)} columns; readings of common practice: below {low:g} "
          f"stable, {low:g} to {high:g} moderate shift, above {high:g} major shift (not a test)\n")
    print(stability_table(overall, args.probability) + "\n")
    for name, r in overall.items():
        print(f"Column '{name}'" + (" (score)" if name == args.probability else "") + ":\n" + r.report())
    for entry in segments_done:
        flag = (f"fewer than {SMALL_SEGMENT_ROWS} rows per bin in a file; the index is inflated by chance"
                if entry["small"] else None)
        print(segment_heading(args.by, entry["segment"], f"{entry['dev_rows']} rows in {args.dev!r}, "
                              f"{entry['recent_rows']} in {args.recent!r}", flag))
        print((stability_table(entry["columns"], args.probability) if entry["columns"] else f"  {entry['note']}") + "\n")
    args.console.caution()
    return 0


def add_stability_parser(sub: Any, common: Any) -> None:
    """Register the ``stability`` subcommand."""
    from .common import whole

    p = sub.add_parser(
        "stability",
        help="population stability index of every column of a recent CSV file against a development one",
        description=(
            "Compares each column (and the score of --probability) of RECENT with the same column of DEV by the "
            "population stability index: numbers in bins at DEV's weighted quantiles, text by category. The "
            "readings (below 0.1 stable, 0.1 to 0.25 moderate shift, above 0.25 major shift) are common practice, "
            "not a test. --by repeats the comparison per segment; small segments are flagged."
        ),
    )
    p.add_argument("dev", help="the development CSV file (the expected population)")
    p.add_argument("recent", help="the recent CSV file (the actual population)")
    p.add_argument("--columns", help="columns to compare, comma-separated (default: every column of DEV)")
    p.add_argument("--probability", help="the score column (compared first and marked as the score)")
    p.add_argument("--weights", help="column of case weights, in both files")
    p.add_argument("--by", metavar="COLUMN", help="also compare within each segment of this column")
    p.add_argument("--bins", type=whole(1), default=10, help="quantile bins of numeric columns (default 10)")
    p.add_argument("--drop-missing", action="store_true", help="drop lines with missing values instead of stopping")
    common(p)
    p.set_defaults(run=run_stability)
