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

from ._validate import broadcast_shape, finite_result
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
        σ by linear propagation with the analytic partial derivatives of the mass balance (GUM,
        JCGM 100:2008, eq. 10), formed without squaring any input, so amounts anywhere in double
        precision's range are handled; a result that still does not fit raises
        :class:`~reduction.errors.UndefinedResultError`.
    """
    nt = _arr("total_umol", total_umol, True)
    rt = _arr("total_ratio", total_ratio, True)
    nb = _arr("blank_umol", blank_umol, False)
    rb = _arr("blank_ratio", blank_ratio, True)
    s_nt = _arr("total_sigma_1s", total_sigma_1s, False)
    s_nb = _arr("blank_sigma_1s", blank_sigma_1s, False)
    s_rt = _arr("total_ratio_sigma_1s", total_ratio_sigma_1s, False)
    s_rb = _arr("blank_ratio_sigma_1s", blank_ratio_sigma_1s, False)
    broadcast_shape(total_umol=nt, total_ratio=rt, blank_umol=nb, blank_ratio=rb, total_sigma_1s=s_nt,
                    blank_sigma_1s=s_nb, total_ratio_sigma_1s=s_rt, blank_ratio_sigma_1s=s_rb)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        ns = nt - nb
        if np.any(ns <= 0):
            raise UndefinedResultError("blank_umol: the blank is not smaller than the measured total amount")
        fb = nb / ns                     # n_b/n_s and n_t/n_s: the derivatives without squaring n_s
        ft = nt / ns
        rs = ft * rt - fb * rb
        if np.any(rs <= 0):
            raise UndefinedResultError("blank_ratio: blank correction gives a ratio <= 0")
        d_nt = fb * (rb - rt) / ns
        d_nb = ft * (rt - rb) / ns
        d_rt = ft
        d_rb = -fb

        def term(d: np.ndarray, sig: np.ndarray) -> np.ndarray:
            return np.where(sig == 0, 0.0, d * sig)      # an exact input contributes nothing, whatever d is

        a, b, c, e = term(d_nt, s_nt), term(d_nb, s_nb), term(d_rt, s_rt), term(d_rb, s_rb)
        # σ_R = sqrt(a² + b² + c² + e²), σ_n = sqrt(σ_nt² + σ_nb²) by hypot (no square overflows);
        # ρ = (a σ_nt − b σ_nb)/(σ_R σ_n), formed from ratios <= 1
        sig_r = np.hypot(np.hypot(a, b), np.hypot(c, e))
        sig_n = np.hypot(s_nt, s_nb)
        ok = (sig_r > 0) & (sig_n > 0)
        rho = np.where(ok, (a / sig_r) * (s_nt / sig_n) - (b / sig_r) * (s_nb / sig_n), 0.0)
        rho = np.clip(np.where(ok, rho, 0.0), -1.0, 1.0)
        share = nb / nt
    finite_result("blank correction", **{"sample amount": ns, "amount σ": sig_n, "sample ratio": rs,
                                         "ratio σ": sig_r, "amount-ratio correlation": rho})
    return BlankCorrection(_o(ns), _o(sig_n), _o(rs), _o(sig_r), _o(rho), _o(share))


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
    broadcast_shape(blank_ng=b, **{f"ratios[{k!r}]": v for k, v in comp.items()})
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        mass_per_ref = sum(np.asarray(comp[f"{i}/{reference_isotope}"]) * isotope_mass(i).value for i in isos)
        out = b * 1e-3 / mass_per_ref
    finite_result("blank amount", **{"µmol of the reference isotope": out})
    return _o(out)
