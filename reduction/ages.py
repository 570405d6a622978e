"""Ages from isochrons, two-point ages, initial ratios, ε values and model ages.

Decay constants and reservoirs come from a :class:`reduction.constants.ReferenceSet` (the
default set when ``ref`` is None); systems are keys of :data:`reduction.systems.SYSTEMS` or
:class:`~reduction.systems.IsotopeSystem` objects. Ages are in Ma (``age_from_slope`` and
``slope_from_age`` work in years), decay constants in 1/a, every uncertainty 1σ absolute and
propagated linearly (first-order Taylor expansion; checked against finite differences and
seeded Monte Carlo in the tests).

Formulas (standard; e.g. Faure & Mensing 2005, *Isotopes: Principles and Applications*, Wiley):

* isochron age ``t = ln(1 + b)/λ``; initial ratio = intercept;
* ``R(t) = R_0 − P_0 (e^{λt} − 1)`` for a daughter ratio R and parent ratio P measured today;
* ``ε(t) = [R_sample(t)/R_CHUR(t) − 1]·10⁴`` (DePaolo & Wasserburg 1976, GRL 3, 743);
* model age ``T = (1/λ) ln{1 + (R − R_res)/(P − P_res)}`` (CHUR: DePaolo & Wasserburg 1976;
  depleted mantle: DePaolo 1981, Nature 291, 193).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Optional, Tuple, Union

import numpy as np

from ._validate import as_scalar, finite_result, require_correlation
from .constants import ReferenceSet, reference_set
from .errors import InputError, UndefinedResultError
from .regression import IsochronFit, york_fit
from .systems import IsotopeSystem, get_system

__all__ = [
    "AGE_LIMIT_MA",
    "Epsilon",
    "IsochronAge",
    "MODEL_AGE_NEAR_RESERVOIR_REL",
    "MODEL_AGE_SIGMA_REL_MAX",
    "ModelAge",
    "SOLAR_SYSTEM_AGE_MA",
    "age_from_slope",
    "epsilon",
    "initial_ratio",
    "isochron_age",
    "model_age",
    "slope_from_age",
    "two_point_age",
]

SystemLike = Union[str, IsotopeSystem]
_MA = 1.0e6


@dataclass(frozen=True)
class IsochronAge:
    """An isochron (or two-point) age with its initial ratio.

    ``age_sigma_1s_ma`` propagates the slope error only; ``age_sigma_1s_ma_with_lambda`` adds the
    decay constant's 1σ in quadrature. Both use the fit's ``slope_sigma_1s`` (unscaled for the
    ``"analytical"`` treatment, √MSWD-scaled for ``"expanded"``). The ``*_95_expanded`` values
    are 95 % limits from the fit's Student-t × √MSWD expanded slope error (None for two points).
    ``decay_constant``, ``decay_constant_sigma_1s`` and ``decay_constant_source`` record the
    constant used. ``age_sigma_1s_ma_total`` combines in quadrature the slope error, the decay
    constant's and the systematic x-scale (spike calibration) error ``x_scale_sigma_rel`` (1σ
    relative, recorded here); with ``x_scale_sigma_rel = 0`` it equals
    ``age_sigma_1s_ma_with_lambda``.
    """

    age_ma: float
    age_sigma_1s_ma: float
    age_sigma_1s_ma_with_lambda: float
    initial: float
    initial_sigma_1s: float
    decay_constant: float
    decay_constant_sigma_1s: float
    decay_constant_source: str
    system: str
    reference_set: str
    n: int
    dof: int
    mswd: Optional[float]
    p_value: Optional[float]
    treatment: str
    age_sigma_95_expanded_ma: Optional[float] = None
    initial_sigma_95_expanded: Optional[float] = None
    age_sigma_1s_ma_total: Optional[float] = None
    x_scale_sigma_rel: float = 0.0


@dataclass(frozen=True)
class Epsilon:
    """ε value (εNd, εHf, εSr) at time ``t_ma`` (today when 0).

    ``sigma_1s`` propagates the sample's ratio errors (and, with ``include_reference``, the
    reservoir's and the decay constant's). ``chur_daughter_t`` and ``sample_daughter_t`` are
    the reservoir's and the sample's daughter ratios at t.
    """

    value: float
    sigma_1s: float
    t_ma: float
    chur_daughter_t: float
    sample_daughter_t: float
    sample_daughter_t_sigma_1s: float
    system: str
    reservoir: str
    reservoir_source: str


#: Age of the solar system in Ma: the oldest solids, Pb–Pb age of CAIs 4567.30 ± 0.16 Ma (Connelly et al.
#: 2012, Science 338, 651–655; value recalled from memory). A model age beyond it dates nothing.
SOLAR_SYSTEM_AGE_MA = 4567.3

#: Largest age (Ma, either sign) an isochron slope may give, and the largest time ``t_ma`` the
#: functions here accept: 10 × :data:`SOLAR_SYSTEM_AGE_MA` = 45 673 Ma. A rule of this program: nothing
#: it dates can be older than the solar system, and a slope that implies ten times that (e.g. 1e308,
#: which gave 108 439 787 Ma) is a typing or unit error, not an age; the factor 10 leaves room for
#: negative-slope and test isochrons without letting absurd numbers through.
AGE_LIMIT_MA = 10.0 * SOLAR_SYSTEM_AGE_MA

#: A sample whose parent ratio lies within this fraction of the reservoir's, ``|P − P_res|/P_res``, gets a
#: model-age flag (common practice, not a published limit: with ΔP small the sample's evolution line runs
#: nearly parallel to the reservoir's and the age hangs on a small difference).
MODEL_AGE_NEAR_RESERVOIR_REL = 0.1

#: A model age whose 1σ exceeds this fraction of the age gets a flag (common practice).
MODEL_AGE_SIGMA_REL_MAX = 0.5


@dataclass(frozen=True)
class ModelAge:
    """Model age (T_CHUR, T_DM) in Ma with its 1σ from the sample's ratio errors.

    ``flags`` are plain-language warnings, one sentence each, for an age that is computed but should
    not be read at face value (empty when there is nothing to say); ``flag_codes`` holds one short
    stable code per flag, in the same order: ``"older-than-solar-system"``,
    ``"parent-ratio-near-reservoir"``, ``"large-relative-sigma"``. See :func:`model_age`.
    """

    age_ma: float
    age_sigma_1s_ma: float
    reservoir: str
    reservoir_source: str
    system: str
    decay_constant: float
    flags: Tuple[str, ...] = ()
    flag_codes: Tuple[str, ...] = ()


# --------------------------------------------------------------------------------------------
def _lambda_ok(decay_constant: Any) -> float:
    lam = as_scalar("decay_constant", decay_constant)
    if lam <= 0:
        raise InputError("decay_constant", f"must be > 0 (1/a), got {lam!r}")
    return lam


def age_from_slope(slope: float, decay_constant: float) -> float:
    """Age in years from an isochron slope: ``t = ln(1 + slope)/λ`` (e.g. Faure & Mensing 2005).

    Raises :class:`~reduction.errors.UndefinedResultError` for slope ≤ −1, and for a slope whose
    age lies beyond ±:data:`AGE_LIMIT_MA` (45 673 Ma, 10 × the age of the solar system; a rule of
    this program): such a slope is a typing or unit error, not an age.

    Examples
    --------
    >>> round(age_from_slope(0.01, 6.54e-12) / 1e6, 3)
    1521.457
    """
    b = as_scalar("slope", slope)
    lam = _lambda_ok(decay_constant)
    if b <= -1:
        raise UndefinedResultError(f"slope {b!r} <= -1 gives no age (ln(1 + slope) undefined)")
    t = math.log1p(b) / lam
    if not abs(t) <= AGE_LIMIT_MA * _MA:
        raise UndefinedResultError(
            f"slope {b:.6g} with decay constant {lam:.6g} /a gives an age of {t / _MA:.6g} Ma, beyond "
            f"±{AGE_LIMIT_MA:g} Ma (10 × the age of the solar system, {SOLAR_SYSTEM_AGE_MA:g} Ma): that is no "
            "age; check the slope (x and y swapped? units?) and the decay constant")
    return t


def _t_ok(name: str, t_ma: float) -> float:
    """A time in Ma within ±:data:`AGE_LIMIT_MA`."""
    if not abs(t_ma) <= AGE_LIMIT_MA:
        raise InputError(name, f"must lie within ±{AGE_LIMIT_MA:g} Ma (10 × the age of the solar system), got "
                               f"{t_ma:.6g} Ma")
    return t_ma


def slope_from_age(t_years: float, decay_constant: float) -> float:
    """Isochron slope of an age in years: ``e^{λt} − 1`` (the inverse of :func:`age_from_slope`).

    ``t_years`` must lie within ±:data:`AGE_LIMIT_MA` (in years, 4.5673e10 a); a slope too large for
    double precision (a decay constant far beyond any real one) raises
    :class:`~reduction.errors.UndefinedResultError`.
    """
    t = as_scalar("t_years", t_years)
    lam = _lambda_ok(decay_constant)
    _t_ok("t_years", t / _MA)
    return _growth_years(t, lam)


def _growth_years(t_years: float, lam: float) -> float:
    """e^{λt} − 1, or an UndefinedResultError if it overflows."""
    try:
        g = math.expm1(lam * t_years)
        if not math.isfinite(g):
            raise OverflowError
        return g
    except OverflowError:
        raise UndefinedResultError(f"e^(λt) - 1 with λ = {lam:.6g} /a and t = {t_years / _MA:.6g} Ma is too large for "
                                   "double precision; check the decay constant and the time") from None


def _sigma2(a: float, b: float, rho: float) -> float:
    """sqrt(a² + b² + 2ρab) for two correlated error terms, without overflow (scaled by max |a|, |b|)."""
    m = max(abs(a), abs(b))
    if m == 0.0 or not math.isfinite(m):
        return 0.0 if m == 0.0 else math.inf
    a, b = a / m, b / m
    return m * math.sqrt(max(a * a + b * b + 2.0 * rho * a * b, 0.0))


def _setup(system: SystemLike, ref: Optional[ReferenceSet]) -> Tuple[IsotopeSystem, ReferenceSet]:
    sysobj = get_system(system)
    if ref is None:
        ref = reference_set()
    elif not isinstance(ref, ReferenceSet):
        raise InputError("ref", f"must be a ReferenceSet or None, got {type(ref).__name__}")
    return sysobj, ref


def isochron_age(fit: IsochronFit, system: SystemLike, ref: Optional[ReferenceSet] = None, *,
                 x_scale_sigma_rel: float = 0.0) -> IsochronAge:
    """Age and initial ratio of an isochron fit.

    ``σ_t = σ_b / ((1 + b) λ)`` from the slope alone; with the decay constant,
    ``σ_t² = (σ_b/((1 + b)λ))² + (t σ_λ/λ)²`` (first-order propagation of ``t = ln(1 + b)/λ``).

    **Systematic x-scale error.** The parent/daughter ratio x of every point of an isotope-dilution
    isochron is proportional to the spike's parent/daughter concentration ratio, so an error k of
    that calibration scales all x at once (x → k·x), which turns the line's slope into b/k and
    leaves the intercept unchanged. With ``k = 1 ± s`` (``s = x_scale_sigma_rel``) the age
    error from it is ``|∂t/∂k| s = b s / ((1 + b) λ)`` (first order), and
    ``age_sigma_1s_ma_total² = σ_t,slope² + σ_t,λ² + (b s/((1 + b) λ))²``. This assumes the fit's
    slope error is the random part only (points reduced with the spike-calibration error left
    out, e.g. ``AnalysisResult.sigma_1s_random`` of :mod:`reduction.chain`); otherwise that error
    is counted twice.

    Parameters
    ----------
    fit : IsochronFit
        From :func:`reduction.regression.york_fit` or :func:`~reduction.regression.fit_isochron`
        with x = parent ratio (e.g. ¹⁴⁷Sm/¹⁴⁴Nd) and y = daughter ratio (¹⁴³Nd/¹⁴⁴Nd).
    system : str or IsotopeSystem
        ``"sm-nd"``, ``"lu-hf"`` or ``"rb-sr"``.
    ref : ReferenceSet, optional
        Source of the decay constant; the default set when None.
    x_scale_sigma_rel : float, default 0
        1σ relative systematic uncertainty common to all x (a fraction, e.g. 0.001 for 0.1 %): the
        calibration of the (mixed) spike's parent/daughter concentration ratio (e.g. Sm/Nd). Enters
        ``age_sigma_1s_ma_total`` only.
    """
    if not isinstance(fit, IsochronFit):
        raise InputError("fit", f"must be an IsochronFit, got {type(fit).__name__}")
    ks = as_scalar("x_scale_sigma_rel", x_scale_sigma_rel)
    if ks < 0:
        raise InputError("x_scale_sigma_rel", f"must be >= 0 (a 1σ relative uncertainty), got {ks!r}")
    sysobj, ref = _setup(system, ref)
    for nm in ("slope_sigma_1s", "intercept", "intercept_sigma_1s", "slope_sigma_95_expanded",
               "intercept_sigma_95_expanded", "mswd", "p_value"):
        v = getattr(fit, nm)
        if v is not None and (not math.isfinite(v) or (nm != "intercept" and v < 0)):
            raise InputError("fit", f"{nm} must be a finite number{'' if nm == 'intercept' else ' >= 0'}, got {v!r}")
    lam_ref = ref.decay_constant(sysobj.decay_key)
    lam, slam = lam_ref.value, lam_ref.sigma_1s
    t = age_from_slope(fit.slope, lam)
    dt_db = 1.0 / ((1.0 + fit.slope) * lam)
    s_b = abs(dt_db) * fit.slope_sigma_1s
    s_all = math.hypot(s_b, t * slam / lam)
    s_total = math.hypot(s_all, abs(dt_db * fit.slope) * ks)   # x -> k x: b -> b/k, ∂b/∂k = −b at k = 1
    s95 = abs(dt_db) * fit.slope_sigma_95_expanded / _MA if fit.slope_sigma_95_expanded is not None else None
    finite_result("isochron age", **{"age σ": s_b, "age σ with λ": s_all, "total age σ": s_total,
                                     "95 % age error": s95})
    return IsochronAge(
        age_ma=t / _MA, age_sigma_1s_ma=s_b / _MA, age_sigma_1s_ma_with_lambda=s_all / _MA,
        initial=fit.intercept, initial_sigma_1s=fit.intercept_sigma_1s, decay_constant=lam,
        decay_constant_sigma_1s=slam, decay_constant_source=lam_ref.source, system=sysobj.key,
        reference_set=ref.name, n=fit.n, dof=fit.dof, mswd=fit.mswd, p_value=fit.p_value,
        treatment=fit.treatment, age_sigma_95_expanded_ma=s95,
        initial_sigma_95_expanded=fit.intercept_sigma_95_expanded, age_sigma_1s_ma_total=s_total / _MA,
        x_scale_sigma_rel=ks)


def two_point_age(x1: float, sx1: float, y1: float, sy1: float, x2: float, sx2: float, y2: float, sy2: float,
                  system: SystemLike, ref: Optional[ReferenceSet] = None, rho1: float = 0.0,
                  rho2: float = 0.0) -> IsochronAge:
    """Two-point (e.g. mineral–whole-rock) age: the exact line through both points.

    Errors by linear propagation of both points' errors (see :func:`reduction.regression.york_fit`).
    """
    vals = [as_scalar(nm, v) for nm, v in (("x1", x1), ("sx1", sx1), ("y1", y1), ("sy1", sy1), ("x2", x2),
                                           ("sx2", sx2), ("y2", y2), ("sy2", sy2), ("rho1", rho1),
                                           ("rho2", rho2))]
    x1, sx1, y1, sy1, x2, sx2, y2, sy2, rho1, rho2 = vals
    for nm, v in (("sx1", sx1), ("sy1", sy1), ("sx2", sx2), ("sy2", sy2)):
        if v <= 0:
            raise InputError(nm, f"must be > 0, got {v!r}")
    fit = york_fit([x1, x2], [sx1, sx2], [y1, y2], [sy1, sy2], [rho1, rho2])
    return isochron_age(fit, system, ref)


def _sample(daughter_ratio: Any, daughter_sigma_1s: Any, parent_ratio: Any, parent_sigma_1s: Any,
            rho: Any) -> Tuple[float, float, float, float, float]:
    """Check a sample's daughter and parent ratios, their 1σ (>= 0) and error correlation."""
    r = as_scalar("daughter_ratio", daughter_ratio)
    sr = as_scalar("daughter_sigma_1s", daughter_sigma_1s)
    p = as_scalar("parent_ratio", parent_ratio)
    sp = as_scalar("parent_sigma_1s", parent_sigma_1s)
    rho = float(require_correlation("rho", np.asarray(as_scalar("rho", rho))))
    if sr < 0 or sp < 0:
        raise InputError("daughter_sigma_1s" if sr < 0 else "parent_sigma_1s", "must be >= 0")
    return r, sr, p, sp, rho


def _growth(t_ma: float, lam: float) -> float:
    return _growth_years(t_ma * _MA, lam)


def _reservoir_kind(sysobj: IsotopeSystem, reservoir: str) -> str:
    kind = str(reservoir).strip().upper()
    if kind == "CHUR" and sysobj.key == "rb-sr":
        kind = "UR"   # the bulk-Earth Sr reservoir plays CHUR's role
    return kind


def initial_ratio(daughter_ratio: float, parent_ratio: float, t_ma: float, system: SystemLike,
                  ref: Optional[ReferenceSet] = None) -> float:
    """Daughter ratio at ``t_ma``: ``R(t) = R_0 − P_0 (e^{λt} − 1)`` (e.g. Faure & Mensing 2005).

    ``t_ma`` must lie within ±:data:`AGE_LIMIT_MA`; a result too large for double precision raises
    :class:`~reduction.errors.UndefinedResultError`.
    """
    sysobj, ref = _setup(system, ref)
    r = as_scalar("daughter_ratio", daughter_ratio)
    p = as_scalar("parent_ratio", parent_ratio)
    t = _t_ok("t_ma", as_scalar("t_ma", t_ma))
    lam = ref.decay_constant(sysobj.decay_key).value
    out = r - p * _growth(t, lam)
    finite_result("initial ratio", **{"ratio at t": out})
    return out


def epsilon(daughter_ratio: float, daughter_sigma_1s: float, parent_ratio: float, t_ma: float,
            system: SystemLike, ref: Optional[ReferenceSet] = None, parent_sigma_1s: float = 0.0,
            rho: float = 0.0, *, include_reference: bool = False) -> Epsilon:
    """ε of a sample at time ``t_ma`` (today for 0) relative to CHUR (UR for Sr).

    ``ε(t) = [R_s(t)/R_CHUR(t) − 1]·10⁴`` with ``R(t) = R_0 − P_0 (e^{λt} − 1)``
    (DePaolo & Wasserburg 1976). The 1σ propagates the sample's daughter and parent ratio
    errors (correlation ``rho``); with ``include_reference`` it also adds the reservoir's
    present-day ratios and the decay constant (treated as independent). A sample ratio at t that
    is not positive (t beyond the sample's own ingrowth) raises
    :class:`~reduction.errors.UndefinedResultError`.

    Parameters
    ----------
    daughter_ratio, daughter_sigma_1s : float
        Measured ¹⁴³Nd/¹⁴⁴Nd (or ¹⁷⁶Hf/¹⁷⁷Hf, ⁸⁷Sr/⁸⁶Sr) today and its 1σ.
    parent_ratio : float
        ¹⁴⁷Sm/¹⁴⁴Nd (¹⁷⁶Lu/¹⁷⁷Hf, ⁸⁷Rb/⁸⁶Sr) today.
    t_ma : float
        Time in Ma, ≥ 0.

    Examples
    --------
    >>> round(epsilon(0.512637, 0.0000065, 0.138, 0, "sm-nd").value, 3)   # BCR-2 vs Bouvier et al. 2008
    0.137
    """
    sysobj, ref = _setup(system, ref)
    r, sr, p, sp, rho = _sample(daughter_ratio, daughter_sigma_1s, parent_ratio, parent_sigma_1s, rho)
    t = as_scalar("t_ma", t_ma)
    if t < 0:
        raise InputError("t_ma", f"must be >= 0, got {t!r}")
    _t_ok("t_ma", t)
    kind = _reservoir_kind(sysobj, "CHUR")
    rc = ref.reservoir(kind, sysobj.daughter_ratio)
    pc = ref.reservoir(kind, sysobj.parent_ratio)
    lam_ref = ref.decay_constant(sysobj.decay_key)
    lam = lam_ref.value
    g = _growth(t, lam)
    rs_t = r - p * g
    rc_t = rc.value - pc.value * g
    if rc_t <= 0:
        raise UndefinedResultError(f"reservoir ratio at {t:g} Ma is not positive")
    if rs_t <= 0:
        raise UndefinedResultError(f"the sample's {sysobj.daughter_ratio} at {t:g} Ma, {r:g} − {p:g}·(e^(λt) − 1) "
                                   f"= {rs_t:.6g}, is not positive: t is older than the sample's own "
                                   "ingrowth allows (check t and the parent ratio)")
    eps = (rs_t / rc_t - 1.0) * 1e4
    # partial derivatives of ε
    d_r = 1e4 / rc_t
    d_p = -1e4 * g / rc_t
    # σ² = (d_r σr)² + (d_p σp)² + 2 d_r d_p ρ σr σp, formed without squaring (no overflow)
    sigma = _sigma2(d_r * sr, d_p * sp, rho)
    sigma_rs_t = _sigma2(sr, -g * sp, rho)
    if include_reference:
        d_rc = -1e4 * rs_t / rc_t / rc_t
        d_pc = 1e4 * rs_t * g / rc_t / rc_t
        dg_dlam = t * _MA * (g + 1.0)      # d(e^{λt} − 1)/dλ = t e^{λt}
        d_lam = 1e4 * (-p * rc_t + rs_t * pc.value) / rc_t / rc_t * dg_dlam
        sigma = math.hypot(sigma, d_rc * rc.sigma_1s, d_pc * pc.sigma_1s, d_lam * lam_ref.sigma_1s)
    finite_result("epsilon", value=eps, **{"σ": sigma, "sample ratio at t": rs_t,
                                           "σ of the sample ratio at t": sigma_rs_t})
    return Epsilon(value=eps, sigma_1s=sigma, t_ma=t, chur_daughter_t=rc_t,
                   sample_daughter_t=rs_t, sample_daughter_t_sigma_1s=sigma_rs_t,
                   system=sysobj.key, reservoir=kind, reservoir_source=rc.source)


def model_age(daughter_ratio: float, daughter_sigma_1s: float, parent_ratio: float, parent_sigma_1s: float,
              system: SystemLike, reservoir: str = "CHUR", ref: Optional[ReferenceSet] = None,
              rho: float = 0.0) -> ModelAge:
    """Single-stage model age relative to a reservoir (``"CHUR"``, ``"DM"``; ``"UR"`` for Sr).

    ``T = (1/λ) ln{1 + (R − R_res)/(P − P_res)}`` (DePaolo & Wasserburg 1976; DePaolo 1981 for
    the depleted mantle). The 1σ propagates the sample's R and P errors with correlation
    ``rho``; the reservoir is taken as exact.

    Raises :class:`~reduction.errors.UndefinedResultError` when ``P = P_res``, when the sample's
    line never meets the reservoir's (``1 + ΔR/ΔP ≤ 0``), and when it meets it only in the future
    (``ΔR/ΔP < 0``: R and P on opposite sides of the reservoir, a negative age). No negative age
    is ever returned.

    **Flags.** An age that is computed but meaningless or barely constrained is returned with
    warnings in ``flags`` (codes in ``flag_codes``), never silently:

    * ``older-than-solar-system`` — ``T >`` :data:`SOLAR_SYSTEM_AGE_MA` (4567.3 Ma, Connelly et al.
      2012, Science 338, 651–655; recalled from memory): the sample cannot have separated from the
      reservoir then; usually its parent/daughter ratio was changed after it left its source;
    * ``parent-ratio-near-reservoir`` — ``|P − P_res|/P_res <`` :data:`MODEL_AGE_NEAR_RESERVOIR_REL`
      (0.1; common practice): the sample's and the reservoir's evolution lines are nearly parallel,
      so T is ill-defined and very sensitive to the ratios and to the choice of reservoir;
    * ``large-relative-sigma`` — the propagated 1σ exceeds :data:`MODEL_AGE_SIGMA_REL_MAX` (50 %;
      common practice) of T (only when the sample's errors are given, i.e. σ > 0).

    Parameters
    ----------
    daughter_ratio, daughter_sigma_1s : float
        Measured ¹⁴³Nd/¹⁴⁴Nd (¹⁷⁶Hf/¹⁷⁷Hf, ⁸⁷Sr/⁸⁶Sr) today and its 1σ absolute (≥ 0).
    parent_ratio, parent_sigma_1s : float
        ¹⁴⁷Sm/¹⁴⁴Nd (¹⁷⁶Lu/¹⁷⁷Hf, ⁸⁷Rb/⁸⁶Sr) today and its 1σ absolute (≥ 0).
    system : str or IsotopeSystem
        ``"sm-nd"``, ``"lu-hf"`` or ``"rb-sr"``.
    reservoir : str, default "CHUR"
        ``"CHUR"`` (``"UR"`` for Sr) or ``"DM"``.
    ref : ReferenceSet, optional
        Source of the decay constant and the reservoir; the default set when None.
    rho : float, default 0
        Error correlation of the daughter and parent ratios.

    Returns
    -------
    ModelAge
        Age and 1σ in Ma, the reservoir used, and the flags.

    Examples
    --------
    >>> round(model_age(0.511500, 0.0, 0.1100, 0.0, "sm-nd").age_ma, 2)   # REFERENCE.md §2 [C]
    1996.02
    """
    sysobj, ref = _setup(system, ref)
    r, sr, p, sp, rho = _sample(daughter_ratio, daughter_sigma_1s, parent_ratio, parent_sigma_1s, rho)
    kind = _reservoir_kind(sysobj, reservoir)
    rr = ref.reservoir(kind, sysobj.daughter_ratio)
    pr = ref.reservoir(kind, sysobj.parent_ratio)
    lam = ref.decay_constant(sysobj.decay_key).value
    dp = p - pr.value
    if dp == 0:
        raise UndefinedResultError(f"parent ratio equals the {kind} value: the model age is undefined")
    q = (r - rr.value) / dp
    if q <= -1:
        raise UndefinedResultError(f"the sample never had the {kind} composition (1 + ΔR/ΔP = {1 + q:.4g} <= 0): "
                                   "no model age")
    if q < 0:
        side = "above" if r > rr.value else "below"
        pside = "below" if dp < 0 else "above"
        raise UndefinedResultError(
            f"negative ('future') {kind} model age: the sample's {sysobj.daughter_ratio} {r:g} is {side} the "
            f"{kind} value {rr.value:g} while its {sysobj.parent_ratio} {p:g} is {pside} the {kind} value "
            f"{pr.value:g}, so its evolution line meets the {kind} line only in the future: no model age")
    t = math.log1p(q) / lam + 0.0   # + 0.0: q = -0.0 (R equal to the reservoir's) gives 0, not -0
    d_r = 1.0 / (lam * (1.0 + q) * dp)
    d_p = -q / (lam * (1.0 + q) * dp)
    age_ma = t / _MA
    sigma_ma = _sigma2(d_r * sr, d_p * sp, rho) / _MA
    finite_result("model age", age=age_ma, **{"age σ": sigma_ma})
    codes, flags = _model_age_flags(sysobj, kind, age_ma, sigma_ma, p, pr.value)
    return ModelAge(age_ma=age_ma, age_sigma_1s_ma=sigma_ma, reservoir=kind,
                    reservoir_source=rr.source, system=sysobj.key, decay_constant=lam,
                    flags=flags, flag_codes=codes)


def _model_age_flags(sysobj: IsotopeSystem, kind: str, age_ma: float, sigma_ma: float, p: float,
                     p_res: float) -> Tuple[Tuple[str, ...], Tuple[str, ...]]:
    """Codes and plain-language warnings of a model age (rules in :func:`model_age`)."""
    out = []
    name = f"T_{kind}"
    if age_ma > SOLAR_SYSTEM_AGE_MA:
        out.append(("older-than-solar-system",
                    f"{name} = {age_ma:.0f} Ma is older than the solar system ({SOLAR_SYSTEM_AGE_MA:g} Ma): it dates "
                    f"no real event; the sample's {sysobj.parent_ratio} was most likely changed after it left its "
                    f"source (or the ratios are in error), so a single-stage model age does not apply"))
    if p_res != 0:
        rel = abs(p - p_res) / abs(p_res)
        if rel < MODEL_AGE_NEAR_RESERVOIR_REL:
            out.append(("parent-ratio-near-reservoir",
                        f"the sample's {sysobj.parent_ratio} {p:g} is within {100 * rel:.3g} % of the {kind} value "
                        f"{p_res:g} (flagged below {100 * MODEL_AGE_NEAR_RESERVOIR_REL:g} %): its evolution line "
                        f"runs nearly parallel to the {kind} line, so {name} is ill-defined and swings widely with "
                        f"small changes of the ratios or of the reservoir"))
    if sigma_ma > 0 and sigma_ma > MODEL_AGE_SIGMA_REL_MAX * age_ma:
        share = f"{100 * sigma_ma / age_ma:.3g} % of the age" if age_ma > 0 else "larger than the age itself (0 Ma)"
        out.append(("large-relative-sigma",
                    f"the 1 sigma of {name}, {sigma_ma:.4g} Ma, is {share} (flagged above "
                    f"{100 * MODEL_AGE_SIGMA_REL_MAX:g} %): the age is barely constrained"))
    return tuple(c for c, _ in out), tuple(f for _, f in out)
