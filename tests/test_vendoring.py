"""A copy of the package under another name works with ``lintools`` itself unimportable.

Packages that vendor a dependency-free fallback copy ``lintools/`` into their own tree
(``theirpkg/_vendor/lintools``).  That works only if every import inside the package is
relative and nothing looks itself up by the name ``lintools``.  The check runs in a fresh
interpreter in which ``import lintools`` raises, fits the three models, computes a
metric, draws a split and round-trips a model file through the copy, and compares the
numbers with the installed package's (bit for bit: the same code on the same data).
Source: the vendoring use named in the design contract (common practice for
dependency-free fallbacks).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np

import lintools

SCRIPT = textwrap.dedent(
    """
    import importlib.abc, json, sys

    class Refuse(importlib.abc.MetaPathFinder):
        def find_spec(self, name, path=None, target=None):
            if name == "lintools" or name.startswith("lintools."):
                raise ImportError("lintools is not installed here (vendoring test)")
            return None

    sys.meta_path.insert(0, Refuse())
    try:
        import lintools  # noqa: F401
    except ImportError:
        pass
    else:
        raise SystemExit("lintools was importable")

    import numpy as np
    from acme_vendor._vendor import lintools as lt

    rng = np.random.default_rng(20261203)
    X = rng.normal(size=(300, 3))
    y = X @ [0.5, -1.0, 2.0] + rng.normal(size=300)
    labels = (X[:, 0] + rng.logistic(size=300) > 0).astype(int)
    classes = np.digitize(X[:, 1] + rng.logistic(size=300), [-1.0, 1.0])
    out = {}
    out["least_squares"] = lt.least_squares(X, y).coefficients.tolist()
    fit = lt.logistic(X, labels)
    out["logistic"] = fit.coefficients.tolist()
    out["softmax"] = lt.softmax(X, classes).coefficients.tolist()
    out["brier"] = lt.brier(labels, fit.mean(X)).score
    out["folds"] = lt.stratified_folds(labels, k=5, seed=7).tolist()
    lt.save(fit, sys.argv[1])
    back = lt.load(sys.argv[1])
    out["round_trip"] = back.coefficients.tolist() == fit.coefficients.tolist()
    out["module"] = type(fit).__module__
    print(json.dumps(out))
    """
)


def test_a_copy_under_another_name_runs_without_lintools(tmp_path):
    vendor = tmp_path / "acme_vendor" / "_vendor"
    vendor.mkdir(parents=True)
    (tmp_path / "acme_vendor" / "__init__.py").write_text("")
    (vendor / "__init__.py").write_text("")
    shutil.copytree(Path(lintools.__file__).parent, vendor / "lintools",
                    ignore=shutil.ignore_patterns("__pycache__"))
    script = tmp_path / "run.py"
    script.write_text(SCRIPT)
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}  # the script's folder comes first
    done = subprocess.run([sys.executable, str(script), str(tmp_path / "model.json")],
                          cwd=tmp_path, capture_output=True, text=True, timeout=300, env=env)
    assert done.returncode == 0, done.stderr[-3000:]
    got = json.loads(done.stdout.strip().splitlines()[-1])
    assert got["module"].startswith("acme_vendor._vendor.lintools.")
    assert got["round_trip"] is True

    # the installed package on the same data gives the same numbers, bit for bit
    rng = np.random.default_rng(20261203)
    X = rng.normal(size=(300, 3))
    y = X @ [0.5, -1.0, 2.0] + rng.normal(size=300)
    labels = (X[:, 0] + rng.logistic(size=300) > 0).astype(int)
    classes = np.digitize(X[:, 1] + rng.logistic(size=300), [-1.0, 1.0])
    fit = lintools.logistic(X, labels)
    assert got["least_squares"] == lintools.least_squares(X, y).coefficients.tolist()
    assert got["logistic"] == fit.coefficients.tolist()
    assert got["softmax"] == lintools.softmax(X, classes).coefficients.tolist()
    assert got["brier"] == lintools.brier(labels, fit.mean(X)).score
    assert got["folds"] == lintools.stratified_folds(labels, k=5, seed=7).tolist()
