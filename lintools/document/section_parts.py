"""Sections of the sign-off page that every kind of model shares: the verdicts, the
delivered model and the data, the refit against the delivered coefficients, stability
against a recent sample, the out-of-time frame, the convergence record and the audit.
Every number is printed from the JSON twin by its pointer (see :mod:`.page`).
"""

from __future__ import annotations

from typing import Any, Sequence

from .charts import Chart, term_words
from .page import Page, escape
from .svg import chart_svg

__all__ = ["audit", "convergence", "figure", "heading", "kind_sections", "model_data", "out_of_time", "refit", "segments", "stability", "verdicts"]


def heading(h: str, key: str, title: str, at: tuple) -> str:
    """A section heading; within the out-of-time section (``at`` not empty) a subheading
    without an anchor of the table of contents."""
    if at:
        return f"<{h}>{escape(title)} (out of time)</{h}>"
    return f'<{h} id="{key}">{escape(title)}</{h}>'


def figure(chart: Chart) -> str:
    """A chart as an inline SVG figure with its reading note."""
    return f"<figure>{chart_svg(chart)}<figcaption>{escape(chart.note)}</figcaption></figure>"


def verdicts(pg: Page, items: Sequence[str]) -> str:
    """The verdict box: the coefficients and the convergence, the kind's ``items``, the
    largest stability index and the exit status."""
    v = pg.get("verdict")
    ok = v["coefficients"] == "agree"
    tolerance = (f' at significance {pg.num(("verdict", "significance"), "g")}'
                 + (f' and largest prediction difference {pg.num(("verdict", "max_difference"), "g")}'
                    if v["max_difference"] is not None else ""))
    out = [f'<li>Delivered coefficients against the refit: <span class="{"good" if ok else "bad"}">'
           f'{escape(v["coefficients"].upper())}</span>'
           + (": " + "; ".join(escape(r) for r in v["reasons"]) if v["reasons"] else tolerance) + "</li>",
           "<li>Refit converged: " + ('<span class="good">yes</span>' if v["refit_converged"]
                                     else '<span class="bad">NO: its numbers are not an optimum</span>') + "</li>"]
    out += list(items)
    if pg.get("stability") is not None:
        worst = max(pg.get("stability", "columns").items(), key=lambda kv: kv[1]["index"])
        out.append(f"<li>Largest population stability index: {escape(worst[0])} "
                   f"{pg.num(('stability', 'columns', worst[0], 'index'), '.4f')} ({escape(worst[1]['reading'])})</li>")
    oot = pg.get("out_of_time")
    if oot is not None and not oot["with_outcomes"]:
        out.append("<li>Out of time: the recent sample has no outcomes; only its population is compared</li>")
    out.append(f"<li>Exit status of the command: {pg.num(('verdict', 'exit_status'), 'int')} (0: agree and "
               "converged; 1: disagree or not converged)</li>")
    return '<div class="verdict"><h2 id="verdicts">Verdicts</h2><ul>' + "".join(out) + "</ul></div>"


def model_data(pg: Page) -> str:
    """The delivered model and the development data."""
    m = pg.get("model")
    rows = [["<th>delivered model file</th>", pg.word(m["file"])], ["<th>format</th>", pg.word(m["format"])],
            ["<th>kind</th>", pg.word(m["kind_words"])], ["<th>target column</th>", pg.word(m["target"])]]
    if m["positive"] is not None:
        rows.append(["<th>modelled class</th>", pg.word(m["positive"])])
    if m["classes"] is not None:
        rows.append(["<th>classes</th>", pg.word(", ".join(m["classes"]))])
    rows += [["<th>terms</th>", pg.word(", ".join(term_words(t) for t in m["terms"]))],
             ["<th>development data</th>", pg.word(pg.get("data", "file"))],
             ["<th>rows read</th>", pg.cell(("data", "rows_read"), "int")],
             ["<th>rows used</th>", pg.cell(("data", "rows_used"), "int")],
             ["<th>rows dropped for missing values</th>", pg.cell(("data", "dropped_rows"), "int")],
             ["<th>case weights</th>", pg.word(pg.get("data", "weights") or "none (every row counts once)")]]
    return ('<h2 id="model">Delivered model and data</h2>'
            + "<table><tbody>" + "".join("<tr>" + "".join(r) + "</tr>" for r in rows) + "</tbody></table>")


#: The rows of the table of the refit as a whole: (label, key in the refit's record, format).
LIKELIHOOD_ROWS = (("log-likelihood", "log_likelihood", ".6f"), ("deviance", "deviance", ".6f"),
                   ("deviance of the intercept-only model", "null_deviance", ".6f"),
                   ("likelihood-ratio statistic against it", "lr_statistic", ".4f"),
                   ("its degrees of freedom", "lr_degrees_of_freedom", "int"), ("its p-value", "lr_p_value", "p"))
RESPONSE_ROWS = (("residual standard deviation (square root of the residual mean square)",
                  "residual_standard_error", ".6g"),
                 ("share of the response's variation explained (R-squared)", "r_squared", ".6f"),
                 ("the same, adjusted for the number of terms", "adjusted_r_squared", ".6f"),
                 ("F statistic of every slope = 0", "f_statistic", ".4f"),
                 ("its p-value", "f_p_value", "p"), ("residual degrees of freedom", "degrees_of_freedom", ".10g"),
                 ("log-likelihood (normal errors)", "log_likelihood", ".6f"),
                 ("condition number of the scaled design", "condition_number", ".4g"))
COMMON_ROWS = (("AIC", "aic", ".4f"), ("BIC", "bic", ".4f"), ("case weight of the rows", "n_observations", ".10g"),
               ("ridge strength l2 of the refit", "l2", "g"))


def refit(pg: Page, charts: dict[str, Chart]) -> str:
    """The delivered coefficients against the refit: figure, table, tests, the refit as a whole."""
    c = pg.get("comparison")
    ri = pg.get("refit_interval")
    pct = f"{100 * ri['level']:g}%"
    rows = [[pg.word(term_words(t)), pg.cell(("comparison", "delivered", i)), pg.cell(("comparison", "refit", i)),
             pg.cell(("refit_interval", "standard_error", i), ".4g"),
             pg.cell(("refit_interval", "lower", i)), pg.cell(("refit_interval", "upper", i)),
             pg.cell(("comparison", "difference", i), ".4g"),
             pg.cell(("comparison", "difference_in_se", i), ".2f")] + _within(pg, i) for i, t in enumerate(c["terms"])]
    table = pg.table(["term", "delivered", "refit", "refit standard error", f"refit {pct} low", f"refit {pct} high",
                      "delivered minus refit", "in refit standard errors", "difference the data cannot resolve",
                      "within what the data determine"], rows,
                     f"Coefficients, intercept first (Wald intervals of the refit, {ri['distribution']} quantiles)"
                     + _resolution_words(pg))
    predicts = "response" if pg.get("model", "positive") is None and pg.get("model", "classes") is None \
        else "probability"
    tests = pg.pairs([("Wald test of 'delivered = refit': chi-square", ("comparison", "wald_statistic"), ".4f"),
                      ("degrees of freedom", ("comparison", "wald_degrees_of_freedom"), "int"),
                      ("p-value", ("comparison", "wald_p_value"), "p"),
                      ("score test at the delivered coefficients: chi-square", ("comparison", "score_statistic"), ".4f"),
                      ("p-value", ("comparison", "score_p_value"), "p"),
                      (f"largest difference in predicted {predicts}", ("comparison", "max_abs_prediction_difference"),
                       ".4g"),
                      (f"mean difference in predicted {predicts}", ("comparison", "mean_abs_prediction_difference"),
                       ".4g")], "Tests of agreement")
    record = pg.get("refit")
    shown = [(label, ("refit", key), spec) for label, key, spec in
             (RESPONSE_ROWS if "r_squared" in record else LIKELIHOOD_ROWS) + COMMON_ROWS if key in record]
    whole = pg.pairs(shown, "The refit as a whole")
    extra = "".join(f"<p>{escape(t)}</p>" for t in (pg.get("comparison_note"), pg.get("implied_l2_words")) if t)
    return ('<h2 id="refit">Refit against the delivered coefficients</h2>'
            "<p>The delivered model's kind of model is refitted on the development data, with the delivered terms; "
            "each delivered coefficient is then placed in the refit's standard errors.</p>"
            + figure(charts["coefficients"]) + table + tests + extra + whole)


def _within(pg: Page, i: int) -> list[str]:
    """The resolution of term ``i`` and whether its difference is within it (not defined
    without the refit's accuracy record)."""
    if pg.get("comparison_within_data") is None:
        return [pg.word("not defined", "n"), pg.word("not defined", "n")]
    return [pg.cell(("comparison", "data_resolution", i), ".3g"), pg.cell(("comparison_within_data", i), "")]


def _resolution_words(pg: Page) -> str:
    if pg.get("comparison_within_data") is None:
        return ""
    return ("; the difference the data cannot resolve is three times the expected change of the refit under the "
            f"rounding of its data ({pg.get('comparison', 'data_precision')}) plus its solver error")


def stability(pg: Page, charts: dict[str, Chart]) -> str:
    """Population stability of the inputs and the delivered scores against the recent sample."""
    if pg.get("stability") is None:
        return ""
    s = pg.get("stability")
    rows = [[pg.word(name), pg.cell(("stability", "columns", name, "index"), ".4f"), pg.word(r["reading"]),
             pg.word(str(len(r["contribution"])), "n")] for name, r in s["columns"].items()]
    scores = ", ".join(f"'{n}'" for n in s["scores"])
    out = ['<h2 id="stability">Stability against the recent sample</h2>',
           f"<p>The recent sample {escape(s['file'])}: {pg.num(('stability', 'rows_used'), 'int')} rows used of "
           f"{pg.num(('stability', 'rows_read'), 'int')} read. Each input column, and the delivered model's "
           f"scores (as {escape(scores)}), is binned at the development sample's weighted quantiles "
           "(text columns by category).</p>",
           figure(charts["stability"]),
           pg.table(["column", "population stability index", "reading (common practice)", "bins"], rows)]
    for name in s["shown"]:
        rec = ("stability", "columns", name)
        labels = s["bin_words"][name]
        brows = [[pg.word(labels[j]), pg.cell((*rec, "expected_rows", j), "int"),
                  pg.cell((*rec, "actual_rows", j), "int"), pg.cell((*rec, "expected_share", j), ".4f"),
                  pg.cell((*rec, "actual_share", j), ".4f"), pg.cell((*rec, "contribution", j), ".4f")]
                 for j in range(len(labels))]
        out += [f"<h3>Bins of {escape(name)}</h3>", figure(charts[f"stability bins of {name}"]),
                pg.table(["bin", "development rows", "recent rows", "development share", "recent share",
                          "contribution to the index"], brows)]
    return "".join(out)


def out_of_time(pg: Page, body: Any) -> str:
    """The out-of-time section: ``body(pg)`` (the kind's sections on the recent sample,
    under ``/out_of_time``) when the recent sample has outcomes, else why there are none."""
    o = pg.get("out_of_time")
    if o is None:
        return ""
    head = ('<h2 id="outoftime">Out of time: the recent sample</h2>'
            f"<p>The recent sample {escape(o['file'])} ({pg.num(('out_of_time', 'rows_used'), 'int')} rows), "
            "judged as the development data above, with the delivered model as it is. These figures are out of "
            "time: the model was not fitted on these rows, so they show how it holds up since.</p>")
    if not o["with_outcomes"]:
        return head + f'<p class="bad">No out-of-time judgement: {escape(o["note"])}.</p>'
    note = f'<p class="small">Not computed: {escape(o["note"])}</p>' if o["note"] else ""
    return head + note + body(pg)


def convergence(pg: Page) -> str:
    """The refit's convergence record and its accuracy record (when it has one)."""
    c = ("refit", "convergence")
    return ('<h2 id="convergence">Convergence and accuracy of the refit</h2>'
            + pg.pairs([("converged", (*c, "converged"), ""), ("iterations", (*c, "iterations"), "int"),
                        ("largest gradient per unit case weight at the answer", (*c, "gradient_norm"), ".3g"),
                        ("objective at the answer", (*c, "objective"), ".10g")])
            + f"<p>{escape(pg.get(*c, 'message'))}</p>" + _accuracy(pg))


def _accuracy(pg: Page) -> str:
    """The refit's accuracy record: the digits the solver reached and those the data determine."""
    if pg.get("refit").get("accuracy") is None:
        return ""
    a = ("refit", "accuracy")
    return (pg.pairs([("digits that agree with the exact optimum of these data", (*a, "solver_digits"), ".2f"),
                      ("worst term", (*a, "solver_worst"), ""), ("measured relative to", (*a, "solver_relative_to"), ""),
                      ("digits the data determine at their precision", (*a, "data_digits"), ".2f"),
                      ("precision of the data", (*a, "precision"), ""), ("worst term", (*a, "data_worst"), ""),
                      ("measured relative to", (*a, "data_relative_to"), "")], "Accuracy of the refit's coefficients")
            + f'<p>{pg.num((*a, "sentence"), "")}</p>')


def audit(pg: Page) -> str:
    """Input files with their SHA-256, software, options, command, seeds, time, caution."""
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


def segments(pg: Page, columns: Sequence[tuple[str, str, str]]) -> str:
    """The segments of ``--by``: one row per segment, ``columns`` as (heading, key of the
    entry, format), then the stability of the scores and the flag."""
    if pg.get("segments") is None:
        return ""
    s = pg.get("segments")
    head = ["segment", "rows"] + [c[0] for c in columns] + ["stability of the scores", "flag"]
    rows = []
    for i, e in enumerate(s["entries"]):
        key = ("segments", "entries", i)
        flag = ("SMALL" if e["small"] else "") + (f" {e['note']}" if e["note"] else "")
        rows.append([pg.word(e["segment"]), pg.cell((*key, "rows"), "int")]
                    + [pg.cell((*key, k), spec) for _, k, spec in columns]
                    + [pg.cell((*key, "stability_index"), ".4f"), pg.word(flag.strip())])
    return (f'<h2 id="segments">Segments of {escape(s["by"])}</h2>'
            f"<p>Every segment is shown; none is dropped. {escape(s['small_rule'])}</p>" + pg.table(head, rows))


def kind_sections(pg: Page, charts: dict[str, Chart], body: Any, key: str,
                  columns: Sequence[tuple[str, str, str]]) -> list[str]:
    """The sections of a kind, in page order: ``body(pg, charts)`` (its own figures on the
    development data), stability, out of time (``body`` again on the recent sample when
    its entry ``key`` is there) and the segments with ``columns``."""
    def later(p: Page) -> str:
        if not p.get("out_of_time").get(key):
            return ""
        return body(p, charts, ("out_of_time",), "out-of-time ", "h3")

    return [body(pg, charts), stability(pg, charts), out_of_time(pg, later), segments(pg, columns)]
