"""The words every view shows: trade notation, one wording per idea, numbers alike, hints in the
syntax of where the user is.

Behaviour tests on invented demo data (lagsight.scenarios and small seeded series); the rules they
check are the project's own writing rules (written in the words pass), not values from a source.
"""

from __future__ import annotations

import html
import re

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from IPython.core.interactiveshell import InteractiveShell

from lagsight import diagnose
from lagsight.battery_run import DW, SEASONAL
from lagsight.cli import main
from lagsight.display import BoundsView, static_html
from lagsight.formats import format_count, format_p, format_pvalue, format_statistic
from lagsight.hints import HINT_SYNTAXES, hint_syntax, option_hint, sort_hint
from lagsight.render import text as T
from lagsight.render.html import build_view, groups_table, save_html
from lagsight.render.text import TEST_COLUMNS, diagnosis_text, report_sentence
from lagsight.stats.bounds import dw_bounds

# ---------------------------------------------------------------------------
# scenarios (invented data, seeded)


def _ar1(rng, n, rho):
    e = np.zeros(n)
    shocks = rng.normal(size=n)
    for t in range(1, n):
        e[t] = rho * e[t - 1] + shocks[t]
    return e


def _ols(y, X):
    return sm.OLS(y, sm.add_constant(X)).fit()


def _positive():
    rng = np.random.default_rng(3)
    n = 2016  # a count that needs a thousands separator
    idx = pd.RangeIndex(n)
    x = pd.Series(rng.normal(size=n), index=idx, name="x")
    return _ols(pd.Series(1 + 2 * x + _ar1(rng, n, 0.6), index=idx, name="y"), x)


def _none():
    rng = np.random.default_rng(4)
    x = pd.Series(rng.normal(size=120), name="x")
    return _ols(pd.Series(1 + x + rng.normal(size=120), name="y"), x)


def _lagged():
    rng = np.random.default_rng(5)
    n = 200
    x = rng.normal(size=n)
    y = np.zeros(n)
    for t in range(1, n):
        y[t] = 0.5 * y[t - 1] + x[t] + rng.normal()
    frame = pd.DataFrame({"y": y[1:], "y_lag": y[:-1], "x": x[1:]})
    return _ols(frame["y"], frame[["y_lag", "x"]])


def _seasonal():
    rng = np.random.default_rng(6)
    idx = pd.date_range("2010-01-01", periods=144, freq="MS")
    x = pd.Series(rng.normal(size=144), index=idx, name="x")
    e = rng.normal(size=144)
    for t in range(12, 144):
        e[t] += 0.6 * e[t - 12]
    return _ols(pd.Series(2 + x + e, index=idx, name="y"), x)


def _groups_frame():
    rng = np.random.default_rng(8)
    parts = []
    for g in ("north", "south", "east"):
        x = rng.normal(size=80)
        parts.append(pd.DataFrame({"store": g, "x": x, "y": 1 + x + _ar1(rng, 80, 0.5)}))
    return pd.concat(parts, ignore_index=True)


def _shuffled():
    rng = np.random.default_rng(9)
    idx = pd.date_range("2021-01-01", periods=150, freq="D")
    x = pd.Series(rng.normal(size=150), index=idx, name="x")
    y = pd.Series(1 + x + _ar1(rng, 150, 0.5), index=idx, name="y")
    order = rng.permutation(150)
    return _ols(y.iloc[order], x.iloc[order])


SCENARIOS = {
    "positive": lambda: diagnose(_positive()),
    "none": lambda: diagnose(_none()),
    "lagged response": lambda: diagnose(_lagged()),
    "seasonal": lambda: diagnose(_seasonal()),
    "groups": lambda: diagnose(_groups_frame(), response="y", predictors=["x"], groups="store"),
    "residuals only": lambda: diagnose(_positive().resid.to_numpy()),
    "rows out of order": lambda: diagnose(_shuffled()),
}


@pytest.fixture(scope="module")
def diagnoses():
    return {name: make() for name, make in SCENARIOS.items()}


# ---------------------------------------------------------------------------
# the scan


def visible(markup: str) -> str:
    """The text a reader sees in HTML: styles, scripts and figures removed, tags stripped, entities read."""
    markup = re.sub(r"<(style|script|svg)\b.*?</\1>", " ", markup, flags=re.S | re.I)
    markup = re.sub(r"<[^>]+>", " ", markup)
    return html.unescape(markup)


_ALWAYS = [
    (re.compile(r"pvalue", re.I), "'pvalue'"),
    (re.compile(r"\balpha\b", re.I), "'alpha'"),
    (re.compile(r"\brho\b", re.I), "'rho'"),
    (re.compile(r"newey-west-1994", re.I), "the lag rule's API value"),
    (re.compile(r"n\*R\^2|R\^2"), "'n*R^2'"),
    (re.compile(r"\bd_"), "a code identifier 'd_…'"),
    (re.compile(r"\b(rho_hat|rho_se|b_lag|durbin_alternative|lag_rule)\b"), "a code identifier"),
]
_NOT_API = [(re.compile(r"\bexog="), "'exog='"), (re.compile(r"\border="), "'order='")]
_API = [(re.compile(r"(?<![\w-])--[a-z]"), "a '--' flag")]
# dates and times (span, stamps), row labels (the span of an integer index), years in citations
# ('Newey-West (1994)', 'Holm 1979'), exponents
_NOT_COUNTS = re.compile(
    "|".join(
        (
            r"span: [^\n]*?\u2026 \S+",  # the span of the index: labels, not counts
            r"\d{4}-\d\d-\d\d(?:[ T]\d\d:\d\d(?::\d\d)?)?",  # dates and times
            r"\((?:1[89]|20)\d\d\)|\b[A-Z][a-z]+ (?:1[89]|20)\d\d\b",  # years in citations
            r"e[-+]\d+",  # exponents
        )
    )
)
_BARE_COUNT = re.compile(r"(?<![\d.,])\d{4,}(?![\d,]|\.\d)")


def forbidden(text: str, syntax: str = "api") -> list[str]:
    """What in ``text`` breaks the writing rules for a user of ``syntax``."""
    rules = _ALWAYS + (_API if syntax == "api" else _NOT_API)
    found = [
        f"{why}: {m.group(0)!r} in ...{text[max(0, m.start() - 40) : m.end() + 40]!r}..."
        for rx, why in rules
        for m in rx.finditer(text)
    ]
    for m in _BARE_COUNT.finditer(_NOT_COUNTS.sub(" ", text)):
        found.append(f"a count without thousands separators: {m.group(0)!r}")
    return found


def test_the_scan_catches_what_it_should():
    # the check itself: each rule fires on a slip and stays quiet on the right wording
    assert forbidden("at alpha 0.05") and not forbidden("at α = 0.05")
    assert forbidden("rho = 0.5") and not forbidden("ρ = 0.5; rhombus")
    assert forbidden("d_24 = 1.9") and not forbidden("d at lag 24 = 1.9")
    assert forbidden("all 2016 rows") and not forbidden("all 2,016 rows; p = 3.4e-1192; Newey-West (1994)")
    assert not forbidden("span: 2020-01-01 … 2020-03-24 23:00:00; Holm 1979; 0.12345")
    assert forbidden("pass --time t") and not forbidden("pass --time t", "cli")
    assert forbidden("sort with order='index'", "magic") and not forbidden("sort with order='index'")
    assert forbidden("LM = n*R^2 of the auxiliary regression")


@pytest.mark.parametrize("name", list(SCENARIOS))
def test_no_forbidden_words_in_any_view(diagnoses, name, tmp_path):
    d = diagnoses[name]
    views = {
        "str(diagnosis)": str(d),
        "text": diagnosis_text(d),
        "static HTML": visible(static_html(d, figures="none")),
        "report": visible(save_html(d, tmp_path / "r.html", figures="none").read_text(encoding="utf-8")),
    }
    problems = {where: forbidden(text) for where, text in views.items()}
    assert not any(problems.values()), problems


def test_scenarios_cover_the_cases(diagnoses):
    # the scan above reads what these cases write: each must really be the case it is named for
    assert diagnoses["positive"].verdict.finding == "evidence"
    assert diagnoses["none"].verdict.finding == "no evidence"
    assert diagnoses["lagged response"].lagged_response is not None
    assert SEASONAL in diagnoses["seasonal"].tests
    assert diagnoses["groups"].groups is not None
    assert diagnoses["residuals only"].data.exog is None
    assert diagnoses["rows out of order"].verdict.finding == "not meaningful"


def test_cli_output_and_report_follow_the_rules(tmp_path, capsys):
    rng = np.random.default_rng(10)
    n = 1500
    x = rng.normal(size=n)
    dates = pd.date_range("2019-01-01", periods=n, freq="D").strftime("%Y-%m-%d")
    frame = pd.DataFrame({"date": dates, "x": x, "y": 1 + x + _ar1(rng, n, 0.5)})
    path = tmp_path / "sales.csv"
    frame.sample(frac=1.0, random_state=1).to_csv(path, index=False)  # rows out of order
    out = tmp_path / "out.html"
    code = main(["report", str(path), "--y", "y", "--x", "x", "-o", str(out)])
    text = capsys.readouterr().out.replace(str(tmp_path), "<folder>")
    assert code == 3
    assert not forbidden(text, "cli"), forbidden(text, "cli")
    assert "rows: 1,500 of 1,500 tested" in text
    report = visible(out.read_text(encoding="utf-8")).replace(str(tmp_path), "<folder>")
    assert not forbidden(report, "cli"), forbidden(report, "cli")
    assert "--time <time column>" in text


# ---------------------------------------------------------------------------
# hints in the syntax of the entry point


def test_option_hint_per_syntax():
    assert option_hint("order", "index", syntax="api") == "order='index'"
    assert option_hint("order", "index", syntax="magic") == "--order index"
    assert option_hint("order", "index", syntax="cli") == "--time <time column>"
    assert option_hint("exog", syntax="api") == "exog="
    assert option_hint("exog", syntax="magic") == "--X"
    assert option_hint("exog", syntax="cli") == "--x"
    assert option_hint("max_lag", 30, syntax="magic") == "--max-lag 30"
    assert option_hint("groups", "store", syntax="cli") == "--groups store"
    with pytest.raises(ValueError, match="'hint_syntax' must be one of"):
        option_hint("order", "index", syntax="R")
    with pytest.raises(ValueError, match="'option' must be one of"):
        option_hint("colour")
    assert set(HINT_SYNTAXES) == {"api", "magic", "cli"}


def test_option_hint_flags_exist_where_they_are_named():
    # every magic flag a hint can name is an option of %lagsight, every CLI flag one of `lagsight report`
    import argparse

    from lagsight.cli import _parser
    from lagsight.magic import LagsightMagics

    magic_help = LagsightMagics.lagsight.parser.format_help()
    sub = next(a for a in _parser()._actions if isinstance(a, argparse._SubParsersAction))
    cli_usage = sub.choices["report"].format_help()
    for option in ("order", "exog", "endog", "groups", "period", "max_lag", "bg_max_lag", "alpha", "power"):
        flag = option_hint(option, syntax="magic").split()[0]
        assert flag in magic_help, flag
    for option in ("order", "exog", "endog", "groups", "alpha", "alternative"):
        flag = option_hint(option, syntax="cli").split()[0]
        assert flag in cli_usage, flag


def test_the_context_sets_the_syntax_and_is_restored():
    assert option_hint("order", "index") == "order='index'"
    with hint_syntax("magic"):
        assert option_hint("order", "index") == "--order index"
        assert sort_hint() == "--order index or --order <time column>"
    assert sort_hint() == "order='index' or order='<time column>'"


def test_api_hints_in_python_syntax(diagnoses):
    d = diagnoses["rows out of order"]
    assert d.hint_syntax == "api"
    assert "order='index'" in d.verdict.headline
    assert "--order" not in diagnosis_text(d)
    res = diagnoses["residuals only"]
    assert any("exog=" in n for n in res.notes)


@pytest.fixture(scope="module")
def shell():
    ip = InteractiveShell.instance()
    ip.run_line_magic("load_ext", "lagsight.magic")
    ip.user_ns.update(sfit=_shuffled(), resid=_positive().resid.to_numpy())
    return ip


def test_magic_hints_in_magic_syntax(shell, tmp_path):
    d = shell.run_line_magic("lagsight", "sfit --static")
    assert d.hint_syntax == "magic"
    assert "--order index" in d.verdict.headline
    for text in (str(d), diagnosis_text(d), visible(static_html(d, figures="none"))):
        assert not forbidden(text, "magic"), forbidden(text, "magic")
    # re-assessing (the panel's α and alternative) keeps the syntax
    again = d.reassess(alpha=0.01)
    assert "--order index" in again.verdict.headline and "order='index'" not in again.verdict.headline
    r = shell.run_line_magic("lagsight", "resid --static")
    assert any("--X" in n for n in r.notes) and not any("exog=" in n for n in r.notes)
    # the API is back to its own syntax after the magic ran
    assert "order='index'" in diagnose(_shuffled()).verdict.headline


def test_cli_hints_in_cli_syntax(tmp_path, capsys):
    rng = np.random.default_rng(12)
    stamps = pd.date_range("2022-01-01", periods=120, freq="D").strftime("%Y-%m-%d")
    x = rng.normal(size=120)
    frame = pd.DataFrame({"day": stamps, "x": x, "y": 1 + x + rng.normal(size=120)})
    path = tmp_path / "d.csv"
    frame.sample(frac=1.0, random_state=2).to_csv(path, index=False)
    main(["report", str(path), "--y", "y", "--x", "x", "-o", str(tmp_path / "d.html")])
    text = capsys.readouterr().out
    assert "--time <time column>" in text
    assert "order=" not in text and "--order" not in text


# ---------------------------------------------------------------------------
# one wording, numbers alike


def test_bounds_readings_use_the_evidence_words():
    # residuals only: no design, so the test table reads the bounds decision
    rng = np.random.default_rng(13)
    d = diagnose(_ar1(rng, 100, 0.7))
    reading = dict((r[0], r[4]) for r in T.test_rows(d))[DW]
    assert reading == "bounds: evidence of positive correlation"
    assert "reject" not in diagnosis_text(d)
    assert "evidence of positive correlation" in report_sentence(d, "text", test=DW)
    d = diagnose(rng.normal(size=100))
    assert dict((r[0], r[4]) for r in T.test_rows(d))[DW] in ("bounds: no evidence", "bounds: inconclusive")


def test_statistic_and_pvalue_columns_have_one_format(diagnoses):
    stat = re.compile(r"^(?:[A-Za-z]+(?: at lag \d+)?) = \u2212?\d{1,3}(?:,\d{3})*\.\d{3}(?: \(.*\))?$")
    pval = re.compile(r"^(?:\d\.\d{3}|\d(?:\.\d)?e-\d+|< 1e-300|n/a|not meaningful)$")
    i_stat, i_p = TEST_COLUMNS.index("statistic"), TEST_COLUMNS.index("p-value")
    for name, d in diagnoses.items():
        for row in T.test_rows(d):
            if not row[i_stat]:  # a test that did not run
                continue
            assert stat.match(row[i_stat]), (name, row[i_stat])
            assert pval.match(row[i_p]), (name, row[i_p])


def test_groups_table_columns_have_one_format(diagnoses):
    t = groups_table(diagnoses["groups"].groups)
    for col in ("d", "implied \u03c1"):
        j = t.columns.index(col)
        assert all(re.fullmatch(r"\u2212?\d\.\d{3}", row[j]) for row in t.rows), [row[j] for row in t.rows]
    assert "rho" not in " ".join(t.columns)


def test_one_formatter_for_numbers():
    assert format_count(2016) == "2,016"
    assert format_statistic(1121.87) == "1,121.870" and format_statistic(-0.5) == "\u22120.500"
    assert format_pvalue(0.1211) == "0.121" and format_pvalue(3.1e-5) == "3.1e-05"
    assert format_p(0.0) == "p < 1e-300" and format_p(0.04) == "p = 0.040"


def test_bounds_view_words():
    text = str(BoundsView(dw_bounds(2000, 3)))
    assert not forbidden(text), forbidden(text)
    assert "2,000" in text and "\u03b1" in text


def test_remedies_caption_names_the_lag_rule_in_prose(diagnoses):
    view = build_view(diagnoses["positive"], figures="none")
    assert view.remedies is not None
    assert "Newey-West (1994) automatic lag" in view.remedies.caption
