"""Command line: ``lagsight report DATA.csv --y COL --x COL[,COL...]``.

Fits the OLS regression, runs the diagnosis, writes the standalone HTML report
and prints the verdict.  Exit status (:data:`EXIT_CODES`): 0 no evidence of
autocorrelation, 1 evidence, 2 usage or input error (one line on stderr),
3 cannot judge or not meaningful, so the command can gate a model-validation
pipeline.  Without ``--time`` the order of the rows is checked on the first
column that holds dates, and the output says which column that was.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
import pandas as pd

__all__ = ["main"]

EXIT_CLEAN, EXIT_FOUND, EXIT_ERROR, EXIT_UNJUDGED = 0, 1, 2, 3
#: verdict finding -> exit status
EXIT_CODES = {"no evidence": EXIT_CLEAN, "evidence": EXIT_FOUND, "cannot judge": EXIT_UNJUDGED,
              "not meaningful": EXIT_UNJUDGED}
#: share of a text column's values that must parse as dates for it to count as a date column (our own rule)
DATE_SHARE = 0.9

_EPILOG = """exit status:
  0  no evidence of autocorrelation at --alpha (this does not prove the errors are independent)
  1  evidence of autocorrelation
  2  usage or input error (one line on stderr)
  3  cannot judge (degenerate input: exact fit, constant response or residuals, n <= k + 1,
     values that overflow) or not meaningful (rows not in time order)

Without --time the row order is checked on the first column holding dates (the output names it);
with --time the rows are sorted by that column first."""


class _Parser(argparse.ArgumentParser):
    """argparse that exits with status 2 and a single line on errors."""

    def error(self, message):  # pragma: no cover - exercised through main()
        raise _InputError(message)


class _InputError(Exception):
    pass


def _parser() -> argparse.ArgumentParser:
    p = _Parser(prog="lagsight", description="Serial-correlation diagnosis of a regression's residuals.")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)
    r = sub.add_parser("report", help="fit OLS on a CSV file, write the HTML report, print the verdict",
                       description="Fit OLS on a CSV file, write the HTML report and print the verdict.",
                       epilog=_EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    r.add_argument("data", help="CSV file with a header row")
    r.add_argument("--y", required=True, help="response column")
    r.add_argument("--x", required=True, help="predictor columns, comma separated")
    r.add_argument("--time", help="time column: rows are sorted by it and it becomes the index")
    r.add_argument("--group", help="group column: the battery runs within each group")
    r.add_argument("--alpha", type=float, default=0.05, help="level of the tests (default 0.05)")
    r.add_argument("--alternative", default="positive", choices=("positive", "negative", "two-sided"))
    r.add_argument("-o", "--output", help="HTML report path (default: DATA stem + '_lagsight.html')")
    return p


def _load(args) -> pd.DataFrame:
    path = Path(args.data)
    if not path.is_file():
        raise _InputError(f"no such file: {path}")
    try:
        frame = pd.read_csv(path)
    except pd.errors.EmptyDataError:
        raise _InputError(f"{path} is empty") from None
    except (pd.errors.ParserError, UnicodeDecodeError) as err:
        raise _InputError(f"{path} could not be read as CSV: {str(err).splitlines()[0]}") from None
    if frame.empty:
        raise _InputError(f"{path} has a header but no rows")
    if len(frame) < 3:
        raise _InputError(f"{path} has {len(frame)} row(s); at least 3 are needed")
    predictors = [c.strip() for c in args.x.split(",") if c.strip()]
    if not predictors:
        raise _InputError("--x names no column")
    needed = [args.y, *predictors] + [c for c in (args.time, args.group) if c]
    missing = [c for c in needed if c not in frame.columns]
    if missing:
        raise _InputError(f"column(s) not in {path.name}: {', '.join(missing)} (have: {', '.join(frame.columns)})")
    for col in [args.y, *predictors]:
        if not pd.api.types.is_numeric_dtype(frame[col]):
            bad = pd.to_numeric(frame[col], errors="coerce").isna() & frame[col].notna()
            raise _InputError(f"column {col!r} is not numeric (first bad value {frame[col][bad].iloc[0]!r})")
    args.checked_on = None
    if args.time:
        try:
            frame[args.time] = pd.to_datetime(frame[args.time])
        except (ValueError, TypeError):
            pass  # not a date: sort by its values as they are
        frame = frame.set_index(args.time)
    else:
        used = {args.y, *predictors, args.group}
        found = [c for c in frame.columns if c not in used and _as_dates(frame[c]) is not None]
        if found:
            args.checked_on = found[0]
            frame[found[0]] = _as_dates(frame[found[0]])
            frame = frame.set_index(found[0])
    args.predictors = predictors
    return frame


def _as_dates(column: pd.Series):
    """The column as datetimes when it holds dates (already, or as text that parses), else None."""
    if pd.api.types.is_datetime64_any_dtype(column):
        return column
    if not (pd.api.types.is_object_dtype(column) or pd.api.types.is_string_dtype(column)):
        return None
    values = column.dropna()
    if values.empty:
        return None
    import warnings
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the format is inferred; mixed or odd strings simply fail to parse
        try:
            parsed = pd.to_datetime(column, errors="coerce")
        except (ValueError, TypeError, OverflowError):
            return None
    if parsed[values.index].notna().mean() < DATE_SHARE:
        return None
    return parsed


def _report(args) -> int:
    from .diagnosis import diagnose
    from .render.html import save_html

    frame = _load(args)
    try:
        diag = diagnose(
            frame, response=args.y, predictors=args.predictors, groups=args.group,
            order="index" if args.time else "auto", alpha=args.alpha, alternative=args.alternative,
        )
    except (ValueError, TypeError, ArithmeticError, np.linalg.LinAlgError) as err:
        raise _InputError(str(err).splitlines()[0] or type(err).__name__) from None
    out = Path(args.output) if args.output else Path(args.data).with_name(Path(args.data).stem + "_lagsight.html")
    written = save_html(diag, out)
    print(diag.verdict.headline)
    if args.time:
        print(f"order: rows sorted by --time {args.time!r}")
    elif args.checked_on is not None:
        print(f"order: checked on the date column {args.checked_on!r} (pass --time {args.checked_on} to sort "
              "by it)")
    else:
        print("order: rows as given (no date column found; pass --time to name one)")
    print(f"report: {written}")
    return EXIT_CODES[diag.verdict.finding]


def main(argv=None) -> int:
    try:
        args = _parser().parse_args(argv)
        if args.command == "report":
            return _report(args)
    except _InputError as err:
        print(f"lagsight: error: {err}", file=sys.stderr)
        return EXIT_ERROR
    return EXIT_ERROR  # pragma: no cover


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
