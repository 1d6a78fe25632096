"""The sections of the sign-off page that judge a delivered least-squares model: the
residuals of its predictions (summary; the line of observed on predicted and the mean
residual; mean observed against mean predicted by bin of the prediction), on the
development data and, out of time, on a recent sample with the response; the segments.
"""

from __future__ import annotations

from .charts import Chart
from .page import Page, escape
from .section_parts import figure, heading, kind_sections

__all__ = ["sections", "verdict_items"]


def verdict_items(pg: Page) -> list[str]:
    """The verdict lines of a least-squares model."""
    items = []
    if pg.get("response_line") is not None:
        ln = ("response_line",)
        items.append(f"<li>Slope of observed on predicted {pg.num((*ln, 'slope'), '.4f')} "
                     f"({pg.num((*ln, 'slope_interval', 0), '.4f')} to {pg.num((*ln, 'slope_interval', 1), '.4f')}; "
                     f"1 when the predictions are on the right scale), p-value of slope = 1: "
                     f"{pg.num((*ln, 'slope_p_value'), 'p')}</li>")
        items.append(f"<li>Mean residual {pg.num((*ln, 'mean_residual'), '.4g')} "
                     f"({pg.num((*ln, 'mean_residual_interval', 0), '.4g')} to "
                     f"{pg.num((*ln, 'mean_residual_interval', 1), '.4g')}; 0 when the predictions have no shift), "
                     f"p-value {pg.num((*ln, 'mean_residual_p_value'), 'p')}</li>")
    items.append(f"<li>Root mean square residual {pg.num(('residuals', 'root_mean_square'), '.4g')}, share of the "
                 f"response's variation the delivered predictions explain {pg.num(('residuals', 'explained'), '.4f')}"
                 "</li>")
    o = pg.get("out_of_time")
    if o is not None and o["with_outcomes"] and o.get("residuals"):
        items.append(f"<li>Out of time: mean residual {pg.num(('out_of_time', 'residuals', 'mean'), '.4g')}, root "
                     f"mean square residual {pg.num(('out_of_time', 'residuals', 'root_mean_square'), '.4g')}</li>")
    return items


def _residuals(pg: Page, charts: dict[str, Chart], at: tuple = (), prefix: str = "", h: str = "h2") -> str:
    r = (*at, "residuals")
    target = pg.get("model", "target")
    shares = pg.get(*r, "quantile_shares")
    summary = pg.pairs([("rows", (*r, "rows"), "int"), ("case weight", (*r, "weight"), ".10g"),
                        ("mean residual (observed minus predicted)", (*r, "mean"), ".6g"),
                        ("standard deviation of the residuals", (*r, "standard_deviation"), ".6g"),
                        ("root mean square residual", (*r, "root_mean_square"), ".6g"),
                        ("mean absolute residual", (*r, "mean_absolute"), ".6g"),
                        ("share of the response's variation explained by the delivered predictions",
                         (*r, "explained"), ".6f")]
                       + [(f"residual at the {100 * q:g}% point" if 0 < q < 1 else
                           ("smallest residual" if q == 0 else "largest residual"), (*r, "quantiles", j), ".6g")
                          for j, q in enumerate(shares)], f"Residuals of the delivered predictions of {target}")
    out = [heading(h, "residuals", "Residuals of the delivered predictions", at),
           figure(charts[prefix + "binned response"]), summary]
    ln = (*at, "response_line")
    if pg.get(*ln) is not None:
        pct = f"{100 * pg.get(*ln, 'level'):g}%"
        out.append(pg.pairs([
            ("intercept of observed on predicted (0 when unbiased)", (*ln, "intercept"), ".6g"),
            ("its standard error", (*ln, "intercept_standard_error"), ".4g"),
            (f"its {pct} interval, low", (*ln, "intercept_interval", 0), ".6g"),
            (f"its {pct} interval, high", (*ln, "intercept_interval", 1), ".6g"),
            ("slope of observed on predicted (1 when on the right scale)", (*ln, "slope"), ".6g"),
            ("its standard error", (*ln, "slope_standard_error"), ".4g"),
            (f"its {pct} interval, low", (*ln, "slope_interval", 0), ".6g"),
            (f"its {pct} interval, high", (*ln, "slope_interval", 1), ".6g"),
            ("Student t of slope = 1", (*ln, "slope_statistic"), ".4f"), ("its p-value", (*ln, "slope_p_value"), "p"),
            ("F of intercept = 0 and slope = 1 together", (*ln, "joint_statistic"), ".4f"),
            ("its p-value", (*ln, "joint_p_value"), "p"), ("degrees of freedom", (*ln, "degrees_of_freedom"), ".10g"),
            ("mean residual", (*ln, "mean_residual"), ".6g"),
            ("its standard error", (*ln, "mean_residual_standard_error"), ".4g"),
            (f"its {pct} interval, low", (*ln, "mean_residual_interval", 0), ".6g"),
            (f"its {pct} interval, high", (*ln, "mean_residual_interval", 1), ".6g"),
            ("p-value of mean residual = 0", (*ln, "mean_residual_p_value"), "p")],
            "The line of observed on predicted (weighted least squares) and the mean residual"))
    out.append(_bins(pg, at))
    out += [f'<p class="small">Not computed: {escape(n)}</p>' for n in pg.get(*at, "response_notes")]
    return "".join(out)


def _bins(pg: Page, at: tuple) -> str:
    b = (*at, "response_bins")
    pct = f"{100 * pg.get(*b, 'level'):g}%"
    rows = [[pg.word(str(j + 1), "n"), pg.cell((*b, "lowest", j)), pg.cell((*b, "highest", j)),
             pg.cell((*b, "rows", j), "int"), pg.cell((*b, "weight", j), ".6g"),
             pg.cell((*b, "mean_predicted", j), ".5g"), pg.cell((*b, "mean_observed", j), ".5g"),
             pg.cell((*b, "observed_lower", j), ".5g"), pg.cell((*b, "observed_upper", j), ".5g"),
             pg.cell((*b, "mean_residual", j), ".4g"), pg.cell((*b, "observed_sd", j), ".4g")]
            for j in range(len(pg.get(*b, "rows")))]
    return pg.table(["bin", "lowest prediction", "highest prediction", "rows", "case weight", "mean predicted",
                     "mean observed", f"{pct} low (Student t)", f"{pct} high (Student t)", "mean residual",
                     "standard deviation observed"], rows,
                    "Mean observed against mean predicted, by bin of the prediction (bins of equal case weight)")


def sections(pg: Page, charts: dict[str, Chart]) -> list[str]:
    """The least-squares sections, in page order."""
    return kind_sections(pg, charts, _residuals, "residuals",
                         [("case weight", "weight", ".6g"), ("mean observed", "mean_observed", ".5g"),
                          ("mean predicted", "mean_predicted", ".5g"), ("mean residual", "mean_residual", ".4g"),
                          ("root mean square residual", "root_mean_square", ".4g"),
                          ("share explained", "explained", ".4f"), ("slope of observed on predicted", "slope", ".4f")])
