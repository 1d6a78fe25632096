"""``lintools report``: the sign-off document (HTML page and JSON twin) end to end.

The data are the demo scenario's (``lintools demo`` writes the delivered PMML model, the
development CSV and a drifted recent CSV).  Checked here:

* the page is well-formed: Python's ``html.parser`` sees every element closed in order
  (void elements written ``<.../>``) and ``xml.etree`` parses the page without its
  doctype (the XHTML form); every ``<svg>`` parses as XML on its own;
* self-contained: no script, no ``src``, no link but to its own sections, no URL at all
  (the only ``://`` would be in a file name of the user's);
* every number printed in an element with a ``data-k`` JSON Pointer (RFC 6901) equals the
  twin's value at that pointer to the digits printed (a figure that rounds to zero without
  a sign), and every table cell with a digit
  carries a pointer (a label cell names a band or a term, not a figure);
* two runs on the same inputs give byte-identical files except the date line;
* the twin's numbers equal the library's functions on the same rows (source:
  lintools.logistic, compare_coefficients, roc_auc, kolmogorov_smirnov, gains, band_tests,
  population_stability, reliability and hosmer_lemeshow, called here on the CSV parsed
  with Python's csv module);
* the outputs are guarded like every other command's (no output over an input, no
  existing file without --replace, checked before any work).
"""

import csv
import html.parser
import json
import re
import subprocess
import sys
import xml.etree.ElementTree as ET

import numpy as np
import pytest

import lintools as lt
from lintools.cli.demo_data import FEATURES


def run(*args, cwd=None, env=None):
    return subprocess.run([sys.executable, "-m", "lintools", *args], capture_output=True, text=True, timeout=300,
                          cwd=cwd, env=env)


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    proc = run("demo", "--out", "demo", "--quiet", "--rows", "1500", cwd=folder)
    assert proc.returncode == 0, proc.stderr
    return folder


@pytest.fixture(scope="module")
def written(demo):
    proc = run("report", "demo/supplier_leak.pmml", "demo/inspection.csv", "--recent", "demo/recent.csv", "--by",
               "shift", "--out", "r.html", "--quiet", cwd=demo)
    assert proc.returncode == 1, proc.stderr  # the demo's supplier disagrees with the refit (planted)
    page = (demo / "r.html").read_text(encoding="utf-8")
    return demo, page, json.loads((demo / "r.json").read_text(encoding="utf-8"))


def rows_of(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


class Strict(html.parser.HTMLParser):
    """Every element closed, in order; void elements self-closed (the XHTML rule)."""

    def __init__(self):
        super().__init__(convert_charrefs=False)
        self.stack, self.errors, self.pointers, self.svgs = [], [], [], 0

    def handle_starttag(self, tag, attrs):
        self.stack.append(tag)
        if tag == "svg":
            self.svgs += 1

    def handle_startendtag(self, tag, attrs):
        pass

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1] if self.stack else 'nothing'}")
        else:
            self.stack.pop()

    def handle_entityref(self, name):
        if name not in ("amp", "lt", "gt", "quot"):
            self.errors.append(f"&{name};")


def test_the_page_is_well_formed_and_every_figure_parses_as_xml(written):
    _, page, _ = written
    p = Strict()
    p.feed(page)
    p.close()
    assert not p.errors and not p.stack, (p.errors, p.stack)
    root = ET.fromstring(page.split("\n", 1)[1])  # XHTML form: the page without its doctype line
    assert root.tag == "html"
    svgs = re.findall(r"<svg\b.*?</svg>", page, flags=re.S)
    assert len(svgs) == p.svgs >= 6  # coefficients, reliability, ROC, gains, stability, score bins
    for svg in svgs:
        assert ET.fromstring(svg).tag == "svg"


def test_the_page_needs_nothing_outside_itself(written):
    _, page, _ = written
    lower = page.lower()
    assert "<script" not in lower and " src=" not in lower and "<link" not in lower and "@import" not in lower
    assert "://" not in page and "url(" not in lower
    assert set(re.findall(r'href="([^"]*)"', page)) <= {f"#{i}" for i in re.findall(r'id="([^"]+)"', page)}
    assert "@media print" in page  # the print stylesheet


def _pointer(doc, path):
    value = doc
    for part in path.split("/")[1:]:
        key = part.replace("~1", "/").replace("~0", "~")
        value = value[int(key)] if isinstance(value, list) else value[key]
    return value


NUMBER = re.compile(r"[-+]?(\d+\.?\d*|\.\d+)(e[-+]?\d+)?", re.I)


def test_every_number_on_the_page_is_the_twins_to_the_digits_printed(written):
    _, page, doc = written
    body = re.sub(r"<svg\b.*?</svg>", "", page, flags=re.S)  # figures: their ticks are scales, not figures
    tagged = re.findall(r'<(span|td)(?: class="[a-z]+")? data-k="([^"]*)">([^<]*)</\1>', body)
    assert len(tagged) > 300
    for _, path, text in tagged:
        value = _pointer(doc, path.replace("&quot;", '"').replace("&amp;", "&"))
        if value is None:
            assert text == ("(not given)" if path.startswith("/audit/options/") else "not defined"), (path, text)
            continue
        if isinstance(value, str):
            assert text == value, (path, text)
            continue
        if isinstance(value, bool):
            assert text == ("yes" if value else "no"), (path, text)
            continue
        m = NUMBER.match(text)
        assert m, (path, text)
        # a figure that rounds to zero carries no sign (common practice in printed tables)
        assert not re.fullmatch(r"-0(\.0*)?(e[-+]?\d+)?", text), (path, text, value)
        mant, exp = m.group(1), int((m.group(2) or "e0")[1:])
        decimals = len(mant.split(".")[1]) if "." in mant else 0
        half_unit = 0.5 * 10.0 ** (exp - decimals)
        assert abs(float(m.group(0)) - value) <= half_unit * (1 + 1e-9) + 1e-300, (path, text, value)
    # a table cell with a digit is a figure of the twin, or a label (band, term, file, option)
    cells = re.findall(r'<td class="([a-z]+)"( data-k="[^"]*")?>([^<]*)</td>', body)
    for cls, key, text in cells:
        if re.search(r"\d", text) and not key:
            assert cls in ("t", "hash", "n") and not re.fullmatch(r"[-+]?\d+\.\d+(e[-+]?\d+)?", text), text


def test_two_runs_differ_only_in_the_date_line(written):
    folder, page, _ = written
    proc = run("report", "demo/supplier_leak.pmml", "demo/inspection.csv", "--recent", "demo/recent.csv", "--by",
               "shift", "--out", "r.html", "--replace", "--quiet", cwd=folder)
    assert proc.returncode == 1, proc.stderr
    again = (folder / "r.html").read_text(encoding="utf-8")
    first, second = page.splitlines(), again.splitlines()
    assert len(first) == len(second)
    differ = [(a, b) for a, b in zip(first, second) if a != b]
    # the options differ in --replace; the date line may differ
    assert all(a.startswith('<p id="written">') or "--replace" in a + b for a, b in differ), differ[:3]
    env = {**__import__("os").environ, "SOURCE_DATE_EPOCH": "1767225600"}  # reproducible-builds convention
    for name in ("a", "b"):
        out = run("report", "demo/supplier_leak.pmml", "demo/inspection.csv", "--out", f"{name}.html", "--quiet",
                  cwd=folder, env=env)
        assert out.returncode == 1, out.stderr
    a, b = ((folder / f"{n}.html").read_bytes() for n in "ab")
    assert a.replace(b"a.html", b"b.html") == b  # identical but the output's own name in the audit
    ja, jb = ((folder / f"{n}.json").read_bytes() for n in "ab")
    assert ja.replace(b"a.html", b"b.html") == jb
    assert b"Written 2026-01-01 00:00:00 UTC" in a


def test_the_numbers_are_the_library_functions_on_the_same_rows(written):
    folder, _, doc = written
    dev, recent = rows_of(folder / "demo" / "inspection.csv"), rows_of(folder / "demo" / "recent.csv")
    X = np.array([[float(r[f]) for f in FEATURES] for r in dev])
    Xr = np.array([[float(r[f]) for f in FEATURES] for r in recent])
    y = np.array([r["leak"] == "True" for r in dev])
    model = lt.read_pmml(folder / "demo" / "supplier_leak.pmml")
    p, pr = model.mean(X), model.mean(Xr)
    fit = lt.logistic(X, y, names=FEATURES)
    cmp = lt.compare_coefficients(fit, model.coefficients, model.intercept, X=X, y=y)
    # the refit agrees to rounding only: the command's design is a column selection of the
    # table (another memory layout), and BLAS sums in another order (last bits, 1e-15)
    assert np.isclose(doc["comparison"]["wald_statistic"], cmp.wald_statistic, rtol=1e-12, atol=0)
    assert np.allclose(doc["comparison"]["refit"], cmp.refit, rtol=1e-12, atol=0)
    assert np.allclose(doc["refit"]["coefficients"], fit.coefficients, rtol=1e-12, atol=0)
    roc = lt.roc_auc(y, p)
    assert doc["discrimination"]["roc_area"]["area"] == roc.area
    assert doc["discrimination"]["roc_area"]["accuracy_ratio"] == roc.accuracy_ratio
    ks = lt.kolmogorov_smirnov(y, p)
    assert doc["discrimination"]["kolmogorov_smirnov"]["statistic"] == ks.statistic
    assert doc["discrimination"]["kolmogorov_smirnov"]["p_value"] == ks.p_value
    assert doc["discrimination"]["gains"]["captured"] == lt.gains(y, p, bands=10).captured.tolist()
    # the probabilities themselves may differ in the last bit for the same reason: figures
    # that use their values (not only their order) agree to 1e-12
    bt = lt.band_tests(y, p, 10)
    assert np.allclose(doc["band_tests"]["binomial_p_value"], bt.binomial_p_value, rtol=1e-12, atol=0)
    assert np.allclose(doc["band_tests"]["jeffreys_p_value"], bt.jeffreys_p_value, rtol=1e-12, atol=0)
    assert doc["calibration"]["reliability"]["count"] == lt.reliability(y, p).count.tolist()
    assert np.allclose(doc["calibration"]["reliability"]["observed"][:3], lt.reliability(y, p).observed[:3], rtol=1e-12)
    assert np.isclose(doc["calibration"]["hosmer_lemeshow"]["statistic"], lt.hosmer_lemeshow(y, p).statistic,
                      rtol=1e-12, atol=0)
    st = lt.population_stability(p, pr)
    assert np.isclose(doc["stability"]["columns"]["delivered probability"]["index"], st.index, rtol=1e-12, atol=0)
    age = lt.population_stability(X[:, 3], Xr[:, 3])
    assert doc["stability"]["columns"]["nozzle_age"]["index"] == age.index
    assert age.reading != "stable"  # the demo's planted drift (nozzles 40 days older) is seen
    shifts = np.array([r["shift"] for r in dev])
    seg = {e["segment"]: e for e in doc["segments"]["entries"]}
    assert set(seg) == {"early", "late", "night"}
    for name, e in seg.items():
        rows = shifts == name
        assert e["rows"] == int(rows.sum())
        assert e["roc_area"] == lt.roc_auc(y[rows], p[rows]).area
    import hashlib  # FIPS 180-4 SHA-256, as Python's hashlib computes it

    for entry in doc["audit"]["inputs"]:
        assert entry["sha256"] == hashlib.sha256((folder / entry["path"]).read_bytes()).hexdigest()
    assert doc["data"]["rows_used"] == len(dev) and doc["stability"]["rows_used"] == len(recent)
    assert doc["audit"]["versions"]["numpy"] == np.__version__


def test_the_audit_block_and_the_caution(written):
    _, page, doc = written
    assert "statistical agreement is not model validation" in page
    assert "local regulation" in page and "model-risk practice" in page
    assert doc["audit"]["options"]["--by"] == "shift" and doc["audit"]["options"]["--bins"] == 10
    assert doc["audit"]["command"].startswith("lintools report demo/supplier_leak.pmml")
    assert doc["verdict"]["coefficients"] == "disagree" and doc["verdict"]["exit_status"] == 1
    assert "(intercept)" not in re.sub(r"<svg\b.*?</svg>", "", page, flags=re.S).replace('"/comparison/terms', "")


def test_outputs_are_guarded_before_any_work(written):
    folder, _, _ = written
    before = (folder / "r.html").read_bytes()
    exists = run("report", "demo/supplier_leak.pmml", "demo/inspection.csv", "--out", "r.html", cwd=folder)
    assert exists.returncode == 2 and "--replace" in exists.stderr
    over = run("report", "demo/supplier_leak.pmml", "demo/inspection.csv", "--out", "x.html", "--twin",
               "demo/inspection.csv", cwd=folder)
    assert over.returncode == 2 and "same file" in over.stderr
    same = run("report", "demo/supplier_leak.pmml", "demo/inspection.csv", "--out", "y.html", "--twin", "y.html",
               cwd=folder)
    assert same.returncode == 2 and "same file" in same.stderr
    assert (folder / "r.html").read_bytes() == before and not (folder / "x.html").exists()


def test_band_tests_are_refused_by_name_for_a_model_without_one_probability(written):
    folder, _, _ = written
    out = run("report", "demo/fill_deviation.json", "demo/inspection.csv", "--bands", "5", "--out", "ls.html",
              cwd=folder)
    assert out.returncode == 2 and "--bands does not apply to a least-squares model" in out.stderr
    assert not (folder / "ls.html").exists()


def test_a_figure_that_rounds_to_zero_prints_without_a_sign():
    """A difference of -1e-15 standard errors printed to two places reads 0.00, not -0.00: the sign
    of a value below the printed precision says nothing (common practice in printed tables; Python's
    'z' format option, PEP 682).  A value that does not round to zero keeps its sign."""
    from lintools.document.page import number_text

    assert number_text(-1e-15, ".2f") == "0.00"
    assert number_text(np.float64(-0.004), ".2f") == "0.00"
    assert number_text(-0.006, ".2f") == "-0.01"
    assert number_text(-1e-300, ".4g") == "-1e-300"
    assert number_text(-2.5e-16, ".4g") == "-2.5e-16"
    assert number_text(np.int64(-3), "int") == "-3"
    assert number_text(-0.0, "") == "-0.0"  # the shortest exact text keeps what it is given
