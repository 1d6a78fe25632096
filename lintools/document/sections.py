"""The sign-off document as one self-contained HTML page, written from its JSON twin.

:func:`render_page` takes the twin (a plain JSON dictionary made by ``lintools report``)
and the charts, and returns the page: no script, no external resource (figures are
inline SVG, the stylesheet is inline), a print stylesheet for the browser's PDF export.
Its sections, in order: the verdicts; the delivered model and the data; the refit
against the delivered coefficients; the judgement of the delivered scores (binary
logistic, here: calibration, discrimination, band tests; least squares:
:mod:`.sections_linear`; softmax: :mod:`.sections_classes`); stability (with a recent
sample); out of time (with a recent sample); segments (with ``--by``); the convergence
record; the audit block with the caution.  The time of writing is on a line of its own
(the only line that differs between two runs on the same inputs).
"""

from __future__ import annotations

import re
from typing import Any

from .charts import Chart
from .page import STYLE, Page, escape
from .section_parts import audit, convergence, figure, heading, model_data, out_of_time, refit, stability, verdicts

__all__ = ["render_page"]


_head = heading


def _binary_verdicts(pg: Page) -> list[str]:
    items = []
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
    o = pg.get("out_of_time")
    if o is not None and o["with_outcomes"] and o.get("discrimination"):
        items.append(f"<li>Out of time: ROC area {pg.num(('out_of_time', 'discrimination', 'roc_area', 'area'), '.4f')}"
                     f", Brier score {pg.num(('out_of_time', 'calibration', 'brier', 'score'), '.5f')} (development "
                     f"{pg.num(('calibration', 'brier', 'score'), '.5f')})</li>")
    return items


def _calibration(pg: Page, charts: dict[str, Chart], at: tuple = (), prefix: str = "", h: str = "h2") -> str:
    r = pg.get(*at, "calibration", "reliability")
    pct = f"{100 * r['level']:g}%"
    rows = [[pg.word(str(j + 1), "n"), pg.cell((*at, "calibration", "reliability", "edges", j)),
             pg.cell((*at, "calibration", "reliability", "edges", j + 1)),
             pg.cell((*at, "calibration", "reliability", "count", j), "int"),
             pg.cell((*at, "calibration", "reliability", "weight", j), ".6g"),
             pg.cell((*at, "calibration", "reliability", "mean_predicted", j), ".4f"),
             pg.cell((*at, "calibration", "reliability", "observed", j), ".4f"),
             pg.cell((*at, "calibration", "reliability", "observed_lower", j), ".4f"),
             pg.cell((*at, "calibration", "reliability", "observed_upper", j), ".4f")]
            for j in range(len(r["count"]))]
    kind = "equal width" if r["strategy"] == "width" else "equal numbers of rows"
    table = pg.table(["bin", "above", "up to", "rows", "case weight", "mean forecast", "observed frequency",
                      f"{pct} low (Wilson)", f"{pct} high (Wilson)"], rows, f"Reliability by forecast bin ({kind})")
    items = [("Brier score (mean squared error of the forecast)", (*at, "calibration", "brier", "score"), ".6f"),
             ("its reliability term (lower is better)", (*at, "calibration", "brier", "reliability"), ".6f"),
             ("its resolution term (higher is better)", (*at, "calibration", "brier", "resolution"), ".6f"),
             ("its uncertainty term (of the outcome alone)", (*at, "calibration", "brier", "uncertainty"), ".6f"),
             ("calibration error (mean |observed - forecast| over the bins)", (*at, "calibration", "calibration_error"),
              ".6f")]
    cal = pg.get(*at, "calibration")
    if cal["hosmer_lemeshow"] is not None:
        items += [("Hosmer-Lemeshow statistic", (*at, "calibration", "hosmer_lemeshow", "statistic"), ".4f"),
                  ("its degrees of freedom", (*at, "calibration", "hosmer_lemeshow", "degrees_of_freedom"), "int"),
                  ("its p-value", (*at, "calibration", "hosmer_lemeshow", "p_value"), "p")]
    if cal["calibration_line"] is not None:
        items += [("calibration slope (1 when calibrated)", (*at, "calibration", "calibration_line", "slope"), ".4f"),
                  ("its interval, low", (*at, "calibration", "calibration_line", "slope_interval", 0), ".4f"),
                  ("its interval, high", (*at, "calibration", "calibration_line", "slope_interval", 1), ".4f"),
                  ("calibration in the large (0 when calibrated)", (*at, "calibration", "calibration_line", "in_the_large"),
                   ".4f"),
                  ("its p-value", (*at, "calibration", "calibration_line", "in_the_large_p_value"), "p")]
    if cal["spiegelhalter"] is not None:
        items += [("Spiegelhalter's z", (*at, "calibration", "spiegelhalter", "statistic"), ".4f"),
                  ("its p-value", (*at, "calibration", "spiegelhalter", "p_value"), "p")]
    notes = "".join(f"<p class=\"small\">Not computed: {escape(n)}</p>" for n in cal["notes"])
    return (_head(h, "calibration", "Calibration of the delivered probabilities", at)
            + figure(charts[prefix + "reliability"]) + table + pg.pairs(items, "Scores and checks") + notes)


def _discrimination(pg: Page, charts: dict[str, Chart], at: tuple = (), prefix: str = "", h: str = "h2") -> str:
    a = (*at, "discrimination", "roc_area")
    pct = f"{100 * pg.get(*a, 'level'):g}%"
    roc = pg.pairs([("ROC area", (*a, "area"), ".4f"), ("its standard error (DeLong)", (*a, "standard_error"), ".4f"),
                    (f"{pct} interval, low", (*a, "lower"), ".4f"), (f"{pct} interval, high", (*a, "upper"), ".4f"),
                    ("accuracy ratio (2 x area - 1)", (*a, "accuracy_ratio"), ".4f"),
                    ("its standard error", (*a, "accuracy_ratio_standard_error"), ".4f"),
                    (f"{pct} interval, low", (*a, "accuracy_ratio_lower"), ".4f"),
                    (f"{pct} interval, high", (*a, "accuracy_ratio_upper"), ".4f"),
                    ("case weight of positives", (*a, "positives"), ".10g"),
                    ("case weight of negatives", (*a, "negatives"), ".10g")], "Ranking")
    k = (*at, "discrimination", "kolmogorov_smirnov")
    ks = pg.pairs([("Kolmogorov-Smirnov distance", (*k, "statistic"), ".4f"),
                   ("at the score", (*k, "location"), ".6g"),
                   ("share of positives at or below it", (*k, "positives_at_or_below"), ".4f"),
                   ("share of negatives at or below it", (*k, "negatives_at_or_below"), ".4f"),
                   ("p-value", (*k, "p_value"), "p")],
                  f"Distance between the score distributions of the classes ({pg.get(*k, 'method')} p-value)")
    g = (*at, "discrimination", "gains")
    rows = [[pg.word(str(b + 1), "n"), pg.cell((*g, "highest", b)), pg.cell((*g, "lowest", b)),
             pg.cell((*g, "rows", b), "int"), pg.cell((*g, "positives", b), ".6g"), pg.cell((*g, "rate", b), ".4f"),
             pg.cell((*g, "cumulative_share", b), ".4f"), pg.cell((*g, "captured", b), ".4f"),
             pg.cell((*g, "lift", b), ".3f"), pg.cell((*g, "cumulative_lift", b), ".3f")]
            for b in range(len(pg.get(*g, "rows")))]
    gains = pg.table(["band", "highest score", "lowest score", "rows", "positives", "rate of positives",
                      "share of weight so far", "share of positives so far", "lift", "lift so far"], rows,
                     "Gains by score band, highest scores first")
    return (_head(h, "discrimination", "Discrimination", at) + figure(charts[prefix + "roc"]) + roc + ks
            + figure(charts[prefix + "gains"]) + gains
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


def _binary_sections(pg: Page, charts: dict[str, Chart]) -> list[str]:
    def later(p: Page) -> str:
        if not p.get("out_of_time").get("calibration"):
            return ""
        at = ("out_of_time",)
        return (_calibration(p, charts, at, "out-of-time ", "h3")
                + _discrimination(p, charts, at, "out-of-time ", "h3"))

    return [_calibration(pg, charts), _discrimination(pg, charts), _bands(pg), stability(pg, charts),
            out_of_time(pg, later), _segments(pg)]


def render_page(doc: dict, charts: dict[str, Chart]) -> str:
    """The HTML page of the sign-off document ``doc`` (its JSON twin) with its ``charts``."""
    from . import sections_classes, sections_linear

    pg = Page(doc)
    if doc.get("residuals") is not None:
        items, middle = sections_linear.verdict_items(pg), sections_linear.sections(pg, charts)
    elif doc.get("overall") is not None:
        items, middle = sections_classes.verdict_items(pg), sections_classes.sections(pg, charts)
    else:
        items, middle = _binary_verdicts(pg), _binary_sections(pg, charts)
    parts = [verdicts(pg, items), model_data(pg), refit(pg, charts), *middle, convergence(pg), audit(pg)]
    body = "\n".join(parts)
    toc = [(i, re.sub(r"<[^>]+>", "", t)) for i, t in re.findall(r'<h2 id="([a-z]+)">(.*?)</h2>', body)
           if i != "verdicts"]
    count = iter(range(1, len(toc) + 1))
    body = re.sub(r'<h2 id="(?!verdicts)([a-z]+)">', lambda m: f'{m.group(0)}{next(count)} ', body)
    nav = "<nav><ol>" + "".join(f'<li><a href="#{i}">{t}</a></li>' for i, t in toc) + "</ol></nav>"
    return ("<!DOCTYPE html>\n"
            '<html lang="en">\n<head>\n<meta charset="utf-8"/>\n'
            '<meta name="viewport" content="width=device-width, initial-scale=1"/>\n'
            f"<title>{escape(doc['title'])}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n"
            f"<h1>{escape(doc['title'])}</h1>\n"
            '<p class="lead">The judgement of a delivered model by lintools: every figure below is in the JSON '
            "file written beside this page, to full precision.</p>\n"
            + nav + "\n" + body + "\n</body>\n</html>\n")
