"""Command-line options for reading a CSV file, shared by every command that reads one.

:func:`add_table_options` registers them; :func:`table_options` turns the parsed values
into keyword arguments of :func:`lintools.exchange.csv_table.read_table` (the rules are stated
there), refusing an option that the command does not use.
"""

from __future__ import annotations

import argparse
from typing import Any

from .common import column_list
from ..support.errors import InputError
from ..exchange.csv_table import MAX_BYTES, MAX_LEVELS, MAX_LINE_BYTES, MISSING_VALUES

__all__ = ["add_table_options", "table_options"]

_TAB = {"tab": "\t", "\\t": "\t", "TAB": "\t"}


def add_table_options(parser: argparse.ArgumentParser) -> None:
    """Register the options that say how a CSV file is read."""
    g = parser.add_argument_group("reading the CSV file")
    g.add_argument("--delimiter", metavar="CHAR",
                   help="the separator: one character, or 'tab' (default: the most frequent of comma, semicolon "
                        "and tab in the header line)")
    g.add_argument("--decimal", choices=[".", ","], default=".",
                   help="the decimal mark of numbers (default '.'; with ',' the separator must be another character)")
    g.add_argument("--missing-values", metavar="TOKENS",
                   help="comma-separated tokens read as missing values, replacing the default list "
                        f"({','.join(MISSING_VALUES)}); an empty cell is always missing")
    g.add_argument("--categorical", metavar="NAMES", action="append",
                   help="columns whose cells are levels (a feature becomes indicator columns, the target is "
                        f"read as labels); comma-separated, repeatable. Undeclared text features with at most "
                        f"{MAX_LEVELS} levels become indicator columns too")
    g.add_argument("--exclude", metavar="NAMES", action="append",
                   help="columns left out of the features (identifiers, dates, notes); comma-separated, repeatable")
    g.add_argument("--max-bytes", type=int, default=MAX_BYTES, metavar="N",
                   help=f"refuse a file larger than N bytes (default {MAX_BYTES})")
    g.add_argument("--max-line-bytes", type=int, default=MAX_LINE_BYTES, metavar="N",
                   help=f"refuse a line longer than N bytes (default {MAX_LINE_BYTES})")


def _joined(values: list[str] | None, option: str) -> list[str]:
    out: list[str] = []
    for text in values or []:
        out += column_list(text, option) or []
    return out


def table_options(args: argparse.Namespace, *uses: str, header: bool = False) -> dict[str, Any]:
    """Keyword arguments of :func:`lintools.exchange.csv_table.read_table` from the parsed options.

    ``uses`` names the column options the command applies (``"categorical"``,
    ``"exclude"``); giving another is an error.  ``header=True`` returns only what
    :func:`lintools.exchange.csv_table.read_header` takes.
    """
    for name in ("categorical", "exclude"):
        if getattr(args, name, None) and name not in uses:
            raise InputError(f"--{name} does not apply to this command; leave it out")
    delimiter = args.delimiter
    if delimiter is not None:
        delimiter = _TAB.get(delimiter, delimiter)
    out: dict[str, Any] = {"delimiter": delimiter, "decimal": args.decimal, "max_bytes": args.max_bytes,
                           "max_line_bytes": args.max_line_bytes}
    if header:
        return out
    if args.missing_values is not None:
        out["missing_values"] = [t.strip() for t in args.missing_values.split(",") if t.strip()]
    if "categorical" in uses:
        out["categorical"] = _joined(args.categorical, "--categorical")
    if "exclude" in uses:
        out["exclude"] = _joined(args.exclude, "--exclude")
    return out
