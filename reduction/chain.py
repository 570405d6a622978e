"""End-to-end reduction of one analysis: raw cycles -> isochron inputs.

Two steps, each usable alone:

1. :func:`reduce_cycles` — beams per cycle -> isobar stripping (cycle by cycle) -> ratios ->
   optional internal normalisation per cycle -> cycle statistics (mean, SEM, outliers).
2. :func:`reduce_spiked_analysis` — mean mixture ratios of the parent and daughter elements of a
   spiked aliquot -> isotope dilution with spike stripping -> blank -> reference-material factor ->
   parent/daughter ratio (e.g. 147Sm/144Nd), daughter ratio (143Nd/144Nd), 1σ, ρ, concentrations,
   with the σ split into random (measurement) and systematic (spike calibration, standard value)
   parts by linear propagation (:mod:`reduction.propagate`), and optionally a seeded Monte Carlo check.

Order of the steps follows common practice (interference stripping before mass bias, ID with
iterative spike stripping, blank subtraction by mass balance, then the session factor).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Dict, List, Mapping, Optional, Sequence, Tuple, Union

import numpy as np

from .blank import blank_umol
from .composition import NaturalComposition, natural_composition
from .constants import isotope_mass
from .cycles import CycleStats, cycle_stats
from .dilution import Spike, element_isotopes, isotope_dilution, sample_composition
from .errors import InputError, UndefinedResultError
from .interference import INTERFERENCES, strip_beams
from .massbias import bias_correct, bias_factor_from
from .propagate import monte_carlo, propagate_linear, rho
from .standards import StandardFactor
from .systems import IsotopeSystem, get_system

__all__ = ["AnalysisResult", "CycleReduction", "reduce_cycles", "reduce_spiked_analysis"]


# ----------------------------------------------------------------------------------- cycles
@dataclass(frozen=True)
class CycleReduction:
    """Cycle-level reduction of one run (or many: rows).

    Attributes
    ----------
    ratios : dict of str to float or ndarray
        Mean of the kept cycles of each ratio (stripped; bias-corrected if ``norm_ratio`` was given).
    sem_1s : dict of str to float or ndarray
        1σ standard error of each mean.
    n_kept, n_rejected : dict of str to int or ndarray
    correction_rel_mean : dict of str to float or ndarray
        Mean relative size of each isobar correction (correction / total beam).
    bias_factor_mean : float or ndarray or None
        Mean per-cycle bias factor of the analyte (with ``norm_ratio``).
    stats : dict of str to CycleStats
    interferent_bias : dict of str to str
        How each interfering element's mass bias was set, in words (e.g. ``"Rb: the analyte's
        per-cycle β (default)"``).
    """

    ratios: Dict[str, Any]
    sem_1s: Dict[str, Any]
    n_kept: Dict[str, Any]
    n_rejected: Dict[str, Any]
    correction_rel_mean: Dict[str, Any]
    bias_factor_mean: Any
    stats: Dict[str, CycleStats]
    interferent_bias: Dict[str, str] = field(default_factory=dict)


def _split(r: str) -> Tuple[str, str]:
    num, sep, den = str(r).partition("/")
    if not sep:
        raise InputError("ratios", f"{r!r} must be written 'num/den'")
    return num.strip(), den.strip()


def reduce_cycles(beams: Mapping[str, Any], system: Union[str, IsotopeSystem], ratios: Sequence[str], *,
                  norm_ratio: Optional[str] = None, norm_true: Optional[float] = None, law: str = "exponential",
                  bias_factors: Optional[Mapping[str, Union[float, str]]] = None,
                  reject_k: Optional[float] = 3.5, max_bias_iter: int = 20,
                  interferent_ratios: Optional[Mapping[str, float]] = None,
                  analyte_bias_factor: Optional[float] = None) -> CycleReduction:
    """Strip isobars cycle by cycle, form ratios, normalise per cycle (optional), then average.

    Parameters
    ----------
    beams : mapping of str to array_like
        Beam per cycle keyed by isotope; 1-D (cycles) or 2-D (analyses x cycles, NaN = missing cycle).
        The interfered mass is keyed by the analyte isotope (``"144Nd"`` = total mass-144 beam).
    system : str or IsotopeSystem
    ratios : sequence of str
        Ratios to report, e.g. ``["143Nd/144Nd", "146Nd/144Nd", "150Nd/144Nd"]``.
    norm_ratio : str, optional
        Internal normalisation per cycle (unspiked runs), e.g. ``"146Nd/144Nd"``; every other ratio is
        bias-corrected with that cycle's factor. Omit for spiked runs (the ID iteration corrects them).
    bias_factors : mapping, optional
        Bias factor of each interfering element (``"Sm"``, ``"Yb"``, ``"Lu"``, ``"Rb"``): a number, or the
        string ``"analyte"`` to use the analyte's own per-cycle factor (needs ``norm_ratio``; solved by
        fixed-point iteration because the stripped beam enters the normalising ratio).
        **An interfering element not listed takes the analyte's β** (common practice): its per-cycle
        factor with ``norm_ratio``, else ``analyte_bias_factor``; with neither it is stripped
        unfractionated (β = 0). ``interferent_bias`` of the result says which was used.
    reject_k : float or None, default 3.5
        Threshold of the default (robust) rule of :func:`reduction.cycles.cycle_stats`: one pass rejecting
        cycles with ``|x - median| > reject_k * 1.4826 * MAD`` (modified z-score, Iglewicz & Hoaglin 1993),
        which leaves the SEM honest on normal cycles; ``None`` keeps every cycle.
    interferent_ratios : mapping of str to float, optional
        True interferent/monitor ratios keyed ``"144Sm/147Sm"`` etc., passed to
        :func:`reduction.interference.strip_beams`; default natural. **Spiked runs:** the residual
        parent element in a daughter run has the spike–sample mixture's composition, so give the
        mixture's bias-corrected ratio from the parent-element run of the same aliquot (e.g.
        144Sm/147Sm, 148Sm/147Sm, 150Sm/147Sm of a 149Sm-spiked mixture; 176Lu/175Lu with a 176Lu
        spike; 87Rb/85Rb with an 87Rb spike). The natural ratio can be wrong ~100-fold there.
    analyte_bias_factor : float, optional
        The analyte's β from elsewhere (e.g. the spike-stripping iteration of a spiked run), used for
        interfering elements not in ``bias_factors`` when there is no ``norm_ratio``.

    Returns
    -------
    CycleReduction
    """
    sysm = get_system(system)
    if not ratios:
        raise InputError("ratios", "name at least one ratio")
    factors = dict(bias_factors or {})
    how: Dict[str, str] = {}
    for el in sorted({_split(f"{i}/{m}")[0].lstrip("0123456789") for _t, i, m in INTERFERENCES[sysm.key]}):
        if el in factors:
            how[el] = ("the analyte's per-cycle β" if isinstance(factors[el], str) else "β given by the caller")
        elif norm_ratio is not None:
            factors[el] = "analyte"
            how[el] = "the analyte's per-cycle β (default, common practice)"
        elif analyte_bias_factor is not None:
            factors[el] = _finite_number("analyte_bias_factor", analyte_bias_factor)
            how[el] = "the analyte's β given as analyte_bias_factor (default, common practice)"
        else:
            how[el] = "β = 0: no analyte β known (no norm_ratio, no analyte_bias_factor)"
    use_analyte = [el for el, v in factors.items() if isinstance(v, str)]
    for el in use_analyte:
        if factors[el] != "analyte":
            raise InputError("bias_factors", f"{el}: use a number or 'analyte', got {factors[el]!r}")
        if norm_ratio is None:
            raise InputError("bias_factors", "'analyte' needs norm_ratio (the analyte's own per-cycle bias)")
    raw = {k: np.array(v, dtype=float) for k, v in beams.items()}
    beta: Any = None
    missing: Any = None
    if norm_ratio is not None:
        n_num, n_den = _split(norm_ratio)
        for iso in (n_num, n_den):
            if iso not in raw:
                raise InputError("beams", f"no beam for {iso!r}, needed by norm_ratio {norm_ratio!r}")
    fixed = {el: v for el, v in factors.items() if not isinstance(v, str)}
    ir = dict(interferent_ratios or {})
    strip = strip_beams(raw, sysm, bias_factors=fixed, law=law, interferent_ratios=ir)
    for _ in range(max(1, int(max_bias_iter)) if use_analyte else 1):
        b = strip.beams
        if norm_ratio is None:
            break
        rn = b[n_num] / b[n_den]
        missing = ~np.isfinite(rn)
        new_beta = np.asarray(bias_factor_from(np.where(missing, 1.0, rn), norm_ratio, true_norm=norm_true,
                                               law=law))
        done = beta is not None and np.all(np.abs(new_beta - beta) <= 1e-12 * (1 + np.abs(new_beta)))
        beta = new_beta
        if not use_analyte or done:
            break
        strip = strip_beams(raw, sysm, bias_factors={**fixed, **{el: beta for el in use_analyte}}, law=law,
                            interferent_ratios=ir)
    b = strip.beams
    out_r: Dict[str, Any] = {}
    out_s: Dict[str, Any] = {}
    nk: Dict[str, Any] = {}
    nr: Dict[str, Any] = {}
    st: Dict[str, CycleStats] = {}
    for r in ratios:
        num, den = _split(r)
        for iso in (num, den):
            if iso not in b:
                raise InputError("beams", f"no beam for {iso!r}, needed by ratio {r!r}")
        with np.errstate(invalid="ignore", divide="ignore"):
            x = b[num] / b[den]
        if norm_ratio is not None and r != norm_ratio:
            gap = ~np.isfinite(x)
            fill = np.where(gap, 1.0, x)
            xc = np.asarray(bias_correct(fill, isotope_mass(num).value, isotope_mass(den).value, beta, law))
            x = np.where(gap, np.nan, xc)
        s = cycle_stats(x, reject_k=reject_k)
        out_r[r], out_s[r], nk[r], nr[r], st[r] = s.mean, s.sem_1s, s.n_kept, s.n_rejected, s
    bmean = None
    if beta is not None:
        bb = np.where(missing, np.nan, beta) if np.ndim(beta) else beta
        bmean = float(np.nanmean(bb)) if np.ndim(bb) <= 1 else np.nanmean(bb, axis=-1)
    return CycleReduction(out_r, out_s, nk, nr, dict(strip.correction_rel_mean), bmean, st, how)


# ------------------------------------------------------------------------------ spiked analysis
OUTPUTS = ("parent_ratio", "daughter_ratio", "parent_conc_ug_g", "daughter_conc_ug_g")


@dataclass(frozen=True)
class AnalysisResult:
    """Isochron inputs and concentrations of one spiked analysis (1σ absolute throughout).

    Attributes
    ----------
    system : str
    parent_ratio_name, daughter_ratio_name : str
        E.g. ``"147Sm/144Nd"`` and ``"143Nd/144Nd"``.
    parent_ratio, parent_ratio_sigma_1s, daughter_ratio, daughter_ratio_sigma_1s : float
    rho : float
        Error correlation of parent and daughter ratio (all error sources).
    parent_conc_ug_g, parent_conc_sigma_1s, daughter_conc_ug_g, daughter_conc_sigma_1s : float
        Blank-corrected element concentrations (µg/g).
    parent_conc_umol_g, daughter_conc_umol_g : float
    sigma_1s_random, sigma_1s_systematic : dict of str to float
        Per output (keys in ``output_names``): measurement part; spike-calibration + standard-value part.
    rho_random : float
        ρ of the two ratios from the random part alone (for an isochron fit whose systematic errors are
        added afterwards).
    cov, cov_random, cov_systematic : ndarray (4, 4)
        Covariances of the outputs in the order of ``output_names``.
    output_names : tuple of str
    input_names : tuple of str
    parent_magnification, daughter_magnification : float
    poor_mix : tuple of str
        Elements whose mixture magnifies errors more than twice the optimum.
    blank_share_parent, blank_share_daughter : float
        Blank / measured total amount.
    iterations : int
        Spike-stripping iterations of the daughter element.
    daughter_bias_factor, parent_bias_factor : float
    mc_sigma_1s : dict or None
        Monte Carlo σ per output (when ``mc_draws`` > 0).
    mc_rho : float or None
    zero_sigma : tuple of str
        Inputs that entered with σ = 0 although they normally carry one (weighings, blanks in use,
        an external β, spike concentrations, external reproducibilities): their uncertainty is missing
        from every σ above.
    """

    system: str
    parent_ratio_name: str
    daughter_ratio_name: str
    parent_ratio: float
    parent_ratio_sigma_1s: float
    daughter_ratio: float
    daughter_ratio_sigma_1s: float
    rho: float
    parent_conc_ug_g: float
    parent_conc_sigma_1s: float
    daughter_conc_ug_g: float
    daughter_conc_sigma_1s: float
    parent_conc_umol_g: float
    daughter_conc_umol_g: float
    sigma_1s_random: Dict[str, float]
    sigma_1s_systematic: Dict[str, float]
    rho_random: float
    cov: np.ndarray
    cov_random: np.ndarray
    cov_systematic: np.ndarray
    output_names: Tuple[str, ...]
    input_names: Tuple[str, ...]
    parent_magnification: float
    daughter_magnification: float
    poor_mix: Tuple[str, ...]
    blank_share_parent: float
    blank_share_daughter: float
    iterations: int
    daughter_bias_factor: float
    parent_bias_factor: float
    mc_sigma_1s: Optional[Dict[str, float]]
    mc_rho: Optional[float]
    zero_sigma: Tuple[str, ...] = ()


def _num(name: str, v: Any, positive: bool = True) -> float:
    try:
        x = float(v)
    except (TypeError, ValueError):
        raise InputError(name, f"must be a number, got {v!r}") from None
    if not np.isfinite(x) or (x <= 0 if positive else x < 0):
        raise InputError(name, f"must be {'> 0' if positive else '>= 0'}, got {x!r}")
    return x


def _naturals(natural: Optional[Mapping[str, NaturalComposition]], elements: Sequence[str]
              ) -> Dict[str, NaturalComposition]:
    given = dict(natural or {})
    out = {}
    for el in elements:
        c = given.get(el)
        if c is None:
            c = natural_composition(el)
        elif not isinstance(c, NaturalComposition) or c.element != el:
            raise InputError("natural", f"[{el!r}] must be the NaturalComposition of {el} "
                             "(see reduction.composition.natural_composition)")
        out[el] = c
    return out


_SIGMA_EXPECTED = ("sample_mass_g", "spike_mass_g", "parent_bias_factor", "parent_spike_conc", "daughter_spike_conc",
                   "parent_ratio_reproducibility", "daughter_ratio_reproducibility")


def _finite_number(name: str, v: Any) -> float:
    try:
        x = float(v)
    except (TypeError, ValueError):
        raise InputError(name, f"must be a number, got {v!r}") from None
    if not np.isfinite(x):
        raise InputError(name, f"must be finite, got {x!r}")
    return x


def _ratio_dict(name: str, d: Optional[Mapping[str, Any]]) -> Dict[str, float]:
    if d is None:
        return {}
    if not isinstance(d, Mapping):
        raise InputError(name, "must be a mapping of ratio name to value")
    return {str(k): _num(f"{name}[{k!r}]", v) for k, v in d.items()}


def _sigma_dict(name: str, d: Optional[Mapping[str, Any]], keys: Sequence[str]) -> Dict[str, float]:
    d = dict(d or {})
    for k in d:
        if k not in keys:
            raise InputError(name, f"has {k!r}, which is not among the measured ratios {list(keys)}")
    return {k: _num(f"{name}[{k!r}]", d.get(k, 0.0), positive=False) for k in keys}


def reduce_spiked_analysis(system: Union[str, IsotopeSystem], parent_mix: Mapping[str, float],
                           daughter_mix: Mapping[str, float], sample_mass_g: float, spike_mass_g: float,
                           parent_spike: Spike, daughter_spike: Spike, *,
                           parent_mix_sigma_1s: Optional[Mapping[str, float]] = None,
                           daughter_mix_sigma_1s: Optional[Mapping[str, float]] = None,
                           parent_norm_ratio: Optional[str] = None, parent_bias_factor: Optional[float] = None,
                           parent_bias_sigma_1s: float = 0.0, daughter_norm_ratio: Optional[str] = "system",
                           law: str = "exponential",
                           daughter_unspiked: Optional[Mapping[str, float]] = None,
                           daughter_unspiked_sigma_1s: Optional[Mapping[str, float]] = None,
                           sample_mass_sigma_1s: float = 0.0, spike_mass_sigma_1s: float = 0.0,
                           parent_blank_ng: float = 0.0, parent_blank_sigma_ng: float = 0.0,
                           daughter_blank_ng: float = 0.0, daughter_blank_sigma_ng: float = 0.0,
                           standard: Optional[StandardFactor] = None, spike_rho: float = 0.0,
                           mc_draws: int = 0, seed: int = 12345,
                           natural: Optional[Mapping[str, NaturalComposition]] = None,
                           daughter_blank_ratio: Optional[float] = None,
                           daughter_blank_ratio_sigma_1s: float = 0.0,
                           parent_ratio_reproducibility_rel_1s: float = 0.0,
                           daughter_ratio_reproducibility_rel_1s: Optional[float] = None) -> AnalysisResult:
    """Reduce one spiked analysis (mixed spike, one weighing) to the inputs of the isochron fit.

    Parameters
    ----------
    system : str or IsotopeSystem
        ``"sm-nd"``, ``"lu-hf"`` or ``"rb-sr"``.
    parent_mix, daughter_mix : mapping of str to float
        Mean mixture ratios (interference-stripped, not bias-corrected), all of the parent element to one
        reference isotope, and of the daughter element to the system's reference isotope, e.g.
        ``{"149Sm/152Sm": .., "147Sm/152Sm": ..}`` and ``{"143Nd/144Nd": .., "146Nd/144Nd": .., "150Nd/144Nd": ..}``.
    sample_mass_g, spike_mass_g : float
        Weighed sample and (mixed) spike masses (g).
    parent_spike, daughter_spike : Spike
        The two element records of the spike.
    parent_mix_sigma_1s, daughter_mix_sigma_1s : mapping, optional
        1σ (standard errors of the cycle means) of the mixture ratios; random.
    parent_norm_ratio : str, optional
        Internal normalisation of the parent (e.g. ``"147Sm/152Sm"``); else ``parent_bias_factor`` (external,
        e.g. from a standard; needed for two-isotope Lu and Rb) with ``parent_bias_sigma_1s``.
    daughter_norm_ratio : str or None
        Default ``"system"``: the system's normalising ratio (146Nd/144Nd, 179Hf/177Hf, 86Sr/88Sr).
    daughter_unspiked : mapping, optional
        Separate unspiked aliquot: its normalised ratios (e.g. ``{"143Nd/144Nd": 0.51261}``) define the
        sample composition, and its daughter ratio is reported (blank correction then applies to the
        concentration only). Without it the daughter ratio comes from the spiked run by spike stripping.
    sample_mass_sigma_1s, spike_mass_sigma_1s : float
        1σ of the weighings (random).
    parent_blank_ng, daughter_blank_ng : float
        Procedural blank (ng of element, natural composition) ± σ (random).
    standard : StandardFactor, optional
        Session factor applied to the daughter ratio (:mod:`reduction.standards`); its session SEM and
        reproducibility are random, the accepted value's σ systematic.
    spike_rho : float
        Correlation of the two spike concentrations (a mixed spike calibrated as one solution).
    mc_draws : int
        > 0: also propagate by seeded Monte Carlo with that many draws.
    natural : mapping of str to NaturalComposition, optional
        Natural composition per element (``"Sm"``, ``"Nd"``, ...) used by isotope dilution and by the
        blank; default :func:`reduction.composition.natural_composition` (CIAAW, exponential-law
        fractionated to the element's normalising ratio).
    daughter_blank_ratio, daughter_blank_ratio_sigma_1s : float, optional
        The blank's daughter ratio (e.g. its 143Nd/144Nd) ± 1σ; default natural (σ 0).
    parent_ratio_reproducibility_rel_1s : float
        External reproducibility of the parent/daughter ratio (relative 1σ, e.g. from replicate
        analyses of a reference material), random, multiplies the P/D ratio.
    daughter_ratio_reproducibility_rel_1s : float, optional
        External reproducibility of the daughter ratio (relative 1σ). Default: the session's
        primary-standard scatter (``standard.reproducibility_rel_1s``), or 0 without a standard.

    Returns
    -------
    AnalysisResult

    Notes
    -----
    Propagation: linear (GUM, JCGM 100:2008) with a complex-step Jacobian of the whole chain (exact to
    rounding; Martins, Sturdza & Alonso 2003, ACM TOMS 29, 245-262);
    random = mixture ratios, weighings, blanks (amount and composition), unspiked ratios, external β,
    standard session mean and the external reproducibilities; systematic = spike concentrations and
    the standard's accepted value. The spike's isotopic composition is taken as exact. The decay
    constant enters only at the isochron stage. ``zero_sigma`` of the result lists the inputs that
    entered with σ = 0 although they normally carry an uncertainty.
    """
    sysm = get_system(system)
    if not isinstance(parent_spike, Spike) or not isinstance(daughter_spike, Spike):
        raise InputError("parent_spike" if not isinstance(parent_spike, Spike) else "daughter_spike",
                         "must be a Spike (see reduction.dilution.make_spike)")
    if parent_spike.element != sysm.parent_element:
        raise InputError("parent_spike", f"is a {parent_spike.element} spike; {sysm.label} needs {sysm.parent_element}")
    if daughter_spike.element != sysm.daughter_element:
        raise InputError("daughter_spike", f"is a {daughter_spike.element} spike; {sysm.label} needs "
                         f"{sysm.daughter_element}")
    pm = _ratio_dict("parent_mix", parent_mix)
    dm = _ratio_dict("daughter_mix", daughter_mix)
    if not pm:
        raise InputError("parent_mix", "no ratios given")
    if not dm:
        raise InputError("daughter_mix", "no ratios given")
    p_ref = _split(next(iter(pm)))[1]
    d_ref = sysm.reference
    for k in dm:
        if _split(k)[1] != d_ref:
            raise InputError("daughter_mix", f"{k!r}: every daughter ratio must be to {d_ref}")
    ps = _sigma_dict("parent_mix_sigma_1s", parent_mix_sigma_1s, list(pm))
    ds = _sigma_dict("daughter_mix_sigma_1s", daughter_mix_sigma_1s, list(dm))
    du = _ratio_dict("daughter_unspiked", daughter_unspiked)
    dus = _sigma_dict("daughter_unspiked_sigma_1s", daughter_unspiked_sigma_1s, list(du))
    if du and sysm.daughter_ratio not in du:
        raise InputError("daughter_unspiked", f"must contain {sysm.daughter_ratio}")
    d_norm = sysm.normalising_ratio if daughter_norm_ratio == "system" else daughter_norm_ratio
    if parent_norm_ratio is None and parent_bias_factor is None:
        raise InputError("parent_bias_factor", f"give parent_norm_ratio or an external parent_bias_factor for "
                         f"{sysm.parent_element} (use 0.0 explicitly for no correction)")
    if parent_norm_ratio is not None and parent_bias_factor is not None:
        raise InputError("parent_bias_factor", "give either parent_norm_ratio or parent_bias_factor")
    ws = _num("sample_mass_g", sample_mass_g)
    wt = _num("spike_mass_g", spike_mass_g)
    rho_sp = float(spike_rho)
    if not -1 <= rho_sp <= 1:
        raise InputError("spike_rho", f"must lie in [-1, 1], got {rho_sp!r}")
    if standard is not None and not isinstance(standard, StandardFactor):
        raise InputError("standard", "must be a StandardFactor (see reduction.standards.standard_factor)")

    # ---- flat input vector: names, values, σ, group
    names: List[str] = []
    vals: List[float] = []
    sig: List[float] = []
    grp: List[str] = []

    def add(n: str, v: float, s: float, g: str = "random") -> int:
        names.append(n)
        vals.append(float(v))
        sig.append(_num(f"σ of {n}", s, positive=False))
        grp.append(g)
        return len(names) - 1

    i_pm = {k: add(f"parent_mix {k}", v, ps[k]) for k, v in pm.items()}
    i_dm = {k: add(f"daughter_mix {k}", v, ds[k]) for k, v in dm.items()}
    i_du = {k: add(f"daughter_unspiked {k}", v, dus[k]) for k, v in du.items()}
    i_ws = add("sample_mass_g", ws, sample_mass_sigma_1s)
    i_wt = add("spike_mass_g", wt, spike_mass_sigma_1s)
    i_pb = add("parent_blank_ng", _num("parent_blank_ng", parent_blank_ng, False), parent_blank_sigma_ng)
    i_db = add("daughter_blank_ng", _num("daughter_blank_ng", daughter_blank_ng, False), daughter_blank_sigma_ng)
    i_pc = add("parent_spike_conc", parent_spike.concentration_umol_g, parent_spike.concentration_sigma_1s,
               "systematic")
    i_dc = add("daughter_spike_conc", daughter_spike.concentration_umol_g, daughter_spike.concentration_sigma_1s,
               "systematic")
    i_pbf = None
    if parent_bias_factor is not None:
        try:
            pbf = float(parent_bias_factor)
        except (TypeError, ValueError):
            raise InputError("parent_bias_factor", f"must be a number, got {parent_bias_factor!r}") from None
        if not np.isfinite(pbf):
            raise InputError("parent_bias_factor", "must be finite")
        i_pbf = add("parent_bias_factor", pbf, parent_bias_sigma_1s)
    nat = _naturals(natural, (sysm.parent_element, sysm.daughter_element))
    d_rep = (standard.reproducibility_rel_1s if standard is not None else 0.0) \
        if daughter_ratio_reproducibility_rel_1s is None \
        else _num("daughter_ratio_reproducibility_rel_1s", daughter_ratio_reproducibility_rel_1s, False)
    i_prep = add("parent_ratio_reproducibility", 1.0,
                 _num("parent_ratio_reproducibility_rel_1s", parent_ratio_reproducibility_rel_1s, False))
    i_drep = add("daughter_ratio_reproducibility", 1.0, d_rep)
    d_blank_comp = sample_composition(sysm.daughter_element, d_ref, natural=nat[sysm.daughter_element])
    rb0 = d_blank_comp[sysm.daughter_ratio] if daughter_blank_ratio is None \
        else _num("daughter_blank_ratio", daughter_blank_ratio)
    i_dbr = add("daughter_blank_ratio", rb0, daughter_blank_ratio_sigma_1s)
    if standard is not None:
        i_fr = add("standard_factor", standard.factor, standard.factor_sigma_1s_random)
        i_fs = add("standard_accepted", 1.0, standard.factor_sigma_1s_systematic / standard.factor, "systematic")
    x0 = np.array(vals)
    cov = np.diag(np.array(sig) ** 2)
    cov[i_pc, i_dc] = cov[i_dc, i_pc] = rho_sp * sig[i_pc] * sig[i_dc]

    p_iso = sysm.parent
    p_nat, d_nat = nat[sysm.parent_element], nat[sysm.daughter_element]
    blank_p_per_ng = blank_umol(1.0, sysm.parent_element, p_ref, natural=p_nat)   # µmol of p_ref per ng of blank
    p_blank_comp = sample_composition(sysm.parent_element, p_ref, natural=p_nat)
    d_isos = element_isotopes(sysm.daughter_element)
    p_isos = element_isotopes(sysm.parent_element)
    p_mass_per_ref_blank = sum(p_blank_comp[f"{i}/{p_ref}"] * isotope_mass(i).value for i in p_isos)
    p_count_per_ref_blank = sum(p_blank_comp[f"{i}/{p_ref}"] for i in p_isos)
    d_other = {i: d_blank_comp[f"{i}/{d_ref}"] for i in d_isos if f"{i}/{d_ref}" != sysm.daughter_ratio}
    m_daughter = isotope_mass(sysm.daughter).value
    info: Dict[str, Any] = {}

    def d_blank(rb: Any) -> Tuple[Any, Any, Any]:
        """(µmol of d_ref per ng, g per µmol of d_ref, atoms per atom of d_ref) of a blank with daughter ratio rb."""
        count = sum(d_other.values()) + rb
        mass = sum(v * isotope_mass(i).value for i, v in d_other.items()) + rb * m_daughter
        return 1e-3 / mass, mass, count

    def model(X: np.ndarray) -> np.ndarray:
        X = np.asarray(X)
        if X.dtype.kind != "c":   # complex: the complex-step Jacobian below
            X = X.astype(float)
        w_s, w_t = X[i_ws], X[i_wt]
        pdil = isotope_dilution({k: X[i] for k, i in i_pm.items()}, parent_spike, w_s, w_t,
                                reference_isotope=p_ref, norm_ratio=parent_norm_ratio,
                                bias_factor=None if i_pbf is None else X[i_pbf], law=law, natural=p_nat)
        ddil = isotope_dilution({k: X[i] for k, i in i_dm.items()}, daughter_spike, w_s, w_t,
                                reference_isotope=d_ref, norm_ratio=d_norm, law=law,
                                sample_ratios={k: X[i] for k, i in i_du.items()} or None, natural=d_nat)
        blank_d_per_ng, d_mass_per_ref_blank, d_count_per_ref_blank = d_blank(X[i_dbr])
        cp = X[i_pc] / parent_spike.concentration_umol_g
        cd = X[i_dc] / daughter_spike.concentration_umol_g
        # measured totals (sample + blank), µmol per g of sample
        p_ref_tot = pdil.ref_umol_g * cp
        d_ref_tot = ddil.ref_umol_g * cd
        p_ref_b = X[i_pb] * blank_p_per_ng / w_s
        d_ref_b = X[i_db] * blank_d_per_ng / w_s
        n_p = p_ref_tot * np.asarray(pdil.sample_ratios[f"{p_iso}/{p_ref}"]) \
            - p_ref_b * p_blank_comp[f"{p_iso}/{p_ref}"]
        n_dref = d_ref_tot - d_ref_b
        rd_tot = np.asarray(ddil.sample_ratios[sysm.daughter_ratio])
        if i_du:
            r_d = rd_tot  # separate unspiked aliquot: its own ratio
        else:
            r_d = (d_ref_tot * rd_tot - d_ref_b * X[i_dbr]) / n_dref
        r_d = r_d * X[i_drep]
        if standard is not None:
            r_d = r_d * X[i_fr] * X[i_fs]
        c_p = p_ref_tot * np.asarray(pdil.conc_ug_g) / np.asarray(pdil.ref_umol_g) \
            - p_ref_b * p_mass_per_ref_blank
        c_d = d_ref_tot * np.asarray(ddil.conc_ug_g) / np.asarray(ddil.ref_umol_g) \
            - d_ref_b * d_mass_per_ref_blank
        if not info:
            info.update(pdil=pdil, ddil=ddil, p_share=p_ref_b / p_ref_tot, d_share=d_ref_b / d_ref_tot,
                        cp_umol=p_ref_tot * np.asarray(pdil.conc_umol_g) / np.asarray(pdil.ref_umol_g)
                        - p_ref_b * p_count_per_ref_blank,
                        cd_umol=d_ref_tot * np.asarray(ddil.conc_umol_g) / np.asarray(ddil.ref_umol_g)
                        - d_ref_b * d_count_per_ref_blank)
        return np.array([n_p / n_dref * X[i_prep], r_d, c_p, c_d])

    y0 = model(x0)
    if np.any(y0 <= 0):
        bad = [OUTPUTS[j] for j in range(4) if y0[j] <= 0]
        raise UndefinedResultError(f"blank correction leaves a non-positive {', '.join(bad)}: blank too large")
    groups = {g: [j for j, gg in enumerate(grp) if gg == g] for g in ("random", "systematic")}
    # Jacobian by the complex step, Im f(x + ih)/h (Squire & Trapp 1998; Martins, Sturdza & Alonso 2003):
    # the whole chain is analytic arithmetic (the iteration of the spike stripping included, which
    # carries the derivative along as it converges), so J is exact to rounding — no step-size trade-off,
    # and the same numbers whatever numpy or libm computes exp and log. h is tiny against each input
    # (or its σ, for inputs that are 0) so that h² terms vanish below double precision.
    steps = 1e-20 * np.maximum(np.abs(x0), np.array(sig))
    steps[steps == 0] = 1e-20
    prop = propagate_linear(model, x0, cov, groups=groups, names=OUTPUTS, method="complex", abs_step=steps,
                            value=y0)
    cov_y = prop.cov
    cr = prop.parts.get("random", np.zeros((4, 4)))
    cs = prop.parts.get("systematic", np.zeros((4, 4)))
    mc_s = mc_r = None
    if int(mc_draws) > 0:
        mc = monte_carlo(model, x0, cov, n_draws=int(mc_draws), seed=seed)
        mc_s = {n: float(s) for n, s in zip(OUTPUTS, mc.sigma_1s)}
        mc_r = float(mc.corr[0, 1])
    pdil, ddil = info["pdil"], info["ddil"]
    poor = tuple(el for el, d in ((sysm.parent_element, pdil), (sysm.daughter_element, ddil)) if bool(d.poor_mix))
    s = prop.sigma_1s
    rr = rho(cr)
    return AnalysisResult(
        sysm.key, sysm.parent_ratio, sysm.daughter_ratio, float(y0[0]), float(s[0]), float(y0[1]), float(s[1]),
        float(prop.corr[0, 1]), float(y0[2]), float(s[2]), float(y0[3]), float(s[3]),
        float(info["cp_umol"]), float(info["cd_umol"]),
        {n: float(v) for n, v in zip(OUTPUTS, np.sqrt(np.diag(cr)))},
        {n: float(v) for n, v in zip(OUTPUTS, np.sqrt(np.diag(cs)))},
        float(rr[0, 1]), cov_y, cr, cs, OUTPUTS, tuple(names),
        float(pdil.magnification), float(ddil.magnification), poor, float(info["p_share"]),
        float(info["d_share"]), int(ddil.iterations), float(ddil.bias_factor), float(pdil.bias_factor),
        mc_s, mc_r, tuple(n for n, v, sg in zip(names, vals, sig) if sg == 0 and (
            n in _SIGMA_EXPECTED or (n.endswith("_blank_ng") and v > 0)
            or n.startswith(("parent_mix", "daughter_mix")))))

