"""Row-order guard: are the residuals in time order, and is the time axis regular?

Serial-correlation tests compare each residual with the one in the next row, so
they only mean something when row order is time order.  :func:`check_order`
measures how far the rows are from that (shuffled or reversed rows, repeated
time stamps, irregular gaps, interleaved groups), decides the order to test in,
and says plainly what it found.  It never sorts silently.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .formats import format_count
from .hints import option_hint
from .inputs import ResidualData, _rows, frame_column
from .stats._arrays import check_order_arg

_MODES = ("auto", "keep", "index")
_SHUFFLE_FRACTION = 0.2  # share of backward steps above which rows look shuffled (our own threshold)


@dataclass(frozen=True, eq=False)
class OrderReport:
    """What :func:`check_order` found and the order it chose.

    Attributes
    ----------
    permutation : ndarray of int
        Row positions in the order the residuals are to be tested.
    order_used : str
        Short phrase such as 'row order' or 'sorted by the index'.
    warnings : tuple of str
        Findings, as sentences.
    flags : dict
        ``monotonic``, ``shuffled``, ``reversed``, ``descending_fraction``,
        ``duplicate_stamps``, ``gaps``, ``largest_gap``, ``usual_step``,
        ``interleaved_groups``, ``n_groups``, ``group_runs``, ``missing_stamps``,
        ``sorted`` and ``key`` (what the order was judged on).
    """

    permutation: np.ndarray
    order_used: str
    warnings: tuple = ()
    flags: dict = field(default_factory=dict)

    def apply(self, data: ResidualData) -> ResidualData:
        """Return ``data`` reordered by :attr:`permutation` (with a note if rows moved)."""
        if self.permutation.size != data.n:
            raise ValueError(f"'data' must have {self.permutation.size} rows to apply this order (got {data.n})")
        if not self.flags.get("sorted"):
            return data
        return data.reorder(self.permutation).with_notes(f"The rows were {self.order_used} before testing.")


def _ranks(key: pd.Index) -> tuple[np.ndarray | None, int]:
    """Dense ranks of ``key`` (ties share a rank, missing ones rank last) and the missing count."""
    if key.dtype == object and pd.api.types.infer_dtype(key, skipna=True).startswith("mixed"):
        return None, 0  # pandas would order mixed types by type first, which is no time order
    try:
        codes = pd.factorize(key, sort=True)[0].astype(np.int64)
    except TypeError:
        return None, 0
    missing = codes < 0
    codes[missing] = codes.max() + 1 if codes.size else 0
    return codes, int(missing.sum())


def _group_codes(groups) -> np.ndarray | None:
    return None if groups is None else pd.factorize(np.asarray(groups))[0].astype(np.int64)


def _resolve_key(data: ResidualData, order):
    """Return (key index, description, whether to sort)."""
    check_order_arg(order)
    if order == "auto" and data.order_values is not None:
        name = data.order_name or "time"
        return pd.Index(data.order_values), f"column {name}", True
    if order in _MODES:
        return data.index, "the index", order == "index"
    if data.frame is not None and order in data.frame.columns:
        return pd.Index(frame_column(data.frame, order, "order")), f"column {order}", True
    if data.order_values is not None and order == data.order_name:
        return pd.Index(data.order_values), f"column {order}", True
    columns = list(data.frame.columns) if data.frame is not None else ([data.order_name] if data.order_name else [])
    raise ValueError(
        f"'order' must be 'auto', 'keep', 'index' or a column name; column {order!r} not found (columns: {columns})"
    )


def _resolve_groups(data: ResidualData, groups):
    if groups is None:
        return data.groups
    if isinstance(groups, str):
        if data.frame is None or groups not in data.frame.columns:
            raise ValueError(
                f"'groups': column {groups!r} not found (columns: "
                f"{list(data.frame.columns) if data.frame is not None else []})"
            )
        return frame_column(data.frame, groups, "groups").to_numpy()
    arr = np.asarray(groups)
    if arr.shape != (data.n,):
        raise ValueError(f"'groups' must have one label per row ({data.n}) (got shape {arr.shape})")
    return arr


def _time_axis(stamps: pd.Index):
    """Integer positions of sorted unique time stamps in their natural unit, and that unit."""
    if isinstance(stamps, pd.PeriodIndex):
        return stamps.asi8.astype(np.int64), _period_unit(stamps.freqstr)
    wall = stamps.tz_localize(None) if stamps.tz is not None else stamps  # calendar steps on wall-clock time
    tod = wall - wall.normalize()
    same_time = len(wall) > 1 and (tod == tod[0]).all()
    if same_time and ((wall.day == wall.day[0]).all() or wall.is_month_end.all()):
        return (wall.year * 12 + wall.month).to_numpy(np.int64), "month"
    days = wall.normalize().to_numpy().astype("datetime64[D]")
    if same_time and (wall.day_of_week < 5).all():
        pos = np.busday_count(days[0], days).astype(np.int64)
        if np.any(np.diff(days).astype(int) == 3) and np.median(np.diff(pos)) == 1:
            return pos, "business day"
    span = wall if same_time else stamps  # daily or coarser: wall clock; finer: elapsed time across DST
    return (span - span[0]).to_numpy().astype("timedelta64[ns]").astype(np.int64), "ns"


def _period_unit(freqstr: str) -> str:
    base = freqstr.split("-")[0].lstrip("0123456789")
    return {
        "Q": "quarter",
        "QE": "quarter",
        "M": "month",
        "ME": "month",
        "D": "day",
        "h": "hour",
        "H": "hour",
        "W": "week",
        "Y": "year",
        "YE": "year",
        "A": "year",
        "B": "business day",
        "min": "minute",
        "s": "second",
    }.get(base, f"period of {freqstr}")


def _fmt_step(k: int, unit: str) -> str:
    if unit == "ns":
        td = pd.Timedelta(int(k), "ns")
        for name, size in (("week", "7D"), ("day", "1D"), ("hour", "1h"), ("minute", "1min"), ("second", "1s")):
            whole, rest = divmod(td, pd.Timedelta(size))
            if rest == pd.Timedelta(0) and whole >= 1:
                return f"{whole} {name}{'s' if whole != 1 else ''}"
        return str(td)
    return f"{k} {unit}{'s' if k != 1 else ''}"


def _stamp(x) -> str:
    if isinstance(x, pd.Timestamp) and x == x.normalize():
        return str(x.date())
    return str(x)


def _gap_summary(key: pd.Index, gcodes: np.ndarray | None) -> dict:
    """Irregular gaps of a date/period key, counted within each group."""
    if not isinstance(key, (pd.DatetimeIndex, pd.PeriodIndex)):
        return {"gaps": 0, "largest_gap": None, "usual_step": None}
    parts = [key] if gcodes is None else [key[gcodes == g] for g in np.unique(gcodes)]
    pieces = []
    for part in parts:
        stamps = part[~part.isna()].unique().sort_values()
        if len(stamps) >= 2:
            pos, unit = _time_axis(stamps)
            pieces.append((stamps, np.diff(pos), unit))
    units = {unit for _, _, unit in pieces}
    if not pieces or len(units) != 1:
        return {"gaps": 0, "largest_gap": None, "usual_step": None}
    unit = units.pop()
    all_diffs = np.concatenate([d for _, d, _ in pieces])
    values, counts = np.unique(all_diffs, return_counts=True)
    step = values[np.argmax(counts)]  # the most common difference; ties go to the smallest
    n_gaps, big, where = int((all_diffs > step).sum()), step, None
    for stamps, diffs, _ in pieces:
        j = int(np.argmax(diffs))
        if diffs[j] > big:
            big, where = diffs[j], (stamps[j], stamps[j + 1])
    largest = None if where is None else f"{_fmt_step(big, unit)} between {_stamp(where[0])} and {_stamp(where[1])}"
    return {"gaps": n_gaps, "largest_gap": largest, "usual_step": _fmt_step(step, unit)}


def check_order(data: ResidualData, *, order: str = "auto", groups=None) -> OrderReport:
    """Check that the rows are in time order and choose the order to test in.

    Parameters
    ----------
    data : ResidualData
    order : {'auto', 'keep', 'index'} or str
        'auto' tests in row order (sorted by ``data.order_values`` when the
        input named a ``time`` column) and warns when the index is not
        increasing; 'keep' tests in row order; 'index' sorts by the index
        (stable); any other string sorts by that column of ``data.frame``.
    groups : str or array-like, optional
        Group labels (default ``data.groups``).  Order, repeats and gaps are
        then judged within each group, and sorting keeps groups in blocks.

    Returns
    -------
    OrderReport
    """
    n = data.n
    key, key_name, do_sort = _resolve_key(data, order)
    gcodes = _group_codes(_resolve_groups(data, groups))
    in_order = gcodes is None and _strictly_increasing(key)
    ranks, n_missing = (None, 0) if in_order else _ranks(key)
    warnings, flags = [], {"key": key_name, "missing_stamps": n_missing}
    within = " within groups" if gcodes is not None else ""
    if in_order:
        # a strictly increasing key without groups (a RangeIndex, a regular date index): what the
        # ranks below would find, without ranking or sorting n values
        perm = None
        flags.update(monotonic=True, shuffled=False, reversed=False, descending_fraction=0.0, duplicate_stamps=0)
    elif ranks is None:
        if do_sort:
            raise ValueError(f"'order': {key_name} cannot be sorted (mixed types, e.g. {key[:3].tolist()})")
        warnings.append(f"The row order could not be checked: {key_name} mixes values that cannot be compared.")
        perm = np.arange(n)
        flags.update(monotonic=None, shuffled=False, reversed=False, descending_fraction=None, duplicate_stamps=0)
    else:
        gsort = np.zeros(n, np.int64) if gcodes is None else gcodes
        has = np.asarray(key.notna())  # rows without a stamp take part in neither check below
        g_has, r_has = gsort[has], ranks[has]
        by_group = np.argsort(g_has, kind="stable")
        same = g_has[by_group][1:] == g_has[by_group][:-1]
        steps = np.diff(r_has[by_group])[same]
        n_desc, n_steps = int((steps < 0).sum()), int(steps.size)
        frac = n_desc / n_steps if n_steps else 0.0
        dup = int(r_has.size - np.unique(g_has * (ranks.max() + 2) + r_has).size)
        flags.update(
            monotonic=n_desc == 0,
            shuffled=0 < n_desc < n_steps,
            reversed=n_steps > 0 and n_desc == n_steps,
            descending_fraction=frac,
            duplicate_stamps=dup,
        )
        if do_sort:
            inner = np.argsort(ranks, kind="stable")
            perm = inner[np.argsort(gsort[inner], kind="stable")]
        else:
            perm = np.arange(n)
        if n_desc and do_sort:
            warnings.append(
                f"The rows were not in order of {key_name}{within} ({format_count(n_desc)} of "
                f"{format_count(n_steps)} steps went backwards); they were sorted by it for testing. If the "
                "sample is a random subset of a longer series, the sorted rows skip the times left out."
            )
        elif flags["reversed"]:
            warnings.append(
                f"{key_name.capitalize()} decreases throughout{within}: the rows run backwards in "
                "time. Serial-correlation statistics do not change under reversal, but plots read "
                f"backwards; {option_hint('order', 'index')} sorts by the index."
            )
        elif n_desc:
            looks = " This looks like a shuffled or randomly split sample." if frac >= _SHUFFLE_FRACTION else ""
            warnings.append(
                f"{key_name.capitalize()} is not in increasing order{within}: {format_count(n_desc)} of "
                f"{format_count(n_steps)} steps ({frac:.0%}) go backwards.{looks} Row order is not time "
                f"order, so serial-correlation tests on row order are not meaningful. "
                f"{option_hint('order', 'index')} sorts by the index (stable); otherwise put the rows "
                "in time order first."
            )
        if dup:
            advice = (
                "check for repeated records"
                if gcodes is not None
                else (
                    f"if the data hold several series, pass {option_hint('groups', '<group column>')} "
                    "to test them separately"
                )
            )
            warnings.append(
                f"{_rows(dup)} share{'s' * (dup == 1)} a time stamp with an earlier row"
                f"{' of the same group' * bool(within)}; neighbouring residuals with one stamp "
                f"are not one step apart ({advice})."
            )
        if n_missing:
            warnings.append(
                f"{_rows(n_missing)} ha{'s' if n_missing == 1 else 've'} no value in {key_name}"
                + ("; they were put last." if do_sort else "; order was checked on the other rows.")
            )
    flags.update(_gap_summary(key, gcodes))
    if flags["gaps"]:
        warnings.append(
            f"The time stamps have {format_count(flags['gaps'])} irregular gaps{within} (usual step "
            f"{flags['usual_step']}; largest gap {flags['largest_gap']}). Across a gap, "
            "the next row is more than one time step later."
        )
    if gcodes is not None:
        ordered = gcodes[perm]
        runs = 1 + int((ordered[1:] != ordered[:-1]).sum()) if n else 0
        n_groups = int(np.unique(gcodes).size)
        flags.update(interleaved_groups=runs > n_groups, n_groups=n_groups, group_runs=runs)
        if runs > n_groups:
            warnings.append(
                f"The rows of {format_count(n_groups)} groups are interleaved ({format_count(runs)} runs instead "
                f"of {format_count(n_groups)} blocks): neighbouring residuals often belong to different "
                f"series. Test each group separately, or sort with {option_hint('order', 'index')} to put "
                "each group in one block."
            )
    else:
        flags.update(interleaved_groups=False, n_groups=None, group_runs=None)
    flags["sorted"] = False if perm is None else bool(np.any(perm != np.arange(n)))
    perm = np.arange(n, dtype=np.intp) if perm is None else perm.astype(np.intp)
    used = f"sorted by {key_name}{within}" if do_sort else "row order"
    return OrderReport(permutation=perm, order_used=used, warnings=tuple(warnings), flags=flags)


def _strictly_increasing(key: pd.Index) -> bool:
    """True when every stamp is present and larger than the one before (O(n), cached by pandas
    for an index; at once for a RangeIndex)."""
    try:
        return bool(not key.hasnans and key.is_monotonic_increasing and key.is_unique)
    except TypeError:
        return False


def _offset_period(off) -> int | None:
    o = pd.offsets
    table = (
        ((o.QuarterBegin, o.QuarterEnd, o.BQuarterBegin, o.BQuarterEnd), 4),
        ((o.MonthBegin, o.MonthEnd, o.BusinessMonthBegin, o.BusinessMonthEnd), 12),
        ((o.Week,), 52),
        ((o.BusinessDay,), 5),
        ((o.Day,), 7),
        ((o.Hour,), 24),
    )
    if off is None or getattr(off, "n", 1) != 1:
        return None
    for classes, period in table:
        if isinstance(off, classes):
            return period
    return None


def infer_seasonal_period(index) -> int | None:
    """Seasonal period of a date or period index, or None.

    4 for quarterly, 12 for monthly, 52 for weekly, 7 for daily, 5 for
    business-daily, 24 for hourly data (common practice).  The frequency is
    taken from the index, inferred when unset, or read from the usual step
    between stamps when the index has gaps.  Other frequencies, and
    multiples such as '2h', give None.
    """
    if not isinstance(index, (pd.DatetimeIndex, pd.PeriodIndex)):
        return None
    if index.freq is not None:
        return _offset_period(index.freq)
    stamps = index[~index.isna()].unique().sort_values()
    if len(stamps) < 3:
        return None
    with warnings.catch_warnings():
        # pandas 3 warns that infer_freq will return an offset; to_offset accepts both
        warnings.simplefilter("ignore")
        inferred = pd.infer_freq(stamps)
    if inferred is not None:
        return _offset_period(pd.tseries.frequencies.to_offset(inferred))
    pos, unit = _time_axis(stamps)
    values, counts = np.unique(np.diff(pos), return_counts=True)
    step = int(values[np.argmax(counts)])
    if unit == "month":
        return {1: 12, 3: 4}.get(step)
    if unit == "business day":
        return 5 if step == 1 else None
    day, hour = pd.Timedelta("1D").value, pd.Timedelta("1h").value
    return {7 * day: 52, day: 7, hour: 24}.get(step)


def infer_bg_order(index) -> int:
    """A Breusch-Godfrey lag order for data on ``index``.

    Common practice: the seasonal period (:func:`infer_seasonal_period`) when
    there is one and it is at most ``n // 5``; otherwise ``min(10, n // 5)``;
    never below 1.
    """
    n = len(index)
    cap = max(1, n // 5)
    period = infer_seasonal_period(index)
    if period is not None and period <= cap:
        return period
    return max(1, min(10, n // 5))
