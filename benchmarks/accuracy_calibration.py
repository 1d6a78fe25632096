"""The accuracy records against their oracles on a large sample (the tests take a small one).

Usage::

    PYTHONPATH=$PWD python benchmarks/accuracy_calibration.py [--cases 400] [--kind least_squares]

For each kind (least squares against exact rational arithmetic; logistic and softmax
against their optima by Newton's method in mpmath at 50 digits) it draws problems with
scaled condition numbers 10**U(0, 12) (nearly collinear columns; columns rescaled by up
to 1e3 and sometimes shifted) and prints: the share of cases where ``solver_digits`` is
within 2 digits of the true digits, the largest optimism (estimate minus truth), the
share more than 1 digit optimistic, and the same for ``data_digits`` against the
measured change of the exact optimum under random relative perturbations of the inputs
(uniform, half-width the unit round-off).
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))

import lintools as lt  # noqa: E402
from lintools.models.least_squares import _fit  # noqa: E402
from _accuracy_oracle import glm_digits, glm_optimum, ls_perturbed, ls_truth, problem  # noqa: E402


def ls_case(rng: np.random.Generator, gram: bool = False) -> tuple[float, float, float, float]:
    """One least-squares case; ``gram``: through the Gram path (condition up to 1e3, 100-300 rows)."""
    n, p = (int(rng.integers(100, 300)) if gram else int(rng.integers(8, 25))), int(rng.integers(1, 5))
    intercept = bool(rng.integers(0, 2))
    X = problem(rng, n, p, rng.uniform(0, 3 if gram else 12), shift=float(rng.choice([0.0, 0.0, 50.0])), logscale=3.0)
    y = X @ rng.normal(size=p) + 10.0 ** rng.uniform(-8, 0) * rng.normal(size=n) + (2.0 if intercept else 0.0)
    w = rng.uniform(0.5, 2.0, size=n) if rng.integers(0, 2) else np.ones(n)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit = _fit(X, y, weights=None if np.all(w == 1) else w, intercept=intercept, method="gram" if gram else "qr")
    if gram and fit.convergence.solver != "cholesky":
        return ls_case(rng, gram)
    truth, exact = ls_truth(fit, X, y, w, intercept)
    measured = ls_perturbed(X, y, w, intercept, exact, 2.0**-53, rng)
    est_data = fit.accuracy.data_digits
    return fit.accuracy.solver_digits, truth, est_data, measured


def glm_case(rng: np.random.Generator, K: int, top: float = 10.0, soft: bool = False) -> tuple[float, float, float, float]:
    """One logistic (K = 1, not ``soft``) or softmax (K + 1 classes, class 0 the reference)
    case with scaled condition 10**U(0, top)."""
    soft = soft or K > 1
    n, p = int(rng.integers(30, 60)), int(rng.integers(1, 4))
    X = problem(rng, n, p, rng.uniform(0, top), logscale=2.0)
    eta = (X / np.std(X, axis=0)) @ rng.normal(scale=0.7, size=(p, K))
    eta = np.column_stack([np.zeros(n), eta])
    cls = np.argmax(eta + rng.gumbel(size=eta.shape), axis=1)
    if len(set(cls)) < K + 1:
        return glm_case(rng, K, top, soft)
    w = np.ones(n)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            fit = lt.softmax(X, cls) if soft else lt.logistic(X, cls)
        except lt.LintoolsError:
            return glm_case(rng, K, top, soft)
    # the oracle's layout: term-major (index j K + k), intercept first, the reference class 0 left out
    got = np.concatenate([np.ravel(fit.intercept), np.ravel(fit.coefficients)]) if not soft else \
        np.vstack([fit.intercept[None, :], fit.coefficients])[:, 1:].ravel()
    exact = glm_optimum(X, cls, K, w, True)
    truth = glm_digits(got, exact, X, w, True, K)
    moved = glm_optimum(X, cls, K, w, True, rel=2.0**-53, rng=rng)
    measured = glm_digits(moved, exact, X, w, True, K)
    est_data = fit.accuracy.data_digits
    return fit.accuracy.solver_digits, truth, est_data, measured


def print_shares(name: str, rows: list[tuple[float, float, float, float]]) -> None:
    a = np.array(rows)
    opt = a[:, 0] - a[:, 1]
    dd = a[:, 2] - a[:, 3]
    print(f"{name}: {len(a)} cases; solver_digits within 2 of the truth {np.mean(np.abs(opt) <= 2):.1%}, "
          f"more than 1 optimistic {np.mean(opt > 1):.1%}, largest optimism {opt.max():+.2f}, median "
          f"{np.median(opt):+.2f}; data_digits within 1.5 of the measured {np.mean(np.abs(dd) <= 1.5):.1%} "
          f"(median {np.median(dd):+.2f}, range {dd.min():+.2f} .. {dd.max():+.2f})")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=400)
    ap.add_argument("--kind", choices=["least_squares", "logistic", "softmax", "all"], default="all")
    ap.add_argument("--seed", type=int, default=20240)
    args = ap.parse_args(argv)
    rng = np.random.default_rng(args.seed)
    if args.kind in ("least_squares", "all"):
        print_shares("least squares, QR path", [ls_case(rng) for _ in range(args.cases)])
        print_shares("least squares, Gram path", [ls_case(rng, True) for _ in range(max(1, args.cases // 4))])
    if args.kind in ("logistic", "all"):
        print_shares("logistic", [glm_case(rng, 1) for _ in range(max(1, args.cases // 4))])
    if args.kind in ("softmax", "all"):
        # 2 to 4 classes, scaled condition 1 to 1e12
        print_shares("softmax", [glm_case(rng, int(rng.integers(1, 4)), 12.0, True) for _ in range(max(1, args.cases // 8))])
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
