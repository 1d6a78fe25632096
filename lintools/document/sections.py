"""The sign-off document as one self-contained HTML page, written from its JSON twin.

:func:`render_page` takes the twin (a plain JSON dictionary made by ``lintools report``)
and the charts, and returns the page: no script, no external resource (figures are
inline SVG, the stylesheet is inline), a print stylesheet for the browser's PDF export.
Its sections, in order: the verdicts; the delivered model and the data; the refit
against the delivered coefficients; calibration; discrimination; band tests; stability
(with a recent sample); segments (with ``--by``); the convergence record; the audit
block with the caution.  The time of writing is on a line of its own (the only line
that differs between two runs on the same inputs).
"""

from __future__ import annotations

import re
from typing import Any

from .charts import Chart, term_words
from .page import STYLE, Page, escape
from .svg import chart_svg

__all__ = ["render_page"]


def _figure(chart: Chart) -> str:
    return f"<figure>{chart_svg(chart)}<figcaption>{escape(chart.note)}</figcaption></figure>"


def _verdicts(pg: Page) -> str:
    v = pg.get("verdict")
    ok = v["coefficients"] == "agree"
    tolerance = (f' at significance {pg.num(("verdict", "significance"), "g")}'
                 + (f' and largest prediction difference {pg.num(("verdict", "max_difference"), "g")}'
                    if v["max_difference"] is not None else ""))
    items = [f'<li>Delivered coefficients against the refit: <span class="{"good" if ok else "bad"}">'
             f'{escape(v["coefficients"].upper())}</span>'
             + (": " + "; ".join(escape(r) for r in v["reasons"]) if v["reasons"] else tolerance) + "</li>",
             "<li>Refit converged: " + ('<span class="good">yes</span>' if v["refit_converged"]
                                       else '<span class="bad">NO: its numbers are not an optimum</span>') + "</li>"]
    cal = pg.get("calibration")
    if cal["hosmer_lemeshow"] is not None:
        items.append(f"<li>Hosmer-Lemeshow test of calibration: p {pg.num(('calibration', 'hosmer_lemeshow', 'p_value'), 'p')}</li>")
    if pg.get("band_tests") is not None:
        items.append(f"<li>Band tests rejecting at significance {pg.num(('verdict', 'band_significance'), 'g')}: "
                     f"binomial {pg.num(('band_tests', 'rejected', 0), 'int')} of "
                     f"{pg.num(('band_tests', 'tested', 0), 'int')}, Jeffreys {pg.num(('band_tests', 'rejected', 1), 'int')}"
                     f" of {pg.num(('band_tests', 'tested', 1), 'int')}; after Holm's correction "
                     f"{pg.num(('band_tests', 'rejected_holm', 0), 'int')} and "
                     f"{pg.num(('band_tests', 'rejected_holm', 1), 'int')}</li>")
    items.append(f"<li>ROC area {pg.num(('discrimination', 'roc_area', 'area'), '.4f')}, accuracy ratio "
                 f"{pg.num(('discrimination', 'roc_area', 'accuracy_ratio'), '.4f')}, Kolmogorov-Smirnov "
                 f"{pg.num(('discrimination', 'kolmogorov_smirnov', 'statistic'), '.4f')}</li>")
    if pg.get("stability") is not None:
        worst = max(pg.get("stability", "columns").items(), key=lambda kv: kv[1]["index"])
        items.append(f"<li>Largest population stability index: {escape(worst[0])} "
                     f"{pg.num(('stability', 'columns', worst[0], 'index'), '.4f')} ({escape(worst[1]['reading'])})</li>")
    items.append(f"<li>Exit status of the command: {pg.num(('verdict', 'exit_status'), 'int')} (0: agree and "
                 "converged; 1: disagree or not converged)</li>")
    return '<div class="verdict"><h2 id="verdicts">Verdicts</h2><ul>' + "".join(items) + "</ul></div>"


def _model_data(pg: Page) -> str:
    m = pg.get("model")
    rows = [["<th>delivered model file</th>", pg.word(m["file"])], ["<th>format</th>", pg.word(m["format"])],
            ["<th>kind</th>", pg.word(m["kind"])], ["<th>target column</th>", pg.word(m["target"])],
            ["<th>modelled class</th>", pg.word(m["positive"])],
            ["<th>terms</th>", pg.word(", ".join(term_words(t) for t in m["terms"]))],
            ["<th>development data</th>", pg.word(pg.get("data", "file"))],
            ["<th>rows read</th>", pg.cell(("data", "rows_read"), "int")],
            ["<th>rows used</th>", pg.cell(("data", "rows_used"), "int")],
            ["<th>rows dropped for missing values</th>", pg.cell(("data", "dropped_rows"), "int")],
            ["<th>case weights</th>", pg.word(pg.get("data", "weights") or "none (every row counts once)")]]
    return ('<h2 id="model">Delivered model and data</h2>'
            + "<table><tbody>" + "".join("<tr>" + "".join(r) + "</tr>" for r in rows) + "</tbody></table>")


def _refit(pg: Page, charts: dict[str, Chart]) -> str:
    c = pg.get("comparison")
    level = pg.get("refit_interval", "level")
    rows = []
    for i, t in enumerate(c["terms"]):
        rows.append([pg.word(term_words(t)), pg.cell(("comparison", "delivered", i)), pg.cell(("comparison", "refit", i)),
                     pg.cell(("refit_interval", "standard_error", i), ".4g"),
                     pg.cell(("refit_interval", "lower", i)), pg.cell(("refit_interval", "upper", i)),
                     pg.cell(("comparison", "difference", i), ".4g"),
                     pg.cell(("comparison", "difference_in_se", i), ".2f")])
    table = pg.table(["term", "delivered", "refit", "refit standard error", f"refit {100 * level:g}% low",
                      f"refit {100 * level:g}% high", "delivered minus refit", "in refit standard errors"], rows,
                     "Coefficients, intercept first (Wald intervals of the refit)")
    tests = pg.pairs([("Wald test of 'delivered = refit': chi-square", ("comparison", "wald_statistic"), ".4f"),
                      ("degrees of freedom", ("comparison", "wald_degrees_of_freedom"), "int"),
                      ("p-value", ("comparison", "wald_p_value"), "p"),
                      ("score test at the delivered coefficients: chi-square", ("comparison", "score_statistic"), ".4f"),
                      ("p-value", ("comparison", "score_p_value"), "p"),
                      ("largest difference in predicted probability", ("comparison", "max_abs_prediction_difference"),
                       ".4g"),
                      ("mean difference in predicted probability", ("comparison", "mean_abs_prediction_difference"),
                       ".4g")], "Tests of agreement")
    fit = pg.pairs([("log-likelihood", ("refit", "log_likelihood"), ".6f"), ("deviance", ("refit", "deviance"), ".6f"),
                    ("deviance of the intercept-only model", ("refit", "null_deviance"), ".6f"),
                    ("likelihood-ratio statistic against it", ("refit", "lr_statistic"), ".4f"),
                    ("its degrees of freedom", ("refit", "lr_degrees_of_freedom"), "int"),
                    ("its p-value", ("refit", "lr_p_value"), "p"), ("AIC", ("refit", "aic"), ".4f"),
                    ("BIC", ("refit", "bic"), ".4f"), ("case weight of the rows", ("refit", "n_observations"), ".10g"),
                    ("ridge strength l2 of the refit", ("refit", "l2"), "g")], "The refit as a whole")
    words = pg.get("implied_l2_words")
    note = pg.get("comparison_note")
    extra = "".join(f"<p>{escape(t)}</p>" for t in (note, words) if t)
    return ('<h2 id="refit">Refit against the delivered coefficients</h2>'
            "<p>The delivered model's kind of model is refitted on the development data, with the delivered terms; "
            "each delivered coefficient is then placed in the refit's standard errors.</p>"
            + _figure(charts["coefficients"]) + table + tests + extra + fit)


def _calibration(pg: Page, charts: dict[str, Chart]) -> str:
    r = pg.get("calibration", "reliability")
    pct = f"{100 * r['level']:g}%"
    rows = [[pg.word(str(j + 1), "n"), pg.cell(("calibration", "reliability", "edges", j)),
             pg.cell(("calibration", "reliability", "edges", j + 1)),
             pg.cell(("calibration", "reliability", "count", j), "int"),
             pg.cell(("calibration", "reliability", "weight", j), ".6g"),
             pg.cell(("calibration", "reliability", "mean_predicted", j), ".4f"),
             pg.cell(("calibration", "reliability", "observed", j), ".4f"),
             pg.cell(("calibration", "reliability", "observed_lower", j), ".4f"),
             pg.cell(("calibration", "reliability", "observed_upper", j), ".4f")]
            for j in range(len(r["count"]))]
    kind = "equal width" if r["strategy"] == "width" else "equal numbers of rows"
    table = pg.table(["bin", "above", "up to", "rows", "case weight", "mean forecast", "observed frequency",
                      f"{pct} low (Wilson)", f"{pct} high (Wilson)"], rows, f"Reliability by forecast bin ({kind})")
    items = [("Brier score (mean squared error of the forecast)", ("calibration", "brier", "score"), ".6f"),
             ("its reliability term (lower is better)", ("calibration", "brier", "reliability"), ".6f"),
             ("its resolution term (higher is better)", ("calibration", "brier", "resolution"), ".6f"),
             ("its uncertainty term (of the outcome alone)", ("calibration", "brier", "uncertainty"), ".6f"),
             ("calibration error (mean |observed - forecast| over the bins)", ("calibration", "calibration_error"),
              ".6f")]
    cal = pg.get("calibration")
    if cal["hosmer_lemeshow"] is not None:
        items += [("Hosmer-Lemeshow statistic", ("calibration", "hosmer_lemeshow", "statistic"), ".4f"),
                  ("its degrees of freedom", ("calibration", "hosmer_lemeshow", "degrees_of_freedom"), "int"),
                  ("its p-value", ("calibration", "hosmer_lemeshow", "p_value"), "p")]
    if cal["calibration_line"] is not None:
        items += [("calibration slope (1 when calibrated)", ("calibration", "calibration_line", "slope"), ".4f"),
                  ("its interval, low", ("calibration", "calibration_line", "slope_interval", 0), ".4f"),
                  ("its interval, high", ("calibration", "calibration_line", "slope_interval", 1), ".4f"),
                  ("calibration in the large (0 when calibrated)", ("calibration", "calibration_line", "in_the_large"),
                   ".4f"),
                  ("its p-value", ("calibration", "calibration_line", "in_the_large_p_value"), "p")]
    if cal["spiegelhalter"] is not None:
        items += [("Spiegelhalter's z", ("calibration", "spiegelhalter", "statistic"), ".4f"),
                  ("its p-value", ("calibration", "spiegelhalter", "p_value"), "p")]
    notes = "".join(f"<p class=\"small\">Not computed: {escape(n)}</p>" for n in cal["notes"])
    return ('<h2 id="calibration">Calibration of the delivered probabilities</h2>'
            + _figure(charts["reliability"]) + table + pg.pairs(items, "Scores and checks") + notes)


def _discrimination(pg: Page, charts: dict[str, Chart]) -> str:
    a = ("discrimination", "roc_area")
    pct = f"{100 * pg.get(*a, 'level'):g}%"
    roc = pg.pairs([("ROC area", (*a, "area"), ".4f"), ("its standard error (DeLong)", (*a, "standard_error"), ".4f"),
                    (f"{pct} interval, low", (*a, "lower"), ".4f"), (f"{pct} interval, high", (*a, "upper"), ".4f"),
                    ("accuracy ratio (2 x area - 1)", (*a, "accuracy_ratio"), ".4f"),
                    ("its standard error", (*a, "accuracy_ratio_standard_error"), ".4f"),
                    (f"{pct} interval, low", (*a, "accuracy_ratio_lower"), ".4f"),
                    (f"{pct} interval, high", (*a, "accuracy_ratio_upper"), ".4f"),
                    ("case weight of positives", (*a, "positives"), ".10g"),
                    ("case weight of negatives", (*a, "negatives"), ".10g")], "Ranking")
    k = ("discrimination", "kolmogorov_smirnov")
    ks = pg.pairs([("Kolmogorov-Smirnov distance", (*k, "statistic"), ".4f"),
                   ("at the score", (*k, "location"), ".6g"),
                   ("share of positives at or below it", (*k, "positives_at_or_below"), ".4f"),
                   ("share of negatives at or below it", (*k, "negatives_at_or_below"), ".4f"),
                   ("p-value", (*k, "p_value"), "p")],
                  f"Distance between the score distributions of the classes ({pg.get(*k, 'method')} p-value)")
    g = ("discrimination", "gains")
    rows = [[pg.word(str(b + 1), "n"), pg.cell((*g, "highest", b)), pg.cell((*g, "lowest", b)),
             pg.cell((*g, "rows", b), "int"), pg.cell((*g, "positives", b), ".6g"), pg.cell((*g, "rate", b), ".4f"),
             pg.cell((*g, "cumulative_share", b), ".4f"), pg.cell((*g, "captured", b), ".4f"),
             pg.cell((*g, "lift", b), ".3f"), pg.cell((*g, "cumulative_lift", b), ".3f")]
            for b in range(len(pg.get(*g, "rows")))]
    gains = pg.table(["band", "highest score", "lowest score", "rows", "positives", "rate of positives",
                      "share of weight so far", "share of positives so far", "lift", "lift so far"], rows,
                     "Gains by score band, highest scores first")
    return ('<h2 id="discrimination">Discrimination</h2>' + _figure(charts["roc"]) + roc + ks
            + _figure(charts["gains"]) + gains
            + f'<p class="small">Overall rate of positives {pg.num((*g, "overall_rate"), ".4f")}.</p>')


def _bands(pg: Page) -> str:
    if pg.get("band_tests") is None:
        return ""
    b = ("band_tests",)
    bt = pg.get(*b)
    pct = f"{100 * bt['level']:g}%"
    rows = [[pg.word(bt["bands"][i]), pg.cell((*b, "lowest", i)), pg.cell((*b, "highest", i)),
             pg.cell((*b, "rows", i), "int"), pg.cell((*b, "positives", i), ".6g"),
             pg.cell((*b, "observed", i), ".4f"), pg.cell((*b, "predicted", i), ".4f"),
             pg.cell((*b, "binomial_p_value", i), "p"), pg.cell((*b, "jeffreys_p_value", i), "p"),
             pg.cell((*b, "jeffreys_lower", i), ".4f"), pg.cell((*b, "jeffreys_upper", i), ".4f")]
            for i in range(len(bt["rows"]))]
    table = pg.table(["band", "lowest forecast", "highest forecast", "rows", "positives", "observed rate",
                      "mean forecast", "exact binomial p", "Jeffreys p", f"Jeffreys {pct} low",
                      f"Jeffreys {pct} high"], rows, f"Back-test by band: {pg.get('band_source')}")
    notes = "".join(f'<p class="small">{escape(n)}</p>' for n in bt["notes"])
    return ('<h2 id="bands">Band tests</h2><p>Each band\'s positives are tested against its mean forecast, '
            f"on the side '{escape(bt['side'])}': the exact binomial test, and the Jeffreys test (the posterior "
            "Beta(d + 1/2, n - d + 1/2)).</p>" + table + notes)


def _stability(pg: Page, charts: dict[str, Chart]) -> str:
    if pg.get("stability") is None:
        return ""
    s = pg.get("stability")
    rows = [[pg.word(name), pg.cell(("stability", "columns", name, "index"), ".4f"), pg.word(r["reading"]),
             pg.word(str(len(r["contribution"])), "n")] for name, r in s["columns"].items()]
    out = ['<h2 id="stability">Stability against the recent sample</h2>',
           f"<p>The recent sample {escape(s['file'])}: {pg.num(('stability', 'rows_used'), 'int')} rows used of "
           f"{pg.num(('stability', 'rows_read'), 'int')} read. Each input column, and the delivered model's "
           f"probability (as '{escape(s['score'])}'), is binned at the development sample's weighted quantiles "
           "(text columns by category).</p>",
           _figure(charts["stability"]),
           pg.table(["column", "population stability index", "reading (common practice)", "bins"], rows)]
    for name in s["shown"]:
        chart = charts[f"stability bins of {name}"]
        rec = ("stability", "columns", name)
        labels = s["bin_words"][name]
        brows = [[pg.word(labels[j]), pg.cell((*rec, "expected_rows", j), "int"),
                  pg.cell((*rec, "actual_rows", j), "int"), pg.cell((*rec, "expected_share", j), ".4f"),
                  pg.cell((*rec, "actual_share", j), ".4f"), pg.cell((*rec, "contribution", j), ".4f")]
                 for j in range(len(labels))]
        out += [f"<h3>Bins of {escape(name)}</h3>", _figure(chart),
                pg.table(["bin", "development rows", "recent rows", "development share", "recent share",
                          "contribution to the index"], brows)]
    return "".join(out)


def _segments(pg: Page) -> str:
    if pg.get("segments") is None:
        return ""
    s = pg.get("segments")
    head = ["segment", "rows", "positives", "observed rate", "mean forecast", "Brier score", "ROC area",
            "accuracy ratio", "Kolmogorov-Smirnov", "Hosmer-Lemeshow p", "bands rejected (binomial)",
            "stability of the score", "flag"]
    rows = []
    for i, e in enumerate(s["entries"]):
        key = ("segments", "entries", i)
        flag = ("SMALL" if e["small"] else "") + (f" {e['note']}" if e["note"] else "")
        rows.append([pg.word(e["segment"]), pg.cell((*key, "rows"), "int"), pg.cell((*key, "positives"), ".6g"),
                     pg.cell((*key, "observed_rate"), ".4f"), pg.cell((*key, "mean_forecast"), ".4f"),
                     pg.cell((*key, "brier"), ".5f"), pg.cell((*key, "roc_area"), ".4f"),
                     pg.cell((*key, "accuracy_ratio"), ".4f"), pg.cell((*key, "ks"), ".4f"),
                     pg.cell((*key, "hosmer_lemeshow_p_value"), "p"), pg.cell((*key, "bands_rejected"), "int"),
                     pg.cell((*key, "stability_index"), ".4f"), pg.word(flag.strip())])
    return (f'<h2 id="segments">Segments of {escape(s["by"])}</h2>'
            f"<p>Every segment is shown; none is dropped. {escape(s['small_rule'])}</p>" + pg.table(head, rows))


def _convergence(pg: Page) -> str:
    c = ("refit", "convergence")
    return ('<h2 id="convergence">Convergence of the refit</h2>'
            + pg.pairs([("converged", (*c, "converged"), ""), ("iterations", (*c, "iterations"), "int"),
                        ("largest gradient per unit case weight at the answer", (*c, "gradient_norm"), ".3g"),
                        ("objective at the answer", (*c, "objective"), ".10g")])
            + f"<p>{escape(pg.get(*c, 'message'))}</p>")


def _audit(pg: Page) -> str:
    a = pg.get("audit")
    files = [[pg.word(f["role"]), pg.word(f["path"]), pg.cell(("audit", "inputs", i, "bytes"), "int"),
              pg.word(f["sha256"], "hash")] for i, f in enumerate(a["inputs"])]
    versions = [[f"<th>{escape(k)}</th>", pg.word(v)] for k, v in a["versions"].items()]
    options = [[f"<th>{escape(k)}</th>", pg.cell(("audit", "options", k), "", "(not given)", "t")]
               for k in a["options"]]
    return ('<h2 id="audit">Audit</h2>'
            + pg.table(["input", "path", "bytes", "SHA-256"], files, "Input files")
            + "<table><caption>Software</caption><tbody>"
            + "".join("<tr>" + "".join(r) + "</tr>" for r in versions) + "</tbody></table>"
            + "<table><caption>Options (every option of the command)</caption><tbody>"
            + "".join("<tr>" + "".join(r) + "</tr>" for r in options) + "</tbody></table>"
            + f"<p>Command: <code>{escape(a['command'])}</code></p>"
            + f"<p>Seeds: {escape(a['seeds'])}</p>"
            + f"\n<p id=\"written\">Written {escape(a['written'])}</p>\n"
            + f'<p class="caution">{escape(a["caution"])}</p>')


def render_page(doc: dict, charts: dict[str, Chart]) -> str:
    """The HTML page of the sign-off document ``doc`` (its JSON twin) with its ``charts``."""
    pg = Page(doc)
    parts = [_verdicts(pg), _model_data(pg), _refit(pg, charts), _calibration(pg, charts),
             _discrimination(pg, charts), _bands(pg), _stability(pg, charts), _segments(pg), _convergence(pg),
             _audit(pg)]
    toc = [(i, t) for i, t in (("verdicts", "Verdicts"), ("model", "Delivered model and data"),
                               ("refit", "Refit against the delivered coefficients"), ("calibration", "Calibration"),
                               ("discrimination", "Discrimination"), ("bands", "Band tests"),
                               ("stability", "Stability"), ("segments", "Segments"), ("convergence", "Convergence"),
                               ("audit", "Audit")) if f'id="{i}"' in "".join(parts)]
    body = "\n".join(parts)
    count = iter(range(1, len(toc) + 1))
    body = re.sub(r'<h2 id="(?!verdicts)([a-z]+)">', lambda m: f'{m.group(0)}{next(count)} ', body)
    nav = "<nav><ol>" + "".join(f'<li><a href="#{i}">{escape(t)}</a></li>' for i, t in toc) + "</ol></nav>"
    return ("<!DOCTYPE html>\n"
            '<html lang="en">\n<head>\n<meta charset="utf-8"/>\n'
            '<meta name="viewport" content="width=device-width, initial-scale=1"/>\n'
            f"<title>{escape(doc['title'])}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n"
            f"<h1>{escape(doc['title'])}</h1>\n"
            '<p class="lead">The judgement of a delivered model by lintools: every figure below is in the JSON '
            "file written beside this page, to full precision.</p>\n"
            + nav + "\n" + body + "\n</body>\n</html>\n")
