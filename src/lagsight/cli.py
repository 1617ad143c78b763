"""Command line: ``lagsight report DATA.csv --y COL --x COL[,COL...]``.

Fits the OLS regression, runs the diagnosis, writes the standalone HTML report
and prints the verdict.  Exit status: 0 no evidence of autocorrelation,
1 evidence found (or the rows are not in time order), 2 usage or input error
(one line on stderr), so the command can gate a model-validation pipeline.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

import pandas as pd

__all__ = ["main"]

EXIT_CLEAN, EXIT_FOUND, EXIT_ERROR = 0, 1, 2


class _Parser(argparse.ArgumentParser):
    """argparse that exits with status 2 and a single line on errors."""

    def error(self, message):  # pragma: no cover - exercised through main()
        raise _InputError(message)


class _InputError(Exception):
    pass


def _parser() -> argparse.ArgumentParser:
    p = _Parser(prog="lagsight", description="Serial-correlation diagnosis of a regression's residuals.")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)
    r = sub.add_parser("report", help="fit OLS on a CSV file, write the HTML report, print the verdict")
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
    if args.time:
        try:
            frame[args.time] = pd.to_datetime(frame[args.time])
        except (ValueError, TypeError):
            pass  # not a date: sort by its values as they are
        frame = frame.set_index(args.time)
    args.predictors = predictors
    return frame


def _report(args) -> int:
    from .diagnosis import diagnose
    from .render.html import save_html

    frame = _load(args)
    try:
        diag = diagnose(
            frame, response=args.y, predictors=args.predictors, groups=args.group,
            order="index" if args.time else "auto", alpha=args.alpha, alternative=args.alternative,
        )
    except (ValueError, TypeError) as err:
        raise _InputError(str(err).splitlines()[0]) from None
    out = Path(args.output) if args.output else Path(args.data).with_name(Path(args.data).stem + "_lagsight.html")
    written = save_html(diag, out)
    print(diag.verdict.headline)
    print(f"report: {written}")
    return EXIT_CLEAN if diag.verdict.finding == "no evidence" else EXIT_FOUND


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
