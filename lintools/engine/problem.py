r"""The linear-predictor problem behind every fit: loss, design, penalty, coordinates.

:class:`LinearModelProblem` is the problem for ``eta = offset + b + X beta`` (or, for a
loss with ``K`` outputs, ``eta = offset + 1 b' + X B`` with ``z`` the (p+1, K) array
flattened row by row)::

    F(b, beta) = loss(eta) + l2/2 |beta|^2                      (firth=False)
    F(b, beta) = loss(eta) - 1/2 log det I(b, beta)             (firth=True, Firth 1993)

with ``I = [1 X]' W [1 X]`` the Fisher information.  It works in standardised
coordinates: with centres ``c`` (weighted column means when there is an intercept) and
scales ``s`` (weighted standard deviations),
``z = (a, g)`` with ``beta = g / s`` and ``b = a - c' beta``.  The design is never copied
whole: products with ``X`` go straight to BLAS, and the Hessian is accumulated over
blocks of rows as ``B' B`` with ``B = sqrt(W) [1, (X - c) / s]`` (or from the uncentred
``sqrt(W) X``, centred afterwards, while the means are small against the spreads; see
:mod:`lintools.engine.kernels`).  Large problems also
offer ``warm_start`` (the optimum on a row subsample), ``step_hessian`` (a Hessian formed
in float32 when a test of conditioning allows, for Newton steps only) and carry the line
search's linear predictor to the next point (see :mod:`lintools.engine.newton`).

What depends on the number of outputs and on Firth's penalty is decided once, when the
problem is made: ``LinearModelProblem(X, loss, ...)`` returns the variant for the loss and
the penalty, each a subclass of :class:`LinearModelProblem`:

* :class:`OneOutputProblem` (:mod:`lintools.engine.problem_one`): one output;
* :class:`MultiOutputProblem` (:mod:`lintools.engine.problem_multi`): K outputs;
* :class:`FirthProblem` (:mod:`lintools.engine.problem_firth`): one output with Firth's
  penalty (none of the shortcuts of large problems).

The shared part is in :mod:`lintools.engine.problem_base` (design, standardisation,
coordinates, linear predictor, gradient), :mod:`lintools.engine.problem_passes` (passes
over the design), :mod:`lintools.engine.problem_fast` (the shortcuts of large problems)
and :mod:`lintools.engine.problem_line` (the line search).

References
----------
Firth, D. (1993). Bias reduction of maximum likelihood estimates. Biometrika 80, 27-38.
Pilanci, M. & Wainwright, M. J. (2017). Newton sketch: a near linear-time optimization
algorithm with linear-quadratic convergence. SIAM J. Optimization 27, 205-245.
Nocedal, J. & Wright, S. J. (2006). Numerical Optimization, 2nd ed. Springer.
"""

from .problem_base import LinearModelProblem
from .problem_firth import FirthProblem
from .problem_line import _Line  # noqa: F401  (the line search, for the contract tests)
from .problem_multi import MultiOutputProblem
from .problem_one import OneOutputProblem

__all__ = ["LinearModelProblem", "OneOutputProblem", "MultiOutputProblem", "FirthProblem"]
