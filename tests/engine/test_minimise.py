"""Own minimisers (reduction.minimise) and the two likelihood fits that use them, against scipy.optimize.

scipy is a test oracle only (the engine must run without it in LibreOffice's bundled Python). The
likelihoods are written here afresh from their definitions (not the engine's functions):
* line with an excess variance s² on y: −2 ln L = Σ r²/V + ln V, r = y − a − b·x,
  V = σy² + s² + b²σx² − 2bρσxσy (random-effects line; e.g. Vermeesch 2018, Geosci. Front. 9, 1479, "model 3");
* weighted mean with an external scatter τ: −2 ln L = Σ (v − μ)²/(σ² + τ²) + ln(σ² + τ²).
Data: seeded simulations (numpy default_rng), no real samples.
"""
import numpy as np
import pytest
from scipy import optimize

from reduction.minimise import bounded_scalar_min, nelder_mead, newton_polish
from reduction.regression import fit_isochron, weighted_mean


def test_brent_finds_interior_and_boundary_minima():
    # hand-worked: (x − 0.3)² has its minimum at 0.3; x·e^x on [0, 4] at the boundary 0
    r = bounded_scalar_min(lambda x: (x - 0.3) ** 2, 0.0, 4.0, xatol=1e-14)
    assert abs(float(r.x) - 0.3) < 1e-7 and r.converged       # √ε-limited in x for a quadratic
    r = bounded_scalar_min(lambda x: x * np.exp(x), 0.0, 4.0, xatol=1e-14)
    assert float(r.x) == 0.0
    # a non-finite objective is "worse", never an exception: the answer is a point of finite value
    r = bounded_scalar_min(lambda x: np.nan if x > 1 else (x - 0.5) ** 2, 0.0, 4.0)
    assert np.isfinite(r.fun) and 0.0 <= float(r.x) <= 1.0


def test_nelder_mead_and_newton_on_rosenbrock():
    # Rosenbrock 1960, Comput. J. 3, 175: minimum 0 at (1, 1)
    def f(p):
        return (1 - p[0]) ** 2 + 100 * (p[1] - p[0] ** 2) ** 2

    def g(p):
        return np.array([-2 * (1 - p[0]) - 400 * p[0] * (p[1] - p[0] ** 2), 200 * (p[1] - p[0] ** 2)])

    r = nelder_mead(f, np.array([-1.2, 1.0]), xatol=1e-10, fatol=1e-14)
    assert r.converged and np.allclose(r.x, 1.0, atol=1e-6)
    p = newton_polish(f, g, r.x)
    assert np.allclose(p.x, 1.0, atol=1e-12) and p.fun <= r.fun


def _line_data(seed, n, scatter):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0.1, 2.0, n))
    sx = 0.004 * x
    sy = np.full(n, 0.002)
    rho = rng.uniform(-0.3, 0.6, n)
    y = 0.51 + 0.012 * x
    return x, sx, y + rng.normal(0, scatter, n) + rng.normal(0, 1, n) * sy, sy, rho


@pytest.mark.parametrize("seed,n,scatter", [(1, 8, 0.004), (2, 15, 0.01), (3, 40, 0.002), (4, 6, 0.03)])
def test_excess_variance_line_is_scipys_optimum(seed, n, scatter):
    x, sx, y, sy, rho = _line_data(seed, n, scatter)
    fit = fit_isochron(x, sx, y, sy, rho, treatment="excess-variance")

    def nll(p):
        a, b, s = p
        v = sy ** 2 + s * s + b * b * sx ** 2 - 2 * b * rho * sx * sy
        return np.sum((y - a - b * x) ** 2 / v + np.log(v))

    best = None
    for s0 in (scatter, 3 * scatter, scatter / 3):
        r = optimize.minimize(nll, [0.51, 0.012, s0], method="Nelder-Mead",
                              options={"xatol": 1e-13, "fatol": 1e-15, "maxiter": 40000, "maxfev": 80000})
        r = optimize.minimize(nll, r.x, method="BFGS", options={"gtol": 1e-12})
        if best is None or r.fun < best.fun:
            best = r
    ours = nll([fit.intercept, fit.slope, fit.excess_sigma_y_1s])
    assert ours <= best.fun + 1e-9 * abs(best.fun)     # at least as good a maximum of the likelihood
    assert fit.slope == pytest.approx(best.x[1], rel=1e-6)
    assert fit.intercept == pytest.approx(best.x[0], rel=1e-8)
    assert fit.excess_sigma_y_1s == pytest.approx(abs(best.x[2]), rel=1e-5)


@pytest.mark.parametrize("seed", [5, 6, 7])
def test_weighted_mean_external_scatter_is_scipys_optimum(seed):
    rng = np.random.default_rng(seed)
    s = rng.uniform(0.5, 2.0, 12)
    v = 10 + rng.normal(0, 3.0, 12) + rng.normal(0, 1, 12) * s
    wm = weighted_mean(v, s, external_scatter=True)

    def nll(t2):
        w = 1 / (s * s + t2)
        mu = np.sum(w * v) / np.sum(w)
        return np.sum(w * (v - mu) ** 2) - np.sum(np.log(w))

    r = optimize.minimize_scalar(nll, bounds=(0.0, 100.0), method="bounded", options={"xatol": 1e-12})
    assert wm.external_sigma_1s == pytest.approx(np.sqrt(r.x), rel=1e-6)


# ---- to rounding: the optimum as a root of the gradient, in 40-digit arithmetic (mpmath) ----
# The likelihoods are written again here in mpmath from their definitions (not the engine's code).

def test_weighted_mean_external_scatter_to_rounding_vs_mpmath():
    mp = pytest.importorskip("mpmath")
    mp.mp.dps = 40
    rng = np.random.default_rng(11)
    s = rng.uniform(0.5, 2.0, 12)
    v = 10 + rng.normal(0, 3.0, 12) + rng.normal(0, 1, 12) * s
    wm = weighted_mean(v, s, external_scatter=True)
    V = [mp.mpf(float(a)) for a in v]
    S2 = [mp.mpf(float(a)) ** 2 for a in s]

    def mean(t2):
        w = [1 / (q + t2) for q in S2]
        return mp.fsum(a * b for a, b in zip(w, V)) / mp.fsum(w)

    def dnll(t2):       # d/dτ² of Σ (v − μ)²/(σ² + τ²) + ln(σ² + τ²), μ profiled out (envelope theorem)
        mu = mean(t2)
        return mp.fsum((q + t2 - (a - mu) ** 2) / (q + t2) ** 2 for q, a in zip(S2, V))

    t2 = mp.findroot(dnll, mp.mpf(float(wm.external_sigma_1s)) ** 2)
    assert wm.external_sigma_1s == pytest.approx(float(mp.sqrt(t2)), rel=1e-12)
    assert wm.mean == pytest.approx(float(mean(t2)), rel=1e-14)
    # σ(τ) from the Fisher information of τ²: I = ½ Σ 1/(σ² + τ²)² (random-effects model)
    sig_t2 = mp.sqrt(2 / mp.fsum(1 / (q + t2) ** 2 for q in S2))
    assert wm.external_sigma_sigma_1s == pytest.approx(float(sig_t2 / (2 * mp.sqrt(t2))), rel=1e-12)


def test_excess_variance_line_to_rounding_vs_mpmath():
    mp = pytest.importorskip("mpmath")
    mp.mp.dps = 40
    x, sx, y, sy, rho = _line_data(2, 15, 0.01)
    fit = fit_isochron(x, sx, y, sy, rho, treatment="excess-variance")
    X, SX, Y, SY, R = ([mp.mpf(float(t)) for t in arr] for arr in (x, sx, y, sy, rho))

    def nll(a, b, s):
        tot = mp.mpf(0)
        for xi, sxi, yi, syi, ri in zip(X, SX, Y, SY, R):
            var = syi ** 2 + s * s + b * b * sxi ** 2 - 2 * b * ri * sxi * syi
            tot += (yi - a - b * xi) ** 2 / var + mp.log(var)
        return tot

    p0 = [mp.mpf(fit.intercept), mp.mpf(fit.slope), mp.mpf(fit.excess_sigma_y_1s)]
    grad = [lambda a, b, s, i=i: mp.diff(nll, (a, b, s), tuple(int(j == i) for j in range(3))) for i in range(3)]
    root = mp.findroot(grad, p0)
    assert fit.intercept == pytest.approx(float(root[0]), rel=1e-14)
    assert fit.slope == pytest.approx(float(root[1]), rel=1e-12)
    assert fit.excess_sigma_y_1s == pytest.approx(float(root[2]), rel=1e-12)
    # errors: inverse of half the Hessian of −2 ln L (observed Fisher information)
    hess = mp.matrix(3, 3)
    for i in range(3):
        for j in range(3):
            hess[i, j] = mp.diff(nll, tuple(root), tuple(int(k == i) + int(k == j) for k in range(3)))
    cov = (hess / 2) ** -1
    assert fit.slope_sigma_1s == pytest.approx(float(mp.sqrt(cov[1, 1])), rel=1e-11)
    assert fit.intercept_sigma_1s == pytest.approx(float(mp.sqrt(cov[0, 0])), rel=1e-11)
    assert fit.excess_sigma_y_sigma_1s == pytest.approx(float(mp.sqrt(cov[2, 2])), rel=1e-11)


def test_newton_polish_with_a_given_hessian_stops_at_the_root_of_the_gradient():
    # a flat-bottomed quartic plus a quadratic: f = (x−1)⁴ + (x−1)² + (y+2)², minimum at (1, −2)
    def f(p):
        return (p[0] - 1) ** 4 + (p[0] - 1) ** 2 + (p[1] + 2) ** 2

    def g(p):
        return np.array([4 * (p[0] - 1) ** 3 + 2 * (p[0] - 1), 2 * (p[1] + 2)])

    def h(p):
        return np.array([[12 * (p[0] - 1) ** 2 + 2, 0.0], [0.0, 2.0]])

    r = newton_polish(f, g, np.array([1.3, -1.7]), hess=h)
    assert r.converged and abs(r.x[0] - 1) < 1e-15 and abs(r.x[1] + 2) < 4e-16
