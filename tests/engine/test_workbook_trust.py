"""Issue 9 in the workbook: primary and check reference materials, complete σ inputs, guards that speak.

Each bad input must give a message naming the sheet, row and column, and leave the typed grid unchanged.
"""
from __future__ import annotations

import copy
import sys
from pathlib import Path

import pytest

import reduction.workbook.demo as demo
from reduction.regression import wendt_carl_limits
from reduction.workbook import (
    CONSTANTS,
    FIRST_ROW,
    ISOCHRON_FIRST_Q_ROW,
    ISOCHRON_QUANTITIES,
    ISOCHRON_SUMMARY_COL,
    MARKER,
    MEASURED,
    RESULTS,
    SAMPLES,
    STANDARDS,
    build_layout,
    evaluate,
    layout_grid,
)

sys.path.insert(0, str(Path(__file__).resolve().parent))
from grid_edit import row_of as _row  # noqa: E402
from grid_edit import set_cell as _set  # noqa: E402

Q = {q: i for i, (q, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}


@pytest.fixture(scope="module")
def grid():
    lay = build_layout(demo.demo_tables(), constants=demo.demo_constants(), isochron_selection=demo.demo_selection())
    return layout_grid(lay)


def _eval(g):
    before = copy.deepcopy(g)
    ev = evaluate(g, strict=False)
    assert g == before                      # nothing the user typed is changed
    return [str(e) for e in ev.errors], ev


def _res(ev, analysis_row, key):
    return ev.cells[("Results", analysis_row, RESULTS.col_index(key))]


def _const_row(g, key):
    for r in range(FIRST_ROW, len(g["Constants"]) + 1):
        if g["Constants"][r - 1] and g["Constants"][r - 1][0] == key:
            return r
    raise AssertionError(key)


def test_demo_is_clean_and_every_check_is_ok(grid):
    msgs, ev = _eval(copy.deepcopy(grid))
    assert msgs == []
    for k in range(len(demo.FRACTIONS)):
        assert _res(ev, FIRST_ROW + k, "check") == "ok"


def test_a_check_material_is_never_part_of_the_factor(grid):
    """A BCR-2 run far off its accepted value changes no sample (to 1e-12) and shows its deviation."""
    g = copy.deepcopy(grid)
    _msgs, ev0 = _eval(copy.deepcopy(g))
    n_std = sum(1 for r in g["Standards"][FIRST_ROW - 1:] if r and r[0] != "")
    row = FIRST_ROW + n_std
    for key, v in (("session", "N-2026-03A"), ("material", "BCR-2"), ("ratio", "143Nd/144Nd"),
                   ("measured", 0.512700), ("sigma_1s", 4e-6)):
        _set(g, "Standards", row, STANDARDS.col_index(key), v)
    msgs, ev1 = _eval(g)
    assert msgs == []
    for k in range(len(demo.FRACTIONS)):
        for key in ("x", "y", "y_1s", "x_1s"):
            a, b = _res(ev0, FIRST_ROW + k, key), _res(ev1, FIRST_ROW + k, key)
            assert b == pytest.approx(a, rel=1e-12, abs=0), key
    cell = {c.key: ev1.cells[("Standards", row, j)] for j, c in enumerate(STANDARDS.columns) if c.computed}
    assert cell["role_used"] == "check"
    f = cell["factor"]
    # the check's deviation by hand: all BCR-2 runs of the session, normalised with the primary's factor
    bcr = [r[STANDARDS.col_index("measured")] for r in g["Standards"][FIRST_ROW - 1:]
           if r and r[0] == "N-2026-03A" and r[1] == "BCR-2"]
    mean = sum(bcr) / len(bcr) * f
    assert cell["check_mean"] == pytest.approx(mean, rel=1e-14)
    assert cell["dev_ppm"] == pytest.approx((mean / 0.512637 - 1) * 1e6, rel=1e-9)   # Jweda et al. 2016
    assert isinstance(cell["z"], float)


def test_two_primaries_and_a_material_without_accepted_value_are_named(grid):
    g = copy.deepcopy(grid)
    bcr = [i for i in range(FIRST_ROW, len(g["Standards"]) + 1)
           if g["Standards"][i - 1][:2] == ["N-2026-03A", "BCR-2"]]
    r = bcr[0]
    for i in bcr:
        _set(g, "Standards", i, STANDARDS.col_index("role"), "primary")
    _set(g, "Standards", FIRST_ROW, STANDARDS.col_index("role"), "primary")
    msgs, _ev = _eval(g)
    col = STANDARDS.letter("role")
    assert any("Standards, row " in m and f"column {col}" in m and "two primary materials" in m for m in msgs), msgs
    g = copy.deepcopy(grid)
    _set(g, "Standards", r, STANDARDS.col_index("material"), "LAB-IN-HOUSE-1")
    msgs, ev = _eval(g)
    assert msgs == []                                   # a check without accepted value stops nothing...
    v = ev.cells[("Standards", r, STANDARDS.col_index("dev_ppm"))]
    assert isinstance(v, str) and v.startswith(MARKER) and "no accepted" in v   # ...but says so


def test_bad_sigma_columns_are_named(grid):
    row = FIRST_ROW + 1
    for key, v, text in (("sample_mass_1s_g", -1e-5, "must be >= 0"), ("spike_mass_1s_g", "abc", "is not a number"),
                         ("daughter_blank_1s_ng", -0.1, "must be >= 0"), ("daughter_blank_ratio", -0.5, "must be > 0"),
                         ("daughter_blank_ratio_1s", 1e-4, "without a blank daughter ratio")):
        g = copy.deepcopy(grid)
        _set(g, "Samples", row, SAMPLES.col_index(key), v)
        msgs, _ev = _eval(g)
        where = f"Samples, row {row}, column {SAMPLES.letter(key)}"
        assert any(where in m and text in m for m in msgs), (key, msgs)
    g = copy.deepcopy(grid)
    r = _row(g, "Measured", "LH-01", "Lu")
    _set(g, "Measured", r, MEASURED.col_index("bias_factor_1s"), -0.01)
    msgs, _ev = _eval(g)
    assert any(f"Measured, row {r}, column {MEASURED.letter('bias_factor_1s')}" in m for m in msgs), msgs


def test_bad_ratio_name_is_reported_on_the_measured_row(grid):
    g = copy.deepcopy(grid)
    r = _row(g, "Measured", "SN-03", "Nd")
    _set(g, "Measured", r, MEASURED.col_index("r2_name"), "146Nd/145Nd")
    msgs, _ev = _eval(g)
    assert any(f"Measured, row {r}, column {MEASURED.letter('r2_name')}" in m and "146Nd/145Nd" in m
               for m in msgs), msgs


def test_external_beta_sigma_widens_the_lu_hf_errors(grid):
    """Issue 9: a β 1σ typed for Lu enters the P/D error (and a β shift moves the result)."""
    g0 = copy.deepcopy(grid)
    r = _row(g0, "Measured", "LH-02", "Lu")
    a_row = _row(g0, "Samples", "LH-02")
    _set(g0, "Measured", r, MEASURED.col_index("bias_factor_1s"), 0.0)
    _m, ev0 = _eval(g0)
    g1 = copy.deepcopy(g0)
    _set(g1, "Measured", r, MEASURED.col_index("bias_factor_1s"), 0.05)
    _m, ev1 = _eval(g1)
    # linear propagation (GUM): σ1² = σ0² + (∂x/∂β · 0.05)², with ∂x/∂β from two typed β values
    beta = g0["Measured"][r - 1][MEASURED.col_index("bias_factor")]
    xs = []
    for d in (-1e-3, 1e-3):
        gd = copy.deepcopy(g0)
        _set(gd, "Measured", r, MEASURED.col_index("bias_factor"), beta + d)
        xs.append(_res(_eval(gd)[1], a_row, "x"))
    dx = (xs[1] - xs[0]) / 2e-3
    s0, s1 = _res(ev0, a_row, "x_1s"), _res(ev1, a_row, "x_1s")
    assert s1 == pytest.approx((s0 ** 2 + (dx * 0.05) ** 2) ** 0.5, rel=1e-4)
    assert s1 > 1.05 * s0
    assert "external β" in _res(ev0, a_row, "check")    # σ = 0 is named


def test_weights_and_blank_sigmas_enter_and_zero_sigma_is_named(grid):
    g = copy.deepcopy(grid)
    for key in ("lab.weighing_1s_g", "lab.blank_1s_pct", "lab.pd_reproducibility_1s_pct"):
        _set(g, "Constants", _const_row(g, key), CONSTANTS.col_index("value"), 0.0)
    _m, ev0 = _eval(g)
    _m, ev1 = _eval(copy.deepcopy(grid))
    row = FIRST_ROW + 1
    chk = _res(ev0, row, "check")
    assert chk.startswith(MARKER) and "sample mass" in chk and "P/D external reproducibility" in chk
    # the P/D reproducibility of 0.1 % (1σ) is in the random x error: sqrt(a² + (0.001 x)²) at least
    x, s0, s1 = _res(ev0, row, "x"), _res(ev0, row, "x_1s"), _res(ev1, row, "x_1s")
    assert s1 >= (s0 ** 2 + (0.001 * x) ** 2) ** 0.5 * (1 - 1e-6)


def test_sample_mass_typed_in_mg_is_flagged(grid):
    g = copy.deepcopy(grid)
    row = FIRST_ROW + 1
    _set(g, "Samples", row, SAMPLES.col_index("sample_mass_g"), 210.4)
    msgs, ev = _eval(g)
    assert msgs == []
    chk = _res(ev, row, "check")
    assert chk.startswith(MARKER) and "sample mass 210.4 g is outside" in chk


def test_isochron_shows_the_mswd_acceptance_range(grid):
    _m, ev = _eval(copy.deepcopy(grid))
    col = ISOCHRON_SUMMARY_COL + 1
    n = ev.cells[("Isochron", ISOCHRON_FIRST_Q_ROW + Q["n"], col)]
    lo = ev.cells[("Isochron", ISOCHRON_FIRST_Q_ROW + Q["mswd_low"], col)]
    hi = ev.cells[("Isochron", ISOCHRON_FIRST_Q_ROW + Q["mswd_high"], col)]
    # Wendt & Carl 1991: the χ²/dof 5 % and 95 % quantiles; scipy as the independent oracle
    from scipy.stats import chi2

    dof = int(n) - 2
    assert (lo, hi) == pytest.approx((chi2.ppf(0.05, dof) / dof, chi2.ppf(0.95, dof) / dof), rel=1e-6)
    assert (lo, hi) == pytest.approx(wendt_carl_limits(dof), rel=1e-12)


def test_three_point_isochron_says_the_test_is_weak(grid):
    g = copy.deepcopy(grid)
    from reduction.workbook import ISOCHRON_BLOCK

    first, last = ISOCHRON_BLOCK["Lu-Hf"]
    for r in range(first + 3, last + 1):
        if g["Isochron"][r - 1][0] != "":
            _set(g, "Isochron", r, 1, 0.0)
    _m, ev = _eval(g)
    msg = ev.cells[("Isochron", ISOCHRON_FIRST_Q_ROW + Q["message"], ISOCHRON_SUMMARY_COL + 2)]
    assert "1 degree of freedom" in msg and "weak" in msg
