"""Result objects shared by every test in :mod:`lagsight.stats`.

Every test returns a frozen dataclass whose first fields are ``statistic`` and
``pvalue``; the alternative is stored on the result and :func:`tail_pvalue` is
the one place that maps it to a tail.  Results print as readable text.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields
from typing import Any

ALTERNATIVES = ("positive", "negative", "two-sided")


def check_alternative(alternative: str) -> str:
    """Return ``alternative`` if it is one we know, else raise a ValueError."""
    if alternative not in ALTERNATIVES:
        raise ValueError(
            f"'alternative' must be one of {', '.join(repr(a) for a in ALTERNATIVES)} (got {alternative!r})"
        )
    return alternative


def tail_pvalue(lower: float, upper: float, alternative: str) -> float:
    """Map the two one-sided probabilities of a statistic to a p-value.

    ``lower`` is P(T <= t_obs) and ``upper`` is P(T >= t_obs).  For statistics
    where small values signal positive autocorrelation (Durbin-Watson), the
    'positive' alternative uses the lower tail.
    """
    check_alternative(alternative)
    if alternative == "positive":
        return float(lower)
    if alternative == "negative":
        return float(upper)
    return float(min(1.0, 2.0 * min(lower, upper)))


def _fmt(value: Any) -> str:
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if value != 0 and (abs(value) < 1e-4 or abs(value) >= 1e6):
            return f"{value:.4g}"
        return f"{value:.6g}"
    return repr(value)


@dataclass(frozen=True)
class TestResult:
    """A hypothesis test.

    Attributes
    ----------
    statistic, pvalue : float
        The test statistic and its p-value (NaN when no p-value exists).
    alternative : str
        What the test looks for: 'positive', 'negative', 'two-sided' or a
        description such as 'autocorrelation up to lag 4'.
    df : tuple of float or None
        Degrees of freedom of the reference distribution, when it has any.
    method : str
        How the p-value was obtained (for example 'exact (Imhof)').
    name : str
        The published name of the test.
    notes : tuple of str
        Findings and caveats, as sentences.
    """

    __test__ = False  # keep pytest from collecting this class

    statistic: float
    pvalue: float
    alternative: str = "two-sided"
    df: tuple | None = None
    method: str = ""
    name: str = ""
    notes: tuple = ()

    def _summary_pairs(self) -> list[tuple[str, Any]]:
        pairs = []
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name in ("name", "notes") or value is None or (isinstance(value, tuple) and not value):
                continue
            pairs.append((f.name, value))
        return pairs

    def __str__(self) -> str:
        title = self.name or type(self).__name__
        lines = [title]
        for key, value in self._summary_pairs():
            lines.append(f"  {key:<12} {_fmt(value)}")
        for note in self.notes:
            lines.append(f"  note: {note}")
        return "\n".join(lines)
