"""Pure computation: no IPython, no plotting.  Import from here or from ``lagsight``."""

from .bounds import BoundsResult, dw_bounds
from .durbin_watson import (
    DurbinWatsonDistribution,
    DurbinWatsonResult,
    durbin_watson,
    dw_distribution,
    dw_statistic,
)
from .imhof import imhof_cdf
from .quadform import SpectralForm
from .results import TestResult

__all__ = [
    "BoundsResult",
    "DurbinWatsonDistribution",
    "DurbinWatsonResult",
    "SpectralForm",
    "TestResult",
    "durbin_watson",
    "dw_bounds",
    "dw_distribution",
    "dw_statistic",
    "imhof_cdf",
]
