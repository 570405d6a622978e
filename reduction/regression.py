"""Straight-line fits with errors in both coordinates, and weighted means.

* :func:`york_fit` — the York et al. (2004) best straight line with per-point σx, σy and error
  correlation ρ; :func:`york_fit_batch` fits many datasets at once (Monte Carlo).
* :func:`fit_isochron` — the same with a choice of scatter treatment and an optional anchor
  (a fixed intercept ± σ).
* :func:`weighted_mean` — inverse-variance weighted mean with MSWD, an optional external scatter
  estimated by maximum likelihood, and outlier flags.
* :func:`wendt_carl_limits` — MSWD range from the χ² 5 % and 95 % quantiles (upper end = the 95 %
  rejection limit; cf. Wendt & Carl 1991).
* :func:`ellipse_points` — outline of a point's error ellipse for a chart.

All inputs and outputs are 1σ absolute unless a name says otherwise. Probabilities use the
χ² distribution with the fit's degrees of freedom.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, List, Optional, Tuple

import numpy as np

from . import minimise, special
from ._validate import (
    as_array,
    as_count,
    as_scalar,
    finite_result,
    require_correlation,
    require_positive,
    require_same_length,
)
from .errors import ConvergenceError, InputError, UndefinedResultError

__all__ = [
    "ELLIPSE_MAX_POINTS",
    "MAX_ITER_LIMIT",
    "WEAK_TEST_MAX_DOF",
    "mswd_notes",
    "mswd_position",
    "TREATMENTS",
    "IsochronFit",
    "WeightedMean",
    "YorkBatch",
    "deviation_points",
    "ellipse_points",
    "fit_isochron",
    "weighted_mean",
    "wendt_carl_limits",
    "york_fit",
    "york_fit_batch",
]

#: Scatter treatments understood by :func:`fit_isochron` (names of our own).
TREATMENTS: Tuple[str, ...] = ("analytical", "expanded", "equal-weights", "excess-variance")

_CHUNK_VALUES = 65536   # values per array in one batch chunk (512 kB: fastest in bench_regression)
_BLAS_MAX = 4096  # below this length a single fit uses np.dot for its sums
#: Up to this length a single fit would run in Python floats (_york_scalar; crossover measured at ~60 points).
#: Off (0): with it, the excess-variance treatment's maximum-likelihood fit of tests/cells/cases.py differed by
#: 3e-10 between numpy 1.24 (bundled, Python 3.8) and numpy 2.4, where the array solver agrees; until that
#: is understood every fit uses the array solver.
_SCALAR_MAX = 0
_ATOL = 1e-300  # absolute floor of the convergence test, only matters for a slope of exactly 0
_FLOOR_RTOL = 1e-12  # a repeated update within this of its input ends the iteration (rounding floor)
#: Upper bound of ``max_iter`` (York fits converge in tens of steps; the bound keeps a typo from
#: running for hours).
MAX_ITER_LIMIT = 100_000
#: Upper bound of :func:`ellipse_points`' ``n_points`` (a chart outline needs tens; 1e9 points took
#: 102 s and 24 GB).
ELLIPSE_MAX_POINTS = 10_000


# --------------------------------------------------------------------------------------------
# result types
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class IsochronFit:
    """Result of a straight-line fit ``y = intercept + slope * x``.

    Every ``*_sigma_1s`` is a 1σ absolute standard error of the stated treatment; for
    ``"analytical"`` it is York's unscaled error (not multiplied by √MSWD). ``sigma_scale`` is the
    factor by which the analytical errors were multiplied (√MSWD for ``"expanded"`` when
    MSWD > 1, else 1), so the unscaled errors are always ``slope_sigma_1s / sigma_scale``.
    ``mswd``, ``p_value`` and ``mswd_limits_95`` describe the scatter of the data about the line
    relative to the analytical errors; they are ``None`` for two points (no degrees of freedom).
    ``mswd_limits_95`` is the χ² 5 %–95 % range of the MSWD (a 90 % two-sided interval whose upper
    end is the 95 % rejection limit; see :func:`wendt_carl_limits`).
    The ``*_95_expanded`` errors are ``t95 * sqrt(max(MSWD, 1))`` times the analytical 1σ
    errors (95 % limits, Student-t with ``dof`` degrees of freedom; common practice).
    """

    n: int
    dof: int
    slope: float
    slope_sigma_1s: float
    intercept: float
    intercept_sigma_1s: float
    cov_slope_intercept: float
    rho_slope_intercept: float
    mswd: Optional[float]
    p_value: Optional[float]
    mswd_limits_95: Optional[Tuple[float, float]]
    treatment: str
    x_centroid: float
    y_centroid: float
    iterations: int
    excess_sigma_y_1s: float = 0.0
    excess_sigma_y_sigma_1s: Optional[float] = None
    t95: Optional[float] = None
    slope_sigma_95_expanded: Optional[float] = None
    intercept_sigma_95_expanded: Optional[float] = None
    sigma_scale: float = 1.0
    chi2: Optional[float] = None
    anchor: Optional[Tuple[float, float]] = None

    @property
    def slope_sigma_1s_unscaled(self) -> float:
        """Slope standard error before any √MSWD scaling (1σ)."""
        return self.slope_sigma_1s / self.sigma_scale

    @property
    def intercept_sigma_1s_unscaled(self) -> float:
        """Intercept standard error before any √MSWD scaling (1σ)."""
        return self.intercept_sigma_1s / self.sigma_scale


@dataclass(frozen=True)
class YorkBatch:
    """Results of :func:`york_fit_batch`: one array element per dataset (unscaled 1σ errors)."""

    slope: np.ndarray
    slope_sigma_1s: np.ndarray
    intercept: np.ndarray
    intercept_sigma_1s: np.ndarray
    cov_slope_intercept: np.ndarray
    mswd: np.ndarray
    iterations: np.ndarray


@dataclass(frozen=True)
class WeightedMean:
    """Result of :func:`weighted_mean`.

    ``mean_sigma_1s`` is the 1σ standard error of the mean; with ``external_scatter`` it includes
    the external scatter ``external_sigma_1s`` (an added variance estimated by maximum
    likelihood), otherwise it is the analytical ``1/sqrt(sum(1/sigma**2))`` and
    ``external_sigma_1s`` is 0. ``mswd`` and ``p_value`` always refer to the analytical errors;
    they are ``None`` for a single value. ``outliers[i]`` is True when value i fails ``rule``.
    """

    n: int
    mean: float
    mean_sigma_1s: float
    mswd: Optional[float]
    p_value: Optional[float]
    external_sigma_1s: float
    outliers: Tuple[bool, ...]
    rule: str
    external_sigma_sigma_1s: Optional[float] = None
    dof: int = 0


# --------------------------------------------------------------------------------------------
# small statistics helpers (reduction.special: no scipy at run time)
# --------------------------------------------------------------------------------------------
def _chi2_sf(s: float, dof: int) -> float:
    return special.chi2_sf(s, dof)


@lru_cache(maxsize=256)
def _t975(dof: int) -> float:
    return special.t_ppf(0.975, dof)


@lru_cache(maxsize=256)
def _limits_95(dof: int) -> Tuple[float, float]:
    return wendt_carl_limits(dof)


def wendt_carl_limits(dof: int, level: float = 0.95, *, approximate: bool = False) -> Tuple[float, float]:
    """MSWD range for ``dof`` degrees of freedom: the χ² quantiles ``1 − level`` and ``level`` over dof.

    For data scattering only by their analytical errors, MSWD·dof follows χ² with ``dof`` degrees of
    freedom. This function returns ``(chi2.ppf(1 − level, dof)/dof, chi2.ppf(level, dof)/dof)``; with
    the default ``level = 0.95`` that is the 5 %–95 % range, i.e. a **90 % two-sided interval**
    whose upper end is the **95 % one-sided rejection limit** (an MSWD above it has probability
    5 % for a true line). That upper limit is what Wendt & Carl (1991) approximate by
    ``1 + 2*sqrt(2/dof)`` (their 95 % rejection rule, from E[MSWD] = 1 and σ(MSWD) = sqrt(2/dof));
    ``approximate=True`` returns their form ``1 ± 2*sqrt(2/dof)`` (lower end clipped at 0).

    Parameters
    ----------
    dof : int
        Degrees of freedom, a whole number from 1 to 1e15.
    level : float
        One-sided level in (0, 1) of each end (0.95: 5 % and 95 % quantiles).
    approximate : bool
        Return the Wendt & Carl approximation instead of the exact χ² limits.

    References
    ----------
    Wendt, I. & Carl, C. 1991, Chem. Geol. (Isot. Geosci.) 86, 275–285.

    Examples
    --------
    >>> round(wendt_carl_limits(8)[1], 3)
    1.938
    """
    f = as_count("dof", dof, 1, 10 ** 15)
    level = as_scalar("level", level)
    if not 0 < level < 1:
        raise InputError("level", f"must lie strictly between 0 and 1, got {level!r}")
    if approximate:
        half = 2.0 * math.sqrt(2.0 / f)
        return max(0.0, 1.0 - half), 1.0 + half
    return special.chi2_isf(level, f) / f, special.chi2_isf(1.0 - level, f) / f


# --------------------------------------------------------------------------------------------
# York core: points on axis 0, so one code path serves a single fit (n,) and a batch (n, m).
# The loop works in preallocated buffers (in-place ufuncs): for large n, fresh temporaries cost
# more than the arithmetic.
# --------------------------------------------------------------------------------------------
_ALL_EQUAL = "all x values are equal: the slope of a line through them is undefined"
_EPS = float(np.finfo(float).eps)
_FP_PROBLEM = ("the values or their errors are too large or too small for double precision (a square, "
               "weight or product of them overflows or underflows); rescale x and y and their errors "
               "(e.g. express them in other units) before fitting")


def _x_spread(sxx: Any, xm: Any, n: int) -> Any:
    """False where Σ(x − x̄)² is zero up to rounding: x values equal to within a few ulps of their
    mean (e.g. 0.1, 0.1, 0.1, whose deviations from the computed mean are ~1e-17, not 0)."""
    tol = 16.0 * _EPS * xm
    return sxx > n * tol * tol     # a product, not **: a Python float ** overflows into an exception


def _fp_guard() -> Any:
    """Floating-point overflow, division by zero and invalid operations raise (underflow to a
    subnormal or 0 is allowed): they become an UndefinedResultError with :data:`_FP_PROBLEM`."""
    return np.errstate(over="raise", divide="raise", invalid="raise", under="ignore")


# --------------------------------------------------------------------------------------------
class _Work:
    """Per-iteration arrays of the York solver for one working set of datasets."""

    def __init__(self, x: np.ndarray, vx: np.ndarray, y: np.ndarray, vy: np.ndarray, c: np.ndarray,
                 has_rho: bool) -> None:
        self.x, self.vx, self.y, self.vy, self.c = x, vx, y, vy, c
        self.c2 = 2.0 * c if has_rho else None
        self.has_rho = has_rho
        self.d = np.empty_like(x)
        self.w = np.empty_like(x)
        # (a short single fit, n < _BLAS_MAX, is solved by _york_single instead)
        self.u = np.empty_like(x)
        self.v = np.empty_like(x)
        self.t = np.empty_like(x)
        self.tmp = np.empty_like(x)
        self.e = np.empty_like(x)
        self.sw: Any = None
        self.xb: Any = None
        self.yb: Any = None

    def take(self, keep: np.ndarray) -> _Work:
        return _Work(self.x[:, keep], self.vx[:, keep], self.y[:, keep], self.vy[:, keep], self.c[:, keep],
                     self.has_rho)

    def wsum(self, a: np.ndarray, b: np.ndarray) -> Any:
        # BLAS dot for short vectors only: a threaded dot stalls on a busy machine
        if a.ndim == 1 and a.size < _BLAS_MAX:
            return a @ b
        if a.ndim == 2:   # one pass, no temporary: column sums of the product, in the same order
            return np.einsum("ij,ij->j", a, b)
        np.multiply(a, b, out=self.tmp)
        return np.add.reduce(self.tmp, axis=0)

    def update(self, b: Any) -> Any:
        """York's slope update g(b) = Σ W β V / Σ W β U (York et al. 2004, eqs. 13a and 18)."""
        d, w, u, v, t, tmp = self.d, self.w, self.u, self.v, self.t, self.tmp
        # W = 1/(σy² + b²σx² − 2bρσxσy)
        np.multiply(self.vx, b, out=d)
        if self.has_rho:
            d -= self.c2
        d *= b
        d += self.vy
        np.divide(1.0, d, out=w)
        self.sw = sw = np.add.reduce(w, axis=0)
        self.xb = xb = self.wsum(w, self.x) / sw
        self.yb = yb = self.wsum(w, self.y) / sw
        np.subtract(self.x, xb, out=u)
        np.subtract(self.y, yb, out=v)
        # W β = W² [U σy² + b V σx² − (bU + V) ρσxσy]
        np.multiply(u, self.vy, out=t)
        np.multiply(v, self.vx, out=tmp)
        tmp *= b
        t += tmp
        if self.has_rho:
            np.multiply(u, b, out=tmp)
            tmp += v
            tmp *= self.c
            t -= tmp
        t *= w
        t *= w
        return self.wsum(t, v) / self.wsum(t, u)


def _york_single(x: np.ndarray, sx: np.ndarray, y: np.ndarray, sy: np.ndarray, r: np.ndarray,
                 max_iter: int, rtol: float) -> Tuple[Any, ...]:
    """:func:`_york_solve` for one short dataset (n < ``_BLAS_MAX``): the same operations in the same
    order (so the same numbers), with the update inlined, one working block and Python-float
    scalars, because at small n the cost is in the number of calls, not in the arithmetic."""
    n = x.size
    has_rho = bool(r.any())
    vx = sx * sx
    vy = sy * sy
    blk = np.empty((9, n))
    blk[0] = 1.0
    blk[1] = x
    blk[2] = y
    p1xy, uv = blk[0:3], blk[3:5]
    u, v, d, w, t, tmp = blk[3], blk[4], blk[5], blk[6], blk[7], blk[8]
    if has_rho:
        c = r * sx * sy
        c2 = 2.0 * c
    mul, sub = np.multiply, np.subtract
    # start from ordinary least squares of y on x (York et al. 2004, step 1)
    xm = float(np.add.reduce(x, axis=0)) / n
    sub(x, xm, out=u)
    sxx = float(u @ u)
    if not _x_spread(sxx, xm, n):
        raise UndefinedResultError(_ALL_EQUAL)
    bw = float(u @ y) / sxx
    b_prev = h_prev = None
    seen = set()
    iterations = 0
    for _ in range(max_iter):
        # York's slope update g(b) = Σ W β V / Σ W β U (York et al. 2004, eqs. 13a and 18), as _Work.update
        mul(vx, bw, out=d)
        if has_rho:
            d -= c2
        d *= bw
        d += vy
        np.divide(1.0, d, out=w)
        sw, swx, swy = (p1xy @ w).tolist()
        xb = swx / sw
        yb = swy / sw
        sub(x, xb, out=u)
        sub(y, yb, out=v)
        mul(u, vy, out=t)
        mul(v, vx, out=tmp)
        tmp *= bw
        t += tmp
        if has_rho:
            mul(u, bw, out=tmp)
            tmp += v
            tmp *= c
            t -= tmp
        t *= w
        t *= w
        den, num = (uv @ t).tolist()
        if den == 0:
            raise UndefinedResultError("the York slope equation is degenerate (Σ W β U = 0): the x values do "
                                       "not spread enough for a slope")
        g = num / den
        h = g - bw
        iterations += 1
        if abs(h) <= rtol * abs(g) + _ATOL:
            break
        if g in seen and abs(h) <= _FLOOR_RTOL * abs(g):
            break
        seen.add(g)
        b_prev, h_prev, bw = bw, h, _next_slope(bw, g, h, b_prev, h_prev)
    else:
        raise ConvergenceError(f"York slope iteration did not converge to rtol={rtol:g} in {max_iter} iterations")
    b = g
    if not math.isfinite(b):
        raise UndefinedResultError("the York slope is not finite (degenerate data)")
    # final quantities (York et al. 2004, steps 5-8) from the state of the last update
    a = yb - b * xb
    e = tmp
    mul(u, b, out=e)
    sub(v, e, out=e)
    mul(e, e, out=e)
    s = float(w @ e)
    beta = np.divide(t, w, out=t)
    xadj_bar = xb + float(w @ beta) / sw
    np.add(beta, xb - xadj_bar, out=d)
    mul(d, d, out=d)
    swuu = float(w @ d)
    if not swuu > 0:
        raise UndefinedResultError("all adjusted x values are equal: the slope error is undefined")
    var_b = 1.0 / swuu
    var_a = 1.0 / sw + xadj_bar * xadj_bar * var_b
    return b, a, math.sqrt(var_b), math.sqrt(var_a), -xadj_bar * var_b, s, iterations, xb, yb


def _york_scalar(x: np.ndarray, sx: np.ndarray, y: np.ndarray, sy: np.ndarray, r: np.ndarray,
                 max_iter: int, rtol: float) -> Tuple[Any, ...]:
    """:func:`_york_single` in plain Python floats, for a few points (n ≤ ``_SCALAR_MAX``).

    The same iteration, stopping rule and final formulas (York et al. 2004, steps 1-8); the sums are
    taken left to right, so the numbers agree with the array solver to rounding (~1e-16), and they are
    the same on every numpy. At n = 10 a numpy call costs more than the arithmetic it does; a loop over
    Python floats fits Pearson's ten points about 5x faster than the array solver.
    """
    xs, ys = x.tolist(), y.tolist()
    sxl, syl = sx.tolist(), sy.tolist()
    vx = [s * s for s in sxl]
    vy = [s * s for s in syl]
    rl = r.tolist()
    has_rho = any(rl)
    c = [ri * a * b for ri, a, b in zip(rl, sxl, syl)] if has_rho else [0.0] * len(xs)
    n = len(xs)
    xm = sum(xs) / n
    u = [xi - xm for xi in xs]
    sxx = sum(ui * ui for ui in u)
    if not (math.isfinite(sxx) and math.isfinite(sum(vx) + sum(vy))):   # Python floats overflow silently
        raise FloatingPointError
    if not _x_spread(sxx, xm, n):
        raise UndefinedResultError(_ALL_EQUAL)
    bw = sum(ui * yi for ui, yi in zip(u, ys)) / sxx
    b_prev = h_prev = None
    seen = set()
    iterations = 0
    for _ in range(max_iter):
        # York's slope update g(b) = Σ W β V / Σ W β U (York et al. 2004, eqs. 13a and 18), as _Work.update
        w = [1.0 / ((a * bw - 2.0 * ci) * bw + b) for a, b, ci in zip(vx, vy, c)] if has_rho \
            else [1.0 / (a * bw * bw + b) for a, b in zip(vx, vy)]
        sw = swx = swy = 0.0
        for wi, xi, yi in zip(w, xs, ys):
            sw += wi
            swx += wi * xi
            swy += wi * yi
        xb = swx / sw
        yb = swy / sw
        u = [xi - xb for xi in xs]
        v = [yi - yb for yi in ys]
        t = [((ui * b + vi * a * bw) - (ui * bw + vi) * ci) * wi * wi
             for ui, vi, a, b, ci, wi in zip(u, v, vx, vy, c, w)]
        den = num = 0.0
        for ui, vi, ti in zip(u, v, t):
            den += ui * ti
            num += vi * ti
        if den == 0:
            raise UndefinedResultError("the York slope equation is degenerate (Σ W β U = 0): the x values do "
                                       "not spread enough for a slope")
        g = num / den
        if not math.isfinite(g):
            raise FloatingPointError
        h = g - bw
        iterations += 1
        if abs(h) <= rtol * abs(g) + _ATOL:
            break
        if g in seen and abs(h) <= _FLOOR_RTOL * abs(g):
            break
        seen.add(g)
        b_prev, h_prev, bw = bw, h, _next_slope(bw, g, h, b_prev, h_prev)
    else:
        raise ConvergenceError(f"York slope iteration did not converge to rtol={rtol:g} in {max_iter} iterations")
    b = g
    # final quantities (York et al. 2004, steps 5-8) from the state of the last update
    a = yb - b * xb
    s = sum(wi * (vi - ui * b) ** 2 for wi, ui, vi in zip(w, u, v))
    beta = [ti / wi for ti, wi in zip(t, w)]
    xadj_bar = xb + sum(wi * be for wi, be in zip(w, beta)) / sw
    shift = xb - xadj_bar
    swuu = sum(wi * (be + shift) ** 2 for wi, be in zip(w, beta))
    if not swuu > 0:
        raise UndefinedResultError("all adjusted x values are equal: the slope error is undefined")
    var_b = 1.0 / swuu
    var_a = 1.0 / sw + xadj_bar * xadj_bar * var_b
    return b, a, math.sqrt(var_b), math.sqrt(var_a), -xadj_bar * var_b, s, iterations, xb, yb


def _next_slope(bw: float, g: float, h: float, b_prev: Optional[float], h_prev: Optional[float]) -> float:
    """Next trial slope: a secant step on h(b) = g(b) − b, else York's plain update g.

    Same fixed point, fewer steps. The plain update is used where the secant is undefined, would
    step further than 4 plain updates, or would step against the plain update (towards another
    root of h, away from York's fixed point).
    """
    if h_prev is not None and h != h_prev:
        sec = bw - h * (bw - b_prev) / (h - h_prev)
        if math.isfinite(sec) and abs(sec - bw) <= 4.0 * abs(h) and (sec - bw) * h > 0:
            return sec
    return g


def _york_solve(x: np.ndarray, sx: np.ndarray, y: np.ndarray, sy: np.ndarray, r: np.ndarray,
                max_iter: int, rtol: float) -> Tuple[Any, ...]:
    """Iterate York's slope equation; return (slope, intercept, σb, σa, cov_ab, S, iterations, x̄, ȳ).

    Arrays have the points on axis 0: shape ``(n,)`` for one dataset, ``(n, m)`` for m datasets.
    """
    add = np.add.reduce
    batch = x.ndim == 2
    n = x.shape[0]
    has_rho = bool(r.any())
    vx = sx * sx
    vy = sy * sy
    cxy = r * sx * sy if has_rho else r
    work = _Work(x, vx, y, vy, cxy, has_rho)
    # start from ordinary least squares of y on x (York et al. 2004, step 1)
    xm = add(x, axis=0) / n
    dx = np.subtract(x, xm, out=work.u)
    sxx = work.wsum(dx, dx)
    if not np.all(_x_spread(sxx, xm, n)):
        raise UndefinedResultError(_ALL_EQUAL)
    b = work.wsum(dx, y) / sxx

    if not batch:
        bw = float(b)
        b_prev = h_prev = None
        seen = set()
        iterations: Any = 0
        for _ in range(max_iter):
            g = float(work.update(bw))
            h = g - bw
            iterations += 1
            if abs(h) <= rtol * abs(g) + _ATOL:
                b = g
                break
            # the update returned a slope it has returned before, within 1e-12: the iteration has
            # reached the rounding floor of the slope equation (above rtol for ill-conditioned data)
            if g in seen and abs(h) <= _FLOOR_RTOL * abs(g):
                b = g
                break
            seen.add(g)
            b_prev, h_prev, bw = bw, h, _next_slope(bw, g, h, b_prev, h_prev)
        else:
            raise ConvergenceError(f"York slope iteration did not converge to rtol={rtol:g} in {max_iter} iterations")
        if not math.isfinite(b):
            raise UndefinedResultError("the York slope is not finite (degenerate data)")
    else:
        m = b.shape[0]
        iterations = np.zeros(m, dtype=int)
        idx = np.arange(m)
        bw = b.copy()
        bp = hp = None
        fin = np.zeros(m, dtype=bool)
        for _ in range(max_iter):
            g = work.update(bw)
            h = g - bw
            done = np.abs(h) <= rtol * np.abs(g) + _ATOL
            if hp is None:
                nxt = g
            else:
                with np.errstate(divide="ignore", invalid="ignore"):
                    sec = bw - h * (bw - bp) / (h - hp)
                ok = np.isfinite(sec) & (np.abs(sec - bw) <= 4.0 * np.abs(h)) & ((sec - bw) * h > 0)
                nxt = np.where(ok, sec, g)
            iterations[idx] += ~fin
            b[idx] = np.where(fin, b[idx], g)
            fin = fin | done
            if fin.all():
                break
            bp, hp = bw, h
            bw = np.where(fin, bw, nxt)
            if fin.sum() * 2 > fin.size:   # most datasets have converged: drop them from the working set
                keep = ~fin
                idx = idx[keep]
                work = work.take(keep)
                bw, bp, hp, fin = bw[keep], bp[keep], hp[keep], fin[keep]
        else:
            raise ConvergenceError(f"York slope iteration did not converge to rtol={rtol:g} in {max_iter} iterations")
        if not np.all(np.isfinite(b)):
            raise UndefinedResultError("the York slope is not finite (degenerate data)")

    # final quantities at the converged slope (York et al. 2004, steps 5-8)
    if batch:
        # frozen or compacted rows hold stale state: evaluate every dataset at its slope
        work = _Work(x, vx, y, vy, cxy, has_rho)
        work.update(b)
    # a single fit keeps the state of its last update, evaluated at a slope within rtol of b
    w, u, v, e, d = work.w, work.u, work.v, work.e, work.d
    sw, xbar, ybar = work.sw, work.xb, work.yb
    a = ybar - b * xbar
    np.multiply(u, b, out=e)
    np.subtract(v, e, out=e)            # y − b x − a, since a = ȳ − b x̄
    np.multiply(e, e, out=e)
    s = work.wsum(w, e)
    beta = np.divide(work.t, w, out=work.t)             # β = (W β)/W
    xadj_bar = xbar + work.wsum(w, beta) / sw           # weighted mean of the adjusted x
    np.add(beta, xbar - xadj_bar, out=d)                # adjusted x minus its mean
    np.multiply(d, d, out=d)
    swuu = work.wsum(w, d)
    if np.any(swuu <= 0):
        raise UndefinedResultError("all adjusted x values are equal: the slope error is undefined")
    var_b = 1.0 / swuu
    var_a = 1.0 / sw + xadj_bar * xadj_bar * var_b
    cov_ab = -xadj_bar * var_b
    return b, a, np.sqrt(var_b), np.sqrt(var_a), cov_ab, s, iterations, xbar, ybar


def _fast_points(x: Any, sx: Any, y: Any, sy: Any, rho: Any) -> Optional[Tuple[np.ndarray, ...]]:
    """The five arrays from one stacked copy if they pass every check at once, else None."""
    if rho is None:
        stacked = np.array([x, sx, y, sy], dtype=float)
        if stacked.ndim == 2 and np.isfinite(stacked.sum()) and stacked[1::2].min() > 0:
            return stacked[0], stacked[1], stacked[2], stacked[3], np.zeros(stacked.shape[1])
        return None
    stacked = np.array([x, sx, y, sy, np.broadcast_to(rho, np.shape(x))], dtype=float)
    if (stacked.ndim == 2 and np.isfinite(stacked.sum()) and stacked[1:4:2].min() > 0
            and -1.0 < stacked[4].min() and stacked[4].max() < 1.0):
        return stacked[0], stacked[1], stacked[2], stacked[3], stacked[4]
    return None


def _check_points(x: Any, sx: Any, y: Any, sy: Any, rho: Any, ndim: int = 1,
                  names: Tuple[str, str, str, str, str] = ("x", "sx", "y", "sy", "rho")) -> Tuple[np.ndarray, ...]:
    """Validate the five point arrays (copies; the caller's arrays are never modified)."""
    if ndim == 1:
        # fast path: one stacked copy, checked at once; on any doubt the named checks below run
        # (a finite sum means every value is finite; sx and sy are rows 1 and 3, checked by one min)
        try:
            with np.errstate(over="ignore", invalid="ignore"):   # a sum that overflows takes the named checks
                fast = _fast_points(x, sx, y, sy, rho)
            if fast is not None:
                return fast
        except (TypeError, ValueError, OverflowError):
            pass
    xa = as_array(names[0], x, ndim=ndim)
    sxa = as_array(names[1], sx, ndim=ndim)
    ya = as_array(names[2], y, ndim=ndim)
    sya = as_array(names[3], sy, ndim=ndim)
    if rho is None:
        ra = np.zeros_like(xa)
    else:
        # one ρ for every point, or one per point: the length is checked before anything is broadcast
        ra = as_array(names[4], rho, ndim=None)
        if ra.ndim == 0 or ndim == 2:
            try:
                ra = np.broadcast_to(ra, xa.shape).copy()
            except ValueError:
                raise InputError(names[4], f"has shape {ra.shape} but {names[0]} has shape {xa.shape}: give one "
                                           "correlation, or one per point") from None
        elif ra.ndim != 1:
            raise InputError(names[4], f"must be one number or 1-dimensional, got shape {ra.shape}")
    if ndim == 1:
        require_same_length(**{names[0]: xa, names[1]: sxa, names[2]: ya, names[3]: sya, names[4]: ra})
    else:
        for nm, arr in zip(names[1:], (sxa, ya, sya, ra)):
            if arr.shape != xa.shape:
                raise InputError(nm, f"has shape {arr.shape} but {names[0]} has shape {xa.shape}")
    require_positive(names[1], sxa)
    require_positive(names[3], sya)
    require_correlation(names[4], ra)
    return xa, sxa, ya, sya, ra


def _two_point(x: np.ndarray, sx: np.ndarray, y: np.ndarray, sy: np.ndarray, r: np.ndarray
               ) -> Tuple[float, float, float, float, float]:
    """Exact line through two points; errors by linear propagation of both points' covariances."""
    dx = x[1] - x[0]
    if dx == 0:
        raise UndefinedResultError("all x values are equal: the slope of a line through them is undefined")
    b = (y[1] - y[0]) / dx
    a = y[0] - b * x[0]
    # d(b, a)/d(x1, y1, x2, y2)
    jb = np.array([b / dx, -1.0 / dx, -b / dx, 1.0 / dx])
    ja = np.array([-b - x[0] * jb[0], 1.0 - x[0] * jb[1], -x[0] * jb[2], -x[0] * jb[3]])
    cov = np.zeros((4, 4))
    for i in range(2):
        k = 2 * i
        cov[k, k] = sx[i] ** 2
        cov[k + 1, k + 1] = sy[i] ** 2
        cov[k, k + 1] = cov[k + 1, k] = r[i] * sx[i] * sy[i]
    vb = float(jb @ cov @ jb)
    va = float(ja @ cov @ ja)
    cab = float(ja @ cov @ jb)
    return float(b), float(a), math.sqrt(vb), math.sqrt(va), cab


def _make_fit(n: int, dof: int, b: float, a: float, sb: float, sa: float, cab: float, s: Optional[float],
              treatment: str, xbar: float, ybar: float, iterations: int, scale_by_mswd: bool = False,
              anchor: Optional[Tuple[float, float]] = None) -> IsochronFit:
    if dof > 0 and s is not None:
        mswd: Optional[float] = s / dof
        p: Optional[float] = _chi2_sf(s, dof)
        limits: Optional[Tuple[float, float]] = _limits_95(dof)
        t95: Optional[float] = _t975(dof)
        expand = t95 * math.sqrt(max(mswd, 1.0))
        sb95: Optional[float] = expand * sb
        sa95: Optional[float] = expand * sa
    else:
        mswd = p = limits = t95 = sb95 = sa95 = None
    scale = 1.0
    if scale_by_mswd and mswd is not None and mswd > 1.0:
        scale = math.sqrt(mswd)
    rab = (cab / sb) / sa if sb > 0 and sa > 0 else 0.0     # divided twice: sb·sa may underflow
    # every field given, in declaration order: filled directly, skipping the frozen dataclass's
    # per-field object.__setattr__ (the instance is the same: fields, equality, repr, replace)
    fit = object.__new__(IsochronFit)
    fit.__dict__.update(
        n=n, dof=dof, slope=float(b), slope_sigma_1s=float(sb) * scale, intercept=float(a),
        intercept_sigma_1s=float(sa) * scale, cov_slope_intercept=float(cab) * scale * scale,
        rho_slope_intercept=float(max(-1.0, min(1.0, rab))), mswd=mswd, p_value=p, mswd_limits_95=limits,
        treatment=treatment, x_centroid=float(xbar), y_centroid=float(ybar), iterations=int(iterations),
        excess_sigma_y_1s=0.0, excess_sigma_y_sigma_1s=None,
        t95=t95, slope_sigma_95_expanded=sb95, intercept_sigma_95_expanded=sa95, sigma_scale=scale,
        chi2=None if s is None or dof == 0 else float(s), anchor=anchor)
    return fit


# --------------------------------------------------------------------------------------------
# public fits
# --------------------------------------------------------------------------------------------
def york_fit(x: Any, sx: Any, y: Any, sy: Any, rho: Any = None, *, max_iter: int = 500,
             rtol: float = 1e-15) -> IsochronFit:
    """Best straight line through points with errors in x and y (York et al. 2004).

    Parameters
    ----------
    x, y : array_like, shape (n,)
        Coordinates (e.g. ¹⁴⁷Sm/¹⁴⁴Nd and ¹⁴³Nd/¹⁴⁴Nd).
    sx, sy : array_like, shape (n,)
        1σ absolute errors of x and y, all > 0.
    rho : array_like or float, optional
        Correlation of the x and y errors of each point, in (−1, 1); default 0.
    max_iter : int
        Iteration limit of the slope equation, 1 to :data:`MAX_ITER_LIMIT` (100 000).
    rtol : float
        Relative convergence tolerance of the slope (> 0).

    Returns
    -------
    IsochronFit
        Slope, intercept, their unscaled 1σ standard errors and covariance, MSWD = S/(n − 2),
        p = P(χ²_{n−2} > S), the χ² 5 %–95 % MSWD range (upper end = 95 % rejection limit, cf. Wendt &
        Carl 1991), Student-t expanded 95 % errors.

    Notes
    -----
    The slope is found by fixed-point iteration of York et al.'s (2004) equation
    ``b = Σ W β V / Σ W β U``, starting from the ordinary least-squares slope of y on x.
    **Convergence rule:** iteration stops at the first step with
    ``|b_k − b_{k−1}| ≤ rtol·|b_k| + 1e-300``, or, for ill-conditioned data whose slope equation
    cannot be evaluated to ``rtol``, at the first update that repeats an earlier one exactly with
    ``|b_k − b_{k−1}| ≤ 1e-12·|b_k|`` (the rounding floor); after ``max_iter`` steps without either,
    :class:`~reduction.errors.ConvergenceError` is raised. The standard errors are York et al.'s
    (2004) unified formulas (σ_b² = 1/Σ W u², σ_a² = 1/Σ W + x̄² σ_b², cov(a, b) = −x̄ σ_b², with
    x̄ the weighted mean of the adjusted x); they are not multiplied by √MSWD.
    Two points give the exact line through them (dof = 0, MSWD ``None``), its errors by linear
    propagation of both points' error ellipses; fewer than two points are rejected.

    References
    ----------
    York, D., Evensen, N.M., López Martínez, M. & De Basabe Delgado, J. 2004, Am. J. Phys. 72,
    367–375. Wendt, I. & Carl, C. 1991, Chem. Geol. 86, 275–285.

    Examples
    --------
    >>> fit = york_fit([1.0, 2.0, 3.0], [0.01] * 3, [2.0, 4.1, 5.9], [0.1] * 3)
    >>> round(fit.slope, 3), fit.dof
    (1.95, 1)
    """
    xa, sxa, ya, sya, ra = _check_points(x, sx, y, sy, rho)
    return _york_checked(xa, sxa, ya, sya, ra, max_iter, rtol, "analytical")


def _york_checked(xa: np.ndarray, sxa: np.ndarray, ya: np.ndarray, sya: np.ndarray, ra: np.ndarray,
                  max_iter: int, rtol: float, treatment: str, scale_by_mswd: bool = False,
                  anchor: Optional[Tuple[float, float]] = None, n_report: Optional[int] = None) -> IsochronFit:
    n = xa.size
    if n < 2:
        raise InputError("x", f"a line needs at least 2 points, got {n}")
    max_iter, rtol = _iteration_options(max_iter, rtol)
    n_report = n if n_report is None else n_report
    if n == 2:
        try:
            with _fp_guard():
                b, a, sb, sa, cab = _two_point(xa, sxa, ya, sya, ra)
                w = 1.0 / (sya ** 2 + b * b * sxa ** 2 - 2 * b * ra * sxa * sya)
                xbar = float(w @ xa / w.sum())
        except (FloatingPointError, ZeroDivisionError, OverflowError):
            raise UndefinedResultError(f"two-point line: {_FP_PROBLEM}") from None
        if not (sb > 0 and sa > 0 and math.isfinite(sb) and math.isfinite(sa)):
            raise UndefinedResultError(f"two-point line: {_FP_PROBLEM}")
        return _finite_fit(_make_fit(n_report, 0, b, a, sb, sa, cab, None, treatment, xbar, a + b * xbar, 0,
                                     anchor=anchor))
    solve = _york_scalar if n <= _SCALAR_MAX else _york_single if n < _BLAS_MAX else _york_solve
    try:
        with _fp_guard():
            b, a, sb, sa, cab, s, it, xbar, ybar = solve(xa, sxa, ya, sya, ra, max_iter, rtol)
    except (FloatingPointError, ZeroDivisionError, OverflowError):
        raise UndefinedResultError(f"York fit: {_FP_PROBLEM}") from None
    if not all(math.isfinite(float(v)) for v in (b, a, sb, sa, cab, s)):
        raise UndefinedResultError(f"York fit: {_FP_PROBLEM}")
    return _finite_fit(_make_fit(n_report, n - 2, float(b), float(a), float(sb), float(sa), float(cab), float(s),
                                 treatment, float(xbar), float(ybar), int(it), scale_by_mswd=scale_by_mswd,
                                 anchor=anchor))


def _finite_fit(fit: IsochronFit) -> IsochronFit:
    """The fit, if every number in it is finite (the expanded errors t·√MSWD·σ can overflow)."""
    d = fit.__dict__
    # a sum of finite floats minus itself is 0.0; an inf or NaN anywhere makes it NaN (one test for all;
    # a sum that overflows takes the named checks below, which pass)
    total = sum([v for v in d.values() if type(v) is float]) + sum(fit.mswd_limits_95 or ())
    if total - total == 0.0:
        return fit
    vals = {k: v for k, v in d.items() if isinstance(v, float)}
    if fit.mswd_limits_95 is not None:
        vals["MSWD range"] = fit.mswd_limits_95
    finite_result(f"York fit ({fit.treatment})", **vals)
    return fit


def _iteration_options(max_iter: Any, rtol: Any) -> Tuple[int, float]:
    """Check ``max_iter`` (1 to :data:`MAX_ITER_LIMIT`) and ``rtol`` (> 0)."""
    it = as_count("max_iter", max_iter, 1, MAX_ITER_LIMIT, "York fits converge in tens of iterations")
    tol = as_scalar("rtol", rtol)
    if not tol > 0:
        raise InputError("rtol", f"must be > 0, got {tol!r}")
    return it, tol


def york_fit_batch(x: Any, sx: Any, y: Any, sy: Any, rho: Any = None, *, max_iter: int = 500,
                   rtol: float = 1e-15) -> YorkBatch:
    """York et al. (2004) fits of many datasets at once, e.g. Monte Carlo trials.

    Parameters
    ----------
    x, sx, y, sy : array_like, shape (m, n)
        One dataset per row (m datasets of n ≥ 3 points), 1σ absolute errors.
    rho : array_like, optional
        Error correlations, broadcastable to (m, n); default 0.
    max_iter, rtol
        As in :func:`york_fit`; the convergence rule is applied row by row and a row that has
        converged is no longer updated.

    Returns
    -------
    YorkBatch
        Arrays of shape (m,): slope, intercept, unscaled 1σ errors, covariance, MSWD, iterations.

    References
    ----------
    York et al. 2004, Am. J. Phys. 72, 367–375.
    """
    max_iter, rtol = _iteration_options(max_iter, rtol)
    xa, sxa, ya, sya, ra = _check_points(x, sx, y, sy, rho, ndim=2)
    if xa.shape[1] < 3:
        raise InputError("x", f"each dataset needs at least 3 points, got {xa.shape[1]}")
    m, n = xa.shape
    out = [np.empty(m) for _ in range(6)]
    its = np.empty(m, dtype=int)
    # chunks of datasets small enough for the working arrays to stay in cache
    chunk = max(256, _CHUNK_VALUES // n)
    for i in range(0, m, chunk):
        j = min(m, i + chunk)
        try:
            with _fp_guard():
                res = _york_solve(*(np.ascontiguousarray(z[i:j].T) for z in (xa, sxa, ya, sya, ra)),
                                  max_iter, rtol)
        except (FloatingPointError, ZeroDivisionError, OverflowError):
            raise UndefinedResultError(f"York fit of datasets {i + 1}-{j}: {_FP_PROBLEM}") from None
        if not all(np.all(np.isfinite(res[k])) for k in range(6)):
            raise UndefinedResultError(f"York fit of datasets {i + 1}-{j}: {_FP_PROBLEM}")
        for k in range(6):
            out[k][i:j] = res[k]
        its[i:j] = res[6]
    b, a, sb, sa, cab, s = out
    return YorkBatch(b, sb, a, sa, cab, s / (n - 2), its)


def _equal_weights(xa: np.ndarray, ya: np.ndarray) -> Tuple[float, float, float, float, float]:
    """Ordinary least squares of y on x; errors from the residual scatter (s² = RSS/(n − 2))."""
    n = xa.size
    xm = xa.mean()
    dx = xa - xm
    sxx = float(dx @ dx)
    if not _x_spread(sxx, float(xm), n):
        raise UndefinedResultError(_ALL_EQUAL)
    b = float(dx @ (ya - ya.mean())) / sxx
    a = float(ya.mean() - b * xm)
    res = ya - a - b * xa
    s2 = float(res @ res) / (n - 2)
    vb = s2 / sxx
    va = s2 * (1.0 / n + xm * xm / sxx)
    return b, a, math.sqrt(vb), math.sqrt(va), -xm * vb


def _excess_nll(p: np.ndarray, xc: np.ndarray, vx: np.ndarray, yc: np.ndarray, vy: np.ndarray,
                cxy: np.ndarray) -> float:
    """−2 ln L (up to a constant) of the line with an added variance p[2]² on y."""
    a, b, s = p
    var = vy + s * s + b * (b * vx - 2.0 * cxy)
    res = yc - a - b * xc
    return float(np.sum(res * res / var + np.log(var)))


def _excess_grad(p: np.ndarray, xc: np.ndarray, vx: np.ndarray, yc: np.ndarray, vy: np.ndarray,
                 cxy: np.ndarray) -> np.ndarray:
    """Gradient of :func:`_excess_nll` in (a, b, s), analytic; holds for complex ``p`` (complex step)."""
    a, b, s = p
    var = vy + s * s + b * (b * vx - 2.0 * cxy)
    res = yc - a - b * xc
    q = 1.0 / var - res * res / (var * var)          # ∂(r²/V + ln V)/∂V
    return np.array([np.sum(-2.0 * res / var),
                     np.sum(-2.0 * res * xc / var + q * (2.0 * b * vx - 2.0 * cxy)),
                     np.sum(q * 2.0 * s)])


def _excess_hessian(p: np.ndarray, *args: np.ndarray) -> np.ndarray:
    """Hessian of :func:`_excess_nll`: complex step of the analytic gradient, exact to rounding.

    Column i is Im ∇f(p + i·h·eᵢ)/h with h = 1e-20 (Squire & Trapp 1998; Martins, Sturdza & Alonso
    2003): no subtraction, so no step-size trade-off and the same digits on every numpy.
    """
    k = p.size
    hess = np.empty((k, k))
    h = 1e-20
    for i in range(k):
        z = p.astype(complex)
        z[i] += 1j * h
        hess[:, i] = np.imag(_excess_grad(z, *args)) / h
    return 0.5 * (hess + hess.T)


def _excess_variance(xa: np.ndarray, sxa: np.ndarray, ya: np.ndarray, sya: np.ndarray, ra: np.ndarray,
                     york: IsochronFit) -> Tuple[float, float, float, float, float, float, Optional[float]]:
    """Maximum-likelihood line with an added (excess) variance on y; returns b, a, σb, σa, cov, s, σs."""
    xm, ym = float(xa.mean()), float(ya.mean())
    sc_x = float(np.std(xa)) or 1.0
    sc_y = float(np.median(sya))
    # work in centred, scaled coordinates so the optimiser sees numbers of order 1
    xc = (xa - xm) / sc_x
    yc = (ya - ym) / sc_y
    vx = (sxa / sc_x) ** 2
    vy = (sya / sc_y) ** 2
    cxy = ra * (sxa / sc_x) * (sya / sc_y)
    b0 = york.slope * sc_x / sc_y
    a0 = (york.intercept + york.slope * xm - ym) / sc_y
    s0 = math.sqrt(max(york.mswd or 1.0, 1.0) - 1.0 + 0.1)
    args = (xc, vx, yc, vy, cxy)

    def nll(q: np.ndarray) -> float:
        return _excess_nll(q, *args)

    best = None
    for start in (s0, 3.0 * s0, 0.3 * s0):
        r = minimise.nelder_mead(nll, np.array([a0, b0, start]), xatol=1e-10, fatol=1e-13, max_fev=6000)
        if best is None or r.fun < best.fun:
            best = r
    r = minimise.newton_polish(nll, lambda q: _excess_grad(q, *args), best.x,
                               hess=lambda q: _excess_hessian(q, *args))
    p = r.x.copy()
    if not (np.all(np.isfinite(p)) and math.isfinite(r.fun)):
        raise ConvergenceError("maximum-likelihood fit with excess variance did not converge")
    p[2] = abs(p[2])
    hess = _excess_hessian(p, *args)
    # −2 ln L: the covariance is the inverse of half its Hessian (observed Fisher information)
    try:
        cov = np.linalg.inv(0.5 * hess)
    except np.linalg.LinAlgError:
        raise UndefinedResultError("the excess-variance likelihood is flat: errors undefined") from None
    a_c, b_c, s_c = p
    b = b_c * sc_y / sc_x
    a = ym + a_c * sc_y - b * xm
    jb = np.array([0.0, sc_y / sc_x])
    ja = np.array([sc_y, -xm * sc_y / sc_x])
    cab2 = cov[:2, :2]
    vb = float(jb @ cab2 @ jb)
    va = float(ja @ cab2 @ ja)
    cab = float(ja @ cab2 @ jb)
    s = float(s_c * sc_y)
    var_s = float(cov[2, 2])
    ss: Optional[float] = math.sqrt(var_s) * sc_y if var_s > 0 and s_c > 1e-6 else None
    if vb <= 0 or va <= 0:
        raise UndefinedResultError("the excess-variance fit has no positive-definite error matrix")
    return b, a, math.sqrt(vb), math.sqrt(va), cab, s, ss


def fit_isochron(x: Any, sx: Any, y: Any, sy: Any, rho: Any = None, *, treatment: str = "analytical",
                 anchor: Optional[Tuple[float, float]] = None, max_iter: int = 500,
                 rtol: float = 1e-15) -> IsochronFit:
    """Fit an isochron with a chosen treatment of scatter beyond the analytical errors.

    Parameters
    ----------
    x, sx, y, sy, rho
        As in :func:`york_fit` (1σ absolute errors).
    treatment : {"analytical", "expanded", "equal-weights", "excess-variance"}
        ``"analytical"``: York et al. (2004) with the analytical errors only; the result also
        carries Student-t × √MSWD expanded 95 % limits (``*_95_expanded``).
        ``"expanded"``: the same line, its 1σ errors (and covariance) multiplied by √MSWD when
        MSWD > 1 (``sigma_scale`` records the factor; common practice).
        ``"equal-weights"``: ordinary least squares of y on x with every point weighted
        equally; errors from the residual scatter, s² = RSS/(n − 2).
        ``"excess-variance"``: maximum-likelihood fit with an added variance s² on y, i.e. the
        residual of point i has variance ``σy² + b²σx² − 2bρσxσy + s²``; the line and s
        maximise the full likelihood ``−2 ln L = Σ [r²/var + ln var]`` (random-effects model,
        cf. Kelly 2007, ApJ 665, 1489, recalled from memory), errors from the observed Fisher
        information (Hessian by complex step of the analytic gradient). ``excess_sigma_y_1s`` is s and
        ``excess_sigma_y_sigma_1s`` its 1σ error (``None`` when s is at 0).
        In every treatment ``mswd`` and ``p_value`` describe the analytical York fit.
    anchor : (float, float), optional
        ``(initial_value, initial_sigma_1s)``: the fit also passes through the intercept
        ``initial_value ± initial_sigma_1s`` (σ > 0), entered as one more point at x = 0 with
        σx = 0; this adds one degree of freedom (dof = n − 1). Only with ``"analytical"`` and
        ``"expanded"``.

    Returns
    -------
    IsochronFit

    References
    ----------
    York et al. 2004, Am. J. Phys. 72, 367–375; Wendt & Carl 1991, Chem. Geol. 86, 275–285.
    """
    if treatment not in TREATMENTS:
        raise InputError("treatment", f"unknown treatment {treatment!r}; use one of {', '.join(TREATMENTS)}")
    xa, sxa, ya, sya, ra = _check_points(x, sx, y, sy, rho)
    n = xa.size
    if n < 2:
        raise InputError("x", f"a line needs at least 2 points, got {n}")
    if anchor is not None:
        if treatment not in ("analytical", "expanded"):
            raise InputError("anchor", f"an anchored fit is available with treatment 'analytical' or 'expanded', "
                                       f"not {treatment!r}")
        try:
            a0, s0 = anchor
        except (TypeError, ValueError, OverflowError):
            raise InputError("anchor", f"must be (initial_value, initial_sigma_1s), got {anchor!r}") from None
        a0 = as_scalar("anchor value", a0)
        s0 = as_scalar("anchor sigma", s0)
        if s0 <= 0:
            raise InputError("anchor sigma", f"must be > 0, got {s0!r}")
        if np.all(xa == xa[0]) and xa[0] == 0:
            raise UndefinedResultError("all x values and the anchor are at x = 0: the slope is undefined")
        xs = np.append(xa, 0.0)
        sxs = np.append(sxa, 0.0)
        ys = np.append(ya, a0)
        sys_ = np.append(sya, s0)
        rs = np.append(ra, 0.0)
        return _york_checked(xs, sxs, ys, sys_, rs, max_iter, rtol, treatment,
                             scale_by_mswd=treatment == "expanded", anchor=(a0, s0), n_report=n)
    york = _york_checked(xa, sxa, ya, sya, ra, max_iter, rtol, treatment,
                         scale_by_mswd=treatment == "expanded")
    if treatment in ("analytical", "expanded"):
        return york
    if n < 3:
        raise InputError("treatment", f"{treatment!r} needs at least 3 points, got {n}")
    with np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore"):
        if treatment == "equal-weights":
            b, a, sb, sa, cab = _equal_weights(xa, ya)
            extra = {}
        else:
            b, a, sb, sa, cab, s, ss = _excess_variance(xa, sxa, ya, sya, ra, york)
            extra = {"excess_sigma_y_1s": s, "excess_sigma_y_sigma_1s": ss}
    finite_result(f"isochron fit ({treatment})", slope=b, intercept=a, **{
        "slope error": sb, "intercept error": sa, "slope-intercept covariance": cab})
    if not (sb > 0 and sa > 0):
        raise UndefinedResultError(f"isochron fit ({treatment}): the points lie exactly on the line, so the "
                                   "scatter-based errors are 0 (use treatment 'analytical')")
    t95 = york.t95
    fields = dict(york.__dict__)
    fields.update(slope=float(b), intercept=float(a), slope_sigma_1s=float(sb), intercept_sigma_1s=float(sa),
                  cov_slope_intercept=float(cab), rho_slope_intercept=float(max(-1.0, min(1.0, (cab / sb) / sa))),
                  slope_sigma_95_expanded=t95 * sb if t95 else None,
                  intercept_sigma_95_expanded=t95 * sa if t95 else None, sigma_scale=1.0, **extra)
    return _finite_fit(IsochronFit(**fields))


# --------------------------------------------------------------------------------------------
# weighted mean
# --------------------------------------------------------------------------------------------
#: Floor of a scaled variance in :func:`_ml_excess_1d` (keeps 1/var finite; far below any τ² it resolves).
_VAR_FLOOR = 1e-280


def _wmean_core(v: np.ndarray, s: np.ndarray) -> Tuple[float, float, float]:
    """Weighted mean, its σ and χ² = Σ ((v − mean)/σ)², computed without squaring σ itself.

    The weights are taken relative to the smallest σ, ``w_i = (σ_min/σ_i)²`` in (0, 1], so a σ of
    1e-200 or 1e200 neither underflows nor overflows: mean = Σ w v / Σ w (a convex combination,
    never beyond the values), σ_mean = σ_min/√Σw, the same numbers as 1/√Σ(1/σ²) in exact arithmetic.
    """
    with np.errstate(under="ignore", over="ignore", invalid="ignore"):
        s0 = float(s.min())
        q = s0 / s
        w = q * q
        sw = float(w.sum())
        mean = float((w / sw) @ v)
        z = (v - mean) / s
        chi = float(z @ z)
    return mean, s0 / math.sqrt(sw), chi


def _newton_root(fg: Any, x: float, lo: float, hi: float, max_iter: int = 30) -> float:
    """Polish a root of f in [lo, hi] by Newton steps from ``x`` (Brent's point), to rounding.

    A stationary point found by comparing function values is located only to ~√ε; the root of the
    derivative is located to ~ε, so the result is the same on every numpy build. A step that leaves
    the interval, or does not shrink |f|, ends the polish (``x`` is then kept).
    """
    g, gg = fg(x)
    for _ in range(max_iter):
        if g == 0.0 or not (math.isfinite(g) and math.isfinite(gg)) or gg <= 0.0:
            break
        xn = x - g / gg
        if not lo < xn < hi:
            break
        gn, ggn = fg(xn)
        if not abs(gn) < abs(g):
            break
        step = abs(xn - x)
        x, g, gg = xn, gn, ggn
        if step <= 4.0 * _EPS * abs(x):
            break
    return x


def _ml_excess_1d(v: np.ndarray, s: np.ndarray, m0: float) -> Tuple[float, float, Optional[float]]:
    """ML mean and added scatter τ of values with 1σ ``s`` (random-effects model); m0 = analytical mean.

    Works in scaled units ``u = (v − m0)/S``, ``σ' = σ/S`` with ``S = max|v − m0|``. With the mean
    profiled out, −2 ln L(τ²) = Σ (u − m)²/(σ'² + τ²) + Σ ln(1 + τ²/σ'²) + const, and its derivative
    Σ (σ'² + τ² − r²)/(σ'² + τ²)² is positive once τ² ≥ max r², so the maximum lies in
    0 ≤ τ² ≤ (max u − min u)² ≤ 4: a bounded search (Brent 1973,
    :func:`reduction.minimise.bounded_scalar_min`). A σ' too large for its square (σ ≫ the spread) has
    weight 0; one too small is floored at :data:`_VAR_FLOOR`, which moves the likelihood only where
    τ' < 1e-140.
    """
    with np.errstate(under="ignore", over="ignore", invalid="ignore", divide="ignore"):
        big = float(np.max(np.abs(v - m0)))
        if not math.isfinite(big):
            raise UndefinedResultError("weighted mean: the values spread over more than double precision holds "
                                       "(~1e308): check the values and their units")
        if big == 0.0:
            return m0, 0.0, None
        u = (v - m0) / big
        var = np.maximum((s / big) ** 2, _VAR_FLOOR)
    if not math.isfinite(float(var.min())):
        return m0, 0.0, None    # every σ exceeds the spread by more than 1e154: no scatter to find

    def state(t2: float) -> Tuple[float, np.ndarray, float]:
        d = var + t2
        dmin = float(d.min())
        with np.errstate(under="ignore"):
            w = dmin / d                # relative weights in [0, 1]; an infinite σ' weighs 0
        m = float(w @ u) / float(w.sum())
        return m, w, dmin

    def nll(t2: float) -> float:
        m, w, dmin = state(t2)
        r = u - m
        with np.errstate(under="ignore"):
            return float((w @ (r * r)) / dmin + np.sum(np.log1p(t2 / var)))

    def slope(t2: float) -> Tuple[float, float]:
        """d(−2 ln L)/dτ² and its derivative (mean profiled out), both times dmin = min(σ'² + τ²).

        With d = σ'² + τ², r = u − m and w = dmin/d: d/dτ² = Σ (d − r²)/d², and its derivative
        Σ (2r²/d³ − 1/d²) − 2 (Σ r/d²)² / Σ 1/d (the last term from the profiled mean; common
        calculus, checked against differences of :func:`nll` in the tests).
        """
        m, w, dmin = state(t2)
        r = u - m
        with np.errstate(under="ignore"):
            q = w * r * r / dmin                                    # r²/d
            g = float(np.sum(w * (1.0 - q)))
            gg = (float(np.sum(w * w * (2.0 * q - 1.0)))
                  - 2.0 * float(np.sum(w * w * r)) ** 2 / (dmin * float(w.sum()))) / dmin
        return g, gg

    r = minimise.bounded_scalar_min(nll, 0.0, 4.0, xatol=1e-14)
    t2 = float(r.x)
    if not (math.isfinite(t2) and math.isfinite(float(r.fun))):
        raise ConvergenceError("weighted mean: the search for the external scatter did not converge")
    t2 = _newton_root(slope, t2, 0.0, 4.0)
    if nll(0.0) <= r.fun or t2 <= 0.0:
        return m0, 0.0, None
    m, w, dmin = state(t2)
    tau = math.sqrt(t2)
    # Fisher information of τ² in the random-effects model: ½ Σ 1/(σ² + τ²)²  ->  σ(τ) = σ(τ²)/(2τ)
    sig_t2 = math.sqrt(2.0) * dmin / math.sqrt(float(w @ w))
    return m0 + big * m, big * tau, big * sig_t2 / (2.0 * tau)


def _flag_outliers(v: np.ndarray, s: np.ndarray, k: float) -> Tuple[bool, ...]:
    """Iterative leave-one-out outlier flags (see :func:`weighted_mean`); ``s`` = total 1σ per value.

    Weights relative to the smallest σ of the unflagged values (as in :func:`_wmean_core`).
    """
    flagged = np.zeros(v.size, dtype=bool)
    while (~flagged).sum() >= 3:
        with np.errstate(under="ignore", over="ignore", invalid="ignore", divide="ignore"):
            s0 = float(s[~flagged].min())
            w = np.where(flagged, 0.0, (s0 / s) ** 2)
            sw = float(w.sum())
            c = float((w / sw) @ v)
            dv = v - c
            others_w = sw - w
            others_dev = (float(w @ dv) - w * dv) / others_w
            z = np.abs(dv - others_dev) / np.hypot(s, s0 / np.sqrt(others_w))
            z = np.where(others_w > 0, z, 0.0)
        if not np.all(np.isfinite(z)):
            raise UndefinedResultError("weighted mean: the outlier test overflows double precision (values far "
                                       "apart compared with their σ); check the values and their units")
        z[flagged] = -1.0
        i = int(np.argmax(z))
        if z[i] <= k:
            break
        flagged[i] = True
    return tuple(bool(f) for f in flagged)


def weighted_mean(values: Any, sigma_1s: Any, *, external_scatter: bool = False,
                  outlier_k: Optional[float] = None) -> WeightedMean:
    """Inverse-variance weighted mean with MSWD, probability of fit and outlier flags.

    Parameters
    ----------
    values, sigma_1s : array_like, shape (n,)
        Values and their 1σ absolute errors (> 0).
    external_scatter : bool
        Also estimate an external scatter τ (an added variance τ² common to all values) by
        maximum likelihood, and weight by ``1/(σ² + τ²)``; τ = 0 when the data do not need it.
    outlier_k : float, optional
        Flag outliers by an iterative leave-one-out rule: the value farthest from the weighted
        mean of the other unflagged values is flagged when
        ``|v_i − mean_others| > k·sqrt(σ_i² + τ² + σ_mean_others²)``, and the test is repeated
        on the unflagged values until none exceeds k (or fewer than 3 remain). Values are
        flagged, never removed from the mean (common practice: the analyst decides).

    Returns
    -------
    WeightedMean

    Raises
    ------
    InputError
        Values or σ not finite, σ <= 0, lengths differ, bad ``outlier_k``.
    UndefinedResultError
        A result double precision cannot hold (e.g. values 1e300 apart with σ = 1e-300: the MSWD
        would be ~1e1200); never a NaN or inf.

    Notes
    -----
    mean = Σ v/σ² / Σ 1/σ², σ_mean = (Σ 1/σ²)^−½, MSWD = Σ (v − mean)²/σ² / (n − 1),
    p = P(χ²_{n−1} > (n − 1)·MSWD) (standard; e.g. Wendt & Carl 1991). The sums are formed with
    weights relative to the smallest σ, (σ_min/σ)², so σ anywhere in double precision's range
    (1e-300 next to 1) gives the mean, its σ and the MSWD without underflow or overflow (a σ of
    1e-200 among σ of 1 gives mean = that value, σ_mean = 1e-200). The external scatter is found in
    units scaled by the values' spread (see ``_ml_excess_1d``).

    Examples
    --------
    >>> wm = weighted_mean([10.0, 10.2, 9.9], [0.1, 0.1, 0.1])
    >>> round(wm.mean, 4), round(wm.mean_sigma_1s, 4)
    (10.0333, 0.0577)
    """
    v = as_array("values", values, ndim=1, min_len=1)
    s = as_array("sigma_1s", sigma_1s, ndim=1, min_len=1)
    require_same_length(values=v, sigma_1s=s)
    require_positive("sigma_1s", s)
    n = v.size
    k: Optional[float] = None
    if outlier_k is not None:
        k = as_scalar("outlier_k", outlier_k)
        if k <= 0:
            raise InputError("outlier_k", f"must be > 0, got {k!r}")
    if external_scatter and n < 2:
        raise InputError("external_scatter", "needs at least 2 values")
    mean, sigma_mean, chi = _wmean_core(v, s)
    if not math.isfinite(chi):
        raise UndefinedResultError("weighted mean: the values differ by more than 1e154 times their σ, so the "
                                   "MSWD is beyond double precision; check the values, σ and their units")
    finite_result("weighted mean", mean=mean, **{"σ of the mean": sigma_mean})
    mswd = chi / (n - 1) if n > 1 else None
    p = _chi2_sf(chi, n - 1) if n > 1 else None
    tau, sig_tau = 0.0, None
    s_tot = s
    if external_scatter:
        mean, tau, sig_tau = _ml_excess_1d(v, s, mean)
        if tau > 0:
            s_tot = np.hypot(s, tau)
            _m, sigma_mean, _c = _wmean_core(v, s_tot)
    if k is None:
        flags = tuple(False for _ in range(n))
        rule = "no outlier test"
    else:
        flags = _flag_outliers(v, s_tot, k)
        rule = (f"iterative leave-one-out test at k = {k:g}: the value farthest from the weighted mean of the "
                f"other unflagged values is flagged if |value - mean_others| > {k:g} * sqrt(sigma^2 + "
                "external^2 + sigma_mean_others^2), and the test repeats on the rest; flagged values are "
                "kept in the mean")
    finite_result("weighted mean", mean=mean, **{"σ of the mean": sigma_mean, "external scatter": tau,
                                                 "σ of the external scatter": sig_tau})
    return WeightedMean(n=n, mean=mean, mean_sigma_1s=sigma_mean, mswd=mswd, p_value=p, external_sigma_1s=tau,
                        outliers=flags, rule=rule, external_sigma_sigma_1s=sig_tau, dof=n - 1)


# --------------------------------------------------------------------------------------------
# error ellipse
# --------------------------------------------------------------------------------------------
def ellipse_points(x: float, sx: float, y: float, sy: float, rho: float = 0.0, *, n_points: int = 48,
                   confidence: float = 0.95) -> Tuple[np.ndarray, np.ndarray]:
    """Outline of a point's error ellipse as a closed polygon (``n_points + 1`` vertices).

    The ellipse is the ``confidence`` region of a bivariate normal with the point's covariance
    matrix, i.e. the Mahalanobis radius is ``sqrt(chi2.ppf(confidence, 2))`` (2.448 for 95 %;
    the χ² quantile with 2 degrees of freedom, standard bivariate-normal theory), drawn as the
    image of a circle under the Cholesky factor of the covariance.

    Parameters
    ----------
    x, sx, y, sy : float
        The point and its 1σ absolute errors (> 0).
    rho : float
        Error correlation, in (−1, 1).
    n_points : int
        Number of segments, a whole number from 3 to :data:`ELLIPSE_MAX_POINTS` (10 000); the bound
        is refused at once with an InputError, before any work.
    confidence : float
        Coverage of the region, in (0, 1).

    Returns
    -------
    xs, ys : ndarray, shape (n_points + 1,)
        The outline, closed (last vertex = first).
    """
    x = as_scalar("x", x)
    y = as_scalar("y", y)
    sx = as_scalar("sx", sx)
    sy = as_scalar("sy", sy)
    rho = as_scalar("rho", rho)
    require_positive("sx", np.asarray(sx))
    require_positive("sy", np.asarray(sy))
    require_correlation("rho", np.asarray(rho))
    n_points = as_count("n_points", n_points, 3, ELLIPSE_MAX_POINTS,
                        "a chart outline needs tens of points; more only costs time and memory")
    confidence = as_scalar("confidence", confidence)
    if not 0 < confidence < 1:
        raise InputError("confidence", f"must lie strictly between 0 and 1, got {confidence!r}")
    k = math.sqrt(special.chi2_isf(1.0 - confidence, 2))
    theta = np.linspace(0.0, 2.0 * math.pi, n_points + 1)
    c, sn = np.cos(theta) * k, np.sin(theta) * k
    # the Cholesky factor of [[sx², ρ sx sy], [ρ sx sy, sy²]] written out, [[sx, 0], [ρ sy, sy √(1 − ρ²)]]:
    # no square of σ is formed, so σ anywhere in double precision's range is drawn
    with np.errstate(over="ignore", invalid="ignore"):
        xs = x + sx * c
        ys = y + sy * (rho * c + math.sqrt(1.0 - rho * rho) * sn)
    finite_result("error ellipse", outline=np.concatenate([xs, ys]))
    xs[-1], ys[-1] = xs[0], ys[0]
    return xs, ys


def deviation_points(x: float, sx: float, y: float, sy: float, rho: float, slope: float, intercept: float, *,
                     n_points: int = 48, confidence: float = 0.95) -> Tuple[np.ndarray, np.ndarray]:
    """A point's error ellipse in deviation space: x against the deviation from a line, in ppm.

    Every vertex (x', y') of :func:`ellipse_points` maps to (x', (y' − ŷ(x'))/ŷ(x')·10⁶) with
    ŷ = ``intercept`` + ``slope``·x' — the transform the report's deviation panel draws, so an ellipse
    a few ppm tall, invisible at an isochron's full scale, is seen (common practice of plotting
    residuals). The line is the isochron the point belongs to; ŷ must be > 0 along the outline.
    """
    b, a = as_scalar("slope", slope), as_scalar("intercept", intercept)
    xs, ys = ellipse_points(x, sx, y, sy, rho, n_points=n_points, confidence=confidence)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        line = a + b * xs
        if not np.all(line > 0):
            raise UndefinedResultError("the line's value is not > 0 across the ellipse: no deviation in ppm")
        dev = (ys - line) / line * 1e6
    finite_result("deviation outline", outline=dev)
    return xs, dev


#: Up to this many degrees of freedom the MSWD test is called weak (common practice: the χ² 5–95 %
#: range of the MSWD is 0.0039–3.84 for dof = 1 and 0.051–3.00 for dof = 2).
WEAK_TEST_MAX_DOF = 2


def mswd_position(fit: IsochronFit) -> Optional[str]:
    """Where the fit's MSWD lies against its χ² 5–95 % range: ``"below"``, ``"within"``, ``"above"``.

    None when there is no MSWD (dof = 0). The range is ``fit.mswd_limits_95``
    (:func:`reduction.regression.wendt_carl_limits`; Wendt & Carl 1991, Chem. Geol. 86, 275).
    """
    if fit.mswd is None or not fit.mswd_limits_95:
        return None
    lo, hi = fit.mswd_limits_95
    if fit.mswd > hi:
        return "above"
    if fit.mswd < lo:
        return "below"
    return "within"


def mswd_notes(fit: IsochronFit) -> List[str]:
    """Plain-language notes on how far the fit's MSWD can be trusted as a test of one line.

    * dof = 0 (two points, no anchor): no MSWD exists;
    * 1 ≤ dof ≤ :data:`WEAK_TEST_MAX_DOF`: the χ² range is wide and the test weak (common practice);
    * an MSWD above the 95 % limit or below the 5 % limit of ``fit.mswd_limits_95`` (χ² quantiles,
      cf. Wendt & Carl 1991, Chem. Geol. 86, 275) is said so.
    """
    notes: List[str] = []
    anchored = " and the anchor" if fit.anchor is not None else ""
    if fit.mswd is None or not fit.mswd_limits_95:
        notes.append(f"with {fit.n} points the line passes through both exactly: there is no MSWD, so nothing "
                     "tests whether the points belong on one line (a two-point age takes that on trust)")
        return notes
    lo, hi = fit.mswd_limits_95
    if fit.dof <= WEAK_TEST_MAX_DOF:
        dof_words = "1 degree" if fit.dof == 1 else f"{fit.dof} degrees"
        notes.append(f"with {fit.n} points{anchored} the MSWD has only {dof_words} of freedom: its acceptance range "
                     f"({lo:.3g} - {hi:.3g}) is wide and the test weak, so an MSWD inside it says little about "
                     "whether the points share one line")
    pos = mswd_position(fit)
    if pos == "above":
        notes.append(f"MSWD {fit.mswd:.4g} is above the 95 % limit {hi:.3g}: the points scatter more than their "
                     "analytical errors explain (extra geological scatter, or errors set too small)")
    elif pos == "below":
        notes.append(f"MSWD {fit.mswd:.4g} is below the 5 % limit {lo:.3g}: the points scatter less than their "
                     "errors predict (errors set too large, or errors shared between the points)")
    return notes
