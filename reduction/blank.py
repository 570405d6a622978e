"""Procedural blank correction.

The isotope-dilution result is sample + blank. With amounts n of the ratio's denominator isotope
(total t, blank b) and ratios R, mass balance gives (common practice; e.g. Faure & Mensing 2005):

    n_s = n_t − n_b,     R_s = (n_t·R_t − n_b·R_b) / (n_t − n_b)

The blank's share n_b/n_t is reported; its amount and composition carry their own σ.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping, Optional

import numpy as np

from .constants import isotope_mass
from .errors import UndefinedResultError
from .massbias import _checked

__all__ = ["BlankCorrection", "blank_correct", "blank_umol"]


@dataclass(frozen=True)
class BlankCorrection:
    """Blank-corrected amount and ratio (floats or arrays).

    Attributes
    ----------
    amount_umol, amount_sigma_1s : float or ndarray
        Sample amount of the denominator isotope (same unit as the inputs) and its 1σ.
    ratio, ratio_sigma_1s : float or ndarray
        Sample ratio and its 1σ.
    rho_amount_ratio : float or ndarray
        Error correlation between amount and ratio.
    blank_share : float or ndarray
        n_blank / n_total (0 to < 1).
    """

    amount_umol: Any
    amount_sigma_1s: Any
    ratio: Any
    ratio_sigma_1s: Any
    rho_amount_ratio: Any
    blank_share: Any


def _arr(name: str, x: Any, positive: bool) -> np.ndarray:
    return _checked(name, x, "positive" if positive else "nonnegative")


def _o(a: Any) -> Any:
    a = np.asarray(a, dtype=float)
    return float(a) if a.ndim == 0 else a


def blank_correct(total_umol: Any, total_ratio: Any, blank_umol: Any, blank_ratio: Any, *,
                  total_sigma_1s: Any = 0.0, blank_sigma_1s: Any = 0.0, total_ratio_sigma_1s: Any = 0.0,
                  blank_ratio_sigma_1s: Any = 0.0) -> BlankCorrection:
    """Subtract a procedural blank of known amount and composition (mass balance).

    Parameters
    ----------
    total_umol : array_like
        Measured amount (sample + blank) of the ratio's denominator isotope (> 0).
    total_ratio : array_like
        Measured ratio of sample + blank (> 0).
    blank_umol : array_like
        Blank amount of the denominator isotope (>= 0, smaller than ``total_umol``).
    blank_ratio : array_like
        Blank ratio (> 0), e.g. natural.
    total_sigma_1s, blank_sigma_1s, total_ratio_sigma_1s, blank_ratio_sigma_1s : array_like
        1σ absolute of the four inputs (independent).

    Returns
    -------
    BlankCorrection
        σ by linear propagation with the analytic partial derivatives of the mass balance.
    """
    nt = _arr("total_umol", total_umol, True)
    rt = _arr("total_ratio", total_ratio, True)
    nb = _arr("blank_umol", blank_umol, False)
    rb = _arr("blank_ratio", blank_ratio, True)
    s_nt = _arr("total_sigma_1s", total_sigma_1s, False)
    s_nb = _arr("blank_sigma_1s", blank_sigma_1s, False)
    s_rt = _arr("total_ratio_sigma_1s", total_ratio_sigma_1s, False)
    s_rb = _arr("blank_ratio_sigma_1s", blank_ratio_sigma_1s, False)
    ns = nt - nb
    if np.any(ns <= 0):
        raise UndefinedResultError("blank_umol: the blank is not smaller than the measured total amount")
    rs = (nt * rt - nb * rb) / ns
    if np.any(rs <= 0):
        raise UndefinedResultError("blank_ratio: blank correction gives a ratio <= 0")
    d_nt = nb * (rb - rt) / ns ** 2
    d_nb = nt * (rt - rb) / ns ** 2
    d_rt = nt / ns
    d_rb = -nb / ns
    var_r = (d_nt * s_nt) ** 2 + (d_nb * s_nb) ** 2 + (d_rt * s_rt) ** 2 + (d_rb * s_rb) ** 2
    var_n = s_nt ** 2 + s_nb ** 2
    cov = d_nt * s_nt ** 2 - d_nb * s_nb ** 2
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = np.where(var_r * var_n > 0, cov / np.sqrt(var_r * var_n), 0.0)
    return BlankCorrection(_o(ns), _o(np.sqrt(var_n)), _o(rs), _o(np.sqrt(var_r)), _o(rho), _o(nb / nt))


def blank_umol(blank_ng: Any, element: str, reference_isotope: str,
               ratios: Optional[Mapping[str, Any]] = None, natural: Any = None) -> Any:
    """µmol of ``reference_isotope`` in a blank of ``blank_ng`` nanograms of element.

    The blank's composition is natural — ``natural`` (a
    :class:`reduction.composition.NaturalComposition`), by default the convention of
    :func:`reduction.composition.natural_composition` — with ``ratios`` (i/reference) laid over it;
    its atomic weight follows from that composition and AME2020 masses.
    """
    from .dilution import element_isotopes, sample_composition

    b = _arr("blank_ng", blank_ng, False)
    comp = sample_composition(element, reference_isotope, ratios, natural)
    isos = element_isotopes(element)
    mass_per_ref = sum(np.asarray(comp[f"{i}/{reference_isotope}"]) * isotope_mass(i).value for i in isos)
    return _o(b * 1e-3 / mass_per_ref)
