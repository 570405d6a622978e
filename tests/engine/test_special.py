"""reduction.special (χ², t, normal without scipy) against scipy.special and mpmath (test oracles only).

Sources: scipy.special.chdtrc / chdtri / stdtrit / ndtri (general-purpose library); mpmath at 40 digits
(regularised incomplete gamma and beta) where scipy itself is less accurate than 1e-12 (deep χ² tails
at large dof: mpmath shows scipy off by ~5e-12 at dof 4306, x = 1.5·dof).
"""
import math

import mpmath as mp
import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy import special as sp

from reduction.errors import InputError, UndefinedResultError
from reduction.special import chi2_isf, chi2_sf, normal_ppf, t_ppf

DOFS = list(range(1, 61)) + sorted({int(v) for v in np.logspace(np.log10(61), np.log10(5000), 40)})
PROBS = (1e-12, 1e-6, 1e-3, 0.025, 0.05, 0.1, 0.5, 0.9, 0.95, 0.975, 0.999)
MULTS = (0.01, 0.05, 0.1, 0.3, 0.5, 0.8, 1.0, 1.2, 1.5, 2.0, 3.0, 5.0, 10.0)


def _mp_sf(x, d):
    mp.mp.dps = 40
    return mp.gammainc(mp.mpf(d) / 2, mp.mpf(x) / 2, mp.inf, regularized=True)


@pytest.mark.parametrize("d", DOFS)
def test_chi2_sf_and_isf_against_scipy(d):
    for m in MULTS:
        x = d * m
        ref = float(sp.chdtrc(d, x))
        if ref < 1e-300:
            continue
        got = chi2_sf(x, d)
        if abs(got - ref) > 1e-12 * ref:          # then scipy is the less accurate one: mpmath decides
            assert abs(got - float(_mp_sf(x, d))) <= 1e-12 * ref, (d, m)
    for p in PROBS:
        ref = float(sp.chdtri(d, p))
        assert chi2_isf(p, d) == pytest.approx(ref, rel=1e-12), (d, p)


def _mp_t_upper(q, d):
    """t with P(T > t) = q (q < ½), mpmath at 40 digits: ½·I_{ν/(ν+t²)}(ν/2, ½) = q."""
    mp.mp.dps = 40
    start = float(sp.stdtrit(d, 1 - q))
    return float(mp.findroot(lambda t: mp.betainc(mp.mpf(d) / 2, 0.5, 0, mp.mpf(d) / (d + t * t),
                                                  regularized=True) / 2 - mp.mpf(q), start))


@pytest.mark.parametrize("d", DOFS)
def test_t_quantile_against_scipy(d):
    for p in PROBS:
        if p == 0.5:
            assert t_ppf(p, d) == 0.0
            continue
        for pp in (p, 1 - p):
            got, ref = t_ppf(pp, d), float(sp.stdtrit(d, pp))
            if abs(got - ref) > 1e-10 * abs(ref):   # older scipy (1.10) is less accurate: mpmath decides
                truth = math.copysign(_mp_t_upper(min(pp, 1 - pp), d), ref)
                assert got == pytest.approx(truth, rel=1e-10), (d, pp)


@pytest.mark.parametrize("d", [1e4, 2e4])   # mpmath.gammainc is slow beyond a ~ 1e4
def test_huge_dof_against_mpmath(d):
    mp.mp.dps = 40
    q = mp.findroot(lambda x: mp.gammainc(mp.mpf(d) / 2, x / 2, mp.inf, regularized=True) - mp.mpf("0.05"),
                    d * (1 + 2 / mp.sqrt(d)))
    assert chi2_isf(0.05, d) == pytest.approx(float(q), rel=1e-12)
    t = mp.findroot(lambda t: mp.betainc(mp.mpf(d) / 2, 0.5, 0, mp.mpf(d) / (d + t * t), regularized=True) / 2
                    - mp.mpf("0.025"), 2.0)
    assert t_ppf(0.975, d) == pytest.approx(float(t), rel=1e-12)


def test_normal_quantile_against_scipy():
    for p in PROBS:
        if p != 0.5:
            assert normal_ppf(p) == pytest.approx(float(sp.ndtri(p)), rel=1e-14)


def test_hand_worked_values():
    # two degrees of freedom: sf = e^(-x/2), isf = -2 ln p (closed form, A&S 26.4.4)
    assert chi2_sf(3.0, 2) == pytest.approx(math.exp(-1.5), rel=1e-15)
    assert chi2_isf(0.05, 2) == pytest.approx(-2 * math.log(0.05), rel=1e-14)
    # t with one degree of freedom is Cauchy: tan(π(p − ½))
    assert t_ppf(0.975, 1) == pytest.approx(math.tan(math.pi * 0.475), rel=1e-14)


FLOATS = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-10, 10 ** 6).map(float))


@given(FLOATS, FLOATS)
def test_finite_result_or_our_error(a, b):
    for f in (chi2_sf, chi2_isf, t_ppf):
        try:
            v = f(a, b)
        except (InputError, UndefinedResultError):
            continue
        assert math.isfinite(v)
    try:
        assert math.isfinite(normal_ppf(a))
    except InputError:
        pass
