"""Words and numbers: the sentence to paste into a report, formatted tables, plain-text views.

Everything here returns plain (unescaped) strings; the HTML layer escapes them
where it writes them.
"""

from __future__ import annotations

import math

import numpy as np

from ..battery_run import BG, DALT, DH, DW, LB, RUNS, SEASONAL, SEASONAL_GIVEN
from ..formats import format_count, format_level, format_number, format_pvalue, format_statistic
from ..stats.power import TARGET_POWER
from ..verdict import bounds_words, log10_p

__all__ = [
    "TEST_GUIDE",
    "format_pvalue",
    "format_number",
    "format_statistic",
    "format_count",
    "statistic_label",
    "test_rows",
    "TEST_COLUMNS",
    "key_figures",
    "primary_test",
    "order_caveat",
    "report_sentence",
    "diagnosis_text",
    "table_text",
    "k_prime",
    "k_prime_assumed",
    "k_prime_text",
    "K_PRIME_ASSUMED",
    "power_text",
]

#: one line on how to read each test
TEST_GUIDE = {
    DW: "d near 2 means no lag-1 correlation; d well below 2 means positive, well above 2 negative "
    "correlation. The exact p-value is for this model's own design.",
    BG: "Regresses the residuals on their own lags and the regressors: a small p-value means correlation "
    "at one or more of the first lags. Valid with a lagged response.",
    LB: "Pools the squared autocorrelations up to the lag shown: a small p-value means the residuals are "
    "not white noise at some of those lags.",
    DH: "For models with the lagged response as a regressor: h is approximately standard normal when "
    "there is no lag-1 correlation.",
    DALT: "Regresses the residuals on their lag and the regressors: works with a lagged response, and "
    "when Durbin's h cannot be computed.",
    SEASONAL: "The Durbin-Watson statistic at the seasonal lag s: d at lag s well below 2 means this "
    "season's residual follows last season's.",
    RUNS: "Counts runs of same-signed residuals: too few runs means positive correlation. Uses signs only, "
    "so it needs no normality but has less power.",
}

#: columns of the test table
TEST_COLUMNS = ("test", "statistic", "p-value", "looks for", "reading", "method")

_LOOKS_FOR = {
    "positive": "positive correlation",
    "negative": "negative correlation",
    "two-sided": "correlation of either sign",
}
_SYMBOL = {DW: "d", BG: "LM", LB: "Q", DH: "h", DALT: "t", SEASONAL: "d", SEASONAL_GIVEN: "t", RUNS: "z"}


def statistic_label(name: str, res) -> str:
    """'d = 0.889', 'LM = 232.213 (df 7)', 'd at lag 7 = 1.868', ... (every statistic to
    :data:`lagsight.formats.STAT_DECIMALS` decimals)."""
    stat = format_statistic(res.statistic)
    if name == SEASONAL:
        return f"d at lag {getattr(res, 'lag', 's')} = {stat}"
    text = f"{_SYMBOL.get(name, 'statistic')} = {stat}"
    if name in (BG, LB) and res.df:
        text += f" (df {res.df[0]:g})"
    if name == RUNS and hasattr(res, "runs"):
        text += f" ({format_count(res.runs)} runs, {format_count(round(res.expected_runs))} expected)"
    return text


def test_rows(diag, alpha: float | None = None) -> list[tuple[str, ...]]:
    """One row of formatted strings per test (columns :data:`TEST_COLUMNS`), errors last.

    The reading comes from the verdict (the family adjusted, the others as support) at the
    diagnosis's own alpha; another ``alpha`` reads each p-value on its own.
    """
    v = diag.verdict
    rows: list[tuple[str, ...]] = []
    for name, res in diag.tests.items():
        p = res.pvalue
        if math.isnan(p) and v.finding != "not meaningful":
            reading = "no p-value"
            decision = getattr(res, "bounds_decision", None)
            if decision:
                reading = f"bounds: {bounds_words(decision, str(res.alternative))}"
        elif alpha is not None and alpha != diag.alpha and v.judged:
            reading = "evidence" if p < alpha else "no evidence"
        else:
            reading = v.reading(name, p)
        looks = _LOOKS_FOR.get(res.alternative, str(res.alternative))
        shown = "not meaningful" if v.finding == "not meaningful" else format_pvalue(p, log10_p(res))
        rows.append((name, statistic_label(name, res), shown, looks, reading, str(res.method)))
    for name, msg in diag.errors.items():
        rows.append((name, "", "", "", f"not run: {msg}", ""))
    return rows


def k_prime(diag) -> int | None:
    """Regressors excluding the constant (k' of published bounds tables), or None if unknown.

    Read from the Durbin-Watson result or the exact distribution, which apply the one k' rule
    (:func:`lagsight.stats._arrays.k_prime`); see :func:`k_prime_assumed`.
    """
    res = diag.tests.get(DW)
    if getattr(res, "k_prime", None) is not None:
        return int(res.k_prime)
    dist = diag.distribution
    return None if dist is None else int(dist.k_prime)


def k_prime_assumed(diag) -> bool:
    """True when k' was not known (residuals without a design) and 1 was assumed for the bounds."""
    return bool(getattr(diag.tests.get(DW), "k_prime_assumed", False))


#: how an assumed k' is shown, wherever k' is shown
K_PRIME_ASSUMED = "assumed: no design given"


def k_prime_text(diag) -> str | None:
    """k' for display: '3', or '1 (assumed: no design given)'; None when unknown."""
    kp = k_prime(diag)
    if kp is None:
        return None
    return f"{kp} ({K_PRIME_ASSUMED})" if k_prime_assumed(diag) else str(kp)


def primary_test(diag) -> str | None:
    """The test the verdict leads with (``diag.verdict.leading``), or the first test run."""
    lead = diag.verdict.leading
    if lead in diag.tests or lead in diag.errors:
        return lead
    return next(iter(diag.tests), None)


def key_figures(diag) -> list[tuple[str, str]]:
    """(label, value) pairs for the headline: the finding, the leading test, n, k', α, order.

    Every figure comes from the verdict: the leading test's statistic, the family's p-value
    (weighted-Holm adjusted for two), the rule; no p-value when the rows are not in time order.
    """
    v = diag.verdict
    out = [("finding", v.finding)]
    lead = v.leading
    res = diag.tests.get(lead) if lead is not None else None
    if res is not None:
        out.append((f"leading test: {lead}", statistic_label(lead, res)))
        if v.finding == "not meaningful":
            out.append(("p-value", "not meaningful (rows not in time order)"))
        elif v.judged:
            label = "adjusted p" if len(v.family) > 1 else "p-value"
            out.append((label, format_pvalue(v.pvalue, log10_p(res) if len(v.family) == 1 else None)))
        if lead == DW:
            out.append(("implied \u03c1", format_statistic(1 - res.statistic / 2)))
            bounds = getattr(res, "bounds", None)
            if bounds is not None:
                out.append(("dL / dU", f"{format_statistic(bounds.lower)} / {format_statistic(bounds.upper)}"))
    if v.rule and v.finding != "cannot judge":
        out.append(("rule", v.rule))
    out.append(("n", format_count(diag.n)))
    kp = k_prime_text(diag)
    if kp is not None:
        out.append(("k'", kp))
    out.append(("\u03b1", format_level(diag.alpha)))
    out.append(("alternative", str(diag.alternative)))
    out.append(("order", str(diag.order.order_used)))
    index = diag.data.index
    if len(index):
        out.append(("span", f"{_stamp(index[0])} \u2026 {_stamp(index[-1])}"))
    return out


def order_caveat(diag) -> str:
    """The caveat every figure carries when the rows are not in time order ('' otherwise)."""
    if diag.verdict.finding != "not meaningful":
        return ""
    return "Not meaningful: the rows are not in time order, so this does not show serial correlation."


def _stamp(value) -> str:
    text = str(value)
    return text[:-9] if text.endswith(" 00:00:00") else text


_ALT_WORDS = {
    "positive": "against positive autocorrelation",
    "negative": "against negative autocorrelation",
    "two-sided": "two-sided",
}


def _method_phrase(method: str) -> tuple[bool, str]:
    """(is exact, method words for a parenthesis) from a result's method string."""
    method = method.split(";")[0].strip()
    if method.startswith("exact (") and method.endswith(")"):
        return True, method[len("exact (") : -1]
    exact = method.startswith("exact")
    if method.endswith(")") and method.count("(") == 1:
        base, detail = method[:-1].split("(")
        method = f"{base.strip()}, {detail.strip()}"
    return exact, method


def report_sentence(diag, fmt: str = "markdown", *, test: str | None = None) -> str:
    """A sentence to paste into a report: statistic, n, k', p-value, method and alternative.

    Parameters
    ----------
    diag : Diagnosis
    fmt : {'markdown', 'text'}
    test : str, optional
        Test name (a key of ``diag.tests``); default the test the verdict leads with.
    """
    if fmt not in ("markdown", "text"):
        raise ValueError(f"'fmt' must be 'markdown' or 'text' (got {fmt!r})")
    v = diag.verdict
    if test is not None and test not in diag.tests:
        known = ", ".join(repr(t) for t in diag.tests)
        raise ValueError(f"'test' must be one of the tests run ({known}) (got {test!r})")
    if v.finding == "cannot judge":
        return f"No serial-correlation finding can be reported: {v.reason} (n = {format_count(diag.n)})."
    if v.finding == "not meaningful":
        return (
            f"No serial-correlation result can be reported: {v.reason} (n = {format_count(diag.n)}); sort the rows "
            "by time and test again."
        )
    name = primary_test(diag) if test is None else test
    if name is None or name not in diag.tests:
        return "No serial-correlation test could be run on these residuals."
    res = diag.tests[name]
    md = fmt == "markdown"

    def it(sym: str) -> str:
        return f"*{sym}*" if md else sym

    exact, method = _method_phrase(str(res.method))
    sizes = [f"{it('n')} = {format_count(diag.n)}"]
    if name in (DW, SEASONAL):
        kp = k_prime_text(diag)
        if kp is not None:
            sizes.append(f"{it('k')}\u2032 = {kp}" if md else f"k' = {kp}")
        value = format_statistic(res.statistic)
        head = f"{name} {it('d')} = {value}" if name == DW else f"{name} {it('d')} at lag {res.lag} = {value}"
    else:
        symbol = _SYMBOL.get(name, "statistic")
        head = f"{name} {it(symbol)} = {format_statistic(res.statistic)}"
        if res.df:
            sizes.append("df " + ", ".join(f"{d:g}" for d in res.df))
    alt = _ALT_WORDS.get(str(res.alternative), f"against {res.alternative}")
    if math.isnan(res.pvalue):
        bounds = getattr(res, "bounds", None)
        tail = "no exact p-value (the design is not known)"
        if bounds is not None:
            tail += (
                f"; bounds at \u03b1 = {format_level(bounds.alpha)}: dL = {format_statistic(bounds.lower)}, "
                f"dU = {format_statistic(bounds.upper)}, {bounds_words(res.bounds_decision, str(res.alternative))}"
            )
        return f"{head} ({', '.join(sizes)}), {tail}."
    pword = f"{it('p')}-value"
    if exact and method:
        pword = f"exact {pword}"
    tail = f"{pword} {format_pvalue(res.pvalue, log10_p(res))} {alt}"
    if method:
        tail += f" ({method})"
    if name in v.family and len(v.family) > 1:
        tail += f"; {v.rule}: adjusted {it('p')} = {format_pvalue(v.adjusted_pvalue(name))}"
    return f"{head} ({', '.join(sizes)}), {tail}."


def table_text(columns, rows, *, max_width: int = 60) -> str:
    """A fixed-width text table of string cells (long cells are cut with an ellipsis)."""
    cut = [[c if len(c) <= max_width else c[: max_width - 1] + "\u2026" for c in row] for row in rows]
    widths = [max([len(str(h))] + [len(r[i]) for r in cut]) for i, h in enumerate(columns)]
    lines = ["  ".join(str(h).ljust(w) for h, w in zip(columns, widths)).rstrip()]
    lines += ["  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip() for r in cut]
    return "\n".join(lines)


def diagnosis_text(diag) -> str:
    """A plain-text rendering: headline, key figures, warnings, tests, what to do, the sentence."""
    v = diag.verdict
    lines = [f"lagsight diagnosis: {diag.data.source}", "", v.headline, ""]
    lines.append("   ".join(f"{k}: {val}" for k, val in key_figures(diag)))
    if diag.order.warnings:
        lines.append("")
        lines += [f"Order check: {w}" for w in diag.order.warnings]
    lines += ["", table_text(TEST_COLUMNS[:5], [r[:5] for r in test_rows(diag)])]
    if v.next_steps:
        lines += ["", "What to do next:"] + [f"  - {s}" for s in v.next_steps]
    lines += ["", "To report: " + report_sentence(diag, "text")]
    return "\n".join(lines)


def power_text(curve) -> str:
    """One line on the power curve: where power reaches the target."""
    rho = curve.min_detectable_rho
    if rho is None or np.isnan(rho):
        return f"On this grid the test does not reach power {TARGET_POWER:g} (n = {format_count(curve.n)})."
    return (
        f"Power reaches {TARGET_POWER:g} at \u03c1 = {format_statistic(rho)} "
        f"(n = {format_count(curve.n)}, \u03b1 = {format_level(curve.alpha)}, {format_count(curve.n_sim)} draws)."
    )
