"""Isobaric interference stripping, cycle by cycle.

An isobar of another element sits on the analyte's mass (144Sm on 144Nd, 176Yb and 176Lu on 176Hf,
87Rb on 87Sr). Its size is inferred from an interference-free monitor isotope of the same element
(147Sm, 173Yb, 175Lu, 85Rb) and the interfering element's true isotope ratio, fractionated with
that element's own mass bias:

    I_target = I_total − I_monitor · (R_true(interferent/monitor) fractionated by β_interferent)

Stripping is done on every cycle before the cycles are averaged (common practice), so that a
drifting interference does not bias the mean. Inputs are beam intensities (V, A or counts) or
ratios to one common, interference-free isotope; both behave identically.

NaN is passed through untouched as a missing cycle (the 2-D cycle form of :mod:`reduction.cycles`).

Isobars handled (:data:`INTERFERENCES`; daughter-element runs only):

* Sm-Nd: 144Sm on 144Nd, 148Sm on 148Nd and 150Sm on 150Nd (monitor 147Sm); 142Ce on 142Nd
  (monitor 140Ce);
* Lu-Hf: 176Yb on 176Hf (monitor 173Yb) and 176Lu on 176Hf (monitor 175Lu);
* Rb-Sr: 87Rb on 87Sr (monitor 85Rb).

An interference is stripped only when its target mass is among the beams. Not handled: isobars
in the parent-element run (e.g. 144Nd, 148Nd, 150Nd on Sm; 176Yb and 176Hf on 176Lu; 87Sr on
87Rb), oxide and hydride interferences, and doubly charged ions; strip those before calling.

Spiked runs: the residual parent element in the daughter run is a spike–sample mixture, so its
interferent/monitor ratio is not the natural one (e.g. 176Lu/175Lu with a 176Lu spike, 87Rb/85Rb
with an 87Rb spike, 144Sm/147Sm and 150Sm/147Sm with a 149Sm or 147Sm spike); stripping with the
natural ratio can then be wrong by orders of magnitude. Pass the mixture's true (bias-corrected)
ratio, measured in the parent-element run of the same aliquot, as ``interferent_ratios``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Dict, Mapping, Optional, Tuple, Union

import numpy as np

from ._validate import as_name, as_scalar, broadcast_shape
from .constants import isotope_mass
from .errors import InputError, UndefinedResultError
from .massbias import bias_apply
from .systems import get_system

__all__ = [
    "INTERFERENCES",
    "RUN_MONITORS",
    "BeamStrip",
    "RunStrip",
    "Stripped",
    "interferent_ratio",
    "strip_beams",
    "strip_isobar",
    "strip_run_ratios",
]

#: system key -> (target isotope, interfering isotope, monitor isotope) for each isobar stripped.
INTERFERENCES: Dict[str, Tuple[Tuple[str, str, str], ...]] = {
    "sm-nd": (("144Nd", "144Sm", "147Sm"), ("148Nd", "148Sm", "147Sm"), ("150Nd", "150Sm", "147Sm"),
              ("142Nd", "142Ce", "140Ce")),
    "lu-hf": (("176Hf", "176Yb", "173Yb"), ("176Hf", "176Lu", "175Lu")),
    "rb-sr": (("87Sr", "87Rb", "85Rb"),),
}


def _element(iso: str) -> str:
    return iso.lstrip("0123456789")


def interferent_ratio(interferent: str, monitor: str, natural: Any = None) -> float:
    """True ratio interferent/monitor of the interfering element.

    From the element's natural composition — ``natural`` (a
    :class:`reduction.composition.NaturalComposition`), by default the convention of
    :func:`reduction.composition.natural_composition`, the same composition isotope dilution and
    blank correction use.
    """
    from .composition import NaturalComposition, natural_composition

    interferent = as_name("interferent", interferent, "144Sm")
    monitor = as_name("monitor", monitor, "147Sm")
    el = _element(interferent)
    if el != _element(monitor):
        raise InputError("monitor", f"{monitor!r} is not an isotope of the interfering element of {interferent!r}")
    if natural is None:
        natural = natural_composition(el)
    elif not isinstance(natural, NaturalComposition) or natural.element != el:
        raise InputError("natural", f"must be the NaturalComposition of {el}")
    return natural.ratio(interferent, monitor)


@dataclass(frozen=True)
class Stripped:
    """One stripped beam.

    Attributes
    ----------
    corrected : ndarray or float
        Total beam minus the interference.
    correction : ndarray or float
        The subtracted interference (same unit as the beam).
    correction_rel : ndarray or float
        ``correction / total`` (dimensionless).
    """

    corrected: Any
    correction: Any
    correction_rel: Any


def _beam(name: str, x: Any) -> np.ndarray:
    try:
        a = np.asarray(x, dtype=float)  # read only; results are new arrays
    except (TypeError, ValueError, OverflowError):
        raise InputError(name, "could not be read as numbers") from None
    # one pass in the usual case: a finite sum means no inf (NaN = missing cycle is allowed)
    with np.errstate(over="ignore", invalid="ignore"):
        total = a.sum()
    if not np.isfinite(total) and np.any(np.isinf(a)):
        raise InputError(name, "contains inf")
    return a


def strip_isobar(total: Any, monitor: Any, interferent: str, monitor_isotope: str, *,
                 bias_factor: Any = 0.0, law: str = "exponential",
                 true_ratio: Optional[float] = None) -> Stripped:
    """Subtract one isobaric interference from a beam, using a monitor isotope.

    Parameters
    ----------
    total : array_like
        Beam at the interfered mass (analyte + isobar), per cycle; any shape, NaN = missing cycle.
    monitor : array_like
        Beam of the monitor isotope of the interfering element, same shape (broadcasts).
    interferent : str
        Interfering isotope, e.g. ``"144Sm"``.
    monitor_isotope : str
        Monitor isotope of the same element, e.g. ``"147Sm"``.
    bias_factor : array_like, default 0
        Mass-bias factor of the interfering element (β for the exponential law), scalar or per cycle.
    law : str
        Mass-bias law of ``bias_factor`` (see :mod:`reduction.massbias`).
    true_ratio : float, optional
        True interferent/monitor ratio; default from :func:`interferent_ratio` (natural). For a spiked
        run whose interfering element carries spike (e.g. 176Lu/175Lu in a Hf run spiked with
        176Lu), give the spike–sample mixture's bias-corrected ratio from the parent-element run.

    Returns
    -------
    Stripped

    Raises
    ------
    UndefinedResultError
        If the interference is larger than the total beam in any cycle.
    """
    interferent = as_name("interferent", interferent, "144Sm")
    monitor_isotope = as_name("monitor_isotope", monitor_isotope, "147Sm")
    t = _beam("total", total)
    m = _beam("monitor", monitor)
    if m.size and np.any(m < 0):  # NaN (missing cycle) compares False
        raise InputError("monitor", "beam intensities must be >= 0")
    r_true = interferent_ratio(interferent, monitor_isotope) if true_ratio is None else as_scalar("true_ratio",
                                                                                                 true_ratio)
    if not r_true > 0:
        raise InputError("true_ratio", f"must be > 0, got {r_true!r}")
    r_meas = bias_apply(r_true, isotope_mass(interferent).value, isotope_mass(monitor_isotope).value,
                        bias_factor, law)
    broadcast_shape(total=t, monitor=m, bias_factor=r_meas)
    with np.errstate(over="ignore", invalid="ignore"):
        corr = m * r_meas
        if np.any(np.isinf(corr)):
            raise UndefinedResultError(f"monitor: the {interferent} interference (monitor beam × {interferent}/"
                                       f"{monitor_isotope} = {r_true:g}) overflows double precision; check the "
                                       "beams and the ratio")
        out = t - corr
        # one pass when every cycle is fine; a NaN minimum (missing cycle) takes the element test
        bad = (out <= 0) | np.isinf(out) if not (out.size and out.min() > 0 and np.isfinite(out.max())) else False
    if np.any(bad):
        i = int(np.flatnonzero(np.ravel(bad))[0])
        raise UndefinedResultError(
            f"total: the {interferent} interference ({float(np.ravel(np.broadcast_to(corr, out.shape))[i]):g}) is "
            "not smaller than the "
            f"beam ({float(np.ravel(np.broadcast_to(t, out.shape))[i]):g}) at element {i + 1}")
    with np.errstate(invalid="ignore", divide="ignore"):
        rel = corr / t
    if out.ndim == 0:
        return Stripped(float(out), float(corr), float(rel))
    if corr.shape != out.shape:
        corr = np.broadcast_to(corr, out.shape).copy()
    return Stripped(out, corr, rel)


@dataclass(frozen=True)
class BeamStrip:
    """All isobars of one system stripped from a set of beams.

    Attributes
    ----------
    beams : dict of str to ndarray
        The beams, with each target beam replaced by its stripped value (copies).
    corrections : dict of str to ndarray
        Absolute correction per cycle, keyed ``"144Sm on 144Nd"``.
    correction_rel_mean : dict of str to float or ndarray
        Mean over cycles (last axis; NaN cycles skipped) of correction / total beam, per row.
    """

    beams: Dict[str, np.ndarray]
    corrections: Dict[str, np.ndarray]
    correction_rel_mean: Dict[str, Any]


def strip_beams(beams: Mapping[str, Any], system: Any, *,
                bias_factors: Optional[Mapping[str, Union[float, Any]]] = None,
                law: str = "exponential", require_monitors: bool = True,
                interferent_ratios: Optional[Mapping[str, float]] = None) -> BeamStrip:
    """Strip every isobar of ``system`` (see :data:`INTERFERENCES`) from raw beams, cycle by cycle.

    Parameters
    ----------
    beams : mapping of str to array_like
        Beam intensity per cycle keyed by isotope (``"143Nd"``, ``"144Nd"``, ``"147Sm"``, ...). The total
        beam at an interfered mass is keyed by the target isotope (``"144Nd"`` holds all of mass 144).
        1-D (cycles) or 2-D (analyses x cycles, NaN = missing).
    system : str or IsotopeSystem
        ``"sm-nd"``, ``"lu-hf"`` or ``"rb-sr"``.
    bias_factors : mapping of str to float or array, optional
        Mass-bias factor of each interfering element (``"Sm"``, ``"Ce"``, ``"Yb"``, ``"Lu"``, ``"Rb"``),
        scalar or per cycle. **An element not listed gets 0, i.e. its interferent/monitor ratio is
        subtracted unfractionated.** When the interfering element's own bias is not measured, common
        practice is to use the analyte's factor: pass it here, or use ``bias_factors={"Sm": "analyte"}``
        in :func:`reduction.chain.reduce_cycles`, which solves for it per cycle.
    law : str
        Mass-bias law for the factors.
    require_monitors : bool, default True
        Missing monitor beam -> InputError. With False, that interference is skipped (reported as 0).
        An interference whose target mass is not among the beams is skipped and not reported.
    interferent_ratios : mapping of str to float, optional
        True interferent/monitor ratio per isobar, keyed ``"interferent/monitor"`` as in
        :data:`INTERFERENCES` (``"144Sm/147Sm"``, ``"176Lu/175Lu"``, ``"87Rb/85Rb"``); an isobar not
        listed uses the natural ratio of :func:`interferent_ratio`. **For spiked runs** the residual
        parent element has the spike–sample mixture's composition: give its bias-corrected ratio from
        the parent-element run of the same aliquot (the bias of this run is applied on top, from
        ``bias_factors``). A key that names no isobar of ``system`` raises InputError.

    Returns
    -------
    BeamStrip
    """
    sysm = get_system(system)
    if not isinstance(beams, Mapping):
        raise InputError("beams", f"must be a mapping of isotope to beam values, got {type(beams).__name__}")
    work: Dict[str, np.ndarray] = {k: np.array(_beam(f"beams[{k!r}]", v)) for k, v in beams.items()}
    broadcast_shape(**{f"beams[{k!r}]": v for k, v in work.items()})
    for nm, v in (("bias_factors", bias_factors), ("interferent_ratios", interferent_ratios)):
        if v is not None and not isinstance(v, Mapping):
            raise InputError(nm, f"must be a mapping (element or ratio name to value), got {type(v).__name__}")
    factors = dict(bias_factors or {})
    for el, v in factors.items():
        if isinstance(v, str):
            raise InputError("bias_factors", f"{el}: must be a number or an array here, got {v!r} "
                             "('analyte' is resolved by reduction.chain.reduce_cycles)")
        broadcast_shape(**{f"beams[{k!r}]": b for k, b in work.items()}, **{f"bias_factors[{el!r}]": v})
    known = {f"{i}/{m}" for _, i, m in INTERFERENCES[sysm.key]}
    overrides: Dict[str, float] = {}
    for k, v in dict(interferent_ratios or {}).items():
        name = str(k).replace(" ", "")
        if name not in known:
            raise InputError("interferent_ratios", f"{k!r} is not an isobar of {sysm.key} "
                             f"(use one of {sorted(known)})")
        try:
            fv = float(v)
        except (TypeError, ValueError, OverflowError):
            raise InputError("interferent_ratios", f"{k!r}: is not a number: {v!r}") from None
        if not (np.isfinite(fv) and fv > 0):
            raise InputError("interferent_ratios", f"{k!r}: must be a finite number > 0, got {fv!r}")
        overrides[name] = fv
    corrections: Dict[str, np.ndarray] = {}
    rel_mean: Dict[str, Any] = {}
    original = {t: work[t] for t, _, _ in INTERFERENCES[sysm.key] if t in work}
    for target, interferent, monitor in INTERFERENCES[sysm.key]:
        key = f"{interferent} on {target}"
        if target not in work:
            continue  # this run does not measure that mass (e.g. the parent element's run)
        if monitor not in work:
            if require_monitors:
                raise InputError("beams", f"monitor isotope {monitor!r} is missing: cannot strip {interferent} "
                                 f"from {target}")
            corrections[key] = np.zeros_like(work[target])
            rel_mean[key] = _row_mean(corrections[key])
            continue
        total = work[target]
        s = strip_isobar(total, work[monitor], interferent, monitor,
                         bias_factor=factors.get(_element(interferent), 0.0), law=law,
                         true_ratio=overrides.get(f"{interferent}/{monitor}"))
        corrections[key] = np.asarray(s.correction)
        with np.errstate(invalid="ignore", divide="ignore"):
            rel_mean[key] = _row_mean(np.asarray(s.correction) / original[target])
        work[target] = np.asarray(s.corrected)
    return BeamStrip(work, corrections, rel_mean)


def _row_mean(a: np.ndarray) -> Any:
    if a.ndim == 0:
        return float(a)
    with np.errstate(invalid="ignore"):
        finite = np.isfinite(a)
        n = finite.sum(axis=-1)
        m = np.where(finite, a, 0.0).sum(axis=-1) / np.maximum(n, 1)
    return float(m) if np.ndim(m) == 0 else m


# --------------------------------------------------------------------------------------------
# ratio level: a run's mean ratios to its reference isotope, with monitor ratios (the workbook)
# --------------------------------------------------------------------------------------------
#: Monitor ratios a run of an element may carry, to its reference isotope: element -> ((monitor ratio,
#: interfering element), ...). Every isotope of the interfering element whose mass number is that of an isotope
#: of the run's element is stripped (e.g. 144Sm, 148Sm, 150Sm on a Nd run; 142Ce; 174Yb and 176Yb on Hf;
#: 176Lu on Hf; 87Rb on Sr; 176Yb on a Lu run).
RUN_MONITORS: Dict[str, Tuple[Tuple[str, str], ...]] = {
    "Nd": (("147Sm/144Nd", "Sm"), ("140Ce/144Nd", "Ce")),
    "Hf": (("173Yb/177Hf", "Yb"), ("175Lu/177Hf", "Lu")),
    "Sr": (("85Rb/86Sr", "Rb"),),
    "Lu": (("173Yb/175Lu", "Yb"),),
}


@dataclass(frozen=True)
class RunStrip:
    """A run's ratios after ratio-level stripping.

    Attributes
    ----------
    ratios, sigma_1s : dict of str to float
        Stripped ratios to the reference isotope and their 1σ (measured σ and monitor σ, propagated).
    correction_rel : dict of str to float
        ``1 − stripped / measured`` per ratio (the share the interferences took).
    """

    ratios: Dict[str, float]
    sigma_1s: Dict[str, float]
    correction_rel: Dict[str, float]


def _mapping(name: str, d: Any) -> Mapping[Any, Any]:
    if not isinstance(d, Mapping):
        raise InputError(name, f"must be a mapping (name -> value), got {type(d).__name__}")
    return d


def _mass_number(iso: str) -> int:
    return int(iso[:len(iso) - len(iso.lstrip("0123456789"))])


def strip_run_ratios(element: str, reference: str, ratios: Mapping[str, float], sigma_1s: Mapping[str, float],
                     monitors: Mapping[str, Tuple[float, float]], interferents: Mapping[str, Mapping[str, float]],
                     beta: float, law: str = "exponential") -> RunStrip:
    """Strip isobars from a run's mean ratios ``i/D`` (D = ``reference``) with monitor ratios ``mon/D``.

    With M the measured monitor ratio mon/D and ρ_k = (k/mon)_true fractionated by ``beta`` (the analyte's
    bias, common practice) for each isotope k of the interfering element, the isobars at mass i and at D
    are M·ρ_i and M·ρ_D, so

        (i/D)_stripped = (R_i − Σ M·ρ_i) / (1 − Σ M·ρ_D)

    (sums over the monitors). ``interferents`` maps the interfering element to its true composition as
    atom fractions (natural, or a spike–sample mixture); ``monitors`` maps each monitor ratio name to
    (value, 1σ). The 1σ adds the monitor's σ by first-order propagation (the monitors' and ratios' errors
    taken as independent).

    Notes
    -----
    Isobaric correction with an interference-free monitor isotope and the interferent's true ratio
    fractionated by the exponential law (Russell, Papanastassiou & Tombrello 1978); common practice in TIMS
    and MC-ICP-MS reduction.
    """
    from .dilution import element_isotopes

    el = as_name("element", element, "Nd")
    ref = as_name("reference", reference, "144Nd")
    own = {_mass_number(i): i for i in element_isotopes(el)}
    if ref not in own.values():
        raise InputError("reference", f"{ref!r} is not an isotope of {el}")
    beta = as_scalar("beta", beta)
    ratios = _mapping("ratios", ratios)
    sigma_1s = _mapping("sigma_1s", sigma_1s)
    monitors = _mapping("monitors", monitors)
    interferents = _mapping("interferents", interferents)
    terms = []          # (M, σM, {mass: ρ})
    for name, pair in monitors.items():
        num, _sep, den = str(name).partition("/")
        if den != ref:
            raise InputError("monitors", f"{name!r} is not a ratio to {ref}")
        if not (isinstance(pair, (tuple, list)) and len(pair) == 2):
            raise InputError("monitors", f"[{name!r}] must be (value, 1σ)")
        iel = _element(num)
        comp = _mapping(f"interferents[{iel!r}]", interferents.get(iel)) if iel in interferents else None
        if comp is None:
            raise InputError("interferents", f"no composition of {iel} for the monitor {name!r}")
        m_val, m_sig = as_scalar(f"monitors[{name!r}]", pair[0]), as_scalar(f"monitors[{name!r}] 1σ", pair[1])
        if m_val < 0 or m_sig < 0:
            raise InputError("monitors", f"{name!r}: a monitor ratio and its 1σ must be >= 0")
        rho = {}
        f_mon = as_scalar(f"interferents[{iel!r}][{num!r}]", comp.get(num, 0.0))
        if not f_mon > 0:
            raise InputError("interferents", f"{iel} has no {num} to monitor with")
        for k, f_k in comp.items():
            f_k = as_scalar(f"interferents[{iel!r}][{k!r}]", f_k)
            try:
                mk = _mass_number(str(k))
                m_k = isotope_mass(str(k)).value
            except (ValueError, InputError):
                raise InputError("interferents", f"[{iel!r}] has {k!r}, which is not an isotope name") from None
            if mk in own and k != num and f_k > 0:
                rho[mk] = float(bias_apply(f_k / f_mon, m_k, isotope_mass(num).value, beta, law))
        terms.append((m_val, m_sig, rho))
    md = _mass_number(ref)
    c_d = sum(m * rho.get(md, 0.0) for m, _s, rho in terms)
    if not c_d < 1.0:
        raise UndefinedResultError(f"the interferences on {ref} reach its whole beam: check the monitor ratios")
    out, sig, rel = {}, {}, {}
    for name, r in ratios.items():
        num, _sep, den = str(name).partition("/")
        if den != ref or num not in own.values():
            raise InputError("ratios", f"{name!r} is not a {el} ratio to {ref}")
        r = as_scalar(f"ratios[{name!r}]", r)
        if not r > 0:
            raise InputError("ratios", f"[{name!r}] must be > 0, got {r!r}")
        mi = _mass_number(num)
        c_i = sum(m * rho.get(mi, 0.0) for m, _s, rho in terms)
        s = (float(r) - c_i) / (1.0 - c_d)
        if not s > 0:
            raise UndefinedResultError(f"{name}: the interferences take the whole beam (stripped ratio {s:.3g}): "
                                       "check the monitor ratios")
        var = (as_scalar(f"sigma_1s[{name!r}]", sigma_1s.get(name, 0.0)) / (1.0 - c_d)) ** 2
        for _m, m_sig, rho in terms:
            d_m = (-rho.get(mi, 0.0) * (1.0 - c_d) + rho.get(md, 0.0) * (float(r) - c_i)) / (1.0 - c_d) ** 2
            var += (d_m * m_sig) ** 2
        out[name], sig[name], rel[name] = s, math.sqrt(var), 1.0 - s / float(r)
    return RunStrip(out, sig, rel)
