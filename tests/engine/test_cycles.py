"""Cycle statistics against independent computations (Python's ``statistics`` module, numpy) and
invariants by hypothesis. The rejection rule (iterative k·SD clipping, 2σ) is common practice."""
import statistics

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reduction.cycles import cycle_mean, cycle_sem_1s, cycle_stats
from reduction.errors import InputError


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


def test_no_rejection_matches_statistics_module():
    rng = np.random.default_rng(1)
    x = rng.normal(0.5121, 1e-5, 60)
    s = cycle_stats(x, reject_k=None)
    assert s.mean == pytest.approx(statistics.mean(x), rel=1e-14)
    assert s.sd_1s == pytest.approx(statistics.stdev(x), rel=1e-12)
    assert s.sem_1s == pytest.approx(statistics.stdev(x) / np.sqrt(60), rel=1e-12)
    assert (s.n_kept, s.n_rejected) == (60, 0)


def test_gross_outlier_rejected_at_2sd():
    x = [1.0, 1.1, 0.9, 1.0, 5.0, 1.05, 0.95]
    s = cycle_stats(x)
    assert s.n_rejected == 1 and not s.kept[4]
    assert s.mean == pytest.approx(1.0, rel=1e-14)


def test_iterative_rejection_matches_reference_on_heavy_tails():
    rng = np.random.default_rng(7)
    for _ in range(20):
        x = rng.standard_t(2, 80)
        ref = _reference_clip(list(x), 2.0)
        s = cycle_stats(x, reject_k=2.0)
        assert s.n_kept == len(ref)
        assert s.mean == pytest.approx(statistics.mean(ref), rel=1e-12, abs=1e-15)


def test_2d_with_missing_cycles_equals_rowwise_1d():
    rng = np.random.default_rng(3)
    x = rng.normal(0.7, 1e-4, (5, 40))
    x[1, 30:] = np.nan  # a shorter block
    x[3, 5] = 0.71      # an outlier
    s = cycle_stats(x)
    for i in range(5):
        row = x[i][np.isfinite(x[i])]
        r = cycle_stats(row)
        assert s.mean[i] == pytest.approx(r.mean, rel=1e-14)
        assert s.sem_1s[i] == pytest.approx(r.sem_1s, rel=1e-12)
        assert s.n_kept[i] == r.n_kept
    assert s.n_rejected[3] >= 1 and s.n_kept[1] + s.n_rejected[1] == 30


def test_caller_array_untouched():
    x = np.array([[1.0, 2.0, np.nan, 1.5]])
    before = x.copy()
    cycle_stats(x)
    np.testing.assert_array_equal(x, before)


def test_float_fronts():
    x = [[1.0], [1.2], [0.8], [1.0]]  # a spreadsheet column
    assert cycle_mean(x) == pytest.approx(1.0)
    assert cycle_sem_1s(x) == pytest.approx(statistics.stdev([1.0, 1.2, 0.8, 1.0]) / 2)


@pytest.mark.parametrize("values, arg", [
    ([1.0, float("nan"), 2.0], "values"),
    ([1.0], "values"),
    ([[1.0, 2.0], [3.0, float("nan")]], "values"),
    (["a", 1.0], "values"),
    (np.ones((2, 2, 2)), "values"),
])
def test_bad_input_names_argument(values, arg):
    with pytest.raises(InputError) as e:
        cycle_stats(values)
    assert e.value.argument == arg


def test_bad_k():
    with pytest.raises(InputError) as e:
        cycle_stats([1.0, 2.0, 3.0], reject_k=0)
    assert e.value.argument == "reject_k"


finite = st.floats(-1e3, 1e3, allow_nan=False, allow_infinity=False)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(-4000, 4000), min_size=4, max_size=30), st.integers(-100, 100),
       st.sampled_from([0.25, 0.5, 2.0, 8.0]))
def test_affine_equivariance(ks, shift, scale):
    # Clipping depends only on standardised deviations, so x -> a + b x maps kept sets onto each other.
    # Data on a grid of 1/8 and power-of-two scales keep the transform exact in floating point (a value
    # far below the shift's rounding level would otherwise vanish, which no algorithm can see).
    x = np.array(ks) / 8.0
    if np.ptp(x) == 0:
        return
    s1 = cycle_stats(x)
    s2 = cycle_stats(shift + scale * x)
    np.testing.assert_array_equal(s1.kept, s2.kept)
    assert s2.mean == pytest.approx(shift + scale * s1.mean, rel=1e-12, abs=1e-9)


@settings(max_examples=40, deadline=None)
@given(st.lists(finite, min_size=4, max_size=30), st.randoms())
def test_permutation_invariance(xs, rnd):
    x = np.array(xs)
    y = x.copy()
    rnd.shuffle(y)
    a, b = cycle_stats(x), cycle_stats(y)
    assert a.n_kept == b.n_kept
    assert a.mean == pytest.approx(b.mean, rel=1e-12, abs=1e-9)
