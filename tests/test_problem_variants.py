"""The problem's variants (lintools/engine/problem*.py): ``LinearModelProblem(...)`` decides
once, when the problem is made, what depends on the number of outputs and on Firth's
penalty, and every variant keeps the declared contract.  Source: the design contract of
issue 18 (capabilities declared, not probed; the problem split where it branched on
outputs and on the Firth penalty; common practice for typing.Protocol interfaces)."""

from __future__ import annotations

import copy

import numpy as np
import pytest

from lintools.engine import LinearModelProblem
from lintools.engine.contracts import Problem
from lintools.engine.losses import BinomialLoss
from lintools.engine.multinomial import MultinomialLoss
from lintools.engine.problem import FirthProblem, MultiOutputProblem, OneOutputProblem


def _data():
    rng = np.random.default_rng(3)
    X = rng.normal(size=(60, 3))
    return X, BinomialLoss(rng.integers(0, 2, 60).astype(float)), MultinomialLoss(rng.integers(0, 3, 60), 3,
                                                                                   reference=True)


def test_the_constructor_returns_the_variant_of_the_loss_and_the_penalty():
    """Invariant: one output -> OneOutputProblem, K outputs -> MultiOutputProblem,
    firth=True -> FirthProblem; each is a LinearModelProblem, and a copy keeps its variant."""
    X, binary, multi = _data()
    made = [LinearModelProblem(X, binary), LinearModelProblem(X, multi), LinearModelProblem(X, binary, firth=True)]
    assert [type(P) for P in made] == [OneOutputProblem, MultiOutputProblem, FirthProblem]
    assert all(isinstance(P, LinearModelProblem) and type(copy.copy(P)) is type(P) for P in made)
    assert [P.firth for P in made] == [False, False, True] and [P.K for P in made] == [1, 2, 1]


@pytest.mark.parametrize("cls", [OneOutputProblem, MultiOutputProblem, FirthProblem])
def test_every_variant_declares_every_capability_and_keeps_its_promises(cls):
    """Invariant: each Problem flag is a bool on the variant, and a True flag has its members."""
    members = {"warm_starts": ["warm_start"], "sketches": ["sketch_hessian"],
               "fast_steps": ["step_hessian", "reuse_hessian"], "rounding_known": ["gradient_rounding"]}
    flags = {name for name, kind in Problem.__annotations__.items() if "bool" in str(kind)}
    assert flags == set(members)
    for flag in flags:
        assert isinstance(getattr(cls, flag), bool)
        if getattr(cls, flag):
            assert all(hasattr(cls, m) for m in members[flag])


def test_firth_is_refused_with_several_outputs_or_a_ridge():
    """Invariant (unchanged): Firth's penalty is for one output and l2 = 0 only."""
    X, binary, multi = _data()
    with pytest.raises(ValueError, match="one output and l2 = 0"):
        LinearModelProblem(X, multi, firth=True)
    with pytest.raises(ValueError, match="one output and l2 = 0"):
        LinearModelProblem(X, binary, firth=True, l2=1.0)
