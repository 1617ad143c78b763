"""screen(): many models at once.

References named beside each check: statsmodels (durbin_watson, acorr_breusch_godfrey,
acorr_ljungbox, multipletests and its shipped Grunfeld dataset), the definition of the
Benjamini-Hochberg adjustment (Benjamini & Hochberg 1995), and, for the exact
Durbin-Watson p-values, lagsight.durbin_watson on each model alone (the engine itself
is checked against outside references in test_durbin_watson.py; here the screen must
agree with it).  The series below are invented for behaviour tests.
"""

from __future__ import annotations

import concurrent.futures as cf
import importlib

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.stats.diagnostic import acorr_breusch_godfrey, acorr_ljungbox
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.stattools import durbin_watson as sm_durbin_watson

import lagsight
from lagsight.battery_run import strength
from lagsight.screening import ScreenResult, screen

# the package exports the function screen, which hides the module of the same name as an attribute
screen_module = importlib.import_module("lagsight.screening")


def _ar1(n, rho, rng):
    eps = rng.normal(size=n)
    u = np.empty(n)
    u[0] = eps[0]
    for t in range(1, n):
        u[t] = rho * u[t - 1] + eps[t]
    return u


def _fits(count, n=120, seed=0, every=4, rho=0.6):
    """Invented per-store regressions on a constant and two regressors; every `every`-th has AR(1) errors."""
    rng = np.random.default_rng(seed)
    fits = {}
    for i in range(count):
        X = sm.add_constant(rng.normal(size=(n, 2)))
        u = _ar1(n, rho if i % every == 0 else 0.0, rng)
        fits[f"store {i:02d}"] = sm.OLS(X @ np.array([1.0, 0.5, -0.3]) + u, X).fit()
    return fits


def _bg_pvalue(fit, nlags):
    # reference library: statsmodels.stats.diagnostic.acorr_breusch_godfrey (LM form)
    return acorr_breusch_godfrey(fit, nlags=nlags, result_object=True).lmpval


def _bh_by_definition(p):
    # Benjamini & Hochberg (1995): q_(i) = min_{j >= i} m p_(j) / j, capped at 1
    m = p.size
    order = np.argsort(p)
    scaled = p[order] * m / np.arange(1, m + 1)
    q = np.minimum(np.minimum.accumulate(scaled[::-1])[::-1], 1.0)
    out = np.empty(m)
    out[order] = q
    return out


def test_screen_agrees_with_reference_libraries_and_the_per_model_engine():
    fits = _fits(24)
    res = screen(fits, progress=False)
    assert isinstance(res, ScreenResult) and res.failed == {}
    t = res.table.set_index("model")
    assert sorted(t.index) == sorted(fits)
    for name, fit in fits.items():
        row = t.loc[name]
        assert (row["n"], row["rank"], row["status"]) == (120, 3, "ok")
        # statistic: statsmodels.stats.stattools.durbin_watson
        assert row["dw"] == pytest.approx(sm_durbin_watson(fit.resid), rel=1e-12)
        # exact p-value and its method: the same model tested alone with lagsight.durbin_watson
        alone = lagsight.durbin_watson(fit.resid, fit.model.exog)
        assert row["dw_pvalue"] == pytest.approx(alone.pvalue, rel=1e-10, abs=1e-300)
        assert row["dw_method"] == alone.method
        # statsmodels acorr_breusch_godfrey / acorr_ljungbox at lag min(10, n // 5) = 10 (common practice)
        assert row["bg_pvalue"] == pytest.approx(_bg_pvalue(fit, 10), rel=1e-9)
        lb = acorr_ljungbox(fit.resid, lags=[10], return_df=True)
        assert row["lb_pvalue"] == pytest.approx(float(lb["lb_pvalue"].iloc[0]), rel=1e-9)
    p = t.loc[list(fits), "dw_pvalue"].to_numpy(float)
    adjusted = t.loc[list(fits), "dw_p_adjusted"].to_numpy(float)
    # Benjamini-Hochberg: statsmodels multipletests(method='fdr_bh') and the definition
    np.testing.assert_allclose(adjusted, multipletests(p, method="fdr_bh")[1], rtol=1e-12)
    np.testing.assert_allclose(adjusted, _bh_by_definition(p), rtol=1e-12)
    # sorted by strength of evidence; strength words read from the adjusted p
    assert res.table["dw_p_adjusted"].is_monotonic_increasing
    assert list(res.table["strength"]) == [strength(q, 0.05) for q in res.table["dw_p_adjusted"]]
    # the six AR(1) stores (rho 0.6, n 120) carry strong evidence and lead the table
    ar = {f"store {i:02d}" for i in range(0, 24, 4)}
    assert set(res.table["model"][:6]) == ar
    assert ar <= set(res.flagged)
    assert all(t.loc[name, "finding"].startswith("Strong evidence") for name in ar)


def test_grunfeld_one_ols_per_firm_matches_statsmodels():
    # statsmodels' Grunfeld investment data: 11 firms x 20 years; invest on value and capital per firm
    data = sm.datasets.grunfeld.load_pandas().data
    shuffled = data.sample(frac=1.0, random_state=3)  # rows of firms interleaved and out of year order
    res = screen(
        shuffled, response="invest", predictors=["value", "capital"], groups="firm", order="year", progress=False
    )
    t = res.table.set_index("model")
    assert sorted(t.index) == sorted(data["firm"].unique()) and res.failed == {}
    for firm, part in data.groupby("firm"):
        part = part.sort_values("year")
        fit = sm.OLS(part["invest"], sm.add_constant(part[["value", "capital"]])).fit()
        row = t.loc[firm]
        assert (row["n"], row["rank"]) == (20, 3)
        assert row["order"] == "sorted by column year"
        assert row["dw"] == pytest.approx(sm_durbin_watson(fit.resid), rel=1e-9)
        # order min(10, 20 // 5) = 4 (common practice)
        assert row["bg_pvalue"] == pytest.approx(_bg_pvalue(fit, 4), rel=1e-8)
        alone = lagsight.durbin_watson(fit.resid.to_numpy(), fit.model.exog)
        assert row["dw_pvalue"] == pytest.approx(alone.pvalue, rel=1e-8)


def test_rows_without_a_group_label_are_left_out_with_a_note():
    data = sm.datasets.grunfeld.load_pandas().data
    data.loc[data.index[5], "firm"] = None
    res = screen(data, response="invest", predictors=["value", "capital"], groups="firm", progress=False)
    assert "1 row has no group label and was left out." in res.notes
    assert sorted(res.table["n"]) == [19] + [20] * 10


def test_residual_columns_shared_design_and_models_without_design():
    rng = np.random.default_rng(5)
    n = 150
    X = sm.add_constant(rng.normal(size=(n, 3)))
    cols = {}
    for j, rho in enumerate([0.0, 0.5, 0.0, -0.4]):
        y = X @ rng.normal(size=4) + _ar1(n, rho, rng)
        cols[f"sensor {j}"] = y - X @ np.linalg.lstsq(X, y, rcond=None)[0]
    frame = pd.DataFrame(cols)
    res = screen(frame, exog=X, progress=False)
    t = res.table.set_index("model")
    for name in cols:
        alone = lagsight.durbin_watson(frame[name].to_numpy(), X)
        assert t.loc[name, "dw_pvalue"] == pytest.approx(alone.pvalue, rel=1e-10, abs=1e-300)
        assert t.loc[name, "rank"] == 4
    assert res.table["model"].iloc[0] == "sensor 1"  # the positively correlated one leads

    # a residual series without its design has bounds only: out of the adjustment, sorted after the rest
    mixed = screen(
        {"with design": {"model": cols["sensor 0"], "exog": X}, "no design": cols["sensor 1"]}, progress=False
    )
    last = mixed.table.iloc[-1]
    assert last["model"] == "no design" and last["dw_method"] == "bounds only"
    assert np.isnan(last["dw_pvalue"]) and np.isnan(last["dw_p_adjusted"]) and last["status"] == "ok"
    assert last["dw"] == pytest.approx(sm_durbin_watson(cols["sensor 1"]), rel=1e-12)
    # with one p-value in the family the BH adjustment is the identity (multipletests agrees)
    first = mixed.table.iloc[0]
    assert first["dw_p_adjusted"] == pytest.approx(multipletests([first["dw_pvalue"]], method="fdr_bh")[1][0])
    assert any("no exact Durbin-Watson p-value" in note for note in mixed.notes)


def test_a_scikit_learn_entry_and_a_dataframe_entry():
    from sklearn.linear_model import LinearRegression

    rng = np.random.default_rng(8)
    X = rng.normal(size=(90, 2))
    y = 2 + X @ np.array([1.0, -1.0]) + _ar1(90, 0.3, rng)
    est = LinearRegression().fit(X, y)
    frame = pd.DataFrame({"load": y, "t1": X[:, 0], "t2": X[:, 1]})
    res = screen(
        {"sk": {"model": est, "exog": X, "endog": y}, "frame": frame},
        response="load",
        predictors=["t1", "t2"],
        progress=False,
    )
    t = res.table.set_index("model")
    design = sm.add_constant(X)
    alone = lagsight.durbin_watson(y - est.predict(X), design)
    # scikit-learn's least-squares fit and lagsight's own OLS of the frame give the same residuals
    for name in ("sk", "frame"):
        assert t.loc[name, "dw_pvalue"] == pytest.approx(alone.pvalue, rel=1e-7)
        assert t.loc[name, "dw"] == pytest.approx(sm_durbin_watson(y - est.predict(X)), rel=1e-9)


def test_failures_are_listed_with_their_reason_and_the_rest_finishes(monkeypatch):
    fits = _fits(4, n=60, seed=2)
    rng = np.random.default_rng(0)
    models = dict(fits)
    models["text"] = "not a model"
    models["two rows"] = np.array([0.1, -0.2])
    models["misaligned"] = {"model": rng.normal(size=50), "exog": np.ones((40, 1))}
    models["no model key"] = {"X": np.ones((5, 1))}
    models["breaks in the worker"] = rng.normal(size=77)

    real = screen_module.run_battery

    def flaky(data, settings):
        if data.n == 77:
            raise RuntimeError("simulated crash inside the battery")
        return real(data, settings)

    monkeypatch.setattr(screen_module, "run_battery", flaky)
    res = screen(models, progress=False, chunksize=3)
    assert set(res.failed) == {"text", "two rows", "misaligned", "no model key", "breaks in the worker"}
    assert "'model'" in res.failed["text"]
    assert "at least 3" in res.failed["two rows"]
    assert "'exog'" in res.failed["misaligned"]
    assert "'model' key" in res.failed["no model key"]
    assert res.failed["breaks in the worker"] == "RuntimeError: simulated crash inside the battery"
    table = res.table
    assert list(table["status"][:4]) == ["ok"] * 4 and table["dw_pvalue"][:4].notna().all()
    tail = table.iloc[4:]
    assert set(tail["model"]) == set(res.failed)
    assert all(s == f"failed: {res.failed[m]}" for m, s in zip(tail["model"], tail["status"]))
    assert any("could not be screened" in note for note in res.notes)


class _LosesFirstTask(cf.Executor):
    """Runs tasks inline, except that the first task is lost as when a worker process dies."""

    def __init__(self):
        self.calls = 0

    def submit(self, fn, *args, **kwargs):
        self.calls += 1
        fut = cf.Future()
        if self.calls == 1:
            fut.set_exception(OSError("worker lost"))
        else:
            fut.set_result(fn(*args, **kwargs))
        return fut


def test_a_lost_chunk_fails_only_its_models():
    fits = _fits(6, n=60, seed=4)
    res = screen(fits, executor=_LosesFirstTask(), chunksize=2, progress=False)
    assert res.failed == {name: "worker error: OSError: worker lost" for name in list(fits)[:2]}
    assert (res.table["status"] == "ok").sum() == 4


def test_a_pool_that_refuses_work_fails_every_model_with_the_reason():
    pool = cf.ProcessPoolExecutor(max_workers=1)
    pool.shutdown()
    res = screen(_fits(3, n=40, seed=1), executor=pool, progress=False)
    assert len(res.failed) == 3 and (res.table["status"] != "ok").all()
    assert all(r.startswith("worker error: RuntimeError: cannot schedule new futures") for r in res.failed.values())


def test_process_pool_gives_the_serial_results():
    models = dict(_fits(10, n=80, seed=6))
    models["text"] = "not a model"
    models["residuals"] = np.random.default_rng(1).normal(size=70)
    serial = screen(models, progress=False)
    with cf.ProcessPoolExecutor(max_workers=2) as pool:
        parallel = screen(models, executor=pool, chunksize=3, progress=False)
    pd.testing.assert_frame_equal(parallel.table, serial.table, check_exact=True)
    assert parallel.failed == serial.failed


def test_dask_local_cluster_executor_gives_the_serial_results():
    distributed = pytest.importorskip("distributed")
    models = dict(_fits(8, n=80, seed=7))
    models["text"] = "not a model"
    serial = screen(models, progress=False)
    cluster = client = None
    try:
        cluster = distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None
        )
        client = distributed.Client(cluster)
        on_cluster = screen(models, executor=client.get_executor(), chunksize=2, progress=False)
    finally:
        if client is not None:
            client.close()
        if cluster is not None:
            cluster.close()
    pd.testing.assert_frame_equal(on_cluster.table, serial.table, check_exact=True)
    assert on_cluster.failed == serial.failed


def test_rows_out_of_time_order_are_flagged_and_sorted_on_request():
    rng = np.random.default_rng(11)
    n = 140
    idx = pd.date_range("2024-01-01", periods=n, freq="D")
    X = pd.DataFrame(sm.add_constant(rng.normal(size=(n, 1))), index=idx, columns=["const", "x"])
    y = pd.Series(X @ np.array([1.0, 2.0]) + _ar1(n, 0.7, rng), index=idx)
    perm = rng.permutation(n)
    fit = sm.OLS(y.iloc[perm], X.iloc[perm]).fit()  # a random split: rows not in time order

    as_given = screen({"split": fit}, progress=False)
    assert as_given.table.loc[0, "finding"].startswith("Not meaningful: the rows are not in time order")
    assert any("not in time order" in note for note in as_given.notes)

    res = screen({"split": fit}, order="index", progress=False)
    row = res.table.iloc[0]
    in_time = sm.OLS(y, X).fit()  # OLS residuals do not depend on row order
    assert row["order"] == "sorted by the index"
    assert row["dw"] == pytest.approx(sm_durbin_watson(in_time.resid), rel=1e-9)
    # daily stamps: Breusch-Godfrey at the weekly period 7, Ljung-Box at 2 periods (common practice)
    assert row["bg_pvalue"] == pytest.approx(_bg_pvalue(in_time, 7), rel=1e-8)
    lb = acorr_ljungbox(in_time.resid, lags=[14], return_df=True)
    assert row["lb_pvalue"] == pytest.approx(float(lb["lb_pvalue"].iloc[0]), rel=1e-8)
    assert row["strength"] == "strong"


def test_progress_bar_and_views(capsys):
    assert lagsight.screen is screen and lagsight.ScreenResult is ScreenResult  # public names
    res = screen(_fits(5, n=50, seed=9), progress=True)
    err = capsys.readouterr().err
    assert "5/5" in err and "model" in err
    text = str(res)
    assert text.startswith("lagsight screen: 5 models, 5 screened, 0 failed")
    assert "Benjamini-Hochberg" in text and "store 00" in text
    frame = res.to_frame()
    frame.loc[0, "dw"] = -1.0
    assert res.table.loc[0, "dw"] != -1.0
    assert "<table" in res._repr_html_()
    quiet = screen(_fits(3, n=50, seed=9), progress=False)
    assert quiet is not None and capsys.readouterr().err == ""


@pytest.mark.parametrize(
    "kwargs, error, message",
    [
        ({"models": {"a": np.arange(10.0)}, "alpha": 1.5}, ValueError, "'alpha' must be in (0, 1) (got 1.5)"),
        ({"models": {"a": np.arange(10.0)}, "alternative": "up"}, ValueError, "'alternative' must be one of"),
        ({"models": [np.arange(10.0)]}, TypeError, "'models' must be a mapping"),
        ({"models": {}}, ValueError, "'models' must hold at least one model (got 0)"),
        (
            {"models": {"a": np.arange(10.0)}, "executor": "pool"},
            TypeError,
            "'executor' must be a concurrent.futures.Executor (got str)",
        ),
        ({"models": {"a": np.arange(10.0)}, "chunksize": 0}, ValueError, "'chunksize' must be an integer ≥ 1 (got 0)"),
        ({"models": {"a": np.arange(10.0)}, "groups": "g"}, TypeError, "'groups' applies when 'models' is a DataFrame"),
        (
            {"models": pd.DataFrame({"y": [1.0, 2.0], "g": [1, 1]}), "groups": "g"},
            TypeError,
            "needs response= and predictors=",
        ),
        (
            {
                "models": pd.DataFrame({"y": [1.0, 2.0], "g": [1, 1]}),
                "groups": "g",
                "response": "y",
                "predictors": ["x"],
            },
            ValueError,
            "'predictors': column 'x' is not in the DataFrame",
        ),
        (
            {"models": pd.DataFrame({"y": [1.0, 2.0], "g": [1, 1]}), "groups": "h", "response": "y", "predictors": []},
            ValueError,
            "'groups': column 'h' is not in the DataFrame",
        ),
        (
            {"models": pd.DataFrame({"r": [1.0, 2.0, 0.5]}), "order": "time"},
            ValueError,
            "'order' must be 'auto', 'keep' or 'index' when each column is a residual series",
        ),
    ],
)
def test_bad_arguments_get_one_line_messages(kwargs, error, message):
    with pytest.raises(error) as info:
        screen(progress=False, **kwargs)
    assert message in str(info.value) and "\n" not in str(info.value)


def test_all_group_labels_missing_is_a_one_line_error():
    data = sm.datasets.grunfeld.load_pandas().data.assign(firm=None)
    with pytest.raises(ValueError, match="all 220 group labels are missing"):
        screen(data, response="invest", predictors=["value", "capital"], groups="firm", progress=False)


def test_library_warnings_become_notes_in_the_table():
    import warnings

    rng = np.random.default_rng(3)
    x = rng.normal(size=50)
    frame = pd.DataFrame({"y": rng.normal(size=50), "x": x, "x2": 2 * x})  # collinear
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        res = screen({"collinear": {"model": frame, "response": "y", "predictors": ["x", "x2"]}}, progress=False)
    assert "statsmodels warned: The design matrix is rank-deficient" in res.table.loc[0, "notes"]


def test_response_and_predictors_are_checked_as_in_diagnose():
    data = sm.datasets.grunfeld.load_pandas().data
    listed = screen(data, response=["invest"], predictors=["value"], groups="firm", progress=False)
    plain = screen(data, response="invest", predictors=["value"], groups="firm", progress=False)
    pd.testing.assert_frame_equal(listed.table, plain.table)
    with pytest.raises(ValueError, match="'response' must be one column name"):
        screen(data, response=["invest", "value"], predictors=["capital"], groups="firm", progress=False)
    twice = data[["invest", "value", "capital", "firm"]].set_axis(["invest", "value", "value", "firm"], axis=1)
    with pytest.raises(ValueError, match="2 columns named 'value'"):
        screen(twice, response="invest", predictors=["value"], groups="firm", progress=False)
