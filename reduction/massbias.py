"""Instrumental mass bias: exponential, power and linear laws.

Notation: a ratio R = i/j of isotopes with atomic masses m_i, m_j (AME2020, via
:func:`reduction.constants.isotope_mass`). The bias factor is found from a normalising pair k/l
whose true ratio is a convention (e.g. 146Nd/144Nd = 0.7219) and applied to any other ratio:

=============  =====================================  ==============================================
law            correction (measured -> true)          factor from the normalising pair
=============  =====================================  ==============================================
exponential    R_t = R_m · (m_i/m_j)^β                β = ln(R_t,n / R_m,n) / ln(m_k/m_l)
power          R_t = R_m · (1 + ε)^(m_i − m_j)        ε = (R_t,n / R_m,n)^(1/(m_k − m_l)) − 1
linear         R_t = R_m · (1 + ε (m_i − m_j))        ε = (R_t,n / R_m,n − 1) / (m_k − m_l)
=============  =====================================  ==============================================

The exponential law is that of Russell, Papanastassiou & Tombrello (1978, Geochim. Cosmochim. Acta
42, 1075-1090); the power and linear laws are the forms discussed there and by Hart & Zindler (1989,
Int. J. Mass Spectrom. Ion Proc. 89, 287-301). Sign conventions of the linear law differ between
authors; this module uses the multiplicative form above throughout.

All functions are vectorised (numpy broadcasting) and never modify their inputs.
"""
from __future__ import annotations

from typing import Any, Optional, Tuple

import numpy as np

from ._validate import as_array, as_name, broadcast_shape, finite_result, require_positive
from .constants import isotope_mass, normalising_ratio
from .errors import InputError, UndefinedResultError

__all__ = [
    "LAWS",
    "bias_apply",
    "bias_correct",
    "bias_factor",
    "bias_factor_from",
    "correct_named",
    "normalise",
    "ratio_masses",
]

LAWS: Tuple[str, ...] = ("exponential", "power", "linear")


def _law(law: str) -> str:
    k = str(law).strip().lower()
    aliases = {"exp": "exponential", "russell": "exponential", "pow": "power", "lin": "linear"}
    k = aliases.get(k, k)
    if k not in LAWS:
        raise InputError("law", f"unknown mass-bias law {law!r}; use one of {', '.join(LAWS)}")
    return k


def _checked(name: str, x: Any, sign: str = "positive") -> np.ndarray:
    """Read ``x`` as a float array (no copy) and check it: ``sign`` is "positive", "nonnegative" or "any".

    Shared by the engine's per-step modules. The common, valid case costs two fast passes; the error
    messages come from :mod:`reduction._validate`. A complex array (the complex-step derivative of
    :func:`reduction.propagate.jacobian`, Martins, Sturdza & Alonso 2003) is checked on its real part
    and returned unchanged, so the derivative travels through the step.
    """
    if isinstance(x, (complex, np.complexfloating)) or (isinstance(x, np.ndarray) and x.dtype.kind == "c"):
        a = np.asarray(x)
        _checked(name, a.real, sign)
        return a
    try:
        a = np.asarray(x, dtype=float)
    except (TypeError, ValueError, OverflowError):
        raise InputError(name, "could not be read as numbers") from None
    ok_sign = True if sign == "any" else bool((a > 0).all() if sign == "positive" else (a >= 0).all())
    with np.errstate(over="ignore", invalid="ignore"):   # a sum that overflows takes the named checks
        total = a.sum()
    if ok_sign and np.isfinite(total):
        return a
    as_array(name, a, ndim=None)  # raises for NaN / inf, naming the element
    return require_positive(name, a, allow_zero=sign == "nonnegative")


def _positive(name: str, x: Any) -> np.ndarray:
    return _checked(name, x, "positive")


def _finite(name: str, x: Any) -> np.ndarray:
    return _checked(name, x, "any")


def _out(a: np.ndarray) -> Any:
    if a.ndim:
        return a
    return complex(a) if np.iscomplexobj(a) else float(a)


def ratio_masses(ratio: str) -> Tuple[float, float]:
    """Atomic masses (u, AME2020; Wang et al. 2021, Chinese Phys. C 45, 030003) of a ratio's isotopes.

    Parameters
    ----------
    ratio : str
        ``"num/den"``, e.g. ``"143Nd/144Nd"``.
    """
    num, sep, den = as_name("ratio", ratio, "143Nd/144Nd").partition("/")
    if not sep or not num or not den:
        raise InputError("ratio", f"must be written 'num/den' like '143Nd/144Nd', got {ratio!r}")
    return isotope_mass(num.strip()).value, isotope_mass(den.strip()).value


#: Floating-point state of the arithmetic here: overflow and the like are not warned about but
#: caught by the finiteness check of each result (:func:`reduction._validate.finite_result`).
_QUIET = dict(over="ignore", invalid="ignore", divide="ignore", under="ignore")


def _check_masses(mass_num: Any, mass_den: Any) -> Tuple[np.ndarray, np.ndarray]:
    mi = _positive("mass_num", mass_num)
    mj = _positive("mass_den", mass_den)
    broadcast_shape(mass_num=mi, mass_den=mj)
    if np.any(mi == mj):
        raise InputError("mass_den", "equals mass_num: a ratio of one isotope to itself has no mass bias")
    return mi, mj


def _gain(mi: np.ndarray, mj: np.ndarray, factor: np.ndarray, law: str) -> np.ndarray:
    """Multiplier g with R_true = g · R_measured (finite and > 0, else UndefinedResultError)."""
    with np.errstate(**_QUIET):
        if law == "exponential":
            g = np.exp(factor * np.log(mi / mj))
        elif law == "power":
            base = 1.0 + factor
            if np.any(np.real(base) <= 0):
                raise UndefinedResultError("factor: power law needs 1 + ε > 0")
            g = base ** (mi - mj)
        else:
            g = 1.0 + factor * (mi - mj)
            if np.any(np.real(g) <= 0):
                raise UndefinedResultError("factor: linear law gives 1 + ε·Δm <= 0 (bias far too large)")
    if not np.all(np.isfinite(g)) or np.any(g == 0):
        raise UndefinedResultError(f"factor: the {law}-law correction factor overflows or vanishes in double "
                                   "precision (the bias factor is far too large); check it")
    return g


def bias_factor(measured_norm: Any, true_norm: Any, mass_num: Any, mass_den: Any,
                law: str = "exponential") -> Any:
    """Mass-bias factor (β or ε per u) from a measured and a true normalising ratio.

    Parameters
    ----------
    measured_norm : array_like
        Measured normalising ratio k/l (> 0).
    true_norm : array_like
        True (conventional) value of k/l (> 0).
    mass_num, mass_den : array_like
        Atomic masses of k and l in u.
    law : {"exponential", "power", "linear"}

    Returns
    -------
    float or ndarray
        β (exponential law, Russell et al. 1978) or ε per mass unit (power / linear laws).
    """
    law = _law(law)
    rm = _positive("measured_norm", measured_norm)
    rt = _positive("true_norm", true_norm)
    mk, ml = _check_masses(mass_num, mass_den)
    broadcast_shape(measured_norm=rm, true_norm=rt, mass_num=mk, mass_den=ml)
    f, q = _factor(rm, rt, mk, ml, law)
    finite_result("mass-bias factor", **{"bias factor": f, "ratio true/measured": q})
    return _out(f)


def _factor(rm: Any, rt: Any, mk: Any, ml: Any, law: str) -> Tuple[Any, Any]:
    """(factor, true/measured) of :func:`bias_factor` on checked inputs (``law`` already read by ``_law``);
    for the engine's inner loops (the spike-stripping iteration), which check their own results."""
    with np.errstate(**_QUIET):
        q = rt / rm
        if law == "exponential":
            f = np.log(q) / np.log(mk / ml)
        elif law == "power":
            f = q ** (1.0 / (mk - ml)) - 1.0
        else:
            f = (q - 1.0) / (mk - ml)
    return f, q


def bias_correct(measured: Any, mass_num: Any, mass_den: Any, factor: Any, law: str = "exponential") -> Any:
    """Correct measured ratio(s) i/j for mass bias with a known factor (measured -> true).

    Parameters
    ----------
    measured : array_like
        Measured ratio(s) i/j (> 0).
    mass_num, mass_den : array_like
        Atomic masses of i and j (u).
    factor : array_like
        β or ε from :func:`bias_factor` (broadcasts against ``measured``).
    law : {"exponential", "power", "linear"}
    """
    law = _law(law)
    r = _positive("measured", measured)
    mi, mj = _check_masses(mass_num, mass_den)
    f = _finite("factor", factor)
    broadcast_shape(measured=r, mass_num=mi, mass_den=mj, factor=f)
    with np.errstate(**_QUIET):
        out = r * _gain(mi, mj, f, law)
    finite_result("mass-bias correction", **{"corrected ratio": out})
    return _out(out)


def bias_apply(true: Any, mass_num: Any, mass_den: Any, factor: Any, law: str = "exponential") -> Any:
    """Fractionate true ratio(s) with a known factor (true -> measured); inverse of :func:`bias_correct`.

    Used by forward models (synthetic runs) and by interference stripping, where the interfering
    element's natural ratio is expressed as it would be measured.
    """
    law = _law(law)
    r = _positive("true", true)
    mi, mj = _check_masses(mass_num, mass_den)
    f = _finite("factor", factor)
    broadcast_shape(true=r, mass_num=mi, mass_den=mj, factor=f)
    with np.errstate(**_QUIET):
        out = r / _gain(mi, mj, f, law)
    finite_result("mass-bias fractionation", **{"fractionated ratio": out})
    return _out(out)


def _true_norm(norm_ratio: str, true_norm: Optional[float]) -> float:
    """The conventional value of a named normalising ratio unless the caller gives one."""
    return normalising_ratio(norm_ratio).value if true_norm is None else true_norm


def bias_factor_from(measured_norm: Any, norm_ratio: str = "146Nd/144Nd", *, true_norm: Optional[float] = None,
                     law: str = "exponential") -> Any:
    """Bias factor from a named normalising ratio (true value from ``reduction/data/normalising.json``).

    Examples
    --------
    >>> round(bias_factor_from(0.7219, "146Nd/144Nd"), 12)
    0.0
    """
    mk, ml = ratio_masses(as_name("norm_ratio", norm_ratio, "146Nd/144Nd"))
    return bias_factor(measured_norm, _true_norm(norm_ratio, true_norm), mk, ml, law)


def correct_named(measured: Any, ratio: str, factor: Any, law: str = "exponential") -> Any:
    """Correct a named ratio (e.g. ``"143Nd/144Nd"``) with a known bias factor."""
    mi, mj = ratio_masses(ratio)
    return bias_correct(measured, mi, mj, factor, law)


def normalise(measured: Any, ratio: str, measured_norm: Any, norm_ratio: str, *,
              true_norm: Optional[float] = None, law: str = "exponential") -> Any:
    """Internal normalisation: correct ``ratio`` with the bias of ``norm_ratio`` measured alongside.

    Float-in / float-out front (also vectorised over cycles or analyses).

    Parameters
    ----------
    measured : array_like
        Measured value(s) of ``ratio``.
    ratio : str
        The ratio to correct, e.g. ``"143Nd/144Nd"``.
    measured_norm : array_like
        Measured normalising ratio in the same cycle(s), e.g. 146Nd/144Nd.
    norm_ratio : str
        Name of the normalising ratio, e.g. ``"146Nd/144Nd"`` (true value 0.7219 unless ``true_norm``).
    law : {"exponential", "power", "linear"}

    Examples
    --------
    >>> round(normalise(0.511500, "143Nd/144Nd", 0.7219, "146Nd/144Nd"), 9)
    0.5115
    """
    ratio = as_name("ratio", ratio, "143Nd/144Nd")
    norm_ratio = as_name("norm_ratio", norm_ratio, "146Nd/144Nd")
    if _law(law) != "exponential":
        f = bias_factor_from(measured_norm, norm_ratio, true_norm=true_norm, law=law)
        return correct_named(measured, ratio, f, law)
    # Exponential law in one pass chain: (m_i/m_j)^β with β = ln(q)/ln(m_k/m_l), q = true/measured
    # normalising ratio, is exp(ln(q)·c) with c = ln(m_i/m_j)/ln(m_k/m_l) — the same law as
    # bias_factor_from + correct_named, computed in place (no β array, no second check of it).
    rm = _positive("measured_norm", measured_norm)
    rt = _positive("true_norm", _true_norm(norm_ratio, true_norm))
    r = _positive("measured", measured)
    mk, ml = _check_masses(*ratio_masses(norm_ratio))
    mi, mj = _check_masses(*ratio_masses(ratio))
    broadcast_shape(measured=r, measured_norm=rm, true_norm=rt)
    c = float(np.log(mi / mj) / np.log(mk / ml))
    with np.errstate(**_QUIET):
        g = np.divide(rt, rm)
        if g.ndim == 0:
            out = r * np.exp(np.log(g) * c)
        else:
            np.log(g, out=g)
            np.multiply(g, c, out=g)
            np.exp(g, out=g)
            out = np.multiply(r, g, out=g) if g.shape == np.broadcast(r, g).shape else r * g
    if not (np.all(np.isfinite(out)) and np.all(np.real(out) > 0)):
        raise UndefinedResultError(f"normalise: the {ratio} corrected with {norm_ratio} overflows or vanishes in "
                                   "double precision (measured and true normalising ratios far apart); check them")
    return _out(out)
