"""The engine's shortcuts for large problems, as one frozen settings object.

Each shortcut changes only the path to the optimum, never the answer: the stopping test
is always on the float64 gradient at a freshly evaluated point, and the covariance is
always formed in float64.  Each is switched on by a measured condition, stated here with
its default; :data:`EXACT_PATH` switches every one of them off, so a test can ask for the
plain float64 Newton path by value::

    with using(EXACT_PATH):
        fit = lintools.logistic(X, y)

The settings are read from a context variable when a solver runs, so they hold for the
calls made inside ``with using(...)`` in this thread (or asyncio task) only.
"""

from __future__ import annotations

import contextlib
import contextvars
import dataclasses
import math
from typing import Iterator

__all__ = ["EXACT_PATH", "FastPaths", "fast_paths", "using"]


@dataclasses.dataclass(frozen=True)
class FastPaths:
    """When the Newton engine takes each of its shortcuts.

    Attributes
    ----------
    single_min_rows : float
        Newton *steps* form their Hessian in float32 from this many rows (when the design
        is well enough conditioned for it; ``LinearModelProblem.step_hessian``).
    warm_min_rows : float
        Newton starts from the fit on a fixed row subsample from this many rows.
    sketch_min_rows : float
        A row-subsample Hessian (Newton sketch) is available from this many rows ...
    sketch_until : float
        ... and is used until the max-abs gradient has fallen below this fraction of
        its starting value; exact Hessians finish the job.
    reuse_ratio : float
        A factorised Hessian serves the next step too while a full step with it cut the
        max-abs gradient by at least this factor (a chord step); 0 never reuses.
    carry_above : float
        The line search's linear predictor ``eta + t X d`` is carried to the new point
        while the gradient is above this multiple of ``tol``.
    """

    single_min_rows: float = 50_000
    warm_min_rows: float = 50_000
    sketch_min_rows: float = 50_000
    sketch_until: float = 1e-3
    reuse_ratio: float = 1e-2
    carry_above: float = 1e4


#: Every shortcut off: float64 Hessians at every step, no warm start, no sketch, no
#: Hessian reuse, the linear predictor formed afresh at every point.
EXACT_PATH = FastPaths(single_min_rows=math.inf, warm_min_rows=math.inf, sketch_min_rows=math.inf,
                       sketch_until=math.inf, reuse_ratio=0.0, carry_above=math.inf)

_CURRENT: contextvars.ContextVar[FastPaths] = contextvars.ContextVar("lintools_fast_paths", default=FastPaths())


def fast_paths() -> FastPaths:
    """The settings in force."""
    return _CURRENT.get()


@contextlib.contextmanager
def using(settings: FastPaths) -> Iterator[FastPaths]:
    """Run the block with ``settings`` in force (restored afterwards, also on error)."""
    if not isinstance(settings, FastPaths):
        raise TypeError(f"using() takes a FastPaths; got {type(settings).__name__}")
    token = _CURRENT.set(settings)
    try:
        yield settings
    finally:
        _CURRENT.reset(token)
