"""The verdict: what was found, how strong, what it means for this model, what to do next.

:func:`write_verdict` is the one place that decides the finding.  The leading test (or the
family of two, Durbin-Watson and its order-s twin) is fixed beforehand by
:func:`lagsight.battery_run.lead_plan` from the model's kind; the finding reads only that
family's p-values, adjusted by the weighted Holm step-down method when there are two, so that on
white-noise errors "evidence" appears at most α of the time.  Every other test is shown as
support and never changes the finding.  Every view (key figures, the sentence to paste, the
test table's readings, the figures' marks, the panel's default test) reads the Verdict.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .battery_run import BG, DALT, DH, DW, LB, RUNS, SEASONAL, SEASONAL_GIVEN, LeadPlan, strength
from .formats import format_count, format_level, format_p, format_statistic, tiny_p_text
from .hints import option_hint, sort_hint

__all__ = [
    "Verdict",
    "write_verdict",
    "holm",
    "CAUTIONS",
    "ASSUMPTIONS",
    "FINDINGS",
    "format_p",
    "tiny_p_text",
    "log10_p",
    "bounds_words",
]

#: the four findings
FINDINGS = ("evidence", "no evidence", "not meaningful", "cannot judge")

#: assumptions of each test, shown with every verdict
CAUTIONS = (
    "Failing to reject is not proof that the errors are independent: a test can lack power for this n and design.",
    "Durbin-Watson looks at lag 1 only; Breusch-Godfrey and Ljung-Box look further, the seasonal statistic at lag s.",
    "The exact Durbin-Watson p-value assumes fixed regressors, normal errors with constant variance and OLS "
    "residuals of this design; it is biased towards 2 when a lagged response is a regressor.",
    "Breusch-Godfrey, Ljung-Box, Durbin's h and Durbin's alternative test are large-sample tests: their "
    "p-values are approximate in small samples.",
    "The runs test uses only the signs of the residuals: it needs no distributional assumption but has less power.",
    "The finding reads the leading test only (adjusted by weighted Holm when it is a family of two); the other tests "
    "support the reading and do not change it.",
)

#: what each leading test assumes, in a few words (the panel's cautions line)
ASSUMPTIONS = {
    DW: "the exact Durbin-Watson p-value assumes fixed regressors and normal errors with constant variance",
    DALT: "Durbin's alternative test is a large-sample test (approximate p-values in small samples)",
    DH: "Durbin's h is a large-sample test and needs n \u00b7 var(lagged-response coefficient) < 1",
    BG: "Breusch-Godfrey is a large-sample test (approximate p-values in small samples)",
    LB: "Ljung-Box is a large-sample test (approximate p-values in small samples)",
    SEASONAL: "the seasonal statistic assumes fixed regressors and normal errors with constant variance",
    SEASONAL_GIVEN: "the seasonal statistic assumes fixed regressors and normal errors with constant variance",
    RUNS: "the runs test uses only the signs of the residuals and has less power",
}

_STRENGTH_WORDS = {"strong": "Strong", "clear": "Clear", "some": "Some"}

_KIND_WHY = {
    "regression": "the exact Durbin-Watson test leads for an OLS-type fit with its design",
    "lagged response": "Durbin's alternative test leads because a lagged response is a regressor "
    "(Durbin-Watson is biased towards 2 there)",
    "arma": "Ljung-Box with the ARMA model's degrees of freedom leads for ARIMA-type residuals",
    "residuals": "Ljung-Box leads because there is no design (it needs none)",
}

_CONSEQUENCE = {
    "regression": "OLS standard errors and p-values for this model are not reliable as they stand.",
    "lagged response": "OLS standard errors are not reliable, and with a lagged response the coefficients "
    "themselves are inconsistent.",
    "arma": "The ARMA model leaves correlation in its residuals: its standard errors and forecast intervals "
    "are not reliable as they stand.",
    "residuals": "Standard errors computed as if the errors were independent are not reliable.",
}


def log10_p(res):
    """log10 of a result's p-value where the test keeps it (exact Durbin-Watson), else None."""
    return getattr(res, "log10_pvalue", None)


@dataclass(frozen=True)
class Verdict:
    """Plain-language conclusion.

    ``finding`` is one of :data:`FINDINGS`: 'evidence', 'no evidence', 'not meaningful' (rows not in
    time order) or 'cannot judge' (the leading test cannot run or its input is degenerate);
    ``strength`` is 'strong', 'clear', 'some', 'none' or 'unknown'.  ``leading`` names the leading
    test, ``family`` the tests the finding is decided over, ``rule`` says how (for example "Holm over
    Durbin-Watson and the order-12 test at α = 0.05"), ``pvalue`` is the family's adjusted p-value
    and ``adjusted`` pairs each family member with its adjusted p-value.  ``reason`` says why there is
    no finding ('not meaningful', 'cannot judge').
    """

    finding: str
    strength: str
    headline: str
    details: tuple = ()
    next_steps: tuple = ()
    cautions: tuple = CAUTIONS
    leading: str | None = None
    family: tuple = ()
    rule: str = ""
    pvalue: float = math.nan
    adjusted: tuple = ()
    alpha: float = 0.05
    reason: str = ""

    @property
    def judged(self) -> bool:
        """True when the finding is 'evidence' or 'no evidence' (p-values mean something)."""
        return self.finding in ("evidence", "no evidence")

    def adjusted_pvalue(self, name: str) -> float:
        """The adjusted p-value of a family member, NaN for any other test."""
        return dict(self.adjusted).get(name, math.nan)

    def reading(self, name: str, pvalue: float) -> str:
        """How the test table reads test ``name``: within the family (adjusted), as support, or not at all."""
        if self.finding == "not meaningful":
            return "not meaningful: rows not in time order"
        if math.isnan(pvalue):
            return "no p-value"
        if name in self.family:
            adj = self.adjusted_pvalue(name)
            word = "evidence" if adj < self.alpha else "no evidence"
            if len(self.family) > 1:
                return f"{word} (adjusted {format_p(adj)})"
            return f"{word} (leading test)"
        return "support: " + ("evidence" if pvalue < self.alpha else "no evidence")

    def __str__(self) -> str:
        lines = [self.headline]
        lines += [f"  - {d}" for d in self.details]
        if self.next_steps:
            lines.append("What to do next:")
            lines += [f"  - {s}" for s in self.next_steps]
        lines.append("Cautions:")
        lines += [f"  - {c}" for c in self.cautions]
        return "\n".join(lines)


def holm(pvalues, weights=None) -> list[float]:
    """Holm's (1979) step-down adjusted p-values, in the order given, optionally weighted.

    Equal weights: with p_(1) <= ... <= p_(m), adjusted p_(i) = max over j <= i of
    min(1, (m - j + 1) p_(j)).  Weights w (Holm 1979, the weighted version): hypotheses are
    taken in order of p / w, and the j-th is compared with w_(j) alpha / (sum of the weights
    not yet rejected), so adjusted p_(j) = max over l <= j of min(1, p_(l) W_l / w_(l)).
    (Written out here: statsmodels' multipletests runs a full garbage collection on every call.)
    """
    p = [float(v) for v in pvalues]
    m = len(p)
    w = [1.0] * m if weights is None else [float(v) for v in weights]
    out = [0.0] * m
    running = 0.0
    remaining = sum(w)
    for i in sorted(range(m), key=lambda j: p[j] / w[j]):
        running = max(running, min(1.0, p[i] * remaining / w[i]))
        out[i] = running
        remaining -= w[i]
    return out


def _p(res) -> float:
    return math.nan if res is None else float(res.pvalue)


def _rule(family: tuple, alpha: float, period, plan: LeadPlan | None = None) -> str:
    if len(family) == 1:
        return f"leading test {family[0]} at α = {format_level(alpha)}"
    names = [f"the order-{period} test" if n == SEASONAL else n for n in family]
    if plan is not None and plan.weights:
        shares = " : ".join(f"{plan.weight(n):g}" for n in family)
        return f"{' and '.join(names)}, weighted Holm ({shares}) at α = {format_level(alpha)}"
    return f"Holm over {' and '.join(names)} at α = {format_level(alpha)}"


def bounds_words(decision: str, alternative: str = "positive") -> str:
    """The bounds test's decision ('reject', 'inconclusive', 'no evidence') in the words every other
    reading uses: 'evidence of positive correlation', 'inconclusive', 'no evidence'."""
    if decision == "reject":
        return f"evidence of {_direction(alternative)}correlation"
    return str(decision)


def _direction(alternative: str) -> str:
    return {"positive": "positive ", "negative": "negative "}.get(alternative, "")


def _what(name: str, res, alternative: str, period) -> str:
    """What a family member looks for, in words."""
    if name == DW:
        return f"{_direction(alternative)}lag-1 autocorrelation"
    if name == SEASONAL:
        return f"{_direction(alternative)}seasonal autocorrelation at lag {period}"
    if name == DALT:
        return f"{_direction(alternative)}lag-1 autocorrelation beyond what the lagged response explains"
    top = getattr(res, "lags", None)
    return "autocorrelation at one or more of the first " + (
        f"{int(max(top))} lags" if top is not None and len(top) else "lags"
    )


def _support_details(tests: dict, family: tuple, alpha: float) -> list[str]:
    out = []
    dh = tests.get(DH)
    if dh is not None:
        if math.isnan(dh.pvalue):
            out.append(
                "Durbin's h is undefined here (n times the variance of the lagged response's coefficient is "
                "1 or more); Durbin's alternative test does not need it."
            )
        else:
            out.append(
                f"Durbin's h = {format_statistic(dh.statistic)} uses ρ̂ = 1 − d/2 = {format_statistic(dh.rho)} (from "
                f"the Durbin-Watson d = {format_statistic(dh.dw)}), {format_p(dh.pvalue)}; shown beside Durbin's "
                "alternative test, it does not change the finding."
            )
    for name in (DW, SEASONAL, SEASONAL_GIVEN, BG, LB, RUNS):
        res = tests.get(name)
        if name in family or res is None or math.isnan(res.pvalue):
            continue
        word = "evidence" if res.pvalue < alpha else "no evidence"
        extra = " on residual signs (assumption-free)" if name == RUNS else ""
        out.append(
            f"Support: {name}{extra}, statistic {format_statistic(res.statistic)}, {format_p(res.pvalue)} "
            f"({word} at α = {format_level(alpha)}); it does not change the finding."
        )
    return out


def _cannot_judge(plan: LeadPlan, tests: dict, errors: dict, alpha: float, rule: str) -> Verdict | None:
    """The 'cannot judge' verdict when the input is degenerate or the leading test gave no p-value."""
    if plan.problem is not None:
        why = plan.problem
    elif plan.leading in errors:
        why = f"the leading test ({plan.leading}) could not run: {errors[plan.leading]}"
    elif plan.leading not in tests or math.isnan(_p(tests.get(plan.leading))):
        why = f"the leading test ({plan.leading}) gave no p-value"
    else:
        return None
    advice = _ADVICE.get(
        _problem_key(why),
        "Check the input (finite values, enough rows, a model that leaves residual variation) and run again.",
    )
    if callable(advice):  # advice naming an option, written in the syntax of the entry point
        advice = advice()
    headline = f"Cannot judge: {why}. {advice}"
    steps = (advice,)
    return Verdict(
        "cannot judge",
        "unknown",
        headline,
        (f"Rule: {rule} (not applied).",),
        steps,
        leading=plan.leading,
        family=plan.family,
        rule=rule,
        alpha=alpha,
        reason=why,
    )


_ADVICE = {
    "fits the data exactly": "Check that the response is not among the regressors or an exact linear function of them.",
    "response is constant": "Nothing varies to be tested: check that the right column is the response.",
    "residuals are constant": "Add a constant to the model (its residuals then average zero) or check the input.",
    "residuals are all zero": "Check that the residuals were computed (they are all zero).",
    "not finite": "Rescale or clean the data so every value is a finite number, and run again.",
    "k + 1": "Collect more observations or fit fewer coefficients.",
    "Ljung-Box": lambda: (
        f"Pass the design ({option_hint('exog')}, or the fitted model) for the exact "
        "Durbin-Watson test, which works at any n > k + 1."
    ),
}


def _problem_key(why: str) -> str:
    for key in (
        "fits the data exactly",
        "response is constant",
        "residuals are constant",
        "residuals are all zero",
        "not finite",
        "k + 1",
        "Ljung-Box",
    ):
        if key in why:
            return key
    return ""


def write_verdict(
    tests: dict,
    plan: LeadPlan | None,
    *,
    alpha: float,
    alternative: str,
    errors=None,
    order_warnings=(),
    shuffled=False,
    lagged_response=None,
    remedies=None,
    period=None,
    groups=None,
) -> Verdict:
    """Decide the finding from the planned leading test(s) and write the verdict.

    Parameters
    ----------
    tests : dict
        Test name -> result (what the battery ran).
    plan : LeadPlan
        The leading test and its family, fixed before any p-value was read.
    alpha, alternative
        Level and direction; the family's p-values are already for this alternative.
    errors : dict, optional
        Test name -> why it did not run.
    shuffled : bool
        The rows tested are not in time order: the finding is 'not meaningful'.
    """
    if plan is None:
        raise ValueError("'plan' must be the battery's LeadPlan (got None)")
    errors = errors or {}
    rule = _rule(plan.family, alpha, period, plan)
    blocked = _cannot_judge(plan, tests, errors, alpha, rule)
    if blocked is not None:
        return blocked
    order_details = tuple(order_warnings)
    if shuffled:
        why = "the rows are not in time order, so no serial-correlation test measures anything here"
        headline = (
            f"Not meaningful: {why}, and no p-value is reported. Sort the rows by time ({sort_hint()}) and run again."
        )
        return Verdict(
            "not meaningful",
            "unknown",
            headline,
            (
                "The tests were computed on the rows as given; their p-values do not measure serial correlation.",
                *order_details,
            ),
            (f"Sort the rows by time ({sort_hint()}) and run the diagnosis again.",),
            leading=plan.leading,
            family=plan.family,
            rule=rule,
            alpha=alpha,
            reason=why,
        )

    family = tuple(name for name in plan.family if name in tests and not math.isnan(_p(tests[name])))
    raw = [_p(tests[name]) for name in family]
    adjusted = holm(raw, [plan.weight(name) for name in family])
    rule = _rule(family, alpha, period, plan)
    p_family = min(adjusted)
    found = p_family < alpha
    level = strength(p_family, alpha)
    significant = [name for name, a in zip(family, adjusted) if a < alpha]

    details: list[str] = [
        f"Rule: {rule}; {_KIND_WHY[plan.kind]}. The finding reads only "
        + ("this test." if len(family) == 1 else "these two tests, adjusted by weighted Holm.")
    ]
    for name, p, a in zip(family, raw, adjusted):
        res = tests[name]
        adj = f", adjusted {format_p(a)}" if len(family) > 1 else ""
        details.append(
            f"{name}: statistic {format_statistic(res.statistic)}, {format_p(p, log10_p(res))}{adj} "
            f"({'evidence' if a < alpha else 'no evidence'} at α = {format_level(alpha)})."
        )
    details += _support_details(tests, family, alpha)
    dw = tests.get(DW)
    if dw is not None and math.isnan(dw.pvalue) and getattr(dw, "bounds_decision", None):
        details.append(
            f"Without the design only bounds are available: d = {format_statistic(dw.statistic)} against "
            f"dL = {format_statistic(dw.bounds.lower)}, dU = {format_statistic(dw.bounds.upper)}: "
            f"{bounds_words(dw.bounds_decision, alternative)}."
        )
    if groups is not None and not math.isnan(groups.pooled_dw):
        details.append(
            f"Across the {format_count(groups.n_tested)} groups tested the pooled within-group d is "
            f"{format_statistic(groups.pooled_dw)}"
            + ("" if math.isnan(groups.pooled_pvalue) else f" ({format_p(groups.pooled_pvalue)})")
            + f"; stacking the groups end to end would give {format_statistic(groups.naive_dw)}."
        )
    lead_words = format_p(raw[0], log10_p(tests[family[0]])) if len(family) == 1 else f"adjusted {format_p(p_family)}"
    steps: list[str] = []
    if found:
        where = " and ".join(_what(name, tests[name], alternative, period) for name in significant)
        headline = f"{_STRENGTH_WORDS[level]} evidence of {where} ({lead_words}; {rule}). {_CONSEQUENCE[plan.kind]}"
        if plan.kind == "arma":
            steps.append(
                "Add AR or MA terms (seasonal ones if the correlation sits at the seasonal lag) and "
                "check the residuals again."
            )
        else:
            steps.append(
                "Report Newey-West (HAC) standard errors, or re-fit by feasible GLS (Prais-Winsten keeps the "
                "first observation) and compare which conclusions change."
            )
        if remedies is not None:
            changed = [t for t, c in zip(remedies.table.index, remedies.table["changes"]) if c]
            if changed:
                steps.append(f"Corrections change the conclusion for: {', '.join(map(str, changed))}.")
            else:
                steps.append("With the corrections no coefficient changes significance at this α.")
            if not math.isnan(remedies.rho):
                steps.append(f"Estimated AR(1) coefficient of the errors: ρ = {format_statistic(remedies.rho)}.")
        if SEASONAL in significant:
            # the order-s statistic assumes independent errors: with lag-1 correlation its null is
            # wrong, so the advice also needs the lag-s coefficient given lag 1 (regression form)
            given = tests.get(SEASONAL_GIVEN)
            if given is not None and given.pvalue < alpha:
                steps.append("Add seasonal terms (dummies or Fourier terms) or a seasonal lag to the model.")
            elif given is not None:
                details.append(
                    f"The order-{period} test is significant, but the lag-{period} "
                    f"coefficient given lag 1 is not ({format_p(given.pvalue)}): the seasonal signal "
                    "can be the lag-1 correlation carried forward, so no seasonal terms are advised."
                )
        if plan.kind == "residuals":
            steps.append(
                f"Pass the fitted model (or {option_hint('exog')}) for the exact Durbin-Watson test and "
                "corrected inference."
            )
        steps.append("Consider modelling the dynamics directly: lagged variables or ARMA errors.")
    else:
        looked = " or ".join(_what(name, tests[name], alternative, period) for name in family)
        headline = (
            f"No evidence of {looked} at α = {format_level(alpha)} ({lead_words}; {rule}). "
            "This does not prove the errors are independent: the test may lack power for this n "
            "and design."
        )
    if lagged_response is not None:
        steps.insert(
            0, f"Because {lagged_response} is a regressor, read Durbin's alternative test (h beside it), not d."
        )
    return Verdict(
        "evidence" if found else "no evidence",
        level,
        headline,
        tuple(details) + order_details,
        tuple(steps),
        leading=plan.leading,
        family=family,
        rule=rule,
        pvalue=p_family,
        adjusted=tuple(zip(family, adjusted)),
        alpha=alpha,
    )
