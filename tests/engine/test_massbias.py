"""Mass-bias laws (Russell, Papanastassiou & Tombrello 1978, GCA 42, 1075; Hart & Zindler 1989,
IJMS Ion Proc. 89, 287) checked by forward models built from CIAAW compositions and AME2020 masses."""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reduction.constants import isotope_fraction
from reduction.errors import InputError, UndefinedResultError
from reduction.massbias import (
    LAWS,
    bias_apply,
    bias_correct,
    bias_factor,
    bias_factor_from,
    correct_named,
    normalise,
    ratio_masses,
)


def test_masses_are_ame2020():
    # AME2020 (Wang et al. 2021, Chinese Phys. C 45, 030003), as quoted in REFERENCE.md section 3
    m143, m144 = ratio_masses("143Nd/144Nd")
    assert m143 == pytest.approx(142.9098198, abs=1e-7)
    assert m144 == pytest.approx(143.9100928, abs=1e-7)


@pytest.mark.parametrize("law", LAWS)
def test_forward_model_recovers_true_ratio(law):
    # True Nd: CIAAW fractions but 146/144 at the convention 0.7219 (O'Nions et al. 1977); a chosen
    # bias fractionates every ratio by the same law; internal normalisation must undo it exactly.
    true143 = isotope_fraction("143Nd").value / isotope_fraction("144Nd").value
    m143, m144 = ratio_masses("143Nd/144Nd")
    m146, _ = ratio_masses("146Nd/144Nd")
    f = {"exponential": 1.8, "power": -0.0061, "linear": -0.0058}[law]
    meas143 = bias_apply(true143, m143, m144, f, law)
    meas146 = bias_apply(0.7219, m146, m144, f, law)
    assert abs(meas146 / 0.7219 - 1) > 0.01  # the bias is realistic (~0.6 %/u, MC-ICP-MS-like)
    got = normalise(meas143, "143Nd/144Nd", meas146, "146Nd/144Nd", law=law)
    assert got == pytest.approx(true143, rel=1e-13)
    assert bias_factor_from(meas146, "146Nd/144Nd", law=law) == pytest.approx(f, rel=1e-10)


def test_exponential_law_by_hand():
    # beta = ln(Rt/Rm)/ln(mk/ml) and Rt = Rm (mi/mj)^beta, written out with the math module
    m146, m144 = ratio_masses("146Nd/144Nd")
    m143 = ratio_masses("143Nd/144Nd")[0]
    beta = math.log(0.7219 / 0.7185) / math.log(m146 / m144)
    assert bias_factor(0.7185, 0.7219, m146, m144) == pytest.approx(beta, rel=1e-14)
    assert correct_named(0.5119, "143Nd/144Nd", beta) == pytest.approx(0.5119 * (m143 / m144) ** beta, rel=1e-14)


def test_laws_agree_to_first_order():
    # For a small bias the three laws differ only at second order in the per-mass bias (Hart & Zindler 1989).
    m146, m144 = ratio_masses("146Nd/144Nd")
    out = {}
    for law in LAWS:
        out[law] = normalise(0.5110, "143Nd/144Nd", 0.7180, "146Nd/144Nd", law=law)
    per_u = (0.7219 / 0.7180 - 1) / 2
    spread = max(out.values()) - min(out.values())
    assert spread / 0.5110 < 5 * per_u ** 2
    assert spread > 0


def test_vectorised_over_cycles_and_input_untouched():
    m = np.full((3, 4), 0.7200)
    before = m.copy()
    b = bias_factor_from(m, "146Nd/144Nd")
    assert b.shape == (3, 4)
    np.testing.assert_array_equal(m, before)


@pytest.mark.parametrize("kwargs, arg", [
    (dict(measured_norm=-0.7, true_norm=0.7219, mass_num=146.0, mass_den=144.0), "measured_norm"),
    (dict(measured_norm=0.7, true_norm=0.0, mass_num=146.0, mass_den=144.0), "true_norm"),
    (dict(measured_norm=0.7, true_norm=0.7219, mass_num=144.0, mass_den=144.0), "mass_den"),
    (dict(measured_norm=0.7, true_norm=0.7219, mass_num=146.0, mass_den=144.0, law="cubic"), "law"),
])
def test_bad_input(kwargs, arg):
    with pytest.raises(InputError) as e:
        bias_factor(**kwargs)
    assert e.value.argument == arg


def test_bad_ratio_names():
    with pytest.raises(InputError):
        ratio_masses("143Nd")
    with pytest.raises(InputError):
        ratio_masses("143Xx/144Nd")


def test_linear_law_breakdown_is_reported():
    with pytest.raises(UndefinedResultError):
        bias_correct(0.5, 150.0, 140.0, -0.2, "linear")


@settings(max_examples=50, deadline=None)
@given(st.floats(0.01, 100), st.floats(-3, 3), st.sampled_from(LAWS))
def test_apply_then_correct_is_identity(r, f, law):
    f = f if law == "exponential" else f / 500
    assert bias_correct(bias_apply(r, 150.0, 144.0, f, law), 150.0, 144.0, f, law) == pytest.approx(r, rel=1e-12)


@settings(max_examples=50, deadline=None)
@given(st.floats(-3, 3), st.floats(-3, 3))
def test_exponential_factors_compose_additively(b1, b2):
    r = 0.5
    twice = bias_correct(bias_correct(r, 146.0, 144.0, b1), 146.0, 144.0, b2)
    assert twice == pytest.approx(bias_correct(r, 146.0, 144.0, b1 + b2), rel=1e-12)
