r"""The one likelihood driver: what every maximum-likelihood front shares.

A front (binary logistic, softmax, or any other family) validates its own input, builds
its loss and problem (:func:`checked_problem`) and hands the driver a **family**: an
object that knows its loss, how its rows run away when the estimate does not exist (its
divergence :class:`Watch` and sentence), its exact separation check, its remedies, its
null model and its record.  The driver owns the rest, once:

* the settings every likelihood fit takes (:func:`check_fit_settings`);
* the run with its divergence watch, and the exact check on an alarm
  (:func:`run_with_check`): a separated design raises, a false alarm resumes the fit;
* the final check at the answer (rows that ran away plus a remaining Newton move) and
  the diagnosis of a singular information matrix (:func:`solve_family`);
* the convergence record with its warnings (:func:`convergence_record`);
* the parts of the record every family reports the same way
  (:func:`likelihood_summary`, :func:`lr_statistic`).

The objective is the family's negative log-likelihood in the linear predictor plus its
penalty, minimised by the solvers of :mod:`lintools.engine`.

References
----------
Albert, A. & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in
logistic regression models. Biometrika 71, 1-10.
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed. Chapman & Hall.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from typing import Any, Callable, Protocol

import numpy as np

from ..support.errors import (
    InputError,
    IterationLimitWarning,
    LintoolsError,
    LintoolsWarning,
    SeparationError,
    warn_caller,
)
from ..support.linalg import default_rank_tolerance, dependency_sentence
from ..support.scaling import check_solver, scaled_back, wide_column_error
from ..support.threads import settle
from ..support.validate import check_finite, check_flag, check_nonnegative, check_positive_int
from ..engine import (
    SOLVERS,
    Evaluation,
    ExtremeSpread,
    IterationRecord,
    LinearModelProblem,
    NonFiniteDesign,
    SingularMatrixError,
    SolverResult,
    solve,
)
from ..engine.base import MEASURED, converged_message, limit_message
from .records import Convergence

__all__ = ["DEFAULT_TOL", "ETA_LIMIT", "ETA_SUSPECT", "MOVE_SUSPECT", "EXACT_CHECK_ENTRIES", "Family", "Solved",
           "Measured", "Watch", "check_fit_settings", "check_parameters_and_rows", "checked_problem", "constant_column_error", "constant_columns",
           "convergence_record", "final_evaluation", "ill_conditioned", "likelihood_summary", "lr_statistic", "rank_message",
           "run_with_check", "solve_family", "unless_scipy_missing"]

#: The default stopping tolerance of every likelihood fit: the max-abs gradient per unit
#: case weight with respect to the intercept and the standardised, centred columns
#: (see :mod:`lintools.engine`).
DEFAULT_TOL = 1e-13

#: |linear predictor| beyond which a row on the side of its outcome is a sign of divergence.
ETA_LIMIT = 30.0
#: At the answer, rows beyond this |eta| plus a large remaining Newton move call for the check.
ETA_SUSPECT = 15.0
#: Remaining Newton move of the linear predictor that, with such rows, signals divergence.
MOVE_SUSPECT = 0.1
#: Designs up to this many entries get the exact check whenever a fit ends unfinished.
EXACT_CHECK_ENTRIES = 10**6

_NO_SCIPY = ("so the maximum-likelihood estimate does not exist (Albert & Anderson 1984). The exact check "
             "needs SciPy (scipy.optimize.linprog), which is not installed.")


# ---- settings ------------------------------------------------------------------------------
def _check_tol(tol: Any) -> float:
    if isinstance(tol, bool) or not isinstance(tol, numbers.Real) or not math.isfinite(float(tol)) or tol <= 0:
        raise InputError(f"tol must be a finite number > 0 (the {MEASURED} at which to stop); got {tol!r}")
    return float(tol)


def check_parameters_and_rows(k: int, rows: int) -> None:
    """Without a penalty the design needs at least as many rows as parameters."""
    if k > rows:
        raise InputError(
            f"X has {k} columns with the intercept but only {rows} rows with positive weight; the "
            "unpenalised estimate is not unique: add rows, drop columns, or set l2 > 0"
        )


def check_fit_settings(intercept: Any, l2: Any, tol: Any, max_iter: Any, on_iteration: Any,
                       solver: Any = "newton") -> tuple[bool, float, float, int]:
    """The settings every likelihood fit shares, checked: ``(intercept, l2, tol, max_iter)``.

    ``solver`` must name one of the solvers (None, or anything else, is an InputError
    naming the choices; the block fits pass their only one, "newton")."""
    intercept = check_flag(intercept, "intercept")
    lam = check_nonnegative(l2, "l2")
    check_solver(solver, SOLVERS)
    tol = _check_tol(tol)
    max_iter = check_positive_int(max_iter, "max_iter")
    if on_iteration is not None and not callable(on_iteration):
        raise InputError(f"on_iteration must be a callable taking one record; got {type(on_iteration).__name__}")
    return intercept, lam, tol, max_iter


def constant_columns(Xa: np.ndarray, use: np.ndarray, names: tuple[str, ...],
                     spread: np.ndarray | None = None, centre: np.ndarray | None = None) -> None:
    """Raise on a column that is constant on the rows used.

    With the problem's weighted ``spread`` and ``centre`` of each column only the columns
    whose spread could be the rounding noise of a constant column (at most
    ``max(1e-6, 8 n eps)`` times the centre: the error of a weighted mean is below
    ``n eps`` of it) are checked exactly, so the usual case costs no pass over X.
    """
    if spread is not None and centre is not None:
        bound = max(1e-6, 8.0 * Xa.shape[0] * float(np.finfo(float).eps)) * np.abs(centre)
        cols = np.flatnonzero(~(np.isfinite(spread) & (spread > bound)))
        if not cols.size:
            return
    else:
        cols = np.arange(Xa.shape[1])
    rows = Xa[:, cols] if use.all() else Xa[np.ix_(use, cols)]
    const = cols[np.max(rows, axis=0) == np.min(rows, axis=0)]
    if const.size:
        j = int(const[0])
        raise constant_column_error(j, names[j])


def constant_column_error(column: int, name: str) -> InputError:
    """The error of a column constant on the rows used (aliased with the intercept)."""
    return InputError(
        f"X column {column} ('{name}') is constant on the rows used; it is aliased with the "
        "intercept: drop it, or pass intercept=False"
    )


def rank_message(Xa: np.ndarray, v: np.ndarray, intercept: bool, names: tuple[str, ...]) -> str | None:
    """A sentence naming linearly dependent columns on the rows used, or None (full rank)."""
    use = v > 0
    sw = np.sqrt(v[use])
    Xp = Xa[use]
    c = (v[use] @ Xp) / v[use].sum() if intercept else np.zeros(Xa.shape[1])
    A = (Xp - c) * sw[:, None]
    norms = np.linalg.norm(A, axis=0)
    A /= np.where(norms > 0, norms, 1.0)
    R = np.linalg.qr(A, mode="r")
    return dependency_sentence(R, norms, names, intercept, default_rank_tolerance(*A.shape))


def checked_problem(Xa: np.ndarray, found: Any, names: tuple[str, ...], loss: Any,
                    **settings: Any) -> LinearModelProblem:
    """The fit's problem; its first pass over ``Xa`` (the column moments) doubles as the
    finiteness check of the design, and a NaN or infinity is then named by row and column.
    A column whose spread float64 cannot standardise is refused naming it (``names``).
    The row threads of the fit are settled here, before its first pass, by its number of
    coefficients (:func:`lintools.support.threads.settle`)."""
    outputs = int(loss.outputs)
    settle((Xa.shape[1] + bool(settings.get("intercept", True))) * outputs, outputs)
    try:
        return LinearModelProblem(Xa, loss, **settings)
    except NonFiniteDesign:
        check_finite(Xa, "X", found)
        raise
    except ExtremeSpread as exc:
        term = f"'{names[exc.column]}'"
        if exc.top is not None:
            raise wide_column_error(exc.column, names[exc.column], exc.top) from None
        if exc.log10_variance is None:
            raise InputError(
                f"X column {exc.column} ({term}) has a weighted spread of {exc.spread:.3g}, so small that the ridge "
                f"on its standardised coefficient (l2 / spread^2) exceeds 1.8e308: rescale that column by a power "
                "of ten so that its spread is nearer 1 (its coefficient then scales by the inverse factor; the "
                "same l2 then penalises it in the new units), or fit without l2"
            ) from None
        raise InputError(
            f"the variance of the coefficient of {term} would be at least 1e{exc.log10_variance:.0f}, above "
            f"1.8e308, which float64 cannot hold (its column's weighted spread is {exc.spread:.3g}): rescale that "
            "column by a power of ten so that its spread is nearer 1 (its coefficient and standard error then "
            "scale by the inverse factor)"
        ) from None


# ---- the family ----------------------------------------------------------------------------
class Watch:
    """Divergence monitor: rows whose linear predictor runs off on the side of their outcome.

    A family gives ``runaway(eta, limit) -> (count, largest)`` and ``RUNAWAY``, the
    sentence that describes such rows (fields ``count``, ``limit``, ``top``)."""

    RUNAWAY = ""

    def __init__(self, loss: Any, offset: np.ndarray | None) -> None:
        self.loss, self.offset = loss, offset
        self.live = loss.row_weights() > 0

    def runaway(self, eta: np.ndarray, limit: float) -> tuple[int, float]:
        raise NotImplementedError

    def describe(self, count: int, limit: float, top: float) -> str:
        return self.RUNAWAY.format(count=count, limit=limit, top=top)

    def rows(self, z: np.ndarray, ev: Evaluation) -> tuple[int, float]:
        """The rows beyond :data:`ETA_LIMIT` at the evaluation ``ev`` of ``z``: (count, largest)."""
        return self.runaway(ev.eta, ETA_LIMIT)

    def __call__(self, z: np.ndarray, ev: Evaluation) -> str | None:
        count, top = self.rows(z, ev)
        return self.describe(count, ETA_LIMIT, top) if count else None


class Family(Protocol):
    """What a model family hands the driver (one object per fit, holding its data).

    ``watch`` is its :class:`Watch` (None when the estimate always exists, e.g. under a
    ridge); ``remedies`` the sentence that ends a separation error; ``separated`` how
    the no-SciPy divergence error names the failure ("(quasi-)completely separated");
    ``size`` the number of entries that decides whether an unfinished fit is checked
    exactly (at most :data:`EXACT_CHECK_ENTRIES`); ``singular_runaway`` whether a singular
    information without SciPy is blamed on rows that ran away when there are any."""

    watch: Watch | None
    remedies: str
    separated: str
    size: int
    singular_runaway: bool

    def exact_check(self) -> Any:
        """The exact separation check's diagnosis, or None without SciPy."""

    def rank_message(self) -> str | None:
        """The sentence naming dependent columns (None when full rank or penalised)."""

    def covariance(self, problem: Any, target: Any, z: np.ndarray) -> np.ndarray:
        """The covariance the record reports (raises SingularMatrixError)."""

    def newton_move(self, problem: Any, ev: Evaluation, V: np.ndarray) -> float:
        """The largest move of the linear predictor a further Newton step would make."""


def unless_scipy_missing(check: Callable[..., Any], *args: Any) -> Any:
    """``check(*args)``, or None when it needs SciPy and SciPy is not installed."""
    try:
        return check(*args)
    except LintoolsError as exc:
        if "SciPy" in str(exc):
            return None
        raise


def raise_separation(family: Family, diag: Any) -> None:
    raise SeparationError(f"{diag.describe()}. {family.remedies}.", diagnosis=diag)


# ---- the run -------------------------------------------------------------------------------
def final_evaluation(problem: Any, res: SolverResult) -> Evaluation:
    """The solver's (fresh) evaluation at its answer, or a new one."""
    ev = res.evaluation
    if ev is not None and ev.fresh and ev.eta is problem.eta(res.z):
        return ev
    return problem.evaluate(res.z, fresh=True)


def run_with_check(problem, solver, tol, max_iter, on_iteration, watch, check, on_separated, start=None):
    """Solve; on a divergence alarm run ``check()`` (the exact separation check, which
    returns a diagnosis or None without SciPy), call ``on_separated(diagnosis)`` (which
    raises) if separated, else go on.  Returns the solver result and whether the exact
    check ran."""
    res = solve(problem, solver, tol=tol, max_iter=max_iter, on_iteration=on_iteration, monitor=watch,
                start=start)
    if res.status != "diverging":
        return res, False
    diag = check()
    if diag is not None and diag.separated:
        on_separated(diag)
    done = res.iterations

    def shifted(record):
        on_iteration(IterationRecord(record.iteration + done, record.objective, record.gradient_norm, record.step))

    more = solve(problem, solver, tol=tol, max_iter=max(max_iter - done, 0),
                 on_iteration=shifted if on_iteration is not None else None, start=res.z)
    total = more.iterations + done
    if more.status == "converged":
        message = converged_message(more.solver, total, more.gradient_norm, tol)
    elif more.status == "iteration_limit":
        message = limit_message(more.solver, total, more.gradient_norm, tol)
    else:
        message = more.message
    merged = SolverResult(z=more.z, converged=more.converged, iterations=total, objective=more.objective,
                          gradient_norm=more.gradient_norm, status=more.status, message=message,
                          solver=more.solver, evaluation=more.evaluation)
    return merged, diag is not None


@dataclass(frozen=True)
class Solved:
    """The driver's answer: the solver's result, ``z`` (the problem's coordinates), the
    fresh evaluation there, the family's covariance and the convergence record."""

    result: SolverResult
    z: np.ndarray
    evaluation: Evaluation
    covariance: np.ndarray
    convergence: Convergence


def solve_family(family: Family, problem: Any, *, solver: str, tol: float, max_iter: int,
                 on_iteration: Callable[[IterationRecord], Any] | None, target: Any = None,
                 start: np.ndarray | None = None) -> Solved:
    """Fit ``problem`` (through ``target``, an affine restriction of it, when given) with
    the family's divergence watch, exact check, final check and singular diagnosis."""
    target = problem if target is None else target
    watch = family.watch
    try:
        res, checked = run_with_check(target, solver, tol, max_iter, on_iteration, watch, family.exact_check,
                                      lambda diag: raise_separation(family, diag), start=start)
    except SingularMatrixError as exc:
        _diagnose_singular(family, problem, f"the information matrix is singular ({exc})", False)
    z = target.embed(res.z) if target is not problem else res.z
    if res.status == "singular":
        _diagnose_singular(family, problem, res.message, checked, z)
    try:
        V = family.covariance(problem, target, z)
    except SingularMatrixError:
        _diagnose_singular(family, problem, "the information matrix is singular at the answer", checked, z)
    ev = final_evaluation(problem, res) if target is problem else problem.evaluate(z, fresh=True)
    if watch is not None and not checked:
        _final_check(family, problem, res, ev, V)
    return Solved(res, z, ev, V, convergence_record(res, ev, problem, z, solver))


def _no_scipy_error(family: Family, what: str) -> SeparationError:
    return SeparationError(f"the fit diverges: {what}: the classes appear {family.separated}, {_NO_SCIPY} "
                           f"{family.remedies}.")


def _diagnose_singular(family: Family, problem: Any, why: str, checked: bool, z: np.ndarray | None = None) -> None:
    """Raise the right error for a singular information: dependent columns (InputError),
    separation, or an ill-conditioned design."""
    msg = family.rank_message()
    if msg:
        raise InputError(msg)
    watch = family.watch
    if watch is not None and not checked:
        diag = family.exact_check()
        if diag is not None and diag.separated:
            raise_separation(family, diag)
        if diag is None and z is not None and family.singular_runaway:
            count, top = watch.runaway(problem.eta(z), ETA_SUSPECT)
            if count:
                raise _no_scipy_error(family, f"{watch.describe(count, ETA_SUSPECT, top)} when {why}")
    raise ill_conditioned(why)


def ill_conditioned(why: str) -> LintoolsError:
    """The error of a singular information on a full-rank design (``why`` says where)."""
    return LintoolsError(
        f"{why}: the design is full rank but too ill-conditioned for the fitted weights; "
        "rescale or drop nearly collinear columns, or set l2 > 0"
    )


def _final_check(family: Family, problem: Any, res: SolverResult, ev: Evaluation, V: np.ndarray) -> None:
    """At the answer: rows that ran away plus a remaining Newton move mean divergence."""
    watch = family.watch
    count, top = watch.runaway(ev.eta, ETA_SUSPECT)
    # an unfinished fit is checked when rows ran away or when the programme is cheap
    suspicious = res.status in ("iteration_limit", "stalled") and (count > 0 or family.size <= EXACT_CHECK_ENTRIES)
    move = 0.0
    if count:
        move = family.newton_move(problem, ev, V)
        suspicious = suspicious or move > MOVE_SUSPECT
    if not suspicious:
        return
    diag = family.exact_check()
    if diag is not None:
        if diag.separated:
            raise_separation(family, diag)
        return
    if count and move > MOVE_SUSPECT:
        raise _no_scipy_error(family, f"after {res.iterations} iteration(s) {watch.describe(count, ETA_SUSPECT, top)} "
                                      f"and a further Newton step would move it by {move:.3g}")


# ---- the record ----------------------------------------------------------------------------
def convergence_record(res: SolverResult, ev: Evaluation, problem: Any, z: np.ndarray, solver: str,
                       note: str = "") -> Convergence:
    """The fit's :class:`Convergence`; warns (our own classes) when the fit did not converge.

    A stalled fit's message names an attainable tol when the problem can estimate the
    rounding level of its gradient; ``note`` is appended to the message."""
    message = res.message
    if res.status == "stalled" and problem.rounding_known:
        level = problem.gradient_rounding(z)
        if math.isfinite(level):
            message += (f" (worst-case rounding level of this gradient {level:.1e}: "
                        f"tol = {10 * level:.0e} is attainable)")
    message += note
    conv = Convergence(
        converged=bool(res.converged), iterations=int(res.iterations), gradient_norm=ev.gradient_norm,
        objective=scaled_back(ev.value, problem.weight_scale, "objective"), solver=solver, message=message,
    )
    if res.status == "iteration_limit":
        warn_caller(message, IterationLimitWarning)
    elif not res.converged:
        warn_caller(message, LintoolsWarning)
    return conv


@dataclass(frozen=True)
class Measured:
    """A fit's likelihood figures at its answer, in the caller's weights: the
    log-likelihood, the deviance, the number of observations, the null deviance and the
    raw likelihood-ratio statistic (NaN under a ridge; see :func:`lr_statistic`)."""

    log_likelihood: float
    deviance: float
    n_observations: float
    null_deviance: float
    lr: float


def likelihood_summary(problem: Any, loss: Any, ev: Evaluation, observations: str) -> tuple[float, float, float]:
    """``(log_likelihood, deviance, n_observations)`` at the answer in the caller's weights
    (the loss holds the caller's weights divided by ``problem.weight_scale``);
    ``observations`` names the count in the error when it passes float64's range."""
    scale = problem.weight_scale
    loglik = scaled_back(loss.log_likelihood(ev.eta), scale, "log-likelihood")
    dev = scaled_back(loss.deviance(ev.eta), scale, "deviance")
    n_obs = scaled_back(float(loss.row_weights().sum()), scale, f"number of observations ({observations})")
    return loglik, dev, n_obs


def lr_statistic(raw: float) -> float:
    """The likelihood-ratio statistic from its raw value (twice the gain in log-likelihood
    over the null model; NaN under a ridge): at least 0 when finite."""
    return max(raw, 0.0) if math.isfinite(raw) else raw
