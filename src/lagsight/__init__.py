"""lagsight: are a regression's residuals serially correlated, how sure is that, and what to do about it."""
from .stats import (
    BoundsResult,
    DurbinWatsonDistribution,
    DurbinWatsonResult,
    TestResult,
    durbin_watson,
    dw_bounds,
    dw_distribution,
)

__version__ = "0.1.0"

__all__ = [
    "BoundsResult",
    "DurbinWatsonDistribution",
    "DurbinWatsonResult",
    "TestResult",
    "durbin_watson",
    "dw_bounds",
    "dw_distribution",
]
