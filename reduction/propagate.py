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

from ._validate import as_count, as_scalar, finite_result
from .errors import InputError, UndefinedResultError

__all__ = [
    "MC_MAX_DRAWS",
    "MC_MAX_VALUES",
    "MonteCarlo",
    "Propagated",
    "cov_from_sigma",
    "jacobian",
    "monte_carlo",
    "propagate_linear",
    "rho",
]

Model = Callable[[np.ndarray], Any]

#: Upper bound of ``n_draws`` in :func:`monte_carlo` (1e6 draws put the Monte Carlo σ within 0.1 % of
#: its limit; more cost time without telling more).
MC_MAX_DRAWS = 1_000_000
#: Upper bound of inputs × draws in :func:`monte_carlo`: 2e7 values, i.e. 160 MB for each array of
#: draws (the normal deviates and the inputs, ~320 MB together, before the model's own arrays).
MC_MAX_VALUES = 20_000_000
_QUIET = dict(over="ignore", invalid="ignore", divide="ignore", under="ignore")


def _vec(name: str, x: Any, min_len: int = 0) -> np.ndarray:
    try:
        a = np.array(x, dtype=float).ravel()
    except (TypeError, ValueError, OverflowError):
        raise InputError(name, "could not be read as numbers") from None
    if not np.all(np.isfinite(a)):
        raise InputError(name, "must be finite numbers")
    if a.size < min_len:
        raise InputError(name, f"needs at least {min_len} value{'s' if min_len > 1 else ''}, got {a.size}")
    return a


def _cov(cov: Any, n: int) -> np.ndarray:
    try:
        c = np.array(cov, dtype=float)
    except (TypeError, ValueError, OverflowError):
        raise InputError("cov", "could not be read as numbers") from None
    if c.ndim == 1:
        c = np.diag(c)  # a 1-D cov is a vector of variances
    if c.shape != (n, n):
        raise InputError("cov", f"must be {n}x{n} (inputs), got shape {c.shape}")
    if not np.all(np.isfinite(c)):
        raise InputError("cov", "must be finite")
    with np.errstate(**_QUIET):
        symmetric = np.allclose(c, c.T, rtol=1e-10, atol=0)
    if not symmetric:
        raise InputError("cov", "must be symmetric")
    if np.any(np.diag(c) < 0):
        raise InputError("cov", "has a negative variance on its diagonal")
    return c


def rho(cov: Any) -> np.ndarray:
    """Correlation matrix of a covariance matrix (0 where a variance is 0)."""
    c = np.asarray(cov, dtype=float)
    s = np.sqrt(np.clip(np.diag(c), 0, None))
    with np.errstate(**_QUIET):
        r = (c / s[:, None]) / s[None, :]      # divided twice: no product of two σ that could overflow
    r = np.clip(np.where((s[:, None] > 0) & (s[None, :] > 0), r, 0.0), -1.0, 1.0)
    np.fill_diagonal(r, np.where(s > 0, 1.0, 0.0))
    return r


def cov_from_sigma(sigma_1s: Any, corr: Any = None) -> np.ndarray:
    """Covariance matrix from 1σ values and an optional correlation matrix (default: uncorrelated)."""
    s = _vec("sigma_1s", sigma_1s)
    if np.any(s < 0):
        raise InputError("sigma_1s", "must be >= 0")
    if corr is None:
        r = np.eye(s.size)
    else:
        try:
            r = np.array(corr, dtype=float)
        except (TypeError, ValueError, OverflowError):
            raise InputError("corr", "could not be read as numbers") from None
        if r.shape != (s.size, s.size):
            raise InputError("corr", f"must be {s.size}x{s.size}, got {r.shape}")
        if not np.all(np.isfinite(r)) or np.any(np.abs(r) > 1) or not np.allclose(r, r.T, rtol=1e-10, atol=1e-12):
            raise InputError("corr", "must be symmetric with finite entries in [-1, 1]")
    with np.errstate(**_QUIET):
        c = r * np.outer(s, s)
    finite_result("covariance", covariance=c)
    return c


def _call(f: Model, X: np.ndarray, n_pts: int) -> np.ndarray:
    """f(X) as an array of shape (n_out, n_pts), or an InputError saying what the model returned."""
    if not callable(f):
        raise InputError("f", f"must be a function of the inputs, got {type(f).__name__}")
    try:
        y = np.asarray(f(X), dtype=complex if np.iscomplexobj(X) else float)
    except (TypeError, ValueError, OverflowError):
        raise InputError("f", "the model returned something that is not an array of numbers") from None
    if y.ndim == 1 and n_pts >= 1 and X.ndim == 2:
        y = y[None, :]
    if y.ndim != 2 or y.shape[1] != n_pts or y.shape[0] < 1:
        raise InputError("f", f"must be vectorised: for inputs of shape {X.shape} it must return shape "
                              f"(n_out, {n_pts}), got {y.shape}")
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
    x0 = _vec("x", x, min_len=1)
    n = x0.size
    if method not in ("central", "complex"):
        raise InputError("method", f"unknown method {method!r}; use 'central' or 'complex'")
    if abs_step is not None:
        h = _vec("abs_step", abs_step)
        if h.size != n or np.any(h <= 0):
            raise InputError("abs_step", f"must hold {n} values > 0")
    else:
        rel = as_scalar("rel_step", rel_step)
        if not rel > 0:
            raise InputError("rel_step", f"must be > 0, got {rel!r}")
        with np.errstate(**_QUIET):
            h = rel * np.where(x0 != 0, np.abs(x0), 1.0)
        if not np.all(np.isfinite(h)) or np.any(h == 0):
            raise InputError("rel_step", f"gives a step of 0 or beyond double precision for x = "
                                         f"{float(x0[np.flatnonzero(~(np.isfinite(h) & (h != 0)))[0]]):g}; "
                                         "give abs_step")
    with np.errstate(**_QUIET):
        return _jacobian(f, x0, h, method, "rel_step" if abs_step is None else "abs_step")


def _jacobian(f: Model, x0: np.ndarray, h: np.ndarray, method: str, step_name: str) -> np.ndarray:
    n = x0.size
    if method == "central":
        X = np.repeat(x0[:, None], 2 * n, axis=1)
        idx = np.arange(n)
        X[idx, idx] += h
        X[idx, n + idx] -= h
        steps = X[idx, idx] - X[idx, n + idx]
        if not np.all(np.isfinite(steps) & (steps > 0)):
            i = int(np.flatnonzero(~(np.isfinite(steps) & (steps > 0)))[0])
            raise InputError(step_name,
                             f"the step for input {i + 1} (x = {x0[i]:g}) is lost in rounding or overflows; "
                             "give a larger (or smaller) step")
        Y = _call(f, X, 2 * n)
        # divide by the steps actually taken (x ± h rounded to floats), not the nominal 2h: this removes
        # the step-representation error, leaving the truncation error O(h²) and rounding ε·|f|/h
        # (Press et al. 2007, Numerical Recipes, 3rd ed., §5.7)
        J = (Y[:, :n] - Y[:, n:]) / steps
    else:
        X = np.repeat(x0[:, None], n, axis=1).astype(complex)
        idx = np.arange(n)
        X[idx, idx] += 1j * h
        Y = _call(f, X, n)
        J = Y.imag / h
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
                     abs_step: Optional[Sequence[float]] = None, value: Optional[Any] = None) -> Propagated:
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
    value : array_like (n_out,), optional
        ``f(x)`` when the caller has already evaluated it (it is then not evaluated again: a model that
        costs milliseconds, such as a whole reduction chain, is called once for its value and once for its
        Jacobian).
    """
    x0 = _vec("x", x, min_len=1)
    c = _cov(cov, x0.size)
    if isinstance(names, str) or not isinstance(names, Sequence):
        raise InputError("names", f"must be a sequence of output names, got {type(names).__name__}")
    if groups is not None and not isinstance(groups, Mapping):
        raise InputError("groups", f"must map a group name to input indices, got {type(groups).__name__}")
    index: Dict[str, np.ndarray] = {}
    for g, idx in (groups or {}).items():
        try:
            ii = np.array(list(idx), dtype=float)
        except (TypeError, ValueError, OverflowError):
            raise InputError("groups", f"group {g!r} must list input indices (whole numbers)") from None
        if ii.size and (np.any(ii != np.floor(ii)) or ii.min() < 0 or ii.max() >= x0.size):
            raise InputError("groups", f"group {g!r} has an index outside 0..{x0.size - 1}")
        index[g] = ii.astype(int)
    J = jacobian(f, x0, method=method, rel_step=rel_step, abs_step=abs_step)
    try:
        y0 = np.asarray(f(x0) if value is None else value, dtype=float).ravel()
    except (TypeError, ValueError, OverflowError):
        raise InputError("f" if value is None else "value",
                         "the model returned something that is not an array of numbers" if value is None
                         else "must be an array of numbers (the model's value at x)") from None
    if value is not None and y0.size != J.shape[0]:
        raise InputError("value", f"holds {y0.size} numbers but the model has {J.shape[0]} outputs")
    if y0.size != J.shape[0]:
        raise InputError("f", f"returns {y0.size} outputs for one point but {J.shape[0]} per column of a batch: "
                              "it must be vectorised over the trailing axis")
    with np.errstate(**_QUIET):
        cy = J @ c @ J.T
        parts = {g: J[:, ii] @ c[np.ix_(ii, ii)] @ J[:, ii].T for g, ii in index.items()}
        sig = np.sqrt(np.clip(np.diag(cy), 0, None))
        sig_parts = {g: np.sqrt(np.clip(np.diag(p), 0, None)) for g, p in parts.items()}
    finite_result("linear propagation", **{"model value": y0, "output covariance": cy},
                  **{f"covariance of group {g!r}": p for g, p in parts.items()})
    return Propagated(y0, cy, sig, rho(cy), J, parts, sig_parts, tuple(names))


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
        A whole number from 10 to :data:`MC_MAX_DRAWS` (1 000 000), and inputs × draws at most
        :data:`MC_MAX_VALUES` (2e7 values, ~160 MB per array of draws); larger requests are refused
        with an InputError before anything is drawn.
    seed : int, default 12345
        Seed of :func:`numpy.random.default_rng` (a whole number >= 0); the same seed gives the same
        answer.

    Raises
    ------
    InputError
        Bad x, cov, n_draws or seed, or a model that is not vectorised.
    UndefinedResultError
        The draws or the model's outputs are not finite.
    """
    x0 = _vec("x", x, min_len=1)
    c = _cov(cov, x0.size)
    draws = as_count("n_draws", n_draws, 10, MC_MAX_DRAWS,
                     "1e6 draws fix a Monte Carlo sigma to 0.1 %; more only cost time and memory")
    if x0.size * draws > MC_MAX_VALUES:
        raise InputError("n_draws", f"{draws} draws of {x0.size} inputs need about "
                                    f"{16 * x0.size * draws / 1e6:.0f} MB for the draws alone (limit "
                                    f"{16 * MC_MAX_VALUES / 1e6:.0f} MB, {MC_MAX_VALUES:.0e} values): use at most "
                                    f"{MC_MAX_VALUES // x0.size} draws")
    seed = as_count("seed", seed, 0, 2 ** 128)
    rng = np.random.default_rng(seed)
    with np.errstate(**_QUIET):
        # draw through an eigen-decomposition: tolerates singular (e.g. perfectly correlated) covariances
        w, v = np.linalg.eigh(c)
        z = rng.standard_normal((x0.size, draws))
        X = x0[:, None] + (v * np.sqrt(np.clip(w, 0, None))) @ z
        if not np.all(np.isfinite(X)):
            raise UndefinedResultError("monte_carlo: the input draws overflow double precision (cov too large)")
        Y = _call(f, X, draws)
        if not np.all(np.isfinite(Y)):
            raise UndefinedResultError("monte_carlo: the model returned non-finite values for some draws")
        cy = np.atleast_2d(np.cov(Y))
        mean = Y.mean(axis=1)
    finite_result("monte_carlo", **{"output mean": mean, "output covariance": cy})
    return MonteCarlo(mean, cy, np.sqrt(np.diag(cy)), rho(cy), draws, seed)
