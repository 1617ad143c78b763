"""The command line: exit status 0/1/2 and one-line errors."""
from __future__ import annotations

import subprocess
import sys

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
    code = main(["report", str(demand_csv), "--y", "demand_ml", "--x", "temp_c,rain_mm,weekend",
                 "--time", "date", "-o", str(out)])
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
    proc = subprocess.run([str(bindir / exe), "report", str(demand_csv), "--y", "demand_ml",
                           "--x", "temp_c", "-o", str(tmp_path / "x.html")], capture_output=True, text=True)
    assert proc.returncode == 1, proc.stderr


def test_degenerate_data_exits_three(tmp_path, capsys):
    # an exact fit: y is a linear function of x, nothing is left to test
    x = np.linspace(0.0, 3.0, 25)
    path = tmp_path / "exact.csv"
    pd.DataFrame({"x": x, "y": 1 + 2 * x}).to_csv(path, index=False)
    assert main(["report", str(path), "--y", "y", "--x", "x", "-o", str(tmp_path / "e.html")]) == 3
    captured = capsys.readouterr()
    assert captured.out.startswith("Cannot judge: ") and captured.err == ""
