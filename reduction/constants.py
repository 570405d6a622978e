"""Reference values with provenance: decay constants, reservoirs, isotopes, normalising ratios.

Every value is a :class:`RefValue` carrying value, 1σ uncertainty, unit and source. The data
live in ``reduction/data/*.json``; this module loads them once and selects a named
:class:`ReferenceSet` (``conventional`` by default), optionally with single values overridden
by the lab.
"""
from __future__ import annotations

import json
from dataclasses import dataclass, field, replace
from functools import lru_cache
from pathlib import Path
from typing import Any, Dict, List, Mapping, Optional, Tuple, Union

from .errors import InputError

__all__ = [
    "RefValue",
    "ReferenceSet",
    "atomic_weight",
    "decay_constant_entry",
    "isotope_fraction",
    "isotope_mass",
    "list_reference_sets",
    "natural_ratio",
    "normalising_ratio",
    "reference_material",
    "reference_set",
]

_DATA = Path(__file__).with_name("data")


@dataclass(frozen=True)
class RefValue:
    """A published value with its 1σ absolute uncertainty, unit and source.

    ``note`` says how the published uncertainty level was converted to 1σ; ``status`` is
    ``"M"`` (or contains it) when the value was recalled from memory and not checked against the
    original, ``"S"`` when it was confirmed, ``"C"`` when computed from published data,
    ``"override"`` when a lab replaced it.
    """

    name: str
    value: float
    sigma_1s: float
    unit: str
    source: str
    note: str = ""
    status: str = ""

    @property
    def rel_1s(self) -> float:
        """Relative 1σ uncertainty (sigma_1s / value)."""
        return self.sigma_1s / self.value if self.value else float("inf")


@lru_cache(maxsize=256)
def _load(name: str) -> Dict[str, Any]:
    with open(_DATA / f"{name}.json", encoding="utf-8") as fh:
        return json.load(fh)


def decay_constant_entry(entry: str) -> RefValue:
    """Return one decay-constant entry by its id (e.g. ``"Sm147_LM1978"``)."""
    data = _load("decay_constants")
    if entry not in data or entry.startswith("_"):
        known = ", ".join(k for k in data if not k.startswith("_"))
        raise InputError("decay constant", f"unknown entry {entry!r}; known: {known}")
    d = data[entry]
    return RefValue(entry, d["value"], d["sigma_1s"], d["unit"], d["source"], d.get("level_note", ""),
                    d.get("status", ""))


def _reservoir_values(entry: str) -> Dict[str, RefValue]:
    data = _load("reservoirs")
    if entry not in data or entry.startswith("_"):
        raise InputError("reservoir", f"unknown entry {entry!r}")
    d = data[entry]
    return {ratio: RefValue(f"{entry} {ratio}", v["value"], v["sigma_1s"], "mol/mol", d["source"],
                            v.get("level_note", ""), v.get("status", ""))
            for ratio, v in d["values"].items()}


Override = Union[float, Tuple[float, float]]


@dataclass(frozen=True)
class ReferenceSet:
    """A consistent choice of decay constants and reservoirs.

    Attributes
    ----------
    name : str
        Set name (``"conventional"``, ``"iupac"``, ``"jw1980"``), with ``+overrides`` appended
        when single values were replaced.
    decay : mapping of str to RefValue
        Decay constants by key ``"Sm147"``, ``"Lu176"``, ``"Rb87"`` (1/a).
    reservoirs : mapping of str to mapping of str to RefValue
        ``reservoirs["CHUR"]["143Nd/144Nd"]`` etc.; kinds ``"CHUR"``, ``"DM"``, ``"UR"``.
    description : str
        What the set contains and why.
    """

    name: str
    decay: Mapping[str, RefValue]
    reservoirs: Mapping[str, Mapping[str, RefValue]]
    description: str = ""
    overrides: Tuple[str, ...] = field(default=())

    def decay_constant(self, key: str) -> RefValue:
        """Decay constant by key (``"Sm147"``, ``"Lu176"``, ``"Rb87"``)."""
        try:
            return self.decay[key]
        except KeyError:
            raise InputError("decay_key", f"unknown decay constant {key!r}; known: {', '.join(self.decay)}") from None

    def reservoir(self, kind: str, ratio: str) -> RefValue:
        """Present-day reservoir ratio, e.g. ``reservoir("CHUR", "143Nd/144Nd")``."""
        k = kind.upper()
        if k not in self.reservoirs:
            raise InputError("reservoir", f"unknown reservoir {kind!r}; known: {', '.join(self.reservoirs)}")
        try:
            return self.reservoirs[k][ratio]
        except KeyError:
            raise InputError("reservoir", f"{k} of set {self.name!r} has no {ratio}") from None

    def with_overrides(self, overrides: Mapping[str, Override]) -> ReferenceSet:
        """Return a copy with single values replaced.

        Keys are ``"decay.Sm147"`` or ``"CHUR.143Nd/144Nd"`` (also ``DM.``, ``UR.``); values are a
        number (σ kept) or ``(value, sigma_1s)``.
        """
        decay = dict(self.decay)
        res = {k: dict(v) for k, v in self.reservoirs.items()}
        for key, val in overrides.items():
            head, _, tail = key.partition(".")
            if head.lower() == "decay":
                old = self.decay_constant(tail)
                target, slot = decay, tail
            else:
                old = self.reservoir(head, tail)
                target, slot = res[head.upper()], tail
            if isinstance(val, (tuple, list)):
                v, s = float(val[0]), float(val[1])
            else:
                v, s = float(val), old.sigma_1s
            if not v > 0 or s < 0:
                raise InputError(key, f"override must have value > 0 and sigma >= 0, got {val!r}")
            target[slot] = replace(old, value=v, sigma_1s=s, source=f"lab override (was {old.source})",
                                   status="override")
        return ReferenceSet(self.name + "+overrides", decay, res, self.description,
                            self.overrides + tuple(overrides))


def list_reference_sets() -> List[str]:
    """Names of the available reference sets; the default comes first."""
    s = _load("sets")
    return [s["default"]] + [n for n in s["sets"] if n != s["default"]]


def reference_set(name: Optional[str] = None, overrides: Optional[Mapping[str, Override]] = None) -> ReferenceSet:
    """Load a named reference set (default ``"conventional"``), with optional lab overrides.

    Examples
    --------
    >>> rs = reference_set()
    >>> rs.decay_constant("Sm147").value
    6.54e-12
    >>> reference_set("iupac", {"decay.Lu176": (1.865e-11, 0.0075e-11)}).decay_constant("Lu176").value
    1.865e-11
    """
    base = _reference_set_cached(name or _load("sets")["default"])
    return base.with_overrides(overrides) if overrides else base


@lru_cache(maxsize=256)
def _reference_set_cached(name: str) -> ReferenceSet:
    sets = _load("sets")["sets"]
    if name not in sets:
        raise InputError("reference_set", f"unknown set {name!r}; known: {', '.join(sets)}")
    st = sets[name]
    decay = {k: decay_constant_entry(e) for k, e in st["decay"].items()}
    res: Dict[str, Dict[str, RefValue]] = {}
    for kind, entries in st["reservoirs"].items():
        merged: Dict[str, RefValue] = {}
        for e in entries:
            merged.update(_reservoir_values(e))
        res[kind] = merged
    return ReferenceSet(name, decay, res, st.get("description", ""))


def _isotope(iso: str) -> Dict[str, float]:
    table = _load("isotopes")["isotopes"]
    if iso not in table:
        raise InputError("isotope", f"unknown isotope {iso!r} (write it as e.g. '144Nd')")
    return table[iso]


_AME = "AME2020: Wang et al. 2021, Chinese Phys. C 45, 030003"
_CIAAW = "CIAAW representative isotopic composition (CIAAW 2021)"


def isotope_mass(iso: str) -> RefValue:
    """Atomic mass of an isotope in u (AME2020, Wang et al. 2021)."""
    d = _isotope(iso)
    return RefValue(iso, d["mass_u"], d["mass_sigma_1s"], "u", _AME, "standard uncertainty", "L")


def isotope_fraction(iso: str) -> RefValue:
    """Natural amount fraction of an isotope (CIAAW); σ is half the expanded uncertainty."""
    d = _isotope(iso)
    return RefValue(iso, d["fraction"], d["fraction_sigma_1s"], "mol/mol", _CIAAW,
                    "CIAAW expanded uncertainty halved (k = 2 recalled, not confirmed)", "S/L")


def natural_ratio(ratio: str) -> RefValue:
    """Natural atom ratio such as ``"147Sm/144Sm"`` under RatioDesk's composition convention.

    The value is that of :func:`reduction.composition.natural_composition` (CIAAW representative
    composition, exponential-law fractionated to the element's normalising ratio); σ is from the
    CIAAW fractions' uncertainties, treated as uncorrelated.
    """
    from .composition import natural_composition

    num, _, den = ratio.partition("/")
    a, b = isotope_fraction(num), isotope_fraction(den)
    el = num.strip().lstrip("0123456789")
    if el != den.strip().lstrip("0123456789"):
        raise InputError("ratio", f"{ratio!r} is not a ratio of two isotopes of one element")
    comp = natural_composition(el)
    v = comp.ratio(num.strip(), den.strip())
    s = v * ((a.sigma_1s / a.value) ** 2 + (b.sigma_1s / b.value) ** 2) ** 0.5
    return RefValue(ratio, v, s, "mol/mol", comp.source, "σ from the CIAAW fractions, treated as uncorrelated",
                    "C")


def atomic_weight(element: str) -> RefValue:
    """CIAAW 2021 standard atomic weight of a natural element in g/mol."""
    table = _load("isotopes")["standard_atomic_weight"]
    if element not in table:
        raise InputError("element", f"unknown element {element!r}; known: {', '.join(table)}")
    d = table[element]
    return RefValue(element, d["value"], d["uncertainty"], "g/mol",
                    "CIAAW 2021 standard atomic weights (Prohaska et al. 2022, Pure Appl. Chem. 94, 573-600)",
                    "published uncertainty taken as is", "S/L")


def normalising_ratio(ratio: str) -> RefValue:
    """Conventional ratio for internal normalisation or interference stripping (σ = 0 by convention)."""
    data = _load("normalising")
    if ratio not in data or ratio.startswith("_"):
        known = ", ".join(k for k in data if not k.startswith("_"))
        raise InputError("normalising ratio", f"unknown ratio {ratio!r}; known: {known}")
    d = data[ratio]
    return RefValue(ratio, d["value"], d["sigma_1s"], d["unit"], d["source"], "convention", d.get("status", ""))


def reference_material(material: str, ratio: str) -> RefValue:
    """Accepted ratio of a reference material, e.g. ``reference_material("JNdi-1", "143Nd/144Nd")``."""
    data = _load("reference_materials")
    if material not in data or material.startswith("_"):
        known = ", ".join(k for k in data if not k.startswith("_"))
        raise InputError("reference material", f"unknown material {material!r}; known: {known}")
    if ratio not in data[material]:
        raise InputError("reference material", f"{material} has no accepted {ratio}")
    d = data[material][ratio]
    return RefValue(f"{material} {ratio}", d["value"], d["sigma_1s"], d["unit"], d["source"],
                    d.get("level_note", ""), d.get("status", ""))
