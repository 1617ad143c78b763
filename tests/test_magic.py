"""The %lagsight and %lagsight_bounds magics in a headless InteractiveShell.

Statistics shown by the magic are checked against statsmodels' own
``durbin_watson`` (a general-purpose reference library); options are checked by
what they change in the returned Diagnosis; every user mistake must come out as
one ``UsageError`` line with no traceback.
"""

from __future__ import annotations

import re
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from IPython.core.error import UsageError
from IPython.core.interactiveshell import InteractiveShell
from IPython.utils.capture import capture_output
from statsmodels.stats.stattools import durbin_watson as sm_durbin_watson

import lagsight
from lagsight.battery_run import BG, DW, SEASONAL
from lagsight.display import BoundsView, preferences
from lagsight.scenarios import water_demand

WIDGET_MIME = "application/vnd.jupyter.widget-view+json"


@pytest.fixture(scope="module")
def shell():
    ip = InteractiveShell.instance()
    ip.run_line_magic("load_ext", "lagsight.magic")
    frame = water_demand()
    fit = smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=frame).fit()
    shuffled = frame.reset_index().sample(frac=1.0, random_state=3)
    sfit = smf.ols("demand_ml ~ temp_c + rain_mm + weekend", data=shuffled).fit()
    rng = np.random.default_rng(7)
    stores = pd.DataFrame(
        {
            "store": np.repeat(["north", "south"], 80),
            "x": rng.normal(size=160),
        }
    )
    stores["y"] = 1 + 2 * stores["x"] + rng.normal(size=160)
    gfit = smf.ols("y ~ x", data=stores).fit()
    from sklearn.linear_model import LinearRegression

    X = frame[["temp_c", "rain_mm", "weekend"]]
    y = frame["demand_ml"]
    reg = LinearRegression().fit(X, y)
    ip.user_ns.update(
        frame=frame,
        fit=fit,
        shuffled=shuffled,
        sfit=sfit,
        stores=stores,
        gfit=gfit,
        reg=reg,
        X=X,
        y=y,
        resid=np.asarray(fit.resid),
        exog=fit.model.exog,
    )
    return ip


def run(ip, line):
    with capture_output() as cap:
        result = ip.run_cell(line, store_history=True)  # the ';' check reads the stored input
    return result, cap


# -- loading -------------------------------------------------------------------------
def test_nothing_is_registered_at_import():
    code = (
        "from IPython.core.interactiveshell import InteractiveShell\n"
        "ip = InteractiveShell.instance()\n"
        "import lagsight, lagsight.magic, lagsight.display, lagsight.panel\n"
        "assert 'lagsight' not in ip.magics_manager.magics['line'], 'registered at import'\n"
        "ip.run_line_magic('load_ext', 'lagsight')\n"
        "assert 'lagsight' in ip.magics_manager.magics['line']\n"
        "assert 'lagsight_bounds' in ip.magics_manager.magics['line']\n"
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr


def test_help_shows_options_and_examples(shell):
    _, cap = run(shell, "%lagsight?")
    text = cap.stdout
    for token in (
        "--max-lag",
        "--alpha",
        "--alternative",
        "--order",
        "--groups",
        "--period",
        "--X",
        "--y",
        "--static",
        "--quiet",
        "Examples",
        "%lagsight fit --alpha 0.01",
    ):
        assert token in text, token


# -- the diagnosis returned ----------------------------------------------------------
def test_returns_the_diagnosis_with_the_statsmodels_statistic(shell):
    d = shell.run_line_magic("lagsight", "fit")
    assert isinstance(d, lagsight.Diagnosis)
    # reference: statsmodels.stats.stattools.durbin_watson on the same residuals
    assert d.tests[DW].statistic == pytest.approx(sm_durbin_watson(shell.user_ns["fit"].resid), rel=1e-12)


def test_assignment_keeps_it_and_shows_nothing(shell):
    _, cap = run(shell, "d_assigned = %lagsight fit")
    assert isinstance(shell.user_ns["d_assigned"], lagsight.Diagnosis)
    assert cap.outputs == [] and cap.stdout == ""


def test_trailing_semicolon_silences(shell):
    result, cap = run(shell, "%lagsight fit;")
    assert result.error_in_exec is None
    # a terminal shell still prints its 'Out[n]:' prompt; a kernel sends nothing when no data is left
    assert cap.outputs == [] and re.sub(r"Out\[\d+\]:\s*", "", cap.stdout) == ""
    _, cap = run(shell, "d_semi = %lagsight fit --alpha 0.1;")
    assert cap.outputs == [] and shell.user_ns["d_semi"].alpha == 0.1
    _, cap = run(shell, "d_semi")  # a later cell shows it as usual
    assert len(cap.outputs) == 1 and "text/html" in cap.outputs[0].data


def test_level_alternative_and_lags(shell):
    d = shell.run_line_magic("lagsight", "fit --alpha 0.01 --alternative two-sided --max-lag 12 --bg-max-lag 3")
    assert d.alpha == 0.01 and d.alternative == "two-sided"
    assert len(d.correlogram.lags) == 12
    assert d.tests[BG].df == (3.0,)
    one_sided = shell.run_line_magic("lagsight", "fit")
    # a two-sided p-value is twice the smaller tail
    assert d.tests[DW].pvalue == pytest.approx(2 * one_sided.tests[DW].pvalue, rel=1e-9)


def test_seasonal_period(shell):
    d = shell.run_line_magic("lagsight", "fit --period 14")
    assert d.tests[SEASONAL].lag == 14
    resid = np.asarray(shell.user_ns["fit"].resid)
    # the order-s statistic by its definition: sum (e_t - e_{t-s})^2 / sum e_t^2
    assert d.tests[SEASONAL].statistic == pytest.approx(np.sum((resid[14:] - resid[:-14]) ** 2) / (resid @ resid))
    off = shell.run_line_magic("lagsight", "fit --period 0")
    assert SEASONAL not in off.tests and SEASONAL not in off.errors


def test_row_order_options(shell):
    sfit = shell.user_ns["sfit"]
    by_date = sfit.resid.loc[shell.user_ns["shuffled"].sort_values("date").index]
    kept = shell.run_line_magic("lagsight", "sfit --order keep")
    assert kept.tests[DW].statistic == pytest.approx(sm_durbin_watson(sfit.resid))
    assert kept.verdict.finding == "not meaningful"
    sorted_col = shell.run_line_magic("lagsight", "sfit --order date")
    assert sorted_col.tests[DW].statistic == pytest.approx(sm_durbin_watson(by_date))
    assert sorted_col.verdict.finding == "evidence"
    quoted = shell.run_line_magic("lagsight", 'sfit --order "date"')
    assert quoted.tests[DW].statistic == pytest.approx(sorted_col.tests[DW].statistic)


def test_group_column(shell):
    d = shell.run_line_magic("lagsight", "gfit --groups store")
    assert d.groups is not None and d.groups.n_groups == 2
    e = np.asarray(shell.user_ns["gfit"].resid)
    # pooled within-group d by definition: differences never cross the group boundary
    num = np.sum(np.diff(e[:80]) ** 2) + np.sum(np.diff(e[80:]) ** 2)
    assert d.groups.pooled_dw == pytest.approx(num / (e @ e))


def test_sklearn_estimator_with_X_and_y(shell):
    d = shell.run_line_magic("lagsight", "reg --X X --y y")
    ns = shell.user_ns
    resid = ns["y"] - ns["reg"].predict(ns["X"])
    assert d.tests[DW].statistic == pytest.approx(sm_durbin_watson(resid), rel=1e-9)


def test_dataframe_with_response_and_predictor_columns(shell):
    d = shell.run_line_magic("lagsight", "frame --y demand_ml --X temp_c,rain_mm,weekend")
    assert d.tests[DW].statistic == pytest.approx(sm_durbin_watson(shell.user_ns["fit"].resid), rel=1e-9)


def test_residuals_with_their_design(shell):
    d = shell.run_line_magic("lagsight", "resid --X exog")
    ref = shell.run_line_magic("lagsight", "fit")
    assert d.tests[DW].pvalue == pytest.approx(ref.tests[DW].pvalue, rel=1e-8)
    bare = shell.run_line_magic("lagsight", "resid")
    assert np.isnan(bare.tests[DW].pvalue)  # no design: no exact p-value, bounds only


def test_expressions_are_evaluated(shell):
    d = shell.run_line_magic("lagsight", "fit.resid.values --X fit.model.exog")
    assert d.tests[DW].statistic == pytest.approx(sm_durbin_watson(shell.user_ns["fit"].resid))


def test_power_option(shell):
    d = shell.run_line_magic("lagsight", "fit --power")
    assert d.power is not None and d.power.n == 730


# -- what is shown -------------------------------------------------------------------
def test_static_option_shows_one_html_output(shell, monkeypatch):
    import lagsight.display as display

    monkeypatch.setattr(display, "widgets_available", lambda: True)
    _, cap = run(shell, "%lagsight fit --static")
    assert len(cap.outputs) == 1
    data = cap.outputs[0].data
    assert "text/html" in data and "text/plain" in data and WIDGET_MIME not in data


def test_default_shows_snapshot_and_widget_in_a_live_kernel(shell, monkeypatch):
    import lagsight.display as display

    monkeypatch.setattr(display, "widgets_available", lambda: True)
    _, cap = run(shell, "%lagsight fit")
    assert len(cap.outputs) == 2
    snap, widget = cap.outputs
    assert snap.transient["display_id"].startswith("lagsight-")
    assert "text/html" in snap.data and WIDGET_MIME not in snap.data
    assert WIDGET_MIME in widget.data


def test_without_a_kernel_the_output_is_static(shell):
    _, cap = run(shell, "%lagsight fit")
    assert len(cap.outputs) == 1 and WIDGET_MIME not in cap.outputs[0].data


def test_quiet_shows_the_verdict_only(shell):
    d = shell.run_line_magic("lagsight", "fit --quiet")
    assert preferences(d)["mode"] == "quiet"
    _, cap = run(shell, "%lagsight fit --quiet")
    text = cap.outputs[0].data["text/plain"]
    assert text.splitlines()[0] == d.verdict.headline
    assert "Durbin-Watson d = 0.889" in text
    assert "<svg" not in cap.outputs[0].data["text/html"]


# -- user mistakes: one UsageError line, no traceback --------------------------------
MISTAKES = [
    ("%lagsight nothere", "not defined"),
    ("%lagsight 42", "model"),
    ("%lagsight 'text'", "model"),
    ("%lagsight", "several fitted models in this session (fit, gfit, sfit)"),
    ("%lagsight fit[", "not a Python expression"),
    ("%lagsight fit.nope", "AttributeError"),
    ("%lagsight fit --alpha 1.5", "--alpha"),
    ("%lagsight fit --alpha abc", "--alpha"),
    ("%lagsight fit --alternative sideways", "--alternative"),
    ("%lagsight fit --max-lag 0", "--max-lag"),
    ("%lagsight fit --period -2", "--period"),
    ("%lagsight fit --period 1", "--period"),
    ("%lagsight fit --order nosuchcolumn", "nosuchcolumn"),
    ("%lagsight gfit --groups nosuchcolumn", "nosuchcolumn"),
    ("%lagsight fit --bogus", "--bogus"),
    ("%lagsight fit --static --quiet", "--static"),
    ("%lagsight frame", "--y"),
    ("%lagsight frame --y demand_ml", "--X"),
    ("%lagsight frame --y nosuch --X temp_c", "nosuch"),
    ("%lagsight reg", "X"),
    ("%lagsight reg --X missing_name --y y", "missing_name"),
    ("%lagsight resid --y y", "--y"),
    ("%lagsight_bounds 20", "k"),
    ("%lagsight_bounds x 1", "n"),
    ("%lagsight_bounds 20 1 --alpha 2", "--alpha"),
    ("%lagsight_bounds 0 1", "N"),
    ("%lagsight_bounds 20 -1", "K"),
]


@pytest.mark.parametrize("line, word", MISTAKES)
def test_user_mistakes_are_one_line_usage_errors(shell, line, word):
    result, cap = run(shell, line)
    assert isinstance(result.error_in_exec, UsageError), result.error_in_exec
    lines = cap.stderr.strip().splitlines()
    assert len(lines) == 1, cap.stderr
    assert lines[0].startswith("UsageError: ")
    assert word in lines[0]
    assert "Traceback" not in cap.stdout + cap.stderr
    assert cap.outputs == []


# -- %lagsight with no argument ------------------------------------------------------
@pytest.fixture
def fresh_shell():
    """A shell of its own (the module's holds several fitted models)."""
    ip = InteractiveShell.instance()
    saved = dict(ip.user_ns)
    for name in [k for k in ip.user_ns if not k.startswith("_") and k not in ip.user_ns_hidden]:
        del ip.user_ns[name]
    ip.user_ns.update(frame=water_demand())
    try:
        yield ip
    finally:
        ip.user_ns.clear()
        ip.user_ns.update(saved)


def test_no_argument_takes_the_model_the_previous_cell_fitted_and_says_so(fresh_shell):
    ip = fresh_shell
    ip.user_ns["smf"] = smf
    run(ip, "only = smf.ols('demand_ml ~ temp_c', data=frame).fit()")
    result, _ = run(ip, "%lagsight")
    d = result.result
    assert isinstance(d, lagsight.Diagnosis)
    # the same statistic as naming it (statsmodels' durbin_watson as the reference)
    assert d.tests[DW].statistic == pytest.approx(sm_durbin_watson(ip.user_ns["only"].resid), rel=1e-12)
    assert re.fullmatch(r"%lagsight took only: the fitted model cell \[\d+\] assigned\.", d.notes[0]), d.notes[0]
    assert preferences(d)["name"] == "only" and d.hint_syntax == "magic"
    # a second fitted model elsewhere: the previous cell still decides
    ip.user_ns["other"] = ip.user_ns["only"].model.fit()
    run(ip, "newest = smf.ols('demand_ml ~ rain_mm', data=frame).fit()")
    result, _ = run(ip, "%lagsight --quiet")
    assert result.result.notes[0].startswith("%lagsight took newest: the fitted model cell [")
    # nothing fitted in the previous cell and several in the session: a one-line list
    run(ip, "z = 1")
    result, cap = run(ip, "%lagsight")
    assert isinstance(result.error_in_exec, UsageError)
    assert "several fitted models in this session (newest, only, other): name one" in cap.stderr
    assert len(cap.stderr.strip().splitlines()) == 1


def test_no_argument_with_one_model_or_none(fresh_shell):
    ip = fresh_shell
    result, cap = run(ip, "%lagsight")
    assert isinstance(result.error_in_exec, UsageError) and "no fitted model in this session" in cap.stderr
    ip.user_ns["lone"] = smf.ols("demand_ml ~ temp_c", data=ip.user_ns["frame"]).fit()
    run(ip, "z = 2")
    result, _ = run(ip, "%lagsight --static")
    assert result.result.notes[0] == "%lagsight took lone: the only fitted model in this session."
    # a model the previous cell showed (its Out entry) is taken first
    run(ip, "lone.model.fit()")
    result, _ = run(ip, "%lagsight --quiet")
    assert re.match(r"%lagsight took Out\[\d+\]: the result cell \[\d+\] showed\.", result.result.notes[0])


# -- %lagsight_bounds ----------------------------------------------------------------
def test_bounds_magic_matches_the_published_table(shell):
    view = shell.run_line_magic("lagsight_bounds", "20 1")
    assert isinstance(view, BoundsView)
    # Savin & White (1977) table, n = 20, k' = 1, 5 %: dL = 1.201, dU = 1.411 (from memory)
    assert view.lower == pytest.approx(1.201, abs=6e-4)
    assert view.upper == pytest.approx(1.411, abs=6e-4)
    bundle = view._repr_mimebundle_()
    assert "1.201" in bundle["text/plain"] and "1.411" in bundle["text/plain"]
    assert "1.201" in bundle["text/html"] and '<img src="data:image/png;base64,' in bundle["text/html"]


def test_bounds_magic_options(shell):
    tight = shell.run_line_magic("lagsight_bounds", "50 3 --alpha 0.01")
    assert tight.bounds.alpha == 0.01 and tight.bounds.n == 50 and tight.bounds.k_prime == 3
    # Savin & White (1977), n = 50, k' = 3: dL = 1.421 at 5 % (from memory); at 1 % it is lower
    five = shell.run_line_magic("lagsight_bounds", "50 3")
    assert five.lower == pytest.approx(1.421, abs=6e-4)
    assert tight.lower < five.lower
    plain = shell.run_line_magic("lagsight_bounds", "20 1 --no-constant")
    assert plain.bounds.has_constant is False
    assert plain.lower != pytest.approx(1.201, abs=1e-3)


def test_bounds_magic_displays_table_and_figure(shell):
    result, _ = run(shell, "%lagsight_bounds 30 2")
    data, _ = shell.display_formatter.format(result.result)  # what a kernel's display hook sends
    assert "text/plain" in data and "dL" in data["text/html"] and "data:image/png" in data["text/html"]


def test_magic_uses_sm_add_constant_design_the_same_way(shell):
    # a design built with sm.add_constant gives the same exact p-value as the formula fit
    ns = shell.user_ns
    frame = ns["frame"]
    ns["afit"] = sm.OLS(frame["demand_ml"], sm.add_constant(frame[["temp_c", "rain_mm", "weekend"]])).fit()
    a = shell.run_line_magic("lagsight", "afit")
    b = shell.run_line_magic("lagsight", "fit")
    assert a.tests[DW].pvalue == pytest.approx(b.tests[DW].pvalue, rel=1e-8)
