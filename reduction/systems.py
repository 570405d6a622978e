"""The three isotope systems, defined once.

Each :class:`IsotopeSystem` names the parent, daughter and reference (stable) isotope, the
decay-constant key in a :class:`reduction.constants.ReferenceSet`, and the conventional
normalising ratio of the daughter element.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Dict

from .errors import InputError

__all__ = ["IsotopeSystem", "SYSTEMS", "get_system"]


@dataclass(frozen=True)
class IsotopeSystem:
    """One radiogenic isotope system (parent → daughter, normalised to a stable reference isotope)."""

    key: str
    label: str
    parent: str
    daughter: str
    reference: str
    decay_key: str
    parent_element: str
    daughter_element: str
    normalising_ratio: str
    epsilon_label: str

    @property
    def parent_ratio(self) -> str:
        """x-axis ratio of the isochron, e.g. ``"147Sm/144Nd"``."""
        return f"{self.parent}/{self.reference}"

    @property
    def daughter_ratio(self) -> str:
        """y-axis ratio of the isochron, e.g. ``"143Nd/144Nd"``."""
        return f"{self.daughter}/{self.reference}"


SYSTEMS: Dict[str, IsotopeSystem] = {
    "sm-nd": IsotopeSystem("sm-nd", "Sm-Nd", "147Sm", "143Nd", "144Nd", "Sm147", "Sm", "Nd", "146Nd/144Nd", "εNd"),
    "lu-hf": IsotopeSystem("lu-hf", "Lu-Hf", "176Lu", "176Hf", "177Hf", "Lu176", "Lu", "Hf", "179Hf/177Hf", "εHf"),
    "rb-sr": IsotopeSystem("rb-sr", "Rb-Sr", "87Rb", "87Sr", "86Sr", "Rb87", "Rb", "Sr", "86Sr/88Sr", "εSr"),
}


def get_system(key: str | IsotopeSystem) -> IsotopeSystem:
    """Look up a system by ``"sm-nd"``, ``"Sm-Nd"``, ``"smnd"`` or ``"Sm_Nd"`` (case-insensitive)."""
    if isinstance(key, IsotopeSystem):
        return key
    k = str(key).strip().lower().replace("_", "-").replace(" ", "")
    if "-" not in k and len(k) == 4:
        k = k[:2] + "-" + k[2:]
    if k not in SYSTEMS:
        raise InputError("system", f"unknown isotope system {key!r}; use one of sm-nd, lu-hf, rb-sr")
    return SYSTEMS[k]
