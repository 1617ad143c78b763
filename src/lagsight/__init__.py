"""lagsight: are a regression's residuals serially correlated, how sure is that, and what to do about it.

Start with :func:`diagnose`; in a notebook, ``%load_ext lagsight`` then ``%lagsight model``.
"""

from .diagnosis import Diagnosis, diagnose
from .groups import GroupSummary
from .inputs import ResidualData, as_residual_data
from .order import OrderReport, check_order
from .screening import ScreenResult, screen
from .stats import (
    BoundsResult,
    DurbinWatsonDistribution,
    DurbinWatsonResult,
    TestResult,
    durbin_watson,
    dw_bounds,
    dw_distribution,
)
from .stats.battery import (
    BreuschGodfreyResult,
    DurbinAlternativeResult,
    DurbinHResult,
    PortmanteauResult,
    breusch_godfrey,
    durbin_alternative,
    durbin_h,
    ljung_box,
    seasonal_lag_test,
)
from .stats.correlogram import Correlogram, LagPairs, correlogram, lag_pairs
from .stats.power import PowerCurve, dw_power
from .stats.remedies import (
    FGLSResult,
    HacLag,
    InferenceComparison,
    NeweyWestResult,
    cochrane_orcutt,
    compare_inference,
    hac_lag,
    newey_west,
    prais_winsten,
)
from .stats.runs import RunsDistribution, RunsResult, runs_distribution, runs_test
from .verdict import Verdict

__version__ = "0.1.0"


def load_ipython_extension(ipython):
    """``%load_ext lagsight``: register the magics (IPython is imported only here)."""
    from .magic import load_ipython_extension as _load

    _load(ipython)


def unload_ipython_extension(ipython):
    """``%unload_ext lagsight``."""
    from .magic import unload_ipython_extension as _unload

    _unload(ipython)


__all__ = [
    # results (frozen objects; every public function returns one of these)
    "BoundsResult",
    "BreuschGodfreyResult",
    "Correlogram",
    "Diagnosis",
    "DurbinAlternativeResult",
    "DurbinHResult",
    "DurbinWatsonDistribution",
    "DurbinWatsonResult",
    "FGLSResult",
    "GroupSummary",
    "HacLag",
    "InferenceComparison",
    "LagPairs",
    "NeweyWestResult",
    "OrderReport",
    "PortmanteauResult",
    "PowerCurve",
    "ResidualData",
    "RunsDistribution",
    "RunsResult",
    "ScreenResult",
    "TestResult",
    "Verdict",
    # functions
    "as_residual_data",
    "breusch_godfrey",
    "check_order",
    "cochrane_orcutt",
    "compare_inference",
    "correlogram",
    "diagnose",
    "durbin_alternative",
    "durbin_h",
    "durbin_watson",
    "dw_bounds",
    "dw_distribution",
    "dw_power",
    "hac_lag",
    "lag_pairs",
    "ljung_box",
    "load_ipython_extension",
    "newey_west",
    "prais_winsten",
    "runs_distribution",
    "runs_test",
    "screen",
    "seasonal_lag_test",
    "unload_ipython_extension",
]
