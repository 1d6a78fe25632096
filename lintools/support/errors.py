"""The exception and warning family of lintools.

Every error the library raises on purpose derives from :class:`LintoolsError`, so a
caller can catch the whole family with one ``except`` clause.  Bad input raises
:class:`InputError`, which is also a :class:`ValueError`; its message names the
argument, the position (row, column or label) and the remedy.
"""

from __future__ import annotations

import os
import sys
import warnings

_PACKAGE = os.path.dirname(os.path.dirname(os.path.abspath(__file__))) + os.sep  # lintools/, above support/


class LintoolsError(Exception):
    """Root of every exception raised on purpose by lintools."""


class InputError(LintoolsError, ValueError):
    """An argument cannot be used as given; the message says which one and what to do."""


class SeparationError(LintoolsError, ValueError):
    """The maximum-likelihood estimate does not exist because the classes are separated.

    Attributes
    ----------
    diagnosis : object or None
        The separation diagnosis (direction and columns involved) when the exact check ran.
    """

    def __init__(self, message: str, diagnosis: object = None) -> None:
        super().__init__(message)
        self.diagnosis = diagnosis


class LintoolsWarning(UserWarning):
    """Root of every warning emitted by lintools."""


class IterationLimitWarning(LintoolsWarning):
    """A solver stopped at its iteration limit before meeting its tolerance."""


class IllConditionedWarning(LintoolsWarning):
    """The design is full rank but so ill-conditioned that digits are lost."""


def warn_caller(message: str, category: type[Warning]) -> None:
    """``warnings.warn`` attributed to the first frame outside lintools: the caller's line,
    however deep in the library (and through the row-thread wrapper) the warning arises."""
    frame, level = sys._getframe(1), 2
    while frame is not None and os.path.abspath(frame.f_code.co_filename).startswith(_PACKAGE):
        frame, level = frame.f_back, level + 1
    warnings.warn(message, category, stacklevel=level)
