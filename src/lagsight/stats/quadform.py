"""Distribution of quadratic forms in normal variables.

:class:`SpectralForm` is the Durbin-Watson engine (Imhof's integral for a
short explicit list of weights is :func:`lagsight.stats.imhof.imhof_cdf`).  It represents
Q_c = z' P'(A - cI) P z, where A = V diag(nu) V' has a known orthonormal
eigenbasis V (the DCT-II basis for first differences) and P spans the
orthogonal complement of an n x k design.  With W = V'Q (Q an orthonormal
basis of the design's column space) Jacobi's complementary-minor identity gives

      det(I - z P'(A - cI)P) = prod_j (1 - z e_j) * det(W' diag(1/(1 - z e_j)) W),

e_j = nu_j - c, so every evaluation is n scalar factors and a k x k
determinant; no n x n matrix is ever formed.  For large n the sums over j are
replaced by Chebyshev expansions in x_j = (nu_j - 2)/2, whose moments
sum_j T_m(x_j) and W' diag(T_m(x)) W are computed once, so each integration
point costs O(M k^2) independent of n.

The CDF is obtained by Gil-Pelaez inversion, integrated with the trapezoidal
rule in log t (the integrand decays exponentially at both ends in that
variable) with step halving until successive sums agree to 1e-12.  Tail
probabilities too small for that absolute accuracy are computed with relative
accuracy by :mod:`lagsight.stats.tails` (the same integral on a contour through
the saddle point of the moment generating function).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import fft

from .tall import map_blocks

__all__ = ["SpectralForm"]

_TOL = 1e-12  # target for successive trapezoid sums (absolute, on the integral)
_DIRECT_BLOCK = 2_000_000  # complex entries per block in the direct path
_EVAL_BLOCK = 20_000  # multipliers per evaluation block (bounds memory)
_WW_CACHE_MAX = 4_000_000  # entries of the N x k^2 product matrix kept between evaluations (32 MB)
_CHEB_MIN_N = 300  # below this the direct path is always used
_CHEB_MAX_DEGREE = 600


# ----------------------------------------------------------------------------
# the spectral engine
# ----------------------------------------------------------------------------
def _cheb_coefficients(values: np.ndarray) -> np.ndarray:
    """Chebyshev coefficients from samples at first-kind nodes (last axis)."""
    n = values.shape[-1]
    both = fft.dct(np.stack([values.real, values.imag]), type=2, axis=-1) / n
    coef = both[0] + 1j * both[1]
    coef[..., 0] *= 0.5
    return coef


def _logdet_sym(H: np.ndarray) -> np.ndarray:
    """log det of a stack of complex symmetric k x k matrices H = R + iS with R > 0.

    det H = det R * prod(1 + i sigma_l), sigma_l the eigenvalues of
    R^{-1/2} S R^{-1/2}; every factor has positive real part, so the sum of
    principal logarithms is the branch that is continuous from H = R.
    """
    R = np.ascontiguousarray(H.real)
    S = np.ascontiguousarray(H.imag)
    L = np.linalg.cholesky(R)
    logdet_r = 2.0 * np.sum(np.log(np.diagonal(L, axis1=-2, axis2=-1)), axis=-1)
    if not np.any(S):
        return logdet_r.astype(complex)
    A1 = np.linalg.solve(L, S)
    Msym = np.linalg.solve(L, np.swapaxes(A1, -1, -2))
    Msym = 0.5 * (Msym + np.swapaxes(Msym, -1, -2))
    sig = np.linalg.eigvalsh(Msym)
    return logdet_r + np.sum(np.log1p(1j * sig), axis=-1)


class _ChebMoments:
    """Moments sum_j T_m(x_j) and W' diag(T_m(x)) W, computed in blocked passes.

    ``Wt`` is W transposed (k x N, rows contiguous).  Only the upper triangle
    of each k x k moment is accumulated.  Raising the degree computes only the
    new moments (the recursion for T_m is rerun, the products are not redone).
    Column blocks run side by side, each with one BLAS thread
    (:func:`lagsight.stats.tall.map_blocks`).
    """

    _COLS = 8192
    _MIN_DEGREE = 16

    def __init__(self, x: np.ndarray, Wt: np.ndarray | None):
        self.x = x
        self.Wt = Wt
        self.mu = np.empty(0)
        self.G: np.ndarray | None = None
        self._half: np.ndarray | None = None

    @property
    def degree(self) -> int:
        return self.mu.size - 1

    def ensure(self, degree: int) -> None:
        if degree <= self.degree:
            return
        old = self.degree
        degree = max(degree, old + old // 2, self._MIN_DEGREE)
        new = slice(old + 1, degree + 1)
        mu = np.zeros(degree + 1)
        mu[: old + 1] = self.mu
        k = 0 if self.Wt is None else self.Wt.shape[0]
        iu = np.triu_indices(k)
        half = np.zeros((iu[0].size, degree + 1))
        if k and old >= 0 and self._half is not None:
            half[:, : old + 1] = self._half

        def one(start, stop):
            xb = self.x[start:stop]
            b = xb.size
            T = np.empty((degree + 1, b))
            T[0] = 1.0
            T[1] = xb
            for j in range(2, degree + 1):
                np.multiply(xb, T[j - 1], out=T[j])
                T[j] *= 2.0
                T[j] -= T[j - 2]
            part = T[new].sum(axis=1)
            if not k:
                return part, None
            Wb = self.Wt[:, start:stop]
            P = np.empty((iu[0].size, b))
            row = 0
            for a in range(k):
                np.multiply(Wb[a], Wb[a:], out=P[row : row + k - a])
                row += k - a
            return part, P @ T[new].T

        for part, h in map_blocks(self.x.size, one, rows=self._COLS):
            mu[new] += part
            if k:
                half[:, new] += h
        self.mu = mu
        if k:
            self._half = half
            G = np.zeros((degree + 1, k, k))
            G[:, iu[0], iu[1]] = half.T
            G[:, iu[1], iu[0]] = half.T
            self.G = G.reshape(degree + 1, k * k)

    def arrays(self, degree: int):
        return self.mu[: degree + 1], (None if self.G is None else self.G[: degree + 1])


class SpectralForm:
    """The quadratic form z' P'(A - cI) P z described in the module docstring.

    Parameters
    ----------
    nu : (N,) array
        Eigenvalues of A, all in [0, 4].
    Wt : (k, N) array or None
        (V'Q)' for an orthonormal basis Q of the space projected out; None for none.
    exclude : sequence of int, optional
        Indices of eigenvalues left out (only without ``W``); used for the
        Durbin-Watson bounding distributions.
    """

    def __init__(self, nu, Wt=None, exclude=None):
        self.nu = np.asarray(nu, dtype=float)
        self.W = None if Wt is None or Wt.shape[0] == 0 else np.ascontiguousarray(Wt, dtype=float)
        excl = np.asarray([] if exclude is None else exclude, dtype=int)
        if self.W is not None and excl.size:
            raise ValueError("'exclude' cannot be combined with a design basis")
        self.exclude = np.unique(excl)
        k = 0 if self.W is None else self.W.shape[0]
        self.k = k
        self.m = self.nu.size - k - self.exclude.size
        included = np.ones(self.nu.size, bool)
        included[self.exclude] = False
        self._included = included
        self.nu_min = float(self.nu[included].min()) if self.W is None else float(self.nu.min())
        self.nu_max = float(self.nu[included].max()) if self.W is None else float(self.nu.max())
        self._x = np.clip((self.nu - 2.0) / 2.0, -1.0, 1.0)
        self._moments = None
        self._ww = None
        self._p0 = None

    # -- exact power sums of the compressed eigenvalues ---------------------
    def power_sums(self, c: float) -> tuple[float, float]:
        """Sum and sum of squares of the m eigenvalues of P'(A - cI)P."""
        if self._p0 is None:
            if self.W is not None and self.nu.size >= _CHEB_MIN_N:
                self._p0 = self._power_sums_from_moments()
            else:
                self._p0 = self._power_sums_at(0.0)
        q1, q2 = self._p0
        return q1 - c * self.m, q2 - 2.0 * c * q1 + c * c * self.m

    def _power_sums_from_moments(self) -> tuple[float, float]:
        # nu = 2 + 2 T1(x) and nu^2 = 6 + 8 T1(x) + 2 T2(x)
        if self._moments is None:
            self._moments = _ChebMoments(self._x, self.W)
        self._moments.ensure(2)
        mu, G = self._moments.arrays(2)
        k = self.k
        G0, G1, G2 = (g.reshape(k, k) for g in G[:3])
        B = 2.0 * G0 + 2.0 * G1
        B2 = 6.0 * G0 + 8.0 * G1 + 2.0 * G2
        s1 = 2.0 * mu[0] + 2.0 * mu[1]
        s2 = 6.0 * mu[0] + 8.0 * mu[1] + 2.0 * mu[2]
        return float(s1 - np.trace(B)), float(s2 - 2.0 * np.trace(B2) + np.sum(B * B))

    def _power_sums_at(self, c: float) -> tuple[float, float]:
        e = self.nu - c
        if self.W is None:
            e = e[self._included]
            return float(e.sum()), float(np.dot(e, e))
        Wt = self.W
        B = (Wt * e) @ Wt.T
        B2 = (Wt * (e * e)) @ Wt.T
        p1 = e.sum() - np.trace(B)
        p2 = np.dot(e, e) - 2.0 * np.trace(B2) + np.sum(B * B)
        return float(p1), float(p2)

    # -- evaluation of log det and the resolvent trace ----------------------
    def evaluate(self, z, c, trace: bool = False, nats=40.0):
        """log det(I - z P'(A - cI)P) and, optionally, tr (I - z P'(A-cI)P)^{-1}.

        ``z`` is an array of complex multipliers with Re(1 - z e) > 0; ``c`` a
        scalar or an array of the same shape (one c per multiplier).  ``nats``
        (scalar or one per multiplier) is the accuracy asked of the log det,
        about exp(-nats) absolute: points whose contribution is known to be tiny
        can ask for less, which keeps the Chebyshev degree down.
        """
        z = np.asarray(z, dtype=complex).ravel()
        c = np.broadcast_to(np.asarray(c, dtype=float).ravel(), z.shape)
        nats = np.broadcast_to(np.asarray(nats, dtype=float).ravel(), z.shape)
        if z.size > _EVAL_BLOCK:
            parts = [
                self.evaluate(z[s : s + _EVAL_BLOCK], c[s : s + _EVAL_BLOCK], trace, nats[s : s + _EVAL_BLOCK])
                for s in range(0, z.size, _EVAL_BLOCK)
            ]
            return (np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts]) if trace else None)
        logdet = np.empty(z.shape, complex)
        tr = np.empty(z.shape, complex) if trace else None
        use_cheb = np.zeros(z.shape, bool)
        degree = np.zeros(z.shape, int)
        if self.W is None and self.nu.size >= 500:
            # only scalar moments are needed: Chebyshev pays off at once
            degree = self._degree_needed(z, c, nats)
            use_cheb = degree <= min(_CHEB_MAX_DEGREE, self.nu.size // 2)
        elif self.nu.size >= _CHEB_MIN_N:
            degree = self._degree_needed(z, c, nats)
            use_cheb = degree <= min(_CHEB_MAX_DEGREE, self.nu.size // 8)
        for path, idx in ((True, np.flatnonzero(use_cheb)), (False, np.flatnonzero(~use_cheb))):
            if not idx.size:
                continue
            if path:
                ld, t = self._eval_cheb(z[idx], c[idx], int(degree[idx].max()), trace)
            else:
                ld, t = self._eval_direct(z[idx], c[idx], trace)
            logdet[idx] = ld
            if tr is not None:
                tr[idx] = t
        return logdet, tr

    def _degree_needed(self, z, c, nats=40.0):
        with np.errstate(divide="ignore", invalid="ignore"):
            a = 1.0 - z * (2.0 - c)
            b = 2.0 * z
            xs = a / b
            root = np.sqrt(xs * xs - 1.0)
            rho = np.maximum(np.abs(xs + root), np.abs(xs - root))
            deg = np.ceil(nats / np.log(rho)) + 3
        deg = np.where(np.isfinite(deg), deg, 10**9)
        return np.maximum(deg, 4).astype(np.int64)

    def _finish(self, z, L, H, K2, T1, c, trace):
        """Combine scalar sums and k x k matrices into log det and trace."""
        if self.exclude.size:
            e_ex = self.nu[self.exclude][None, :] - c[:, None]
            D_ex = 1.0 - z[:, None] * e_ex
            L = L - np.log(D_ex).sum(axis=1)
            if trace:
                T1 = T1 - (1.0 / D_ex).sum(axis=1)
        if self.W is None:
            return L, (T1 if trace else None)
        k = self.k
        H = H.reshape(-1, k, k)
        logdet = L + _logdet_sym(H)
        if not trace:
            return logdet, None
        K2 = K2.reshape(-1, k, k)
        corr = np.trace(np.linalg.solve(H, K2), axis1=-2, axis2=-1)
        return logdet, T1 - corr

    def _eval_direct(self, z, c, trace):
        """Direct sums over the N factors.  The N x k^2 matrix of products w_j w_j' is kept only
        while it is small (:data:`_WW_CACHE_MAX` entries); for long series it is formed again a
        block of columns at a time, so memory stays O(block k^2) whatever N is."""
        N = self.nu.size
        k = self.k
        W = self.W
        cached = W is None or N * k * k <= _WW_CACHE_MAX
        if W is not None and cached and self._ww is None:
            self._ww = (W.T[:, :, None] * W.T[:, None, :]).reshape(N, -1)
        cols = N if cached else max(1, min(N, _DIRECT_BLOCK // (k * k)))
        step = max(1, _DIRECT_BLOCK // max(cols, 1))
        out_ld, out_tr = [], []
        for s in range(0, z.size, step):
            zz, cc = z[s : s + step], c[s : s + step]
            L = T1 = H = K2 = 0.0
            for a in range(0, N, cols):
                b = min(N, a + cols)
                D = 1.0 - zz[:, None] * (self.nu[None, a:b] - cc[:, None])
                L = L + np.log(D).sum(axis=1)
                G = 1.0 / D
                if trace:
                    T1 = T1 + G.sum(axis=1)
                if W is not None:
                    if cached:
                        WW = self._ww if cols == N else self._ww[a:b]
                    else:
                        Wb = W[:, a:b].T
                        WW = (Wb[:, :, None] * Wb[:, None, :]).reshape(b - a, -1)
                    H = H + (G.real @ WW + 1j * (G.imag @ WW))
                    if trace:
                        G2 = G * G
                        K2 = K2 + (G2.real @ WW + 1j * (G2.imag @ WW))
            ld, tr = self._finish(
                zz, L, None if W is None else H, None if W is None else K2, T1 if trace else None, cc, trace
            )
            out_ld.append(ld)
            out_tr.append(tr)
        return np.concatenate(out_ld), (np.concatenate(out_tr) if trace else None)

    def _eval_cheb(self, z, c, degree, trace):
        if self._moments is None:
            self._moments = _ChebMoments(self._x, self.W)
        self._moments.ensure(degree)
        mu, G = self._moments.arrays(degree)
        nodes = np.cos(np.pi * (np.arange(degree + 1) + 0.5) / (degree + 1))
        a = 1.0 - z * (2.0 - c)
        D = a[:, None] - 2.0 * z[:, None] * nodes[None, :]
        inv = 1.0 / D
        funcs = [np.log(D), inv] + ([inv * inv] if trace and G is not None else [])
        coef = _cheb_coefficients(np.stack(funcs))  # one transform for all of them
        L = coef[0] @ mu
        T1 = H = K2 = None
        if trace:
            T1 = coef[1] @ mu
        if G is not None:
            H = coef[1].real @ G + 1j * (coef[1].imag @ G)
            if trace:
                K2 = coef[2].real @ G + 1j * (coef[2].imag @ G)
        return self._finish(z, L, H, K2, T1, c, trace)

    # -- distribution -----------------------------------------------------------
    def log_cf(self, t, c) -> np.ndarray:
        """log E exp(i t Q_c) for real t (c a scalar or one per t)."""
        ld, _ = self.evaluate(2j * np.asarray(t, float), c)
        return -0.5 * ld

    def cdf_at_zero(self, c: float, density: bool = False):
        """P(Q_c <= 0) by Gil-Pelaez inversion; with ``density`` also d/dc of it.

        Returns (probability, error estimate, density or None).
        """
        prob, err, dens = self.cdf_many(np.array([float(c)]), density)
        return float(prob[0]), float(err[0]), (float(dens[0]) if density else None)

    def cdf_many(self, cs, density: bool = False):
        """P(Q_c <= 0) (and its derivative in c) for many c at once.

        All c share one set of integration nodes, so a whole grid costs about
        as much as a few single evaluations.  Returns arrays (prob, err, dens).
        """
        if self.m <= 0:
            raise ValueError("the quadratic form has no degrees of freedom left")
        cs = np.atleast_1d(np.asarray(cs, dtype=float))
        prob = np.where(cs >= self.nu_max, 1.0, 0.0)
        err = np.zeros(cs.shape)
        dens = np.zeros(cs.shape)
        live = np.flatnonzero((cs > self.nu_min) & (cs < self.nu_max))
        if live.size == 0:
            return prob, err, (dens if density else None)
        c = cs[live]
        sums = np.array([self.power_sums(ci) for ci in c])
        p1, p2 = sums[:, 0], sums[:, 1]
        t_lo = float(np.min(1e-5 / np.sqrt(2.0 * p2 + p1 * p1)))
        # first guess from log|phi(t)| ~ -t^2 p2 (small t); doubled until the bound holds
        t_hi = float(np.max(self._upper_limits(c, np.maximum(1.0 / np.sqrt(2.0 * p2), 1.15 * np.sqrt(36.0 / p2)))))
        v_lo, v_hi = math.log(t_lo), math.log(t_hi)

        def f(v):
            t = np.exp(v)
            z = np.broadcast_to(2j * t[None, :], (c.size, t.size))
            cc = np.broadcast_to(c[:, None], z.shape)
            ld, tr = self.evaluate(z, cc, trace=density)
            phi = np.exp(-0.5 * ld).reshape(z.shape)
            d = (phi * tr.reshape(z.shape)).real * t[None, :] if density else None
            return phi.imag, d

        # Bi-infinite trapezoid rule in v = log t.  Below v_lo the integrands are
        # p1 * t and m * t to relative order t^2, so the nodes there sum in
        # closed form (a geometric series); the rule is then exponentially
        # convergent in the step.
        def lower_sum(h):
            r = math.exp(-h)
            return r / (1.0 - r) * t_lo

        n_int = 32
        h = (v_hi - v_lo) / n_int
        fi, di = f(v_lo + h * np.arange(n_int + 1))
        S = fi.sum(axis=1)
        Sd = di.sum(axis=1) if density else np.zeros(c.size)
        I_old = h * (S + p1 * lower_sum(h))
        Id_old = h * (Sd + self.m * lower_sum(h))
        e = np.full(c.size, np.inf)
        for _ in range(12):
            fm, dm = f(v_lo + h * (np.arange(n_int) + 0.5))
            S = S + fm.sum(axis=1)
            if density:
                Sd = Sd + dm.sum(axis=1)
            h *= 0.5
            n_int *= 2
            I_new = h * (S + p1 * lower_sum(h))
            Id_new = h * (Sd + self.m * lower_sum(h))
            e = np.abs(I_new - I_old)
            derr = np.abs(Id_new - Id_old)
            I_old, Id_old = I_new, Id_new
            if np.all(e < _TOL) and (not density or np.all(derr < 1e-10 * np.maximum(1.0, np.abs(Id_new)))):
                break
        prob[live] = np.clip(0.5 - I_old / math.pi, 0.0, 1.0)
        err[live] = e / math.pi
        if density:
            dens[live] = np.maximum(0.0, Id_old / math.pi)
        return prob, err, (dens if density else None)

    def _upper_limits(self, c, t0):
        """For each c, a t beyond which the remaining integral is below 1e-15.

        log|phi| is concave in v = log t with slope -g(t), g increasing, so
        the tail integral beyond t is at most |phi(t)| / g(t).
        """
        t = np.array(t0, dtype=float)
        todo = np.ones(c.size, bool)
        dv = 0.05
        for _ in range(400):
            idx = np.flatnonzero(todo)
            if not idx.size:
                break
            tt = np.concatenate([t[idx], t[idx] * math.exp(-dv)])
            lp = self.log_cf(tt, np.concatenate([c[idx], c[idx]])).real
            g = -(lp[: idx.size] - lp[idx.size :]) / dv
            with np.errstate(divide="ignore", invalid="ignore"):
                ok = (g > 0) & (lp[: idx.size] - np.log(np.where(g > 0, g, 1.0)) < math.log(1e-15))
            todo[idx[ok]] = False
            t[idx[~ok]] *= 2.0
        return t
