"""The label reader behind every classifier and splitter (``lintools.support.validate.as_labels``).

Source of the expected classes and codes: scikit-learn's ``LabelEncoder`` (oracle), which
also sorts the distinct labels and codes each row by its label's position.  The
vectorised path for plain NumPy dtypes must equal the general path for Python objects
(property test on the same labels given both ways).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.preprocessing import LabelEncoder

from lintools import InputError
from lintools.support.validate import as_labels


@pytest.mark.parametrize("make", [
    lambda rng: rng.choice(["beech", "alder", "oak"], size=5000),
    lambda rng: rng.integers(-3, 4, size=5000),
    lambda rng: rng.integers(0, 3, size=5000).astype(np.uint8),
    lambda rng: rng.choice([0.5, -1.25, 3.0], size=5000),
    lambda rng: rng.uniform(size=5000) < 0.3,
    lambda rng: rng.choice([b"x", b"ab", b"a"], size=5000),
])
def test_labels_match_label_encoder(make):
    # source: sklearn.preprocessing.LabelEncoder (oracle): sorted classes, codes = positions
    y = make(np.random.default_rng(7))
    classes, codes = as_labels(y, "y")
    enc = LabelEncoder().fit(y)
    assert list(classes) == enc.classes_.tolist()
    assert np.array_equal(codes, enc.transform(y)) and codes.dtype == np.intp


@settings(max_examples=60, deadline=None)
@given(st.one_of(
    st.lists(st.integers(-5, 5), min_size=1, max_size=40),
    st.lists(st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False), min_size=1, max_size=40),
    st.lists(st.text(alphabet="abcé", max_size=3), min_size=1, max_size=40),
    st.lists(st.booleans(), min_size=1, max_size=40),
))
def test_vectorised_labels_equal_the_object_path(values):
    # invariant: the same labels as a typed array and as an object array read alike
    typed = as_labels(np.array(values), "y")
    general = as_labels(np.array(values, dtype=object), "y")
    assert typed[0] == general[0] and np.array_equal(typed[1], general[1])


def test_label_errors_name_the_row():
    # common practice: bad input names the argument, the row and the remedy
    with pytest.raises(InputError, match=r"y has a missing label at row 2; drop or label"):
        as_labels(np.array([1.0, 0.0, np.nan, np.nan]), "y")
    with pytest.raises(InputError, match=r"groups has an infinite label at row 1; labels must be finite"):
        as_labels(np.array([1.0, -np.inf, 0.0]), "groups")
    with pytest.raises(InputError, match=r"y has a missing label at row 1"):
        as_labels(np.array(["a", None], dtype=object), "y")
