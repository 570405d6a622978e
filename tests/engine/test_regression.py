"""York regression, scatter treatments, weighted mean: checks against the outside world.

Sources named beside each check:
* Pearson (1901) data with York (1966) weights: REFERENCE.md §6a (values [C], computed there and
  agreeing with an independent general-purpose implementation to 12 digits). The published York et
  al. 2004 (Am. J. Phys. 72, 367) Table II figures (b = −0.4805, σb = 0.0580, σa = 0.2950) are
  recalled from memory (REFERENCE.md marks them [M]); they agree to 4 digits.
* Wendt & Carl 1991 (Chem. Geol. 86, 275): MSWD limits, REFERENCE.md §6c.
* odrpack 0.7 (general-purpose ODRPACK95 wrapper) for ρ = 0.
* An independent maximum-likelihood fit (scipy.optimize.least_squares on the whitened bivariate
  residuals with the true x values as parameters) for ρ ≠ 0.
* scipy.stats (linregress, chi2) and seeded Monte Carlo for error propagation.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, stats

from reduction.errors import ConvergenceError, InputError, UndefinedResultError
from reduction.regression import (
    ellipse_points,
    fit_isochron,
    weighted_mean,
    wendt_carl_limits,
    york_fit,
    york_fit_batch,
)

DATA = Path(__file__).with_name("data")


def pearson():
    d = np.loadtxt(DATA / "pearson_york.csv", delimiter=",", skiprows=1)
    return d[:, 0], d[:, 1], d[:, 2], d[:, 3], d[:, 4]


def synthetic(rng, n=12, slope=0.8, intercept=0.2, corr=True):
    """Points scattered about a true line by their stated (possibly correlated) errors."""
    xt = rng.uniform(0.0, 3.0, n)
    sx = rng.uniform(0.005, 0.05, n)
    sy = rng.uniform(0.005, 0.05, n)
    rho = rng.uniform(-0.8, 0.8, n) if corr else np.zeros(n)
    z1, z2 = rng.standard_normal(n), rng.standard_normal(n)
    x = xt + sx * z1
    y = intercept + slope * xt + sy * (rho * z1 + np.sqrt(1 - rho ** 2) * z2)
    return x, sx, y, sy, rho


# --- Pearson / York -------------------------------------------------------------------------

def test_pearson_york_reference_values():
    # REFERENCE.md §6a (Pearson 1901 data, York 1966 weights): the [C] values computed there; York et al.
    # 2004 Table II (recalled from memory, [M]) agrees to its 4 printed digits
    fit = york_fit(*pearson())
    assert fit.slope == pytest.approx(-0.480533407446, rel=1e-10)
    assert fit.intercept == pytest.approx(5.479910224033, rel=1e-10)
    assert fit.slope_sigma_1s == pytest.approx(0.0579850, abs=5e-8)
    assert fit.intercept_sigma_1s == pytest.approx(0.2949707, abs=5e-8)
    assert fit.mswd == pytest.approx(1.48329, abs=5e-6)
    assert fit.dof == 8 and fit.n == 10
    assert fit.chi2 == pytest.approx(11.86635, abs=5e-6)
    assert fit.p_value == pytest.approx(0.157, abs=5e-4)
    assert fit.rho_slope_intercept == pytest.approx(-0.9631, abs=5e-5)
    # weighted mean of the adjusted x: cov(a, b) = -x̄ σb²  (REFERENCE.md: x̄ = 4.89925)
    assert -fit.cov_slope_intercept / fit.slope_sigma_1s ** 2 == pytest.approx(4.89925, abs=5e-6)
    # the line passes through the weighted centroid of the observed points
    assert fit.y_centroid == pytest.approx(fit.intercept + fit.slope * fit.x_centroid, rel=1e-12)


def test_pearson_expanded_matches_scaled_reference():
    # REFERENCE.md §6a: σ scaled by √MSWD = 0.070620 (slope), 0.359247 (intercept)
    fit = fit_isochron(*pearson(), treatment="expanded")
    assert fit.slope == pytest.approx(-0.480533407446, rel=1e-10)
    assert fit.slope_sigma_1s == pytest.approx(0.0706203, abs=5e-7)
    assert fit.intercept_sigma_1s == pytest.approx(0.3592465, abs=5e-7)
    assert fit.sigma_scale == pytest.approx(np.sqrt(1.4832941), rel=1e-7)
    assert fit.slope_sigma_1s_unscaled == pytest.approx(0.0579850, abs=5e-8)


def test_expanded_95_uses_student_t():
    # common practice: t_{0.975, dof} · √MSWD · σ; t from mpmath at 40 digits (scipy 1.10's is ~7e-11 off)
    import mpmath as mp

    mp.mp.dps = 40
    fit = york_fit(*pearson())
    t = float(mp.findroot(lambda t: mp.betainc(4, 0.5, 0, 8 / (8 + t * t), regularized=True) / 2
                          - mp.mpf("0.025"), 2.3))
    assert fit.t95 == pytest.approx(t, rel=1e-12)
    assert fit.slope_sigma_95_expanded == pytest.approx(t * np.sqrt(fit.mswd) * fit.slope_sigma_1s, rel=1e-12)
    assert fit.intercept_sigma_95_expanded == pytest.approx(t * np.sqrt(fit.mswd) * fit.intercept_sigma_1s,
                                                            rel=1e-12)


def test_expanded_not_scaled_when_mswd_below_one():
    rng = np.random.default_rng(3)
    x, sx, y, sy, rho = synthetic(rng)
    fit = york_fit(x, sx * 5, y, sy * 5, rho)        # errors overstated -> MSWD << 1
    assert fit.mswd < 1
    exp = fit_isochron(x, sx * 5, y, sy * 5, rho, treatment="expanded")
    assert exp.slope_sigma_1s == fit.slope_sigma_1s and exp.sigma_scale == 1.0
    assert fit.slope_sigma_95_expanded == pytest.approx(fit.t95 * fit.slope_sigma_1s, rel=1e-12)


# --- Wendt & Carl ---------------------------------------------------------------------------

@pytest.mark.parametrize("f, exact, approx", [
    # REFERENCE.md §6c: exact χ² 95 % limits and the Wendt & Carl (1991) 1 + 2√(2/f)
    (3, 2.605, 2.633), (5, 2.214, 2.265), (8, 1.938, 2.000),
    (10, 1.831, 1.894), (20, 1.571, 1.632), (50, 1.350, 1.400),
])
def test_wendt_carl_limits(f, exact, approx):
    lo, hi = wendt_carl_limits(f)
    assert hi == pytest.approx(exact, abs=5e-4)
    assert lo == pytest.approx(stats.chi2.ppf(0.05, f) / f, rel=1e-10)
    alo, ahi = wendt_carl_limits(f, approximate=True)
    assert ahi == pytest.approx(approx, abs=5e-4)
    assert alo == pytest.approx(max(0.0, 1 - 2 * np.sqrt(2 / f)), rel=1e-12)


def test_fit_carries_wendt_carl_limits():
    fit = york_fit(*pearson())
    assert fit.mswd_limits_95[1] == pytest.approx(1.938, abs=5e-4)   # f = 8, REFERENCE.md §6c


@pytest.mark.parametrize("bad", [0, -1, 2.5, True])
def test_wendt_carl_rejects_bad_dof(bad):
    with pytest.raises(InputError, match="dof"):
        wendt_carl_limits(bad)


# --- independent libraries ------------------------------------------------------------------

def _odr(x, sx, y, sy, beta0):
    odrpack = pytest.importorskip("odrpack")
    return odrpack.odr_fit(lambda xx, b: b[0] + b[1] * xx, x, y, np.asarray(beta0, float),
                           weight_x=1 / sx ** 2, weight_y=1 / sy ** 2, sstol=1e-15, partol=1e-15, maxit=1000)


def test_pearson_agrees_with_odrpack():
    x, sx, y, sy, _ = pearson()
    res = _odr(x, sx, y, sy, [5.0, -0.5])
    fit = york_fit(x, sx, y, sy)
    # odrpack stops on a sum-of-squares criterion, so agreement is to ~1e-6 relative
    assert fit.intercept == pytest.approx(res.beta[0], rel=1e-5)
    assert fit.slope == pytest.approx(res.beta[1], rel=1e-5)
    # odrpack's cov_beta is unscaled; its sd_beta is scaled by the residual variance (= MSWD)
    assert fit.slope_sigma_1s == pytest.approx(np.sqrt(res.cov_beta[1, 1]), rel=1e-4)
    assert fit.intercept_sigma_1s == pytest.approx(np.sqrt(res.cov_beta[0, 0]), rel=1e-4)
    assert fit.mswd == pytest.approx(res.res_var, rel=1e-6)


@pytest.mark.parametrize("seed", [1, 2, 3, 4])
def test_random_uncorrelated_agrees_with_odrpack(seed):
    rng = np.random.default_rng(seed)
    x, sx, y, sy, _ = synthetic(rng, n=15, corr=False)
    fit = york_fit(x, sx, y, sy)
    res = _odr(x, sx, y, sy, [fit.intercept * 0.9, fit.slope * 1.1])
    assert fit.slope == pytest.approx(res.beta[1], rel=1e-6)
    assert fit.intercept == pytest.approx(res.beta[0], rel=1e-5, abs=1e-7)
    assert fit.slope_sigma_1s == pytest.approx(np.sqrt(res.cov_beta[1, 1]), rel=1e-4)


def _ml_bivariate(x, sx, y, sy, rho, anchor=None):
    """Independent ML line: minimise Σ dᵀ Σ⁻¹ d over (a, b, X_1..X_n) with scipy least_squares."""
    n = x.size
    ch = []
    for i in range(n):
        c = np.array([[sx[i] ** 2, rho[i] * sx[i] * sy[i]], [rho[i] * sx[i] * sy[i], sy[i] ** 2]])
        ch.append(np.linalg.inv(np.linalg.cholesky(c)))
    ch = np.array(ch)

    def resid(p):
        a, b, xt = p[0], p[1], p[2:]
        d = np.stack([x - xt, y - a - b * xt], axis=1)
        r = np.einsum("nij,nj->ni", ch, d).ravel()
        if anchor is not None:
            r = np.append(r, (a - anchor[0]) / anchor[1])
        return r

    b0, a0 = np.polyfit(x, y, 1)
    sol = optimize.least_squares(resid, np.concatenate([[a0, b0], x]), xtol=1e-15, ftol=1e-15, gtol=1e-15,
                                 method="lm")
    jac = sol.jac
    cov = np.linalg.inv(jac.T @ jac)
    return sol.x[0], sol.x[1], np.sqrt(cov[0, 0]), np.sqrt(cov[1, 1]), 2 * sol.cost


@pytest.mark.parametrize("seed", [5, 6, 7])
def test_correlated_agrees_with_independent_ml(seed):
    rng = np.random.default_rng(seed)
    x, sx, y, sy, rho = synthetic(rng, n=10)
    a, b, sa, sb, chi2 = _ml_bivariate(x, sx, y, sy, rho)
    fit = york_fit(x, sx, y, sy, rho)
    assert fit.slope == pytest.approx(b, rel=1e-8)
    assert fit.intercept == pytest.approx(a, rel=1e-7, abs=1e-9)
    assert fit.chi2 == pytest.approx(chi2, rel=1e-7)
    # York et al. 2004 errors equal the ML (Gauss-Newton) covariance of (a, b)
    assert fit.slope_sigma_1s == pytest.approx(sb, rel=1e-5)
    assert fit.intercept_sigma_1s == pytest.approx(sa, rel=1e-5)


def test_anchor_agrees_with_independent_ml():
    rng = np.random.default_rng(11)
    x, sx, y, sy, rho = synthetic(rng, n=8)
    anchor = (0.21, 0.004)
    a, b, sa, sb, chi2 = _ml_bivariate(x, sx, y, sy, rho, anchor=anchor)
    fit = fit_isochron(x, sx, y, sy, rho, anchor=anchor)
    assert fit.slope == pytest.approx(b, rel=1e-8)
    assert fit.intercept == pytest.approx(a, rel=1e-8)
    assert fit.slope_sigma_1s == pytest.approx(sb, rel=1e-5)
    assert fit.dof == 8 - 1 and fit.n == 8 and fit.anchor == anchor
    assert fit.chi2 == pytest.approx(chi2, rel=1e-7)


def test_york_errors_match_seeded_monte_carlo():
    # the standard errors are the spread of the fitted slope/intercept over repeated data
    rng = np.random.default_rng(2024)
    x, sx, y, sy, rho = synthetic(rng, n=10)
    fit = york_fit(x, sx, y, sy, rho)
    m = 4000
    z1, z2 = rng.standard_normal((m, 10)), rng.standard_normal((m, 10))
    xt = x
    yt = fit.intercept + fit.slope * xt
    xs = xt + sx * z1
    ys = yt + sy * (rho * z1 + np.sqrt(1 - rho ** 2) * z2)
    batch = york_fit_batch(xs, np.broadcast_to(sx, xs.shape), ys, np.broadcast_to(sy, xs.shape),
                           np.broadcast_to(rho, xs.shape))
    assert np.std(batch.slope) == pytest.approx(fit.slope_sigma_1s, rel=0.05)
    assert np.std(batch.intercept) == pytest.approx(fit.intercept_sigma_1s, rel=0.05)
    assert np.mean(batch.mswd) == pytest.approx(1.0, abs=0.05)   # Wendt & Carl 1991: E[MSWD] = 1


def test_two_points_exact_line_and_propagated_errors():
    x, sx, y, sy = np.array([1.0, 3.0]), np.array([0.02, 0.03]), np.array([2.0, 5.0]), np.array([0.05, 0.04])
    rho = np.array([0.3, -0.2])
    fit = york_fit(x, sx, y, sy, rho)
    assert fit.slope == pytest.approx(1.5) and fit.intercept == pytest.approx(0.5)
    assert fit.dof == 0 and fit.mswd is None and fit.p_value is None and fit.mswd_limits_95 is None
    # seeded Monte Carlo of the exact two-point line
    rng = np.random.default_rng(9)
    m = 200000
    z1, z2 = rng.standard_normal((m, 2)), rng.standard_normal((m, 2))
    xs = x + sx * z1
    ys = y + sy * (rho * z1 + np.sqrt(1 - rho ** 2) * z2)
    b = (ys[:, 1] - ys[:, 0]) / (xs[:, 1] - xs[:, 0])
    a = ys[:, 0] - b * xs[:, 0]
    assert fit.slope_sigma_1s == pytest.approx(np.std(b), rel=0.01)
    assert fit.intercept_sigma_1s == pytest.approx(np.std(a), rel=0.01)
    assert fit.cov_slope_intercept == pytest.approx(np.cov(a, b)[0, 1], rel=0.03)


def test_batch_equals_single_fits():
    rng = np.random.default_rng(12)
    sets = [synthetic(rng, n=7) for _ in range(25)]
    arr = [np.array([s[k] for s in sets]) for k in range(5)]
    batch = york_fit_batch(*arr)
    for i, s in enumerate(sets):
        fit = york_fit(*s)
        assert batch.slope[i] == pytest.approx(fit.slope, rel=1e-13)
        assert batch.intercept_sigma_1s[i] == pytest.approx(fit.intercept_sigma_1s, rel=1e-12)
        assert batch.mswd[i] == pytest.approx(fit.mswd, rel=1e-10)


# --- treatments -----------------------------------------------------------------------------

def test_equal_weights_matches_scipy_linregress():
    x, sx, y, sy, rho = pearson()
    fit = fit_isochron(x, sx, y, sy, rho, treatment="equal-weights")
    lr = stats.linregress(x, y)
    assert fit.slope == pytest.approx(lr.slope, rel=1e-12)
    assert fit.intercept == pytest.approx(lr.intercept, rel=1e-12)
    assert fit.slope_sigma_1s == pytest.approx(lr.stderr, rel=1e-10)
    assert fit.intercept_sigma_1s == pytest.approx(lr.intercept_stderr, rel=1e-10)
    assert fit.mswd == pytest.approx(1.48329, abs=5e-6)   # the MSWD always describes the analytical fit


def test_excess_variance_recovers_known_scatter():
    # seeded simulation with a known added scatter on y of 0.05
    rng = np.random.default_rng(77)
    n = 60
    x, sx, y, sy, rho = synthetic(rng, n=n)
    y = y + rng.normal(0.0, 0.05, n)
    fit = fit_isochron(x, sx, y, sy, rho, treatment="excess-variance")
    assert fit.excess_sigma_y_sigma_1s is not None and fit.excess_sigma_y_sigma_1s > 0
    assert abs(fit.excess_sigma_y_1s - 0.05) < 3 * fit.excess_sigma_y_sigma_1s
    assert abs(fit.slope - 0.8) < 3 * fit.slope_sigma_1s
    # larger than the analytical errors, which ignore the scatter
    assert fit.slope_sigma_1s > york_fit(x, sx, y, sy, rho).slope_sigma_1s


def test_excess_variance_is_the_likelihood_maximum():
    # independent check: scipy.optimize on the same likelihood in another parametrisation (log s)
    x, sx, y, sy, rho = pearson()
    fit = fit_isochron(x, sx, y, sy, rho, treatment="excess-variance")

    def nll(p):
        a, b, ls = p
        var = sy ** 2 + b * b * sx ** 2 + np.exp(2 * ls)
        return np.sum((y - a - b * x) ** 2 / var + np.log(var))

    sol = optimize.minimize(nll, [5.0, -0.5, np.log(0.1)], method="Nelder-Mead",
                            options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 20000})
    assert fit.slope == pytest.approx(sol.x[1], rel=1e-5)
    assert fit.intercept == pytest.approx(sol.x[0], rel=1e-5)
    assert fit.excess_sigma_y_1s == pytest.approx(np.exp(sol.x[2]), rel=1e-4)


def test_excess_variance_zero_when_errors_overstated():
    rng = np.random.default_rng(8)
    x, sx, y, sy, rho = synthetic(rng, n=20)
    fit = fit_isochron(x, sx * 4, y, sy * 4, rho, treatment="excess-variance")
    assert fit.excess_sigma_y_1s < 1e-3 * np.median(sy)


def test_anchor_limits():
    rng = np.random.default_rng(4)
    x, sx, y, sy, rho = synthetic(rng, n=10)
    free = york_fit(x, sx, y, sy, rho)
    loose = fit_isochron(x, sx, y, sy, rho, anchor=(0.0, 1e6))
    assert loose.slope == pytest.approx(free.slope, rel=1e-9)
    tight = fit_isochron(x, sx, y, sy, rho, anchor=(0.3, 1e-9))
    assert tight.intercept == pytest.approx(0.3, abs=1e-8)


@pytest.mark.parametrize("kw, match", [
    ({"treatment": "nonesuch"}, "treatment"),
    ({"treatment": "equal-weights", "anchor": (0.2, 0.01)}, "anchor"),
    ({"anchor": (0.2, 0.0)}, "anchor sigma"),
    ({"anchor": 0.2}, "anchor"),
])
def test_fit_isochron_bad_options(kw, match):
    with pytest.raises(InputError, match=match):
        fit_isochron(*pearson(), **kw)


def test_two_points_refused_for_scatter_treatments():
    x, sx, y, sy, rho = (a[:2] for a in pearson())
    with pytest.raises(InputError, match="at least 3"):
        fit_isochron(x, sx, y, sy, rho, treatment="excess-variance")


# --- bad input ------------------------------------------------------------------------------

def test_bad_input_named():
    x, sx, y, sy, rho = pearson()
    with pytest.raises(InputError, match="at least 2"):
        york_fit(x[:1], sx[:1], y[:1], sy[:1])
    with pytest.raises(UndefinedResultError, match="all x values are equal"):
        york_fit(np.ones(5), sx[:5], y[:5], sy[:5])
    bad = sy.copy()
    bad[3] = 0.0
    with pytest.raises(InputError, match=r"row 4 of sy"):
        york_fit(x, sx, y, bad)
    r = rho.copy()
    r[2] = 1.0
    with pytest.raises(InputError, match=r"row 3 of rho"):
        york_fit(x, sx, y, sy, r)
    xn = x.copy()
    xn[6] = np.nan
    with pytest.raises(InputError, match=r"row 7 of x"):
        york_fit(xn, sx, y, sy)
    with pytest.raises(InputError, match="has 9 values"):
        york_fit(x, sx, y[:9], sy)
    with pytest.raises(InputError, match="not a number"):
        york_fit(list(x[:-1]) + ["abc"], sx, y, sy)


@pytest.mark.parametrize("xv", [0.1, 1 / 3, 2.7e-3, 1234.5678])
def test_equal_x_not_exactly_representable(xv):
    # x = 0.1, 0.1, 0.1: the deviations from the computed mean are ~1e-17, not 0; the slope is still
    # undefined and must be reported as such (not as a ZeroDivisionError), for every treatment
    x, sx, y, sy = [xv] * 4, [0.01 * xv] * 4, [1.0, 2.0, 3.0, 4.5], [0.1] * 4
    with pytest.raises(UndefinedResultError, match="all x values are equal"):
        york_fit(x, sx, y, sy)
    for t in ("expanded", "equal-weights", "excess-variance"):
        with pytest.raises(UndefinedResultError, match="all x values are equal"):
            fit_isochron(x, sx, y, sy, treatment=t)
    with pytest.raises(UndefinedResultError, match="all x values are equal"):
        york_fit_batch([x, [1.0, 2.0, 3.0, 4.0]], [sx, sx], [y, y], [sy, sy])
    # a real spread of one part in 1e9 is still fitted
    fit = york_fit([xv, xv * (1 + 1e-9), xv * (1 + 2e-9)], [1e-12 * xv] * 3, [1.0, 2.0, 3.0], [0.1] * 3)
    assert np.isfinite(fit.slope)


@pytest.mark.parametrize("sx, x", [(1e-300, 1.0), (1e-200, 1.0), (1e199, 1e200)])
def test_extreme_magnitudes_reported(sx, x):
    # σ² underflowing to 0 or values whose squares overflow: an UndefinedResultError naming the problem,
    # no RuntimeWarning (pytest turns warnings into errors) and no misleading "did not converge"
    xs = [x, 2 * x, 3.3 * x]
    ys = [x, 2 * x, 3.1 * x]
    with pytest.raises(UndefinedResultError, match="too large or too small for double precision"):
        york_fit(xs, [sx] * 3, ys, [sx] * 3)
    with pytest.raises(UndefinedResultError, match="too large or too small for double precision"):
        york_fit(xs[:2], [sx] * 2, ys[:2], [sx] * 2)
    with pytest.raises(UndefinedResultError, match="too large or too small for double precision"):
        york_fit_batch([xs, xs], [[sx] * 3] * 2, [ys, ys], [[sx] * 3] * 2)


def test_messages_show_plain_numbers():
    # numpy 2 prints np.float64(0.0) for repr of its scalars; messages must read the same under numpy 1.24
    with pytest.raises(InputError) as e:
        york_fit([1.0, 2.0, 3.0], np.array([0.1, 0.0, 0.1]), [1.0, 2.0, 3.0], [0.1] * 3)
    assert "got 0.0" in str(e.value) and "np." not in str(e.value)
    with pytest.raises(InputError) as e:
        york_fit([1.0, 2.0, 3.0], [0.1] * 3, [1.0, 2.0, 3.0], [0.1] * 3, rho=np.array([0.0, 1.0, 0.0]))
    assert "got 1.0" in str(e.value) and "np." not in str(e.value)
    with pytest.raises(InputError) as e:
        york_fit([1.0, np.inf, 3.0], [0.1] * 3, [1.0, 2.0, 3.0], [0.1] * 3)
    assert "got inf" in str(e.value) and "np." not in str(e.value)


def test_caller_arrays_untouched():
    x, sx, y, sy, rho = pearson()
    copies = [a.copy() for a in (x, sx, y, sy, rho)]
    fit_isochron(x, sx, y, sy, rho, anchor=(5.0, 0.5))
    fit_isochron(x, sx, y, sy, rho, treatment="excess-variance")
    for a, c in zip((x, sx, y, sy, rho), copies):
        assert np.array_equal(a, c)


def test_convergence_error():
    with pytest.raises(ConvergenceError, match="did not converge"):
        york_fit(*pearson(), max_iter=2)


# --- invariants (hypothesis) ----------------------------------------------------------------

point_sets = st.integers(min_value=0, max_value=2 ** 32 - 1).map(
    lambda s: synthetic(np.random.default_rng(s), n=int(np.random.default_rng(s).integers(3, 12))))


@settings(max_examples=40, deadline=None)
@given(point_sets, st.randoms(use_true_random=False))
def test_point_order_invariance(pts, rnd):
    perm = list(range(pts[0].size))
    rnd.shuffle(perm)
    f1 = york_fit(*pts)
    f2 = york_fit(*(a[perm] for a in pts))
    assert f2.slope == pytest.approx(f1.slope, rel=1e-10)
    assert f2.intercept_sigma_1s == pytest.approx(f1.intercept_sigma_1s, rel=1e-8)
    assert f2.mswd == pytest.approx(f1.mswd, rel=1e-8)


@settings(max_examples=40, deadline=None)
@given(point_sets)
def test_swap_axes_inverts_slope(pts):
    x, sx, y, sy, rho = pts
    f1 = york_fit(x, sx, y, sy, rho)
    f2 = york_fit(y, sy, x, sx, rho)
    assert f2.slope == pytest.approx(1.0 / f1.slope, rel=1e-9)
    assert f2.mswd == pytest.approx(f1.mswd, rel=1e-8)
    # relative slope error is symmetric too: σ(1/b)/(1/b) = σb/b
    assert f2.slope_sigma_1s * abs(f1.slope) == pytest.approx(f1.slope_sigma_1s / abs(f1.slope), rel=1e-6)


@settings(max_examples=40, deadline=None)
@given(point_sets, st.floats(1e-3, 1e3), st.floats(1e-3, 1e3))
def test_scaling_invariance(pts, cx, cy):
    x, sx, y, sy, rho = pts
    f1 = york_fit(x, sx, y, sy, rho)
    f2 = york_fit(cx * x, cx * sx, cy * y, cy * sy, rho)
    assert f2.slope == pytest.approx(f1.slope * cy / cx, rel=1e-9)
    assert f2.intercept == pytest.approx(f1.intercept * cy, rel=1e-8, abs=1e-12 * cy)
    assert f2.slope_sigma_1s == pytest.approx(f1.slope_sigma_1s * cy / cx, rel=1e-8)
    assert f2.mswd == pytest.approx(f1.mswd, rel=1e-8)


# --- weighted mean --------------------------------------------------------------------------

def test_weighted_mean_formulas():
    # standard formulas (REFERENCE.md §8 'Weighted mean and MSWD'); χ² from scipy.stats
    v = np.array([10.1, 9.8, 10.4, 10.0, 9.7])
    s = np.array([0.2, 0.1, 0.3, 0.15, 0.25])
    wm = weighted_mean(v, s)
    w = 1 / s ** 2
    mean = np.sum(w * v) / np.sum(w)
    chi = np.sum(w * (v - mean) ** 2)
    assert wm.mean == pytest.approx(mean, rel=1e-14)
    assert wm.mean_sigma_1s == pytest.approx(1 / np.sqrt(w.sum()), rel=1e-14)
    assert wm.mswd == pytest.approx(chi / 4, rel=1e-12)
    assert wm.p_value == pytest.approx(stats.chi2.sf(chi, 4), rel=1e-10)
    assert wm.external_sigma_1s == 0 and not any(wm.outliers)


def test_weighted_mean_external_scatter_is_ml():
    # independent: maximise the random-effects likelihood over (μ, τ) with scipy.optimize
    rng = np.random.default_rng(21)
    s = rng.uniform(0.05, 0.2, 15)
    v = 5.0 + rng.normal(0, 0.3, 15) + s * rng.standard_normal(15)
    wm = weighted_mean(v, s, external_scatter=True)

    def nll(p):
        var = s ** 2 + p[1] ** 2
        return np.sum((v - p[0]) ** 2 / var + np.log(var))

    sol = optimize.minimize(nll, [v.mean(), v.std()], method="Nelder-Mead", options={"xatol": 1e-10,
                                                                                      "fatol": 1e-12})
    assert wm.mean == pytest.approx(sol.x[0], rel=1e-7)
    assert wm.external_sigma_1s == pytest.approx(abs(sol.x[1]), rel=1e-5)
    assert wm.mean_sigma_1s == pytest.approx(1 / np.sqrt(np.sum(1 / (s ** 2 + sol.x[1] ** 2))), rel=1e-5)
    assert wm.external_sigma_sigma_1s > 0


def test_weighted_mean_outlier_flag():
    v = np.array([10.0, 10.1, 9.9, 10.05, 11.5])
    s = np.full(5, 0.1)
    wm = weighted_mean(v, s, outlier_k=3)
    assert wm.outliers == (False, False, False, False, True)
    assert "sqrt" in wm.rule and "kept" in wm.rule


def test_weighted_mean_bad_input():
    with pytest.raises(InputError, match=r"row 2 of sigma_1s"):
        weighted_mean([1.0, 2.0], [0.1, -0.1])
    with pytest.raises(InputError, match="outlier_k"):
        weighted_mean([1.0, 2.0], [0.1, 0.1], outlier_k=0)
    single = weighted_mean([3.0], [0.2])
    assert single.mswd is None and single.mean == 3.0


# --- ellipse --------------------------------------------------------------------------------

def test_ellipse_on_95_percent_contour():
    xs, ys = ellipse_points(1.0, 0.02, 2.0, 0.05, 0.6, n_points=36)
    assert xs.size == 37 and xs[0] == xs[-1] and ys[0] == ys[-1]
    c = np.array([[0.02 ** 2, 0.6 * 0.02 * 0.05], [0.6 * 0.02 * 0.05, 0.05 ** 2]])
    d = np.stack([xs - 1.0, ys - 2.0])
    m2 = np.einsum("in,ij,jn->n", d, np.linalg.inv(c), d)
    assert np.allclose(m2, stats.chi2.ppf(0.95, 2), rtol=1e-10)   # scipy.stats: 5.991
