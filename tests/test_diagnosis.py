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
    frame = pd.DataFrame(
        {
            "inv": 400 * np.diff(np.log(d["realinv"].to_numpy())),
            "gdp": 400 * np.diff(np.log(d["realgdp"].to_numpy())),
            "rate": d["realint"].to_numpy()[:-1],
        },
        index=idx,
    )
    return smf.ols("inv ~ gdp + rate", data=frame).fit()


def test_macrodata_reference_values_through_diagnose():
    # statsmodels test-suite reference output: DW 2.213805, BG(4) LM 4.771042651230007
    # (p 0.3116067133066697), F 1.179280833676792, Ljung-Box lag 4 5.23587172795227
    fit = _macro_fit()
    d = diagnose(fit)
    assert d.period == 4  # quarterly PeriodIndex
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
    train = frame.sample(frac=0.7, random_state=3)  # a random train split
    fit = smf.ols("y ~ x", data=train).fit()
    shuffled = diagnose(fit)
    assert shuffled.order.flags["shuffled"]
    assert shuffled.verdict.finding == "not meaningful"
    assert shuffled.tests["Durbin-Watson"].pvalue > 0.01  # the shuffle hid the correlation
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
    model = (
        {"fitted model": fit, "residuals only": fit.resid}[kind]
        if kind != "lagged response"
        else _consumption_with_lag()
    )
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
    assert list(diag.groups.table["group"])[0] in ("A", "C")  # sorted by evidence
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
    assert math.isnan(diag.tests["Durbin-Watson"].pvalue)  # residuals only: bounds


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


# --- hostile inputs: failing tests, missing group labels, library warnings, assumed k' ----------
def _ar1_resid(n, rho=0.5, seed=0):
    rng = np.random.default_rng(seed)
    e = np.zeros(n)
    eps = rng.normal(size=n)
    for t in range(1, n):
        e[t] = rho * e[t - 1] + eps[t]
    return e


@pytest.mark.parametrize("kind", [FloatingPointError, IndexError, RuntimeError, ZeroDivisionError])
def test_a_test_that_fails_in_any_way_becomes_an_error_entry(monkeypatch, kind):
    from lagsight.stats import battery

    def broken(*args, **kwargs):
        raise kind("went wrong\nsecond line")

    monkeypatch.setattr(battery, "breusch_godfrey", broken)
    d = diagnose(_ar1_resid(60), exog=np.ones((60, 1)))
    assert d.errors["Breusch-Godfrey"] == f"{kind.__name__}: went wrong"  # one line, the kind named
    assert "Durbin-Watson" in d.tests and "Ljung-Box" in d.tests  # the others still ran
    assert "not run: " in d.to_frame().set_index("test").loc["Breusch-Godfrey", "reading"]


def test_failing_corrections_say_why(monkeypatch):
    import lagsight.diagnosis as D

    def broken(*args, **kwargs):
        raise np.linalg.LinAlgError("SVD did not converge")

    monkeypatch.setattr(D, "compare_inference", broken)
    fit = smf.ols("y ~ x", data=_ar1_frame(80)).fit()
    d = diagnose(fit, remedies=True)
    assert d.remedies is None
    assert "No corrected inference: SVD did not converge." in d.notes
    assert not any("needs the response and the design" in n for n in d.notes)


def _labelled_frame(labels, seed=3):
    rng = np.random.default_rng(seed)
    n = len(labels)
    frame = pd.DataFrame({"x": rng.normal(size=n), "g": labels})
    frame["y"] = 1 + frame["x"] + _ar1_resid(n, 0.3, seed)
    return frame


@pytest.mark.parametrize("missing", [None, np.nan])
def test_rows_without_a_group_label_are_left_out_with_a_count(missing):
    labels = ["a"] * 35 + ["b"] * 35 + [missing] * 10
    frame = _labelled_frame(np.array(labels, dtype=object))
    d = diagnose(frame, response="y", predictors=["x"], groups="g")
    assert "10 rows have no group label and were left out." in d.notes
    assert d.n == 70 and d.groups.table["n"].sum() == 70  # 70 used + 10 noted = 80 given
    assert d.groups.n_groups == d.groups.n_tested == len(d.groups.table) == 2
    # the OLS is fitted on the labelled rows only: same residuals as fitting those rows directly
    kept = frame[frame["g"].notna()]
    direct = smf.ols("y ~ x", data=kept).fit()
    np.testing.assert_allclose(d.data.resid, direct.resid.to_numpy(), atol=1e-10)
    # the group count in every note and detail matches the table
    counts = [
        int(m)
        for text in list(d.notes) + list(d.verdict.details)
        for m in __import__("re").findall(r"(\d+) groups", text)
    ]
    assert counts and set(counts) == {2}
    assert "10 rows have no group label" in str(d)


def test_group_labels_missing_with_residual_arrays_and_all_missing():
    e = _ar1_resid(60)
    labels = np.array(["p"] * 25 + ["q"] * 25 + [None] * 10, dtype=object)
    d = diagnose(e, exog=np.ones((60, 1)), groups=labels)
    assert d.n == 50 and "10 rows have no group label and were left out." in d.notes
    with pytest.raises(ValueError, match="all 60 group labels are missing") as err:
        diagnose(e, groups=[None] * 60)
    assert "\n" not in str(err.value)
    with pytest.raises(ValueError, match="all 60 group labels are missing"):
        diagnose(e, groups=np.full(60, np.nan))


def test_a_single_group_label_is_said():
    d = diagnose(_ar1_resid(40), groups=["only"] * 40)
    assert d.groups is None
    assert any("same label ('only')" in n for n in d.notes)


@pytest.mark.parametrize("scale", [1e200, 1e-200])
def test_pooled_within_group_d_is_scale_free(scale):
    # d is a ratio of quadratic forms in the residuals: any positive factor leaves it unchanged
    rng = np.random.default_rng(5)
    X = sm.add_constant(rng.normal(size=80))
    e = _ar1_resid(80, 0.4, 5)
    g = np.repeat(["a", "b"], 40)
    base = diagnose(e, exog=X, groups=g).groups
    mixed = X * np.array([1.0, scale])  # a constant of 1 beside a regressor in other units
    for design in (X * scale, mixed):
        big = diagnose(e * scale, exog=design, groups=g).groups
        assert big.pooled_dw == pytest.approx(base.pooled_dw, rel=1e-12)
        assert big.pooled_pvalue == pytest.approx(base.pooled_pvalue, rel=1e-9)
        assert big.naive_dw == pytest.approx(base.naive_dw, rel=1e-12)


def test_library_warnings_become_notes_and_none_escapes():
    import warnings

    rng = np.random.default_rng(2)
    x = rng.normal(size=60)
    frame = pd.DataFrame({"y": rng.normal(size=60), "x": x, "x2": 2 * x})  # collinear predictors
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # any warning that escapes fails the test
        d = diagnose(frame, response="y", predictors=["x", "x2"])
        alternating = diagnose(np.tile([1.0, -1.0], 30))  # a singular PACF system
    assert any(n.startswith("The design has rank 2 < 3 columns") for n in d.notes)  # lagsight's own fit says so
    assert any("statsmodels warned: The design matrix is rank-deficient" in n for n in d.test_notes)
    assert any(n.startswith("Correlogram: statsmodels warned: Matrix is singular") for n in alternating.notes)


def test_assumed_k_prime_is_said_wherever_it_is_shown():
    from lagsight.render.text import key_figures, report_sentence

    d = diagnose(_ar1_resid(60, 0.0))
    assert dict(key_figures(d))["k'"] == "1 (assumed: no design given)"
    assert any("assume k' = 1" in n for n in d.notes)
    fit = smf.ols("y ~ x", data=_ar1_frame(80)).fit()
    assert dict(key_figures(diagnose(fit)))["k'"] == "1"
    assert "k' = 1)" in report_sentence(diagnose(fit), "text")
    assert "k' = 1 (assumed: no design given)" in report_sentence(d, "text", test="Durbin-Watson")


def test_test_notes_reach_the_text_view():
    rng = np.random.default_rng(2)
    x = rng.normal(size=60)
    frame = pd.DataFrame({"y": rng.normal(size=60), "x": x, "x2": 2 * x})
    d = diagnose(frame, response="y", predictors=["x", "x2"])
    assert "test note, Durbin-Watson: the design has rank 2 < 3 columns" in str(d)


def test_a_group_dummy_does_not_push_the_other_group_out_of_the_table():
    # the pooled model's group-level column is zero throughout group b and is dropped there; its name
    # must go with it (group b was skipped with "'names' must have one entry per column" before)
    from statsmodels.stats.stattools import durbin_watson as sm_dw

    rng = np.random.default_rng(4)
    n = 80
    frame = pd.DataFrame({"x": rng.normal(size=n), "g": np.repeat(["a", "b"], n // 2)})
    frame["a_level"] = (frame["g"] == "a").astype(float)
    frame["y"] = 1 + frame["x"] + 2 * frame["a_level"] + _ar1_resid(n, 0.5, 4)
    d = diagnose(frame, response="y", predictors=["x", "a_level"], groups="g")
    assert d.groups.skipped == {} and sorted(d.groups.table["group"]) == ["a", "b"]
    resid = smf.ols("y ~ x + a_level", data=frame).fit().resid.to_numpy()
    row = d.groups.table.set_index("group").loc["b"]
    assert row["dw"] == pytest.approx(sm_dw(resid[n // 2 :]), rel=1e-10)  # statsmodels' d on group b
