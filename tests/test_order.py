"""Behaviour tests for lagsight.order: the row-order guard and frequency inference."""

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from lagsight.inputs import as_residual_data
from lagsight.order import OrderReport, check_order, infer_bg_order, infer_seasonal_period


@pytest.fixture(scope="module")
def macro_index():
    # statsmodels.datasets.macrodata: quarterly, 1959Q1-2009Q3, 203 rows
    d = sm.datasets.macrodata.load_pandas().data
    return pd.PeriodIndex.from_fields(year=d.year.astype(int), quarter=d.quarter.astype(int), freq="Q")


def _monthly(n=120, seed=0):
    idx = pd.date_range("2005-01-31", periods=n, freq="ME")
    return pd.Series(np.random.default_rng(seed).standard_normal(n), index=idx)


def test_in_order_quarterly_data_passes_cleanly(macro_index):
    data = as_residual_data(pd.Series(np.sin(np.arange(len(macro_index))), index=macro_index))
    report = check_order(data)
    assert isinstance(report, OrderReport) and report.warnings == ()
    assert report.order_used == "row order" and not report.flags["sorted"]
    np.testing.assert_array_equal(report.permutation, np.arange(data.n))
    assert report.flags["monotonic"] and not report.flags["shuffled"]
    assert report.flags["gaps"] == 0 and report.flags["usual_step"] == "1 quarter"
    assert report.apply(data) is data


def test_shuffled_monthly_series_is_flagged_but_not_sorted():
    s = _monthly()
    shuffled = s.iloc[np.random.default_rng(7).permutation(len(s))]
    report = check_order(as_residual_data(shuffled))
    assert report.flags["shuffled"] and not report.flags["monotonic"]
    assert 0.3 < report.flags["descending_fraction"] < 0.7  # about half the steps of a random permutation
    np.testing.assert_array_equal(report.permutation, np.arange(len(s)))  # auto never sorts silently
    assert report.order_used == "row order"
    text = " ".join(report.warnings)
    assert "shuffled or randomly split" in text and "not meaningful" in text and "order='index'" in text
    for order in ("keep", "auto"):
        assert check_order(as_residual_data(shuffled), order=order).warnings  # never passes silently


def test_order_index_restores_time_order():
    s = _monthly()
    shuffled = s.iloc[np.random.default_rng(3).permutation(len(s))]
    data = as_residual_data(shuffled)
    report = check_order(data, order="index")
    assert report.order_used == "sorted by the index" and report.flags["sorted"]
    restored = report.apply(data)
    assert restored.index.equals(s.index)
    np.testing.assert_array_equal(restored.resid, s.to_numpy())
    assert "sorted by it for testing" in report.warnings[0]
    assert restored.notes[-1] == "The rows were sorted by the index before testing."


def test_a_few_swapped_rows_are_measured():
    s = _monthly(60)
    order = np.arange(60)
    order[[10, 11]] = order[[11, 10]]
    report = check_order(as_residual_data(s.iloc[order]))
    assert report.flags["shuffled"] and report.flags["descending_fraction"] == pytest.approx(1 / 59)
    assert "1 of 59 steps" in report.warnings[0] and "shuffled" not in report.warnings[0]


def test_reversed_rows():
    report = check_order(as_residual_data(_monthly(24).iloc[::-1]))
    assert report.flags["reversed"] and not report.flags["shuffled"]
    assert "backwards" in report.warnings[0]


def test_duplicate_stamps_are_counted():
    idx = pd.DatetimeIndex(
        ["2020-01-01", "2020-01-02", "2020-01-02", "2020-01-03", "2020-01-03", "2020-01-03", "2020-01-04"]
    )
    report = check_order(as_residual_data(pd.Series(np.arange(7.0), index=idx)))
    assert report.flags["duplicate_stamps"] == 3 and report.flags["monotonic"]
    assert any(w.startswith("3 rows share a time stamp") and "groups=" in w for w in report.warnings)


def test_two_gaps_in_a_monthly_index():
    s = _monthly(48)
    gappy = s.drop(s.index[[10, 11, 12, 30]])  # a 4-month step after 2005-10 and a 2-month step after 2007-06
    report = check_order(as_residual_data(gappy))
    assert report.flags["gaps"] == 2 and report.flags["usual_step"] == "1 month"
    assert report.flags["largest_gap"] == "4 months between 2005-10-31 and 2006-02-28"
    assert any("2 irregular gaps" in w for w in report.warnings)


def test_gaps_on_daily_and_business_day_indexes():
    days = pd.date_range("2021-03-01", periods=30, freq="D").delete([4, 5, 6, 20])
    report = check_order(as_residual_data(pd.Series(np.ones(26) + np.arange(26) % 3, index=days)))
    assert report.flags["gaps"] == 2 and report.flags["largest_gap"].startswith("4 days between 2021-03-04")
    bdays = pd.bdate_range("2021-03-01", periods=30)  # weekends are not gaps
    report = check_order(as_residual_data(pd.Series(np.arange(30.0) % 4, index=bdays)))
    assert report.flags["gaps"] == 0 and report.flags["usual_step"] == "1 business day"


def test_interleaved_groups_and_sorting_within_groups():
    dates = pd.date_range("2019-01-01", periods=10, freq="D")
    idx = dates.repeat(2)  # a, b, a, b, ... on each date
    data = as_residual_data(pd.Series(np.arange(20.0), index=idx), groups=np.tile(["a", "b"], 10))
    report = check_order(data)
    assert report.flags["interleaved_groups"] and report.flags["n_groups"] == 2
    assert report.flags["group_runs"] == 20 and report.flags["duplicate_stamps"] == 0  # repeats are across groups
    assert any("interleaved" in w for w in report.warnings)
    sorted_report = check_order(data, order="index")
    assert sorted_report.order_used == "sorted by the index within groups"
    assert not sorted_report.flags["interleaved_groups"] and sorted_report.flags["group_runs"] == 2
    blocks = sorted_report.apply(data)
    assert list(blocks.groups) == ["a"] * 10 + ["b"] * 10 and blocks.index[:10].equals(dates)


def test_stacked_panel_is_not_called_shuffled():
    dates = pd.date_range("2019-01-01", periods=12, freq="ME")
    idx = dates.append(dates)
    data = as_residual_data(pd.Series(np.arange(24.0) % 5, index=idx), groups=np.repeat(["x", "y"], 12))
    report = check_order(data)
    assert report.flags["monotonic"] and not report.flags["interleaved_groups"]
    assert report.warnings == ()


def test_sort_by_a_column():
    df = pd.DataFrame(
        {
            "when": pd.date_range("2022-01-01", periods=6, freq="W")[[3, 0, 5, 1, 4, 2]],
            "x": [1.0, 4, 2, 8, 5, 7],
            "y": [2.1, 3.9, 3.2, 8.8, 5.1, 7.7],
        }
    )
    data = as_residual_data(df, response="y", predictors=["x"])
    report = check_order(data, order="when")
    assert report.order_used == "sorted by column when"
    np.testing.assert_array_equal(report.permutation, [1, 3, 5, 0, 4, 2])
    assert report.apply(data).frame["when"].is_monotonic_increasing
    auto = check_order(as_residual_data(df, response="y", predictors=["x"], time="when"))
    assert auto.order_used == "sorted by column when"  # time given to the adapter is honoured by 'auto'
    with pytest.raises(ValueError, match="column 'date' not found"):
        check_order(data, order="date")
    with pytest.raises(TypeError, match="'order' must be"):
        check_order(data, order=3)


def test_unsortable_index_warns_in_row_order_and_fails_when_sorting():
    data = as_residual_data(pd.Series([0.1, 0.2, 0.3, 0.4], index=pd.Index([1, "a", 2, "b"], dtype=object)))
    assert "could not be checked" in check_order(data).warnings[0]
    with pytest.raises(ValueError, match="cannot be sorted"):
        check_order(data, order="index")


@pytest.mark.parametrize(
    "index, period",
    [
        (pd.period_range("2000Q1", periods=12, freq="Q"), 4),
        (pd.date_range("2000-01-01", periods=12, freq="QS"), 4),
        (pd.date_range("2000-01-31", periods=30, freq="ME"), 12),
        (pd.period_range("2000-01", periods=30, freq="M"), 12),
        (pd.date_range("2000-01-01", periods=30, freq="D"), 7),
        (pd.date_range("2000-01-01", periods=60, freq="h"), 24),
        (pd.date_range("2000-01-02", periods=60, freq="W"), 52),
        (pd.date_range("2000-12-31", periods=10, freq="YE"), None),
        (pd.RangeIndex(50), None),
    ],
)
def test_infer_seasonal_period(index, period):
    assert infer_seasonal_period(index) == period


def test_infer_seasonal_period_without_a_set_frequency(macro_index):
    assert infer_seasonal_period(macro_index) == 4  # macrodata is quarterly
    monthly = pd.DatetimeIndex(pd.date_range("2001-01-31", periods=40, freq="ME").delete([5, 17]).to_numpy())
    assert monthly.freq is None and infer_seasonal_period(monthly) == 12
    hourly = pd.DatetimeIndex(pd.date_range("2001-01-01", periods=50, freq="h").delete([3]).to_numpy())
    assert infer_seasonal_period(hourly) == 24


def test_infer_bg_order(macro_index):
    assert infer_bg_order(macro_index) == 4
    assert infer_bg_order(pd.RangeIndex(30)) == 6  # min(10, 30 // 5)
    assert infer_bg_order(pd.RangeIndex(400)) == 10
    assert infer_bg_order(pd.RangeIndex(3)) == 1
    assert infer_bg_order(pd.date_range("2000-01-02", periods=80, freq="W")) == 10  # 52 > 80 // 5


def test_missing_stamps_and_daylight_saving():
    idx = pd.DatetimeIndex(["2020-01-01", "2020-01-02", None, "2020-01-03", "2020-01-04"])
    report = check_order(as_residual_data(pd.Series([0.1, 0.3, 0.2, 0.5, 0.4], index=idx)))
    assert report.flags["missing_stamps"] == 1 and report.flags["monotonic"]
    assert report.flags["duplicate_stamps"] == 0
    assert report.warnings == ("1 row has no value in the index; order was checked on the other rows.",)
    # an hourly series across the spring clock change has no gap in elapsed time
    hours = pd.date_range("2021-03-27", periods=72, freq="h", tz="Europe/Berlin")
    report = check_order(as_residual_data(pd.Series(np.arange(72.0) % 5, index=hours)))
    assert report.flags["gaps"] == 0 and report.flags["usual_step"] == "1 hour"
