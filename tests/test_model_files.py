"""Hostile and damaged JSON model files give clear errors, never a crash or a wrong model."""

import json
import subprocess
import sys
import textwrap

import pytest
import statsmodels.api as sm
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

import lintools as lt
from lintools import InputError
from lintools.exchange.pmml import write_pmml


@pytest.fixture(scope="module")
def saved(tmp_path_factory):
    d = sm.datasets.stackloss.load_pandas()  # statsmodels' stack-loss data
    fit = lt.least_squares(d.exog, d.endog, diagnostics=True)
    path = tmp_path_factory.mktemp("m") / "model.json"
    lt.save(fit, path)
    return path, json.loads(path.read_text())


def _write(tmp_path, doc):
    path = tmp_path / "m.json"
    path.write_text(doc if isinstance(doc, str) else json.dumps(doc))
    return path


def test_wrong_schema_version_is_refused(tmp_path, saved):
    _, doc = saved
    for version in (2, 0, "1", None, True):
        bad = dict(doc, schema_version=version)
        with pytest.raises(InputError, match="schema version"):
            lt.load(_write(tmp_path, bad))


@pytest.mark.parametrize(
    "mutate, fragment",
    [
        (lambda d: {"hello": 1}, "not a lintools model file"),
        (lambda d: [1, 2], "not a lintools model file"),
        (lambda d: dict(d, record={"$record": "Popen", "fields": {}}), "unknown record type"),
        (lambda d: dict(d, record={"$record": "LinearFit", "fields": {}}), "missing fields"),
        (lambda d: dict(d, kind="softmax"), "does not match kind"),
        (lambda d: {**d, "record": {**d["record"], "fields": {**d["record"]["fields"], "coefficients": {"$array": [1, "x", 3], "shape": [3], "dtype": "float64"}}}}, "where a number was expected"),
        (lambda d: {**d, "record": {**d["record"], "fields": {**d["record"]["fields"], "coefficients": {"$array": [1, 2], "shape": [3], "dtype": "float64"}}}}, "2 values for shape"),
        (lambda d: {**d, "record": {**d["record"], "fields": {**d["record"]["fields"], "coefficients": {"$array": [1], "shape": [1], "dtype": "object"}}}}, "malformed array"),
        (lambda d: {**d, "record": {**d["record"], "fields": {**d["record"]["fields"], "extra": 1}}}, "unknown fields"),
    ],
)
def test_damaged_files_are_refused(tmp_path, saved, mutate, fragment):
    _, doc = saved
    with pytest.raises(InputError, match=fragment):
        lt.load(_write(tmp_path, mutate(json.loads(json.dumps(doc)))))


def test_non_json_and_bare_constants_are_refused(tmp_path):
    with pytest.raises(InputError, match="not valid JSON"):
        lt.load(_write(tmp_path, "{not json"))
    with pytest.raises(InputError, match="bare constant NaN"):
        lt.load(_write(tmp_path, '{"format": NaN}'))
    with pytest.raises(InputError, match="nested too deeply|not valid JSON|JSON values besides"):
        lt.load(_write(tmp_path, "[" * 100000 + "]" * 100000))
    with pytest.raises(InputError, match="cannot be read"):
        lt.load(tmp_path / "absent.json")


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.binary(max_size=400))
def test_random_bytes_never_crash(tmp_path, blob):
    # Fuzzing (hypothesis): any bytes either load as a model or raise InputError.
    path = tmp_path / "fuzz.json"
    path.write_bytes(blob)
    with pytest.raises(InputError):
        lt.load(path)


json_values = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats(allow_nan=False) | st.text(max_size=8),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.sampled_from(["$array", "$float", "$tuple", "$record", "shape", "dtype", "fields", "x"]), inner, max_size=4),
    max_leaves=20,
)


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(json_values, st.sampled_from(["coefficients", "covariance", "names", "convergence", "rank"]))
def test_random_field_values_are_refused_or_typed(tmp_path, saved, value, field):
    # Fuzzing (hypothesis): a field replaced by arbitrary JSON loads only as an InputError
    # or as a record whose field has the annotated type; never another exception.
    _, doc = saved
    bad = json.loads(json.dumps(doc))
    bad["record"]["fields"][field] = value
    path = tmp_path / "f.json"
    path.write_text(json.dumps(bad))
    try:
        back = lt.load(path)
    except InputError:
        return
    # Only a value of the right type may load, for example an equal array.
    ref = lt.load(saved[0])
    got, want = getattr(back, field), getattr(ref, field)
    assert type(got) is type(want) or (want is None or got is None)


def test_an_array_with_a_list_as_its_dtype_is_refused(tmp_path):
    # source: found by the fuzzing in tests/test_reliability_files.py (an unhashable dtype
    # once escaped as TypeError); common practice: a clear InputError
    fit = lt.least_squares([[0.0], [1.0], [2.0], [4.0]], [1.0, 2.0, 2.5, 5.0])
    path = tmp_path / "m.json"
    lt.save(fit, path)
    text = path.read_text().replace('"dtype": "float64"', '"dtype": []', 1)
    assert '"dtype": []' in text
    path.write_text(text)
    with pytest.raises(lt.InputError, match="malformed array"):
        lt.load(path)
    json.loads(text)  # the file itself is valid JSON: the refusal is the schema's


@pytest.mark.skipif(sys.platform == "win32", reason="needs resource limits")
@pytest.mark.parametrize("writer", ["save", "write_pmml"])
def test_a_save_cut_short_leaves_the_previous_model_file_byte_identical(tmp_path, saved, writer):
    """save and write_pmml, interrupted by a file-size limit (RLIMIT_FSIZE in a child
    process) while replacing a model file, leave the old file byte-identical and no
    temporary file behind.  Source: common practice (write to a temporary file in the same
    folder, then rename; POSIX rename(2) is atomic)."""
    path, _ = saved  # statsmodels' stack-loss fit with diagnostics: the new model
    target = tmp_path / ("model.json" if writer == "save" else "model.pmml")
    small = lt.least_squares([[0.0], [1.0], [2.0], [4.0]], [1.0, 2.0, 2.5, 5.0])  # the previous model
    (lt.save if writer == "save" else write_pmml)(small, target)
    old = target.read_bytes()
    probe = tmp_path / "probe" / target.name
    probe.parent.mkdir()
    (lt.save if writer == "save" else write_pmml)(lt.load(path), probe)
    limit = max(len(old), probe.stat().st_size // 2)
    assert probe.stat().st_size > limit >= len(old)
    code = textwrap.dedent(f"""
        import resource, sys
        import lintools as lt
        from lintools.exchange.pmml import write_pmml
        fit = lt.load({str(path)!r})
        resource.setrlimit(resource.RLIMIT_FSIZE, ({limit}, {limit}))
        try:
            {"lt.save" if writer == "save" else "write_pmml"}(fit, {str(target)!r}, replace=True)
        except lt.InputError as exc:
            print("refused:", exc)
            sys.exit(3)
    """)
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert run.returncode == 3, run.stdout + run.stderr
    assert "cannot be written" in run.stdout and "nothing was changed" in run.stdout
    assert target.read_bytes() == old
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["probe", target.name])


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.floats(allow_nan=True, allow_infinity=True, allow_subnormal=True, width=64), min_size=1,
                max_size=40))
@example([0.0, -0.0, 5e-324, -5e-324, 2.2250738585072014e-308, 2.225073858507201e-308, 1.7976931348623157e308,
          -1.7976931348623157e308, float("inf"), float("-inf"), float("nan"), 0.1, 1 / 3, 9007199254740993.0])
def test_every_double_round_trips_bit_for_bit(tmp_path, saved, values):
    """Invariant: any doubles (signed zeros, subnormals, the extremes, infinities, NaN) in
    a record's arrays load back with the same bits (NaN as the standard quiet NaN), through
    the NumPy parse of float arrays.  Oracle: the float64 bit patterns themselves."""
    import dataclasses

    import numpy as np

    a = np.array(values, dtype=np.float64)
    fit = dataclasses.replace(lt.load(saved[0]), leverage=a, cooks_distance=a[::-1].copy())
    path = tmp_path / "m.json"
    lt.save(fit, path, replace=True)
    back = lt.load(path)
    for got, want in ((back.leverage, fit.leverage), (back.cooks_distance, fit.cooks_distance)):
        nan = np.isnan(want)
        assert np.array_equal(np.isnan(got), nan)
        assert got[~nan].tobytes() == want[~nan].tobytes()
    assert back.covariance.tobytes() == fit.covariance.tobytes()
