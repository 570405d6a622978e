"""Finite result or our own error: every public function of the engine's step modules, fuzzed.

Property (common practice for numerical code whose results land in spreadsheet cells and reports):
called with any mixture of ordinary numbers, extremes (0, −0, negative, 5e-324, 1e-300, 1e300,
1e308), non-finite values (NaN, ±inf), wrong lengths, empty arrays and wrong types, a public engine
function either returns only finite numbers — every float and array, walked through tuples, dicts
and the fields of its frozen result — or raises one of the engine's own errors
(:class:`reduction.errors.RatioDeskError`: InputError, UndefinedResultError, ConvergenceError).
A numpy ValueError, ZeroDivisionError, OverflowError or scipy traceback fails the test, and so does a
RuntimeWarning (pyproject's ``filterwarnings = error`` makes it an exception).

The one documented exception is a missing cycle: NaN in a beam passed to the interference functions
is passed through as NaN at that cycle (module docstring of :mod:`reduction.interference`); those
tests allow NaN exactly where an input beam was NaN and nowhere else.

The second half holds regression tests for the figures of issue 10 (each names the figure).
"""
from __future__ import annotations

import dataclasses
import math
from pathlib import Path
from typing import Any, Dict

import numpy as np
import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

import reduction
from reduction import ages, blank, cycles, dilution, interference, massbias, propagate, regression, standards
from reduction.composition import natural_composition
from reduction.errors import InputError, RatioDeskError, UndefinedResultError
from reduction.workbook.cli import main as cli_main

NAN, INF = float("nan"), float("inf")
#: The awkward numbers every argument is tried with.
WEIRD = [NAN, INF, -INF, 0.0, -0.0, -1.0, 5e-324, 1e-300, -1e-300, 1e-200, 1e-162, 1e162, 1e200, 1e300,
         -1e300, 1e308, -1e308]
#: Non-numbers and odd types.
JUNK = ["abc", "", None, [1.0, "x"], {"a": 1}]

FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                        HealthCheck.filter_too_much])
FUZZ_SLOW = settings(max_examples=50, deadline=None, suppress_health_check=[HealthCheck.too_slow])


# --------------------------------------------------------------------------------------------
# strategies
# --------------------------------------------------------------------------------------------
def num(lo: float = 1e-3, hi: float = 1e3) -> st.SearchStrategy:
    """A float that is usually plausible (in [lo, hi]) and often awkward (WEIRD or any float)."""
    return st.one_of(st.floats(lo, hi), st.floats(lo, hi), st.sampled_from(WEIRD), st.floats())


def num_or_junk(lo: float = 1e-3, hi: float = 1e3) -> st.SearchStrategy:
    return st.one_of(num(lo, hi), num(lo, hi), st.sampled_from(JUNK))


def vec(lo: float = 1e-3, hi: float = 1e3, max_n: int = 6) -> st.SearchStrategy:
    return st.lists(num(lo, hi), min_size=0, max_size=max_n)


def scalar_or_vec(lo: float = 1e-3, hi: float = 1e3) -> st.SearchStrategy:
    return st.one_of(num(lo, hi), num(lo, hi), vec(lo, hi, 4))


@st.composite
def vectors(draw: Any, ranges: Any, min_n: int = 0, max_n: int = 6) -> list:
    """One list per (lo, hi) range, usually all of one length, sometimes not."""
    n = draw(st.integers(min_n, max_n))
    out = []
    for lo, hi in ranges:
        m = draw(st.one_of(st.just(n), st.just(n), st.just(n), st.integers(0, max_n)))
        out.append(draw(st.lists(num(lo, hi), min_size=m, max_size=m)))
    return out


def counts(typical: int) -> st.SearchStrategy:
    """A size or iteration argument: typical, small, huge, non-whole, non-finite or not a number."""
    return st.one_of(st.just(typical), st.integers(-3, 2 * typical + 3),
                     st.sampled_from([0, 1, 10 ** 7, 10 ** 9, 10 ** 30, 2.5, NAN, INF, -INF, True, "7", None]))


# --------------------------------------------------------------------------------------------
# the property
# --------------------------------------------------------------------------------------------
def _missing_at(shape: tuple, beams: Any) -> np.ndarray:
    """Where a result of ``shape`` may be NaN: a missing cycle (NaN) in any input beam that fits the shape."""
    out = np.zeros(shape, dtype=bool)
    for b in beams or ():
        try:
            out |= np.broadcast_to(np.isnan(np.asarray(b, dtype=float)), shape)
        except (TypeError, ValueError):
            continue
    return out


def _walk(obj: Any, where: str, missing: Any = None) -> None:
    """Fail unless every number reachable from ``obj`` is finite (NaN allowed at ``missing`` cycles)."""
    if obj is None or isinstance(obj, (str, bool, int, np.bool_, np.integer)):
        return
    if isinstance(obj, (float, np.floating)):
        ok = missing is not None and math.isnan(obj) and bool(_missing_at((), missing))
        assert ok or math.isfinite(float(obj)), f"{where} = {obj!r} is not finite"
        return
    if isinstance(obj, np.ndarray):
        if obj.dtype.kind in "fc":
            bad = ~np.isfinite(obj)
            if missing is not None:
                assert not np.any(np.isinf(obj)), f"{where} holds inf: {obj!r}"
                bad &= ~_missing_at(obj.shape, missing)
            assert not np.any(bad), f"{where} holds non-finite values: {obj!r}"
        elif obj.dtype.kind == "O":
            for k, v in enumerate(obj.ravel()):
                _walk(v, f"{where}[{k}]", missing)
        else:
            assert obj.dtype.kind in "biuU", f"{where}: unexpected dtype {obj.dtype}"
        return
    if isinstance(obj, (tuple, list)):
        for k, v in enumerate(obj):
            _walk(v, f"{where}[{k}]", missing)
        return
    if isinstance(obj, dict):
        for k, v in obj.items():
            _walk(v, f"{where}[{k!r}]", missing)
        return
    if dataclasses.is_dataclass(obj):
        for f in dataclasses.fields(obj):
            _walk(getattr(obj, f.name), f"{where}.{f.name}", missing)
        return
    raise AssertionError(f"{where}: unexpected result type {type(obj).__name__}")


def finite_or_ours(fn: Any, *args: Any, missing: Any = None, **kwargs: Any) -> Any:
    """Call ``fn``: it must return finite values only, or raise a RatioDeskError with a message.

    ``missing``: input beams whose NaN cycles may come back as NaN (interference stripping only).
    """
    try:
        out = fn(*args, **kwargs)
    except RatioDeskError as exc:
        msg = str(exc)
        assert msg.strip() and "\n" not in msg, f"{fn.__name__}: unreadable message {msg!r}"
        return None
    _walk(out, fn.__name__, missing)
    return out


# --------------------------------------------------------------------------------------------
# which functions: every public function of the modules fuzzed here
# --------------------------------------------------------------------------------------------
MODULES = (ages, blank, cycles, dilution, interference, massbias, propagate, regression, standards)
FUZZED = set()


def fuzzes(*names: str) -> Any:
    FUZZED.update(names)
    return lambda f: f


def test_every_public_function_of_these_modules_is_fuzzed():
    public = {n for n in reduction.__all__ if callable(getattr(reduction, n)) and not isinstance(
        getattr(reduction, n), type) and getattr(getattr(reduction, n), "__module__", "") in
        {m.__name__ for m in MODULES}}
    assert len(public) > 40
    assert public - FUZZED == set(), "public functions without a fuzz test"


# --------------------------------------------------------------------------------------------
# regression
# --------------------------------------------------------------------------------------------
POINT_RANGES = ((-10.0, 10.0), (1e-4, 1.0), (-10.0, 10.0), (1e-4, 1.0))
RHO = st.one_of(st.none(), num(-0.99, 0.99), vec(-0.99, 0.99))


@fuzzes("york_fit")
@FUZZ
@given(vectors(POINT_RANGES), RHO, st.one_of(st.just(500), counts(500)), st.one_of(st.just(1e-15), num(1e-16, 1e-6)))
@example([[1, 2, 3], [.1] * 3, [1, 2, 3], [.1] * 3], [0.1, 0.2], 500, 1e-15)   # ρ shorter than x (issue 10)
def test_york_fit_finite_or_our_error(pts, rho, max_iter, rtol):
    finite_or_ours(regression.york_fit, *pts, rho, max_iter=max_iter, rtol=rtol)


@fuzzes("fit_isochron")
@FUZZ_SLOW
@given(vectors(POINT_RANGES, min_n=2), RHO, st.sampled_from(regression.TREATMENTS + ("bogus",)),
       st.one_of(st.none(), st.tuples(num(-5, 5), num(1e-4, 1.0)), st.just("x")))
def test_fit_isochron_finite_or_our_error(pts, rho, treatment, anchor):
    finite_or_ours(regression.fit_isochron, *pts, rho, treatment=treatment, anchor=anchor)


@st.composite
def batches(draw: Any) -> list:
    m = draw(st.integers(0, 3))
    n = draw(st.integers(0, 5))
    out = []
    for lo, hi in POINT_RANGES:
        mm = draw(st.one_of(st.just(m), st.just(m), st.integers(0, 3)))
        out.append([draw(st.lists(num(lo, hi), min_size=n, max_size=n)) for _ in range(mm)])
    return out


@fuzzes("york_fit_batch")
@FUZZ
@given(batches(), st.one_of(st.none(), num(-0.99, 0.99)))
def test_york_fit_batch_finite_or_our_error(pts, rho):
    finite_or_ours(regression.york_fit_batch, *pts, rho)


@fuzzes("weighted_mean")
@FUZZ
@given(vectors(((-100.0, 100.0), (1e-3, 10.0)), max_n=5), st.booleans(),
       st.one_of(st.none(), num(0.5, 5.0), st.just("k")))
@example([[10.0, 11.0, 12.0], [1e-200, 1.0, 1.0]], False, None)    # issue 10: printed "mean = nan +/- 0"
@example([[10.0, 11.0, 12.5], [1e200, 1.0, 1.0]], True, None)      # issue 10: scipy traceback
@example([[10.0, 11.0, 12.0], [1e-200, 1.0, 1.0]], True, 3.0)
@example([[1e308, 1e308], [1.0, 1.0]], False, None)
@example([[0.0, 1e300], [1e-300, 1e-300]], True, 2.0)
def test_weighted_mean_finite_or_our_error(vs, external, k):
    finite_or_ours(regression.weighted_mean, *vs, external_scatter=external, outlier_k=k)


@fuzzes("wendt_carl_limits")
@FUZZ
@given(st.one_of(counts(8), st.integers(1, 10 ** 12)), num(0.01, 0.99), st.booleans())
def test_wendt_carl_limits_finite_or_our_error(dof, level, approximate):
    finite_or_ours(regression.wendt_carl_limits, dof, level, approximate=approximate)


@fuzzes("ellipse_points")
@FUZZ
@given(num(-10, 10), num(1e-4, 1), num(-10, 10), num(1e-4, 1), num(-0.99, 0.99), counts(48), num(0.5, 0.999))
def test_ellipse_points_finite_or_our_error(x, sx, y, sy, rho, n_points, confidence):
    finite_or_ours(regression.ellipse_points, x, sx, y, sy, rho, n_points=n_points, confidence=confidence)


# --------------------------------------------------------------------------------------------
# ages
# --------------------------------------------------------------------------------------------
SYSTEM = st.sampled_from(["sm-nd", "lu-hf", "rb-sr", "bogus", ""])
LAMBDA = num(1e-12, 2e-11)
_BASE_FIT = regression.york_fit([0.10, 0.14, 0.18, 0.22], [2e-4] * 4, [0.5116, 0.5118, 0.5121, 0.5124], [4e-6] * 4)


@fuzzes("age_from_slope")
@FUZZ
@given(num(-1.5, 10.0), LAMBDA)
@example(1e308, 6.54e-12)    # issue 10: 108,439,787 Ma
def test_age_from_slope_finite_or_our_error(b, lam):
    finite_or_ours(ages.age_from_slope, b, lam)


@fuzzes("slope_from_age")
@FUZZ
@given(num(-1e10, 1e10), LAMBDA)
def test_slope_from_age_finite_or_our_error(t, lam):
    finite_or_ours(ages.slope_from_age, t, lam)


@fuzzes("isochron_age")
@FUZZ
@given(num(-0.5, 0.5), num(1e-6, 1e-2), num(0.4, 0.6), num(1e-6, 1e-2), st.one_of(st.none(), num(1e-6, 1e-2)),
       SYSTEM, num(0, 0.01), st.one_of(st.none(), num(0.1, 3)))
def test_isochron_age_finite_or_our_error(b, sb, a, sa, sb95, system, xs, mswd):
    fit = dataclasses.replace(_BASE_FIT, slope=b, slope_sigma_1s=sb, intercept=a, intercept_sigma_1s=sa,
                              slope_sigma_95_expanded=sb95, mswd=mswd)
    finite_or_ours(ages.isochron_age, fit, system, x_scale_sigma_rel=xs)


@fuzzes("two_point_age")
@FUZZ
@given(st.lists(num(1e-4, 1.0), min_size=8, max_size=8), SYSTEM, num(-0.99, 0.99), num(-0.99, 0.99))
def test_two_point_age_finite_or_our_error(v, system, r1, r2):
    finite_or_ours(ages.two_point_age, *v, system, rho1=r1, rho2=r2)


@fuzzes("initial_ratio")
@FUZZ
@given(num(0.1, 1.0), num(0.01, 1.0), num(0, 5000), SYSTEM)
def test_initial_ratio_finite_or_our_error(r, p, t, system):
    finite_or_ours(ages.initial_ratio, r, p, t, system)


@fuzzes("epsilon")
@FUZZ
@given(num(0.2, 0.8), num(1e-7, 1e-4), num(0.01, 0.5), num(0, 5000), SYSTEM, num(0, 1e-3), num(-0.99, 0.99),
       st.booleans())
def test_epsilon_finite_or_our_error(r, sr, p, t, system, sp, rho, incl):
    finite_or_ours(ages.epsilon, r, sr, p, t, system, parent_sigma_1s=sp, rho=rho, include_reference=incl)


@fuzzes("model_age")
@FUZZ
@given(num(0.2, 0.8), num(0, 1e-4), num(0.01, 0.5), num(0, 1e-3), SYSTEM,
       st.sampled_from(["CHUR", "DM", "UR", "bogus"]), num(-0.99, 0.99))
def test_model_age_finite_or_our_error(r, sr, p, sp, system, reservoir, rho):
    finite_or_ours(ages.model_age, r, sr, p, sp, system, reservoir, rho=rho)


# --------------------------------------------------------------------------------------------
# blank
# --------------------------------------------------------------------------------------------
@fuzzes("blank_correct")
@FUZZ
@given(scalar_or_vec(1e-3, 10), scalar_or_vec(0.1, 2), scalar_or_vec(0, 1e-3), scalar_or_vec(0.1, 2),
       st.lists(scalar_or_vec(0, 1e-3), min_size=4, max_size=4))
def test_blank_correct_finite_or_our_error(nt, rt, nb, rb, sig):
    finite_or_ours(blank.blank_correct, nt, rt, nb, rb, total_sigma_1s=sig[0], blank_sigma_1s=sig[1],
                   total_ratio_sigma_1s=sig[2], blank_ratio_sigma_1s=sig[3])


ELEMENT_REF = st.sampled_from([("Nd", "144Nd"), ("Sr", "86Sr"), ("Hf", "177Hf"), ("Sm", "152Sm"),
                               ("Nd", "86Sr"), ("Xx", "1Xx"), ("", "")])


@fuzzes("blank_umol")
@FUZZ
@given(scalar_or_vec(0, 100), ELEMENT_REF, st.one_of(st.none(), st.dictionaries(
    st.sampled_from(["143Nd/144Nd", "146Nd/144Nd", "87Sr/86Sr", "bogus"]), num(0.1, 2), max_size=2)))
def test_blank_umol_finite_or_our_error(ng, el_ref, ratios):
    finite_or_ours(blank.blank_umol, ng, *el_ref, ratios)


# --------------------------------------------------------------------------------------------
# cycles
# --------------------------------------------------------------------------------------------
CYCLES = st.one_of(vec(0.5, 0.52, 12), st.lists(vec(0.5, 0.52, 8), min_size=0, max_size=3), st.sampled_from(JUNK))
RULE = st.sampled_from(["robust", "sigma-clip", "none", "bogus", None])
REJECT_K = st.one_of(st.just("default"), st.none(), num(1, 5), st.just("x"))


@fuzzes("cycle_stats")
@FUZZ
@given(CYCLES, RULE, REJECT_K, counts(10), counts(3))
def test_cycle_stats_finite_or_our_error(values, rule, k, max_passes, min_kept):
    finite_or_ours(cycles.cycle_stats, values, rule=rule, reject_k=k, max_passes=max_passes, min_kept=min_kept)


@fuzzes("cycle_mean", "cycle_sem_1s")
@FUZZ
@given(CYCLES, REJECT_K, RULE)
def test_cycle_mean_and_sem_finite_or_our_error(values, k, rule):
    finite_or_ours(cycles.cycle_mean, values, k, rule)
    finite_or_ours(cycles.cycle_sem_1s, values, k, rule)


# --------------------------------------------------------------------------------------------
# dilution
# --------------------------------------------------------------------------------------------
SPIKES = dilution.load_demo_spikes()
ND_SPIKE = SPIKES["demo-SmNd-149-150 Nd"]
SR_SPIKE = SPIKES["demo-RbSr-87-84 Sr"]
ND_MIX = dilution.forward_mixture("Nd", "144Nd", 0.02, 0.1, ND_SPIKE, 0.05, bias_factor=1.5)
SR_MIX = dilution.forward_mixture("Sr", "86Sr", 2.0, 0.1, SR_SPIKE, 0.05, bias_factor=1.0)


@fuzzes("magnification")
@FUZZ
@given(scalar_or_vec(0.1, 10), scalar_or_vec(0.1, 10), st.one_of(scalar_or_vec(0.1, 100), st.just(INF)))
def test_magnification_finite_or_our_error(rm, rs, rt):
    finite_or_ours(dilution.magnification, rm, rs, rt)


@fuzzes("magnification_min")
@FUZZ
@given(scalar_or_vec(0.1, 10), st.one_of(scalar_or_vec(0.1, 100), st.just(INF)))
def test_magnification_min_finite_or_our_error(rs, rt):
    finite_or_ours(dilution.magnification_min, rs, rt)


@fuzzes("id_amount")
@FUZZ
@given(scalar_or_vec(0.1, 10), scalar_or_vec(0.1, 10), scalar_or_vec(0.1, 100), scalar_or_vec(1e-6, 1))
def test_id_amount_finite_or_our_error(rm, rs, rt, n):
    finite_or_ours(dilution.id_amount, rm, rs, rt, n)


@st.composite
def id_cases(draw: Any) -> Dict[str, Any]:
    """A forward-modelled Nd or Sr mixture with some ratios, masses and options made awkward."""
    nd = draw(st.booleans())
    mix = dict(ND_MIX if nd else SR_MIX)
    for k in list(mix):
        how = draw(st.sampled_from(["keep", "keep", "scale", "weird", "drop"]))
        if how == "scale":
            mix[k] = mix[k] * draw(st.floats(0.5, 2.0))
        elif how == "weird":
            mix[k] = draw(st.one_of(st.sampled_from(WEIRD), vec(0.1, 2, 3)))
        elif how == "drop":
            del mix[k]
    kw: Dict[str, Any] = {}
    if draw(st.booleans()):
        kw["norm_ratio"] = "146Nd/144Nd" if nd else "86Sr/88Sr"
    else:
        kw["bias_factor"] = draw(scalar_or_vec(-3, 3))
    if draw(st.booleans()):
        kw["sample_ratios"] = {("143Nd/144Nd" if nd else "87Sr/86Sr"): draw(num(0.5, 0.8))}
    kw["tol"] = draw(st.one_of(st.just(1e-13), num(1e-15, 1e-4), st.just("x")))
    kw["max_iter"] = draw(st.one_of(st.just(100), counts(100)))
    return dict(measured=mix, spike=ND_SPIKE if nd else SR_SPIKE, sample_mass_g=draw(scalar_or_vec(0.01, 1)),
                spike_mass_g=draw(scalar_or_vec(0.01, 1)), **kw)


@fuzzes("isotope_dilution")
@FUZZ
@given(id_cases())
def test_isotope_dilution_finite_or_our_error(case):
    finite_or_ours(dilution.isotope_dilution, **case)


@fuzzes("id_concentration")
@FUZZ
@given(scalar_or_vec(0.3, 3), num(0.01, 1), num(0.01, 1), scalar_or_vec(-3, 3))
def test_id_concentration_finite_or_our_error(rm, ws, wt, beta):
    finite_or_ours(dilution.id_concentration, rm, "150Nd/144Nd", ws, wt, ND_SPIKE, bias_factor=beta)


@fuzzes("calibrate_spike")
@FUZZ
@given(scalar_or_vec(0.3, 3), scalar_or_vec(0.01, 1), num(1e-3, 1), scalar_or_vec(0.01, 1),
       st.lists(num(0, 1e-3), min_size=4, max_size=4))
def test_calibrate_spike_finite_or_our_error(rm, ws, c, wt, sig):
    finite_or_ours(dilution.calibrate_spike, rm, ws, c, wt, ND_SPIKE, ratio="150Nd/144Nd",
                   standard_conc_sigma_1s=sig[0], standard_mass_sigma_1s=sig[1], spike_mass_sigma_1s=sig[2],
                   mix_ratio_sigma_1s=sig[3])


@fuzzes("forward_mixture")
@FUZZ
@given(scalar_or_vec(1e-3, 10), scalar_or_vec(0.01, 1), scalar_or_vec(0.01, 1), scalar_or_vec(-3, 3),
       scalar_or_vec(0, 1e-4), st.one_of(st.none(), st.fixed_dictionaries({"143Nd/144Nd": num(0.3, 0.8)})))
def test_forward_mixture_finite_or_our_error(c, ws, wt, beta, nb, ratios):
    finite_or_ours(dilution.forward_mixture, "Nd", "144Nd", c, ws, ND_SPIKE, wt, sample_ratios=ratios,
                   bias_factor=beta, blank_umol=nb, blank_ratios=ratios)


@fuzzes("make_spike")
@FUZZ
@given(st.sampled_from([("Nd", ["144Nd", "150Nd"], "150Nd"), ("Nd", ["150Nd", "150Nd"], "150Nd"),
                        ("Nd", ["150Nd"], "144Nd"), ("Xx", ["1Xx"], "1Xx")]),
       st.one_of(vec(0, 1, 3), st.sampled_from(JUNK)), num_or_junk(1e-3, 1), num_or_junk(0, 1e-3))
def test_make_spike_finite_or_our_error(iso, ab, c, s):
    element, isotopes, spike_iso = iso
    finite_or_ours(dilution.make_spike, element, isotopes, ab, spike_iso, c, s)


@fuzzes("sample_composition")
@FUZZ
@given(ELEMENT_REF, st.one_of(st.none(), st.dictionaries(
    st.sampled_from(["143Nd/144Nd", "146Nd/144Nd", "144Nd/146Nd", "87Sr/86Sr", "x"]),
    st.one_of(num(0.1, 2), vec(0.1, 2, 3)), max_size=2)))
def test_sample_composition_finite_or_our_error(el_ref, ratios):
    finite_or_ours(dilution.sample_composition, *el_ref, ratios)


@fuzzes("element_isotopes", "load_demo_spikes")
@FUZZ
@given(st.one_of(st.sampled_from(["Nd", "Sm", "Hf", "Lu", "Sr", "Rb", "Yb", "Ce"]), st.text(max_size=4)))
def test_element_isotopes_and_demo_spikes_finite_or_our_error(element):
    finite_or_ours(dilution.element_isotopes, element)
    finite_or_ours(dilution.load_demo_spikes)


# --------------------------------------------------------------------------------------------
# interference (NaN = missing cycle is passed through, nowhere else)
# --------------------------------------------------------------------------------------------
@fuzzes("strip_isobar")
@FUZZ
@given(scalar_or_vec(1, 2), scalar_or_vec(0, 1e-2), st.sampled_from([("144Sm", "147Sm"), ("87Rb", "85Rb"),
                                                                     ("144Sm", "85Rb"), ("1Xx", "2Xx")]),
       scalar_or_vec(-3, 3), st.sampled_from(["exponential", "power", "linear", "bogus"]),
       st.one_of(st.none(), num_or_junk(0.01, 1)))
def test_strip_isobar_finite_or_our_error(total, monitor, pair, beta, law, true_ratio):
    finite_or_ours(interference.strip_isobar, total, monitor, *pair, bias_factor=beta, law=law,
                   true_ratio=true_ratio, missing=[total, monitor])


@fuzzes("strip_beams", "interferent_ratio")
@FUZZ
@given(st.dictionaries(st.sampled_from(["143Nd", "144Nd", "146Nd", "147Sm", "140Ce", "142Nd"]),
                       vec(0.001, 2, 4), max_size=6),
       st.sampled_from(["sm-nd", "rb-sr", "bogus"]),
       st.one_of(st.none(), st.dictionaries(st.sampled_from(["Sm", "Ce"]), scalar_or_vec(-3, 3), max_size=2)),
       st.one_of(st.none(), st.dictionaries(st.sampled_from(["144Sm/147Sm", "x/y"]), num_or_junk(0.01, 1),
                                            max_size=1)),
       st.booleans())
def test_strip_beams_finite_or_our_error(beams, system, factors, ratios, require):
    out = finite_or_ours(interference.strip_beams, beams, system, bias_factors=factors, interferent_ratios=ratios,
                         require_monitors=require, missing=list(beams.values()))
    if out is not None:
        finite_or_ours(interference.interferent_ratio, "144Sm", "147Sm")
    finite_or_ours(interference.interferent_ratio, *sorted(beams)[:2] if len(beams) >= 2 else ("87Rb", "85Rb"))


# --------------------------------------------------------------------------------------------
# mass bias
# --------------------------------------------------------------------------------------------
LAW = st.sampled_from(["exponential", "power", "linear", "exp", "bogus"])
MASS = st.one_of(st.sampled_from([143.91, 145.91, 142.91]), num(1, 250))


@fuzzes("bias_factor")
@FUZZ
@given(scalar_or_vec(0.5, 1), scalar_or_vec(0.5, 1), MASS, MASS, LAW)
def test_bias_factor_finite_or_our_error(rm, rt, mk, ml, law):
    finite_or_ours(massbias.bias_factor, rm, rt, mk, ml, law)


@fuzzes("bias_correct", "bias_apply")
@FUZZ
@given(scalar_or_vec(0.1, 2), MASS, MASS, scalar_or_vec(-3, 3), LAW)
def test_bias_correct_and_apply_finite_or_our_error(r, mi, mj, f, law):
    finite_or_ours(massbias.bias_correct, r, mi, mj, f, law)
    finite_or_ours(massbias.bias_apply, r, mi, mj, f, law)


RATIO = st.sampled_from(["143Nd/144Nd", "146Nd/144Nd", "144Nd/144Nd", "87Sr/86Sr", "x/y", "143Nd"])


@fuzzes("bias_factor_from", "correct_named", "normalise", "ratio_masses")
@FUZZ
@given(scalar_or_vec(0.1, 2), RATIO, scalar_or_vec(0.7, 0.75), RATIO, st.one_of(st.none(), num_or_junk(0.5, 1)),
       LAW, scalar_or_vec(-3, 3))
def test_named_bias_functions_finite_or_our_error(r, ratio, rn, norm, true_norm, law, f):
    finite_or_ours(massbias.bias_factor_from, rn, norm, true_norm=true_norm, law=law)
    finite_or_ours(massbias.correct_named, r, ratio, f, law)
    finite_or_ours(massbias.normalise, r, ratio, rn, norm, true_norm=true_norm, law=law)
    finite_or_ours(massbias.ratio_masses, ratio)


# --------------------------------------------------------------------------------------------
# propagate (the models return NaN/inf silently; the engine must notice)
# --------------------------------------------------------------------------------------------
def _quiet(f: Any) -> Any:
    def g(X: Any) -> Any:
        with np.errstate(all="ignore"):
            return f(np.asarray(X))
    return g


MODELS = st.sampled_from([
    _quiet(lambda X: np.array([X[0] / X[-1], X[0] * X[-1]])),
    _quiet(lambda X: 2.0 * X[0] + X[-1]),
    _quiet(lambda X: np.exp(X[0])),
    _quiet(lambda X: np.sqrt(X[0])),
])


@st.composite
def cov_matrices(draw: Any, n: int) -> Any:
    kind = draw(st.sampled_from(["diag", "diag", "full", "vector", "junk"]))
    if kind == "junk":
        return draw(st.sampled_from(JUNK + [[[1.0, 2.0]], [[NAN]]]))
    s = draw(st.lists(num(1e-4, 1), min_size=n, max_size=n))
    if kind == "vector":
        return s
    if kind == "diag":
        return np.diag(s)
    return draw(st.lists(st.lists(num(-1, 1), min_size=n, max_size=n), min_size=n, max_size=n))


@st.composite
def prop_cases(draw: Any) -> Any:
    n = draw(st.integers(0, 3))
    x = draw(st.lists(num(0.1, 10), min_size=n, max_size=n))
    m = draw(st.one_of(st.just(n), st.integers(0, 3)))
    return x, draw(cov_matrices(m))


@fuzzes("cov_from_sigma")
@FUZZ
@given(vec(0, 1, 3), st.one_of(st.none(), st.lists(st.lists(num(-1, 1), min_size=2, max_size=2), min_size=2,
                                                    max_size=2), st.sampled_from(JUNK)))
def test_cov_from_sigma_finite_or_our_error(s, corr):
    finite_or_ours(propagate.cov_from_sigma, s, corr)


@fuzzes("jacobian")
@FUZZ
@given(MODELS, vec(0.1, 10, 3), st.sampled_from(["central", "complex", "bogus"]),
       st.one_of(st.just(1e-6), num(1e-12, 1e-2)), st.one_of(st.none(), vec(1e-8, 1e-3, 3)))
def test_jacobian_finite_or_our_error(f, x, method, rel, abs_step):
    finite_or_ours(propagate.jacobian, f, x, method=method, rel_step=rel, abs_step=abs_step)


@fuzzes("propagate_linear")
@FUZZ
@given(MODELS, prop_cases(), st.one_of(st.none(), st.just({"a": [0]}), st.just({"b": [5]})),
       st.one_of(st.just(1e-6), num(1e-12, 1e-2)))
def test_propagate_linear_finite_or_our_error(f, case, groups, rel):
    finite_or_ours(propagate.propagate_linear, f, case[0], case[1], groups=groups, rel_step=rel)


@fuzzes("monte_carlo")
@FUZZ
@given(MODELS, prop_cases(), st.one_of(st.just(200), counts(200)),
       st.one_of(st.just(1), st.integers(-5, 2 ** 70), st.sampled_from([NAN, 2.5, "s", None])))
def test_monte_carlo_finite_or_our_error(f, case, n_draws, seed):
    finite_or_ours(propagate.monte_carlo, f, case[0], case[1], n_draws=n_draws, seed=seed)


# --------------------------------------------------------------------------------------------
# standards
# --------------------------------------------------------------------------------------------
_STD = standards.standard_factor([0.512100, 0.512104, 0.512098], 0.512115, accepted_sigma_1s=3e-6)


@fuzzes("standard_factor")
@FUZZ
@given(st.one_of(vec(0.5, 0.52, 5), st.sampled_from(JUNK)), st.one_of(st.none(), num_or_junk(0.5, 0.52)),
       st.one_of(st.none(), num_or_junk(0, 1e-5)), st.booleans())
def test_standard_factor_finite_or_our_error(x, acc, acc_s, named):
    kw = {"material": "JNdi-1", "ratio": "143Nd/144Nd"} if named else {}
    finite_or_ours(standards.standard_factor, x, acc, accepted_sigma_1s=acc_s, **kw)


@fuzzes("apply_standard")
@FUZZ
@given(scalar_or_vec(0.5, 0.52), scalar_or_vec(0, 1e-5), st.booleans(),
       st.one_of(st.none(), st.tuples(num(0.9, 1.1), num(0, 1e-4), num(0, 1e-4))))
def test_apply_standard_finite_or_our_error(v, s, repro, odd):
    std = _STD if odd is None else dataclasses.replace(_STD, factor=odd[0], factor_sigma_1s_random=odd[1],
                                                       reproducibility_rel_1s=odd[2])
    finite_or_ours(standards.apply_standard, v, s, std, add_reproducibility=repro)


# ============================================================================================
# regression tests: the figures of issue 10 (items 4, 6, 8)
# ============================================================================================
def test_wmean_sigma_1e200_below_the_others_gives_that_value_not_nan():
    # issue 10: one σ of 1e-200 printed "mean = nan +/- 0". With weights relative to the smallest σ the
    # answer is the exact one (by hand): the 1e-200 value pins the mean at 10, σ_mean = 1e-200, and
    # χ² = (11 − 10)²/1 + (12 − 10)²/1 = 5 over 2 degrees of freedom, MSWD 2.5.
    wm = regression.weighted_mean([10.0, 11.0, 12.0], [1e-200, 1.0, 1.0])
    assert wm.mean == 10.0
    assert wm.mean_sigma_1s == pytest.approx(1e-200, rel=1e-12)
    assert wm.mswd == pytest.approx(2.5, rel=1e-12)


def test_wmean_sigma_1e200_with_external_scatter_weighs_nothing():
    # issue 10: a σ of 1e200 with external scatter gave a scipy traceback ("bounds must be finite").
    # That value has no weight; the other two (11 and 12.5, σ 1) decide. By hand: mean 11.75, σ_mean
    # 1/√2; the random-effects ML τ² of two values of equal σ is max(0, (Δ/2)² − σ²) = max(0, 0.5625 − 1)
    # = 0; χ² = 0.75² + 0.75² = 1.125 over 2 dof.
    wm = regression.weighted_mean([10.0, 11.0, 12.5], [1e200, 1.0, 1.0], external_scatter=True)
    assert wm.mean == pytest.approx(11.75, rel=1e-12)
    assert wm.mean_sigma_1s == pytest.approx(1 / math.sqrt(2), rel=1e-12)
    assert wm.external_sigma_1s == 0.0
    assert wm.mswd == pytest.approx(0.5625, rel=1e-12)


def test_wmean_external_scatter_where_the_old_code_divided_by_zero():
    # issue 10: ZeroDivisionError in regression._ml_excess_1d (1/(σ² + τ²) squared underflowed to 0).
    # Equal σ: the ML mean is the plain mean and σ² + τ² = Σ(v − v̄)²/n (maximising the likelihood by
    # hand), so for v = (0, 1, 3)·1e100, σ = 1e85: τ = 1e100·√(14/9) to rounding.
    wm = regression.weighted_mean([0.0, 1e100, 3e100], [1e85] * 3, external_scatter=True, outlier_k=3)
    assert wm.external_sigma_1s == pytest.approx(1e100 * math.sqrt(14 / 9), rel=1e-6)
    assert wm.mean == pytest.approx(4e100 / 3, rel=1e-9)
    _walk(wm, "weighted_mean")


def test_wmean_unrepresentable_mswd_is_our_error():
    with pytest.raises(UndefinedResultError, match="MSWD is beyond double precision"):
        regression.weighted_mean([0.0, 1e300], [1e-300, 1e-300])


def test_york_fit_rho_of_the_wrong_length_is_named():
    # issue 10: numpy "operands could not be broadcast" (ρ broadcast before the length check)
    with pytest.raises(InputError, match=r"^rho: has 2 values but x has 3"):
        regression.york_fit([1, 2, 3], [0.1] * 3, [1, 2, 3.1], [0.1] * 3, [0.1, 0.2])
    with pytest.raises(InputError, match=r"^rho: has shape \(2,\)"):
        regression.york_fit_batch([[1, 2, 3]] * 2, [[0.1] * 3] * 2, [[1, 2, 3.1]] * 2, [[0.1] * 3] * 2, [0.1, 0.2])
    # one ρ for all points is still accepted
    assert math.isfinite(regression.york_fit([1, 2, 3], [0.1] * 3, [1, 2, 3.1], [0.1] * 3, 0.3).slope)


def test_magnification_refuses_the_infinite_cases():
    # issue 10: magnification returned inf/nan. M = R_mix·|R_s − R_t|/(|R_mix − R_s|·|R_t − R_mix|)
    # (module docstring; Webster 1960) is infinite at R_mix = R_s or R_t: refused, named.
    with pytest.raises(UndefinedResultError, match="mixture holds no spike"):
        dilution.magnification(1.0, 1.0, 2.0)
    with pytest.raises(UndefinedResultError, match="mixture holds no sample"):
        dilution.magnification(2.0, 1.0, 2.0)
    with pytest.raises(UndefinedResultError, match="isotope dilution is impossible"):
        dilution.magnification_min(2.0, 2.0)
    with pytest.raises(InputError, match="spike_ratio"):
        dilution.magnification(1.0, 2.0, NAN)
    # a spike free of the reference isotope (R_t = ∞) stays allowed: M = R_mix/|R_mix − R_s| = 2/1
    assert dilution.magnification(2.0, 1.0, INF) == pytest.approx(2.0, rel=1e-15)
    assert dilution.magnification_min(1.0, INF) == 1.0


@pytest.mark.parametrize("scale", [1e162, 1e200, 1e300, 1e308])
def test_isotope_dilution_huge_ratios_never_give_inf(scale):
    # issue 10: isotope_dilution returned inf concentrations for huge ratios; now a finite result or our error
    for key in ND_MIX:
        for how in ("one", "all but the spike ratio"):
            mix = dict(ND_MIX)
            if how == "one":
                mix[key] = scale
            else:
                mix = {k: (v if k == "150Nd/144Nd" else v * scale) for k, v in ND_MIX.items()}
            for kw in ({"norm_ratio": "146Nd/144Nd"}, {"bias_factor": 0.0}):
                finite_or_ours(dilution.isotope_dilution, mix, ND_SPIKE, 0.1, 0.05, **kw)
    mix = dict(ND_MIX, **{"142Nd/144Nd": 1e308})   # this one gave conc = inf
    with pytest.raises(UndefinedResultError, match="not a finite number"):
        dilution.isotope_dilution(mix, ND_SPIKE, 0.1, 0.05, bias_factor=0.0)


def test_calibrate_spike_sigma_1e162_is_finite():
    # a σ of 1e162 squared overflowed a Python float (OverflowError); the quadrature now uses hypot
    cal = dilution.calibrate_spike(0.6, 0.5, 0.01, 0.05, ND_SPIKE, ratio="150Nd/144Nd", standard_conc_sigma_1s=1e162)
    assert cal.sigma_1s_systematic == pytest.approx(1e162 / 0.01 * cal.concentration_umol_g, rel=1e-12)


def test_age_from_slope_beyond_ten_solar_system_ages_is_refused():
    # issue 10: age_from_slope(1e308) gave 108,439,787 Ma. Rule of this program: |t| <= 10 × 4567.3 Ma.
    with pytest.raises(UndefinedResultError, match=r"an age of 1.0844e\+08 Ma, beyond ±45673 Ma"):
        ages.age_from_slope(1e308, 6.54e-12)
    assert ages.AGE_LIMIT_MA == 10 * ages.SOLAR_SYSTEM_AGE_MA
    # just inside the rule an age is still returned (t = ln(1 + b)/λ, e.g. Faure & Mensing 2005)
    lam = 6.54e-12
    b = math.expm1(lam * 45_000e6)
    assert ages.age_from_slope(b, lam) == pytest.approx(45_000e6, rel=1e-12)
    with pytest.raises(InputError, match="t_years"):
        ages.slope_from_age(50_000e6, lam)
    with pytest.raises(InputError, match="t_ma"):
        ages.epsilon(0.5126, 1e-5, 0.1, 1e6, "sm-nd")


def test_ellipse_with_1e9_points_is_refused_before_any_work(monkeypatch):
    # issue 10 item 4: =RD.ELLIPSE(...;1E9) ran 102 s and used 24 GB. The bound is checked before anything
    # is computed: np.linspace (the first allocation) must not even be called.
    def no_work(*a, **k):
        raise AssertionError("ellipse_points started work on a refused n_points")

    with monkeypatch.context() as m:
        m.setattr(np, "linspace", no_work)
        with pytest.raises(InputError, match=r"n_points: must be a whole number from 3 to 10 000, got 1000000000"):
            regression.ellipse_points(1.0, 0.01, 2.0, 0.02, 0.3, n_points=10 ** 9)
        with pytest.raises(InputError, match="n_points"):
            regression.ellipse_points(1.0, 0.01, 2.0, 0.02, 0.3, n_points=1e9)
    xs, ys = regression.ellipse_points(1.0, 0.01, 2.0, 0.02, 0.3, n_points=regression.ELLIPSE_MAX_POINTS)
    assert xs.size == regression.ELLIPSE_MAX_POINTS + 1


def test_ellipse_sigma_1e200_is_drawn_without_squaring():
    # the Cholesky factor written out: no σ² is formed, so σ = 1e200 is drawn; the outline's x half-width
    # is k·σx with k = √χ²₀.₉₅(2) = 2.4477 (bivariate normal; the value via scipy.stats)
    from scipy import stats

    xs, ys = regression.ellipse_points(0.0, 1e200, 0.0, 1e200, 0.0, n_points=400)
    assert float(np.max(xs)) == pytest.approx(math.sqrt(stats.chi2.ppf(0.95, 2)) * 1e200, rel=1e-4)


def test_size_and_iteration_arguments_have_upper_bounds():
    pts = ([1, 2, 3], [0.1] * 3, [1, 2, 3.1], [0.1] * 3)
    with pytest.raises(InputError, match=r"max_iter: must be a whole number from 1 to 100 000"):
        regression.york_fit(*pts, max_iter=10 ** 6)
    with pytest.raises(InputError, match="max_iter"):
        regression.york_fit_batch(*([p, p] for p in pts), max_iter=10 ** 6)
    with pytest.raises(InputError, match=r"max_passes: must be a whole number from 1 to 1 000"):
        cycles.cycle_stats([1.0, 1.1, 0.9, 1.0], rule="sigma-clip", max_passes=10 ** 6)
    with pytest.raises(InputError, match=r"max_iter: must be a whole number from 1 to 10 000"):
        dilution.isotope_dilution(ND_MIX, ND_SPIKE, 0.1, 0.05, norm_ratio="146Nd/144Nd", max_iter=10 ** 6)


def test_monte_carlo_draws_and_memory_are_bounded_before_any_draw():
    calls = []

    def model(X):
        calls.append(X.shape)
        return X[:1]

    with pytest.raises(InputError, match=r"n_draws: must be a whole number from 10 to 1 000 000"):
        propagate.monte_carlo(model, [1.0, 2.0], [1e-4, 1e-4], n_draws=10 ** 7)
    # 30 inputs × 1e6 draws = 3e7 values > 2e7 (160 MB per array): refused with the memory it would need
    with pytest.raises(InputError, match=r"1000000 draws of 30 inputs need about 480 MB.*at most 666666 draws"):
        propagate.monte_carlo(model, np.ones(30), np.full(30, 1e-4), n_draws=10 ** 6)
    assert calls == []
    mc = propagate.monte_carlo(model, [1.0, 2.0], [1e-4, 1e-4], n_draws=1000, seed=3)
    assert mc.n_draws == 1000 and calls == [(2, 1000)]


# --------------------------------------------------------------------------------------------
# the command line end to end on the same inputs: a result, or exit 1 with one readable line
# --------------------------------------------------------------------------------------------
def _run_cli(tmp_path: Path, capsys: Any, name: str, text: str, *args: str) -> Any:
    f = tmp_path / name
    f.write_text(text, encoding="utf-8")
    code = cli_main([args[0], str(f), *args[1:]])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return code, out, err


def test_cli_wmean_extreme_sigma(tmp_path, capsys):
    code, out, err = _run_cli(tmp_path, capsys, "a.csv", "value,sigma\n10,1e-200\n11,1\n12,1\n", "wmean")
    assert code == 0 and "mean = 10 +/- 1e-200" in out and "nan" not in out.lower()
    code, out, err = _run_cli(tmp_path, capsys, "b.csv", "value,sigma\n10,1e200\n11,1\n12.5,1\n", "wmean",
                              "--external")
    assert code == 0 and "mean = 11.75 +/- 0.7071" in out
    code, out, err = _run_cli(tmp_path, capsys, "c.csv", "value,sigma\n0,1e-300\n1e300,1e-300\n", "wmean", "--json")
    assert code == 1 and out == ""
    assert err.count("\n") == 1 and err.startswith("ratiodesk wmean: error: weighted mean:")
    code, out, err = _run_cli(tmp_path, capsys, "d.csv", "value,sigma\n1,1\n2,1\n", "wmean", "--outlier-k", "nan")
    assert code == 1 and err.count("\n") == 1 and "--outlier-k" in err


def test_cli_isochron_extreme_inputs(tmp_path, capsys):
    tiny = "x,sx,y,sy\n0.1,1e-200,0.5,1e-200\n0.2,1e-200,0.6,1e-200\n0.3,1e-200,0.71,1e-200\n"
    steep = "x,sx,y,sy\n0.1,0.001,1e11,1e9\n0.2,0.001,2e11,1e9\n0.3,0.001,3.1e11,1e9\n"
    for name, text, extra, expect in (("t.csv", tiny, ("--system", "sm-nd"), "too large or too small"),
                                      ("e.csv", tiny, ("--treatment", "excess-variance"), "too large or too small"),
                                      ("s.csv", steep, ("--system", "sm-nd", "--json"), "beyond ±45673 Ma")):
        code, out, err = _run_cli(tmp_path, capsys, name, text, "isochron", *extra)
        assert code == 1 and out == "", (name, out)
        assert err.count("\n") == 1 and err.startswith("ratiodesk isochron: error:") and expect in err, err
    code, out, err = _run_cli(tmp_path, capsys, "ok.csv", steep, "isochron")   # the fit alone is fine
    assert code == 0 and "slope" in out


# --------------------------------------------------------------------------------------------
# wrong types in every argument, one at a time (a valid call, then each argument replaced)
# --------------------------------------------------------------------------------------------
def _vectorised(X: Any) -> Any:
    return np.asarray(X)[:1] * 2.0


_SM_NAT = natural_composition("Sm")
_SM_SPIKE = reduction.load_demo_spikes()["demo-SmNd-149-150 Sm"]
_FIT = regression.york_fit([0.10, 0.14, 0.18], [2e-4] * 3, [0.5116, 0.5118, 0.5121], [4e-6] * 3)
#: One valid call per public function: (positional arguments, keyword arguments).
VALID_CALLS: Dict[str, Any] = {
    "age_from_slope": ((0.01, 6.54e-12), {}),
    "slope_from_age": ((1e9, 6.54e-12), {}),
    "isochron_age": ((_FIT, "sm-nd"), {}),
    "two_point_age": ((0.1, 1e-3, 0.5, 1e-5, 0.2, 1e-3, 0.51, 1e-5, "sm-nd"), {}),
    "initial_ratio": ((0.512, 0.1, 100.0, "sm-nd"), {}),
    "epsilon": ((0.512, 1e-5, 0.1, 100.0, "sm-nd"), {}),
    "model_age": ((0.5115, 1e-6, 0.11, 1e-4, "sm-nd"), {}),
    "blank_correct": ((1.0, 0.5, 0.01, 0.5), {"total_sigma_1s": 0.01}),
    "blank_umol": ((10.0, "Nd", "144Nd"), {}),
    "cycle_mean": (([1.0, 1.1, 0.9, 1.0],), {}),
    "cycle_sem_1s": (([1.0, 1.1, 0.9, 1.0],), {}),
    "cycle_stats": (([1.0, 1.1, 0.9, 1.0],), {"rule": "sigma-clip"}),
    "calibrate_spike": ((0.6, 0.5, 0.01, 0.05, ND_SPIKE), {"ratio": "150Nd/144Nd", "standard_conc_sigma_1s": 1e-5}),
    "element_isotopes": (("Nd",), {}),
    "forward_mixture": (("Nd", "144Nd", 0.02, 0.1, ND_SPIKE, 0.05), {"bias_factor": 1.0}),
    "id_amount": ((1.0, 0.5, 10.0, 1e-3), {}),
    "id_concentration": ((0.6, "150Nd/144Nd", 0.1, 0.05, ND_SPIKE), {}),
    "isotope_dilution": ((ND_MIX, ND_SPIKE, 0.1, 0.05), {"norm_ratio": "146Nd/144Nd"}),
    "load_demo_spikes": ((), {}),
    "magnification": ((1.0, 0.5, 10.0), {}),
    "magnification_min": ((0.5, 10.0), {}),
    "make_spike": (("Nd", ["144Nd", "150Nd"], [0.1, 0.9], "150Nd", 1e-3), {"concentration_sigma_1s": 1e-6}),
    "sample_composition": (("Nd", "144Nd"), {"overrides": {"143Nd/144Nd": 0.5121}}),
    "interferent_ratio": (("144Sm", "147Sm"), {}),
    "strip_beams": (({"144Nd": [1.0, 1.0], "147Sm": [0.01, 0.01], "146Nd": [0.7, 0.7]}, "sm-nd"),
                    {"bias_factors": {"Sm": 1.0}}),
    "strip_isobar": ((1.0, 0.01, "144Sm", "147Sm"), {"bias_factor": 1.0}),
    "strip_run_ratios": (("Nd", "144Nd", {"143Nd/144Nd": 0.512, "150Nd/144Nd": 0.3}, {"143Nd/144Nd": 1e-6},
                          {"147Sm/144Nd": (1e-4, 1e-6)}, {"Sm": {"144Sm": 0.03, "147Sm": 0.15, "150Sm": 0.07}},
                          -1.9), {}),
    "mixture_fractions": ((_SM_NAT, _SM_SPIKE, "152Sm", 1.2), {}),
    "oxide_to_metal": (("Sm", "152Sm", {f"{i}/152Sm": 0.5 for i in ("144Sm", "147Sm", "148Sm", "149Sm", "150Sm",
                                                                    "154Sm")}, {}, 3.8e-4, 2.0e-3), {}),
    "bias_apply": ((0.5, 143.9, 145.9, 1.0), {}),
    "bias_correct": ((0.5, 143.9, 145.9, 1.0), {}),
    "bias_factor": ((0.72, 0.7219, 145.9, 143.9), {}),
    "bias_factor_from": ((0.72,), {"norm_ratio": "146Nd/144Nd"}),
    "correct_named": ((0.512, "143Nd/144Nd", 1.0), {}),
    "normalise": ((0.512, "143Nd/144Nd", 0.72, "146Nd/144Nd"), {}),
    "ratio_masses": (("143Nd/144Nd",), {}),
    "cov_from_sigma": (([0.1, 0.2],), {"corr": [[1.0, 0.5], [0.5, 1.0]]}),
    "jacobian": ((_vectorised, [1.0, 2.0]), {}),
    "monte_carlo": ((_vectorised, [1.0, 2.0], [0.01, 0.01]), {"n_draws": 100, "seed": 1}),
    "propagate_linear": ((_vectorised, [1.0, 2.0], [0.01, 0.01]), {"groups": {"a": [0]}, "names": ("y",)}),
    "ellipse_points": ((1.0, 0.01, 2.0, 0.02), {"n_points": 12}),
    "deviation_points": ((1.0, 0.01, 2.0, 0.02, 0.1, 0.5, 1.5), {"n_points": 12}),
    "fit_isochron": (([0.1, 0.2, 0.3], [1e-3] * 3, [0.5, 0.6, 0.71], [1e-3] * 3), {"anchor": (0.4, 0.01)}),
    "weighted_mean": (([1.0, 2.0, 1.5], [0.1, 0.1, 0.2]), {"external_scatter": True, "outlier_k": 3.0}),
    "wendt_carl_limits": ((5,), {}),
    "york_fit": (([0.1, 0.2, 0.3], [1e-3] * 3, [0.5, 0.6, 0.71], [1e-3] * 3), {"rho": 0.1}),
    "york_fit_batch": (([[0.1, 0.2, 0.3]], [[1e-3] * 3], [[0.5, 0.6, 0.71]], [[1e-3] * 3]), {}),
    "apply_standard": ((0.5121, 1e-5, _STD), {}),
    "standard_factor": (([0.5121, 0.5122],), {"accepted": 0.5121}),
}
WRONG = [None, "abc", "", {}, [], [[1.0, 2.0], [3.0]], object(), NAN, -INF, -1, 0, True, b"x", [None], ("a",),
         1e308, 10 ** 400]
FUZZED.update(VALID_CALLS)


@pytest.mark.parametrize("name", sorted(VALID_CALLS))
def test_wrong_types_in_every_argument_finite_or_our_error(name):
    fn = getattr(reduction, name)
    args, kwargs = VALID_CALLS[name]
    _walk(fn(*args, **kwargs), name)                  # the valid call works and is finite
    for i in range(len(args)):
        for w in WRONG:
            # NaN as a beam of strip_isobar is a missing cycle, passed through (module docstring)
            missing = [w] if name == "strip_isobar" and i < 2 else None
            finite_or_ours(fn, *args[:i], w, *args[i + 1:], missing=missing, **kwargs)
    for k in kwargs:
        for w in WRONG:
            finite_or_ours(fn, *args, **dict(kwargs, **{k: w}))
