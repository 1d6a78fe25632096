"""The engine's declared contracts (lintools/engine/contracts.py): every implementation
declares each optional capability of its Protocol, and an undeclared or unkept promise
is an error, never a silently skipped shortcut.  Source: the design contract of issue 18
(capabilities declared, not probed; common practice for typing.Protocol interfaces)."""

from __future__ import annotations

import numpy as np
import pytest

from lintools.blocks.passes import _BlockLine, _PassProblem
from lintools.engine import AffineProblem, LinearModelProblem
from lintools.engine.contracts import Line, Loss, Problem
from lintools.engine.losses import BinomialLoss
from lintools.engine.multinomial import MultinomialLoss
from lintools.engine.newton import newton
from lintools.engine.problem import _Line


def _flags(protocol) -> set[str]:
    return {name for name, kind in protocol.__annotations__.items() if "bool" in str(kind)}


@pytest.mark.parametrize("protocol, cls", [(Loss, BinomialLoss), (Loss, MultinomialLoss), (Line, _Line),
                                            (Line, _BlockLine), (Problem, LinearModelProblem),
                                            (Problem, _PassProblem)])
def test_every_implementation_declares_every_capability_of_its_protocol(protocol, cls):
    flags = _flags(protocol)
    assert flags and all(isinstance(getattr(cls, f), bool) for f in flags)


def test_a_loss_without_declarations_is_refused_not_slowed():
    """Invariant: a K-output loss that does not declare row_blocks fails at its first use."""
    class Bare:
        outputs = 2

        def __init__(self, loss):
            self.loss = loss

        def __getattr__(self, name):
            if name in _flags(Loss):
                raise AttributeError(name)
            return getattr(self.loss, name)

    rng = np.random.default_rng(0)
    loss = Bare(MultinomialLoss(rng.integers(0, 3, 50), 3, reference=True))
    P = LinearModelProblem(rng.normal(size=(50, 2)), loss)
    with pytest.raises(AttributeError, match="row_blocks"):
        P.evaluate(P.start())


def test_a_promised_shortcut_without_its_member_is_an_error():
    """Invariant: a problem that declares warm_starts must have warm_start (no silent skip)."""
    rng = np.random.default_rng(1)
    P = LinearModelProblem(rng.normal(size=(40, 2)), BinomialLoss(rng.integers(0, 2, 40).astype(float)))
    A = AffineProblem(P, np.zeros(P.size), np.eye(P.size))
    A.warm_starts = True  # a promise the affine problem does not keep
    with pytest.raises(AttributeError, match="warm_start"):
        newton(A, tol=1e-10, max_iter=20)
