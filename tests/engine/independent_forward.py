"""Forward models for tests, written without the engine's code (mpmath arithmetic, own conventions).

A test that checks an inverse (isotope dilution, the chain, the workbook) must not reuse the inverse's
code: these functions compute the truth another way.

* Natural compositions: the CIAAW representative amount fractions (read as plain numbers from the data
  file, CIAAW 2019/2021 tables: Meija et al. 2016, Pure Appl. Chem. 88, 293, and later updates)
  fractionated by the exponential law (Russell, Papanastassiou & Tombrello 1978, GCA 42, 1075) with
  the AME2020 atomic masses (Wang et al. 2021, Chin. Phys. C 45, 030003) until the element's
  normalising ratio is exact (an element without one, Ce, keeps the CIAAW fractions); then the widely
  used 84Sr/86Sr = 0.056584 and 176Yb/173Yb = 0.79381 (both recalled from memory) are set. The
  fractionation factor is solved here in closed form with mpmath at 40 digits, not by the engine's code.
* Isotope-dilution mixtures: atoms of every isotope in the sample, the spike and the blank are added
  in mpmath; the measured ratios are the mixture's, multiplied by the exponential-law factor
  ``(m_i/m_ref)^(-β)`` (so that correcting with ``R·(m_i/m_ref)^β`` gives the true ratio back).
"""
from __future__ import annotations

import json
from pathlib import Path
from typing import Dict, Mapping, Optional

import mpmath as mp

mp.mp.dps = 40

DATA = Path(__file__).resolve().parents[2] / "reduction" / "data"
_ISO = json.loads((DATA / "isotopes.json").read_text())["isotopes"]

#: Normalising ratios (published conventions, values as commonly used): O'Nions et al. 1977 (Nd),
#: Patchett & Tatsumoto 1980 (Hf), Steiger & Jäger 1977 (Sr); 147Sm/152Sm 0.56081 and
#: 173Yb/171Yb 1.132685 (Chu et al. 2002) recalled from memory; Lu and Rb two-isotope conventions
#: 176Lu/175Lu = 0.02651 and 85Rb/87Rb = 2.5932 recalled from memory.
NORMALISING = {"Nd": ("146Nd", "144Nd", "0.7219"), "Sm": ("147Sm", "152Sm", "0.56081"),
               "Hf": ("179Hf", "177Hf", "0.7325"), "Sr": ("86Sr", "88Sr", "0.1194"),
               "Yb": ("173Yb", "171Yb", "1.132685"), "Lu": ("176Lu", "175Lu", "0.02651"),
               "Rb": ("85Rb", "87Rb", "2.5932")}
FIXED = {"Sr": ("84Sr", "86Sr", "0.056584"), "Yb": ("176Yb", "173Yb", "0.79381")}


def element_of(iso: str) -> str:
    return iso.lstrip("0123456789")


def isotopes(element: str):
    return sorted((i for i in _ISO if element_of(i) == element), key=lambda i: int(i[:-len(element)]))


def mass(iso: str) -> mp.mpf:
    return mp.mpf(repr(_ISO[iso]["mass_u"]))


def natural_fractions(element: str) -> Dict[str, mp.mpf]:
    """Amount fractions of the convention (see the module docstring), as mpmath numbers."""
    isos = isotopes(element)
    f = {i: mp.mpf(repr(_ISO[i]["fraction"])) for i in isos}
    if element in NORMALISING:
        a, b, target = NORMALISING[element]
        # (f_a/f_b) (m_a/m_b)^p = target  ->  p = ln(target / (f_a/f_b)) / ln(m_a/m_b)
        p = mp.log(mp.mpf(target) / (f[a] / f[b])) / mp.log(mass(a) / mass(b))
        f = {i: f[i] * mass(i) ** p for i in isos}
    if element in FIXED:
        a, b, target = FIXED[element]
        f[a] = mp.mpf(target) * f[b]
    tot = mp.fsum(f.values())
    return {i: v / tot for i, v in f.items()}


def natural_ratios(element: str, reference: str) -> Dict[str, float]:
    """Every ratio ``i/reference`` of the convention as floats (reference's own ratio left out)."""
    f = natural_fractions(element)
    return {f"{i}/{reference}": float(v / f[reference]) for i, v in f.items() if i != reference}


def sample_fractions(element: str, over: Optional[Mapping[str, float]] = None) -> Dict[str, mp.mpf]:
    """Fractions of a sample: natural, with radiogenic ratios ``over`` (e.g. {"143Nd/144Nd": 0.5125})."""
    f = natural_fractions(element)
    for k, v in (over or {}).items():
        num, den = k.split("/")
        f[num] = mp.mpf(repr(float(v))) * f[den]
    tot = mp.fsum(f.values())
    return {i: x / tot for i, x in f.items()}


def molar_mass(fr: Mapping[str, mp.mpf]) -> mp.mpf:
    return mp.fsum(x * mass(i) for i, x in fr.items())


def ratio(fr: Mapping[str, mp.mpf], num: str, den: str) -> float:
    """Atom ratio num/den of a composition given as fractions, as a float."""
    return float(fr[num] / fr[den])


def fractionate(true_ratio: float, num: str, den: str, beta: float) -> float:
    """A true ratio num/den as measured with exponential-law bias β: ``R (m_num/m_den)^(-β)``."""
    b = mp.mpf(repr(float(beta)))
    return float(mp.mpf(repr(float(true_ratio))) * (mass(num) / mass(den)) ** (-b))


def mixture_ratios(element: str, reference: str, sample_umol: float, sample_fr: Mapping[str, mp.mpf],
                   spike_umol_iso: float, spike_iso: str, spike_ab: Mapping[str, float], beta: float = 0.0,
                   blank_umol: float = 0.0, blank_fr: Optional[Mapping[str, mp.mpf]] = None
                   ) -> Dict[str, float]:
    """Measured (fractionated) ratios ``i/reference`` of sample + spike + blank.

    ``sample_umol`` and ``blank_umol`` are total µmol of the element; ``spike_umol_iso`` the µmol of
    the spike isotope added; ``spike_ab`` the spike's atom fractions.
    """
    ab = {i: mp.mpf(repr(float(v))) for i, v in spike_ab.items()}
    ab_tot = mp.fsum(ab.values())
    spike_tot = mp.mpf(repr(float(spike_umol_iso))) / (ab[spike_iso] / ab_tot)
    blank_fr = blank_fr or natural_fractions(element)
    n = {}
    for i in isotopes(element):
        n[i] = mp.mpf(repr(float(sample_umol))) * sample_fr[i] + spike_tot * ab.get(i, 0) / ab_tot \
            + mp.mpf(repr(float(blank_umol))) * blank_fr[i]
    b = mp.mpf(repr(float(beta)))
    return {f"{i}/{reference}": float(n[i] / n[reference] * (mass(i) / mass(reference)) ** (-b))
            for i in isotopes(element) if i != reference}
