"""Pieces shared by the command-line subcommands (see :mod:`lintools.cli`).

Nothing here is public API: the caution text, strict-JSON output, the progress callback
for long fits, and small readers for command-line values.
"""

from __future__ import annotations

import dataclasses
import json
import math
import sys
import time
from typing import Any, Callable, Sequence

import numpy as np

from ._errors import InputError

CAUTION = (
    "Caution: statistical agreement is not model validation. Where these results feed "
    "decisions about people (credit, health, safety), local regulation and your "
    "organisation's model-risk practice decide what is required."
)

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
            f"{record.objective:.12g}, max |gradient| {record.gradient_norm:.3g}",
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


def probabilities_from_text(values: Sequence[str], lines: Sequence[int], column: str, where: str) -> np.ndarray:
    """Parse a column of probabilities, naming the line of the first bad value."""
    out = np.empty(len(values))
    for i, (text, line) in enumerate(zip(values, lines)):
        try:
            v = float(text)
        except ValueError:
            raise InputError(f"{where!r} line {line}, column '{column}': {text!r} is not a number") from None
        if not (0.0 <= v <= 1.0):
            raise InputError(
                f"{where!r} line {line}, column '{column}': {text!r} is not a probability in [0, 1]"
            )
        out[i] = v
    return out


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
