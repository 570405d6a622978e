"""Cycle statistics against independent references.

* Plain-Python re-implementations with the ``statistics`` module (mean, stdev, median).
* Hand-worked cases (median, MAD, kept set, mean, SEM written out below).
* Seeded simulation of normal cycles: the reported SEM must match the actual scatter of run means.
  SEM = SD/√n is standard statistics (Taylor 1997, *An Introduction to Error Analysis*, §4.4).
* Invariants by hypothesis.

Rules: "robust" = one pass, |x - median| > 3.5 · 1.4826 · MAD (modified z-score, Iglewicz & Hoaglin 1993,
*How to Detect and Handle Outliers*, ASQC; cut-off recalled from memory; 1.4826 = 1/Φ⁻¹(3/4), Hampel 1974,
J. Am. Stat. Assoc. 69, 383); "sigma-clip" = iterative k·SD clipping, 2σ (common practice).
"""
import inspect
import math
import statistics
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reduction.chain import reduce_cycles
from reduction.cycles import DEFAULT_K, MAD_TO_SD, RULES, cycle_mean, cycle_sem_1s, cycle_stats
from reduction.errors import InputError

PHI_INV_3_4 = statistics.NormalDist().inv_cdf(0.75)  # Φ⁻¹(3/4), the normal MAD/SD ratio (Hampel 1974)


def _reference_clip(xs, k, min_kept=3, max_passes=10):
    """Plain-Python iterative k·SD clipping with the statistics module (independent implementation)."""
    kept = list(xs)
    for _ in range(max_passes):
        m, s = statistics.mean(kept), statistics.stdev(kept)
        new = [x for x in kept if abs(x - m) <= k * s]
        if len(new) == len(kept) or len(new) < min_kept:
            break
        kept = new
    return kept


def _reference_robust(xs, k=3.5, min_kept=3):
    """Plain-Python modified z-score rule (Iglewicz & Hoaglin 1993): |x - median| · Φ⁻¹(3/4) / MAD > k."""
    med = statistics.median(xs)
    mad = statistics.median([abs(x - med) for x in xs])
    kept = [x for x in xs if abs(x - med) * PHI_INV_3_4 <= k * mad]
    return kept if len(kept) >= min_kept else list(xs)


# ------------------------------------------------------------------------------------------ defaults
def test_default_everywhere_is_the_robust_rule():
    # issue 9, item 4: the honest rule is the default of every engine entry point
    assert DEFAULT_K == {"robust": 3.5, "sigma-clip": 2.0} and RULES[0] == "robust"
    s = cycle_stats([1.0, 1.1, 0.9, 1.0, 1.05, 0.95])
    assert s.reject_k == 3.5 and s.passes == 1
    assert s.rule.startswith("one pass rejecting cycles more than 3.5 robust SD")
    for f in (cycle_stats, cycle_mean, cycle_sem_1s):
        p = inspect.signature(f).parameters
        assert p["rule"].default == "robust" and p["reject_k"].default == "default"
    assert inspect.signature(reduce_cycles).parameters["reject_k"].default == DEFAULT_K["robust"]


def test_mad_constant():
    # Iglewicz & Hoaglin (1993) write the modified z-score as 0.6745 (x - median) / MAD; 1/0.6745 = 1.4826
    assert MAD_TO_SD == pytest.approx(1 / 0.6745, rel=1e-4)
    assert MAD_TO_SD == pytest.approx(1.482602218505602, rel=1e-15)  # 1/Φ⁻¹(0.75) (Hampel 1974)


def test_rule_text_and_fields_name_the_rule():
    x = [1.0, 1.1, 0.9, 1.0, 5.0, 1.05, 0.95]
    r = cycle_stats(x, rule="robust")
    c = cycle_stats(x, rule="sigma-clip")
    n = cycle_stats(x, rule="none")
    assert "median absolute deviation" in r.rule and "3.5" in r.rule and "kept" in r.rule
    assert c.rule.startswith("iterative rejection of cycles beyond 2 SD") and c.reject_k == 2.0 and c.passes >= 2
    assert n.rule == "no outlier rejection" and n.reject_k is None and n.passes == 0 and n.n_rejected == 0
    # reject_k=None keeps its meaning, "no rejection", whatever the rule
    for rule in RULES:
        s = cycle_stats(x, rule=rule, reject_k=None)
        assert (s.n_kept, s.n_rejected, s.reject_k, s.rule) == (7, 0, None, "no outlier rejection")
    assert cycle_stats(x, rule=" Sigma-Clip ", reject_k=3.0).reject_k == 3.0


# ------------------------------------------------------------------------------------------ simulation
def _simulate(rule, n_cycles, runs, seed):
    """Seeded normal cycles (a realistic ratio and 1σ): returns (scatter/RMS SEM, scatter/mean SEM,
    rejection fraction, mean of means - true, its standard error)."""
    mu, sigma = 0.512100, 2.0e-5
    x = np.random.default_rng(seed).normal(mu, sigma, (runs, n_cycles))
    s = cycle_stats(x, rule=rule)
    scatter = np.std(s.mean, ddof=1)
    return (scatter / np.sqrt(np.mean(s.sem_1s ** 2)), scatter / np.mean(s.sem_1s),
            s.n_rejected.sum() / x.size, s.mean.mean() - mu, scatter / np.sqrt(runs))


@pytest.mark.parametrize("n_cycles", [30, 100])
def test_robust_default_reports_honest_sem_on_normal_cycles(n_cycles):
    # Simulation reference: for independent normal cycles the true SD of run means is σ/√n, and the
    # RMS of an honest SEM = SD/√n is the same (E[SD²] = σ², Taylor 1997 §4.4). 20 000 runs: the ratio
    # is known to ±0.5 % (1σ), so the ±5 % band is not a matter of the seed. Measured (module notes):
    # 1.03 at 30 cycles, 1.02 at 100 (the mean-SEM ratio adds the small c4 bias of SD: 1.04, 1.03).
    ratio_rms, ratio_mean, rejected, bias, bias_se = _simulate("robust", n_cycles, 20_000, 9004 + n_cycles)
    assert ratio_rms == pytest.approx(1.0, abs=0.05)
    assert ratio_mean == pytest.approx(1.0, abs=0.05)
    assert rejected < 0.01
    assert abs(bias) < 4 * bias_se  # the mean of the run means is unbiased


def test_simulation_harness_gives_one_without_rejection():
    # Control for the harness: no rejection is honest by construction (Taylor 1997 §4.4)
    ratio_rms, _, rejected, bias, bias_se = _simulate("none", 30, 20_000, 9034)
    assert ratio_rms == pytest.approx(1.0, abs=0.02) and rejected == 0 and abs(bias) < 4 * bias_se


@pytest.mark.parametrize("n_cycles, min_ratio, min_rejected", [(30, 1.3, 0.06), (100, 1.5, 0.10)])
def test_sigma_clip_by_name_under_reports_sem(n_cycles, min_ratio, min_rejected):
    # Keeps the documented bias true (module notes: 8.2 % / 11.8 % rejected, scatter/SEM 1.44 / 1.68 at
    # 30 / 100 cycles, 2σ iterative clipping, common practice): genuine tail cycles are trimmed pass after
    # pass, so the SD of the kept cycles falls below the real scatter of the mean.
    ratio_rms, _, rejected, bias, bias_se = _simulate("sigma-clip", n_cycles, 4_000, 7001 + n_cycles)
    assert ratio_rms > min_ratio and rejected > min_rejected
    assert abs(bias) < 4 * bias_se  # symmetric trimming: the mean stays unbiased, only its SEM is wrong


# ------------------------------------------------------------------------------------------ hand-worked
def test_robust_hand_worked_ten_cycles():
    x = [10.0, 10.2, 9.9, 10.1, 9.8, 10.0, 10.3, 9.7, 10.1, 14.0]
    # sorted: 9.7 9.8 9.9 10.0 10.0 | 10.1 10.1 10.2 10.3 14.0 -> median = (10.0 + 10.1)/2 = 10.05
    # |x - 10.05|: .05 .15 .15 .05 .25 .05 .25 .35 .05 3.95; sorted .05 .05 .05 .05 .15 | .15 .25 .25 .35 3.95
    # -> MAD = 0.15; robust SD = 1.4826 * 0.15 = 0.2224; cut-off 3.5 * 0.2224 = 0.778:
    # only 14.0 (3.95) is beyond it; the next largest deviation, 0.35 (9.7), is well inside.
    median, mad = 10.05, 0.15
    cut = 3.5 * 1.482602218505602 * mad
    assert 0.35 < cut < 3.95
    s = cycle_stats(x)
    assert s.n_rejected == 1 and s.n_kept == 9 and list(np.flatnonzero(~s.kept)) == [9]
    kept = [Fraction(str(v)) for v in x[:9]]
    mean = sum(kept) / 9  # 90.1 / 9
    var = sum((v - mean) ** 2 for v in kept) / 8
    assert mean == Fraction("90.1") / 9
    assert s.mean == pytest.approx(float(mean), rel=1e-12)
    assert s.sd_1s == pytest.approx(math.sqrt(var), rel=1e-12)
    assert s.sem_1s == pytest.approx(math.sqrt(var / 9), rel=1e-12)
    assert cycle_mean(x) == s.mean and cycle_sem_1s(x) == s.sem_1s
    assert median == pytest.approx(statistics.median(x), rel=1e-15)
    assert mad == pytest.approx(statistics.median([abs(v - median) for v in x]), rel=1e-12)


def test_robust_keeps_a_moderate_tail_cycle_that_2sd_clipping_drops():
    # 12 cycles 10.0 ± 0.1 and one at +0.25: 2.5 SD out, a normal tail value, not a gross outlier.
    x = [10.0, 10.1, 9.9, 10.0, 10.1, 9.9, 10.0, 10.1, 9.9, 10.0, 10.05, 9.95, 10.25]
    # median 10.0; |dev| sorted: 0 0 0 0 .05 .05 | .1 ... -> MAD = 0.1, cut = 3.5*1.4826*0.1 = 0.519 > 0.25
    assert cycle_stats(x).n_rejected == 0
    # 2σ clipping: mean of all 13 = 10.019, SD = 0.101, and 10.25 is 0.231 > 2 SD from the mean
    assert cycle_stats(x, rule="sigma-clip").n_rejected >= 1


def test_robust_zero_mad_falls_back_to_mean_absolute_deviation():
    # [1]*6 + [5]: median 1, MAD 0; mean |dev| = 4/7; robust SD = √(π/2)·4/7 = 0.716 (normal-theory ratio,
    # Geary 1935, recalled from memory); cut 3.5·0.716 = 2.51 < 4 -> the 5 goes, SD of the rest 0.
    s = cycle_stats([1.0] * 6 + [5.0])
    assert 3.5 * math.sqrt(math.pi / 2) * 4 / 7 < 4
    assert (s.n_kept, s.n_rejected, s.mean, s.sd_1s, s.sem_1s) == (6, 1, 1.0, 0.0, 0.0)
    # [1]*4 + [2]*3: median 1, MAD 0; mean |dev| = 3/7, cut 3.5·√(π/2)·3/7 = 1.88 > 1 -> all kept
    assert cycle_stats([1.0] * 4 + [2.0] * 3).n_rejected == 0
    s = cycle_stats([2.5] * 5)  # every cycle equal: nothing to reject, SD 0
    assert (s.n_kept, s.sd_1s, s.sem_1s) == (5, 0.0, 0.0)


# ------------------------------------------------------------------------------------------ references
def test_no_rejection_matches_statistics_module():
    rng = np.random.default_rng(1)
    x = rng.normal(0.5121, 1e-5, 60)
    s = cycle_stats(x, reject_k=None)
    assert s.mean == pytest.approx(statistics.mean(x), rel=1e-14)
    assert s.sd_1s == pytest.approx(statistics.stdev(x), rel=1e-12)
    assert s.sem_1s == pytest.approx(statistics.stdev(x) / np.sqrt(60), rel=1e-12)
    assert (s.n_kept, s.n_rejected) == (60, 0)


@pytest.mark.parametrize("rule", ["robust", "sigma-clip"])
def test_gross_outlier_rejected(rule):
    x = [1.0, 1.1, 0.9, 1.0, 5.0, 1.05, 0.95]
    s = cycle_stats(x, rule=rule)
    assert s.n_rejected == 1 and not s.kept[4]
    assert s.mean == pytest.approx(1.0, rel=1e-14)


def test_iterative_rejection_matches_reference_on_heavy_tails():
    rng = np.random.default_rng(7)
    for _ in range(20):
        x = rng.standard_t(2, 80)
        ref = _reference_clip(list(x), 2.0)
        s = cycle_stats(x, rule="sigma-clip", reject_k=2.0)
        assert s.n_kept == len(ref)
        assert s.mean == pytest.approx(statistics.mean(ref), rel=1e-12, abs=1e-15)


@pytest.mark.parametrize("k", [2.0, 3.5, 5.0])
def test_robust_rule_matches_reference_on_heavy_tails(k):
    rng = np.random.default_rng(11)
    for _ in range(20):
        x = rng.standard_t(2, 80)
        ref = _reference_robust(list(x), k)
        s = cycle_stats(x, reject_k=k)
        assert s.n_kept == len(ref) and s.passes == 1
        assert s.mean == pytest.approx(statistics.mean(ref), rel=1e-12, abs=1e-15)
        assert s.sem_1s == pytest.approx(statistics.stdev(ref) / math.sqrt(len(ref)), rel=1e-12)


# ------------------------------------------------------------------------------------------ guarantees
@pytest.mark.parametrize("rule", RULES)
def test_2d_with_missing_cycles_equals_rowwise_1d(rule):
    rng = np.random.default_rng(3)
    x = rng.normal(0.7, 1e-4, (5, 40))
    x[1, 30:] = np.nan  # a shorter block
    x[3, 5] = 0.71      # an outlier
    x[4, ::3] = np.nan  # gaps inside a block
    x[4, 1] = 0.69      # an outlier in a block with gaps
    s = cycle_stats(x, rule=rule)
    for i in range(5):
        row = x[i][np.isfinite(x[i])]
        r = cycle_stats(row, rule=rule)
        assert s.mean[i] == pytest.approx(r.mean, rel=1e-14)
        assert s.sem_1s[i] == pytest.approx(r.sem_1s, rel=1e-12)
        assert s.n_kept[i] == r.n_kept and s.n_rejected[i] == r.n_rejected
        np.testing.assert_array_equal(s.kept[i][np.isfinite(x[i])], r.kept)
    assert not s.kept[np.isnan(x)].any()  # a missing cycle is never "kept"
    assert s.n_kept[1] + s.n_rejected[1] == 30 and s.n_kept[4] + s.n_rejected[4] == 26
    if rule != "none":
        assert not s.kept[3, 5] and not s.kept[4, 1]


@pytest.mark.parametrize("rule, kw", [("robust", {}), ("sigma-clip", {"reject_k": 1.5})])
def test_min_kept_is_respected(rule, kw):
    # k·SD clipping can never reject in tiny samples: |x - mean| / SD <= (n - 1)/√n (Samuelson's
    # inequality; 2.04 at n = 6, 1.79 at n = 5), so the sigma-clip case uses k = 1.5.
    x = [1.0, 1.0001, 1.0002, 0.9999, 0.9998, 50.0]  # 50 is gross
    assert cycle_stats(x, rule=rule, **kw).n_rejected == 1
    assert cycle_stats(x, rule=rule, min_kept=6, **kw).n_rejected == 0
    two_d = np.array([x, [1.0, 1.0001, 0.9999, 1.0002, 50.0, np.nan]])
    s = cycle_stats(two_d, rule=rule, min_kept=5, **kw)  # row 2: dropping 50 would leave 4 < 5: keeps all
    np.testing.assert_array_equal(s.n_kept, [5, 5])
    np.testing.assert_array_equal(s.n_rejected, [1, 0])


def test_caller_array_untouched():
    x = np.array([[1.0, 2.0, np.nan, 1.5, 9.0]])
    before = x.copy()
    for rule in RULES:
        cycle_stats(x, rule=rule)
    np.testing.assert_array_equal(x, before)


def test_float_fronts():
    x = [[1.0], [1.2], [0.8], [1.0]]  # a spreadsheet column
    assert cycle_mean(x) == pytest.approx(1.0)
    assert cycle_sem_1s(x) == pytest.approx(statistics.stdev([1.0, 1.2, 0.8, 1.0]) / 2)
    y = [1.0, 1.1, 0.9, 1.0, 5.0, 1.05, 0.95]
    assert cycle_mean(y, 2.0, "sigma-clip") == pytest.approx(1.0)  # positional reject_k still works
    assert cycle_mean(y, None) == pytest.approx(statistics.mean(y))
    assert cycle_sem_1s(y, rule="none") == pytest.approx(statistics.stdev(y) / math.sqrt(7))


@pytest.mark.parametrize("values, arg", [
    ([1.0, float("nan"), 2.0], "values"),
    ([1.0], "values"),
    ([[1.0, 2.0], [3.0, float("nan")]], "values"),
    (["a", 1.0], "values"),
    (np.ones((2, 2, 2)), "values"),
    ([[1.0, float("inf"), 2.0]], "values"),
])
def test_bad_input_names_argument(values, arg):
    with pytest.raises(InputError) as e:
        cycle_stats(values)
    assert e.value.argument == arg


@pytest.mark.parametrize("kwargs, arg", [
    ({"reject_k": 0}, "reject_k"),
    ({"reject_k": -1.0}, "reject_k"),
    ({"reject_k": float("nan")}, "reject_k"),
    ({"reject_k": "2"}, "reject_k"),
    ({"rule": "mad"}, "rule"),
    ({"rule": None}, "rule"),
    ({"rule": "sigma-clip", "max_passes": 0}, "max_passes"),
])
def test_bad_options_name_argument(kwargs, arg):
    with pytest.raises(InputError) as e:
        cycle_stats([1.0, 2.0, 3.0], **kwargs)
    assert e.value.argument == arg


finite = st.floats(-1e3, 1e3, allow_nan=False, allow_infinity=False)


@pytest.mark.parametrize("rule", ["robust", "sigma-clip"])
@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(-4000, 4000), min_size=4, max_size=30), st.integers(-100, 100),
       st.sampled_from([0.25, 0.5, 2.0, 8.0]))
def test_affine_equivariance(rule, ks, shift, scale):
    # Both rules depend only on standardised deviations (from the mean and SD, or from the median and
    # MAD), so x -> a + b x maps kept sets onto each other. Data on a grid of 1/8 and power-of-two scales
    # keep the transform exact in floating point (a value far below the shift's rounding level would
    # otherwise vanish, which no algorithm can see).
    x = np.array(ks) / 8.0
    if np.ptp(x) == 0:
        return
    s1 = cycle_stats(x, rule=rule)
    s2 = cycle_stats(shift + scale * x, rule=rule)
    np.testing.assert_array_equal(s1.kept, s2.kept)
    assert s2.mean == pytest.approx(shift + scale * s1.mean, rel=1e-12, abs=1e-9)


@pytest.mark.parametrize("rule", ["robust", "sigma-clip"])
@settings(max_examples=40, deadline=None)
@given(st.lists(finite, min_size=4, max_size=30), st.randoms())
def test_permutation_invariance(rule, xs, rnd):
    x = np.array(xs)
    y = x.copy()
    rnd.shuffle(y)
    a, b = cycle_stats(x, rule=rule), cycle_stats(y, rule=rule)
    assert a.n_kept == b.n_kept
    assert a.mean == pytest.approx(b.mean, rel=1e-12, abs=1e-9)
