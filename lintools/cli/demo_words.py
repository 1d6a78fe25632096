"""The demo's sentences: statistics put into words, derived from the numbers only."""

from __future__ import annotations

from typing import Any

from ..support import distributions as dist
from .common import implied_words
from ..models.records import INTERCEPT_NAME
from ..support.text import intercept_label, p_text

#: Family-wise level for flagging single coefficients (Bonferroni over the compared terms).
FLAG_LEVEL = 0.05


def truth_table(names, true_b, true_b0, est, est_b0, se, se_b0) -> str:
    """Rows: term, true value, estimate, standard error, (estimate - truth) / standard error."""
    lines = ["term".ljust(18) + "true".rjust(12) + "estimate".rjust(14) + "std error".rjust(12) + "off by (SEs)".rjust(14)]
    rows = [(intercept_label(names), true_b0, est_b0, se_b0)] + list(zip(names, true_b, est, se))
    for name, t, e, s in rows:
        lines.append(f"{name:<18}{float(t):12.5g}{float(e):14.6g}{float(s):12.4g}{(float(e) - float(t)) / float(s):14.2f}")
    return "\n".join(lines)


def comparison_words(cmp: Any, implied: Any, fit: Any, n_weight: float) -> str:
    """Explain a :class:`CoefficientComparison` of a delivered model with a refit."""
    q = len(cmp.terms)
    crit = float(dist.normal_quantile(1.0 - FLAG_LEVEL / (2 * q)))
    table = fit.coefficient_table()
    se_of = dict(zip(table.terms, table.standard_error))
    out = []
    if cmp.wald_p_value < FLAG_LEVEL:
        out.append(
            f"The supplier's coefficients are not the refit's up to sampling noise: the Wald test of "
            f"'delivered = refit' gives chi-square {cmp.wald_statistic:.3g} with {cmp.wald_degrees_of_freedom} "
            f"degrees of freedom (p-value {p_text(cmp.wald_p_value)}), and the score test at the supplier's coefficients, which asks whether they "
            f"solve the likelihood equations on these data, agrees (chi-square {cmp.score_statistic:.3g}, "
            f"p-value {p_text(cmp.score_p_value)})."
        )
    else:
        out.append(
            f"The supplier's coefficients agree with the refit up to sampling noise: Wald chi-square "
            f"{cmp.wald_statistic:.3g} with {cmp.wald_degrees_of_freedom} degrees of freedom (p-value "
            f"{p_text(cmp.wald_p_value)}); score test chi-square {cmp.score_statistic:.3g} (p-value "
            f"{p_text(cmp.score_p_value)})."
        )
    flagged, fine = [], []
    for i, term in enumerate(cmp.terms):
        z = float(cmp.difference_in_se[i])
        (flagged if abs(z) > crit else fine).append((term, i, z))
    if flagged:
        out.append(
            f"Coefficient by coefficient (flagged when more than {crit:.2f} standard errors apart, a "
            f"Bonferroni bound keeping the chance of any false flag among the {q} terms at {FLAG_LEVEL:g}):"
        )
    for term, i, z in flagged:
        d, r = float(cmp.delivered[i]), float(cmp.refit[i])
        se = float(se_of[term])
        lo, hi = r - 1.96 * se, r + 1.96 * se
        if term == INTERCEPT_NAME:
            out.append(
                f"- the intercept: {d:.4g} against {r:.4g} ({z:+.2f} SEs). With raw features the intercept is the "
                "log-odds where every feature is zero, far outside the data, and it absorbs each slope difference "
                "times that feature's mean; judge it through the slopes and the predicted probabilities."
            )
            continue
        if d * r < 0:
            how = "has the opposite sign to the refit's"
        elif abs(d) < abs(r):
            how = "is weaker (closer to zero) than the data say: it understates this effect"
        else:
            how = "is stronger than the data say: it overstates this effect"
        out.append(f"- {term}: the supplier's {d:.4g} against the refit's {r:.4g} (95% interval {lo:.4g} to {hi:.4g}), "
                   f"{z:+.2f} SEs; the supplier's coefficient {how}.")
    if fine:
        out.append("Consistent with the data (within the bound): " + ", ".join(f"{t} ({z:+.2f} SEs)" for t, _, z in fine) + ".")
    if cmp.max_abs_prediction_difference is not None:
        out.append(
            f"On these rows the supplier's leak probability differs from the refit's by up to "
            f"{cmp.max_abs_prediction_difference:.3g} (mean {cmp.mean_abs_prediction_difference:.3g})."
        )
    if implied is not None:
        out.append(implied_words(implied, n_weight))
    return "\n".join(_wrap(s) for s in out)


def calibration_words(cal: Any) -> str:
    """Explain a calibration report of delivered probabilities."""
    out = []
    line = cal.calibration_line
    if line is not None:
        lo, hi = line.slope_interval
        if hi < 1.0:
            shape = ("the slope is below 1 (its 95% interval excludes 1): the probabilities are too extreme, "
                     "high risks are overstated and low risks understated")
        elif lo > 1.0:
            shape = ("the slope is above 1 (its 95% interval excludes 1): the probabilities are too timid, "
                     "spread too little between low and high risk")
        else:
            shape = "the slope's 95% interval contains 1: no evidence that the spread of the probabilities is wrong"
        big = ("the average probability matches the observed leak rate" if line.in_the_large_p_value >= 0.05
               else "the average probability is off the observed leak rate")
        out.append(
            f"Calibration line: slope {line.slope:.3f} [{lo:.3f}, {hi:.3f}]; {shape}. Calibration in the large "
            f"{line.in_the_large:+.3f} (p-value {p_text(line.in_the_large_p_value)}): {big}."
        )
    tests = []
    if cal.hosmer_lemeshow is not None:
        tests.append(("Hosmer-Lemeshow", cal.hosmer_lemeshow.p_value))
    if line is not None:
        tests.append(("the joint calibration-line test", line.joint_p_value))
    if cal.spiegelhalter is not None:
        tests.append(("Spiegelhalter's z", cal.spiegelhalter.p_value))
    rejecting = [f"{n} (p-value {p_text(p)})" for n, p in tests if p < 0.05]
    silent = [f"{n} (p-value {p_text(p)})" for n, p in tests if p >= 0.05]
    if rejecting:
        out.append("Tests that reject calibration at 0.05: " + ", ".join(rejecting) + ".")
    if silent:
        out.append("Tests that do not: " + ", ".join(silent)
                   + (". Spiegelhalter's z looks at the Brier score as a whole, where over- and understated risks "
                      "can offset each other." if any("Spiegelhalter" in s for s in silent) and rejecting else "."))
    out.append(f"Binned calibration error {cal.calibration_error:.4f}; Brier score {cal.brier.score:.5f} "
               f"(reliability term {cal.brier.reliability:.5f}, resolution {cal.brier.resolution:.5f}).")
    return "\n".join(_wrap(s) for s in out)


def _wrap(text: str, width: int = 100) -> str:
    words, lines, cur = text.split(" "), [], ""
    for w in words:
        if cur and len(cur) + 1 + len(w) > width:
            lines.append(cur)
            cur = "  " + w if lines and text.startswith("- ") else w
        else:
            cur = f"{cur} {w}" if cur else w
    lines.append(cur)
    return "\n".join(lines)
