"""RatioDesk engine: isotope-lab data reduction from raw ratios to isochron ages.

Pure functions of numpy arrays; results are frozen dataclasses. All uncertainties are 1σ
absolute unless a name says otherwise (``_2s``, ``_rel``).
"""
from __future__ import annotations

__version__ = "0.1.0"

from .constants import (
    ReferenceSet,
    RefValue,
    atomic_weight,
    isotope_fraction,
    isotope_mass,
    list_reference_sets,
    natural_ratio,
    normalising_ratio,
    reference_material,
    reference_set,
)
from .errors import ConvergenceError, InputError, RatioDeskError, UndefinedResultError
from .systems import SYSTEMS, IsotopeSystem, get_system

__all__ = [
    "ConvergenceError",
    "InputError",
    "IsotopeSystem",
    "RatioDeskError",
    "RefValue",
    "ReferenceSet",
    "SYSTEMS",
    "UndefinedResultError",
    "__version__",
    "atomic_weight",
    "get_system",
    "isotope_fraction",
    "isotope_mass",
    "list_reference_sets",
    "natural_ratio",
    "normalising_ratio",
    "reference_material",
    "reference_set",
]
