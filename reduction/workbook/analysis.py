"""One analysis of the Results sheet: its runs, mass bias, interferences, spikes and standards, reduced
by the engine's chain.
"""
from __future__ import annotations

import math
from functools import lru_cache
from typing import Any, Callable, Dict, List, Mapping, Optional, Tuple

from ..errors import InputError, RatioDeskError
from .sheets import MEASURED, RUNS, SAMPLES, SPIKES
from .standards import (
    _SIGMA_WORDS,
    PLAUSIBLE_BLANK_SHARE_MAX,
    PLAUSIBLE_CONC_UG_G,
    PLAUSIBLE_MAGNIFICATION_MAX,
    PLAUSIBLE_SAMPLE_MASS_G,
    PLAUSIBLE_SPIKE_MASS_G,
    SPIKE_RHO,
    _standard,
    spike_ratio_sigma_rel,
)
from .tables import (
    _NORM_RATIO,
    _REFERENCE_ISOTOPE,
    _YB_PAIR,
    Table,
    _cycle_table,
    _lab,
    _naturals,
    _oxygen,
    _refset,
    _run,
    _spike,
    as_rows,
)
from .values import FIRST_ROW, MARKER, CellError, Rows, shown


def _plausibility(res: Any, system: Any, sample_mass: float, spike_mass: float) -> List[str]:
    """Plausibility warnings of one analysis (ranges above)."""
    out: List[str] = []
    lo, hi = PLAUSIBLE_SAMPLE_MASS_G
    if not lo <= sample_mass <= hi:
        out.append(f"sample mass {sample_mass:g} g is outside {lo:g}-{hi:g} g (typed in mg?)")
    lo, hi = PLAUSIBLE_SPIKE_MASS_G
    if not lo <= spike_mass <= hi:
        out.append(f"spike mass {spike_mass:g} g is outside {lo:g}-{hi:g} g (typed in mg?)")
    for el, mag in ((system.parent_element, res.parent_magnification),
                    (system.daughter_element, res.daughter_magnification)):
        if mag > PLAUSIBLE_MAGNIFICATION_MAX:
            out.append(f"{el} error magnification {mag:.3g} > {PLAUSIBLE_MAGNIFICATION_MAX:g}")
    for el, share in ((system.parent_element, res.blank_share_parent),
                      (system.daughter_element, res.blank_share_daughter)):
        if share > PLAUSIBLE_BLANK_SHARE_MAX:
            out.append(f"{el} blank is {100 * share:.3g} % of the measured total "
                       f"(> {100 * PLAUSIBLE_BLANK_SHARE_MAX:g} %)")
    for el, c in ((system.parent_element, res.parent_conc_ug_g), (system.daughter_element, res.daughter_conc_ug_g)):
        lo, hi = PLAUSIBLE_CONC_UG_G.get(el, (0.0, math.inf))
        if not lo <= c <= hi:
            out.append(f"{el} {c:.4g} µg/g is outside the broad natural range {lo:g}-{hi:g} µg/g")
    return out


# result, ε, spike x scale, warnings, session factor, intermediate steps (stripping, where β came from)
AnalysisOutcome = Tuple[Any, Any, float, Tuple[str, ...], Any, Dict[str, Any]]
#: Passes of the stripping-and-reduction fixed point (converges in 2-4 for any realistic interference).
_STRIP_PASSES = 12
StandardLookup = Callable[[str, str, Callable[[str], CellError]], Any]

#: The systems the template's sheets reduce (Samples column System).
WORKBOOK_SYSTEMS = {"sm-nd": "Sm-Nd", "lu-hf": "Lu-Hf", "rb-sr": "Rb-Sr"}


@lru_cache(maxsize=256)
def _analysis(analysis: str, samples: Rows, measured: Rows, spikes: Rows, standards: Rows,
              constants: Rows, mc_draws: int = 0, runs: Rows = ()) -> AnalysisOutcome:
    """(AnalysisResult, epsilon today, spike P/D calibration rel. 1σ, Check warnings, ...) of one analysis."""
    return _analysis_of(analysis, Table.from_range(SAMPLES, samples), Table.from_range(MEASURED, measured),
                        Table.from_range(SPIKES, spikes),
                        lambda session, ratio, where: _standard(standards, constants, session, ratio, where),
                        constants, mc_draws, Table.from_range(RUNS, runs) if runs else None)


def _analysis_of(analysis: str, st: Table, mt: Table, sp: Table, standard: StandardLookup, constants: Rows,
                 mc_draws: int = 0, rt: Optional[Table] = None) -> AnalysisOutcome:
    """:func:`_analysis` on tables already read (the batch path reads each table once for every analysis).

    ``standard(session, ratio, where)`` returns the session factor (:func:`_standard`).
    """
    from ..ages import epsilon
    from ..chain import reduce_spiked_analysis
    from ..systems import get_system

    hits = st.find(analysis=analysis)
    if not hits:
        raise CellError("Samples", None, "A", "Analysis", f"no row for analysis {shown(analysis)}")
    if len(hits) > 1:
        raise st.error(hits[1], "analysis", f"analysis ID {shown(analysis)} is used twice (first on row "
                       f"{st.first_row + hits[0]}): every analysis needs its own ID")
    i = hits[0]
    system_text = st.text(i, "system")
    try:
        system = get_system(system_text)
    except InputError:
        raise st.error(i, "system", f"unknown isotope system {shown(system_text)}: type one of "
                       f"{', '.join(WORKBOOK_SYSTEMS.values())}") from None
    if system.key not in WORKBOOK_SYSTEMS:
        raise st.error(i, "system", f"{shown(system_text)}: the workbook reduces "
                       f"{' and '.join(WORKBOOK_SYSTEMS.values())} only")
    sample_mass = st.number(i, "sample_mass_g", positive=True)
    spike_mass = st.number(i, "spike_mass_g", positive=True)
    label = st.text(i, "spike")
    session = st.text(i, "session")
    pb = st.number(i, "parent_blank_ng", required=False)
    db = st.number(i, "daughter_blank_ng", required=False)
    weighing = _lab(constants, "lab.weighing_1s_g")
    blank_rel = _lab(constants, "lab.blank_1s_pct") / 100.0
    nan = float("nan")

    def sigma(key: str, default: float) -> float:
        v = st.number(i, key, required=False, default=nan)
        if math.isnan(v):
            return default
        if v < 0:
            raise st.error(i, key, f"a 1σ must be >= 0, got {v!r}")
        return v

    for key in ("parent_blank_ng", "daughter_blank_ng"):
        if st.number(i, key, required=False) < 0:
            raise st.error(i, key, "a blank must be >= 0 ng")
    ws_s = sigma("sample_mass_1s_g", weighing)
    wt_s = sigma("spike_mass_1s_g", weighing)
    pb_s = sigma("parent_blank_1s_ng", pb * blank_rel)
    db_s = sigma("daughter_blank_1s_ng", db * blank_rel)
    rb = st.number(i, "daughter_blank_ratio", required=False, default=nan)
    rb_s = sigma("daughter_blank_ratio_1s", 0.0)
    if not math.isnan(rb) and rb <= 0:
        raise st.error(i, "daughter_blank_ratio", f"must be > 0, got {rb!r}")
    if math.isnan(rb) and rb_s > 0:
        raise st.error(i, "daughter_blank_ratio_1s", "a 1σ without a blank daughter ratio: type the ratio too")

    def at(key: str) -> Callable[[str], CellError]:
        return lambda problem: st.error(i, key, problem)

    p_el, d_el = system.parent_element, system.daughter_element
    p_spike = _spike(sp, label, p_el, at("spike"))
    d_spike = _spike(sp, label, d_el, at("spike"))
    oxygen = (_oxygen(constants, "17O/16O"), _oxygen(constants, "18O/16O"))

    def run_err(row: int, key: str, problem: str) -> CellError:
        """A problem of a run: at its Measured cell, or (a run from cycles only) at the analysis."""
        if row >= 0:
            return mt.error(row, key, problem)
        return st.error(i, "analysis", f"{problem} (this run comes from the Cycles sheet: add a Measured row with "
                        "its analysis and element for β and Ion, its ratio columns empty)")

    p_mix, p_sig, p_bf, p_bf_s, _pi, p_mon = _run(mt, analysis, p_el, at("analysis"), oxygen, rt)
    d_mix, d_sig, d_bf, _d_bf_s, d_i, d_mon = _run(mt, analysis, d_el, at("analysis"), oxygen, rt)
    if d_bf is not None:
        raise run_err(d_i, "bias_factor", f"{d_el} is normalised to {_NORM_RATIO[d_el]} within its own run, so a "
                       "typed β would not be used: leave β and its 1σ empty on this row")
    std = standard(session, system.daughter_ratio, at("session"))
    ref = _refset(constants)
    naturals = _naturals(constants)
    beta_from = "typed" if p_bf is not None else ("internal" if p_el in _NORM_RATIO else "")
    if _YB_PAIR[0] in p_mon or _YB_PAIR[1] in p_mon:
        p_bf, p_bf_s = _beta_from_doping(lambda key, problem: run_err(_pi, key, problem), p_mon, p_bf)
        beta_from = "Yb doping (173Yb/171Yb)"
    if p_mon.keys() - {_YB_PAIR[1]}:
        if p_bf is None:
            raise run_err(_pi, "bias_factor", f"stripping the isobars of the {p_el} run needs its β: type β, or "
                           "give Yb doping ratios")
        p_mix, p_sig, p_strip = _strip(lambda key, problem: run_err(_pi, key, problem), p_el, p_mix, p_sig,
                                       {k: v for k, v in p_mon.items() if k != _YB_PAIR[1]}, {}, p_bf)
    else:
        p_strip = {}
    kw: Dict[str, Any] = {}
    if p_bf is None and p_el not in _NORM_RATIO:
        raise run_err(_pi, "bias_factor", f"{p_el} has two isotopes, so its run cannot normalise itself: type its "
                       "mass-bias factor β (exponential law) and β 1σ, e.g. from a reference-material run of the "
                       "same session")
    if p_bf is None:
        kw["parent_norm_ratio"] = _NORM_RATIO.get(p_el)
    else:
        kw["parent_bias_factor"] = p_bf
        kw["parent_bias_sigma_1s"] = p_bf_s
    natural = {el: naturals[el] for el in (p_el, d_el) if el in naturals}

    def chain(d_ratios: Mapping[str, float], d_sigmas: Mapping[str, float], draws: int) -> Any:
        return reduce_spiked_analysis(
            system.key, p_mix, d_ratios, sample_mass, spike_mass, p_spike, d_spike,
            parent_mix_sigma_1s=p_sig, daughter_mix_sigma_1s=d_sigmas, daughter_norm_ratio=_NORM_RATIO.get(d_el),
            sample_mass_sigma_1s=ws_s, spike_mass_sigma_1s=wt_s,
            parent_blank_ng=pb, parent_blank_sigma_ng=pb_s, daughter_blank_ng=db, daughter_blank_sigma_ng=db_s,
            daughter_blank_ratio=None if math.isnan(rb) else rb, daughter_blank_ratio_sigma_1s=rb_s,
            parent_ratio_reproducibility_rel_1s=_lab(constants, "lab.pd_reproducibility_1s_pct") / 100.0,
            natural=natural, standard=std, spike_rho=SPIKE_RHO, mc_draws=draws, **kw)

    d_strip: Dict[str, float] = {}
    try:
        if not d_mon:
            res = chain(d_mix, d_sig, mc_draws)
        else:
            # the isobars are fractionated with the daughter's β, which the chain finds from the stripped
            # ratios: iterate to the fixed point (the correction is small, so a few passes suffice)
            res = chain(d_mix, d_sig, 0)
            for _ in range(_STRIP_PASSES):
                comps = _interferent_compositions(d_mon, p_el, p_spike, p_mix, res.parent_bias_factor,
                                                  naturals.get(p_el))
                d_s, d_ss, d_strip = _strip(lambda key, problem: run_err(d_i, key, problem), d_el, d_mix, d_sig,
                                            d_mon, comps, res.daughter_bias_factor)
                beta_before = res.daughter_bias_factor
                res = chain(d_s, d_ss, 0)
                if abs(res.daughter_bias_factor - beta_before) <= 1e-15 * max(1.0, abs(beta_before)):
                    break
            if mc_draws:
                res = chain(d_s, d_ss, mc_draws)
        eps = epsilon(res.daughter_ratio, res.daughter_ratio_sigma_1s, res.parent_ratio, 0.0, system, ref)
    except RatioDeskError as exc:
        raise CellError("Samples", FIRST_ROW + i, "A", "Analysis", f"analysis {shown(analysis)}: {exc}") from None
    warn: List[str] = [f"poor spike-sample mix for {el}" for el in res.poor_mix]
    warn += _plausibility(res, system, sample_mass, spike_mass)
    zero = [_SIGMA_WORDS.get(n, n) for n in res.zero_sigma if not n.startswith(("parent_mix", "daughter_mix"))]
    if any(n.startswith(("parent_mix", "daughter_mix")) for n in res.zero_sigma):
        zero.append("measured ratio")
    if zero:
        warn.append("σ = 0 (nothing typed, no lab default) for: " + ", ".join(dict.fromkeys(zero)))
    steps = {"strip_parent_ppm": 1e6 * max(p_strip.values(), default=0.0),
             "strip_daughter_ppm": 1e6 * max(d_strip.values(), default=0.0), "beta_parent_from": beta_from}
    return res, eps, spike_ratio_sigma_rel(p_spike, d_spike), tuple(warn), std, steps


def _beta_from_doping(err: Callable[[str, str], CellError], mon: Mapping[str, Tuple[float, float]],
                      typed: Optional[float]) -> Tuple[float, float]:
    """β of a Lu run from its Yb doping: 173Yb/171Yb = (173Yb/175Lu)/(171Yb/175Lu) against the convention.

    The exponential law's β is applied to Lu (common practice: the dopant's bias stands for the analyte's);
    1σ from the two ratios' 1σ, taken as independent.
    """
    from ..massbias import bias_factor_from, ratio_masses

    a, b, pair = _YB_PAIR
    if a not in mon or b not in mon:
        raise err("r1_name", f"Yb doping needs both {a} and {b} on the Lu row (one is missing)")
    if typed is not None:
        raise err("bias_factor", "β is typed and also given by Yb doping: keep one (clear β and β 1σ to use "
                       "the doping)")
    (ra, sa), (rb_, sb) = mon[a], mon[b]
    if not (ra > 0 and rb_ > 0):
        raise err("r1_name", f"the Yb doping ratios must be > 0 (got {a} = {ra!r}, {b} = {rb_!r})")
    beta = float(bias_factor_from(ra / rb_, pair))
    m1, m2 = ratio_masses(pair)
    sigma = math.hypot(sa / ra, sb / rb_) / abs(math.log(m1 / m2))
    return beta, sigma


def _interferent_compositions(monitors: Mapping[str, Any], parent: str, parent_spike: Any,
                              parent_mix: Mapping[str, float], parent_beta: float, parent_natural: Any
                              ) -> Dict[str, Dict[str, float]]:
    """True atom fractions of each interfering element of a daughter run.

    The parent element of the analysis (Sm on Nd, Lu on Hf, Rb on Sr) is a spike–sample mixture: its
    composition follows from the parent run's spike-isotope ratio, bias-corrected with the parent's β
    (:func:`reduction.dilution.mixture_fractions`). Others (Ce, Yb) are natural.
    """
    from ..composition import natural_composition
    from ..dilution import mixture_fractions
    from ..massbias import correct_named

    out: Dict[str, Dict[str, float]] = {}
    for name in monitors:
        el = name.partition("/")[0].lstrip("0123456789")
        if el in out:
            continue
        if el == parent:
            ref = _REFERENCE_ISOTOPE[parent]
            ratio = f"{parent_spike.spike_isotope}/{ref}"
            r_true = float(correct_named(parent_mix[ratio], ratio, parent_beta))
            out[el] = mixture_fractions(parent_natural or natural_composition(el), parent_spike, ref, r_true)
        else:
            comp = natural_composition(el)
            out[el] = {iso: float(comp.fraction(iso)) for iso in comp.isotopes}
    return out


def _strip(err: Callable[[str, str], CellError], element: str, ratios: Mapping[str, float], sigmas: Mapping[str, float],
           monitors: Mapping[str, Tuple[float, float]], comps: Mapping[str, Mapping[str, float]], beta: float
           ) -> Tuple[Dict[str, float], Dict[str, float], Dict[str, float]]:
    """:func:`reduction.interference.strip_run_ratios` for one Measured row; a failure names the row."""
    from ..composition import natural_composition
    from ..interference import strip_run_ratios

    comps = dict(comps)
    for name in monitors:
        el = name.partition("/")[0].lstrip("0123456789")
        if el not in comps:
            c = natural_composition(el)
            comps[el] = {iso: float(c.fraction(iso)) for iso in c.isotopes}
    try:
        st = strip_run_ratios(element, _REFERENCE_ISOTOPE[element], ratios, sigmas, monitors, comps, beta)
    except RatioDeskError as exc:
        raise err("analysis", f"stripping the isobars of this {element} run: {exc}") from None
    return st.ratios, st.sigma_1s, st.correction_rel


def _runs_from_cycles(cycles: Any, constants: Rows) -> Rows:
    """The Runs block (key row first) of a Cycles table, or () without one."""
    if cycles is None:
        return ()
    got = _cycle_table(as_rows(cycles), constants)[0]
    return ((tuple(c.key for c in RUNS.columns),) + tuple(got)) if got else ()


def analysis_checks(analysis: Any, samples: Any, measured: Any, spikes: Any, standards: Any, constants: Any,
                    cycles: Any = None) -> Tuple[str, ...]:
    """The Check warnings of one analysis (empty: "ok"); ``cycles``: the Cycles table, if any."""
    rows = tuple(as_rows(t) for t in (samples, measured, spikes, standards, constants))
    return _analysis(str(analysis).strip(), *rows, runs=_runs_from_cycles(cycles, rows[4]))[3]


def analysis_result(analysis: str, samples: Any, measured: Any, spikes: Any, standards: Any, constants: Any,
                    cycles: Any = None, *, mc_draws: int = 0) -> Any:
    """The engine's AnalysisResult of one analysis (optionally with a seeded Monte Carlo); ``cycles``: the
    Cycles table (key row first), whose runs then take their ratios from their cycles."""
    rows = tuple(as_rows(t) for t in (samples, measured, spikes, standards, constants))
    return _analysis(str(analysis).strip(), *rows, mc_draws=int(mc_draws),
                     runs=_runs_from_cycles(cycles, rows[4]))[0]


def analysis_value(quantity: str, analysis: Any, samples: Any, measured: Any, spikes: Any, standards: Any,
                   constants: Any, runs: Any = None) -> float | str:
    """One result of one analysis, computed from the workbook's tables (the Results sheet's cells).

    Parameters
    ----------
    quantity : str
        One of :data:`ANALYSIS_QUANTITIES` (``"x"``, ``"x_1s"``, ``"y"``, ``"rho"``, ...).
    analysis : str
        Analysis ID (column A of Samples).
    samples, measured, spikes, standards, constants : 2-D blocks of cell values
        Each sheet's table from its key row (row 4) down, as the cells arrive (float, str, '').
    runs : 2-D block, optional
        The Runs sheet (run means of the Cycles sheet) from its key row down; runs found there take their
        ratios from it.

    Returns
    -------
    float or str
        The value; ``"check"`` returns ``"ok"`` or the list of warnings (poor spike–sample mix,
        implausible masses, magnification, blank share or concentration, inputs with σ = 0).
        ``"sample"``, ``"fraction"``, ``"system"`` return the Samples text.

    Raises
    ------
    CellError
        Naming the sheet, row and column of the first problem.
    """
    a = str(analysis).strip() if not isinstance(analysis, float) else f"{analysis:g}"
    if not a:
        return ""
    rows = tuple(as_rows(t) for t in (samples, measured, spikes, standards, constants))
    return _analysis_cell(quantity, _analysis(a, *rows, runs=_runs_rows(runs)))


def _runs_rows(runs: Any) -> Rows:
    """The Runs block, or () when it is absent or holds no run (the key row alone counts as none)."""
    if runs is None:
        return ()
    r = as_rows(runs)
    return r if any(v != "" for row in r[1:] for v in row[:1]) else ()


def _analysis_cell(quantity: str, outcome: AnalysisOutcome) -> float | str:
    """:func:`analysis_value` once the analysis is reduced."""
    res, eps, x_scale, warnings, std, steps = outcome
    rnd = res.sigma_1s_random
    q = quantity.strip().lower()
    table: Dict[str, Callable[[], Any]] = {
        "parent_conc": lambda: res.parent_conc_ug_g, "parent_conc_1s": lambda: res.parent_conc_sigma_1s,
        "daughter_conc": lambda: res.daughter_conc_ug_g, "daughter_conc_1s": lambda: res.daughter_conc_sigma_1s,
        "x": lambda: res.parent_ratio, "x_1s": lambda: rnd["parent_ratio"],
        "x_2s_pct": lambda: 2 * rnd["parent_ratio"] / res.parent_ratio * 100,
        "x_1s_total": lambda: res.parent_ratio_sigma_1s, "x_spike_1s_pct": lambda: 100 * x_scale,
        "y": lambda: res.daughter_ratio, "y_1s": lambda: rnd["daughter_ratio"],
        "y_2s_ppm": lambda: 2 * rnd["daughter_ratio"] / res.daughter_ratio * 1e6,
        "y_1s_total": lambda: res.daughter_ratio_sigma_1s,
        "rho": lambda: res.rho_random, "eps0": lambda: eps.value, "eps0_2s": lambda: 2 * eps.sigma_1s,
        "blank_share_pct": lambda: 100 * res.blank_share_daughter,
        "check": lambda: ("ok" if not warnings else MARKER + "; ".join(warnings)),
        "beta_parent": lambda: res.parent_bias_factor, "beta_daughter": lambda: res.daughter_bias_factor,
        "mag_parent": lambda: res.parent_magnification, "mag_daughter": lambda: res.daughter_magnification,
        "iterations": lambda: res.iterations, "blank_share_parent_pct": lambda: 100 * res.blank_share_parent,
        "std_factor": lambda: std.factor, "std_factor_1s": lambda: std.factor_sigma_1s_random,
        "std_runs": lambda: std.n, "y_before_factor": lambda: res.daughter_ratio / std.factor,
        "strip_parent_ppm": lambda: steps["strip_parent_ppm"],
        "strip_daughter_ppm": lambda: steps["strip_daughter_ppm"],
        "beta_parent_from": lambda: steps["beta_parent_from"],
    }
    if q not in table:
        raise InputError("quantity", f"unknown quantity {quantity!r}; use one of {', '.join(table)}")
    v = table[q]()
    return v if isinstance(v, str) else float(v)
