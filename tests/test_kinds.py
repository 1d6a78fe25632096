"""The registry of model kinds (lintools/models/kinds.py) and the dispatch through it.

Sources: the design contract (issue 18: "PMML, cross-checking and the command line
dispatch through the family, not through kind strings"; common practice for a registry:
one entry per kind, looked up, never repeated); Data Mining Group, PMML 4.4 - Regression
(``functionName`` "regression"/"classification", ``normalizationMethod`` "none", "logit",
"softmax").  The scan reads the source with ``ast`` (nothing is executed).
"""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
import pytest

import lintools
from lintools.cli.common import ONLY_FOR
from lintools.models.kinds import KINDS, kind_of

ROOT = Path(lintools.__file__).resolve().parent


def kind_string_branches(root: Path, names: set[str]) -> list[str]:
    """Places in ``exchange/`` and ``cli/`` under ``root`` that branch on a kind name
    written out: a comparison of something called ``kind`` or ``model`` with a kind
    string (or a tuple of them), a dict keyed by kind strings, or a subscript by one."""

    def is_name(node: ast.AST) -> bool:
        if isinstance(node, ast.Constant):
            return node.value in names
        if isinstance(node, (ast.Tuple, ast.List, ast.Set)):
            return any(is_name(e) for e in node.elts)
        return False

    found = []
    for folder in ("exchange", "cli"):
        for path in sorted((root / folder).rglob("*.py")):
            tree = ast.parse(path.read_text(encoding="utf-8"))
            for node in ast.walk(tree):
                where = f"{path.relative_to(root)}:{getattr(node, 'lineno', '?')}"
                if isinstance(node, ast.Compare):
                    sides = [node.left] + list(node.comparators)
                    if any(is_name(s) for s in sides) and any(
                            "kind" in ast.unparse(s) or "model" in ast.unparse(s) for s in sides if not is_name(s)):
                        found.append(where)
                elif isinstance(node, ast.Dict) and any(k is not None and is_name(k) for k in node.keys):
                    found.append(where)
                elif isinstance(node, ast.Subscript) and is_name(node.slice):
                    found.append(where)
    return found


def test_exchange_and_cli_do_not_branch_on_kind_strings():
    """Invariant: the exchange formats and the command line look kinds up in the registry;
    none of them compares a kind with a kind name written out (before the registry this scan found 55)."""
    assert kind_string_branches(ROOT, set(KINDS)) == []


def test_the_scan_finds_a_kind_string_branch(tmp_path):
    """The scan above can fail: a comparison, a dict and a subscript by kind name are found."""
    for folder in ("exchange", "cli"):
        (tmp_path / folder).mkdir()
    (tmp_path / "cli" / "m.py").write_text(
        'def f(fit, hints):\n'
        '    if fit.kind == "softmax":\n'
        '        return hints["logistic"]\n'
        '    return {"least_squares": 1}\n', encoding="utf-8")
    assert sorted(kind_string_branches(tmp_path, set(KINDS))) == ["cli/m.py:2", "cli/m.py:3", "cli/m.py:4"]


@pytest.mark.parametrize("name", list(KINDS))
def test_each_entry_fits_its_own_record(name):
    """Invariant: an entry's fit function returns its record type, whose kind is the entry's name."""
    kind = KINDS[name]
    rng = np.random.default_rng(7)
    X = rng.normal(size=(60, 2))
    eta = X @ np.array([0.8, -0.5])
    if not kind.classifier:
        y = eta + rng.normal(size=60)
    elif kind.classes == 2:
        y = (eta + rng.logistic(size=60) > 0).astype(int)
    else:
        y = np.argmax(np.column_stack([eta, -eta, np.zeros(60)]) + rng.gumbel(size=(60, 3)), axis=1)
    fit = kind.fit(X, y)
    assert type(fit) is kind.record and fit.kind == name and kind_of(fit) is kind
    assert np.shape(fit.coefficients) == ((2, kind.outputs(len(fit.classes))) if kind.per_class else (2,))


def test_pmml_attributes_are_the_standard_ones():
    """PMML 4.4 RegressionModel: regression with normalisation none; classification with
    logit (two categories) or softmax (one table per category)."""
    got = {n: (k.function_name, k.normalisation, k.classes, k.per_class) for n, k in KINDS.items()}
    assert got == {"least_squares": ("regression", "none", 0, False),
                   "logistic": ("classification", "logit", 2, False),
                   "softmax": ("classification", "softmax", None, True)}
    assert len({k.normalisation for k in KINDS.values()}) == len(KINDS)  # the reader finds the kind by it


def test_command_line_options_follow_the_registry():
    """The options that apply to each kind (the command line's documented table, unchanged
    by the move to the registry) and the --model values."""
    assert ONLY_FOR == {
        "covariance": ("least_squares",), "minimum_norm": ("least_squares",), "weight_type": ("least_squares",),
        "solver": ("logistic", "softmax"), "tol": ("logistic", "softmax"), "max_iter": ("logistic", "softmax"),
        "firth": ("logistic",), "positive": ("logistic",), "reference": ("softmax",), "symmetric": ("softmax",),
    }
    from lintools.cli import MODELS

    assert MODELS == {"linear": "least_squares", "logistic": "logistic", "softmax": "softmax"}


def test_a_delivered_model_of_unknown_kind_is_refused():
    """No foreign exception: a DeliveredModel assembled by hand with an unknown kind raises
    InputError naming the known kinds (not KeyError)."""
    model = lintools.DeliveredModel(kind="poisson", names=("a",), coefficients=np.array([1.0]), intercept=0.0)
    with pytest.raises(lintools.InputError, match="least_squares, logistic, softmax"):
        model.mean(np.ones((2, 1)))
