"""Reference-material normalisation per session.

Form (a ratio factor, common practice): the session's standard runs give a mean R_meas; with the
accepted value R_acc (e.g. JNdi-1 143Nd/144Nd = 0.512115, Tanaka et al. 2000, Chem. Geol. 168,
279-281) every sample ratio of the session is multiplied by f = R_acc / R_meas.

Uncertainty: the factor's random part is the standard error of the session mean; its systematic part
is the accepted value's σ (shared by every analysis of every session). The session's external
reproducibility (SD of the standard runs, relative) is added in quadrature to each sample's own
random σ by :func:`apply_standard`.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Optional, Tuple

import numpy as np

from ._validate import as_scalar, broadcast_shape, finite_result
from .constants import reference_material
from .errors import InputError, UndefinedResultError

__all__ = ["StandardFactor", "apply_standard", "standard_factor"]


@dataclass(frozen=True)
class StandardFactor:
    """Session normalisation factor f = accepted / measured mean.

    Attributes
    ----------
    factor : float
    factor_sigma_1s_random : float
        From the standard error of the session mean (f · sem/mean).
    factor_sigma_1s_systematic : float
        From the accepted value's σ (f · σ_acc/accepted).
    n : int
        Number of standard runs.
    mean, sd_1s, sem_1s : float
        Session mean, SD (ddof = 1; 0 if n = 1) and standard error of the standard runs.
    reproducibility_rel_1s : float
        sd_1s / mean, the session's external reproducibility.
    accepted, accepted_sigma_1s : float
    source : str
        Where the accepted value came from.
    form : str
    """

    factor: float
    factor_sigma_1s_random: float
    factor_sigma_1s_systematic: float
    n: int
    mean: float
    sd_1s: float
    sem_1s: float
    reproducibility_rel_1s: float
    accepted: float
    accepted_sigma_1s: float
    source: str
    form: str = "ratio factor: R_corrected = R * accepted / mean(measured standard)"


def standard_factor(measured: Any, accepted: Optional[float] = None, *, material: Optional[str] = None,
                    ratio: Optional[str] = None, accepted_sigma_1s: Optional[float] = None) -> StandardFactor:
    """Normalisation factor of a session from its reference-material runs.

    Parameters
    ----------
    measured : array_like
        The session's (already mass-bias-corrected) results for the standard, 1-D (> 0).
    accepted : float, optional
        Accepted value; when omitted it is read with
        :func:`reduction.constants.reference_material` (``material``, ``ratio``).
    material, ratio : str, optional
        E.g. ``"JNdi-1"``, ``"143Nd/144Nd"``.
    accepted_sigma_1s : float, optional
        σ of the accepted value (default: from the reference data, or 0 for a given ``accepted``).

    Examples
    --------
    >>> f = standard_factor([0.512100, 0.512104, 0.512098], material="JNdi-1", ratio="143Nd/144Nd")
    >>> round(f.factor, 8)
    1.00002799
    """
    try:
        x = np.array(measured, dtype=float).ravel()
    except (TypeError, ValueError, OverflowError):
        raise InputError("measured", "could not be read as numbers") from None
    if x.size == 0:
        raise InputError("measured", "needs at least one standard run")
    if not np.all(np.isfinite(x)) or np.any(x <= 0):
        raise InputError("measured", "every standard run must be a finite number > 0")
    if accepted is None:
        if material is None or ratio is None:
            raise InputError("accepted", "give the accepted value, or material and ratio to look it up")
        rv = reference_material(material, ratio)
        acc, acc_s, src = rv.value, rv.sigma_1s, rv.source
        if accepted_sigma_1s is not None:
            acc_s = as_scalar("accepted_sigma_1s", accepted_sigma_1s)
    else:
        acc = as_scalar("accepted", accepted)
        acc_s = 0.0 if accepted_sigma_1s is None else as_scalar("accepted_sigma_1s", accepted_sigma_1s)
        src = "given by the caller"
    if not acc > 0:
        raise InputError("accepted", f"must be > 0, got {acc!r}")
    if not acc_s >= 0:
        raise InputError("accepted_sigma_1s", f"must be >= 0, got {acc_s!r}")
    n = int(x.size)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        # mean and SD of the runs scaled by a power of two near the largest (exact, so the same numbers as
        # unscaled, but no sum or square can overflow)
        top = float(np.ldexp(1.0, int(np.frexp(x.max())[1]) - 1))
        xs = x / top
        mean = float(xs.mean()) * top
        sd = float(xs.std(ddof=1)) * top if n > 1 else 0.0
        sem = float(sd / np.sqrt(n))
        f = acc / mean
        out = StandardFactor(f, f * (sem / mean), f * (acc_s / acc), n, mean, sd, sem, sd / mean, acc, acc_s, src)
    finite_result("standard factor", factor=f, **{"σ of the factor (random)": out.factor_sigma_1s_random,
                                                  "σ of the factor (systematic)": out.factor_sigma_1s_systematic})
    if not f > 0:
        raise UndefinedResultError("standard factor: accepted / mean underflows to 0 in double precision; check "
                                   "the accepted value and the runs (units?)")
    return out


def _numbers(x: Any) -> bool:
    try:
        np.asarray(x, dtype=float)
    except (TypeError, ValueError, OverflowError):
        return False
    return True


def apply_standard(values: Any, sigma_1s: Any, std: StandardFactor, *,
                   add_reproducibility: bool = True) -> Tuple[Any, Any, Any]:
    """Apply a session factor to sample ratios.

    Returns
    -------
    values : float or ndarray
        ``values · factor``.
    sigma_1s_random : float or ndarray
        Own σ scaled by the factor, with the session reproducibility (relative) and the factor's random
        σ in quadrature (the latter is common to the session).
    sigma_1s_systematic : float or ndarray
        From the accepted value's σ.
    """
    if not isinstance(std, StandardFactor):
        raise InputError("std", "must be a StandardFactor (see standard_factor)")
    try:
        v = np.asarray(values, dtype=float)
        s = np.asarray(sigma_1s, dtype=float)
    except (TypeError, ValueError, OverflowError):
        raise InputError("values" if not _numbers(values) else "sigma_1s", "could not be read as numbers") from None
    if not np.all(np.isfinite(v)) or np.any(v <= 0):
        raise InputError("values", "must be finite numbers > 0")
    if not np.all(np.isfinite(s)) or np.any(s < 0):
        raise InputError("sigma_1s", "must be finite numbers >= 0")
    broadcast_shape(values=v, sigma_1s=s)
    f = std.factor
    parts = (std.factor_sigma_1s_random, std.factor_sigma_1s_systematic, std.reproducibility_rel_1s)
    if not (math.isfinite(f) and f > 0 and all(math.isfinite(p) and p >= 0 for p in parts)):
        raise InputError("std", "its factor must be a finite number > 0 and its σ finite numbers >= 0")
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        out = v * f
        # relative σ in quadrature by hypot (no square overflows)
        rel = np.hypot(s / v, std.factor_sigma_1s_random / f)
        if add_reproducibility:
            rel = np.hypot(rel, std.reproducibility_rel_1s)
        rnd = out * rel
        sys_ = out * (std.factor_sigma_1s_systematic / f)
    finite_result("reference-material normalisation", **{"normalised value": out, "random σ": rnd,
                                                         "systematic σ": sys_})

    def o(a: Any) -> Any:
        return float(a) if np.ndim(a) == 0 else np.asarray(a)

    return o(out), o(rnd), o(sys_)
