"""The core works with SciPy, pandas and every oracle library made unimportable."""

import json
import subprocess
import sys
import textwrap

BLOCKED = ["scipy", "pandas", "sklearn", "statsmodels", "matplotlib", "dask", "distributed", "mpmath"]

SCRIPT = textwrap.dedent(
    """
    import importlib.abc, sys, json
    BLOCKED = set(%r)

    class Refuse(importlib.abc.MetaPathFinder):
        def find_spec(self, name, path=None, target=None):
            if name.split(".")[0] in BLOCKED:
                raise ImportError(f"{name} is blocked for this test")
            return None

    sys.meta_path.insert(0, Refuse())
    for name in list(sys.modules):
        if name.split(".")[0] in BLOCKED:
            del sys.modules[name]

    import numpy as np
    import lintools as lt

    rng = np.random.default_rng(0)
    X = rng.normal(size=(200, 3))
    y = X @ [1.0, -2.0, 0.5] + rng.normal(size=200)
    out = {}
    fit = lt.least_squares(X, y, covariance="HC3")
    out["least_squares"] = [fit.f_p_value, float(fit.coefficient_table().p_value.max())]
    fit.report()
    yb = (X @ [1.0, -1.0, 0.5] + rng.logistic(size=200)) > 0
    lf = lt.logistic(X, yb)
    out["logistic"] = [lf.log_likelihood, float(lf.coefficient_table().p_value.max())]
    lf.report()
    yk = np.digitize(X[:, 0] + rng.normal(size=200), [-0.5, 0.5])
    sf = lt.softmax(X, yk)
    out["softmax"] = [sf.log_likelihood, float(sf.coefficient_table().p_value.max()), sf.lr_p_value]
    sf.report()
    loaded = sorted(m for m in sys.modules if m.split(".")[0] in BLOCKED)
    out["loaded"] = loaded
    print(json.dumps(out))
    """
) % (BLOCKED,)


def test_fits_run_without_scipy_pandas_or_oracles():
    proc = subprocess.run([sys.executable, "-c", SCRIPT], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    out = json.loads(proc.stdout.strip().splitlines()[-1])
    assert out["loaded"] == []
    for key in ("least_squares", "logistic", "softmax"):
        assert all(v == v for v in out[key]), (key, out[key])  # present, and no NaN
