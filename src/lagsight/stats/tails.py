"""Tail probabilities of a spectral quadratic form with relative accuracy.

For Q_c = z' B_c z, B_c = P'(A - cI)P (see :mod:`lagsight.stats.quadform`), the
moment generating function M(s) = det(I - 2 s B_c)^(-1/2) exists on an interval
around 0.  Moving the inversion contour off the imaginary axis to the vertical
line through a real point s0 of that interval gives

    P(Q_c <= 0) = -(1/pi) int_0^inf Re[M(s0 + iy) / (s0 + iy)] dy    (s0 < 0),
    P(Q_c >  0) = +(1/pi) int_0^inf Re[M(s0 + iy) / (s0 + iy)] dy    (s0 > 0).

With s0 the saddle point of K = log M the integrand is positive and largest at
y = 0 and decays on both sides, so nothing cancels: the trapezoid rule in u
(y = a sinh u, which also tames algebraically decaying integrands) returns the
probability to a relative accuracy set by rounding, and its logarithm when the
probability is below the smallest double.  Nothing here approximates: the
saddle point only places the contour.

The interval of M is wider than the spectrum of A suggests: eigen-directions of
A that lie (nearly) in the design space are projected out.  When the saddle
point lies beyond 1/(2(nu_min - c)) some factors D_j = 1 - 2s(nu_j - c) of the
determinant identity are negative or small; they are taken out exactly by the
bordered matrix

    Z = [[-diag(D_b), W_b], [W_b', H_g]],   H_g = sum_{good j} w_j w_j' / D_j,

for which det(I - 2sB_c) = (-1)^b prod_{good} D_j det Z, and s lies in the
interval exactly when Z has b negative eigenvalues (Haynsworth inertia).  Along
the contour the branch of log det Z is followed from y = 0 by its derivative.
Memory stays O(nk); every evaluation is O(nk^2) or, through the Chebyshev
moments of the engine, O(Mk^2).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["TailResult", "tail_probability"]

_SMALL_D = 1e-3  # factors D_j below this are taken out through the bordered matrix
_EPS = 2.220446049250313e-16
_MAX_BAD = 400  # bordered matrices larger than this are not formed
_EXPENSIVE = 2e7  # n k^2 above which per-point O(n k^2) evaluations are not repeated
_CHEB_CAP = 600  # the engine's largest Chebyshev degree (quadform._CHEB_MAX_DEGREE)
_BIG_SCALE = 1e6  # beyond |2 s| = this the real-axis and line evaluations are rescaled
_REL_TOL = 1e-11  # relative change between trapezoid refinements at which we stop
_MAX_LEVELS = 9
_BLOCK_COLS = 65536  # columns per block in the direct products (bounds memory)


@dataclass(frozen=True)
class TailResult:
    """P(Q_c <= 0) ('lower') or P(Q_c >= 0) ('upper'), with its natural logarithm."""

    value: float
    log_value: float
    method: str
    error: float  # estimated relative error
    saddle: float = math.nan


class _Underflow(Exception):
    """Raised where the bordered matrix would need thousands of factors, or a long series
    would need O(n k^2) evaluations: only in tails so far out that the probability is far
    below the smallest double, which the caller checks with the bound P <= M(s) at the last
    point evaluated cheaply."""


class _OutsideSupport(Exception):
    """c lies beyond the end of the support on the side of the tail."""


class _Line:
    """Evaluation of L(s) = log det(I - 2 s B_c) on the real axis and on vertical lines."""

    def __init__(self, form, c: float):
        self.form = form
        self.c = float(c)
        self.e = form.nu - self.c
        self.W = form.W
        if self.W is None:
            self.e_incl = self.e[form._included]

    # -- which factors are small at a real part s0 ---------------------------------
    @staticmethod
    def scale(s0: float) -> float:
        """sigma with D_j / sigma = O(1): det(I - 2sB) = sigma^m det(P' (D / sigma) P)."""
        return max(1.0, 2.0 * abs(s0))

    def bad_set(self, s0: float) -> np.ndarray:
        if self.W is None:
            return np.empty(0, dtype=np.int64)
        sigma = self.scale(s0)
        return np.flatnonzero(1.0 / sigma - 2.0 * (s0 / sigma) * self.e < _SMALL_D)

    # -- products W diag(g) W' in column blocks -------------------------------------
    def _gram(self, g: np.ndarray) -> np.ndarray:
        W = self.W
        k, N = W.shape
        out = np.zeros((k, k), dtype=np.result_type(g, float))
        for s in range(0, N, _BLOCK_COLS):
            Wb = W[:, s : s + _BLOCK_COLS]
            out += (Wb * g[s : s + _BLOCK_COLS]) @ Wb.T
        return out

    def _bordered(self, Dt: np.ndarray, bad: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Z = [[-diag(Dt_b), W_b], [W_b', sum_good w_j w_j' / Dt_j]]."""
        good = np.ones(Dt.size, bool)
        good[bad] = False
        inv = np.where(good, 1.0 / np.where(good, Dt, 1.0), 0.0)
        Hg = self._gram(inv)
        Wb = self.W[:, bad].T
        b, k = bad.size, self.W.shape[0]
        Z = np.zeros((b + k, b + k), dtype=Hg.dtype)
        Z[:b, :b] = np.diag(-Dt[bad])
        Z[:b, b:] = Wb
        Z[b:, :b] = Wb.T
        Z[b:, b:] = Hg
        return Z, good, inv

    @staticmethod
    def _equilibrated_eigenvalues(Z: np.ndarray):
        """Eigenvalues of S Z S (S = diag(1/sqrt(max_j |Z_ij|))), which has the inertia of Z
        (Sylvester) but no tiny or huge rows, and log |det Z| = sum log|ev| - 2 sum log S."""
        r = np.max(np.abs(Z), axis=1)
        r = np.where(r > 0, r, 1.0)
        sc = 1.0 / np.sqrt(r)
        ev = np.linalg.eigvalsh(Z * sc[:, None] * sc[None, :])
        return ev, float(np.sum(np.log(np.abs(ev))) + np.sum(np.log(r)))

    def negative_count(self, Dt: np.ndarray) -> int:
        """Number of negative eigenvalues of P' diag(Dt) P (Haynsworth inertia of the bordered matrix)."""
        if self.W is None:
            return int(np.count_nonzero(Dt[self.form._included] < 0))
        bad = np.flatnonzero(np.abs(Dt) < _SMALL_D * np.abs(Dt).max())
        Z, good, _ = self._bordered(Dt, bad)
        ev, _ = self._equilibrated_eigenvalues(Z)
        return int(np.count_nonzero(Dt[good] < 0) + bad.size - np.count_nonzero(ev < 0))

    # -- real axis --------------------------------------------------------------------
    def real(self, s: float):
        """(L, L', L'', inside) at real s; inside is False outside the interval of M."""
        if self.W is None:
            D = 1.0 - 2.0 * s * self.e_incl
            if np.any(D <= 0):
                return math.nan, math.nan, math.nan, False
            q = self.e_incl / D
            return float(np.sum(np.log(D))), float(-2.0 * q.sum()), float(-4.0 * np.dot(q, q)), True
        if not self.bordered(s):
            return self._real_fast(s)
        bad = self.bad_set(s)
        if bad.size > _MAX_BAD or self.expensive:
            raise _Underflow(s)
        return self._real_bordered(s, bad)

    def bordered(self, s0: float) -> bool:
        """Whether to evaluate through the bordered matrix: some factor 1 - 2 s e_j is below
        _SMALL_D (the engine's identity would lose digits or its branch), or the scale is one
        at which those unscaled factors would lose range.  Otherwise the engine's evaluate
        serves (its Chebyshev moments make that O(M k^2) a point)."""
        if self.W is None:
            return False
        if self.scale(s0) > _BIG_SCALE:
            return True
        if np.min(1.0 - 2.0 * s0 * self.e) < _SMALL_D:
            return True
        # a long series whose Chebyshev degree would exceed the engine's cap would be evaluated
        # directly (n k^2 a point): treated like the bordered case, where it is only ever
        # needed in tails far below the smallest double
        return self.expensive and not self._cheb_ok(s0)

    @property
    def expensive(self) -> bool:
        """True when an O(n k^2) evaluation per point is too slow to repeat hundreds of times."""
        return self.W is not None and self.form.nu.size * max(1, self.form.k) ** 2 > _EXPENSIVE

    def _cheb_ok(self, s0: float) -> bool:
        form = self.form
        deg = form._degree_needed(np.array([2.0 * s0 + 0j]), np.array([self.c]))
        return bool(deg[0] <= min(_CHEB_CAP, form.nu.size // 8))

    def _real_fast(self, s: float):
        """Through the engine's evaluate (Chebyshev moments when they pay off)."""
        form = self.form
        eta = 1e-20 * max(1.0, abs(s))
        h = 1e-4 * max(abs(s), 1e-8)
        z = 2.0 * np.array([s + 1j * eta, s - h + 1j * eta, s + h + 1j * eta])
        ld, _ = form.evaluate(z, self.c)
        d1 = ld.imag / eta
        return float(ld[0].real), float(d1[0]), float((d1[2] - d1[1]) / (2.0 * h)), True

    def _scaled(self, s, sigma):
        """D / sigma = 1/sigma - 2 xi e at (real or complex) s, xi = s / sigma.  Derivatives
        are taken in xi (dD/dxi = -2e: nothing underflows) and divided by sigma after."""
        return 1.0 / sigma - 2.0 * (s / sigma) * self.e

    def _slope(self, Z: np.ndarray, bad: np.ndarray, inv: np.ndarray) -> np.ndarray:
        """dZ/dxi for the bordered matrix at D / sigma = 1/sigma - 2 xi e (xi = s / sigma)."""
        b = bad.size
        Zs = np.zeros_like(Z)
        Zs[:b, :b] = np.diag(2.0 * self.e[bad])
        Zs[b:, b:] = self._gram(2.0 * self.e * inv * inv)
        return Zs

    def _real_bordered(self, s: float, bad: np.ndarray):
        sigma = self.scale(s)
        Dt = self._scaled(s, sigma)
        Z, good, inv = self._bordered(Dt, bad)
        b = bad.size
        ev, log_abs_det = self._equilibrated_eigenvalues(Z)
        if np.count_nonzero(ev < 0) != b or np.any(ev == 0):
            return math.nan, math.nan, math.nan, False
        q = self.e * inv
        Zs = self._slope(Z, bad, inv)
        Zss = np.zeros_like(Z)
        Zss[b:, b:] = self._gram(8.0 * q * q * inv)
        Zi = np.linalg.inv(Z)
        A1 = Zi @ Zs
        L = float(self.form.m * math.log(sigma) + np.sum(np.log(Dt[good])) + log_abs_det)
        L1 = float(-2.0 * np.sum(q[good]) + np.trace(A1)) / sigma
        L2 = float(-4.0 * np.sum(q[good] ** 2) + np.trace(Zi @ Zss) - np.trace(A1 @ A1)) / sigma / sigma
        return L, L1, L2, True

    # -- vertical line ----------------------------------------------------------------
    def line(self, s0: float, y: np.ndarray, bad: np.ndarray, nats=40.0):
        """L(s0 + iy) for y >= 0, to about exp(-nats) absolute.  With ``bad`` non-empty also
        returns the raw phase data (phase of the bordered determinant and its derivative in y)
        for unwrapping."""
        s = s0 + 1j * np.asarray(y, float)
        if not self.bordered(s0):
            ld, _ = self.form.evaluate(2.0 * s, self.c, nats=nats)
            return ld, None, None
        out = np.empty(s.size, complex)
        phase = np.empty(s.size)
        dphase = np.empty(s.size)
        sign_b = -1.0 if bad.size % 2 else 1.0
        sigma = self.scale(s0)
        for i, si in enumerate(s):
            Dt = self._scaled(si, sigma)
            Z, good, inv = self._bordered(Dt, bad)
            Zs = self._slope(Z, bad, inv)
            sign, logabs = np.linalg.slogdet(Z)
            out[i] = self.form.m * math.log(sigma) + np.sum(np.log(Dt[good])) + logabs
            phase[i] = float(np.angle(sign * sign_b))
            # d/dy log det Z = i tr(Z^-1 dZ/ds); its imaginary part moves the phase
            dphase[i] = float(np.real(np.trace(np.linalg.solve(Z, Zs)))) / sigma
        return out, phase, dphase


def _unwrap(y, phase, dphase):
    """The continuous phase from y = 0 (where it is 0), predicted by the derivative.

    Returns (theta, worst) with worst the largest gap between prediction and the
    chosen branch (in radians): small values mean the nodes resolve the phase.
    """
    order = np.argsort(y)
    yy, ph, dp = y[order], phase[order], dphase[order]
    theta = np.empty_like(ph)
    theta[0] = ph[0] - 2.0 * math.pi * round(ph[0] / (2.0 * math.pi))
    worst = abs(theta[0])
    for i in range(1, yy.size):
        pred = theta[i - 1] + 0.5 * (yy[i] - yy[i - 1]) * (dp[i - 1] + dp[i])
        t = ph[i] + 2.0 * math.pi * round((pred - ph[i]) / (2.0 * math.pi))
        worst = max(worst, abs(t - pred))
        theta[i] = t
    out = np.empty_like(theta)
    out[order] = theta
    return out, worst


def _find_saddle(line: _Line, lower: bool, p1: float, p2: float, s_edge: float, probe: float, outside_support):
    """The saddle point s* of K = -L/2 (K'(s*) = 0) on the side of the tail.

    Before the search first goes beyond ``probe`` (near the end of the interval that
    the spectrum of A alone guarantees) it asks ``outside_support()`` and raises
    _OutsideSupport when c lies beyond the end of the support.
    ``s_edge`` = 1 / (2 (nu_extreme - c)) is where the smallest factor D_j vanishes.
    Returns (s, L(s), L''(s)).  K is convex, so K' is increasing; lower tail: K'(0) = p1 > 0 and s* < 0.
    """
    sgn = -1.0 if lower else 1.0
    s = -p1 / (2.0 * p2)  # Newton step from 0
    if abs(s) > 0.5 * abs(s_edge):
        s = 0.5 * s_edge
    s_start = s
    near, far = 0.0, None  # K'(near) > 0 side (towards 0) and K'(far) < 0 side (or outside)
    best = None
    checked = False
    for it in range(200):
        if not checked and sgn * s >= sgn * probe:
            checked = True
            if outside_support():
                raise _OutsideSupport
        try:
            L, L1, L2, inside = line.real(s)
        except _Underflow:
            raise _Underflow(best) from None
        if inside:
            K1 = -0.5 * L1  # K'(s)
            best = (s, L, L2)
            if (K1 > 0) == lower:  # s lies between 0 and s*: move outwards
                near = s
            else:
                far = s
            K2 = -0.5 * L2
            step = -K1 / K2 if K2 > 0 else math.inf
            if K2 > 0 and abs(step) * math.sqrt(K2) < 1e-3:
                return s, L, L2
            new = s + step
        else:
            far = s
            new = math.nan
        if far is None:
            # expand outwards, faster and faster (the saddle point can be at 1e200)
            lim = s * min(max(4.0, abs(s / s_start)), 1e16) if abs(s) > 0 else s_edge
            lim = math.copysign(min(abs(lim), 1e280), lim)
            if not math.isfinite(new) or sgn * new > sgn * lim or (it >= 6 and sgn * new > sgn * s):
                new = lim
        else:
            lo, hi = sorted((near, far))
            if not (math.isfinite(new) and lo < new < hi):
                ratio = far / near if near != 0 else math.inf
                new = (
                    math.copysign(math.exp(0.5 * (math.log(abs(near)) + math.log(abs(far)))), far)
                    if ratio > 4.0
                    else 0.5 * (near + far)
                )
        if new == s or (far is not None and abs(far - near) <= 1e-15 * abs(s)):
            break
        s = new
    if best is None:
        raise RuntimeError("no point of the moment generating function's interval was found")
    return best


def tail_probability(form, c: float, tail: str) -> TailResult:
    """P(Q_c <= 0) (tail='lower') or P(Q_c >= 0) (tail='upper') with relative accuracy.

    Meant for the tail that is the smaller one (c below the mean of the
    statistic for 'lower', above it for 'upper'); for the larger tail use
    1 minus the other.
    """
    if tail not in ("lower", "upper"):
        raise ValueError(f"'tail' must be 'lower' or 'upper' (got {tail!r})")
    lower = tail == "lower"
    c = float(c)
    if lower and c <= form.nu_min or (not lower and c >= form.nu_max):
        return TailResult(0.0, -math.inf, "exact (outside the support)", 0.0)
    p1, p2 = form.power_sums(c)
    if (p1 > 0) != lower or p2 <= 0:
        raise ValueError(f"the {tail} tail at c = {c:g} is not the smaller one")
    line = _Line(form, c)
    s_edge = 1.0 / (2.0 * ((form.nu_min if lower else form.nu_max) - c))  # the smallest D_j vanishes there
    probe = (1.0 - 4.0 * _SMALL_D) * s_edge  # every factor D_j >= 4 _SMALL_D there

    def outside_support() -> bool:
        # beyond the support's true end (which a design can move inside [nu_min, nu_max])
        # the probability is 0.  Cauchy interlacing puts the end within the k + 1 extreme
        # eigenvalues of A, so with more of them beyond c, c is inside; else one inertia
        # count of the bordered matrix decides it
        beyond = np.count_nonzero(line.e < 0) if lower else np.count_nonzero(line.e > 0)
        if beyond > form.k + form.exclude.size:
            return False
        return line.negative_count(line.e if lower else -line.e) == 0

    if line.expensive:
        # long series: when the bound P <= M(s) at a point of low Chebyshev degree already
        # puts P below the smallest double, 0 is the exact double and no search is run
        # (the search near the end of the interval would need high-degree moments)
        L_cheap, _, _, inside = line.real(0.1 * s_edge)
        if inside and -0.5 * L_cheap < -745.2:
            return TailResult(0.0, math.nan, "exact (below the smallest positive double)", 0.0)
    try:
        s0, L0, L2 = _find_saddle(line, lower, p1, p2, s_edge, probe, outside_support)
    except _OutsideSupport:
        return TailResult(0.0, -math.inf, "exact (outside the support)", 0.0)
    except _Underflow as stop:
        # P <= M(s) = exp(K(s)) for every s of the interval (Chernoff): at the last point
        # evaluated, M is already below exp(-745.2), under the smallest positive double
        last = stop.args[0]
        if last is not None and -0.5 * last[1] < -745.2:
            return TailResult(0.0, math.nan, "exact (below the smallest positive double)", 0.0)
        raise RuntimeError(f"tail inversion at c = {c!r} would need the bordered matrix on a long series") from None
    K0 = -0.5 * L0
    K2 = -0.5 * L2
    bad = line.bad_set(s0)
    # K'' > 0 always; a non-positive value is rounding noise at the very end of the support
    a = min(1.0 / math.sqrt(K2), abs(s0)) if K2 > 0 else abs(s0)
    # Conditioning: d log P / dc = -s0 tr(I - 2 s0 B)^-1 = -s0 m at the saddle point, so
    # one rounding unit in c (or in the spectrum, which is O(1)) moves P by this much.
    kappa = 16.0 * abs(s0) * form.m * _EPS
    J, err = _line_integral(line, s0, L0, a, bad, max(_REL_TOL, 10.0 * kappa))
    if not J > 0:
        raise RuntimeError(f"tail inversion failed at c = {c!r} (integral {J!r})")
    log_p = K0 - math.log(math.pi * abs(s0)) + math.log(J)
    err = max(err, kappa)
    method = "exact (saddle-line inversion)"
    if err > 1e-6:
        method = (
            f"exact (saddle-line inversion) to about {err:.0e} relative: the statistic lies so close "
            "to the end of its range that rounding in the data limits the digits"
        )
    return TailResult(math.exp(log_p) if log_p > -745.2 else 0.0, log_p, method, err, s0)


def _line_integral(line: _Line, s0: float, L0: float, a: float, bad: np.ndarray, tol: float = _REL_TOL):
    """J = int_0^inf Re[exp(-(L(s0+iy) - L0)/2) s0/(s0+iy)] dy by the trapezoid rule in u
    (y = a sinh u, dy = sqrt(a^2 + y^2) du), halving the step until two sums agree.

    Returns (J, relative error estimate).
    """
    unwrap = line.bordered(s0)
    cols: dict[str, list] = {"u": [], "y": [], "ld": [], "ph": [], "dp": [], "g": []}

    def magnitude(y, ld):
        """|integrand| before the weight dy/du; it decreases in y."""
        return np.exp(-0.5 * (ld.real - L0)) * np.abs(s0 / (s0 + 1j * y))

    def nats_for(y, top):
        """Accuracy needed at each node: |g| is decreasing, so the largest evaluated y' <= y
        bounds it; a node that can contribute at most 1e-q of the peak needs q fewer digits."""
        if not cols["y"]:
            return np.full(y.shape, 40.0)
        ys = np.concatenate(cols["y"])
        gs = np.concatenate(cols["g"])
        order = np.argsort(ys)
        ys, gs = ys[order], np.minimum.accumulate(gs[order])
        idx = np.searchsorted(ys, y, side="right") - 1
        bound = np.where(idx >= 0, gs[np.maximum(idx, 0)], top) * np.hypot(a, y)
        with np.errstate(divide="ignore"):
            drop = np.log(top / np.maximum(bound, 1e-300))
        return np.clip(40.0 - np.maximum(drop, 0.0), 12.0, 40.0)

    def add(u, top=None):
        y = a * np.sinh(u)
        nats = nats_for(y, top) if top is not None else 40.0
        ld, ph, dp = line.line(s0, y, bad, nats)
        g = magnitude(y, ld)
        cols["u"].append(u)
        cols["y"].append(y)
        cols["ld"].append(ld)
        cols["g"].append(g)
        if unwrap:
            cols["ph"].append(ph)
            cols["dp"].append(dp)
        return g * np.hypot(a, y)

    # coarse level, a few nodes at a time so that each batch knows how small it can be;
    # extended until the integrand's magnitude is negligible
    h = 0.5
    mag = add(np.array([0.0, h]))
    top = float(mag.max())
    u_last = h
    while mag[-1] > 1e-18 * top and u_last < 120.0:
        mag = add(u_last + h * np.arange(1, 5), top)
        top = max(top, float(mag.max()))
        u_last += 4 * h
    u_max = u_last

    def total(h):
        u = np.concatenate(cols["u"])
        y = np.concatenate(cols["y"])
        ld = np.concatenate(cols["ld"])
        worst = 0.0
        if unwrap:
            theta, worst = _unwrap(y, np.concatenate(cols["ph"]), np.concatenate(cols["dp"]))
            ld = ld + 1j * theta
        f = (np.exp(-0.5 * (ld - L0)) * (s0 / (s0 + 1j * y))).real * np.hypot(a, y)
        w = np.where(u == 0.0, 0.5, 1.0)
        return h * float(np.sum(w * f)), worst

    J_old, worst = total(h)
    errs = []
    for level in range(_MAX_LEVELS):
        add(h * (np.arange(int(round(u_max / h))) + 0.5), top)
        h *= 0.5
        J_new, worst = total(h)
        errs.append(abs(J_new - J_old) / abs(J_new) if J_new != 0 else math.inf)
        J_old = J_new
        if level >= 1 and errs[-1] < tol and worst < 0.5:
            break
        # rounding noise: halving no longer helps (the trapezoid rule converges exponentially)
        if level >= 3 and worst < 0.5 and errs[-1] > 0.25 * errs[-2] and errs[-1] < 1e3 * tol:
            break
    return J_old, errs[-1]
