"""diagnose(): the whole pipeline against outside references and real behaviour."""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf

import lagsight
from lagsight.diagnosis import diagnose


def _macro_fit():
    # statsmodels' quarterly macrodata regression used in its own test suite:
    # y = 400 dlog(realinv) on a constant, 400 dlog(realgdp) and realint lagged one quarter
    d = sm.datasets.macrodata.load_pandas().data
    idx = pd.period_range("1959Q2", periods=len(d) - 1, freq="Q")
    frame = pd.DataFrame({
        "inv": 400 * np.diff(np.log(d["realinv"].to_numpy())),
        "gdp": 400 * np.diff(np.log(d["realgdp"].to_numpy())),
        "rate": d["realint"].to_numpy()[:-1],
    }, index=idx)
    return smf.ols("inv ~ gdp + rate", data=frame).fit()


def test_macrodata_reference_values_through_diagnose():
    # statsmodels test-suite reference output: DW 2.213805, BG(4) LM 4.771042651230007
    # (p 0.3116067133066697), F 1.179280833676792, Ljung-Box lag 4 5.23587172795227
    fit = _macro_fit()
    d = diagnose(fit)
    assert d.period == 4          # quarterly PeriodIndex
    assert abs(d.tests["Durbin-Watson"].statistic - 2.213805) < 5e-7
    bg = d.tests["Breusch-Godfrey"]
    assert bg.max_lag == 4
    assert abs(bg.statistic - 4.771042651230007) < 1e-9
    assert abs(bg.pvalue - 0.3116067133066697) < 1e-9
    assert abs(bg.f_statistic - 1.179280833676792) < 1e-9
    lb = d.tests["Ljung-Box"]
    assert abs(lb.lb_stat[list(lb.lags).index(4)] - 5.23587172795227) < 1e-9
    assert d.verdict.finding == "no evidence"
    assert "does not prove" in d.verdict.headline
    frame = d.to_frame()
    assert {"Durbin-Watson", "Breusch-Godfrey", "Ljung-Box", "Runs test"} <= set(frame["test"])


def _ar1_frame(n=400, rho=0.8, seed=0):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=n)
    u = np.zeros(n)
    eps = rng.normal(size=n)
    for t in range(1, n):
        u[t] = rho * u[t - 1] + eps[t]
    idx = pd.date_range("2020-01-01", periods=n, freq="D")
    return pd.DataFrame({"y": 1 + 2 * x + u, "x": x}, index=idx)


def test_order_guard_flags_random_split_and_sorting_restores_correlation():
    frame = _ar1_frame()
    train = frame.sample(frac=0.7, random_state=3)           # a random train split
    fit = smf.ols("y ~ x", data=train).fit()
    shuffled = diagnose(fit)
    assert shuffled.order.flags["shuffled"]
    assert shuffled.verdict.finding == "not meaningful"
    assert shuffled.tests["Durbin-Watson"].pvalue > 0.01     # the shuffle hid the correlation
    fixed = diagnose(fit, order="index")
    assert fixed.tests["Durbin-Watson"].pvalue < 1e-6
    assert fixed.verdict.finding == "evidence"
    assert any("not" in w.lower() for w in fixed.order.warnings)  # the warning stays beside it


def test_evidence_brings_remedies_and_reassess_is_cheap():
    fit = smf.ols("y ~ x", data=_ar1_frame()).fit()
    d = diagnose(fit)
    assert d.verdict.finding == "evidence" and d.verdict.strength == "strong"
    assert d.remedies is not None and abs(d.remedies.rho - 0.8) < 0.1
    neg = d.reassess(alternative="negative")
    dw_pos, dw_neg = d.tests["Durbin-Watson"], neg.tests["Durbin-Watson"]
    assert abs(dw_pos.pvalue + dw_neg.pvalue - 1) < 1e-9
    assert neg.tests["Durbin-Watson"].alternative == "negative"


def _consumption_with_lag():
    """Consumption function with lagged consumption on statsmodels' macrodata (a lagged response)."""
    d = sm.datasets.macrodata.load_pandas().data
    c = np.log(d["realcons"].to_numpy())
    inc = np.log(d["realdpi"].to_numpy())
    frame = pd.DataFrame({"c": c[1:], "inc": inc[1:], "c_lag": c[:-1]})
    return smf.ols("c ~ inc + c_lag", data=frame).fit()


@pytest.mark.parametrize("kind", ["fitted model", "residuals only", "lagged response"])
@pytest.mark.parametrize("alpha,alternative", [(0.01, "positive"), (0.001, "two-sided"), (0.1, "negative")])
def test_reassess_equals_diagnosing_again(kind, alpha, alternative):
    # weak correlation (rho 0.12, n 120) so the bounds decision and the verdict can change with the level
    fit = smf.ols("y ~ x", data=_ar1_frame(n=120, rho=0.12, seed=3)).fit()
    model = {"fitted model": fit, "residuals only": fit.resid}[kind] if kind != "lagged response" \
        else _consumption_with_lag()
    again = diagnose(model, alpha=alpha, alternative=alternative)
    moved = diagnose(model).reassess(alpha=alpha, alternative=alternative)
    for name, res in again.tests.items():
        got = moved.tests[name]
        assert got.alternative == res.alternative, name
        np.testing.assert_allclose(got.pvalue, res.pvalue, rtol=1e-9, atol=1e-15, err_msg=name)
        if getattr(res, "bounds", None) is not None:
            assert got.bounds == res.bounds, name  # dL, dU at the new level, not the old one
            assert got.bounds_decision == res.bounds_decision, name
    assert moved.verdict.headline == again.verdict.headline
    assert moved.to_frame()[["test", "reading"]].equals(again.to_frame()[["test", "reading"]])
    # the correlogram's bands are drawn at the new level too
    assert moved.correlogram.alpha == alpha
    assert moved.correlogram.white_band == pytest.approx(again.correlogram.white_band, rel=1e-12)
    np.testing.assert_allclose(moved.correlogram.bartlett_band, again.correlogram.bartlett_band, rtol=1e-12)


def test_lagged_response_switches_to_durbin_tests():
    diag = diagnose(_consumption_with_lag())
    assert diag.lagged_response == "c_lag"
    assert "Durbin's alternative" in diag.tests
    assert "Durbin's h" in diag.tests
    assert any("biased towards 2" in n for n in diag.notes)


def _stores(rhos=(0.85, 0.0, 0.6), n=120, seed=9):
    rng = np.random.default_rng(seed)
    parts = []
    for g, rho in zip("ABCDEFGH", rhos):
        x = rng.normal(size=n)
        u = np.zeros(n)
        for t in range(1, n):
            u[t] = rho * u[t - 1] + rng.normal()
        parts.append(pd.DataFrame({"store": g, "t": np.arange(n), "x": x, "y": 3 + x + u}))
    return pd.concat(parts, ignore_index=True)


def test_panel_within_group_results():
    frame = _stores()
    diag = diagnose(frame, response="y", predictors=["x"], groups="store")
    table = diag.groups.table.set_index("group")
    # per-group statistic is the group's own lag-1 statistic on its residuals
    resid = diag.data.resid
    for g in "ABC":
        rows = np.flatnonzero(diag.data.groups == g)
        assert abs(table.loc[g, "dw"] - lagsight.stats.dw_statistic(resid[rows])) < 1e-12
    assert table.loc["A", "dw_pvalue"] < 1e-6 and table.loc["B", "dw_pvalue"] > 0.01
    assert list(diag.groups.table["group"])[0] in ("A", "C")     # sorted by evidence
    # the pooled within-group d never differences across boundaries, the stacked one does
    assert abs(diag.groups.pooled_dw - diag.groups.naive_dw) > 1e-3
    assert diag.groups.pooled_pvalue < 1e-6


@pytest.mark.parametrize("alpha,alternative", [(0.01, "negative"), (0.2, "two-sided")])
def test_reassess_judges_the_groups_again(alpha, alternative):
    # one negatively correlated store, so the alternative changes which stores show evidence
    frame = _stores(rhos=(0.5, 0.0, -0.5, 0.25, 0.1), n=80, seed=4)
    options = dict(response="y", predictors=["x"], groups="store")
    again = diagnose(frame, alpha=alpha, alternative=alternative, **options).groups
    moved = diagnose(frame, **options).reassess(alpha=alpha, alternative=alternative).groups
    cols = ["group", "dw_pvalue", "runs_pvalue", "dw_p_adjusted", "finding"]
    pd.testing.assert_frame_equal(moved.table[cols], again.table[cols], rtol=1e-9)
    assert moved.pooled_pvalue == pytest.approx(again.pooled_pvalue, rel=1e-9)
    assert (moved.alpha, moved.alternative) == (alpha, alternative)


def test_small_groups_are_skipped_and_listed():
    rng = np.random.default_rng(1)
    frame = pd.DataFrame({"g": ["a"] * 40 + ["b"] * 2, "x": rng.normal(size=42)})
    frame["y"] = frame["x"] + rng.normal(size=42)
    diag = diagnose(frame, response="y", predictors=["x"], groups="g")
    assert "b" in diag.groups.skipped
    assert "fewer than 3" in diag.groups.skipped["b"]


def test_missing_values_dropped_with_a_count():
    resid = pd.Series(np.r_[np.random.default_rng(0).normal(size=50), np.nan, 1.0])
    diag = diagnose(resid)
    assert diag.n == 51
    assert any("1" in n and ("missing" in n.lower() or "nan" in n.lower()) for n in diag.notes)
    assert math.isnan(diag.tests["Durbin-Watson"].pvalue)      # residuals only: bounds


def test_unknown_kind_is_a_type_error():
    with pytest.raises(TypeError, match="Unexpected type for 'model'"):
        diagnose(object())


def test_bad_options():
    fit = smf.ols("y ~ x", data=_ar1_frame(80)).fit()
    with pytest.raises(ValueError, match="'alpha' must be in"):
        diagnose(fit, alpha=2)
    with pytest.raises(ValueError, match="'alternative'"):
        diagnose(fit, alternative="up")
    with pytest.raises(ValueError, match="'remedies'"):
        diagnose(fit, remedies="maybe")
