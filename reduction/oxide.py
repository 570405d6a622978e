"""Oxide runs (e.g. NdO+ on TIMS): oxygen-isotope correction of oxide beams to metal ratios.

An oxide beam at mass m carries every isotope i of the element bound to the oxygen isotope of mass
m − i: i + 16O, (i − 1) + 17O and (i − 2) + 18O. Per 16O, with o₁ = 17O/16O and o₂ = 18O/16O,

    O_m = N_(m−16) + o₁·N_(m−17) + o₂·N_(m−18)

(N = 0 at a mass where the element has no isotope). Ordered by mass this system is lower triangular,
so the metal beams follow upwards in mass, N_i = O_(i+16) − o₁·N_(i−1) − o₂·N_(i−2), exactly; the
metal ratios are N_i/N_ref. Every isotope of the element must therefore be measured (as the ratio of
its oxide beam to the reference isotope's oxide beam). Mass bias is corrected afterwards on the metal
ratios (common practice for NdO+ TIMS data: oxygen correction first, then normalisation).

Oxygen composition: the Constants sheet's ``oxygen.17O/16O`` and ``oxygen.18O/16O`` (VSMOW values,
recalled from memory: 17O/16O = 379.9e-6, Li et al. 1988; 18O/16O = 2005.20e-6, Baertschi 1976);
a lab that measures its own oxygen (e.g. from a spiked-free standard's 150Nd16O/150Nd18O) types it there.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Dict, Mapping

import numpy as np

from ._validate import as_name, as_scalar
from .errors import InputError

__all__ = ["OxideCorrection", "oxide_to_metal"]


@dataclass(frozen=True)
class OxideCorrection:
    """Metal ratios from oxide ratios.

    Attributes
    ----------
    ratios, sigma_1s : dict of str to float
        Metal ratios i/reference and their 1σ (the oxide ratios' 1σ propagated, taken as independent).
    """

    ratios: Dict[str, float]
    sigma_1s: Dict[str, float]


def _mass(iso: str) -> int:
    return int(iso[:len(iso) - len(iso.lstrip("0123456789"))])


def oxide_to_metal(element: str, reference: str, oxide_ratios: Mapping[str, Any], sigma_1s: Mapping[str, Any],
                   o17_16: float, o18_16: float) -> OxideCorrection:
    """Metal ratios ``i/reference`` of an element measured as its monoxide.

    Parameters
    ----------
    element, reference : str
        E.g. ``"Nd"`` and ``"144Nd"``.
    oxide_ratios : mapping
        ``"i/reference"`` -> measured ratio of the oxide beams at masses i + 16 and reference + 16, one
        for every isotope i of the element other than the reference.
    sigma_1s : mapping
        Their 1σ (absolute); a missing one counts as 0.
    o17_16, o18_16 : float
        Oxygen composition 17O/16O and 18O/16O (≥ 0).

    Notes
    -----
    The monoxide beam equation and its upward solution are given in the module docstring (oxygen
    correction of TIMS NdO+ data, common practice; e.g. Wasserburg et al. 1981, Geochim. Cosmochim.
    Acta 45, 2311, recalled from memory).
    """
    from .dilution import element_isotopes

    el = as_name("element", element, "Nd")
    ref = as_name("reference", reference, "144Nd")
    isos = element_isotopes(el)
    if ref not in isos:
        raise InputError("reference", f"{ref!r} is not an isotope of {el}")
    if not isinstance(oxide_ratios, Mapping):
        raise InputError("oxide_ratios", "must be a mapping of ratio name to value")
    if not isinstance(sigma_1s, Mapping):
        raise InputError("sigma_1s", "must be a mapping of ratio name to 1σ")
    o1, o2 = as_scalar("o17_16", o17_16), as_scalar("o18_16", o18_16)
    if not (0 <= o1 < 0.1 and 0 <= o2 < 0.1):
        raise InputError("o17_16", f"oxygen ratios must be >= 0 and small (17O/16O, 18O/16O), got {o1!r}, {o2!r}")
    names = [f"{i}/{ref}" for i in isos if i != ref]
    extra = [k for k in oxide_ratios if k not in names]
    if extra:
        raise InputError("oxide_ratios", f"{extra[0]!r} is not a {el} ratio to {ref}")
    missing = [k for k in names if k not in oxide_ratios]
    if missing:
        raise InputError("oxide_ratios", f"an oxide run needs every {el} isotope, because each oxide mass also "
                                         f"carries the lighter isotopes with 17O and 18O: {', '.join(missing)} "
                                         "missing")
    o = {}
    s = {}
    for k in names:
        v = as_scalar(f"oxide_ratios[{k!r}]", oxide_ratios[k])
        if not v > 0:
            raise InputError("oxide_ratios", f"[{k!r}] must be > 0, got {v!r}")
        o[_mass(k.split("/")[0])] = v
        e = as_scalar(f"sigma_1s[{k!r}]", sigma_1s.get(k, 0.0))
        if e < 0:
            raise InputError("sigma_1s", f"[{k!r}] must be >= 0, got {e!r}")
        s[_mass(k.split("/")[0])] = e
    o[_mass(ref)] = 1.0
    s[_mass(ref)] = 0.0
    masses = sorted(o)
    idx = {m: j for j, m in enumerate(masses)}
    # lower-triangular system L·N = O, L = I + o1·(shift 1) + o2·(shift 2) on the element's masses
    n = len(masses)
    lower = np.eye(n)
    for m in masses:
        for d, ok in ((1, o1), (2, o2)):
            if m - d in idx:
                lower[idx[m], idx[m - d]] = ok
    a = np.linalg.inv(lower)                     # also lower triangular; N = A·O
    vec = np.array([o[m] for m in masses])
    metal = a @ vec
    j_ref = idx[_mass(ref)]
    if not np.all(metal > 0):
        bad = masses[int(np.argmin(metal))]
        raise InputError("oxide_ratios", f"the oxygen correction leaves no beam at mass {bad} (check the oxide "
                                         "ratios and the oxygen composition)")
    out: Dict[str, float] = {}
    sig: Dict[str, float] = {}
    for k in names:
        j = idx[_mass(k.split("/")[0])]
        r = metal[j] / metal[j_ref]
        grad = (a[j] - r * a[j_ref]) / metal[j_ref]     # d r / d O_m (O_ref fixed at 1: its σ is in the others)
        out[k] = float(r)
        sig[k] = float(math.sqrt(sum((grad[idx[m]] * s[m]) ** 2 for m in masses)))
    return OxideCorrection(out, sig)
