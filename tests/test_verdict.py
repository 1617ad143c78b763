"""The verdict: one rule for the leading test and the finding, its error rate, the four findings, and
every view reading it."""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from scipy import stats
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.stattools import durbin_watson as sm_durbin_watson

import lagsight
from lagsight.battery_run import DALT, DH, DW, LB, SEASONAL
from lagsight.cli import main
from lagsight.render import text as T
from lagsight.render.html import build_view, diagnosis_html
from lagsight.verdict import FINDINGS, holm

sys.path.insert(0, str(Path(__file__).parent))
from verdict_designs import DESIGNS, ar1_errors, simulate  # noqa: E402

ALPHA = 0.05


def _design(name_start):
    return next(d for d in DESIGNS if d.name.startswith(name_start))


# ----------------------------------------------------------------------------- size and power
@pytest.mark.parametrize(
    "start,seed", [("tiny shop", 11), ("ferry tickets", 12), ("pressure log", 13), ("warehouse stock", 14)]
)
def test_white_noise_evidence_rate_is_at_most_alpha(start, seed):
    # a seeded version of benchmarks/bench_verdict.py: on white-noise errors the verdict says
    # "evidence" at most alpha of the time (fails beyond 3 Monte Carlo standard errors at alpha)
    reps = 200
    r = simulate(_design(start), 0.0, reps, seed, alpha=ALPHA)
    assert r.verdict <= ALPHA + 3 * math.sqrt(ALPHA * (1 - ALPHA) / reps), (start, r)


@pytest.mark.parametrize("start", ["tiny shop", "warehouse stock"])
def test_one_leading_test_is_the_verdict(start):
    # with one leading test the verdict finds correlation exactly when that test rejects at alpha,
    # so its power against AR(1) errors equals the leading test's
    r = simulate(_design(start), 0.4, 60, 21, alpha=ALPHA)
    assert r.verdict == r.leading and r.rule == f"leading test {r.leading_name} at α = 0.05"


def test_holm_matches_statsmodels():
    # reference: statsmodels.stats.multitest.multipletests(method='holm')
    rng = np.random.default_rng(5)
    for m in (1, 2, 3, 6):
        for _ in range(3):  # few calls: each one runs a full garbage collection
            p = rng.uniform(size=m) ** 3
            np.testing.assert_allclose(holm(p), multipletests(p, method="holm")[1], rtol=1e-12)


def test_seasonal_family_follows_holm_and_its_advice_needs_the_adjusted_p():
    # Weighted Holm (Holm 1979) for two hypotheses with weights 0.8 (DW) and 0.2 (order s):
    # something is rejected iff p_DW < 0.8 alpha or p_s < 0.2 alpha; the hypothesis taken second
    # is then tested at the full alpha.  Monthly index -> order-12 test in the family.
    design = _design("heat pump")
    rng = np.random.default_rng(31)
    advised = 0
    w_dw, w_s = 0.8, 0.2
    for rho in (0.0, 0.3, 0.5):
        for _ in range(15):
            d = lagsight.diagnose(**design.draw(rho, rng), remedies=False)
            v = d.verdict
            assert v.family == (DW, SEASONAL)
            assert v.rule == "Durbin-Watson and the order-12 test, weighted Holm (0.8 : 0.2) at α = 0.05"
            p_dw, p_s = d.tests[DW].pvalue, d.tests[SEASONAL].pvalue
            assert (v.finding == "evidence") == (p_dw < w_dw * ALPHA or p_s < w_s * ALPHA)
            if p_s / w_s <= p_dw / w_dw:
                adj_s = min(1.0, p_s / w_s)
            else:
                adj_s = max(min(1.0, p_dw / w_dw), p_s)
            assert v.adjusted_pvalue(SEASONAL) == pytest.approx(adj_s, rel=1e-12)
            says = any("seasonal terms" in s for s in v.next_steps)
            assert says == (v.finding == "evidence" and adj_s < ALPHA)
            advised += says
    assert advised < 45


def test_weighted_holm_with_equal_weights_is_holm():
    # the weighted step-down with equal weights is Holm's procedure (reference: statsmodels)
    p = [0.03, 0.001, 0.2]
    np.testing.assert_allclose(holm(p, [1, 1, 1]), multipletests(p, method="holm")[1], rtol=1e-12)
    # weights 0.8 / 0.2 on two, by hand: p / w = 0.0375 and 0.05, so DW goes first with adjusted
    # 0.03 * 1.0 / 0.8 = 0.0375; the order-s test then carries all the weight: max(0.0375, 0.01)
    assert holm([0.03, 0.01], [0.8, 0.2]) == pytest.approx([0.0375, 0.0375])
    # p / w = 0.0125 for the seasonal one (first), then DW at full alpha: max(0.0125, 0.03)
    assert holm([0.03, 0.0025], [0.8, 0.2]) == pytest.approx([0.03, 0.0125])


def test_seasonal_test_runs_only_when_the_period_is_known():
    rng = np.random.default_rng(2)
    design = _design("heat pump")
    kw = design.draw(0.0, rng)
    plain = dict(kw, model=kw["model"].reset_index(drop=True))  # same residuals, no frequency
    assert SEASONAL in lagsight.diagnose(**kw, remedies=False).tests
    d = lagsight.diagnose(**plain, remedies=False)
    assert SEASONAL not in d.tests and SEASONAL not in d.errors
    assert d.verdict.family == (DW,) and d.verdict.rule == "leading test Durbin-Watson at α = 0.05"
    given = lagsight.diagnose(**plain, period=12, remedies=False)
    assert given.verdict.family == (DW, SEASONAL)


# ----------------------------------------------------------------------------- the leading test by kind
def _phillips_style_fit():
    # statsmodels' bundled macrodata (US quarterly, 1959Q1-2009Q3): inflation on its own lag and
    # unemployment, a regression with the lagged response as a regressor
    m = sm.datasets.macrodata.load_pandas().data
    frame = pd.DataFrame(
        {"infl": m["infl"].to_numpy()[1:], "infl_lag": m["infl"].to_numpy()[:-1], "unemp": m["unemp"].to_numpy()[1:]},
        index=pd.period_range("1959Q2", periods=len(m) - 1, freq="Q"),
    )
    return smf.ols("infl ~ infl_lag + unemp", data=frame).fit()


def test_lagged_response_is_led_by_durbins_alternative_test():
    fit = _phillips_style_fit()
    d = lagsight.diagnose(fit)
    v = d.verdict
    assert d.lagged_response == "infl_lag"
    assert v.leading == DALT and v.family == (DALT,) and T.primary_test(d) == DALT
    # reference: the regression form done with statsmodels OLS: e_t on the regressors and e_{t-1}
    e = fit.resid.to_numpy()
    X = fit.model.exog
    aux = sm.OLS(e[1:], np.column_stack([X[1:], e[:-1]])).fit()
    t = aux.tvalues[-1]
    assert d.tests[DALT].statistic == pytest.approx(t, rel=1e-9)
    assert d.tests[DALT].pvalue == pytest.approx(stats.t.sf(t, aux.df_resid), rel=1e-9)  # positive
    assert v.finding == ("evidence" if stats.t.sf(t, aux.df_resid) < ALPHA else "no evidence")
    # h shown beside it, saying which ρ̂ it used (1 − d/2, d from statsmodels)
    rho = 1 - sm_durbin_watson(e) / 2
    assert d.tests[DH].rho == pytest.approx(rho, rel=1e-12)
    assert any("ρ̂ = 1 − d/2 = " + T.format_statistic(rho) in line for line in v.details)
    assert "Durbin's h" not in v.headline
    two = d.reassess(alternative="two-sided")
    assert two.tests[DALT].pvalue == pytest.approx(2 * stats.t.sf(abs(t), aux.df_resid), rel=1e-9)


def test_arima_residuals_are_led_by_ljung_box_with_the_model_df():
    rng = np.random.default_rng(8)
    y = pd.Series(ar1_errors(150, 0.6, rng), index=pd.RangeIndex(150))
    from statsmodels.tsa.arima.model import ARIMA

    fit = ARIMA(y, order=(1, 0, 0)).fit()
    d = lagsight.diagnose(fit)
    lb = d.tests[LB]
    assert d.verdict.leading == LB and DW in d.errors
    assert lb.df[0] == max(lb.lags) - lb.model_df and lb.model_df >= 1
    assert d.verdict.finding == ("evidence" if lb.pvalue < ALPHA else "no evidence")


def test_residuals_without_a_design_are_led_by_ljung_box():
    rng = np.random.default_rng(3)
    d = lagsight.diagnose(pd.Series(ar1_errors(200, 0.5, rng)))
    assert d.verdict.leading == LB and d.verdict.finding == "evidence"
    assert d.verdict.pvalue == d.tests[LB].pvalue


# ----------------------------------------------------------------------------- four findings
def _frame(y, x):
    return pd.DataFrame({"x": x, "y": y})


_X = np.random.default_rng(6).normal(size=30)
_DEGENERATE = {
    "perfect fit": dict(model=_frame(1 + 2 * _X, _X), response="y", predictors=["x"]),
    "constant response": dict(model=_frame(np.full(30, 4.0), _X), response="y", predictors=["x"]),
    "constant residuals": dict(model=np.full(30, 0.25), exog=_X[:, None]),
    "n = k + 1": dict(model=_frame([1.0, 0.4, 2.2], _X[:3]), response="y", predictors=["x"]),
}


@pytest.mark.parametrize("case", list(_DEGENERATE))
def test_degenerate_input_cannot_be_judged(case):
    d = lagsight.diagnose(**_DEGENERATE[case])
    v = d.verdict
    assert v.finding == "cannot judge" and v.strength == "unknown" and v.finding in FINDINGS
    assert v.headline.startswith("Cannot judge: ") and v.reason in v.headline and v.next_steps
    assert "evidence" not in v.headline
    assert T.report_sentence(d).startswith("No serial-correlation finding can be reported")
    assert ("finding", "cannot judge") in T.key_figures(d)
    assert "Cannot judge" in diagnosis_html(d, figures="none") and str(d)
    assert d.remedies is None


@pytest.mark.parametrize(
    "case,rows",
    [
        ("perfect fit", lambda x: {"x": x, "y": 1 + 2 * x}),
        ("constant response", lambda x: {"x": x, "y": np.full(x.size, 4.0)}),
        ("n = k + 1", lambda x: {"x": x[:3], "y": [1.0, 0.4, 2.2]}),
    ],
)
def test_cli_exits_three_without_a_traceback(tmp_path, case, rows):
    path = tmp_path / "d.csv"
    pd.DataFrame(rows(_X)).to_csv(path, index=False)
    exe = Path(sys.executable).parent / "lagsight"  # installed by pyproject.toml [project.scripts]
    proc = subprocess.run(
        [str(exe), "report", str(path), "--y", "y", "--x", "x", "-o", str(tmp_path / "r.html")],
        capture_output=True,
        text=True,
    )
    assert proc.returncode == 3, proc.stderr
    assert "Traceback" not in proc.stderr and proc.stdout.startswith("Cannot judge: ")


def _scaled_inputs(scale):
    rng = np.random.default_rng(17)
    n = 60
    X = np.column_stack([np.ones(n), rng.normal(size=n), np.arange(n) / n])
    y = X @ [1.0, 0.5, 2.0] + ar1_errors(n, 0.3, rng)
    e = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
    idx = pd.date_range("2020-01-01", periods=n, freq="MS")
    return {
        "with design": dict(model=pd.Series(e * scale, index=idx), exog=X * scale),
        "residuals only": dict(model=pd.Series(e * scale, index=idx)),
    }


@pytest.mark.parametrize("scale", [1e200, 1e-200])
def test_scaled_data_gets_the_same_answer(scale):
    # every statistic here is scale-free (residuals and design columns multiplied by one factor)
    for kind, base in _scaled_inputs(1.0).items():
        ref = lagsight.diagnose(**base, remedies=False)
        got = lagsight.diagnose(**_scaled_inputs(scale)[kind], remedies=False)
        assert got.verdict.finding == ref.verdict.finding and got.verdict.headline == ref.verdict.headline
        assert set(got.tests) == set(ref.tests) and set(got.errors) == set(ref.errors), kind
        for name, res in ref.tests.items():
            np.testing.assert_allclose(got.tests[name].statistic, res.statistic, rtol=1e-9, err_msg=name)
            np.testing.assert_allclose(got.tests[name].pvalue, res.pvalue, rtol=1e-7, err_msg=name)


@pytest.mark.filterwarnings("ignore:The design matrix is rank-deficient")  # the `fitted` object, not the residuals
def test_scaled_lagged_response_gets_the_same_answer():
    fit = _phillips_style_fit()
    base = pd.DataFrame({"infl": fit.model.endog, "infl_lag": fit.model.exog[:, 1], "unemp": fit.model.exog[:, 2]})
    ref = lagsight.diagnose(base, response="infl", predictors=["infl_lag", "unemp"], remedies=False)
    for scale in (1e200, 1e-200):
        frame = base.assign(infl=base["infl"] * scale, infl_lag=base["infl_lag"] * scale)
        got = lagsight.diagnose(frame, response="infl", predictors=["infl_lag", "unemp"], remedies=False)
        assert got.verdict.leading == DALT and got.verdict.finding == ref.verdict.finding
        for name in (DALT, DH):
            np.testing.assert_allclose(got.tests[name].pvalue, ref.tests[name].pvalue, rtol=1e-7, err_msg=name)


# ----------------------------------------------------------------------------- every view reads the verdict
def _ar1_fit(n=120, rho=0.6, seed=4, index=None):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=n)
    frame = pd.DataFrame({"x": x, "y": 1 + 2 * x + ar1_errors(n, rho, rng)}, index=index)
    return smf.ols("y ~ x", data=frame).fit()


def test_headline_follows_the_alternative():
    d = lagsight.diagnose(_ar1_fit())
    assert d.verdict.finding == "evidence" and d.verdict.leading == DW
    neg = d.reassess(alternative="negative")
    again = lagsight.diagnose(_ar1_fit(), alternative="negative")
    for view in (neg, again):
        v, p = view.verdict, view.tests[DW].pvalue
        assert p > 0.5 and v.finding == "no evidence" and v.pvalue == p
        assert v.headline.startswith("No evidence of negative lag-1 autocorrelation at α = 0.05 ")
        row = next(r for r in T.test_rows(view) if r[0] == DW)
        assert row[4] == "no evidence (leading test)"
        figures = dict(T.key_figures(view))
        assert figures["p-value"] == T.format_pvalue(p) and figures["finding"] == "no evidence"
        assert f"{T.format_pvalue(p)} against negative autocorrelation" in T.report_sentence(view, "text")
    assert neg.verdict.headline == again.verdict.headline
    from lagsight.render.scale import scale_figure

    fig = scale_figure(neg)
    words = " ".join(t.get_text() for ax in fig.axes for t in ax.texts)
    subtitle = " ".join(t.get_text() for t in fig.texts)
    assert "against negative correlation" in subtitle and "no evidence at \u03b1 = 0.05" in words


def test_headline_follows_alpha():
    d = lagsight.diagnose(_ar1_fit(rho=0.2, seed=9))
    p = d.tests[DW].pvalue
    assert 1e-4 < p < 0.2  # this draw sits where the level matters
    for alpha in (p / 2, min(0.5, 2 * p)):
        moved = d.reassess(alpha=alpha)
        assert moved.verdict.finding == ("evidence" if p < alpha else "no evidence")
        assert dict(T.key_figures(moved))["α"] == f"{alpha:g}"
        assert moved.verdict.headline == lagsight.diagnose(_ar1_fit(rho=0.2, seed=9), alpha=alpha).verdict.headline


def test_rows_out_of_time_order_are_not_meaningful_everywhere():
    idx = pd.date_range("2021-01-01", periods=150, freq="D")
    fit = _ar1_fit(n=150, rho=0.7, index=idx)
    shuffled = fit.model.data.frame.sample(frac=1.0, random_state=2)
    d = lagsight.diagnose(smf.ols("y ~ x", data=shuffled).fit(), remedies=True)
    v = d.verdict
    assert d.shuffled and v.finding == "not meaningful" and "p =" not in v.headline
    assert v.headline.startswith("Not meaningful: the rows are not in time order")
    sentence = T.report_sentence(d, "text")
    assert sentence.startswith("No serial-correlation result can be reported") and "p-value" not in sentence
    assert dict(T.key_figures(d))["p-value"] == "not meaningful (rows not in time order)"
    for row in T.test_rows(d):
        if row[0] in d.tests:
            assert row[2] == "not meaningful" and row[4].startswith("not meaningful"), row
    assert set(d.to_frame().dropna(subset=["pvalue"])["reading"]) == {"not meaningful: rows not in time order"}
    view = build_view(d, figures="svg")
    for fig in view.figures:
        assert fig.caption.startswith("Not meaningful: the rows are not in time order"), fig.key
    assert view.remedies is not None and view.remedies.caption.startswith("Not meaningful")
    from lagsight.display import remedies_html

    assert "not meaningful" in remedies_html(lagsight.diagnose(smf.ols("y ~ x", data=shuffled).fit()))
    from lagsight.render.scale import scale_figure

    words = " ".join(t.get_text() for ax in scale_figure(d).axes for t in ax.texts)
    assert "not meaningful" in words and "exact p" not in words


def test_cli_checks_the_order_of_a_date_column(tmp_path, capsys):
    from lagsight.scenarios import water_demand

    frame = water_demand(200).reset_index()
    in_order, shuffled = tmp_path / "in_order.csv", tmp_path / "shuffled.csv"
    frame.to_csv(in_order, index=False)
    frame.sample(frac=1.0, random_state=5).to_csv(shuffled, index=False)
    args = ["--y", "demand_ml", "--x", "temp_c,rain_mm,weekend", "-o", str(tmp_path / "r.html"), "--overwrite"]
    assert main(["report", str(shuffled), *args]) == 3
    out = capsys.readouterr().out
    assert out.startswith("Not meaningful") and "checked on the date column 'date'" in out
    assert main(["report", str(in_order), *args]) == 1
    assert "checked on the date column 'date'" in capsys.readouterr().out
    assert main(["report", str(shuffled), *args, "--time", "date"]) == 1  # sorted by it
    assert "rows sorted by --time 'date'" in capsys.readouterr().out


def test_report_help_documents_the_exit_status():
    proc = subprocess.run(
        [str(Path(sys.executable).parent / "lagsight"), "report", "--help"], capture_output=True, text=True
    )
    assert proc.returncode == 0
    for line in ("0  no evidence", "1  evidence", "2  usage or input error", "3  cannot judge"):
        assert line in proc.stdout


# ----------------------------------------------------------------------------- seasonal advice
def _monthly_errors_fit(rng, errors):
    n = 96
    idx = pd.date_range("2016-01-01", periods=n, freq="MS")
    X = np.column_stack([np.ones(n), np.cos(2 * np.pi * np.arange(n) / 12 + 0.4)])
    y = X @ [1.0, 0.5] + errors(n, rng)
    e = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
    return {"model": pd.Series(e, index=idx), "exog": X}


def _seasonal_ar(n, rng, phi=0.5, s=12, burn=60):
    u = np.zeros(n + burn)
    eps = rng.normal(size=n + burn)
    for t in range(s, n + burn):
        u[t] = phi * u[t - s] + eps[t]
    return u[burn:]


def test_seasonal_advice_is_not_set_off_by_lag1_correlation():
    # AR(1) errors with rho = 0.8 have no partial correlation at lag 12 (an AR(1) property), yet
    # the order-12 Durbin-Watson statistic (which assumes independent errors) rejects far more
    # than alpha there; the advice also needs the lag-12 coefficient given lag 1, so it appears
    # at most alpha of the time (within 3 Monte Carlo standard errors)
    rng = np.random.default_rng(77)
    reps, advised, raw = 150, 0, 0
    for _ in range(reps):
        d = lagsight.diagnose(**_monthly_errors_fit(rng, lambda n, r: ar1_errors(n, 0.8, r)), remedies=False)
        advised += any("seasonal terms" in s for s in d.verdict.next_steps)
        raw += d.tests[SEASONAL].pvalue < ALPHA
    se = math.sqrt(ALPHA * (1 - ALPHA) / reps)
    assert advised / reps <= ALPHA + 3 * se
    assert raw > advised  # the order-12 test alone would have advised more often


def test_seasonal_advice_finds_seasonal_errors():
    # errors u_t = 0.5 u_{t-12} + e_t: the advice should appear in most draws
    rng = np.random.default_rng(78)
    reps = 40
    advised = sum(
        any(
            "seasonal terms" in s
            for s in lagsight.diagnose(**_monthly_errors_fit(rng, _seasonal_ar), remedies=False).verdict.next_steps
        )
        for _ in range(reps)
    )
    assert advised / reps >= 0.8
