"""Bounded work in cells (issue 10, item 4), through the adapter without LibreOffice.

Every argument that sizes work or output has an upper bound (macros/functions.py, ``MAX_*``),
stated in its Function Wizard text and enforced before the engine is called: at the bound the call
gives what the engine gives called directly, one above it is a message naming the argument. The
time budget is the issue's: no single cell call may take more than a few seconds
(:data:`BUDGET_S`). The literal-argument and small-range cases are in cases.py (also run in Calc).
"""
import math
import re
import time
import tracemalloc

import cells
import functions
import numpy as np
import pytest
from cases import CYC, MARK, SLOPE, SX, SY, X, Y

from reduction import cycles, regression, standards
from reduction.workbook import SHEETS, build_layout, demo, layout_grid, sheet_block

#: "No single cell call may take more than a few seconds" (issue 10).
BUDGET_S = 5.0


def col(values):
    return tuple((v,) for v in values)


def timed(fn, *args):
    t = time.perf_counter()
    out = fn(*args)
    return out, time.perf_counter() - t


def message(out):
    v = out[0][0] if isinstance(out, tuple) else out
    assert isinstance(v, str) and v.startswith(MARK), f"expected a message, got {str(out)[:200]}"
    return v


# ------------------------------------------------------------------ the texts state the bounds
_BOUND_WORDS = re.compile(r"at most \d+|same length|4 or 5 cells")
#: Names of arguments that count something (points, draws, iterations, passes, cycles, nPoints, ...).
_COUNT_NAME = re.compile(r"[Pp]oints|[Dd]raws|[Ii]ter|[Pp]asses|[Cc]ount|[Cc]ycles|^min[A-Z]|^max[A-Z]|^n[A-Z]")


def test_every_range_argument_states_its_bound():
    missing = [f"{f.display}({a.name})" for f in functions.FUNCTIONS for a in f.args
               if a.kind in ("range", "range_opt") and not _BOUND_WORDS.search(a.description)]
    assert not missing, f"no bound stated in the Function Wizard text of {missing}"


def test_every_count_argument_states_its_range():
    counts = [(f, a) for f in functions.FUNCTIONS for a in f.args if a.kind in ("value", "cell")
              and _COUNT_NAME.search(a.name)]
    assert {(f.method, a.name) for f, a in counts} == {("rdEllipse", "points"), ("rdCycles", "minKept"),
                                                      ("rdDeviationEllipse", "points")}
    for f, a in counts:
        assert re.search(r"a whole number from \d+ to \d+", a.description), (f.display, a.name)


@pytest.mark.parametrize("method, arg, words", [
    ("rdEllipse", "points", f"from 3 to {functions.MAX_ELLIPSE_POINTS}"),
    ("rdDeviationEllipse", "points", f"from 3 to {functions.MAX_ELLIPSE_POINTS}"),
    ("rdCycles", "minKept", f"from 2 to {functions.MAX_VALUES}"),
    ("rdCycles", "cycles", f"at most {functions.MAX_VALUES} cycles"),
    ("rdIsochronBlock", "x", f"at most {functions.MAX_ISOCHRON_POINTS} points"),
    ("rdAgeIsochron", "x", f"at most {functions.MAX_ISOCHRON_POINTS} points"),
    ("rdMeanWeighted", "values", f"at most {functions.MAX_VALUES}"),
    ("rdStandardFactor", "runs", f"at most {functions.MAX_VALUES}"),
    ("rdDilutionBlock", "names", f"at most {functions.MAX_NAMED_RATIOS}"),
    ("rdAnalysisBlock", "daughterSpike", f"at most {functions.MAX_SPIKE_ISOTOPES} isotope columns"),
    ("rdWorkbookAnalysis", "measured", f"at most {functions.MAX_TABLE_CELLS} cells"),
])
def test_the_text_names_the_enforced_number(method, arg, words):
    text = next(a.description for a in functions.BY_METHOD[method].args if a.name == arg)
    assert words in text


# ------------------------------------------------------------------ the issue's call
def test_the_issue_call_is_refused_at_once_without_memory():
    """=RD.ELLIPSE(0.1;0.0002;0.51;0.000004;0;1E9) ran 102 s and took 24 GB before the bound."""
    cells.rdEllipse(0.1, 0.0002, 0.51, 0.000004, 0.0, 48.0)  # engine imported outside the measurement
    tracemalloc.start()
    try:
        out, dt = timed(cells.rdEllipse, 0.1, 0.0002, 0.51, 0.000004, 0.0, 1e9)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert "points must be a whole number from 3 to 10000, got 1e+09" in message(out)
    assert dt < 1.0 and peak < 1_000_000


def test_ellipse_at_the_bound_is_small_and_fast():
    cells.rdEllipse(0.1, 0.0002, 0.51, 0.000004, 0.0, 48.0)
    tracemalloc.start()
    try:
        out, dt = timed(cells.rdEllipse, X[0], SX[0], Y[0], SY[0], 0.1, float(functions.MAX_ELLIPSE_POINTS))
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert len(out) == functions.MAX_ELLIPSE_POINTS + 1 and out[0] == out[-1]
    assert dt < BUDGET_S and peak < 50_000_000


# ------------------------------------------------------------------ 100 000 values
def _values(n, seed=1):
    rng = np.random.default_rng(seed)
    return [float(v) for v in 0.5121 + 1e-6 * rng.standard_normal(n)]


def test_cycles_at_and_above_the_bound():
    v = _values(functions.MAX_VALUES)
    out, dt = timed(cells.rdCycles, col(v))
    st = cycles.cycle_stats(v)
    assert out == ((st.mean, st.sem_1s, st.sd_1s, float(st.n_kept), float(st.n_rejected)),) and dt < BUDGET_S
    assert "cycles has 100001 cycles; at most 100000 cycles" in message(cells.rdCycles(col(v + [0.5121])))


def test_cycles_bound_counts_values_not_cells():
    """Empty cells are missing cycles: a longer range with 100 000 values is within the bound."""
    v = _values(functions.MAX_VALUES)
    gappy = v[:10] + [""] * 10 + v[10:]
    assert not str(cells.rdCycles(col(gappy))[0][0]).startswith(MARK)
    assert "100001 cycles" in message(cells.rdCycles(col(gappy[:-1] + [v[-1], 0.5121])))


def test_weighted_mean_with_external_scatter_at_and_above_the_bound():
    v = _values(functions.MAX_VALUES, seed=2)
    s = [1e-6] * len(v)
    out, dt = timed(cells.rdMeanWeighted, col(v), col(s), True)
    m = regression.weighted_mean(v, s, external_scatter=True)
    assert out[0][:2] == (m.mean, m.mean_sigma_1s) and dt < BUDGET_S
    assert "values has 100001 values; at most 100000" in message(cells.rdMeanWeighted(col(v + [0.5]),
                                                                                      col(s + [1e-6])))


def test_standard_runs_at_and_above_the_bound():
    v = _values(functions.MAX_VALUES, seed=3)
    cells.STANDARD_CACHE.clear()
    out, dt = timed(cells.rdStandardFactor, col(v), None, "JNdi-1", "143Nd/144Nd")
    f = standards.standard_factor(v, material="JNdi-1", ratio="143Nd/144Nd")
    assert out[0][0] == f.factor and dt < BUDGET_S
    assert "runs has 100001 runs; at most 100000" in message(cells.rdStandardFactor(col(v + [0.5121]), None,
                                                                                    "JNdi-1", "143Nd/144Nd"))


# ------------------------------------------------------------------ isochron points
def test_excess_variance_fit_at_the_bound_within_budget():
    """The slowest cell: 1 000 points whose likelihood search runs to its evaluation cap (seed 7)."""
    n = functions.MAX_ISOCHRON_POINTS
    rng = np.random.default_rng(7)
    x = 0.1 + 0.2 * rng.random(n)
    y = 0.5109 + SLOPE * x + 4e-6 * rng.standard_normal(n)
    args = (col(x.tolist()), col((0.002 * x).tolist()), col(y.tolist()), col([4e-6] * n))
    cells.FIT_CACHE.clear()
    out, dt = timed(cells.rdIsochronBlock, *args, None, "excess-variance")
    f = regression.fit_isochron(x, 0.002 * x, y, [4e-6] * n, treatment="excess-variance")
    assert out[0] == ("slope", f.slope) and dt < BUDGET_S


# ------------------------------------------------------------------ any range: one whole column
def test_a_whole_column_is_read_and_one_cell_more_is_refused():
    pad = [""] * (functions.MAX_RANGE_CELLS - len(X))
    grids = [col(list(c) + pad) for c in (X, SX, Y, SY)]
    cells.FIT_CACHE.clear()
    out, dt = timed(cells.rdIsochronMswd, *grids)
    assert out == regression.fit_isochron(X, SX, Y, SY).mswd and dt < BUDGET_S
    too_long = col(list(X) + pad + [""])
    assert "x is a range of 1048577 cells; at most 1048576 cells" in message(
        cells.rdIsochronMswd(too_long, *grids[1:]))


def test_whole_column_inputs_are_not_kept_in_the_cache():
    pad = [""] * (functions.MAX_RANGE_CELLS - len(X))
    grids = [col(list(c) + pad) for c in (X, SX, Y, SY)]
    cells.FIT_CACHE.clear()
    cells.rdIsochronMswd(*grids)
    assert cells.FIT_CACHE.cells == 0 and not cells.FIT_CACHE.data
    cells.rdIsochronMswd(col(X), col(SX), col(Y), col(SY))
    assert cells.FIT_CACHE.cells == 4 * len(X) + 4  # four ranges and four omitted arguments


def test_the_cache_holds_at_most_its_cells():
    c = cells._Cache(size=10, max_cells=100)
    for k in range(6):
        c.get(k, lambda k=k: k * k, cells=25)
    assert c.cells == 100 and list(c.data) == [2, 3, 4, 5]       # the oldest went first
    assert c.get(99, lambda: "big", cells=26) == "big" and 99 not in c.data and c.cells == 100
    c.clear()
    assert c.cells == 0 and not c.data and not c.sizes


# ------------------------------------------------------------------ names, spike isotopes
def test_names_at_the_bound_reach_the_engine():
    names = R_row([f"{100 + k}Nd/144Nd" for k in range(functions.MAX_NAMED_RATIOS)])
    values = R_row([0.5] * functions.MAX_NAMED_RATIOS)
    spike = ((("150Nd", "144Nd"), (0.97, 0.03), ("150Nd", 0.004, 0.0)))
    text = message(cells.rdDilutionBlock(names, values, spike, 0.3, 0.08, "146Nd/144Nd"))
    assert "at most" not in text and "unknown isotope" in text   # the engine's own check, past the bound


def test_spike_block_at_the_bound_reaches_the_engine():
    n = functions.MAX_SPIKE_ISOTOPES
    spike = (tuple(f"{130 + k}Nd" for k in range(n)), (0.01,) * n, ("150Nd", 0.004) + ("",) * (n - 2))
    text = message(cells.rdDilutionConc(0.26, "150Nd/144Nd", 0.3, 0.08, spike))
    assert "isotope columns" not in text


def R_row(values):
    return (tuple(values),)


# ------------------------------------------------------------------ workbook tables
@pytest.fixture(scope="module")
def tables():
    lay = build_layout(demo.demo_tables(), constants=demo.demo_constants(), isochron_selection=demo.demo_selection())
    g = layout_grid(lay)
    refs = {s.name: s.range_ref() for s in SHEETS}
    return {n: tuple(tuple(r) for r in sheet_block(g, *refs[n])) for n in
            ("Samples", "Measured", "Spikes", "Standards", "Constants")}


def _padded(block, cells_):
    width = len(block[0])
    rows = cells_ // width
    assert rows >= len(block)
    return block + (("",) * width,) * (rows - len(block))


def test_template_tables_are_within_the_bound():
    for s in SHEETS:
        _name, r1, c1, r2, c2 = s.range_ref()
        assert (r2 - r1 + 1) * (c2 - c1 + 1) <= functions.MAX_TABLE_CELLS, s.name


def test_workbook_tables_at_and_above_the_bound(tables):
    args = [tables[n] for n in ("Samples", "Measured", "Spikes", "Standards", "Constants")]
    want = cells.rdWorkbookAnalysis("y", "SN-03", *args)
    assert isinstance(want, float) and math.isfinite(want)
    big = [_padded(t, functions.MAX_TABLE_CELLS) for t in args]
    got, dt = timed(cells.rdWorkbookAnalysis, "y", "SN-03", *big)
    assert got == want and dt < BUDGET_S
    width = len(args[1][0])
    over = args[1] + (("",) * width,) * (functions.MAX_TABLE_CELLS // width + 1 - len(args[1]))
    text = message(cells.rdWorkbookAnalysis("y", "SN-03", big[0], over, *big[2:]))
    assert f"measured is a range of {len(over)} x {width} = {len(over) * width} cells; at most 10000" in text


def test_min_kept_at_its_bounds_reaches_the_engine():
    for n in (2.0, float(functions.MAX_VALUES)):
        out = cells.rdCycles(col(CYC), None, n)
        st = cycles.cycle_stats(CYC, min_kept=int(n))
        assert out == ((st.mean, st.sem_1s, st.sd_1s, float(st.n_kept), float(st.n_rejected)),)
