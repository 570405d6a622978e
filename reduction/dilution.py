"""Isotope dilution with a single (or mixed) spike, the iterative spike-stripping normalisation,
and spike calibration by reverse isotope dilution.

The ID equation (atom-fraction form of Smith 2000, "Isotope dilution mass spectrometry", in Barshick,
Duckworth & Smith (eds.), *Inorganic Mass Spectrometry*, Marcel Dekker, ch. 5; equivalent to the
ratio form in Faure & Mensing 2005, *Isotopes: Principles and Applications*):

    R_mix = (R_s + a_k,t·u) / (1 + a_r,t·u),   u = N_t / n_r,s

where ratios R are k/r (k = spike isotope, r = reference isotope of the sample), a are the spike's atom
fractions, N_t the moles of spike element and n_r,s the moles of the reference isotope in the sample.
Solving for u,

    u = (R_mix − R_s) / (a_k,t − R_mix·a_r,t),      n_r,s = N_t / u,   N_t = c_k,t·W_t / a_k,t

(c_k,t = spike-isotope concentration of the spike solution in µmol/g, W_t the spike mass in g).
Every other isotope i of the sample then follows from R_s,i = R_mix,i(1 + a_r,t·u) − a_i,t·u.

Error magnification (how a relative error in R_mix grows in n_r,s; e.g. Webster 1960, and common
practice) is M = R_mix·|R_s − R_t| / (|R_mix − R_s|·|R_t − R_mix|), smallest (M_min =
(√R_t + √R_s)/|√R_t − √R_s|) at R_mix = √(R_s·R_t).
"""
from __future__ import annotations

import functools
import json
import math
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Dict, Mapping, Optional, Sequence, Tuple

import numpy as np

from . import constants
from ._validate import as_count, as_name, as_scalar, broadcast_shape, finite_result
from .composition import NaturalComposition, natural_composition
from .constants import isotope_mass, normalising_ratio
from .errors import ConvergenceError, InputError, UndefinedResultError
from .massbias import _checked, _factor, _gain, _law
from .massbias import _out as _bias_out
from .massbias import bias_factor as _bias_factor_of

__all__ = [
    "Dilution",
    "Spike",
    "SpikeCalibration",
    "calibrate_spike",
    "element_isotopes",
    "forward_mixture",
    "id_amount",
    "id_concentration",
    "isotope_dilution",
    "load_demo_spikes",
    "magnification",
    "magnification_min",
    "make_spike",
    "mixture_fractions",
    "sample_composition",
]

#: Spikes whose best possible mixture would still magnify ratio errors more than this are refused.
SINGULAR_MAGNIFICATION = 100.0
#: A mixture is flagged as poor when its magnification exceeds this multiple of the optimum.
POOR_MIX_FACTOR = 2.0
#: Upper bound of :func:`isotope_dilution`'s ``max_iter`` (spike stripping converges in a handful of passes).
MAX_ITER_LIMIT = 10_000
#: Floating-point state of the arithmetic here: overflow and the like are not warned about but caught
#: by the finiteness check of each result.
_QUIET = dict(over="ignore", invalid="ignore", divide="ignore", under="ignore")


def _split(ratio: str, name: str = "ratio") -> Tuple[str, str]:
    num, sep, den = str(ratio).partition("/")
    if not sep or not num.strip() or not den.strip():
        raise InputError(name, f"must be written 'num/den' like '150Nd/144Nd', got {ratio!r}")
    return num.strip(), den.strip()


def _el(iso: str) -> str:
    return iso.lstrip("0123456789")


def element_isotopes(element: str) -> Tuple[str, ...]:
    """Isotopes of an element listed in the reference data (``reduction/data/isotopes.json``)."""
    isos = _isotopes_by_element().get(element) if isinstance(element, str) else None
    if not isos:
        raise InputError("element", f"no isotope data for element {element!r}")
    return isos


@functools.lru_cache(maxsize=1)
def _isotopes_by_element() -> Dict[str, Tuple[str, ...]]:
    """Element -> its isotopes in the table's order (the table is read once per process)."""
    # the isotope table is the single source; constants exposes entries one at a time only
    table = constants._load("isotopes")["isotopes"]  # noqa: SLF001 - same package, read-only
    out: Dict[str, Tuple[str, ...]] = {}
    for k in table:
        out[_el(k)] = out.get(_el(k), ()) + (k,)
    return out


def sample_composition(element: str, reference_isotope: str,
                       overrides: Optional[Mapping[str, Any]] = None,
                       natural: Optional[NaturalComposition] = None) -> Dict[str, Any]:
    """Ratios i/reference of every isotope of a natural element, with optional overrides.

    The natural composition is :func:`reduction.composition.natural_composition` (CIAAW,
    exponential-law fractionated to the element's normalising ratio) unless ``natural`` is given.

    Parameters
    ----------
    element : str
        ``"Nd"``, ``"Sm"``, ``"Hf"``, ``"Lu"``, ``"Sr"``, ``"Rb"``, ...
    reference_isotope : str
        Denominator, e.g. ``"144Nd"``.
    overrides : mapping of str to float or array, optional
        Ratio name -> value, e.g. ``{"143Nd/144Nd": 0.5121, "146Nd/144Nd": 0.7219}``.
    natural : NaturalComposition, optional
        The element's natural composition (e.g. a lab's own, from the workbook).
    """
    isos = element_isotopes(element)
    if reference_isotope not in isos:
        raise InputError("reference_isotope", f"{reference_isotope!r} is not an isotope of {element}")
    nat = _natural(element, natural)
    comp: Dict[str, Any] = dict(nat.ratios_to(reference_isotope))
    if overrides is not None and not isinstance(overrides, Mapping):
        raise InputError("sample_ratios", f"must be a mapping of ratio name to value, got {type(overrides).__name__}")
    for k, v in (overrides or {}).items():
        num, den = _split(k, "sample_ratios")
        if den != reference_isotope or f"{num}/{den}" not in comp:
            raise InputError("sample_ratios", f"{k!r} is not a ratio of {element} to {reference_isotope}")
        a = _pos_array(f"sample_ratios[{k!r}]", v)
        comp[f"{num}/{den}"] = _out(a)
    return comp


def _natural(element: str, natural: Optional[NaturalComposition]) -> NaturalComposition:
    if natural is None:
        return natural_composition(element)
    if not isinstance(natural, NaturalComposition) or natural.element != element:
        raise InputError("natural", f"must be the NaturalComposition of {element} "
                         "(see reduction.composition.natural_composition)")
    return natural


def _pos_array(name: str, x: Any) -> np.ndarray:
    return np.array(_checked(name, x, "positive"))


def _out(a: Any) -> Any:
    """A float (or complex, on the complex-step path of the chain's Jacobian) for 0-d, else the array."""
    a = np.asarray(a)
    return _bias_out(a if a.dtype.kind == "c" else a.astype(float, copy=False))


# --------------------------------------------------------------------------------------------- spikes
@dataclass(frozen=True)
class Spike:
    """Isotopic composition and concentration of a spike (tracer) solution, for one element.

    A mixed spike (e.g. 149Sm-150Nd or 176Lu-180Hf) is two ``Spike`` records with the same label:
    one per element, weighed once.

    Attributes
    ----------
    label : str
        Name of the spike solution.
    element : str
        Element of this record.
    isotopes, abundances : tuple
        Isotopes and their atom fractions (sum 1).
    spike_isotope : str
        The enriched isotope whose concentration is given.
    concentration_umol_g : float
        Concentration of ``spike_isotope`` in µmol per g of spike solution.
    concentration_sigma_1s : float
        Its 1σ absolute uncertainty (from the calibration; a systematic error of every analysis).
    calibrated : str
        Calibration date or reference.
    """

    label: str
    element: str
    isotopes: Tuple[str, ...]
    abundances: Tuple[float, ...]
    spike_isotope: str
    concentration_umol_g: float
    concentration_sigma_1s: float = 0.0
    calibrated: str = ""

    def abundance(self, iso: str) -> float:
        """Atom fraction of ``iso`` in the spike (0 if not listed)."""
        return dict(zip(self.isotopes, self.abundances)).get(iso, 0.0)

    def ratio(self, num: str, den: str) -> float:
        """Atom ratio num/den of the spike."""
        d = self.abundance(den)
        if d <= 0:
            raise UndefinedResultError(f"spike {self.label!r} contains no {den}: ratio {num}/{den} undefined")
        return self.abundance(num) / d

    @property
    def element_umol_g(self) -> float:
        """Total element concentration of the spike solution in µmol/g."""
        return self.concentration_umol_g / self.abundance(self.spike_isotope)


def make_spike(element: str, isotopes: Sequence[str], abundances: Sequence[float], spike_isotope: str,
               concentration_umol_g: float, concentration_sigma_1s: float = 0.0, label: str = "",
               calibrated: str = "") -> Spike:
    """Build a :class:`Spike` from plain numbers.

    Parameters
    ----------
    element : str
        Element symbol, e.g. ``"Nd"``.
    isotopes : sequence of str
        Isotopes of that element present in the spike, e.g. ``["144Nd", "146Nd", "150Nd"]``.
    abundances : sequence of float
        Their relative amounts (atom fractions or any proportional numbers; normalised here).
    spike_isotope : str
        Enriched isotope (must be listed, abundance > 0).
    concentration_umol_g : float
        µmol of ``spike_isotope`` per g of spike solution (> 0).
    concentration_sigma_1s : float, default 0
        1σ absolute uncertainty of that concentration.
    """
    if isinstance(isotopes, str) or not isinstance(isotopes, (Sequence, np.ndarray)):
        raise InputError("isotopes", f"must be a list of isotope names, got {type(isotopes).__name__}")
    isos = tuple(str(i).strip() for i in isotopes)
    try:
        ab = np.array(abundances, dtype=float).ravel()
    except (TypeError, ValueError, OverflowError):
        raise InputError("abundances", "could not be read as numbers") from None
    if len(isos) != ab.size or not isos:
        raise InputError("abundances", f"has {ab.size} values but isotopes has {len(isos)}")
    if not np.all(np.isfinite(ab)) or np.any(ab < 0) or not np.any(ab > 0):
        raise InputError("abundances", "must be finite, >= 0 and not all zero")
    known = set(element_isotopes(element))
    for i in isos:
        if i not in known:
            raise InputError("isotopes", f"{i!r} is not an isotope of {element}")
    if len(set(isos)) != len(isos):
        raise InputError("isotopes", "lists an isotope twice")
    if spike_isotope not in isos or ab[isos.index(spike_isotope)] <= 0:
        raise InputError("spike_isotope", f"{spike_isotope!r} must be one of the isotopes with abundance > 0")
    c = as_scalar("concentration_umol_g", concentration_umol_g)
    s = as_scalar("concentration_sigma_1s", concentration_sigma_1s)
    if not c > 0:
        raise InputError("concentration_umol_g", f"must be > 0, got {c!r}")
    if not s >= 0:
        raise InputError("concentration_sigma_1s", f"must be >= 0, got {s!r}")
    with np.errstate(under="ignore"):
        ab = ab / ab.max()     # first to the largest, so the sum cannot overflow
        ab = ab / ab.sum()
    if ab[isos.index(spike_isotope)] <= 0:
        raise InputError("spike_isotope", f"{spike_isotope!r}: its abundance is too small against the others "
                         "to be represented")
    return Spike(label or f"{spike_isotope} spike", element, isos, tuple(float(a) for a in ab), spike_isotope,
                 c, s, calibrated)


def load_demo_spikes() -> Dict[str, Spike]:
    """Demo spikes from ``reduction/data/spikes.json`` — INVENTED compositions, for examples and tests only."""
    with open(Path(__file__).with_name("data") / "spikes.json", encoding="utf-8") as fh:
        data = json.load(fh)
    out: Dict[str, Spike] = {}
    for key, d in data.items():
        if key.startswith("_"):
            continue
        out[key] = make_spike(d["element"], list(d["abundances"]), list(d["abundances"].values()),
                              d["spike_isotope"], d["concentration_umol_g"], d["concentration_sigma_1s"],
                              d["label"], d.get("calibrated", ""))
    return out


# ------------------------------------------------------------------------------------ ID equation
def _ratio_or_inf(name: str, x: Any) -> np.ndarray:
    """A ratio array > 0 that may be +inf (a spike free of the reference isotope); NaN and text refused."""
    try:
        a = np.asarray(x, dtype=float)
    except (TypeError, ValueError, OverflowError):
        raise InputError(name, "could not be read as numbers") from None
    bad = np.isnan(a) | ~(a > 0)
    if np.any(bad):
        i = int(np.flatnonzero(bad.ravel())[0])
        v = float(a.ravel()[i])
        problem = f"must be a number > 0 (or inf), got {v!r}"
        raise InputError(name, problem) if a.ndim == 0 else InputError(name, problem, row=i + 1)
    return a


def _magnification(rm: Any, rs: Any, rt: Any) -> np.ndarray:
    with np.errstate(**_QUIET):
        inv_t = np.where(np.isinf(rt), 0.0, 1.0 / (rt - rm))
        return np.asarray(rm * np.abs(inv_t - 1.0 / (rs - rm)))


def magnification(mix_ratio: Any, sample_ratio: Any, spike_ratio: Any) -> Any:
    """Error magnification |d ln n_sample / d ln R_mix| of a single-spike mixture (ratios k/r).

    M = R_mix·|1/(R_t − R_mix) − 1/(R_s − R_mix)| = R_mix·|R_s − R_t| / (|R_mix − R_s|·|R_t − R_mix|)
    (Webster 1960, and common practice; see the module docstring). ``spike_ratio`` may be ``inf``
    (spike free of the reference isotope); then M = R_mix/|R_mix − R_s|. Ratios must be > 0; a mixture
    ratio equal to the sample's or the spike's makes M infinite and raises
    :class:`~reduction.errors.UndefinedResultError`.
    """
    rm = _pos_array("mix_ratio", mix_ratio)
    rs = _pos_array("sample_ratio", sample_ratio)
    rt = _ratio_or_inf("spike_ratio", spike_ratio)
    broadcast_shape(mix_ratio=rm, sample_ratio=rs, spike_ratio=rt)
    if np.any(rm == rs):
        raise UndefinedResultError("mix_ratio equals sample_ratio: the mixture holds no spike, so the error "
                                   "magnification is infinite")
    if np.any(rm == rt):
        raise UndefinedResultError("mix_ratio equals spike_ratio: the mixture holds no sample, so the error "
                                   "magnification is infinite")
    m = _magnification(rm, rs, rt)
    finite_result("error magnification", magnification=m)
    return _out(m)


def _magnification_min(sample_ratio: Any, spike_ratio: Any) -> np.ndarray:
    with np.errstate(**_QUIET):
        rs = np.sqrt(np.real(np.asarray(sample_ratio)).astype(float))
        rt = np.real(np.asarray(spike_ratio)).astype(float)
        q = np.where(np.isinf(rt), 0.0, rs / np.sqrt(np.where(np.isinf(rt), 1.0, rt)))
        return np.asarray((1 + q) / np.abs(1 - q))


def magnification_min(sample_ratio: Any, spike_ratio: Any) -> Any:
    """Smallest possible magnification for a sample/spike pair: (√R_t + √R_s)/|√R_t − √R_s| (1 if R_t = ∞).

    Reached at R_mix = √(R_s·R_t) (module docstring; Webster 1960 and common practice). Equal sample
    and spike ratios (no isotope dilution possible) raise :class:`~reduction.errors.UndefinedResultError`.
    """
    rs = _pos_array("sample_ratio", sample_ratio)
    rt = _ratio_or_inf("spike_ratio", spike_ratio)
    broadcast_shape(sample_ratio=rs, spike_ratio=rt)
    m = _magnification_min(rs, rt)
    if not np.all(np.isfinite(m)):
        raise UndefinedResultError("sample_ratio and spike_ratio are equal (or nearly): the spike does not change "
                                   "the sample's ratio, so isotope dilution is impossible")
    return _out(m)


def _spike_u(rs_k: Any, rm_k: Any, a_k: float, a_r: float) -> np.ndarray:
    """u = N_spike / n_r,sample from the spike-isotope ratio of the mixture (Smith 2000)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        u = np.asarray((rm_k - rs_k) / (a_k - rm_k * a_r))
    if u.dtype.kind != "c":   # complex on the complex-step path (checked on the real part)
        u = u.astype(float)
    ok = np.isfinite(u) & (np.real(u) > 0)
    if not np.all(ok):
        i = int(np.flatnonzero(~ok.ravel())[0])
        raise UndefinedResultError(
            f"mix ratio: the mixture's spike ratio {float(np.ravel(np.real(rm_k) * np.ones(u.shape))[i]):.6g} "
            f"(element {i + 1}) does not lie strictly between the sample's and the spike's: "
            "no positive amount solves the ID equation")
    return u


def id_amount(mix_ratio: Any, sample_ratio: Any, spike_ratio: Any, spike_ref_umol: Any) -> Any:
    """Moles of the reference isotope in the sample, ratio form of the ID equation (ratios k/r).

    n_r,sample = n_r,spike · (R_spike − R_mix) / (R_mix − R_sample)  (Faure & Mensing 2005 form).

    Parameters
    ----------
    mix_ratio, sample_ratio, spike_ratio : array_like
        k/r ratios of the (bias-corrected) mixture, the sample and the spike.
    spike_ref_umol : array_like
        µmol of the reference isotope r added with the spike.
    """
    rm = _pos_array("mix_ratio", mix_ratio)
    rs = _pos_array("sample_ratio", sample_ratio)
    rt = _pos_array("spike_ratio", spike_ratio)
    n = _pos_array("spike_ref_umol", spike_ref_umol)
    broadcast_shape(mix_ratio=rm, sample_ratio=rs, spike_ratio=rt, spike_ref_umol=n)
    with np.errstate(**_QUIET):
        x = n * (rt - rm) / (rm - rs)
    if np.any(~np.isfinite(x)) or np.any(x <= 0):
        raise UndefinedResultError("mix_ratio: not strictly between sample_ratio and spike_ratio")
    return _out(x)


@dataclass(frozen=True)
class Dilution:
    """Result of one isotope-dilution reduction (fields are floats, or arrays over analyses).

    Attributes
    ----------
    element, reference_isotope : str
    conc_umol_g, conc_ug_g : float or ndarray
        Element concentration of the sample (µmol/g, µg/g), before blank correction.
    ref_umol_g : float or ndarray
        µmol of the reference isotope per g of sample.
    sample_ratios : dict of str to float or ndarray
        The sample's true (unspiked, bias-corrected) ratios i/reference of every isotope.
    atomic_weight : float or ndarray
        Atomic weight of the sample's element from its composition and AME2020 masses (g/mol).
    bias_factor : float or ndarray
        Mass-bias factor used (found by iteration with internal normalisation).
    law : str
    spike_sample_ratio : float or ndarray
        u = moles of spike element / moles of the sample's reference isotope.
    mix_ratio_corrected : float or ndarray
        Bias-corrected spike-isotope ratio k/r of the mixture.
    magnification, magnification_min : float or ndarray
        Error magnification of this mixture and the best attainable with this spike.
    poor_mix : bool or ndarray of bool
        ``magnification > 2 · magnification_min`` (rule of this program).
    iterations : int
        Spike-stripping iterations (1 with an external bias factor).
    convergence_rule : str
    """

    element: str
    reference_isotope: str
    conc_umol_g: Any
    conc_ug_g: Any
    ref_umol_g: Any
    sample_ratios: Dict[str, Any]
    atomic_weight: Any
    bias_factor: Any
    law: str
    spike_sample_ratio: Any
    mix_ratio_corrected: Any
    magnification: Any
    magnification_min: Any
    poor_mix: Any
    iterations: int
    convergence_rule: str


def isotope_dilution(measured: Mapping[str, Any], spike: Spike, sample_mass_g: Any, spike_mass_g: Any, *,
                     reference_isotope: Optional[str] = None, norm_ratio: Optional[str] = None,
                     norm_true: Optional[float] = None, bias_factor: Any = None, law: str = "exponential",
                     sample_ratios: Optional[Mapping[str, Any]] = None, tol: float = 1e-13,
                     max_iter: int = 100, natural: Optional[NaturalComposition] = None) -> Dilution:
    """Concentration and unspiked composition of a sample from its spiked mixture.

    Parameters
    ----------
    measured : mapping of str to array_like
        Mixture ratios to ``reference_isotope`` as measured (interference-stripped, not bias-corrected),
        e.g. ``{"143Nd/144Nd": .., "146Nd/144Nd": .., "150Nd/144Nd": ..}``. Must contain the spike
        isotope's ratio. Values are floats or arrays over analyses (broadcast together).
    spike : Spike
        The spike's record for this element.
    sample_mass_g, spike_mass_g : array_like
        Weighed masses of sample and spike solution (g, > 0).
    reference_isotope : str, optional
        Denominator of every ratio; default: that of the first ratio in ``measured``.
    norm_ratio : str, optional
        Internal normalisation: name of a ratio with a known true value (e.g. ``"146Nd/144Nd"``; true
        value from ``normalising.json`` or ``norm_true``). It, or its inverse (``"86Sr/88Sr"`` with reference
        86Sr is used as 88Sr/86Sr), must be in ``measured``.
    bias_factor : array_like, optional
        External mass-bias factor (e.g. from a standard); excludes ``norm_ratio``.
    law : str
        Mass-bias law (:mod:`reduction.massbias`).
    sample_ratios : mapping, optional
        Known true sample ratios (e.g. 143Nd/144Nd from a separate unspiked aliquot); these are used and
        not solved. Isotopes neither measured nor given are taken as natural (``natural``).
    tol : float, default 1e-13
        Convergence: stop when |R_norm,sample / R_norm,true − 1| < tol for every analysis.
    max_iter : int, default 100
        Spike-stripping passes allowed, a whole number from 1 to :data:`MAX_ITER_LIMIT` (10 000).
    natural : NaturalComposition, optional
        Natural composition of the element (default: :func:`reduction.composition.natural_composition`).

    Returns
    -------
    Dilution

    Raises
    ------
    InputError
        Masses or ratios <= 0, spike ratio missing, spike composition too close to the sample's (best
        attainable magnification > 100: the ID equation is singular).
    UndefinedResultError
        Mixture ratio outside the sample–spike interval, or a result that double precision cannot hold
        (e.g. a ratio typed as 1e308): never an inf or NaN concentration.
    ConvergenceError
        The spike-stripping iteration did not reach ``tol`` in ``max_iter`` passes.

    Notes
    -----
    Iterative solution with internal normalisation (common practice for single-spike TIMS runs; see
    Smith 2000): (1) β from the mixture's normalising ratio as if unspiked; (2) correct the mixture with
    β, solve the ID equation for u from the spike-isotope ratio (Smith 2000); (3) subtract the spike from
    the corrected normalising ratio; (4) update β by the bias that would bring that spike-free ratio to
    its true value; repeat (2)-(4) until the spike-free normalising ratio matches to ``tol``.
    """
    if not isinstance(spike, Spike):
        raise InputError("spike", "must be a Spike (see make_spike)")
    tol = as_scalar("tol", tol)
    if not 0 < tol < 1e-3:
        raise InputError("tol", f"must lie in (0, 1e-3), got {tol!r}")
    max_iter = as_count("max_iter", max_iter, 1, MAX_ITER_LIMIT, "spike stripping converges in a few passes")
    if not isinstance(measured, Mapping):
        raise InputError("measured", f"must be a mapping of ratio name to value, got {type(measured).__name__}")
    if not measured:
        raise InputError("measured", "no ratios given")
    names = list(measured)
    split = {k: _split(k, "measured") for k in names}
    ref = split[names[0]][1] if reference_isotope is None else as_name("reference_isotope", reference_isotope,
                                                                         "144Nd")
    element = _el(ref)
    if element != spike.element:
        raise InputError("spike", f"is a {spike.element} spike but the ratios are of {element}")
    for k, (num, den) in split.items():
        if den != ref or _el(num) != element:
            raise InputError("measured", f"{k!r} is not a ratio of {element} to {ref}")
    meas = {split[k][0]: _pos_array(f"measured[{k!r}]", v) for k, v in measured.items()}
    ws = _pos_array("sample_mass_g", sample_mass_g)
    wt = _pos_array("spike_mass_g", spike_mass_g)
    k_iso = spike.spike_isotope
    if k_iso not in meas:
        raise InputError("measured", f"needs the spike-isotope ratio {k_iso}/{ref}")
    if k_iso == ref:
        raise InputError("reference_isotope", "must not be the spike isotope")
    comp = sample_composition(element, ref, sample_ratios, natural)
    n_iso = None
    if norm_ratio is not None:
        n_iso, n_den = _split(norm_ratio, "norm_ratio")
        if norm_true is not None and not as_scalar("norm_true", norm_true) > 0:
            raise InputError("norm_true", f"must be > 0, got {float(norm_true)!r}")
        r_true = normalising_ratio(norm_ratio).value if norm_true is None else float(norm_true)
        if n_iso == ref:  # e.g. 86Sr/88Sr with reference 86Sr: use 88Sr/86Sr = 1/0.1194
            n_iso, n_den, r_true = n_den, n_iso, 1.0 / r_true
        if n_den != ref or n_iso not in meas:
            raise InputError("norm_ratio", f"{norm_ratio!r} (or its inverse) must be one of the measured ratios "
                             f"to {ref}")
        if n_iso == k_iso:
            raise InputError("norm_ratio", "cannot be the spike-isotope ratio")
        if bias_factor is not None:
            raise InputError("bias_factor", "give either norm_ratio (internal normalisation) or bias_factor")
        comp[f"{n_iso}/{ref}"] = r_true
    elif bias_factor is None:
        raise InputError("bias_factor", "give norm_ratio (internal normalisation) or an external bias_factor")
    beta_ext = None if bias_factor is None else _checked("bias_factor", bias_factor, "any")
    shapes = {f"measured[{k!r}]": meas[split[k][0]] for k in names}
    shapes.update({f"sample_ratios[{k!r}]": v for k, v in comp.items()},
                  sample_mass_g=ws, spike_mass_g=wt, bias_factor=beta_ext)
    broadcast_shape(**{k: v for k, v in shapes.items() if v is not None})
    with np.errstate(**_QUIET):
        return _isotope_dilution(spike, element, ref, k_iso, n_iso, norm_ratio, comp, meas, ws, wt, beta_ext, law,
                                 sample_ratios, tol, max_iter)


def _isotope_dilution(spike: Spike, element: str, ref: str, k_iso: str, n_iso: Optional[str],
                      norm_ratio: Optional[str], comp: Dict[str, Any], meas: Dict[str, np.ndarray], ws: np.ndarray,
                      wt: np.ndarray, bias_factor: Optional[np.ndarray], law: str,
                      sample_ratios: Optional[Mapping[str, Any]], tol: float, max_iter: int) -> Dilution:
    """The iteration of :func:`isotope_dilution` on checked inputs."""
    a = {i: spike.abundance(i) for i in element_isotopes(element)}
    a_k, a_r = a[k_iso], a[ref]
    rs_k = comp[f"{k_iso}/{ref}"]
    rt_k = np.inf if a_r == 0 else a_k / a_r
    m_min = _magnification_min(rs_k, rt_k)
    if not np.all(m_min <= SINGULAR_MAGNIFICATION):
        raise InputError("spike", f"its {k_iso}/{ref} ({rt_k:.6g}) is too close to the sample's "
                         f"({float(np.ravel(rs_k)[0]):.6g}): the ID equation is near-singular "
                         "(best attainable magnification "
                         f"{float(np.max(m_min)):.3g} > {SINGULAR_MAGNIFICATION:g})")
    mass = {i: isotope_mass(i).value for i in meas}
    m_r = isotope_mass(ref).value
    fixed_free = set(sample_ratios or {})
    free = [i for i in meas if i not in (k_iso, n_iso) and f"{i}/{ref}" not in fixed_free]

    law_name = _law(law)
    m_arr = {i: np.asarray(m, dtype=float) for i, m in mass.items()}
    m_r_arr = np.asarray(m_r, dtype=float)

    def corr(i: str, beta: Any) -> Any:
        # bias_correct's arithmetic without its argument checks: the ratios, masses and law are checked
        # above, and _gain refuses a factor that overflows (every pass, a few per analysis, on the hot path)
        return meas[i] * _gain(m_arr[i], m_r_arr, np.asarray(beta), law_name)

    rule = (f"iterate until |({n_iso}/{ref})_sample / true - 1| < {tol:g} (max {max_iter} passes)"
            if n_iso else "external bias factor: no iteration")
    if n_iso is not None:
        beta = np.asarray(_bias_factor_of(meas[n_iso], comp[f"{n_iso}/{ref}"], mass[n_iso], m_r, law))
        r_true = comp[f"{n_iso}/{ref}"]
        it = 0
        while True:
            it += 1
            rc_k = corr(k_iso, beta)
            u = _spike_u(rs_k, rc_k, a_k, a_r)
            s_n = corr(n_iso, beta) * (1 + a_r * u) - a[n_iso] * u
            if np.any(np.real(s_n) <= 0):
                raise UndefinedResultError(f"{norm_ratio}: the spike-free normalising ratio is <= 0; the spike holds "
                                           f"too much {n_iso} for internal normalisation")
            mis = np.abs(s_n / r_true - 1)
            if np.all(mis < tol):
                break
            if it >= max_iter:
                raise ConvergenceError(f"isotope dilution: spike stripping with {norm_ratio} did not converge in "
                                       f"{max_iter} iterations (worst misfit {float(np.max(mis)):.3g}; rule: {rule})")
            beta = beta + np.asarray(_factor(s_n, r_true, m_arr[n_iso], m_r_arr, law_name)[0])
    else:
        beta = np.asarray(bias_factor)
        it = 1
        rc_k = corr(k_iso, beta)
        u = _spike_u(rs_k, rc_k, a_k, a_r)
    for i in free:
        s_i = corr(i, beta) * (1 + a_r * u) - a[i] * u
        if np.any(np.real(s_i) <= 0):
            raise UndefinedResultError(f"measured[{i}/{ref}]: spike-free sample ratio is <= 0")
        comp[f"{i}/{ref}"] = _out(s_i)
    n_spike = spike.concentration_umol_g * wt / a_k
    ref_umol_g = n_spike / u / ws
    isos = element_isotopes(element)
    sum_r = sum(np.asarray(comp[f"{i}/{ref}"]) for i in isos)
    sum_rm = sum(np.asarray(comp[f"{i}/{ref}"]) * isotope_mass(i).value for i in isos)
    mag = _magnification(rc_k, rs_k, rt_k)
    mag = np.real(mag)
    poor = np.asarray(mag) > POOR_MIX_FACTOR * np.asarray(m_min)
    out = Dilution(element, ref, _out(ref_umol_g * sum_r), _out(ref_umol_g * sum_rm), _out(ref_umol_g),
                   comp, _out(sum_rm / sum_r), _out(beta), law, _out(u), _out(rc_k), _out(mag), _out(m_min),
                   bool(poor) if poor.ndim == 0 else poor, it, rule)
    finite_result("isotope dilution", **{
        "concentration (µmol/g)": out.conc_umol_g, "concentration (µg/g)": out.conc_ug_g,
        "reference-isotope amount": out.ref_umol_g, "atomic weight": out.atomic_weight,
        "bias factor": out.bias_factor, "spike/sample ratio u": out.spike_sample_ratio,
        "corrected mixture ratio": out.mix_ratio_corrected, "error magnification": out.magnification},
        **{f"sample ratio {k}": v for k, v in comp.items()})
    return out


def id_concentration(mix_ratio: Any, ratio: str, sample_mass_g: Any, spike_mass_g: Any, spike: Spike, *,
                     bias_factor: Any = 0.0, law: str = "exponential") -> Any:
    """Element concentration (µg/g) of a sample of natural composition: float-in / float-out front.

    Parameters
    ----------
    mix_ratio : array_like
        Measured spike-isotope ratio of the mixture, e.g. 150Nd/144Nd.
    ratio : str
        Its name, ``"150Nd/144Nd"`` (numerator = the spike isotope).
    bias_factor : array_like, default 0
        External mass-bias factor applied to ``mix_ratio``.
    """
    return isotope_dilution({as_name("ratio", ratio, "150Nd/144Nd"): mix_ratio}, spike, sample_mass_g, spike_mass_g,
                            bias_factor=bias_factor, law=law).conc_ug_g


# ---------------------------------------------------------------------------- spike calibration
@dataclass(frozen=True)
class SpikeCalibration:
    """Spike concentration from reverse isotope dilution.

    Attributes
    ----------
    concentration_umol_g : float
        Mean spike-isotope concentration of the spike solution (µmol/g).
    sigma_1s : float
        Total 1σ (random and systematic in quadrature).
    sigma_1s_random : float
        Replicate standard error (SD/√n) for n >= 2, else the propagated mixture-ratio σ.
    sigma_1s_systematic : float
        From the gravimetric standard's concentration and the weighings.
    n : int
    values : ndarray
        Per-replicate concentrations.
    magnification : ndarray
        Error magnification of each calibration mixture.
    spike : Spike
        The input spike with the calibrated concentration and σ.
    """

    concentration_umol_g: float
    sigma_1s: float
    sigma_1s_random: float
    sigma_1s_systematic: float
    n: int
    values: np.ndarray
    magnification: np.ndarray
    spike: Spike


def calibrate_spike(mix_ratio: Any, standard_mass_g: Any, standard_conc_umol_g: Any, spike_mass_g: Any,
                    spike: Spike, *, ratio: str, standard_conc_sigma_1s: float = 0.0,
                    standard_mass_sigma_1s: float = 0.0, spike_mass_sigma_1s: float = 0.0,
                    mix_ratio_sigma_1s: Any = 0.0, calibrated: str = "",
                    natural: Optional[NaturalComposition] = None) -> SpikeCalibration:
    """Calibrate a spike's concentration by reverse ID against a gravimetric natural-composition solution.

    Parameters
    ----------
    mix_ratio : array_like
        Bias-corrected spike-isotope ratio k/r of each spike + standard mixture (1-D: replicates).
    standard_mass_g, spike_mass_g : array_like
        Masses of standard solution and spike solution in each mixture (g).
    standard_conc_umol_g : float
        Element concentration of the gravimetric standard (µmol/g), of natural composition
        (``natural``, default :func:`reduction.composition.natural_composition`).
    spike : Spike
        Spike composition (its concentration is ignored and replaced).
    ratio : str
        Name of ``mix_ratio``, e.g. ``"150Nd/144Nd"``.

    Notes
    -----
    The ID equation of Smith (2000) solved for the spike: u = (R_mix − R_s)/(a_k,t − R_mix·a_r,t),
    N_spike = u·n_r,standard, c_k = a_k,t·N_spike/W_spike.
    """
    if not isinstance(spike, Spike):
        raise InputError("spike", "must be a Spike (see make_spike)")
    k_iso, ref = _split(ratio)
    if k_iso != spike.spike_isotope or _el(ref) != spike.element:
        raise InputError("ratio", f"must be {spike.spike_isotope}/<{spike.element} isotope>, got {ratio!r}")
    rm = np.atleast_1d(_pos_array("mix_ratio", mix_ratio)).astype(float)
    wstd = _pos_array("standard_mass_g", standard_mass_g)
    wt = _pos_array("spike_mass_g", spike_mass_g)
    cstd = _pos_array("standard_conc_umol_g", standard_conc_umol_g)
    sig = {nm: as_scalar(nm, v) for nm, v in (("standard_conc_sigma_1s", standard_conc_sigma_1s),
                                              ("standard_mass_sigma_1s", standard_mass_sigma_1s),
                                              ("spike_mass_sigma_1s", spike_mass_sigma_1s))}
    for nm, v in sig.items():
        if not v >= 0:
            raise InputError(nm, f"must be >= 0, got {v!r}")
    srm_all = _checked("mix_ratio_sigma_1s", mix_ratio_sigma_1s, "nonnegative")
    shape = broadcast_shape(mix_ratio=rm, standard_mass_g=wstd, spike_mass_g=wt, standard_conc_umol_g=cstd,
                            mix_ratio_sigma_1s=srm_all)
    if len(shape) != 1 or shape[0] == 0:
        raise InputError("mix_ratio", f"needs one value per calibration mixture (1-D, at least one), got shape {shape}")
    comp = sample_composition(spike.element, ref, natural=natural)
    isos = element_isotopes(spike.element)
    a_k, a_r = spike.abundance(k_iso), spike.abundance(ref)
    rs_k = comp[ratio]
    rt_k = np.inf if a_r == 0 else a_k / a_r
    if not _magnification_min(rs_k, rt_k) <= SINGULAR_MAGNIFICATION:
        raise InputError("spike", "spike and standard ratios too close: reverse ID equation near-singular")
    rm = np.broadcast_to(rm, shape)
    with np.errstate(**_QUIET):
        n_ref_std = cstd * wstd / sum(comp[f"{i}/{ref}"] for i in isos)
        u = _spike_u(rs_k, rm, a_k, a_r)
        vals = np.broadcast_to(a_k * u * n_ref_std / wt, shape).astype(float)
        mag = np.atleast_1d(_magnification(rm, rs_k, rt_k))
        n = vals.size
        mean = float(vals.mean())
        if n >= 2:
            rnd = float(vals.std(ddof=1) / np.sqrt(n))
        else:
            rnd = float(mean * mag[0] * float(np.max(srm_all)) / rm[0])
        # relative systematic σ: the standard's concentration, and each weighing averaged over n mixtures,
        # in quadrature (hypot: no square overflows)
        rel_sys = math.hypot(sig["standard_conc_sigma_1s"] / float(np.mean(cstd)),
                             sig["standard_mass_sigma_1s"] / float(np.mean(wstd)) / math.sqrt(n),
                             sig["spike_mass_sigma_1s"] / float(np.mean(wt)) / math.sqrt(n))
        sys_ = float(mean * rel_sys)
        tot = float(np.hypot(rnd, sys_))
    finite_result("spike calibration", **{"concentration": vals, "random σ": rnd, "systematic σ": sys_,
                                          "error magnification": mag})
    if not mean > 0:
        raise UndefinedResultError("spike calibration: the concentration underflows to 0 in double precision; "
                                   "check the masses and the standard's concentration")
    new = replace(spike, concentration_umol_g=mean, concentration_sigma_1s=tot,
                  calibrated=calibrated or spike.calibrated)
    return SpikeCalibration(mean, tot, rnd, sys_, n, vals.copy(), mag, new)


# ------------------------------------------------------------------------------ forward model
def forward_mixture(element: str, reference_isotope: str, sample_conc_umol_g: Any, sample_mass_g: Any,
                    spike: Spike, spike_mass_g: Any, *, sample_ratios: Optional[Mapping[str, Any]] = None,
                    bias_factor: Any = 0.0, law: str = "exponential", blank_umol: Any = 0.0,
                    blank_ratios: Optional[Mapping[str, Any]] = None,
                    natural: Optional[NaturalComposition] = None) -> Dict[str, Any]:
    """Forward model of a spiked mixture as it would be measured (for synthetic and demo data).

    Adds the moles of every isotope of sample (+ optional blank) and spike, forms the ratios to
    ``reference_isotope`` and fractionates them with ``bias_factor`` (:func:`reduction.massbias.bias_apply`).

    Parameters
    ----------
    sample_conc_umol_g : array_like
        Element concentration of the sample (µmol/g).
    sample_ratios, blank_ratios : mapping, optional
        Compositions as ratios to ``reference_isotope`` (unlisted isotopes natural: ``natural``, default
        :func:`reduction.composition.natural_composition`).
    blank_umol : array_like
        µmol of element added by the procedural blank.

    Returns
    -------
    dict of str to float or ndarray
        Every ratio i/reference of the mixture (fractionated).
    """
    from .massbias import bias_apply

    comp = sample_composition(element, reference_isotope, sample_ratios, natural)
    bcomp = sample_composition(element, reference_isotope, blank_ratios, natural)
    isos = element_isotopes(element)
    if not isinstance(spike, Spike):
        raise InputError("spike", "must be a Spike (see make_spike)")
    conc = _checked("sample_conc_umol_g", sample_conc_umol_g, "nonnegative")
    ws = _pos_array("sample_mass_g", sample_mass_g)
    wt = _checked("spike_mass_g", spike_mass_g, "nonnegative")
    nb = _checked("blank_umol", blank_umol, "nonnegative")
    beta = _checked("bias_factor", bias_factor, "any")
    arrays = dict(sample_conc_umol_g=conc, sample_mass_g=ws, spike_mass_g=wt, blank_umol=nb, bias_factor=beta)
    arrays.update({f"sample_ratios[{k!r}]": v for k, v in comp.items()})
    arrays.update({f"blank_ratios[{k!r}]": v for k, v in bcomp.items()})
    broadcast_shape(**arrays)
    m_r = isotope_mass(reference_isotope).value
    out: Dict[str, Any] = {}
    with np.errstate(**_QUIET):
        tot_s = sum(np.asarray(comp[f"{i}/{reference_isotope}"]) for i in isos)
        tot_b = sum(np.asarray(bcomp[f"{i}/{reference_isotope}"]) for i in isos)
        n_el = conc * ws
        n_sp = spike.element_umol_g * wt
        amount = {i: n_el * np.asarray(comp[f"{i}/{reference_isotope}"]) / tot_s
                  + nb * np.asarray(bcomp[f"{i}/{reference_isotope}"]) / tot_b
                  + n_sp * spike.abundance(i) for i in isos}
        if not np.all(amount[reference_isotope] > 0):
            raise UndefinedResultError(f"the mixture holds no {reference_isotope} (sample, blank and spike amounts "
                                       "are 0 or too small for double precision): its ratios are undefined")
        for i in isos:
            if i == reference_isotope:
                continue
            r = amount[i] / amount[reference_isotope]
            finite_result("forward mixture", **{f"ratio {i}/{reference_isotope}": r})
            if not np.all(r > 0):
                raise UndefinedResultError(f"the mixture holds no {i}: its ratio to {reference_isotope} is 0, which no "
                                           "measurement gives; give a sample or spike that contains it")
            out[f"{i}/{reference_isotope}"] = _out(bias_apply(r, isotope_mass(i).value, m_r, beta, law))
    return out



def mixture_fractions(natural: Any, spike: Spike, reference: str, mix_ratio_true: float) -> Dict[str, float]:
    """Atom fractions of a sample–spike mixture of one element, from its true spike-isotope ratio.

    ``mix_ratio_true`` is the mixture's bias-corrected ratio s/r (s = ``spike.spike_isotope``, r =
    ``reference``). With the sample of natural composition (fractions a) and the spike (fractions b),
    two-component mixing gives the sample/spike proportion x = (b_s − R·b_r)/(R·a_r − a_s) and the
    mixture n_k = x·a_k + b_k, normalised (the isotope-dilution mixing equation, e.g. Faure & Mensing
    2005, Isotopes: Principles and Applications, 3rd ed., ch. 4; recalled from memory). A blank of natural
    composition is part of x.

    ``natural`` is a :class:`reduction.composition.NaturalComposition` of ``spike.element``.
    """
    from .composition import NaturalComposition

    if not isinstance(spike, Spike):
        raise InputError("spike", "must be a Spike (see make_spike)")
    if not isinstance(natural, NaturalComposition) or natural.element != spike.element:
        raise InputError("natural", f"must be the NaturalComposition of {spike.element}")
    s_iso, r_iso = spike.spike_isotope, as_name("reference", reference, "152Sm")
    a = {i: float(natural.fraction(i)) for i in natural.isotopes}
    b = dict(zip(spike.isotopes, (float(v) for v in spike.abundances)))
    if r_iso not in a or s_iso not in a:
        raise InputError("reference", f"{r_iso!r} and {s_iso!r} must both be isotopes of {spike.element}")
    R = as_scalar("mix_ratio_true", mix_ratio_true)
    den = R * a[r_iso] - a[s_iso]
    if not den > 0:
        raise UndefinedResultError(f"the mixture's {s_iso}/{r_iso} = {R:.6g} is not above the natural value: "
                                   "no sample in the mixture")
    x = (b.get(s_iso, 0.0) - R * b.get(r_iso, 0.0)) / den
    if not x > 0:
        raise UndefinedResultError(f"the mixture's {s_iso}/{r_iso} = {R:.6g} is not below the spike's: no spike "
                                   "in the mixture")
    n = {k: x * a[k] + b.get(k, 0.0) for k in a}
    tot = sum(n.values())
    return {k: v / tot for k, v in n.items()}
