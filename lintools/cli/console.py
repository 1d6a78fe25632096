"""What the command line says, and where (see :mod:`lintools.cli`).

* Standard output carries only what a command was asked for: its report, summary or JSON
  document.  Notes (which class is modelled, dropped lines), library warnings, progress
  lines and the caution paragraph go to standard error, and ``--quiet`` silences them;
  errors are always shown.
* Messages raised by the library name its Python arguments (``firth=True``, ``l2 > 0``,
  ``max_iter``, ``replace=True``...).  Under the command line they are translated to the
  options that do the same (:func:`translate`, one table: :data:`REMEDY_FLAGS`).
* A warning prints as one line, ``lintools: warning: ...`` (:func:`warnings_to_stderr`).
* A reader that goes away (``lintools fit ... | head -1``) ends the output quietly; the
  command still finishes and returns its own exit status (:class:`QuietPipe`).
"""

from __future__ import annotations

import contextlib
import os
import re
import sys
import warnings
from typing import Any, Iterator

CAUTION = (
    "Caution: statistical agreement is not model validation. Where these results feed "
    "decisions about people (credit, health, safety), local regulation and your "
    "organisation's model-risk practice decide what is required."
)

#: Library phrases (Python arguments) and the command-line options that do the same, in
#: the order they are tried.  Each pattern starts a word (it is not preceded by a letter,
#: digit, ``_`` or ``-``, so an option already spelt ``--l2`` is left alone), and text in
#: quotes that are not part of a ``name='value'`` phrase (labels, column names, paths)
#: is never touched.
REMEDY_FLAGS: tuple[tuple[str, str], ...] = (
    (r"firth=True", "--firth"),
    (r"l2\s*>\s*0(?![\d.])", "--l2 above 0"),
    (r"l2\s*==?\s*0(?![\d.])", "--l2 0"),
    (r"l2\s*=\s*", "--l2 "),
    (r"max_iter", "--max-iter"),
    (r"solver='(\w+)'", r"--solver \1"),
    (r"solver=", "--solver "),
    (r"target=", "--target "),
    (r"covariance='(\w+)'", r"--covariance \1"),
    (r"reference=None", "--symmetric"),
    (r"reference='first'", "--reference first"),
    (r"replace=True", "--replace"),
    (r"rank_deficient='minimum_norm'", "--minimum-norm"),
    (r"weight_type='(\w+)'", r"--weight-type \1"),
    (r"intercept=False", "--no-intercept"),
    (r"intercept=True", "an intercept (leave out --no-intercept)"),
    (r"drop_missing(=True)?", "--drop-missing"),
    (r"decimal='([^']*)'", r"--decimal '\1'"),
    (r"delimiter=(\S+) \(--delimiter \S+\)", r"--delimiter \1"),
    (r"delimiter='([^']*)'", r"--delimiter '\1'"),
    (r"delimiter=", "--delimiter "),
    (r"missing_values=\[\.\.\.\]", "--missing-values TOKENS"),
    (r"missing_values=?", "--missing-values"),
    (r"categorical=\[([^\]]*)\]", r"--categorical \1"),
    (r"exclude=\[([^\]]*)\]", r"--exclude \1"),
    (r"features=\[\.\.\.\]", "--features NAMES"),
    (r"max_line_bytes=?", "--max-line-bytes"),
    (r"max_bytes=?", "--max-bytes"),
    (r"leave bins=None", "leave out --bins"),
    (r"bins=None", "no --bins"),
    (r"positive=<label of the positive class>", "--positive LABEL"),
    (r"(positive|reference|k)=(?=[\s),;]|$)", r"--\1"),
    (r"(positive|reference|k)=", r"--\1 "),
    (r"k\s*(<=|>=|<|>)", r"--k \1"),
    (r"tol\s*=\s*", "--tol "),
    (r"tol\b", "--tol"),
    (r"seed\b", "--seed"),
)

_RULES = [re.compile(r"(?<![\w.-])" + pattern) for pattern, _ in REMEDY_FLAGS]
#: One scan from left to right: at each place the first rule that matches there wins, and
#: text in quotes that is not the value of a ``name='value'`` phrase (labels, column
#: names, paths) is passed over whole, so a quote inside it never starts a phrase.
_SCAN = re.compile("|".join([r"(?P<quoted>(?<![=\w])'[^'\n]*'|(?<![=\w])\"[^\"\n]*\")"]
                            + [f"(?P<r{i}>{rule.pattern})" for i, rule in enumerate(_RULES)]))


def _replace(m: re.Match) -> str:
    if m.group("quoted") is not None:
        return m.group()
    i = int(m.lastgroup[1:]) if m.lastgroup else next(
        j for j in range(len(_RULES)) if m.group(f"r{j}") is not None)
    return _RULES[i].sub(REMEDY_FLAGS[i][1], m.group(), count=1)


#: A remedy written for both readers, ``(python phrase; on the command line --option ...)``
#: (see :func:`lintools.exchange.csv_columns._both`): the command line keeps the option alone.
_BOTH = re.compile(r"\(([^()]*?); on the command line ([^()]*)\)")


def translate(message: str) -> str:
    """``message`` with the library's Python-argument phrases replaced by command-line options."""
    return _SCAN.sub(_replace, _BOTH.sub(r"(\2)", message))


def report_text(fit: Any) -> str:
    """``fit.report()`` with its convergence message (which may name ``max_iter``) translated."""
    message = fit.convergence.message
    return fit.report().replace(message, translate(message)) if message else fit.report()


def one_line(text: str) -> str:
    """``text`` with its line breaks and runs of blanks made single spaces."""
    return " ".join(text.split())


class Console:
    """Notes, warnings and the caution on standard error, unless ``quiet``."""

    def __init__(self, quiet: bool) -> None:
        self.quiet = quiet
        self.shown: set[str] = set()

    def note(self, text: str) -> None:
        """``lintools: <text>`` on standard error."""
        if not self.quiet:
            print(f"lintools: {text}", file=sys.stderr)

    def warning(self, text: str) -> None:
        """``lintools: warning: <text>`` on standard error, each distinct text once."""
        text = one_line(translate(text))
        if not self.quiet and text not in self.shown:
            self.shown.add(text)
            print(f"lintools: warning: {text}", file=sys.stderr)

    def caution(self) -> None:
        """The caution paragraph on standard error (never mixed with requested output)."""
        if not self.quiet:
            print(CAUTION, file=sys.stderr)


@contextlib.contextmanager
def warnings_to_stderr(console: Console) -> Iterator[list[tuple[type, str]]]:
    """Show every warning raised inside as one line through ``console``.

    Yields the list of ``(category, translated message)`` of the warnings seen, for the
    commands that put them into their JSON document or decide their exit status by them.
    """
    seen: list[tuple[type, str]] = []

    def show(message: Any, category: type, filename: str, lineno: int, file: Any = None, line: Any = None) -> None:
        seen.append((category, one_line(translate(str(message)))))
        console.warning(str(message))

    with warnings.catch_warnings():
        warnings.simplefilter("always")
        warnings.showwarning = show
        yield seen


class QuietPipe:
    """A text stream that goes silent once its reader has closed the pipe.

    The first ``BrokenPipeError`` points the stream's file descriptor at the null device
    (so that nothing written later, nor the interpreter's final flush, fails) and every
    later write is dropped.
    """

    def __init__(self, stream: Any) -> None:
        self.stream = stream
        self.gone = False

    def write(self, text: str) -> int:
        if not self.gone:
            try:
                self.stream.write(text)
            except BrokenPipeError:
                self._reader_gone()
        return len(text)

    def flush(self) -> None:
        if not self.gone:
            try:
                self.stream.flush()
            except BrokenPipeError:
                self._reader_gone()

    def _reader_gone(self) -> None:
        self.gone = True
        try:
            null = os.open(os.devnull, os.O_WRONLY)
            try:
                os.dup2(null, self.stream.fileno())
            finally:
                os.close(null)
        except (OSError, ValueError, AttributeError):
            pass

    def __getattr__(self, name: str) -> Any:
        return getattr(self.stream, name)
