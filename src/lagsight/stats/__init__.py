"""Pure computation: no IPython, no plotting.  Import from here or from ``lagsight``."""
from .durbin_watson import (
    BoundsResult,
    DurbinWatsonDistribution,
    DurbinWatsonResult,
    durbin_watson,
    dw_bounds,
    dw_distribution,
    dw_statistic,
)
from .quadform import SpectralForm, imhof_cdf
from .results import TestResult

__all__ = sorted(
    [
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
)
