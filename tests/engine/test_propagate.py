"""Linear propagation (GUM, JCGM 100:2008) against analytic derivatives and seeded Monte Carlo
(JCGM 101:2008); complex-step derivatives (Squire & Trapp 1998, SIAM Rev. 40, 110) against exact ones."""
import numpy as np
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from reduction.errors import InputError
from reduction.propagate import cov_from_sigma, jacobian, monte_carlo, propagate_linear, rho


def ratio_product(X):
    # y1 = a/b, y2 = a*c
    return np.array([X[0] / X[1], X[0] * X[2]])


def test_jacobian_central_and_complex_match_analytic():
    x = np.array([0.5121, 0.7219, 3.0])
    exact = np.array([[1 / x[1], -x[0] / x[1] ** 2, 0.0], [x[2], 0.0, x[0]]])
    np.testing.assert_allclose(jacobian(ratio_product, x), exact, rtol=1e-9, atol=1e-14)
    np.testing.assert_allclose(jacobian(ratio_product, x, method="complex", rel_step=1e-20), exact, rtol=1e-15)


def test_linear_equals_analytic_formula_for_a_ratio():
    # σ(a/b)/(a/b) = sqrt(ra² + rb² − 2 ρ ra rb) for a ratio of correlated values (first order)
    x = np.array([0.5121, 0.7219, 3.0])
    s = np.array([5e-6, 4e-6, 0.01])
    r = np.eye(3)
    r[0, 1] = r[1, 0] = 0.6
    p = propagate_linear(ratio_product, x, cov_from_sigma(s, r), names=("a/b", "a*c"))
    ra, rb = s[0] / x[0], s[1] / x[1]
    assert p.sigma_1s[0] / p.value[0] == pytest.approx(np.sqrt(ra ** 2 + rb ** 2 - 2 * 0.6 * ra * rb), rel=1e-8)
    assert p.names == ("a/b", "a*c")


def test_a_value_given_is_used_as_is_and_a_wrong_one_is_refused():
    # the model is not called for its value when the caller passes it; the covariance is the model's own
    calls = []

    def counted(X):
        calls.append(np.asarray(X).ndim)
        return ratio_product(X)

    x = np.array([0.5121, 0.7219, 3.0])
    s = np.array([5e-6, 4e-6, 0.01])
    plain = propagate_linear(ratio_product, x, s ** 2, method="complex", rel_step=1e-20)
    given_y = propagate_linear(counted, x, s ** 2, method="complex", rel_step=1e-20, value=ratio_product(x))
    assert calls == [2]                                     # one batch call (the Jacobian), no call at x
    np.testing.assert_array_equal(given_y.value, plain.value)
    np.testing.assert_array_equal(given_y.cov, plain.cov)
    with pytest.raises(InputError, match="value"):
        propagate_linear(ratio_product, x, s ** 2, value=[1.0, 2.0, 3.0])
    with pytest.raises(InputError, match="value"):
        propagate_linear(ratio_product, x, s ** 2, value="a")


def test_groups_split_adds_up_when_groups_are_independent():
    x = np.array([0.5121, 0.7219, 3.0])
    s = np.array([5e-6, 4e-6, 0.01])
    p = propagate_linear(ratio_product, x, np.diag(s ** 2), groups={"random": [0, 1], "systematic": [2]})
    np.testing.assert_allclose(p.parts["random"] + p.parts["systematic"], p.cov, rtol=1e-12, atol=1e-30)
    assert p.sigma_1s_parts["systematic"][0] == 0.0


def test_monte_carlo_agrees_with_linear_for_realistic_inputs_and_is_seeded():
    x = np.array([0.5121, 0.7219, 3.0])
    s = np.array([5e-6, 4e-6, 0.01])
    c = cov_from_sigma(s, [[1, 0.3, 0], [0.3, 1, 0], [0, 0, 1]])
    lin = propagate_linear(ratio_product, x, c)
    mc = monte_carlo(ratio_product, x, c, n_draws=100000, seed=7)
    np.testing.assert_allclose(mc.sigma_1s, lin.sigma_1s, rtol=0.01)
    assert mc.corr[0, 1] == pytest.approx(lin.corr[0, 1], abs=0.01)
    again = monte_carlo(ratio_product, x, c, n_draws=100000, seed=7)
    np.testing.assert_array_equal(mc.sigma_1s, again.sigma_1s)


def test_rho_and_cov_helpers():
    c = cov_from_sigma([1.0, 2.0, 0.0], [[1, 0.5, 0], [0.5, 1, 0], [0, 0, 1]])
    r = rho(c)
    assert r[0, 1] == pytest.approx(0.5) and r[2, 2] == 0.0


def test_bad_input():
    with pytest.raises(InputError) as e:
        propagate_linear(ratio_product, [1.0, 2.0, 3.0], np.eye(2))
    assert e.value.argument == "cov"
    with pytest.raises(InputError) as e:
        jacobian(ratio_product, [1.0, 2.0, 3.0], method="magic")
    assert e.value.argument == "method"
    with pytest.raises(InputError) as e:
        propagate_linear(ratio_product, [1.0, float("nan"), 3.0], np.eye(3))
    assert e.value.argument == "x"
    with pytest.raises(InputError) as e:
        monte_carlo(ratio_product, [1.0, 2.0, 3.0], [[1, 2, 0], [0, 1, 0], [0, 0, 1]])
    assert e.value.argument == "cov"


@settings(max_examples=30, deadline=None)
@given(st.lists(st.floats(-5, 5), min_size=3, max_size=3), st.lists(st.floats(0.0, 2.0), min_size=3, max_size=3))
# the example that once drew a failure against a fixed atol = 1e-9 (issue 16): a near-zero covariance
@example([3.765032564589932, 3.4083123712177255, -2.2452175377675685],
         [1.9237542310809321, 1.240811656898439, 1.7496122667695433])
def test_linear_model_is_propagated_exactly(coef, sig):
    # For y = A x, cov_y = A cov_x Aᵀ exactly (no linearisation error). A central difference of a linear
    # function has no truncation error; what is left is rounding: |δJ_ij| <= 4 ε Σ_k |A_ik x_k| / (2 h_j)
    # with h_j = 1e-6 |x_j| (the step the engine takes) and ε the float64 epsilon (Press et al. 2007,
    # Numerical Recipes, 3rd ed., §5.7), so |δcov| <= |δJ| c |A|ᵀ + |A| c |δJ|ᵀ + |δJ| c |δJ|ᵀ.
    A = np.array([coef, [1.0, -2.0, 0.5]])
    x = np.array([1.0, 2.0, 3.0])
    c = np.diag(np.array(sig) ** 2)
    exact = A @ c @ A.T
    p = propagate_linear(lambda X: A @ X, x, c)
    eps = np.finfo(float).eps
    dJ = 4 * eps * (np.abs(A) @ (np.abs(x) * 1.000001))[:, None] / (2e-6 * np.abs(x))[None, :]
    bound = dJ @ c @ np.abs(A).T + np.abs(A) @ c @ dJ.T + dJ @ c @ dJ.T
    assert np.all(np.abs(p.cov - exact) <= bound + 4 * eps * np.abs(exact))
    # the complex-step derivative is exact to rounding for an analytic f (Squire & Trapp 1998, SIAM Rev. 40, 110)
    pc = propagate_linear(lambda X: A @ X, x, c, method="complex")
    np.testing.assert_allclose(pc.cov, exact, rtol=1e-13, atol=1e-13 * np.abs(exact).max())
