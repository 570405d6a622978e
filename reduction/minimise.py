"""Small derivative-free minimisers for the two likelihood fits of :mod:`reduction.regression`.

The engine needs no optimisation library at run time (LibreOffice's own Python has only what the
extension brings). Two published methods cover both uses:

* :func:`bounded_scalar_min` — Brent's method on an interval: golden-section search with successive
  parabolic interpolation (Brent 1973, *Algorithms for Minimization without Derivatives*, ch. 5;
  Press et al. 2007, *Numerical Recipes*, 3rd ed., §10.3). Used for the external scatter τ² of a
  weighted mean.
* :func:`nelder_mead` — the downhill simplex (Nelder & Mead 1965, Comput. J. 7, 308-313) with the
  standard coefficients reflection 1, expansion 2, contraction ½, shrink ½ (Lagarias et al. 1998,
  SIAM J. Optim. 9, 112-147). Used for the line with an excess variance, then polished by
  :func:`newton_polish`.
* :func:`newton_polish` — Newton steps on a gradient, with a Hessian by central differences of the
  gradient and a backtracking line search (Nocedal & Wright 2006, *Numerical Optimization*, 2nd ed.,
  §3.1 and §8.1), stopping when the gradient vanishes to rounding.

Every function returns a frozen :class:`Minimum`; none raises a foreign exception for a finite
objective (a non-finite value is treated as "worse than any finite one").
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Optional

import numpy as np

__all__ = ["Minimum", "bounded_scalar_min", "nelder_mead", "newton_polish"]

_GOLD = 0.5 * (3.0 - math.sqrt(5.0))     # 0.381966..., the golden-section fraction
_EPS = np.finfo(float).eps


@dataclass(frozen=True)
class Minimum:
    """Where a minimiser stopped: point ``x``, value ``fun``, evaluations ``nfev``, ``converged``."""

    x: np.ndarray
    fun: float
    nfev: int
    converged: bool


def _safe(f: Callable[..., float]) -> Callable[..., float]:
    def g(x: object) -> float:
        v = float(f(x))
        return v if math.isfinite(v) else math.inf
    return g


def bounded_scalar_min(f: Callable[[float], float], lo: float, hi: float, *, xatol: float = 1e-12,
                       max_iter: int = 500) -> Minimum:
    """Minimum of ``f`` on ``[lo, hi]`` by Brent's method (golden section + parabolic steps).

    Parameters
    ----------
    f : callable
        Objective of one float.
    lo, hi : float
        Interval, ``lo < hi``.
    xatol : float
        Absolute tolerance on the abscissa (the relative one is √ε, as in Brent 1973, ch. 5).

    Returns
    -------
    Minimum
        ``x`` is a 0-d array.

    Notes
    -----
    Brent 1973, ch. 5 (procedure *localmin*); Press et al. 2007, §10.3.
    """
    fs = _safe(f)
    a, b = float(lo), float(hi)
    x = w = v = a + _GOLD * (b - a)
    fx = fw = fv = fs(x)
    d = e = 0.0
    n = 1
    rel = math.sqrt(_EPS)
    converged = False
    for _ in range(max_iter):
        m = 0.5 * (a + b)
        tol1 = rel * abs(x) + xatol / 3.0
        tol2 = 2.0 * tol1
        if abs(x - m) <= tol2 - 0.5 * (b - a):
            converged = True
            break
        use_golden = True
        if abs(e) > tol1:                 # try a parabola through x, w, v
            r = (x - w) * (fx - fv)
            q = (x - v) * (fx - fw)
            p = (x - v) * q - (x - w) * r
            q = 2.0 * (q - r)
            if q > 0.0:
                p = -p
            q = abs(q)
            if abs(p) < abs(0.5 * q * e) and q * (a - x) < p < q * (b - x):
                e, d = d, p / q
                u = x + d
                if u - a < tol2 or b - u < tol2:
                    d = tol1 if x < m else -tol1
                use_golden = False
        if use_golden:
            e = (b - x) if x < m else (a - x)
            d = _GOLD * e
        u = x + (d if abs(d) >= tol1 else (tol1 if d > 0 else -tol1))
        fu = fs(u)
        n += 1
        if fu <= fx:
            if u < x:
                b = x
            else:
                a = x
            v, fv, w, fw, x, fx = w, fw, x, fx, u, fu
        else:
            if u < x:
                a = u
            else:
                b = u
            if fu <= fw or w == x:
                v, fv, w, fw = w, fw, u, fu
            elif fu <= fv or v == x or v == w:
                v, fv = u, fu
    # the ends themselves (Brent's search never evaluates them; a minimum on the boundary is common here)
    for end in (float(lo), float(hi)):
        fe = fs(end)
        n += 1
        if fe < fx:
            x, fx = end, fe
    return Minimum(np.asarray(x), fx, n, converged)


def nelder_mead(f: Callable[[np.ndarray], float], x0: np.ndarray, *, xatol: float = 1e-10,
                fatol: float = 1e-12, max_fev: int = 20000, step: Optional[np.ndarray] = None) -> Minimum:
    """Minimum of ``f`` near ``x0`` by the Nelder–Mead downhill simplex.

    Parameters
    ----------
    f : callable
        Objective of a 1-D array.
    x0 : ndarray
        Start point.
    xatol, fatol : float
        Stop when every vertex lies within ``xatol`` of the best (max norm) and every value within
        ``fatol`` of the best.
    max_fev : int
        Evaluation budget (``converged`` is False when it runs out).
    step : ndarray, optional
        Initial simplex edge per coordinate; default 5 % of each coordinate (0.00025 for a zero one),
        common practice since Nelder & Mead 1965.

    Notes
    -----
    Nelder & Mead 1965; coefficients 1, 2, ½, ½ and the inside/outside contractions of Lagarias et
    al. 1998, §2.
    """
    fs = _safe(f)
    x0 = np.asarray(x0, dtype=float).ravel()
    k = x0.size
    if step is None:
        step = np.where(x0 != 0, 0.05 * x0, 0.00025)
    sim = np.repeat(x0[None, :], k + 1, axis=0)
    for i in range(k):
        sim[i + 1, i] += step[i]
    fv = np.array([fs(p) for p in sim])
    n = k + 1
    converged = False
    while n < max_fev:
        order = np.argsort(fv, kind="stable")
        sim, fv = sim[order], fv[order]
        if (np.max(np.abs(sim[1:] - sim[0])) <= xatol and np.max(np.abs(fv[1:] - fv[0])) <= fatol):
            converged = True
            break
        centre = sim[:-1].mean(axis=0)
        xr = centre + (centre - sim[-1])
        fr = fs(xr)
        n += 1
        if fr < fv[0]:
            xe = centre + 2.0 * (centre - sim[-1])
            fe = fs(xe)
            n += 1
            sim[-1], fv[-1] = (xe, fe) if fe < fr else (xr, fr)
            continue
        if fr < fv[-2]:
            sim[-1], fv[-1] = xr, fr
            continue
        if fr < fv[-1]:                  # outside contraction
            xc = centre + 0.5 * (xr - centre)
            fc = fs(xc)
            n += 1
            if fc <= fr:
                sim[-1], fv[-1] = xc, fc
                continue
        else:                            # inside contraction
            xc = centre + 0.5 * (sim[-1] - centre)
            fc = fs(xc)
            n += 1
            if fc < fv[-1]:
                sim[-1], fv[-1] = xc, fc
                continue
        sim[1:] = sim[0] + 0.5 * (sim[1:] - sim[0])   # shrink towards the best vertex
        fv[1:] = [fs(p) for p in sim[1:]]
        n += k
    best = int(np.argmin(fv))
    return Minimum(sim[best].copy(), float(fv[best]), n, converged)


def newton_polish(f: Callable[[np.ndarray], float], grad: Callable[[np.ndarray], np.ndarray], x0: np.ndarray, *,
                  hess: Optional[Callable[[np.ndarray], np.ndarray]] = None, max_iter: int = 50,
                  gtol: float = 0.0) -> Minimum:
    """Polish a minimum with Newton steps until the gradient vanishes to rounding.

    Each step solves H·d = −g (``hess`` if given, else central differences of ``grad``); a Hessian
    that is not positive definite, or a step that does not lower ``f``, is replaced by a
    steepest-descent step with backtracking (halving up to 40 times). Near the optimum ``f`` is
    flat to rounding, so a step is also taken when ``f`` does not rise beyond rounding and the
    gradient shrinks: the stopping point is fixed by ∇f = 0, not by which rounded value of ``f``
    happens to be lower, and so does not depend on the numpy build. Stops when
    ‖g‖∞ ≤ ``gtol``·max(1, |f|) (default 0: to rounding), when the step is below rounding of ``x``,
    or when neither ``f`` nor ‖g‖ can be lowered; never returns a point worse than ``x0`` beyond
    rounding of ``f``.

    Notes
    -----
    Nocedal & Wright 2006, §3.1 (backtracking line search) and §8.1 (Hessian by differences of
    the gradient, step √ε scaled to each coordinate).
    """
    fs = _safe(f)
    x = np.asarray(x0, dtype=float).ravel().copy()
    fx = fs(x)
    n = 1
    converged = False
    g = np.asarray(grad(x), dtype=float)
    for _ in range(max_iter):
        if not np.all(np.isfinite(g)):
            break
        gnorm = float(np.max(np.abs(g)))
        if gnorm <= gtol * max(1.0, abs(fx)):
            converged = True
            break
        hm = _hessian(grad, hess, x)
        d = None
        if np.all(np.isfinite(hm)):
            try:
                np.linalg.cholesky(hm)
                d = np.linalg.solve(hm, -g)
            except np.linalg.LinAlgError:
                d = None
        if d is None:
            h = math.sqrt(_EPS) * np.maximum(np.abs(x), 1.0)
            d = -g / max(gnorm, 1e-300) * float(np.max(h)) * 1e3
        if np.all(np.abs(d) <= 4.0 * _EPS * np.maximum(np.abs(x), _EPS)):
            converged = True        # the Newton step is below the rounding of x: ∇f = 0 to rounding
            break
        flat = 8.0 * _EPS * max(abs(fx), 1e-300)
        t = 1.0
        moved = False
        for _ in range(40):
            xn = x + t * d
            fn = fs(xn)
            n += 1
            if fn < fx:
                moved = True
                break
            if fn <= fx + flat:
                gn = np.asarray(grad(xn), dtype=float)
                if np.all(np.isfinite(gn)) and float(np.max(np.abs(gn))) < gnorm:
                    moved = True
                    break
            t *= 0.5
        if not moved:
            converged = gnorm <= 1e-6 * max(1.0, abs(fx))
            break
        x, fx = xn, fn
        g = np.asarray(grad(x), dtype=float)
    return Minimum(x, fx, n, converged)


def _hessian(grad: Callable[[np.ndarray], np.ndarray], hess: Optional[Callable[[np.ndarray], np.ndarray]],
             x: np.ndarray) -> np.ndarray:
    if hess is not None:
        return np.asarray(hess(x), dtype=float)
    k = x.size
    h = math.sqrt(_EPS) * np.maximum(np.abs(x), 1.0)
    hm = np.empty((k, k))
    for i in range(k):
        e = np.zeros(k)
        e[i] = h[i]
        hm[:, i] = (np.asarray(grad(x + e)) - np.asarray(grad(x - e))) / (2.0 * h[i])
    return 0.5 * (hm + hm.T)
