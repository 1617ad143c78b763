"""The verdict: what was found, how strong, what it means for this model, what to do next.

Pure text built from test results; no computation beyond reading p-values.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from .battery_run import BG, DALT, DH, DW, LB, RUNS, SEASONAL, strength

__all__ = ["Verdict", "write_verdict", "CAUTIONS"]

#: assumptions of each test, shown with every verdict
CAUTIONS = (
    "Failing to reject is not proof that the errors are independent: a test can lack power for this n and "
    "design (see the power curve).",
    "Durbin-Watson looks at lag 1 only; Breusch-Godfrey and Ljung-Box look further, the seasonal statistic at "
    "lag s.",
    "The exact Durbin-Watson p-value assumes fixed regressors, normal errors with constant variance and OLS "
    "residuals of this design; it is biased towards 2 when a lagged response is a regressor.",
    "Breusch-Godfrey, Ljung-Box and Durbin's h are large-sample tests: their p-values are approximate in "
    "small samples.",
    "The runs test uses only the signs of the residuals: it needs no distributional assumption but has less "
    "power.",
)

_STRENGTH_WORDS = {"strong": "Strong", "clear": "Clear", "some": "Some"}


@dataclass(frozen=True)
class Verdict:
    """Plain-language conclusion.

    ``finding`` is 'evidence', 'no evidence' or 'not meaningful' (rows not in
    time order); ``strength`` is 'strong', 'clear', 'some' or 'none'.
    """

    finding: str
    strength: str
    headline: str
    details: tuple = ()
    next_steps: tuple = ()
    cautions: tuple = CAUTIONS

    def __str__(self) -> str:
        lines = [self.headline]
        lines += [f"  - {d}" for d in self.details]
        if self.next_steps:
            lines.append("What to do next:")
            lines += [f"  - {s}" for s in self.next_steps]
        lines.append("Cautions:")
        lines += [f"  - {c}" for c in self.cautions]
        return "\n".join(lines)


def _p(res) -> float:
    return float("nan") if res is None else float(res.pvalue)


def _fmt_p(p: float) -> str:
    if math.isnan(p):
        return "n/a"
    return f"{p:.2g}" if p < 0.001 else f"{p:.3f}"


def _p_eq(p: float) -> str:
    """'p = 0.012', or 'p < 1e-300' when the tail underflows."""
    return "p < 1e-300" if p == 0.0 else f"p = {_fmt_p(p)}"


def write_verdict(tests: dict, *, alpha: float, alternative: str, order_warnings=(), shuffled=False,
                  lagged_response=None, remedies=None, seasonal_period=None, groups=None) -> Verdict:
    """Compose the verdict from the test results."""
    primary_name = DW
    if lagged_response is not None and DALT in tests:
        primary_name = DALT
    elif DW not in tests or math.isnan(_p(tests.get(DW))):
        primary_name = BG if BG in tests else LB
    considered = [n for n in (primary_name, BG, LB, SEASONAL) if n in tests]
    if lagged_response is not None and DH in tests and not math.isnan(_p(tests[DH])):
        considered.append(DH)
    pvals = {n: _p(tests[n]) for n in considered}
    finite = {n: p for n, p in pvals.items() if not math.isnan(p)}
    details = []
    for name in considered:
        res = tests[name]
        p = pvals[name]
        reading = "evidence" if p < alpha else "no evidence"
        details.append(f"{name}: statistic {res.statistic:.4g}, {_p_eq(p)} ({reading} at alpha {alpha:g}).")
    if RUNS in tests:
        details.append(f"{RUNS} on residual signs: {_p_eq(_p(tests[RUNS]))} (assumption-free check).")
    dw = tests.get(DW)
    if dw is not None and math.isnan(dw.pvalue) and getattr(dw, "bounds_decision", None):
        details.append(
            f"Without the design only bounds are available: d = {dw.statistic:.3f} is '{dw.bounds_decision}' "
            f"against dL = {dw.bounds.lower:.3f}, dU = {dw.bounds.upper:.3f}."
        )
    if groups is not None and not math.isnan(groups.pooled_dw):
        details.append(
            f"Across {groups.n_groups} groups the pooled within-group d is {groups.pooled_dw:.3f}"
            + ("" if math.isnan(groups.pooled_pvalue) else f" ({_p_eq(groups.pooled_pvalue)})")
            + f"; stacking the groups end to end would give {groups.naive_dw:.3f}."
        )
    if not finite:
        return Verdict("no evidence", "unknown", "No test could be run on these residuals.", tuple(details))
    best_name = min(finite, key=finite.get)
    best = finite[best_name]
    level = strength(best, alpha)
    found = best < alpha
    steps = []
    direction = "positive" if alternative != "negative" else "negative"
    if found:
        where = {
            DW: f"{direction} lag-1 autocorrelation",
            DALT: "lag-1 autocorrelation beyond what the lagged response explains",
            DH: "lag-1 autocorrelation beyond what the lagged response explains",
            BG: "autocorrelation at one or more of the first lags",
            LB: "autocorrelation at one or more of the first lags",
            SEASONAL: f"seasonal autocorrelation at lag {seasonal_period}",
        }[best_name]
        headline = (
            f"{_STRENGTH_WORDS[level]} evidence of {where} ({best_name}, {_p_eq(best)}). "
            "OLS standard errors and p-values for this model are not reliable as they stand."
        )
        steps.append(
            "Report Newey-West (HAC) standard errors, or re-fit by feasible GLS (Prais-Winsten keeps the first "
            "observation) and compare which conclusions change."
        )
        if remedies is not None:
            changed = [t for t, c in zip(remedies.table.index, remedies.table["changes"]) if c]
            if changed:
                steps.append(f"Corrections change the conclusion for: {', '.join(map(str, changed))}.")
            else:
                steps.append("With the corrections no coefficient changes significance at this alpha.")
            if not math.isnan(remedies.rho):
                steps.append(f"Estimated AR(1) coefficient of the errors: rho = {remedies.rho:.3f}.")
        if best_name == SEASONAL or (SEASONAL in finite and finite[SEASONAL] < alpha):
            steps.append("Add seasonal terms (dummies or Fourier terms) or a seasonal lag to the model.")
        steps.append("Consider modelling the dynamics directly: lagged variables or ARMA errors.")
    else:
        headline = (
            f"No evidence of autocorrelation at alpha {alpha:g} (smallest {_p_eq(best)}, {best_name}). "
            "This does not prove the errors are independent."
        )
    finding = "evidence" if found else "no evidence"
    if shuffled:
        finding = "not meaningful"
        headline = (
            "The rows are not in time order, so these tests do not measure serial correlation. "
            "Sort by time (order='index' or a time column) and run again. Result on the current order: "
            + headline
        )
    if lagged_response is not None:
        steps.insert(0, f"Because {lagged_response} is a regressor, read Durbin's alternative test and h, not d.")
    return Verdict(finding, level, headline, tuple(details) + tuple(order_warnings), tuple(steps))
