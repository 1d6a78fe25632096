"""The sections of the sign-off page that judge a delivered softmax (multiclass logistic)
model: per class, that class against all others, the calibration (reliability table,
calibration line) and the ROC area; over the classes the log-loss, the Brier score and the
table of observed against predicted classes; on the development data and, out of time,
on a recent sample with the outcomes; the segments.
"""

from __future__ import annotations

from .charts import Chart
from .page import Page, escape
from .section_parts import figure, heading, kind_sections

__all__ = ["sections", "verdict_items"]


def verdict_items(pg: Page) -> list[str]:
    """The verdict lines of a softmax model."""
    o = ("overall",)
    items = [f"<li>Log-loss {pg.num((*o, 'log_loss'), '.5f')}, Brier score {pg.num((*o, 'brier', 'score'), '.5f')}"
             + (f", share of rows whose most probable class occurred {pg.num((*o, 'confusion', 'accuracy'), '.4f')}"
                if pg.get(*o, "confusion") is not None else "") + "</li>"]
    areas = [f"'{escape(e['class'])}' {pg.num(('classes', k, 'roc_area', 'area'), '.4f')}"
             for k, e in enumerate(pg.get("classes")) if e["roc_area"] is not None]
    items.append("<li>ROC area of each class against the rest: " + ", ".join(areas) + "</li>")
    slopes = [f"'{escape(e['class'])}' {pg.num(('classes', k, 'calibration_line', 'slope'), '.3f')}"
              for k, e in enumerate(pg.get("classes")) if e["calibration_line"] is not None]
    if slopes:
        items.append("<li>Calibration slope of each class against the rest (1 when calibrated): "
                     + ", ".join(slopes) + "</li>")
    t = pg.get("out_of_time")
    if t is not None and t["with_outcomes"] and t.get("overall") and t["overall"]["log_loss"] is not None:
        items.append(f"<li>Out of time: log-loss {pg.num(('out_of_time', 'overall', 'log_loss'), '.5f')} "
                     f"(development {pg.num((*o, 'log_loss'), '.5f')})</li>")
    return items


def _per_class(pg: Page, at: tuple) -> str:
    rows = []
    for k, e in enumerate(pg.get(*at, "classes")):
        c = (*at, "classes", k)
        roc, line = (*c, "roc_area"), (*c, "calibration_line")
        rows.append([pg.word(e["class"]), pg.cell((*c, "cases"), ".6g"), pg.cell((*c, "observed_share"), ".4f"),
                     pg.cell((*c, "mean_forecast"), ".4f"), pg.cell((*c, "brier"), ".5f")]
                    + ([pg.cell((*roc, "area"), ".4f"), pg.cell((*roc, "lower"), ".4f"), pg.cell((*roc, "upper"), ".4f")]
                       if e["roc_area"] is not None else [pg.word("not defined", "n")] * 3)
                    + ([pg.cell((*line, "slope"), ".3f"), pg.cell((*line, "slope_interval", 0), ".3f"),
                        pg.cell((*line, "slope_interval", 1), ".3f"), pg.cell((*line, "in_the_large"), ".3f"),
                        pg.cell((*line, "in_the_large_p_value"), "p")]
                       if e["calibration_line"] is not None else [pg.word("not defined", "n")] * 5))
    return pg.table(["class", "cases (case weight)", "observed share", "mean forecast", "Brier score",
                     "ROC area", "95% low (DeLong)", "95% high (DeLong)", "calibration slope", "95% low", "95% high",
                     "calibration in the large", "its p-value"], rows,
                    "Each class against all others")


def _overall(pg: Page, at: tuple) -> str:
    o = (*at, "overall")
    items = [("log-loss (mean negative log-probability of the class that occurred)", (*o, "log_loss"), ".6f"),
             ("Brier score (mean squared error summed over the classes)", (*o, "brier", "score"), ".6f"),
             ("mean of the classes' ROC areas", (*o, "mean_roc_area"), ".4f")]
    if pg.get(*o, "confusion") is None:
        return pg.pairs(items, "Over all classes")
    items.append(("share of rows whose most probable class occurred", (*o, "confusion", "accuracy"), ".4f"))
    t = (*o, "confusion")
    classes = pg.get(*t, "classes")
    rows = [[pg.word(c)] + [pg.cell((*t, "weight", j, k), ".6g") for k in range(len(classes))]
            + [pg.cell((*t, "recall", j), ".4f")] for j, c in enumerate(classes)]
    rows.append([pg.word("share predicted that occurred")] + [pg.cell((*t, "precision", k), ".4f")
                                                             for k in range(len(classes))] + [pg.word("")])
    table = pg.table(["observed \u2193 predicted \u2192"] + [str(c) for c in classes] + ["share of the class found"],
                     rows, "Observed against predicted class (the class of the largest probability; case weight)")
    return pg.pairs(items, "Over all classes") + table


def _reliability_tables(pg: Page, at: tuple) -> str:
    out = []
    for k, e in enumerate(pg.get(*at, "classes")):
        r = (*at, "classes", k, "reliability")
        rel = pg.get(*r)
        pct = f"{100 * rel['level']:g}%"
        rows = [[pg.word(str(j + 1), "n"), pg.cell((*r, "edges", j)), pg.cell((*r, "edges", j + 1)),
                 pg.cell((*r, "count", j), "int"), pg.cell((*r, "mean_predicted", j), ".4f"),
                 pg.cell((*r, "observed", j), ".4f"), pg.cell((*r, "observed_lower", j), ".4f"),
                 pg.cell((*r, "observed_upper", j), ".4f")] for j in range(len(rel["count"])) if rel["count"][j] > 0]
        out.append(pg.table(["bin", "above", "up to", "rows", "mean forecast", "observed share",
                             f"{pct} low (Wilson)", f"{pct} high (Wilson)"], rows,
                            f"Reliability of the probability of '{e['class']}' (bins without rows left out)"))
    return "".join(out)


def _classes(pg: Page, charts: dict[str, Chart], at: tuple = (), prefix: str = "", h: str = "h2") -> str:
    out = [heading(h, "classes", "Calibration and discrimination of each class", at),
           "<p>Each class's delivered probability is judged as a binary forecast of that class against all "
           "others.</p>", figure(charts[prefix + "class reliability"])]
    if prefix + "class roc" in charts:
        out.append(figure(charts[prefix + "class roc"]))
    out += [_per_class(pg, at), _overall(pg, at), _reliability_tables(pg, at)]
    out += [f'<p class="small">Not computed: {escape(n)}</p>' for n in pg.get(*at, "class_notes")]
    return "".join(out)


def sections(pg: Page, charts: dict[str, Chart]) -> list[str]:
    """The softmax sections, in page order."""
    return kind_sections(pg, charts, _classes, "classes",
                         [("log-loss", "log_loss", ".5f"), ("Brier score", "brier", ".5f"),
                          ("share whose most probable class occurred", "accuracy", ".4f")])
