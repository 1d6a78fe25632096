r"""Collinearity of a design: variance inflation factors, and condition indices with
variance-decomposition proportions (Belsley, Kuh & Welsch 1980).

* The **variance inflation factor** of column :math:`j` is :math:`1/(1 - R_j^2)`, with
  :math:`R_j^2` that of the regression of column :math:`j` on the others (and an
  intercept): how much the variance of its coefficient grows because the other columns
  explain it.  It is the :math:`j`-th diagonal entry of the inverse correlation matrix;
  here :math:`\sum_k v_{jk}^2 / d_k^2` from the singular values :math:`d_k` and right
  singular vectors :math:`v_k` of the centred design with unit columns (never a matrix
  inverse).
* The **condition indices** :math:`\eta_k = d_{\max} / d_k` are those of the design with
  a column of ones (not centred: a dependency with the constant is one of those sought)
  and every column scaled to unit length; the **variance-decomposition proportions**
  :math:`\pi_{kj} = (v_{jk}^2 / d_k^2) / \sum_l v_{jl}^2 / d_l^2` split the variance of
  each coefficient over the dimensions.  A high index with two or more large proportions
  names the columns of a near dependency.

Case weights enter as :math:`\sqrt{w}` on the rows (a weight of 2 is two copies of the
row); columns are divided by powers of two and centred in two steps (the rounded weighted
mean, then the weighted mean of what is left) before anything else, so neither the scale
of a column nor a shift of it (a time stamp of 1.7e9) costs digits of the factors.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..support.errors import InputError
from ..models.lsq_scale import column_exponents
from ..support.outcomes import case_weights
from ..support.text import intercept_label
from ..models.records import INTERCEPT_NAME
from ..support.validate import ReadOnlyArrays, as_matrix, check_names, weight_scale
from ..support.linalg import CONSTANT_TOLERANCE, default_rank_tolerance

__all__ = ["Collinearity", "collinearity", "VIF_ALARM", "INDEX_ALARM"]

#: A variance inflation factor above this is the usual alarm (common practice).
VIF_ALARM = 10.0
#: Belsley, Kuh & Welsch's rules of thumb: condition indices from 10 to 30 show a moderate,
#: above 30 a strong dependency; with two or more proportions above 0.5 it harms the estimates.
INDEX_ALARM = (10.0, 30.0)
SHARE_ALARM = 0.5
#: A term takes part in an exact dependency when its squared loadings on the null
#: dimensions add up to more than this.
_NULL_SHARE = 1e-8


@dataclass(frozen=True)
class Collinearity(ReadOnlyArrays):
    """Result of :func:`collinearity`.

    Attributes
    ----------
    names : tuple of str
        The columns of ``X``.
    variance_inflation : ndarray (p,)
        Variance inflation factor of each column (``inf`` for a column in an exact
        linear dependency).
    terms : tuple of str
        The terms of the condition-index table: ``"(intercept)"`` first when there is one,
        then ``names``.
    condition_indices : ndarray (q,)
        Condition indices, ascending (the first is 1); ``inf`` for a null dimension.
    proportions : ndarray (q, q)
        Row ``k`` (a dimension, in the order of ``condition_indices``), column ``j`` (a
        term): the share of term ``j``'s coefficient variance in dimension ``k``; each
        column sums to 1.
    rank : int
        Numerical rank of the design with the intercept column.
    intercept : bool
    rows : int
    """

    names: tuple[str, ...]
    variance_inflation: np.ndarray
    terms: tuple[str, ...]
    condition_indices: np.ndarray
    proportions: np.ndarray
    rank: int
    intercept: bool
    rows: int

    def dependencies(self) -> list[tuple[float, list[tuple[str, float]]]]:
        """Dimensions with a condition index of 30 or more and the terms with proportions
        above 0.5 there (Belsley, Kuh & Welsch's rule of thumb), largest index first."""
        out = []
        for k in np.argsort(-self.condition_indices, kind="stable"):
            if not self.condition_indices[k] >= INDEX_ALARM[1]:
                continue
            shares = [(self.terms[j], float(self.proportions[k, j])) for j in range(len(self.terms))
                      if self.proportions[k, j] > SHARE_ALARM]
            if len(shares) >= 2:
                out.append((float(self.condition_indices[k]), shares))
        return out

    def report(self) -> str:
        """Variance inflation factors, condition indices and proportions as text."""
        label = {INTERCEPT_NAME: intercept_label(self.names)}
        shown = tuple(label.get(t, t) for t in self.terms)
        width = max(12, *(len(t) for t in shown)) + 2
        with_b = " with an intercept" if self.intercept else ", no intercept"
        lines = [f"Collinearity of the design: {len(self.names)} columns{with_b}, {self.rows} rows, rank {self.rank}",
                 "",
                 "Variance inflation factors (1 / (1 - R^2) of each column on the others"
                 + (" and a constant)" if self.intercept else ")") + f"; above {VIF_ALARM:g} is the usual alarm",
                 "column".ljust(width) + "inflation".rjust(12)]
        for name, v in zip(self.names, self.variance_inflation):
            lines.append(name.ljust(width) + f"{v:.4g}".rjust(12) + ("  high" if v > VIF_ALARM else ""))
        lines += ["", "Condition indices of the design" + (" with a column of ones" if self.intercept else "")
                  + ", every column scaled to unit length, and the share of each term's coefficient variance in "
                  "each dimension (each column of shares sums to 1)"]
        head = "dimension".ljust(11) + "index".rjust(12) + "".join(t[:width - 2].rjust(width) for t in shown)
        lines.append(head)
        for k in range(len(self.condition_indices)):
            lines.append(str(k + 1).ljust(11) + f"{self.condition_indices[k]:.4g}".rjust(12)
                         + "".join(f"{v:.3f}".rjust(width) for v in self.proportions[k]))
        found = self.dependencies()
        lo, hi = INDEX_ALARM
        lines.append(f"Belsley, Kuh & Welsch's rules of thumb: an index from {lo:g} to {hi:g} shows a moderate, above "
                     f"{hi:g} a strong dependency, harmful when two or more terms have shares above {SHARE_ALARM:g}.")
        if found:
            for index, shares in found:
                terms = ", ".join(f"{label.get(t, t)} ({s:.2f})" for t, s in shares)
                lines.append(f"  near dependency at index {index:.4g} among: {terms}")
        else:
            lines.append("  none found")
        return "\n".join(lines) + "\n"

    def to_dict(self) -> dict[str, Any]:
        """The record as plain Python values (lists for arrays)."""
        import dataclasses

        return {f.name: (lambda v: v.tolist() if isinstance(v, np.ndarray) else v)(getattr(self, f.name))
                for f in dataclasses.fields(self)}


def _shares(V: np.ndarray, d: np.ndarray, null: np.ndarray) -> np.ndarray:
    """Variance-decomposition proportions (dimensions x terms) from ``Z = U diag(d) V'``;
    a term with loadings on a null dimension puts all its variance there (the limit as
    those singular values go to 0)."""
    live = ~null
    phi = np.zeros_like(V)
    phi[:, live] = V[:, live] ** 2 / d[live] ** 2
    on_null = (V[:, null] ** 2).sum(axis=1) > _NULL_SHARE
    phi[on_null] = 0.0
    phi[np.ix_(on_null, null)] = V[np.ix_(on_null, null)] ** 2
    return (phi / phi.sum(axis=1, keepdims=True)).T


def _svd(Z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Singular values (descending, zeros added up to the number of columns) and right
    singular vectors (columns) of ``Z``, through its triangular factor when it has more
    rows than columns."""
    try:
        R = np.linalg.qr(Z, mode="r") if Z.shape[0] > Z.shape[1] else Z
        _, d, Vt = np.linalg.svd(R)  # Vt is square: the null space is completed
    except np.linalg.LinAlgError:  # pragma: no cover - LAPACK's SVD converges on finite input
        raise InputError("the singular value decomposition of X did not converge; check X for extreme "
                         "values") from None
    full = np.zeros(Z.shape[1])
    full[: d.size] = d
    return full, Vt.T


def collinearity(X: Any, *, weights: Any = None, names: Any = None, intercept: bool = True) -> Collinearity:
    r"""Variance inflation factors and condition indices of the design ``X``.

    Variance inflation factor of column :math:`j`:

    .. math:: \mathrm{VIF}_j = \frac{1}{1 - R_j^2} = \sum_k \frac{v_{jk}^2}{d_k^2},

    :math:`R_j^2` that of the weighted regression of column :math:`j` on the other
    columns, with an intercept when ``intercept`` (then the columns are centred at their
    weighted means; otherwise :math:`R_j^2` is uncentred), and :math:`d_k, v_k` the
    singular values and right singular vectors of the (centred) design with rows times
    :math:`\sqrt{w_i}` and unit columns.

    Condition indices and variance-decomposition proportions (Belsley, Kuh & Welsch
    1980, chapter 3): with :math:`Z` the design with a leading column of ones (when
    ``intercept``), rows times :math:`\sqrt{w_i}`, every column scaled to unit length and
    not centred, :math:`Z = U \operatorname{diag}(d) V'`,

    .. math:: \eta_k = \frac{d_{\max}}{d_k},\qquad
              \pi_{kj} = \frac{v_{jk}^2 / d_k^2}{\sum_l v_{jl}^2 / d_l^2}.

    Rules of thumb (Belsley, Kuh & Welsch): an index from 10 to 30 shows a moderate,
    above 30 a strong dependency, which harms the estimates of the terms with
    proportions above 0.5 on it; a variance inflation factor above 10 is the usual alarm
    (common practice).

    A design of less than full rank is reported, not refused: the dimensions with a
    singular value at most ``max(n, q) * eps * d_max`` are null (index ``inf``), the
    variance inflation factor of a column with loadings on them is ``inf``, and such a
    column's variance is all put on the null dimensions.

    Parameters
    ----------
    X : array-like (n, p)
        The design, without a column of ones; column names of a DataFrame are used.
    weights : array-like, optional
        Case weights (default 1): a row of weight 2 counts as two copies of it.  Only
        relative weights matter (they are divided by a power of two first).
    names : sequence of str, optional
        Column names (default: the DataFrame's, else x1, x2, ...).
    intercept : bool
        Whether the model has an intercept (default True).

    Returns
    -------
    Collinearity

    Raises
    ------
    InputError
        A bad design or weights, or a column that is constant (with an intercept) or zero:
        its variance inflation is not defined; drop it.

    References
    ----------
    Belsley, D. A., Kuh, E. & Welsch, R. E. (1980). Regression Diagnostics: Identifying
    Influential Data and Sources of Collinearity. Wiley, chapter 3.
    Marquardt, D. W. (1970). Generalized inverses, ridge regression, biased linear
    estimation, and nonlinear estimation. Technometrics 12, 591-612 (the variance
    inflation factor).
    """
    if not isinstance(intercept, (bool, np.bool_)):
        raise InputError(f"intercept must be True or False; got {intercept!r:.60}")
    intercept = bool(intercept)
    arr, found = as_matrix(X, "X")
    n, p = arr.shape
    terms_x = check_names(names, p, found)
    w = case_weights(weights, n)
    u = w / weight_scale(w)
    root = np.sqrt(u)
    ex = column_exponents(arr)
    Xs = np.ldexp(arr, -ex)  # exact; largest entry of each column in [1, 2)
    raw = np.linalg.norm(Xs * root[:, None], axis=0)
    total = float(u.sum())
    if intercept:
        m1 = (u @ Xs) / total
        Xc = Xs - m1
        Xc -= (u @ Xc) / total
    else:
        Xc = Xs
    A = Xc * root[:, None]
    spread = np.linalg.norm(A, axis=0)
    flat = np.flatnonzero(spread <= CONSTANT_TOLERANCE * raw) if intercept else np.flatnonzero(raw == 0)
    if flat.size:
        j = int(flat[0])
        what = "constant on the rows with positive weight (it duplicates the intercept)" if intercept else "zero"
        raise InputError(f"X column {j} ('{terms_x[j]}') is {what}; its variance inflation is not defined: "
                         "drop the column")
    tol = default_rank_tolerance(n, p + int(intercept))
    d, V = _svd(A / spread)
    null_c = d <= tol * d[0]
    inflation = ((V[:, ~null_c] ** 2) / d[~null_c] ** 2).sum(axis=1)
    inflation[(V[:, null_c] ** 2).sum(axis=1) > _NULL_SHARE] = np.inf
    Z = np.column_stack([root, Xs * root[:, None]]) if intercept else Xs * root[:, None]
    Z = Z / np.linalg.norm(Z, axis=0)
    d2, V2 = _svd(Z)
    null = d2 <= tol * d2[0]
    with np.errstate(divide="ignore"):
        index = np.where(null, np.inf, d2[0] / np.where(null, 1.0, d2))
    shares = _shares(V2, d2, null)
    order = np.argsort(index, kind="stable")
    return Collinearity(
        names=terms_x, variance_inflation=inflation,
        terms=((INTERCEPT_NAME,) if intercept else ()) + terms_x,
        condition_indices=index[order], proportions=shares[order], rank=int((~null).sum()), intercept=intercept,
        rows=n,
    )
