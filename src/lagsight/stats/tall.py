"""Least squares on tall matrices, one block of rows at a time.

A design of n = 10^7 rows and k = 10 columns takes 0.8 GB.  Nothing here copies it: every routine
reads its matrix through a function ``block(a, b)`` that returns rows a..b-1 (a few MB at a time,
:data:`ROWS` rows), so the memory used beyond the input is O(ROWS x columns) whatever n is.

The R factor of a tall matrix A (A = QR, R upper triangular with a non-negative diagonal, Q never
formed) comes from Cholesky QR2 (Fukaya, Nakatsukasa, Yanagisawa and Yamamoto 2014; from memory):
R1 from the Gram matrix of A with its columns scaled to unit length, then R2 from the Gram matrix of
Q1 = A R1^{-1}, R = R2 R1.  Two passes of matrix products, and as accurate as Householder QR while
the scaled A has a condition number below 1e5 (:data:`GRAM_COND_LIMIT`, checked on the Gram matrix).
Otherwise (ill-conditioned or rank-deficient A) Householder QR of each block, then of the blocks'
R factors stacked (TSQR), which is backward stable for any A.  Values whose squares would overflow
or underflow are scaled column by column first.  With a good preconditioner (the R factor of a
nearby matrix) one pass suffices.  The second pass can also collect the lag-1 products of Q's rows
(:class:`LagProducts`), from which sums of lagged products of any u = A z follow in O(k^2).

:func:`solve_r` turns the R factor of [A, y] into the least-squares solution the way statsmodels'
OLS does (pseudo-inverse through the singular values, cut off at 1e-15 of the largest).
:func:`orthonormal_basis_t` writes Q' itself (the Durbin-Watson basis), once.  Blocks run one
thread per core (:func:`map_blocks`).
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

__all__ = [
    "ROWS",
    "GRAM_COND_LIMIT",
    "row_blocks",
    "column_tops",
    "r_factor",
    "solve_r",
    "Solution",
    "stacked",
    "one_blas_thread",
    "orthonormal_basis_t",
    "gram_of",
    "LagProducts",
    "map_blocks",
    "cores",
]

#: rows per block: 32768 x 12 doubles is 3 MB
ROWS = 1 << 15
#: smallest eigenvalue ratio of a column-scaled Gram matrix for Cholesky QR (condition number 1e5)
GRAM_COND_LIMIT = 1e-10
#: statsmodels' cut-off for singular values in its pseudo-inverse (statsmodels.tools.tools.pinv_extended)
PINV_RCOND = 1e-15
#: a preconditioned matrix this well conditioned needs one Cholesky pass only (condition number 10)
_ONE_PASS_LIMIT = 1e-2
#: rows of the basis whose Gram matrix is this close to the identity are orthonormal to rounding
#: (what the second Cholesky pass would leave: about 1e-14 at n = 10^6, measured); more, and the
#: second pass runs
_ORTHONORMAL = 1e-13

Block = Callable[[int, int], np.ndarray]


def one_blas_thread():
    """Limit BLAS to one thread (a context manager) while many small products run.

    Products of a few thousand rows by a dozen columns spend more time synchronising BLAS
    threads than computing, and far more when other processes share the cores (ten times
    slower with two threads on a busy two-core machine, measured); parallel callers such as
    the screening workers would also oversubscribe the cores.
    """
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - optional; results are the same, only slower
        return contextlib.nullcontext()
    return threadpool_limits(limits=1, user_api="blas")


def row_blocks(n: int, rows: int | None = None):
    """(start, stop) of consecutive row blocks covering 0..n-1 (:data:`ROWS` rows by default)."""
    rows = ROWS if rows is None else rows
    for a in range(0, n, rows):
        yield a, min(n, a + rows)


#: below this many rows the blocks run in the calling thread
POOL_MIN_ROWS = 1 << 18


def cores() -> int:
    """The cores this process may run on."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not on Linux
        return os.cpu_count() or 1


def map_blocks(n: int, fn, rows: int | None = None) -> list:
    """[fn(a, b) for every row block (a, b) of 0..n-1], in order, with BLAS on one thread.

    Long series share the blocks among one thread per core: numpy's loops and BLAS release the
    interpreter lock, so the blocks run side by side.  ``fn`` must only read shared arrays, or
    write to rows of its own block.
    """
    spans = list(row_blocks(n, rows))
    workers = min(len(spans), cores())
    with one_blas_thread():
        if workers <= 1 or n < POOL_MIN_ROWS:
            return [fn(a, b) for a, b in spans]
        with ThreadPoolExecutor(max_workers=workers) as pool:
            return list(pool.map(lambda ab: fn(*ab), spans))


def column_tops(X: np.ndarray) -> np.ndarray:
    """max_i |X[i, j]| for each column j, read in row blocks (no n x k temporary)."""
    X = np.asarray(X)
    top = np.zeros(X.shape[1:], dtype=float)
    for m in map_blocks(X.shape[0], lambda a, b: np.max(np.abs(X[a:b]), axis=0)):
        np.maximum(top, m, out=top)
    return top


class stacked:  # lower case: used like the function it replaced
    """``block`` for the matrix whose columns are ``parts`` side by side (2-D arrays or 1-D vectors),
    each column divided by its entry of ``scale`` when given.

    Calling it forms rows a..b-1; :meth:`times` gives those rows times a matrix without forming
    them (the scale folded into the matrix, the 2-D parts multiplied where they lie), which is what
    the second pass of :func:`r_factor` needs.
    """

    def __init__(self, *parts, scale=None):
        self.parts = [np.asarray(p) for p in parts]
        widths = [1 if p.ndim == 1 else p.shape[1] for p in self.parts]
        self.edges = np.concatenate(([0], np.cumsum(widths)))
        self.scale = None if scale is None else np.asarray(scale, dtype=float)

    def __call__(self, a, b):
        B = np.column_stack([p[a:b] for p in self.parts])
        return B if self.scale is None else B / self.scale

    def times(self, a, b, T):
        T = T if self.scale is None else T / self.scale[:, None]
        Y = None
        vectors, rows = [], []
        for p, lo, hi in zip(self.parts, self.edges[:-1], self.edges[1:]):
            if p.ndim == 1:
                vectors.append(p[a:b])
                rows.append(lo)
                continue
            term = p[a:b] @ T[lo:hi]
            Y = term if Y is None else Y + term
        if vectors:
            term = np.column_stack(vectors) @ T[rows]
            Y = term if Y is None else Y + term
        return Y


def gram_of(*parts) -> np.ndarray:
    """The Gram matrix of the columns of ``parts`` side by side (2-D arrays and 1-D vectors with
    the same rows), each product one BLAS call on the whole arrays (no copy)."""
    cols = [p[:, None] if p.ndim == 1 else p for p in parts]
    sizes = [c.shape[1] for c in cols]
    edges = np.concatenate(([0], np.cumsum(sizes)))
    G = np.empty((edges[-1], edges[-1]))
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):
        for i, ci in enumerate(cols):
            for j in range(i, len(cols)):
                cj = cols[j]
                if ci.shape[1] == 1 and cj.shape[1] == 1:
                    g = np.array([[float(ci[:, 0] @ cj[:, 0])]])
                elif ci.shape[1] == 1:
                    g = (cj.T @ ci[:, 0])[None, :]
                elif cj.shape[1] == 1:
                    g = (ci.T @ cj[:, 0])[:, None]
                else:
                    g = ci.T @ cj
                G[edges[i] : edges[i + 1], edges[j] : edges[j + 1]] = g
                G[edges[j] : edges[j + 1], edges[i] : edges[i + 1]] = g.T
    return G


def _gram(n, ncols, block):
    """sum over blocks of B'B, with B = block(a, b)."""

    def one(a, b):
        B = block(a, b)
        return B.T @ B

    return sum(map_blocks(n, one), np.zeros((ncols, ncols)))


@dataclass(frozen=True, eq=False)
class LagProducts:
    """Products of the rows q_t of Q (A = QR, Q orthonormal to rounding) that give sums of
    (lagged) products of any combination u = A z as small quadratic forms in w = R z:
    sum_t u_t^2 = w'Gw, sum_{t>=1} u_t u_{t-1} = w'Cw, u_0 = first'w, u_{n-1} = last'w."""

    gram: np.ndarray
    lag1: np.ndarray
    first: np.ndarray
    last: np.ndarray


def _second_pass(n, ncols, block, T, lags: bool):
    """The Gram matrix of the rows of block @ T and, with ``lags``, their lag-1 products and the
    first and last rows (one pass)."""

    times = getattr(block, "times", None)

    def one(a, b):
        Y = times(a, b, T) if times is not None else block(a, b) @ T
        return Y.T @ Y, ((Y[1:].T @ Y[:-1], Y[0].copy(), Y[-1].copy()) if lags else None)

    parts = map_blocks(n, one)
    G = sum((g for g, _ in parts), np.zeros((ncols, ncols)))
    if not lags:
        return G, None
    C = np.zeros((ncols, ncols))
    for i, (_, (Cb, head, _)) in enumerate(parts):
        C += Cb
        if i:
            C += np.outer(head, parts[i - 1][1][2])  # row a with row a - 1 of the previous block
    return G, (C, parts[0][1][1], parts[-1][1][2])


def _lag_products(R2: np.ndarray, G2, parts) -> LagProducts:
    """The products of Q = Y R2^{-1} from those of Y (R2'R2 = G2)."""
    C1, first, last = parts
    Ti = np.linalg.inv(R2)
    return LagProducts(gram=Ti.T @ G2 @ Ti, lag1=Ti.T @ C1 @ Ti, first=Ti.T @ first, last=Ti.T @ last)


def _positive_diagonal(R: np.ndarray) -> np.ndarray:
    s = np.sign(np.diag(R))
    s[s == 0] = 1.0
    return R * s[:, None]


def _tsqr(n, ncols, block) -> np.ndarray:
    """Householder QR of [R; next block] in turn (backward stable for any matrix)."""
    # each block's R, then the R of those stacked (a tree of two levels)
    Rs = map_blocks(n, lambda a, b: np.asarray(np.linalg.qr(block(a, b), mode="r"))[:ncols])
    with one_blas_thread():
        R = np.asarray(np.linalg.qr(np.vstack(Rs), mode="r"))[:ncols]
    if R.shape[0] < ncols:
        R = np.vstack([R, np.zeros((ncols - R.shape[0], ncols))])
    return _positive_diagonal(R)


def _cholesky_r(G: np.ndarray, limit: float):
    """Upper-triangular R with R'R = G, or None when the column-scaled G is not well conditioned."""
    if not np.all(np.isfinite(G)):
        return None
    d = np.sqrt(np.diag(G))
    if not np.all(d > 1e-140):  # zero columns, or values whose squares underflow
        return None
    Gs = G / np.outer(d, d)
    ev = np.linalg.eigvalsh(Gs)
    if not ev[0] > limit * ev[-1]:
        return None
    try:
        L = np.linalg.cholesky(Gs)
    except np.linalg.LinAlgError:
        return None
    return L.T * d[None, :]


def _inverse(R: np.ndarray):
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        try:
            T = np.linalg.inv(R)
        except np.linalg.LinAlgError:
            return None
    return T if np.all(np.isfinite(T)) else None


def r_factor(
    n: int,
    ncols: int,
    block: Block,
    *,
    precondition: np.ndarray | None = None,
    gram: np.ndarray | None = None,
    lag_products: bool = False,
):
    """The R factor (upper triangular, non-negative diagonal) of the n x ncols matrix A read by
    ``block``; with ``lag_products`` also its :class:`LagProducts` (None when A is rank deficient).

    ``precondition``: the R factor of a nearby matrix; when A times its inverse is well
    conditioned, one pass of products gives R.  ``gram``: A'A when the caller has it (say from
    products of whole arrays), in place of the first pass.  Values of extreme magnitude are
    scaled column by column (and R scaled back), so nothing overflows before R itself would.
    """

    def done(R, lp=None):
        sign = np.where(np.diag(R) < 0, -1.0, 1.0)  # R -> S R and Q -> Q S keep A = QR
        R = R * sign[:, None]
        if lp is not None and np.any(sign < 0):
            S = np.outer(sign, sign)
            lp = LagProducts(gram=lp.gram * S, lag1=lp.lag1 * S, first=lp.first * sign, last=lp.last * sign)
        return (R, lp) if lag_products else R

    if precondition is not None:
        T = _inverse(precondition)
        if T is not None:
            with np.errstate(over="ignore", invalid="ignore"):
                G2, parts = _second_pass(n, ncols, block, T, lag_products)
            R2 = _cholesky_r(G2, _ONE_PASS_LIMIT)
            if R2 is not None:
                lp = _lag_products(R2, G2, parts) if lag_products else None
                return done(R2 @ precondition, lp)
    if gram is None:
        with np.errstate(over="ignore", invalid="ignore", under="ignore"):
            gram = _gram(n, ncols, block)
    d = np.sqrt(np.abs(np.diag(gram)))
    if not (np.all(np.isfinite(gram)) and np.all((d == 0) | (d > 1e-140))):
        # extreme magnitudes (1e200, 1e-200): the same factorisation of the column-scaled matrix
        # (same Q, so the same lag products)
        top = np.zeros(ncols)
        for a, b in row_blocks(n):
            np.maximum(top, np.max(np.abs(block(a, b)), axis=0), out=top)
        top = np.where(top > 0, top, 1.0)
        scaled_block = (
            stacked(*block.parts, scale=top * (1.0 if block.scale is None else block.scale))
            if isinstance(block, stacked)
            else (lambda a, b: block(a, b) / top)
        )
        out = r_factor(n, ncols, scaled_block, lag_products=lag_products)
        R, lp = out if lag_products else (out, None)
        return done(R * top[None, :], lp)
    R1 = _cholesky_r(gram, GRAM_COND_LIMIT)
    if R1 is not None:
        G2, parts = _second_pass(n, ncols, block, np.linalg.inv(R1), lag_products)
        R2 = _cholesky_r(G2, GRAM_COND_LIMIT)
        if R2 is not None:
            return done(R2 @ R1, _lag_products(R2, G2, parts) if lag_products else None)
    R = _tsqr(n, ncols, block)
    if not lag_products:
        return done(R)
    T = _inverse(R)
    if T is None:
        return done(R)
    G2, parts = _second_pass(n, ncols, block, T, True)
    R2 = _cholesky_r(G2, _ONE_PASS_LIMIT)
    if R2 is None:
        return done(R)
    return done(R2 @ R, _lag_products(R2, G2, parts))


@dataclass(frozen=True, eq=False)
class Solution:
    """Least squares from the R factor of [A, y]: coefficients, (A'A)^+ (statsmodels'
    ``normalized_cov_params``), residual sum of squares, rank and residual degrees of freedom."""

    params: np.ndarray
    cov: np.ndarray
    rss: float
    rank: int
    nobs: int
    #: the singular values of A (those of its R factor)
    singular_values: np.ndarray

    @property
    def df_resid(self) -> float:
        return float(self.nobs - self.rank)

    @property
    def scale(self) -> float:
        """rss / df_resid, the estimate of the error variance."""
        return self.rss / self.df_resid

    @property
    def bse(self) -> np.ndarray:
        return np.sqrt(np.diag(self.cov) * self.scale)


def solve_r(R_full: np.ndarray, nobs: int, *, rcond: float = PINV_RCOND) -> Solution:
    """The least-squares fit of the last column on the others, from the R factor of [A, y].

    As statsmodels' OLS: the pseudo-inverse through the singular values of A (those of its R),
    cut off at ``rcond`` (default 1e-15) of the largest, and the rank counted as numpy's
    matrix_rank counts it on those singular values.
    """
    k = R_full.shape[1] - 1
    R, qty, rho = R_full[:k, :k], R_full[:k, k], float(R_full[k, k])
    U, s, Vt = np.linalg.svd(R)
    keep = s > rcond * (s.max() if s.size else 0.0)
    c = U.T @ qty
    inv = np.where(keep, 1.0 / np.where(keep, s, 1.0), 0.0)
    params = Vt.T @ (inv * c)
    cov = (Vt.T * (inv * inv)) @ Vt
    rss = rho * rho + float(np.sum(c[~keep] ** 2))
    tol = s.max() * k * np.finfo(float).eps if s.size else 0.0
    rank = int(np.count_nonzero(s > tol))
    return Solution(params=params, cov=cov, rss=rss, rank=rank, nobs=int(nobs), singular_values=s)


def _fill_rows(out: np.ndarray, n: int, rows_of, dest) -> np.ndarray:
    """out[:, dest[a:b]] = rows_of(a, b) (k x (b - a)) for every block; returns the Gram matrix
    of out's rows."""

    def one(a, b):
        if dest is None:
            Qb = out[:, a:b]
            Qb[...] = rows_of(a, b)
        else:
            Qb = rows_of(a, b)
            out[:, dest[a:b]] = Qb
        return Qb @ Qb.T

    return sum(map_blocks(n, one), np.zeros((out.shape[0], out.shape[0])))


def _reorthogonalise(out: np.ndarray, G: np.ndarray) -> np.ndarray:
    """out <- L^{-1} out in place, L L' = G the Gram matrix of out's rows (one Cholesky QR pass);
    returns L^{-1}."""
    Linv = np.linalg.inv(np.linalg.cholesky(G))

    def one(a, b):
        out[:, a:b] = Linv @ out[:, a:b]

    map_blocks(out.shape[1], one)
    return Linv


def orthonormal_basis_t(X: np.ndarray, order=None) -> tuple[np.ndarray, int, np.ndarray]:
    """Q' (rank x n) for an orthonormal basis Q of the column space of X (n x k), the rank, and
    the rank x k matrix T with Q' = T X' (so Q'u = T (X'u) needs no pass over Q).

    ``order`` (a permutation of 0..n-1) arranges the result's columns: column j is row order[j] of
    Q.  The result is the only n-sized array made.  Cholesky QR2 on the column-scaled X when its
    Gram matrix is well conditioned (the usual case); otherwise Householder QR block by block gives
    R, its singular values decide the rank (numpy's matrix_rank tolerance), X V_r S_r^{-1} spans the
    retained directions and one Cholesky QR pass makes it orthonormal to rounding.
    """
    X = np.asarray(X, dtype=float)
    n, k = X.shape
    dest = None
    if order is not None:
        dest = np.empty(n, dtype=np.intp)
        dest[np.asarray(order)] = np.arange(n)
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):
        G = X.T @ X
    diag = np.diag(G)
    rows = lambda a, b: X[a:b]  # noqa: E731
    top = np.ones(k)
    if not (np.all(np.isfinite(G)) and np.all((diag == 0) | (diag > 1e-280))):
        # data of extreme magnitude (1e200, 1e-200): the basis does not depend on column scale
        top = column_tops(X)
        top = np.where(top > 0, top, 1.0)
        rows = lambda a, b: X[a:b] / top  # noqa: E731
        G = _gram(n, k, rows)
    with one_blas_thread():
        scale = np.sqrt(np.diag(G))
        if np.all(scale > 0):
            Gs = G / np.outer(scale, scale)
            ev = np.linalg.eigvalsh(Gs)
            if ev[0] > GRAM_COND_LIMIT * ev[-1]:
                T1 = np.linalg.inv(np.linalg.cholesky(Gs)) / scale[None, :]
                out = np.empty((k, n))
                G2 = _fill_rows(out, n, lambda a, b: T1 @ rows(a, b).T, dest)
                if np.max(np.abs(G2 - np.eye(k))) <= _ORTHONORMAL:
                    # a well-conditioned design: the first pass is orthonormal to rounding already
                    return out, k, T1 / top[None, :]
                L2 = _reorthogonalise(out, G2)  # the second pass restores orthogonality to rounding
                return out, k, (L2 @ T1) / top[None, :]
        R = _tsqr(n, k, rows)
        _, s, Vt = np.linalg.svd(R)
        tol = s[0] * max(n, k) * np.finfo(float).eps if s.size and s[0] > 0 else 0.0
        rank = int(np.count_nonzero(s > tol))
        out = np.empty((rank, n))
        if rank == 0:
            return out, 0, np.zeros((0, k))
        T = (Vt[:rank].T / s[:rank]).T  # rank x k: Q1' = T X'
        La = _reorthogonalise(out, _fill_rows(out, n, lambda a, b: T @ rows(a, b).T, dest))
        Lb = _reorthogonalise(out, sum(map_blocks(n, lambda a, b: out[:, a:b] @ out[:, a:b].T), np.zeros((rank, rank))))
    return out, rank, (Lb @ La @ T) / top[None, :]
