r"""Fits over data that arrive in row blocks: out of core, or on a Dask cluster.

The data are never held whole.  The caller passes ``source``, a function of no
arguments that returns a *fresh* iterator of blocks on every call; each block is
``(X_block, y_block)`` or ``(X_block, y_block, weights_block)``.  Every fit reads the
blocks in one or more *passes*; a pass maps each block to a small summary (an R factor,
or a gradient and a curvature matrix) and reduces the summaries pairwise, as a binary
tree.  Alternatively ``X`` and ``y`` (and ``weights``) may be row-chunked dask arrays:
the same passes then run as a map over the chunks and a tree reduction on the Dask
scheduler (see :mod:`lintools.blocks.dask_runner`; dask is imported only then).

Every pass must read the same data: each block's shape, values and order are checked
against the first pass by a checksum taken on every pass (the sum of X, which is also the
finiteness check, the sum of every seventh value, the first and last rows, the same sums
of y and the weights, and each label's first row and total weight; see
:class:`lintools.blocks.stream.BlockChecksums`).  A source that returns other rows on a
later pass (drawn afresh, shuffled, or with noise added) is refused with an
:class:`lintools.InputError` naming the block, instead of giving a fit of no data set.
Measured by ``benchmarks/block_checksum.py`` (2 cores, one BLAS thread), the checksums
cost 0.8-2.0% of a later pass.  Blocks whose sums overflow float64 are summed again at
a power-of-two scale, so finite extreme values are not mistaken for non-finite ones; a
column whose largest magnitude times the total weight would overflow the fits' sums is
refused by name, as in the in-memory fits.

Least squares (:func:`least_squares_blocks`) minimises

.. math::

    \tfrac12 \sum_i w_i (y_i - b - x_i^\top\beta)^2 + \tfrac{\lambda}{2}\lVert\beta\rVert^2

by TSQR (Demmel et al. 2012).  Pass 1: each block's weighted columns ``[X, y]`` are
centred at the block's own weighted mean and reduced to a Householder R factor; two
summaries ``(W_a, m_a, R_a)`` and ``(W_b, m_b, R_b)`` combine into the R factor of
``[R_a; R_b; sqrt(W_a W_b / W) (m_b - m_a)']`` with ``W = W_a + W_b`` and mean
``m_a + (W_b / W)(m_b - m_a)``.  This is exact algebra (the centred cross-product matrix
of a union is the sum of the parts' plus the between-means term; Chan, Golub & LeVeque
1983), so every factor stays centred at the exact mean of its rows and no column mean
ever cancels against its spread.  The ridge enters as ``p`` extra rows
``sqrt(l2) / s_j`` of the column-scaled factor.  Passes 2+: the residual of the answer
in extended precision (``numpy.longdouble``), which gives the RSS, the gradient and a
corrected step through the same factor (corrected semi-normal equations; Bjorck 1987),
repeated until the correction is at the rounding level (at most ``MAX_REFINE`` times).
The result is the :class:`lintools.LinearFit` that :func:`lintools.least_squares` gives
on the concatenated rows (classical covariance, case weights).

Logistic regression (:func:`logistic_blocks`) minimises

.. math::

    -\sum_i w_i\,[\,y_i\log\mu_i + (1 - y_i)\log(1-\mu_i)\,] + \tfrac{\lambda}{2}\lVert\beta\rVert^2,
    \qquad \mu_i = 1 / (1 + e^{-(b + x_i^\top\beta)}),

by Newton-Raphson with step halving (:func:`lintools.engine.newton.newton`, the solver
of the in-memory fit) on a problem whose every evaluation is one pass: it sums the
objective, the gradient and the information ``[1, X]' W [1, X]`` over the blocks (in the
standardised coordinates of :class:`lintools.engine.LinearModelProblem`; the centres
and scales come from a first pass, which also checks the rank).  A trial step of the line
search is a pass that also evaluates the trial point, so an accepted full step costs one
pass.  It stops on the rule of the in-memory fit: the max-abs gradient per unit of total
case weight, with respect to the intercept and the standardised, centred columns, is
``<= tol`` (each block is centred before any product, and the weights are divided by the
largest one, so neither a column far from zero nor the weights' scale moves the answer).

Softmax (multinomial logistic) regression (:func:`softmax_blocks`) minimises

.. math::

    -\sum_i w_i \log \pi_{i c_i} + \tfrac{\lambda}{2}\lVert B\rVert_F^2,
    \qquad \pi_{ik} = \frac{\exp(b_k + x_i^\top B_{\cdot k})}{\sum_j \exp(b_j + x_i^\top B_{\cdot j})},

the same way: the first pass also keeps every label with its total weight (the classes,
the check that each has positive weight, the starting intercepts and the closed-form
null deviance :math:`-2\sum_k W_k\log(W_k/W)`); later passes code ``y`` as class indices
and sum the objective, the gradient and the ``K' x K'`` blocks of the information
``[1, X]' W_{km} [1, X]`` (``K' = K - 1`` free classes with a reference class, ``K`` in
the symmetric form, which needs ``l2 > 0`` and is solved in the subspace orthogonal to
the shared shift of the intercepts, as :func:`lintools.softmax` does).  Separation shows
as rows whose own class leads every other by more than 30 in the linear predictor
(Albert & Anderson 1984).  The result is the :class:`lintools.SoftmaxFit` of
:func:`lintools.softmax` on the concatenated rows.

References
----------
Demmel, J., Grigori, L., Hoemmen, M. & Langou, J. (2012). Communication-optimal parallel
and sequential QR and LU factorizations. SIAM J. Sci. Comput. 34, A206-A239.
Chan, T. F., Golub, G. H. & LeVeque, R. J. (1983). Algorithms for computing the sample
variance: analysis and recommendations. The American Statistician 37, 242-247.
Bjorck, A. (1987). Stability analysis of the method of seminormal equations for linear
least squares problems. Linear Algebra and its Applications 88/89, 31-48.
Albert, A. & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in
logistic regression models. Biometrika 71, 1-10.
McCullagh, P. & Nelder, J. A. (1989). Generalized Linear Models, 2nd ed., sec. 6.4.
Chapman & Hall.
"""

from __future__ import annotations

from .logistic import logistic_blocks
from .softmax import softmax_blocks
from .least_squares import least_squares_blocks

__all__ = ["least_squares_blocks", "logistic_blocks", "softmax_blocks"]
