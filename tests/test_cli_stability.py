"""``lintools stability`` end to end by subprocess: JSON figures, categories, segments, errors.

The figures are checked against lintools.population_stability on the columns parsed here
with Python's csv module (the library itself is checked against exact fractions in
test_stability.py), and the category counts against collections.Counter.
"""

import csv
import json
import subprocess
import sys
from collections import Counter

import numpy as np
import pytest

import lintools as lt


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "lintools", *args], capture_output=True, text=True, timeout=120, cwd=cwd)


def write(path, n, shift, seed, segments=("A", "B", "C")):
    rng = np.random.default_rng(seed)
    x = rng.normal(shift, 1.0, n)
    region = rng.choice(["north", "south", "east"], n, p=[0.5, 0.3, 0.2] if shift == 0 else [0.3, 0.3, 0.4])
    seg = rng.choice(list(segments), n, p=[0.6, 0.39, 0.01][: len(segments)] if len(segments) == 3 else None)
    w = rng.integers(1, 4, n)
    with open(path, "w") as f:
        f.write("id,x,region,seg,w,score\n")
        for i in range(n):
            f.write(f"{i},{float(x[i])!r},{region[i]},{seg[i]},{w[i]},{float(1 / (1 + np.exp(1 - x[i])))!r}\n")


def column(path, name):
    with open(path) as f:
        rows = list(csv.DictReader(f))
    return [r[name] for r in rows]


@pytest.fixture()
def files(tmp_path):
    write(tmp_path / "dev.csv", 1500, 0.0, 1)
    write(tmp_path / "recent.csv", 900, 0.3, 2)
    return tmp_path


def test_json_figures_match_the_library(files):
    out = run("stability", "dev.csv", "recent.csv", "--probability", "score", "--exclude", "id", "--weights", "w",
              "--by", "seg", "--bins", "8", "--json", cwd=files)
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    assert list(doc["columns"]) == ["score", "x", "region"]
    dev, rec = files / "dev.csv", files / "recent.csv"
    w, v = (np.array(column(f, "w"), dtype=float) for f in (dev, rec))
    for name in ("score", "x"):
        want = lt.population_stability(np.array(column(dev, name), dtype=float), np.array(column(rec, name), dtype=float),
                                       bins=8, weights=w, actual_weights=v)
        assert doc["columns"][name]["index"] == want.index and doc["columns"][name]["cuts"] == want.cuts.tolist()
    region = doc["columns"]["region"]
    # source: collections.Counter of the region column of each file
    assert region["binning"] == "category" and region["categories"] == ["east", "north", "south"]
    assert region["expected_rows"] == [Counter(column(dev, "region"))[c] for c in region["categories"]]
    assert region["actual_rows"] == [Counter(column(rec, "region"))[c] for c in region["categories"]]
    segs = {s["segment"]: s for s in doc["segments"]}
    assert sorted(segs) == ["A", "B", "C"] and segs["C"]["small"] and not segs["A"]["small"]
    mask = np.array(column(dev, "seg")) == "A"
    rmask = np.array(column(rec, "seg")) == "A"
    want = lt.population_stability(np.array(column(dev, "x"), dtype=float)[mask],
                                   np.array(column(rec, "x"), dtype=float)[rmask], bins=8, weights=w[mask],
                                   actual_weights=v[rmask])
    assert segs["A"]["columns"]["x"]["index"] == want.index


def test_text_report_segments_and_caution(files):
    write(files / "recent.csv", 400, 0.3, 3, segments=("A", "D"))
    out = run("stability", "dev.csv", "recent.csv", "--columns", "x,region", "--exclude", "id", "--by", "seg", cwd=files)
    assert out.returncode == 0, out.stderr
    assert "common practice" in out.stdout and "Column 'region'" in out.stdout and "score" not in out.stdout
    assert "Segment seg = D" in out.stdout and "absent from 'dev.csv': not compared" in out.stdout
    assert "SMALL" in out.stdout and "Caution" in out.stderr


def test_a_column_of_numbers_in_one_file_and_text_in_the_other_is_refused(files):
    text = (files / "recent.csv").read_text().replace(",north,", ",1.5,").replace(",south,", ",2.5,").replace(",east,", ",3.5,")
    (files / "recent.csv").write_text(text)
    out = run("stability", "dev.csv", "recent.csv", "--exclude", "id,seg", cwd=files)
    assert out.returncode == 2
    assert "column 'region' holds text in 'dev.csv' but numbers in 'recent.csv'" in out.stderr
