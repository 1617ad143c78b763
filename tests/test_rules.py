"""One place for input rules: the same mistake gets the same exception kind and message everywhere,
one constant detector and one k' rule.

Each case under "API parameters" failed on the main branch before this change (the API accepted
``max_lag=0``, ``bg_order=2.5`` became 2, ``seasonal_period=True`` was taken as 1, and a design of
dummies that add up to a constant was given bounds "without constant" with k' one too large).
"""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from IPython.core.error import UsageError
from IPython.core.interactiveshell import InteractiveShell

import lagsight
from lagsight.panel import DiagnosisPanel
from lagsight.render.text import k_prime, key_figures
from lagsight.stats._arrays import has_constant
from lagsight.stats.battery import breusch_godfrey, durbin_alternative, ljung_box
from lagsight.stats.correlogram import correlogram, lag_pairs


def _ar1(n, rho, rng):
    e = np.zeros(n)
    eps = rng.normal(size=n)
    for t in range(1, n):
        e[t] = rho * e[t - 1] + eps[t]
    return e


@pytest.fixture(scope="module")
def fit():
    rng = np.random.default_rng(11)
    n = 96
    X = sm.add_constant(np.column_stack([np.arange(n) / n, rng.normal(size=n)]))
    return sm.OLS(X @ [1.0, 2.0, -1.0] + _ar1(n, 0.4, rng), X).fit()


# ---------------------------------------------------------------- API parameters
@pytest.mark.parametrize(
    "kwargs,kind,message",
    [
        ({"max_lag": 0}, ValueError, "'max_lag' must be an integer ≥ 1 (got 0)"),
        ({"max_lag": -3}, ValueError, "'max_lag' must be an integer ≥ 1 (got -3)"),
        ({"max_lag": 2.5}, TypeError, "'max_lag' must be an integer ≥ 1 (got 2.5)"),
        ({"bg_max_lag": 0}, ValueError, "'bg_max_lag' must be an integer ≥ 1 (got 0)"),
        ({"bg_max_lag": -2}, ValueError, "'bg_max_lag' must be an integer ≥ 1 (got -2)"),
        ({"bg_max_lag": 2.5}, TypeError, "'bg_max_lag' must be an integer ≥ 1 (got 2.5)"),
        ({"period": 1}, ValueError, "'period' must be 0 (off) or an integer ≥ 2 (got 1)"),
        ({"period": -4}, ValueError, "'period' must be 0 (off) or an integer ≥ 2 (got -4)"),
        ({"period": True}, TypeError, "'period' must be 0 (off) or an integer ≥ 2 (got True)"),
        ({"alpha": 1.5}, ValueError, "'alpha' must be in (0, 1) (got 1.5)"),
        ({"alpha": "0.05"}, TypeError, "'alpha' must be a number in (0, 1) (got '0.05')"),
        ({"alternative": "up"}, ValueError, "'alternative' must be one of"),
        ({"remedies": 1}, ValueError, "'remedies' must be one of 'auto', True, False (got 1)"),
        ({"power": "yes"}, TypeError, "'power' must be True or False (got 'yes')"),
        ({"order": 3}, TypeError, "'order' must be 'auto', 'keep', 'index' or a column name (got 3)"),
    ],
)
def test_diagnose_refuses_what_the_magic_refuses(fit, kwargs, kind, message):
    with pytest.raises(kind) as info:
        lagsight.diagnose(fit, **kwargs)
    text = str(info.value)
    assert text.startswith(message) and "\n" not in text


@pytest.mark.parametrize(
    "call",
    [
        lambda e, X: breusch_godfrey(e, X, max_lag=2.5),
        lambda e, X: durbin_alternative(e, X, max_lag=True),
        lambda e, X: ljung_box(e, max_lag=2.5),
        lambda e, X: correlogram(e, max_lag=2.5),
        lambda e, X: lag_pairs(e, lag=1.0),
        lambda e, X: lagsight.durbin_watson(e, X, lag=2.5),
        lambda e, X: lagsight.dw_distribution(X, lag=True),
        lambda e, X: lagsight.dw_bounds(50, 2.5),
        lambda e, X: lagsight.dw_power(X, n_sim=500.0),
        lambda e, X: lagsight.newey_west(e + 1.0, X, max_lag=1.5),
        lambda e, X: lagsight.durbin_watson(e, k_prime=1.5),
    ],
)
def test_a_count_of_the_wrong_type_is_a_type_error_everywhere(fit, call):
    with pytest.raises(TypeError, match=r"must be an integer ≥ \d+ \(got (2\.5|True|1\.0|1\.5|500\.0)\)$"):
        call(np.asarray(fit.resid), fit.model.exog)


def test_panel_and_views_use_the_same_checks(fit):
    d = lagsight.diagnose(fit)
    with pytest.raises(TypeError, match=r"^'max_lag' must be an integer ≥ 1 \(got 2\.5\)$"):
        DiagnosisPanel(d, max_lag=2.5, snapshot_delay=0)
    from lagsight.render.html import build_view

    with pytest.raises(ValueError, match=r"^'max_lag' must be an integer ≥ 1 \(got 0\)$"):
        build_view(d, max_lag=0)


def test_screen_uses_the_same_checks(fit):
    with pytest.raises(ValueError, match=r"^'chunksize' must be an integer ≥ 1 \(got 0\)$"):
        lagsight.screen({"a": fit}, chunksize=0, progress=False)
    with pytest.raises(TypeError, match=r"^'progress' must be True or False \(got 'no'\)$"):
        lagsight.screen({"a": fit}, progress="no")


@pytest.fixture(scope="module")
def shell(fit):
    ip = InteractiveShell.instance()  # the same singleton tests/test_magic.py uses
    ip.run_line_magic("load_ext", "lagsight")
    ip.user_ns["rules_fit"] = fit
    return ip


@pytest.mark.parametrize(
    "line,message",
    [
        ("rules_fit --max-lag 0", "--max-lag must be an integer ≥ 1 (got 0)"),
        ("rules_fit --bg-max-lag -2", "--bg-max-lag must be an integer ≥ 1 (got -2)"),
        ("rules_fit --period 1", "--period must be 0 (off) or an integer ≥ 2 (got 1)"),
        ("rules_fit --alpha 2", "--alpha must be in (0, 1) (got 2.0)"),
    ],
)
def test_the_magic_gives_the_api_message_under_its_own_option_names(shell, line, message):
    with pytest.raises(UsageError) as info:
        shell.run_line_magic("lagsight", line)
    assert str(info.value) == message


def test_bounds_magic_uses_dw_bounds_checks(shell):
    with pytest.raises(UsageError, match=r"^K must be an integer ≥ 1 \(got 0\)$"):
        shell.run_line_magic("lagsight_bounds", "50 0")


# ------------------------------------------------ one constant detector, one k' rule
def test_constant_detector_matches_statsmodels_on_implicit_constants():
    """statsmodels' ``k_constant`` (the reference) also finds a constant spanned by the columns."""
    rng = np.random.default_rng(5)
    n = 150
    groups = np.eye(3)[np.arange(n) % 3]
    x = rng.normal(size=n)
    cases = {
        "literal constant": np.column_stack([np.ones(n), x]),
        "dummies adding up to one": np.column_stack([groups, x]),
        "two dummies and a trend": np.column_stack([groups[:, :2], x]),
        "a column of 7s": np.column_stack([np.full(n, 7.0), x]),
        "shares adding up to 100": np.column_stack([30 + x, 70 - x, rng.normal(size=n)]),
        "no constant": np.column_stack([x, x**2]),
        "nearly constant": np.column_stack([1 + 1e-6 * x, rng.normal(size=n)]),
    }
    for name, X in cases.items():
        reference = bool(sm.OLS(rng.normal(size=n), X).k_constant)
        assert has_constant(X) is reference, name


def test_dummies_that_add_up_to_a_constant_get_bounds_with_a_constant():
    """The same column space with and without a literal column of ones: same exact p-value, same
    bounds, and k' equals statsmodels' ``df_model`` (regressors besides the constant)."""
    rng = np.random.default_rng(21)
    n = 120
    D = np.eye(3)[np.arange(n) % 3]
    x = rng.normal(size=n)
    dummies = np.column_stack([D, x])
    literal = np.column_stack([np.ones(n), D[:, 1:], x])
    y = dummies @ [1.0, 2.0, 3.0, 0.5] + _ar1(n, 0.5, rng)
    fits = [sm.OLS(y, X).fit() for X in (dummies, literal)]
    results = [lagsight.diagnose(f) for f in fits]
    dws = [d.tests["Durbin-Watson"] for d in results]
    for f, d, dw in zip(fits, results, dws):
        assert f.k_constant == 1
        assert dw.bounds.has_constant is True
        assert dw.k_prime == k_prime(d) == int(f.df_model) == 3
        assert ("k'", "3") in key_figures(d)
    assert dws[0].pvalue == pytest.approx(dws[1].pvalue, rel=1e-9)
    assert (dws[0].bounds.lower, dws[0].bounds.upper) == (dws[1].bounds.lower, dws[1].bounds.upper)


def test_residuals_without_a_design_say_k_prime_was_assumed(fit):
    res = lagsight.durbin_watson(np.asarray(fit.resid))
    assert res.k_prime == 1 and res.k_prime_assumed
    assert "k' = 1 (assumed)" in str(res)
    given = lagsight.durbin_watson(np.asarray(fit.resid), k_prime=2)
    assert given.k_prime == 2 and not given.k_prime_assumed and given.bounds.k_prime == 2
    d = lagsight.diagnose(pd.Series(np.asarray(fit.resid)))
    assert ("k'", "1 (assumed: no design given)") in key_figures(d)
    with pytest.raises(TypeError, match="either 'exog' or 'k_prime'"):
        lagsight.durbin_watson(np.asarray(fit.resid), fit.model.exog, k_prime=2)
