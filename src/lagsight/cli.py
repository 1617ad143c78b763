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
EXIT_CODES = {
    "no evidence": EXIT_CLEAN,
    "evidence": EXIT_FOUND,
    "cannot judge": EXIT_UNJUDGED,
    "not meaningful": EXIT_UNJUDGED,
}
#: share of a text column's values that must parse as dates for it to count as a date column (our own rule)
DATE_SHARE = 0.9

_EPILOG = """exit status:
  0  no evidence of autocorrelation at --alpha (this does not prove the errors are independent)
  1  evidence of autocorrelation
  2  usage or input error (one line on stderr)
  3  cannot judge (degenerate input: exact fit, constant response or residuals, n <= k + 1,
     values that overflow) or not meaningful (rows not in time order)

Without --time the row order is checked on the first column holding ISO 8601 dates (the output
names it); with --time the rows are sorted by that column first.  A --time column must hold numbers
or ISO 8601 dates and times (2024-03-01, 2024-03-01T09:30); any other form needs --time-format
(a strftime format such as %d/%m/%Y), so that no date is ever guessed."""


class _Parser(argparse.ArgumentParser):
    """argparse that exits with status 2 and a single line on errors."""

    def error(self, message):  # pragma: no cover - exercised through main()
        raise _InputError(message)


class _InputError(Exception):
    pass


def _parser() -> argparse.ArgumentParser:
    p = _Parser(prog="lagsight", description="Serial-correlation diagnosis of a regression's residuals.")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)
    r = sub.add_parser(
        "report",
        help="fit OLS on a CSV file, write the HTML report, print the verdict",
        description="Fit OLS on a CSV file, write the HTML report and print the verdict.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    r.add_argument("data", help="CSV file with a header row")
    r.add_argument("--y", required=True, help="response column")
    r.add_argument("--x", required=True, help="predictor columns, comma separated")
    r.add_argument(
        "--time",
        help="time column: rows are sorted by it and it becomes the index; numbers or "
        "ISO 8601 dates/times unless --time-format is given",
    )
    r.add_argument(
        "--time-format",
        metavar="FORMAT",
        help="strftime format of the --time values, e.g. %%d/%%m/%%Y or %%Y-%%m-%%d %%H:%%M",
    )
    r.add_argument("--groups", help="group column: the battery runs within each group")
    r.add_argument("--alpha", type=float, default=0.05, help="level of the tests (default 0.05)")
    r.add_argument("--alternative", default="positive", choices=("positive", "negative", "two-sided"))
    r.add_argument("-o", "--output", help="HTML report path (default: DATA stem + '_lagsight.html')")
    r.add_argument("--overwrite", action="store_true", help="replace the report file if it exists")
    r.add_argument("--quiet", action="store_true", help="print the verdict's headline only")
    return p


def _output_path(args) -> Path:
    """Where the report goes; a one-line error when that cannot be a file."""
    out = Path(args.output) if args.output else Path(args.data).with_name(Path(args.data).stem + "_lagsight.html")
    if out.is_dir():
        raise _InputError(f"-o {str(out)!r} is a folder; give a file name such as {str(out / 'report.html')!r}")
    if not out.parent.is_dir():
        raise _InputError(f"-o {str(out)!r}: the folder {str(out.parent)!r} does not exist")
    return out


def _examples(values) -> str:
    shown = [repr(v) for v in list(values)[:3]]
    return ", ".join(shown) + (", ..." if len(values) > 3 else "")


_TIME_HELP = "pass --time-format with their strftime format (e.g. --time-format %d/%m/%Y), or use a column of numbers"


def _iso_times(column: pd.Series):
    """The column parsed as ISO 8601 dates/times (NaT where a value is not one); None if time zones mix
    with values that have none."""
    text = column.astype("string")
    try:
        return pd.to_datetime(text, format="ISO8601", errors="coerce")
    except ValueError:  # offsets differ between values: one instant each, unless some have no offset
        zoned = text.dropna().str.contains(r"(?:Z|[+-]\d\d:?\d\d)$", regex=True)
        if not zoned.all():
            return None
        return pd.to_datetime(text, format="ISO8601", errors="coerce", utc=True)


def _time_values(column: pd.Series, name: str, fmt: str | None) -> pd.Series:
    """The values to sort by: numbers, ISO 8601 times, or times in --time-format; never a guess."""
    given = column.notna()
    if fmt is not None:
        try:
            parsed = pd.to_datetime(column.astype("string"), format=fmt, errors="coerce")
        except ValueError as err:
            raise _InputError(f"--time-format {fmt!r} cannot be used: {str(err).splitlines()[0]}") from None
        bad = given & parsed.isna()
        if bad.any():
            raise _InputError(
                f"--time {name!r}: {int(bad.sum())} value(s) do not match --time-format {fmt!r} "
                f"(first: {_examples(column[bad])})"
            )
        return parsed
    if pd.api.types.is_datetime64_any_dtype(column) or (
        pd.api.types.is_numeric_dtype(column) and not pd.api.types.is_bool_dtype(column)
    ):
        return column
    numbers = pd.to_numeric(column, errors="coerce")
    if (numbers.notna() == given).all() and given.any():
        return numbers
    parsed = _iso_times(column)
    if parsed is None:
        raise _InputError(
            f"--time {name!r} mixes values with and without a time zone "
            f"(first: {_examples(column[given])}); write every value with its UTC offset, or "
            f"{_TIME_HELP}"
        )
    bad = given & parsed.isna()
    if bad.any():
        raise _InputError(
            f"--time {name!r}: {int(bad.sum())} value(s) are neither numbers nor ISO 8601 dates "
            f"(first: {_examples(column[bad])}); {_TIME_HELP}"
        )
    return parsed


def _header(path: Path) -> list:
    """The column names exactly as the file's first row has them (pandas renames repeats to 'x.1')."""
    try:
        return [str(c) for c in pd.read_csv(path, header=None, nrows=1, dtype=str).iloc[0].tolist()]
    except (ValueError, IndexError, pd.errors.ParserError, UnicodeDecodeError):
        return []


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
    from .inputs import typed_column, typed_columns

    try:
        predictors = typed_columns(args.x, frame.columns, "--x")
    except ValueError as err:
        raise _InputError(str(err)) from None
    args.y = typed_column(args.y, frame.columns)
    needed = [args.y, *predictors] + [c for c in (args.time, args.groups) if c]
    header = _header(path)
    repeated = sorted({c for c in needed if header.count(c) > 1})
    if repeated:
        raise _InputError(
            f"{path.name} has more than one column named {', '.join(map(repr, repeated))}; "
            "rename the repeats so each column is named once"
        )
    missing = [c for c in needed if c not in frame.columns]
    if missing:
        raise _InputError(
            f"column(s) not in {path.name}: {', '.join(map(repr, missing))} "
            f"(have: {', '.join(map(repr, frame.columns))})"
        )
    twice = sorted({c for c in needed if needed.count(c) > 1})
    if twice:
        raise _InputError(
            f"column(s) {', '.join(map(repr, twice))} given for more than one of --y, --x, --time and --groups"
        )
    for col in [args.y, *predictors]:
        if not pd.api.types.is_numeric_dtype(frame[col]):
            bad = pd.to_numeric(frame[col], errors="coerce").isna() & frame[col].notna()
            raise _InputError(f"column {col!r} is not numeric (first bad value {frame[col][bad].iloc[0]!r})")
    args.checked_on = None
    if args.time:
        frame[args.time] = _time_values(frame[args.time], args.time, args.time_format)
        frame = frame.set_index(args.time)
    else:
        used = {args.y, *predictors, args.groups}
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
    parsed = _iso_times(column)  # only ISO 8601: a day-first or month-first date is never guessed
    if parsed is None or parsed[values.index].notna().mean() < DATE_SHARE:
        return None
    return parsed


def _report(args) -> int:
    from .diagnosis import diagnose
    from .formats import format_count
    from .hints import hint_syntax
    from .render.html import save_html
    from .stats._caught import caught_warnings

    if args.time_format is not None and not args.time:
        raise _InputError("--time-format needs --time (the column it describes)")
    out = _output_path(args)
    with caught_warnings() as caught:  # e.g. pandas on a CSV's mixed column types: printed as notes
        frame = _load(args)
    try:
        with hint_syntax("cli"):  # advice names this command's flags (--time, --x)
            diag = diagnose(
                frame,
                response=args.y,
                predictors=args.predictors,
                groups=args.groups,
                order="index" if args.time else "auto",
                alpha=args.alpha,
                alternative=args.alternative,
            )
    except (ValueError, TypeError, ArithmeticError, np.linalg.LinAlgError) as err:
        raise _InputError(str(err).splitlines()[0] or type(err).__name__) from None
    try:
        written = save_html(diag, out, overwrite=args.overwrite)
    except FileExistsError:
        raise _InputError(f"-o {str(out)!r} exists; add --overwrite to replace it") from None
    except (OSError, ValueError) as err:
        raise _InputError(f"-o {str(out)!r}: the report could not be written ({str(err).splitlines()[0]})") from None
    print(diag.verdict.headline)
    if args.quiet:
        return EXIT_CODES[diag.verdict.finding]
    if args.time:
        print(f"order: rows sorted by --time {args.time!r}")
    elif args.checked_on is not None:
        print(f"order: checked on the date column {args.checked_on!r} (pass --time {args.checked_on} to sort by it)")
    else:
        print("order: rows as given (no date column found; pass --time to name one)")
    print(f"rows: {format_count(diag.n)} of {format_count(len(frame))} tested")
    for note in (*caught.notes("reading the CSV"), *diag.notes):
        print(f"note: {note}")
    for note in diag.test_notes:
        print(f"test note, {note}")
    for caution in diag.verdict.cautions:
        print(f"caution: {caution}")
    print(f"report: {written}")
    return EXIT_CODES[diag.verdict.finding]


def main(argv=None) -> int:
    try:
        args = _parser().parse_args(argv)
        if args.command == "report":
            return _report(args)
    except _InputError as err:
        print(f"lagsight: error: {' '.join(str(err).splitlines())}", file=sys.stderr)
        return EXIT_ERROR
    return EXIT_ERROR  # pragma: no cover


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
