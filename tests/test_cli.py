"""The command line: exit status 0/1/2 and one-line errors."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from lagsight.cli import main
from lagsight.scenarios import water_demand


@pytest.fixture()
def demand_csv(tmp_path):
    path = tmp_path / "demand.csv"
    water_demand(200).reset_index().to_csv(path, index=False)
    return path


def test_report_finds_correlation_and_writes_html(demand_csv, tmp_path, capsys):
    out = tmp_path / "r.html"
    code = main(
        [
            "report",
            str(demand_csv),
            "--y",
            "demand_ml",
            "--x",
            "temp_c,rain_mm,weekend",
            "--time",
            "date",
            "-o",
            str(out),
        ]
    )
    assert code == 1
    text = capsys.readouterr().out
    assert "evidence" in text.lower() and str(out) in text
    html = out.read_text()
    assert "<html" in html.lower() and "http://" not in html and "https://" not in html


def test_report_clean_data_exits_zero(tmp_path, capsys):
    rng = np.random.default_rng(4)
    frame = pd.DataFrame({"x": rng.normal(size=150)})
    frame["y"] = 2 * frame["x"] + rng.normal(size=150)
    path = tmp_path / "clean.csv"
    frame.to_csv(path, index=False)
    assert main(["report", str(path), "--y", "y", "--x", "x", "-o", str(tmp_path / "c.html")]) == 0


@pytest.mark.parametrize(
    "content,args,needle",
    [
        ("a,b\n1,2\n3,4\n5,6\n", ["--y", "a", "--x", "zzz"], "column(s) not in"),
        ("a,b\n1,x\n3,4\n5,6\n", ["--y", "a", "--x", "b"], "is not numeric"),
        ("", ["--y", "a", "--x", "b"], "is empty"),
        ("a,b\n1,2\n", ["--y", "a", "--x", "b"], "at least 3"),
    ],
)
def test_bad_input_exits_two_with_one_line(tmp_path, capsys, content, args, needle):
    path = tmp_path / "bad.csv"
    path.write_text(content)
    assert main(["report", str(path), *args]) == 2
    err = capsys.readouterr().err
    assert needle in err and err.count("\n") == 1


def test_usage_error_exits_two(capsys):
    assert main(["report"]) == 2
    assert capsys.readouterr().err.count("\n") == 1


def test_console_script_entry_point(demand_csv, tmp_path):
    # installed by pyproject.toml [project.scripts]
    exe = "lagsight"
    bindir = __import__("pathlib").Path(sys.executable).parent
    proc = subprocess.run(
        [
            str(bindir / exe),
            "report",
            str(demand_csv),
            "--y",
            "demand_ml",
            "--x",
            "temp_c",
            "-o",
            str(tmp_path / "x.html"),
        ],
        capture_output=True,
        text=True,
    )
    assert proc.returncode == 1, proc.stderr


def test_degenerate_data_exits_three(tmp_path, capsys):
    # an exact fit: y is a linear function of x, nothing is left to test
    x = np.linspace(0.0, 3.0, 25)
    path = tmp_path / "exact.csv"
    pd.DataFrame({"x": x, "y": 1 + 2 * x}).to_csv(path, index=False)
    assert main(["report", str(path), "--y", "y", "--x", "x", "-o", str(tmp_path / "e.html")]) == 3
    captured = capsys.readouterr()
    assert captured.out.startswith("Cannot judge: ") and captured.err == ""


# --- hostile paths, time columns and notes ---------------------------------------------------------
def _frame(n=80, seed=2):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=n)
    return pd.DataFrame({"x": x, "y": 1 + x + rng.normal(size=n)})


def test_an_existing_report_is_replaced_only_with_overwrite(tmp_path, capsys):
    path = tmp_path / "d.csv"
    _frame().to_csv(path, index=False)
    out = tmp_path / "r.html"
    out.write_text("keep me", encoding="utf-8")
    assert main(["report", str(path), "--y", "y", "--x", "x", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "exists; add --overwrite" in err and err.count("\n") == 1
    assert out.read_text(encoding="utf-8") == "keep me"
    assert main(["report", str(path), "--y", "y", "--x", "x", "-o", str(out), "--overwrite"]) in (0, 1)
    assert "lagsight" in out.read_text(encoding="utf-8")


@pytest.mark.parametrize("where", ["missing folder", "a folder"])
def test_output_that_cannot_be_a_file_exits_two_with_one_line(tmp_path, capsys, where):
    path = tmp_path / "d.csv"
    _frame().to_csv(path, index=False)
    out = tmp_path / "no such folder" / "r.html" if where == "missing folder" else tmp_path
    assert main(["report", str(path), "--y", "y", "--x", "x", "-o", str(out)]) == 2
    captured = capsys.readouterr()
    assert captured.err.startswith("lagsight: error: -o ") and captured.err.count("\n") == 1
    assert captured.out == ""


@pytest.mark.parametrize(
    "stamps,first",
    [
        (lambda d: d.strftime("%d/%m/%Y"), "'01/01/2021'"),  # day first: never guessed
        (lambda d: [f"t{i + 1}" for i in range(len(d))], "'t1'"),  # labels
        (
            lambda d: [s.strftime("%Y-%m-%d") if i % 2 else s.strftime("%d %b %Y") for i, s in enumerate(d)],
            "'01 Jan 2021'",
        ),  # mixed forms
    ],
)
def test_time_values_that_are_not_unambiguous_exit_two(tmp_path, capsys, stamps, first):
    frame = _frame()
    frame.insert(0, "t", stamps(pd.date_range("2021-01-01", periods=len(frame), freq="D")))
    path = tmp_path / "t.csv"
    frame.to_csv(path, index=False)
    assert main(["report", str(path), "--y", "y", "--x", "x", "--time", "t", "-o", str(tmp_path / "r.html")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and first in err and "--time-format" in err


def test_time_format_sorts_day_first_dates_in_calendar_order(tmp_path, capsys):
    frame = _frame()
    days = pd.date_range("2021-01-01", periods=len(frame), freq="D")
    frame.insert(0, "t", days.strftime("%d/%m/%Y"))
    path = tmp_path / "t.csv"
    frame.sample(frac=1.0, random_state=1).to_csv(path, index=False)  # rows shuffled in the file
    code = main(
        [
            "report",
            str(path),
            "--y",
            "y",
            "--x",
            "x",
            "--time",
            "t",
            "--time-format",
            "%d/%m/%Y",
            "-o",
            str(tmp_path / "r.html"),
        ]
    )
    assert code in (0, 1)
    out = capsys.readouterr().out
    assert "irregular gaps" not in out  # read as the 80 consecutive days they are
    assert "not in order of the index" in out and "sorted by it for testing" in out


def test_iso_and_numeric_time_columns_are_accepted(tmp_path, capsys):
    frame = _frame()
    for values in (
        pd.date_range("2021-01-01", periods=len(frame), freq="D").strftime("%Y-%m-%d"),
        np.arange(len(frame)) * 2.5,
    ):
        frame["t"] = values
        path = tmp_path / "t.csv"
        frame.to_csv(path, index=False)
        args = [
            "report",
            str(path),
            "--y",
            "y",
            "--x",
            "x",
            "--time",
            "t",
            "-o",
            str(tmp_path / "r.html"),
            "--overwrite",
        ]
        assert main(args) in (0, 1)
        captured = capsys.readouterr()
        assert captured.err == "" and "irregular gaps" not in captured.out


def test_notes_and_cautions_are_printed_and_quiet_prints_the_headline(tmp_path, capsys):
    frame = _frame()
    frame.loc[[3, 9], "y"] = np.nan
    frame["g"] = ["a"] * 35 + ["b"] * 35 + [""] * 10  # empty cells: no group label
    path = tmp_path / "d.csv"
    frame.to_csv(path, index=False)
    args = ["report", str(path), "--y", "y", "--x", "x", "--groups", "g", "-o", str(tmp_path / "r.html"), "--overwrite"]
    main(args)
    out = capsys.readouterr().out.splitlines()
    assert (
        "note: 2 rows with missing or infinite values in 'y' or the predictors were dropped before "
        "fitting; the time order has gaps there." in out
    )
    assert "note: 10 rows have no group label and were left out." in out
    assert any(line.startswith("test note, Breusch-Godfrey: ") for line in out)
    assert any(line.startswith("caution: ") for line in out)
    main(args + ["--quiet"])
    quiet = capsys.readouterr().out.splitlines()
    assert len(quiet) == 1 and quiet[0] == out[0]


def test_a_repeated_column_name_in_the_header_exits_two(tmp_path, capsys):
    path = tmp_path / "d.csv"
    path.write_text("y,x,x\n1,2,3\n2,3,1\n3,1,2\n4,5,6\n")
    assert main(["report", str(path), "--y", "y", "--x", "x", "-o", str(tmp_path / "r.html")]) == 2
    err = capsys.readouterr().err
    assert "more than one column named 'x'" in err and err.count("\n") == 1


def test_every_x_item_names_a_column(tmp_path, capsys):
    # an item is never dropped on the way: an empty one is an error, spaces around a name are read as the
    # file has it (before, ',' items that were blank after stripping silently left the model)
    frame = _frame()
    frame["\x1e"] = np.random.default_rng(5).normal(size=len(frame))  # a name Python's strip() removes
    path = tmp_path / "d.csv"
    frame.to_csv(path, index=False)
    out = str(tmp_path / "r.html")
    assert main(["report", str(path), "--y", "y", "--x", "x,", "-o", out]) == 2
    assert "empty column name" in capsys.readouterr().err
    assert main(["report", str(path), "--y", "y", "--x", "x,\x1e", "-o", out]) in (0, 1)
    assert "OLS of y on const + x + \x1e" in Path(out).read_text(encoding="utf-8")
    assert main(["report", str(path), "--y", "y", "--x", " x ,\x1e", "-o", out, "--overwrite"]) in (0, 1)
    capsys.readouterr()
