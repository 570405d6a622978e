"""Natural isotopic compositions, one convention per element, consistent with its normalising ratio.

Isotope dilution, blank subtraction, spike calibration and interference stripping all need the
composition of the *natural* element (the sample's unspiked isotopes, the blank, a gravimetric
standard, an interfering element). A composition that contradicts the normalising ratio used for
mass bias makes every step quietly wrong: e.g. the CIAAW fractions with only 146Nd/144Nd set to
0.7219 put 150Nd/144Nd 0.16 % off, and with a 150Nd spike every Nd concentration follows.

The convention here, for every element:

1. start from the CIAAW representative isotopic composition (amount fractions;
   ``reduction/data/isotopes.json``; CIAAW 2021, ciaaw.org);
2. fractionate it by the exponential law (Russell, Papanastassiou & Tombrello 1978, Geochim.
   Cosmochim. Acta 42, 1075-1090), ``R_i/j = R_i/j,CIAAW · (m_i/m_j)^β`` with AME2020 masses (Wang
   et al. 2021), with the one β that makes the element's normalising ratio exact
   (:data:`NORMALISING_RATIO`; values in ``reduction/data/normalising.json``); elements without a
   normalising ratio (Ce) keep the CIAAW composition;
3. replace the few ratios for which a measured convention is far more precise than the CIAAW
   representative fractions (:data:`FIXED_RATIOS`: 84Sr/86Sr, 176Yb/173Yb); every other ratio keeps
   its fractionated value.

This is one mass-dependent shift of a measured composition, so the result is the same whichever
isotope the ratios are taken to. A lab replaces it with its own measured composition by passing
ratios (:func:`natural_composition` ``ratios``); the workbook shows the rows on its Constants sheet
(keys ``nat.<element>.<i>/<reference>``) where they can be edited.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Dict, Mapping, Optional, Tuple

from . import constants
from .constants import isotope_mass, normalising_ratio
from .errors import InputError

__all__ = [
    "FIXED_RATIOS",
    "NORMALISING_RATIO",
    "REFERENCE_ISOTOPE",
    "NaturalComposition",
    "composition_rows",
    "natural_composition",
]

#: The normalising ratio each element's natural composition is fractionated to (exponential law).
NORMALISING_RATIO: Dict[str, Optional[str]] = {
    "Nd": "146Nd/144Nd", "Sm": "147Sm/152Sm", "Hf": "179Hf/177Hf", "Sr": "86Sr/88Sr",
    "Yb": "173Yb/171Yb", "Lu": "176Lu/175Lu", "Rb": "85Rb/87Rb", "Ce": None,
}

#: The isotope every natural composition is written to (ratios i/reference on the Constants sheet).
REFERENCE_ISOTOPE: Dict[str, str] = {
    "Nd": "144Nd", "Sm": "152Sm", "Hf": "177Hf", "Sr": "86Sr", "Yb": "171Yb", "Lu": "175Lu", "Rb": "85Rb",
    "Ce": "140Ce",
}

#: Ratios set to a measured convention after the fractionation: (value, source).
FIXED_RATIOS: Dict[str, Dict[str, Tuple[float, str]]] = {
    "Sr": {"84Sr/86Sr": (0.056584, "widely used value with 86Sr/88Sr = 0.1194 (recalled from memory; the CIAAW "
                                   "two-digit 84Sr fraction gives 0.0568)")},
    "Yb": {"176Yb/173Yb": (0.79381, "Chu et al. 2002, J. Anal. At. Spectrom. 17, 1567-1574 (measured with "
                                    "173Yb/171Yb = 1.132685; number recalled from memory)")},
}

_CIAAW = "CIAAW representative isotopic composition (CIAAW 2021, ciaaw.org)"


def _el(iso: str) -> str:
    return iso.lstrip("0123456789")


def _split(ratio: str) -> Tuple[str, str]:
    num, sep, den = str(ratio).partition("/")
    if not sep or not num.strip() or not den.strip():
        raise InputError("ratio", f"must be written 'num/den' like '150Nd/144Nd', got {ratio!r}")
    return num.strip(), den.strip()


@dataclass(frozen=True)
class NaturalComposition:
    """The natural composition of one element under a stated convention.

    Attributes
    ----------
    element : str
    isotopes : tuple of str
        Every isotope of the element in the reference data.
    fractions : tuple of float
        Amount fractions (sum 1), in the order of ``isotopes``.
    beta : float
        Exponential-law factor applied to the CIAAW composition (0 for a typed composition).
    normalising_ratio : str or None
        The ratio that is exact in this composition.
    rule : str
        How the composition was made, in words.
    source : str
        Where the numbers come from.
    """

    element: str
    isotopes: Tuple[str, ...]
    fractions: Tuple[float, ...]
    beta: float
    normalising_ratio: Optional[str]
    rule: str
    source: str

    def fraction(self, iso: str) -> float:
        """Amount fraction of ``iso``."""
        try:
            return self.fractions[self.isotopes.index(iso)]
        except ValueError:
            raise InputError("isotope", f"{iso!r} is not an isotope of {self.element}") from None

    def ratio(self, num: str, den: str) -> float:
        """Atom ratio num/den."""
        return self.fraction(num) / self.fraction(den)

    def ratios_to(self, reference: str) -> Dict[str, float]:
        """Every ratio ``i/reference`` (the reference's own ratio, 1, included)."""
        d = self.fraction(reference)
        return {f"{i}/{reference}": f / d for i, f in zip(self.isotopes, self.fractions)}

    @property
    def atomic_weight(self) -> float:
        """Atomic weight in g/mol from the fractions and AME2020 masses."""
        return sum(f * isotope_mass(i).value for i, f in zip(self.isotopes, self.fractions))


def _isotopes(element: str) -> Tuple[str, ...]:
    table = constants._load("isotopes")["isotopes"]  # noqa: SLF001 - same package, read-only
    isos = tuple(k for k in table if _el(k) == element)
    if not isos:
        raise InputError("element", f"no isotope data for element {element!r}")
    return isos


@lru_cache(maxsize=256)
def _default(element: str) -> NaturalComposition:
    isos = _isotopes(element)
    table = constants._load("isotopes")["isotopes"]  # noqa: SLF001
    frac = {i: float(table[i]["fraction"]) for i in isos}
    norm = NORMALISING_RATIO.get(element)
    beta = 0.0
    parts = [_CIAAW]
    if norm is not None:
        k, j = _split(norm)
        target = normalising_ratio(norm).value
        mk, mj = isotope_mass(k).value, isotope_mass(j).value
        # exponential law: R_true = R_CIAAW (m_k/m_j)^β  ->  β = ln(target / R_CIAAW) / ln(m_k/m_j)
        beta = math.log(target / (frac[k] / frac[j])) / math.log(mk / mj)
        m = {i: isotope_mass(i).value for i in isos}
        frac = {i: f * (m[i] / mj) ** beta for i, f in frac.items()}   # ratios to j fractionated
        frac[k] = target * frac[j]                                       # exact, not to the last bit only
        parts.append(f"fractionated by the exponential law (Russell et al. 1978, β = {beta:.6g}, AME2020 masses) "
                     f"to {norm} = {target:g} ({normalising_ratio(norm).source})")
    for ratio, (value, src) in FIXED_RATIOS.get(element, {}).items():
        num, den = _split(ratio)
        frac[num] = value * frac[den]
        parts.append(f"{ratio} = {value:g} ({src})")
    total = sum(frac.values())
    rule = ("CIAAW composition, exponential-law fractionated to the normalising ratio" if norm else
            "CIAAW composition (no normalising ratio)")
    if FIXED_RATIOS.get(element):
        rule += ", with " + ", ".join(FIXED_RATIOS[element]) + " set to a measured convention"
    return NaturalComposition(element, isos, tuple(frac[i] / total for i in isos), beta, norm, rule,
                              "; ".join(parts))


def natural_composition(element: str, ratios: Optional[Mapping[str, Any]] = None) -> NaturalComposition:
    """Natural composition of an element: the RatioDesk convention, or a lab's own typed ratios.

    Parameters
    ----------
    element : str
        ``"Nd"``, ``"Sm"``, ``"Hf"``, ``"Lu"``, ``"Sr"``, ``"Rb"``, ``"Yb"``, ``"Ce"``.
    ratios : mapping of str to float, optional
        A lab's composition as ratios ``i/reference`` (one common denominator; every other isotope of
        the element must be given, the denominator's own ratio may be omitted). Default: the
        convention of this module (CIAAW, exponential-law fractionated to the normalising ratio).

    Returns
    -------
    NaturalComposition

    Examples
    --------
    >>> round(natural_composition("Nd").ratio("146Nd", "144Nd"), 6)
    0.7219
    """
    el = str(element).strip()
    if not ratios:
        return _default(el)
    isos = _isotopes(el)
    vals: Dict[str, float] = {}
    dens = set()
    for k, v in ratios.items():
        num, den = _split(k)
        if _el(num) != el or _el(den) != el or num not in isos or den not in isos:
            raise InputError("ratios", f"{k!r} is not a ratio of two isotopes of {el}")
        try:
            x = float(v)
        except (TypeError, ValueError):
            raise InputError("ratios", f"{k!r}: must be a number, got {v!r}") from None
        if not (math.isfinite(x) and x > 0):
            raise InputError("ratios", f"{k!r}: must be > 0, got {x!r}")
        vals[num] = x
        dens.add(den)
    if len(dens) != 1:
        raise InputError("ratios", f"all ratios must have one denominator, got {', '.join(sorted(dens))}")
    den = dens.pop()
    vals.setdefault(den, 1.0)
    if not math.isclose(vals[den], 1.0, rel_tol=1e-12):
        raise InputError("ratios", f"{den}/{den} must be 1, got {vals[den]!r}")
    missing = [i for i in isos if i not in vals]
    if missing:
        raise InputError("ratios", f"the {el} composition needs every isotope: missing {', '.join(missing)}/{den}")
    total = sum(vals.values())
    norm = NORMALISING_RATIO.get(el)
    return NaturalComposition(el, isos, tuple(vals[i] / total for i in isos), 0.0, norm,
                              "typed by the lab", "lab composition (typed ratios to " + den + ")")


def composition_rows(element: str) -> Tuple[Tuple[str, str, float, str], ...]:
    """(key, quantity, value, source) rows of an element's default composition for the Constants sheet.

    Keys are ``nat.<element>.<i>/<reference>`` with the reference of :data:`REFERENCE_ISOTOPE`.
    """
    comp = _default(element)
    ref = REFERENCE_ISOTOPE[element]
    rows = []
    for ratio, v in comp.ratios_to(ref).items():
        if ratio.split("/")[0] == ref:
            continue
        rows.append((f"nat.{element}.{ratio}", f"Natural {element}: {ratio}", v, comp.source))
    return tuple(rows)
