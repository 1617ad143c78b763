"""The one place for input rules: argument checks, the constant detector and the k' rule.

Every public entry point (the stats functions, ``diagnose``, ``screen``, the panel, the magic
and the command line) validates through these functions, so the same mistake gets the same
exception kind and the same one-line message everywhere: a value of the wrong type is a
TypeError, a value of the right type outside its range a ValueError, and the message names
the argument, what was expected and what was received.  Nothing here copies an n-by-n matrix.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass, fields

import numpy as np

from .results import TestResult, _fmt
from .results import check_alternative as check_alternative  # re-exported: one place for input rules
from .tall import column_tops, map_blocks, r_factor, row_blocks, stacked


def _describe(value) -> str:
    if isinstance(value, np.ndarray):
        return f"array of shape {value.shape}"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _float_array(x, name: str, expected: str) -> np.ndarray:
    """``x`` as a float ndarray, or a TypeError naming the argument and what was expected."""
    if x is None:
        raise TypeError(f"'{name}' must be {expected} (got None)")
    try:
        return np.asarray(x, dtype=float)
    except (TypeError, ValueError):
        raise TypeError(f"'{name}' must be {expected} (got {_describe(x)})") from None


def as_vector(x, name: str, *, min_len: int = 1) -> np.ndarray:
    """Return ``x`` as a finite 1-D float array of at least ``min_len`` items."""
    arr = _float_array(x, name, "a 1-D array of floats")
    if arr.ndim == 2 and 1 in arr.shape:
        arr = arr.reshape(-1)
    if arr.ndim != 1:
        raise ValueError(f"'{name}' must be 1-D (got shape {arr.shape})")
    finite = None if _surely_finite(arr) else np.isfinite(arr)
    if finite is not None and not finite.all():
        pos = int(np.flatnonzero(~finite)[0])
        raise ValueError(
            f"'{name}' must be finite (got {arr[pos]} at position {pos}; {int((~finite).sum())} non-finite values)"
        )
    if arr.shape[0] < min_len:
        raise ValueError(f"'{name}' must have at least {min_len} observations (got {arr.shape[0]})")
    return arr


def as_design(exog, n: int, name: str = "exog", *, full_rank: bool = True, scale=None) -> np.ndarray:
    """Return ``exog`` as a finite 2-D float array with ``n`` rows (and full column rank, judged on
    the columns divided by ``scale`` when given).  Never copies a float array, and reads it in row
    blocks (no n x k mask or copy for the checks)."""
    arr = _float_array(exog, name, "a 2-D array of floats")
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise ValueError(f"'{name}' must be 2-D (n x k) (got shape {arr.shape})")
    if arr.shape[0] != n:
        raise ValueError(f"'{name}' must have {n} rows to match the residuals (got {arr.shape[0]})")
    if arr.shape[1] < 1:
        raise ValueError(f"'{name}' must have at least one column (got shape {arr.shape})")
    bad = _first_nonfinite(arr)
    if bad is not None:
        row, col = bad
        raise ValueError(f"'{name}' must be finite (got {arr[row, col]} at row {row}, column {col})")
    if full_rank:
        _check_rank(design_rank(arr, scale), arr.shape[1], name)
    return arr


def _check_rank(rank: int, k: int, name: str) -> None:
    if rank < k:
        raise ValueError(f"'{name}' must have full column rank {k} (got rank {rank})")


def _rank_of_r(R: np.ndarray, n: int) -> int:
    """The rank of an n x k matrix from its R factor, as numpy's ``matrix_rank`` counts it
    (singular values above s_max max(n, k) eps)."""
    s = np.linalg.svd(R, compute_uv=False)
    return int(np.count_nonzero(s > s.max() * max(n, R.shape[1]) * np.finfo(float).eps)) if s.size else 0


def check_rank_of_r(R: np.ndarray, n: int, name: str = "exog") -> None:
    """The full-rank check of :func:`as_design` for the n x k matrix whose R factor is ``R``."""
    _check_rank(_rank_of_r(R, n), R.shape[1], name)


def _surely_finite(arr: np.ndarray) -> bool:
    """True when every value of ``arr`` is finite, shown by one cheap pass: a sum is finite only
    if every term is (a NaN or infinity anywhere makes it NaN or infinite).  False means "look
    closer" (a sum of finite values can still overflow)."""
    with np.errstate(over="ignore", invalid="ignore"):
        return bool(np.isfinite(np.sum(arr)))


def finite_rows(X: np.ndarray) -> np.ndarray:
    """Boolean mask of the rows of a 2-D array whose values are all finite (read in row blocks)."""
    if _surely_finite(X):
        return np.ones(X.shape[0], dtype=bool)
    out = np.empty(X.shape[0], dtype=bool)

    def one(a, b):
        out[a:b] = np.isfinite(X[a:b]).all(axis=1)

    map_blocks(X.shape[0], one)
    return out


def _first_nonfinite(arr: np.ndarray):
    """(row, column) of the first value of a 2-D array that is not finite, or None (read in row
    blocks, so no n x k mask is made)."""
    if _surely_finite(arr):
        return None
    for a, b in row_blocks(arr.shape[0]):
        finite = np.isfinite(arr[a:b])
        if not finite.all():
            row, col = (int(i[0]) for i in np.nonzero(~finite))
            return a + row, col
    return None


def design_rank(X: np.ndarray, scale=None) -> int:
    """The rank of an n x k matrix (its columns divided by ``scale`` when given) as numpy's
    ``matrix_rank`` counts it (singular values above s_max max(n, k) eps), from the singular
    values of its R factor (read in row blocks, :mod:`lagsight.stats.tall`)."""
    n, k = X.shape
    if n == 0 or k == 0:
        return 0
    R = r_factor(n, k, (lambda a, b: X[a:b]) if scale is None else (lambda a, b: X[a:b] / scale))
    return _rank_of_r(R, n)


def check_int(value, name: str, *, minimum: int) -> int:
    """Return ``value`` as an int no smaller than ``minimum``.

    Booleans and floats are refused (TypeError), even 3.0: an option that counts lags or
    draws is a whole number, and 2.5 silently becoming 2 hides a mistake.
    """
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise TypeError(f"'{name}' must be an integer ≥ {minimum} (got {_describe(value)})")
    value = int(value)
    if value < minimum:
        raise ValueError(f"'{name}' must be an integer ≥ {minimum} (got {value})")
    return value


def check_optional_int(value, name: str, *, minimum: int) -> int | None:
    """None (meaning: choose for me), or :func:`check_int`."""
    return None if value is None else check_int(value, name, minimum=minimum)


def check_period(value, name: str = "period") -> int | None:
    """A seasonal period: None (infer from the index), 0 (no seasonal test) or an integer ≥ 2."""
    if value is None:
        return None
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise TypeError(f"'{name}' must be 0 (off) or an integer ≥ 2 (got {_describe(value)})")
    if int(value) == 1 or value < 0:
        raise ValueError(f"'{name}' must be 0 (off) or an integer ≥ 2 (got {int(value)})")
    return int(value)


def check_flag(value, name: str) -> bool:
    """Return ``value`` if it is True or False (numpy booleans included)."""
    if not isinstance(value, (bool, np.bool_)):
        raise TypeError(f"'{name}' must be True or False (got {_describe(value)})")
    return bool(value)


def check_alpha(alpha) -> float:
    """Return ``alpha`` as a float in (0, 1)."""
    if isinstance(alpha, bool) or not isinstance(alpha, numbers.Real):
        raise TypeError(f"'alpha' must be a number in (0, 1) (got {_describe(alpha)})")
    alpha = float(alpha)
    if not 0.0 < alpha < 1.0:
        raise ValueError(f"'alpha' must be in (0, 1) (got {alpha})")
    return alpha


def check_choice(value, name: str, choices: tuple):
    """Return ``value`` if it is one of ``choices``."""
    # equal and of the same kind: 1 is not True, and an array is never a choice
    if not any(isinstance(value, type(c)) and value == c for c in choices):
        opts = ", ".join(repr(c) for c in choices)
        raise ValueError(f"'{name}' must be one of {opts} (got {_describe(value)})")
    return value


def check_order_arg(order) -> str:
    """The ``order`` option: 'auto', 'keep', 'index' or a column name (a string either way)."""
    if not isinstance(order, str):
        raise TypeError(f"'order' must be 'auto', 'keep', 'index' or a column name (got {_describe(order)})")
    return order


def check_names(names, k: int, name: str = "names") -> tuple:
    """Return ``k`` column names, made up as x0, x1, ... when ``names`` is None."""
    if names is None:
        return tuple(f"x{i}" for i in range(k))
    if isinstance(names, str):
        raise TypeError(f"'{name}' must be a sequence of {k} strings (got a single string {names!r})")
    names = tuple(str(s) for s in names)
    if len(names) != k:
        raise ValueError(f"'{name}' must have one entry per column, {k} (got {len(names)})")
    return names


def constant_columns(exog: np.ndarray) -> np.ndarray:
    """Boolean mask of columns that are constant and non-zero (a literal constant column).

    Read in row blocks, and a column stops being read at its first value unlike the first row's,
    so a design with one constant column costs about one pass over that column."""
    exog = np.asarray(exog)
    if exog.shape[0] == 0:
        return np.zeros(exog.shape[1], bool)
    first = exog[0]
    alive = np.flatnonzero(first != 0)
    for a, b in row_blocks(exog.shape[0]):
        if not alive.size:
            break
        block = exog[a:b, alive] if alive.size < exog.shape[1] else exog[a:b]
        alive = alive[np.all(block == first[alive], axis=0)]
    out = np.zeros(exog.shape[1], dtype=bool)
    out[alive] = True
    return out


#: relative distance of the ones vector from the column space below which the columns span a
#: constant: far above rounding of an exact span (about 1e-15), far below data that merely varies little
CONSTANT_GAP = 1e-9


def _span_r(X: np.ndarray, top: np.ndarray, extra=()) -> np.ndarray:
    """The R factor of [X / top, 1, *extra] (columns of ``extra`` are vectors), accumulated block by
    block (:func:`lagsight.stats.tall.r_factor`: memory one block plus (k+2)^2, never n x k beyond
    the input), the first pass's Gram matrix from products of the whole arrays."""
    n, k = X.shape
    parts = [np.broadcast_to(np.float64(1.0), (n,)), *extra]
    m = k + len(parts)
    with np.errstate(over="ignore", invalid="ignore"):
        G = np.empty((m, m))
        G[:k, :k] = (X.T @ X) / np.outer(top, top)
        G[:k, k] = G[k, :k] = X.sum(axis=0) / top
        G[k, k] = float(n)
        for i, v in enumerate(extra, start=k + 1):
            G[:k, i] = G[i, :k] = (X.T @ v) / top
            G[k, i] = G[i, k] = float(v.sum())
            for j, w in enumerate(extra[: i - k], start=k + 1):
                G[i, j] = G[j, i] = float(v @ w)
    return r_factor(n, m, stacked(X, *parts, scale=np.concatenate([top, np.ones(len(parts))])), gram=G)


def _span_gap(R: np.ndarray, k: int, n: int) -> float:
    """The distance from the ones vector (column k of the matrix R factors) to the columns before
    it, relative to its length sqrt(n): the last diagonal entry of R for those columns."""
    return abs(float(R[k, k])) / np.sqrt(n)


def has_constant(exog) -> bool:
    """True when a constant lies in the column space of ``exog``.

    This is the one constant detector: a literal column of ones (or any non-zero
    constant) is found in O(n k); otherwise columns that add up to a constant (a full
    set of dummies, say) are found by the distance from the ones vector to the column
    space, with the columns scaled to unit size first, below :data:`CONSTANT_GAP`.
    Rows with a non-finite entry are left out.
    """
    X = np.asarray(exog, dtype=float)
    if X.ndim == 1:
        X = X[:, None]
    if X.ndim != 2 or X.shape[1] == 0 or X.shape[0] == 0:
        return False
    keep = finite_rows(X)  # one cheap pass when every value is finite
    if not keep.all():
        X = X[keep]
        if X.shape[0] == 0:
            return False
    if constant_columns(X).any():
        return True
    if X.shape[0] <= X.shape[1] + 1:  # too few rows for the blocked R: a tiny least-squares problem
        Xs, ones = unit_columns(X), np.ones(X.shape[0])
        r = ones - Xs @ np.linalg.lstsq(Xs, ones, rcond=None)[0]
        return bool(np.linalg.norm(r) < CONSTANT_GAP * np.sqrt(X.shape[0]))
    top = column_tops(X)
    top = np.where(top > 0, top, 1.0)
    return bool(_span_gap(_span_r(X, top), X.shape[1], X.shape[0]) < CONSTANT_GAP)


def has_constant_sharing_r(X: np.ndarray, v: np.ndarray):
    """:func:`has_constant` for a finite X with more than k + 1 rows, and the R factor its span
    check computed, of [X / top, 1, v] (the vector ``v`` after the ones): a fit of v on X and a
    constant then needs no pass of its own.  Returns (decision, R or None, top); R is None when a
    literal constant column decided."""
    n, k = X.shape
    if k == 0 or n <= k + 1 or constant_columns(X).any():
        return has_constant(X), None, None
    top = column_tops(X)
    top = np.where(top > 0, top, 1.0)
    R = _span_r(X, top, (v,))
    return bool(_span_gap(R, k, n) < CONSTANT_GAP), R, top


def k_prime(rank: int, has_const: bool) -> int:
    """The k' rule: regressors excluding the constant, as the published bounds count them."""
    return int(rank) - (1 if has_const else 0)


def scaled(v) -> tuple[np.ndarray, float]:
    """(``v`` divided by its largest absolute value, that value); 1 and ``v`` itself when all zero
    or already of unit size (no copy).

    The serial-correlation statistics are scale-free; on unit-sized values sums of squares stay finite
    for data near 1e200 and normal (not subnormal) for data near 1e-200.
    """
    v = np.asarray(v, float)
    top = float(np.max(np.abs(v))) if v.size else 0.0
    if top == 0.0 or top == 1.0:
        return v, 1.0
    return v / top, top


def unit_scale(v) -> np.ndarray:
    """``v`` divided by its largest absolute value (see :func:`scaled`)."""
    return scaled(v)[0]


def scaled_columns(X) -> tuple[np.ndarray, np.ndarray]:
    """(each column of ``X`` divided by its largest absolute value, those values): the same column
    space, comparable sizes.  No copy when every column is already of unit size (or zero)."""
    X = np.asarray(X, float)
    top = column_tops(X) if X.size else np.ones(X.shape[1:])
    top = np.where(top > 0, top, 1.0)
    if np.all(top == 1.0):
        return X, top
    return X / top, top


def unit_columns(X) -> np.ndarray:
    """Each column of ``X`` divided by its largest absolute value (see :func:`scaled_columns`)."""
    return scaled_columns(X)[0]


def readonly(a) -> np.ndarray:
    """A read-only copy of ``a`` (results are frozen, so are their arrays)."""
    a = np.array(a, copy=True)
    a.setflags(write=False)
    return a


@dataclass(frozen=True)
class ArrayResult(TestResult):
    """TestResult whose extra fields may be numpy arrays."""

    def _summary_pairs(self):
        pairs = []
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name in ("name", "notes") or value is None:
                continue
            if isinstance(value, tuple) and not value:
                continue
            pairs.append((f.name, value))
        return pairs

    def __str__(self) -> str:
        lines = [self.name or type(self).__name__]
        for key, value in self._summary_pairs():
            if isinstance(value, np.ndarray):
                text = np.array2string(value, precision=6, separator=", ", threshold=12)
            else:
                text = _fmt(value)
            lines.append(f"  {key:<12} {text}")
        lines.extend(f"  note: {note}" for note in self.notes)
        return "\n".join(lines)


def check_label(value, name: str):
    """Return one column label: ``value`` itself, or the single item of a one-item list or tuple."""
    if isinstance(value, (list, tuple)):
        if len(value) != 1:
            raise ValueError(
                f"'{name}' must be one column name (got a {type(value).__name__} of {len(value)}: {_describe(value)})"
            )
        value = value[0]
    try:
        hash(value)
    except TypeError:
        raise TypeError(f"'{name}' must be a column name (got {type(value).__name__})") from None
    if value is None or isinstance(value, (float, np.floating)) and value != value:
        raise ValueError(f"'{name}' must be a column name (got {value!r})")
    return value


def check_labels(value, name: str) -> list:
    """Return a list of column labels from one label or a list/tuple of them, each named once."""
    many = hasattr(value, "__iter__") and not isinstance(value, (str, bytes))
    items = list(value) if many else [value]
    labels = []
    for item in items:
        try:
            hash(item)
        except TypeError:
            raise TypeError(
                f"'{name}' must be a column name or a list of column names (got an item of type {type(item).__name__})"
            ) from None
        if item in labels:
            raise ValueError(f"'{name}' names column {item!r} more than once (got {_describe(value)})")
        labels.append(item)
    return labels
