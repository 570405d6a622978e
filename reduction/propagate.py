"""Uncertainty propagation: linear (Jacobian and input covariance) and seeded Monte Carlo.

Convention for the model ``f``: it takes ``X`` of shape ``(n_in, ...)`` and returns an array of
shape ``(n_out, ...)``, vectorised over the trailing axes. Then one call evaluates all finite-difference
points of the Jacobian, and one call evaluates all Monte Carlo draws.

Linear propagation (the law of propagation of uncertainty, JCGM 100:2008 "GUM", section 5):
cov_y = J · cov_x · Jᵀ. Splitting the inputs into groups (e.g. random = measurement, systematic =
spike calibration, standard value, λ) gives each group's contribution J_g · cov_g · J_gᵀ (the groups
are assumed mutually uncorrelated). Monte Carlo (JCGM 101:2008, "GUM Supplement 1") draws the inputs
from a multivariate normal with a fixed seed and returns the sample covariance of the outputs.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Dict, Mapping, Optional, Sequence, Tuple

import numpy as np

from .errors import InputError, UndefinedResultError

__all__ = [
    "MonteCarlo",
    "Propagated",
    "cov_from_sigma",
    "jacobian",
    "monte_carlo",
    "propagate_linear",
    "rho",
]

Model = Callable[[np.ndarray], Any]


def _vec(name: str, x: Any) -> np.ndarray:
    try:
        a = np.array(x, dtype=float).ravel()
    except (TypeError, ValueError):
        raise InputError(name, "could not be read as numbers") from None
    if not np.all(np.isfinite(a)):
        raise InputError(name, "must be finite numbers")
    return a


def _cov(cov: Any, n: int) -> np.ndarray:
    try:
        c = np.array(cov, dtype=float)
    except (TypeError, ValueError):
        raise InputError("cov", "could not be read as numbers") from None
    if c.ndim == 1:
        c = np.diag(c)  # a 1-D cov is a vector of variances
    if c.shape != (n, n):
        raise InputError("cov", f"must be {n}x{n} (inputs), got shape {c.shape}")
    if not np.all(np.isfinite(c)):
        raise InputError("cov", "must be finite")
    if not np.allclose(c, c.T, rtol=1e-10, atol=0):
        raise InputError("cov", "must be symmetric")
    if np.any(np.diag(c) < 0):
        raise InputError("cov", "has a negative variance on its diagonal")
    return c


def rho(cov: Any) -> np.ndarray:
    """Correlation matrix of a covariance matrix (0 where a variance is 0)."""
    c = np.asarray(cov, dtype=float)
    s = np.sqrt(np.clip(np.diag(c), 0, None))
    with np.errstate(invalid="ignore", divide="ignore"):
        r = c / np.outer(s, s)
    r = np.where(np.outer(s, s) > 0, r, 0.0)
    np.fill_diagonal(r, np.where(s > 0, 1.0, 0.0))
    return r


def cov_from_sigma(sigma_1s: Any, corr: Any = None) -> np.ndarray:
    """Covariance matrix from 1σ values and an optional correlation matrix (default: uncorrelated)."""
    s = _vec("sigma_1s", sigma_1s)
    if np.any(s < 0):
        raise InputError("sigma_1s", "must be >= 0")
    if corr is None:
        return np.diag(s ** 2)
    r = np.asarray(corr, dtype=float)
    if r.shape != (s.size, s.size):
        raise InputError("corr", f"must be {s.size}x{s.size}, got {r.shape}")
    if np.any(np.abs(r) > 1) or not np.allclose(r, r.T):
        raise InputError("corr", "must be symmetric with entries in [-1, 1]")
    return r * np.outer(s, s)


def _call(f: Model, X: np.ndarray, n_pts: int) -> np.ndarray:
    y = np.asarray(f(X), dtype=complex if np.iscomplexobj(X) else float)
    if y.ndim == 1 and n_pts >= 1 and X.ndim == 2:
        y = y[None, :]
    return y


def jacobian(f: Model, x: Any, *, method: str = "central", rel_step: float = 1e-6,
             abs_step: Optional[Sequence[float]] = None) -> np.ndarray:
    """Jacobian ∂f/∂x at ``x`` by central differences or by the complex step.

    Parameters
    ----------
    f : callable
        Vectorised model (see module docstring).
    x : array_like
        Point, shape (n_in,).
    method : {"central", "complex"}
        ``"central"``: (f(x + h) − f(x − h)) / 2h with h = rel_step·|x| (or abs_step); error O(h²).
        ``"complex"``: Im f(x + ih)/h (Squire & Trapp 1998, SIAM Rev. 40, 110-112; Martins, Sturdza & Alonso
        2003, ACM TOMS 29, 245-262), exact to rounding for analytic f that accepts complex input.
    rel_step : float
        Relative step (central: 1e-6 suits smooth models of ratios ~1e-5 precise; complex: any tiny value).
    abs_step : sequence of float, optional
        Absolute step per input (for inputs that may be 0).

    Returns
    -------
    ndarray, shape (n_out, n_in)
    """
    x0 = _vec("x", x)
    n = x0.size
    if abs_step is not None:
        h = _vec("abs_step", abs_step)
        if h.size != n or np.any(h <= 0):
            raise InputError("abs_step", f"must hold {n} values > 0")
    else:
        h = rel_step * np.where(x0 != 0, np.abs(x0), 1.0)
    if method == "central":
        X = np.repeat(x0[:, None], 2 * n, axis=1)
        idx = np.arange(n)
        X[idx, idx] += h
        X[idx, n + idx] -= h
        Y = _call(f, X, 2 * n)
        # divide by the steps actually taken (x ± h rounded to floats), not the nominal 2h: this removes
        # the step-representation error, leaving the truncation error O(h²) and rounding ε·|f|/h
        # (Press et al. 2007, Numerical Recipes, 3rd ed., §5.7)
        J = (Y[:, :n] - Y[:, n:]) / (X[idx, idx] - X[idx, n + idx])
    elif method == "complex":
        X = np.repeat(x0[:, None], n, axis=1).astype(complex)
        idx = np.arange(n)
        X[idx, idx] += 1j * h
        Y = _call(f, X, n)
        J = Y.imag / h
    else:
        raise InputError("method", f"unknown method {method!r}; use 'central' or 'complex'")
    if not np.all(np.isfinite(J)):
        raise UndefinedResultError("jacobian: the model returned non-finite values near x")
    return np.asarray(J, dtype=float)


@dataclass(frozen=True)
class Propagated:
    """Linear propagation result.

    Attributes
    ----------
    value : ndarray (n_out,)
    cov : ndarray (n_out, n_out)
    sigma_1s : ndarray (n_out,)
    corr : ndarray (n_out, n_out)
    jacobian : ndarray (n_out, n_in)
    parts : dict of str to ndarray
        Covariance contributed by each input group.
    sigma_1s_parts : dict of str to ndarray
        √diag of each part.
    names : tuple of str
        Output names (empty if not given).
    """

    value: np.ndarray
    cov: np.ndarray
    sigma_1s: np.ndarray
    corr: np.ndarray
    jacobian: np.ndarray
    parts: Dict[str, np.ndarray]
    sigma_1s_parts: Dict[str, np.ndarray]
    names: Tuple[str, ...] = ()


def propagate_linear(f: Model, x: Any, cov: Any, *, groups: Optional[Mapping[str, Sequence[int]]] = None,
                     names: Sequence[str] = (), method: str = "central", rel_step: float = 1e-6,
                     abs_step: Optional[Sequence[float]] = None) -> Propagated:
    """First-order propagation cov_y = J cov_x Jᵀ (GUM, JCGM 100:2008, eq. 13), with a split by input group.

    Parameters
    ----------
    f : callable
        Vectorised model (see module docstring).
    x : array_like (n_in,)
        Input values.
    cov : array_like (n_in, n_in) or (n_in,)
        Input covariance (a 1-D array is read as the variances).
    groups : mapping of str to sequence of int, optional
        Input indices of each group (e.g. ``{"random": [...], "systematic": [...]}``). Cross-group
        covariances are ignored in the parts (they are included in ``cov``).
    names : sequence of str
        Output names, carried into the result.
    """
    x0 = _vec("x", x)
    c = _cov(cov, x0.size)
    y0 = np.asarray(f(x0), dtype=float).ravel()
    J = jacobian(f, x0, method=method, rel_step=rel_step, abs_step=abs_step)
    cy = J @ c @ J.T
    parts: Dict[str, np.ndarray] = {}
    for g, idx in (groups or {}).items():
        ii = np.asarray(list(idx), dtype=int)
        if ii.size and (ii.min() < 0 or ii.max() >= x0.size):
            raise InputError("groups", f"group {g!r} has an index outside 0..{x0.size - 1}")
        Jg = J[:, ii]
        parts[g] = Jg @ c[np.ix_(ii, ii)] @ Jg.T
    sig = np.sqrt(np.clip(np.diag(cy), 0, None))
    return Propagated(y0, cy, sig, rho(cy), J, parts,
                      {g: np.sqrt(np.clip(np.diag(p), 0, None)) for g, p in parts.items()}, tuple(names))


@dataclass(frozen=True)
class MonteCarlo:
    """Monte Carlo propagation result (sample statistics of the output draws)."""

    mean: np.ndarray
    cov: np.ndarray
    sigma_1s: np.ndarray
    corr: np.ndarray
    n_draws: int
    seed: int


def monte_carlo(f: Model, x: Any, cov: Any, *, n_draws: int = 20000, seed: int = 12345) -> MonteCarlo:
    """Propagate by seeded Monte Carlo (JCGM 101:2008): x ~ N(x, cov), one vectorised call of ``f``.

    Parameters
    ----------
    f : callable
        Vectorised model (see module docstring).
    x, cov : array_like
        Input means and covariance.
    n_draws : int, default 20000
    seed : int, default 12345
        Seed of :func:`numpy.random.default_rng`; the same seed gives the same answer.
    """
    x0 = _vec("x", x)
    c = _cov(cov, x0.size)
    if int(n_draws) < 10:
        raise InputError("n_draws", f"must be >= 10, got {n_draws!r}")
    rng = np.random.default_rng(int(seed))
    # draw through an eigen-decomposition: tolerates singular (e.g. perfectly correlated) covariances
    w, v = np.linalg.eigh(c)
    z = rng.standard_normal((x0.size, int(n_draws)))
    X = x0[:, None] + (v * np.sqrt(np.clip(w, 0, None))) @ z
    Y = np.asarray(f(X), dtype=float)
    if Y.ndim == 1:
        Y = Y[None, :]
    if not np.all(np.isfinite(Y)):
        raise UndefinedResultError("monte_carlo: the model returned non-finite values for some draws")
    cy = np.atleast_2d(np.cov(Y))
    return MonteCarlo(Y.mean(axis=1), cy, np.sqrt(np.diag(cy)), rho(cy), int(n_draws), int(seed))
