"""Numbers for people: the one place that decides how a count, a statistic or a p-value is written.

Every view (the verdict's sentences, the test table, the report sentence, the figures' captions,
the CLI) formats through these functions, so the same number reads the same everywhere: counts
with thousands separators, statistics with three decimals, p-values with three decimals (two
significant digits below 0.001).  Minus signs are the typographic minus.
"""

from __future__ import annotations

import math

__all__ = [
    "STAT_DECIMALS",
    "format_count",
    "format_statistic",
    "format_number",
    "format_pvalue",
    "format_p",
    "format_level",
    "tiny_p_text",
]

#: decimals of every test statistic shown (d, LM, Q, h, t, z)
STAT_DECIMALS = 3


def _minus(text: str) -> str:
    return "\u2212" + text[1:] if text.startswith("-") else text


def _missing(x) -> bool:
    return x is None or (isinstance(x, float) and math.isnan(x))


def format_count(n) -> str:
    """A count with thousands separators ('2,016'); 'n/a' when unknown."""
    if _missing(n):
        return "n/a"
    return f"{int(n):,}"


def format_statistic(x, decimals: int = STAT_DECIMALS) -> str:
    """A test statistic (or coefficient such as ρ) with a fixed number of decimals; thousands
    separated in the integer part ('1,234.568'); 'n/a' for NaN."""
    if _missing(x):
        return "n/a"
    x = float(x)
    if math.isinf(x):
        return _minus("-\u221e") if x < 0 else "\u221e"
    return _minus(f"{x:,.{decimals}f}")


def format_number(x, digits: int = 4) -> str:
    """An estimate of any size (a coefficient, a standard error) with ``digits`` significant digits;
    'n/a' for NaN."""
    if _missing(x):
        return "n/a"
    return _minus(f"{float(x):.{digits}g}")


def tiny_p_text(log10) -> str:
    """A p-value below the smallest double written from its log10 ('3.2e-570'), or '< 1e-300'
    when the logarithm is not known."""
    if log10 is None or not math.isfinite(log10):
        return "< 1e-300"
    exp = math.floor(log10)
    mant = 10.0 ** (log10 - exp)
    if mant >= 9.95:
        mant, exp = 1.0, exp + 1
    return f"{mant:.1f}e{exp}"


def format_pvalue(p, log10=None) -> str:
    """A p-value: 3 decimals, or 2 significant digits below 0.001 ('3.1e-05'); below the smallest double from
    its ``log10`` when known ('3.2e-570'); 'n/a' when missing."""
    if _missing(p):
        return "n/a"
    p = float(p)
    if p <= 0.0:
        return tiny_p_text(log10)
    if p < 0.001:  # always two significant digits, so '2.0e-156' sits beside '1.6e-246'
        return f"{p:.1e}"
    return f"{p:.3f}"


def format_p(p, log10=None) -> str:
    """'p = 0.012', 'p = 3.1e-05', 'p < 1e-300': :func:`format_pvalue` in a sentence."""
    text = format_pvalue(p, log10)
    return f"p {text}" if text.startswith("<") else f"p = {text}"


def format_level(alpha) -> str:
    """A significance level α ('0.05')."""
    return f"{float(alpha):g}"
