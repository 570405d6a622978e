"""The template definition, its readers and writers, and its evaluator (no LibreOffice).

Numbers are checked against the engine's own published-method functions called directly
(York fit: York et al. 2004; age t = ln(1 + slope)/λ, e.g. Faure & Mensing 2005, recalled from
memory as the standard isochron equation) and against the invariants a workbook must keep.
"""
from __future__ import annotations

import copy
import math
import sys
from pathlib import Path

import pytest

import reduction.workbook.demo as demo
from reduction.errors import InputError
from reduction.workbook import (
    CONSTANTS,
    FIRST_ROW,
    ISOCHRON,
    ISOCHRON_BLOCK,
    ISOCHRON_FIRST_Q_ROW,
    ISOCHRON_QUANTITIES,
    ISOCHRON_SUMMARY_COL,
    MARKER,
    MEASURED,
    RESULTS,
    SAMPLES,
    SERVICE,
    SHEETS,
    CellError,
    analysis_value,
    build_layout,
    col_letter,
    ellipse_formulas,
    evaluate,
    expected_formulas,
    formula_drift,
    layout_grid,
    read_workbook,
    sheet_block,
    write_xlsx,
)

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "templates"))
from odswriter import write_ods  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from grid_edit import row_of as _row_of  # noqa: E402
from grid_edit import set_cell as _set  # noqa: E402

Q = {q: i for i, (q, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}
AGE_SMND = ("Isochron", ISOCHRON_FIRST_Q_ROW + Q["age"], ISOCHRON_SUMMARY_COL + 1)


@pytest.fixture(scope="module")
def demo_grid():
    lay = build_layout(demo.demo_tables(), constants=demo.demo_constants(), isochron_selection=demo.demo_selection())
    return layout_grid(lay)


# ------------------------------------------------------------------ definition
def test_sheet_names_and_every_uncertainty_header_states_level_and_form():
    assert [s.name for s in SHEETS] == ["Constants", "Spikes", "Standards", "Samples", "Measured", "Cycles", "Runs",
                                        "Results", "Steps", "Isochron", "Groups"]
    for s in SHEETS:
        for c in s.columns:
            if "σ" in c.header:
                assert ("1σ" in c.header or "2σ" in c.header) and any(
                    f in c.header for f in ("abs", "%", "ppm")), (s.name, c.header)
    for _q, label, unit in ISOCHRON_QUANTITIES:
        if "±" in label or "σ" in label:
            assert any(k in label + unit for k in ("2σ", "1σ", "95 %")), label


def test_every_addin_method_of_the_template_is_in_the_cell_function_table():
    sys.path.insert(0, str(ROOT / "macros"))
    import functions

    assert SERVICE == functions.SERVICE_NAME.upper()
    used = {f.func for f in expected_formulas().values() if f.addin}
    missing = sorted(m for m in used if m not in functions.BY_METHOD)
    assert not missing, f"template calls add-in methods not in macros/functions.py: {missing}"


def test_formulas_render_for_both_formats():
    f = expected_formulas()[("Results", FIRST_ROW, RESULTS.col_index("x"))]
    x = f.render("Results", "xlsx")
    o = f.render("Results", "ods")
    assert x.startswith("=IF($A5=\"\",\"\",ORG.RATIODESK.CALCFUNCTIONS.RDWORKBOOKANALYSIS(\"x\",$A5,Samples!$A$4:")
    assert o.startswith("of:=IF([.$A5]=\"\";\"\";ORG.RATIODESK.CALCFUNCTIONS.RDWORKBOOKANALYSIS(\"x\";[.$A5];"
                        "[$Samples.$A$4:.$")


# ------------------------------------------------------------------ readers and writers
@pytest.mark.parametrize("ext", [".xlsx", ".ods"])
def test_write_read_round_trip_keeps_inputs_and_formulas(tmp_path, demo_grid, ext):
    lay = demo.demo_layout()
    path = tmp_path / f"book{ext}"
    (write_xlsx if ext == ".xlsx" else write_ods)(lay, path)
    data = read_workbook(path)
    for s in ("Constants", "Spikes", "Samples", "Measured", "Standards"):
        sh = next(x for x in SHEETS if x.name == s)
        want = sheet_block(demo_grid, s, 1, 0, sh.last_row, sh.input_width - 1)
        got = sheet_block(data.grid, s, 1, 0, sh.last_row, sh.input_width - 1)
        assert got == want, s
    from reduction.workbook import array_formulas, deviation_formulas

    ellipses = {("Isochron", r, c) for (r, c) in ellipse_formulas()}
    deviations = {("Isochron", r, c) for (r, c) in deviation_formulas()}
    tables = set(array_formulas())            # the Cycles sheet's Kept column and the Runs sheet: one call each
    assert set(data.formulas) == set(expected_formulas()) | ellipses | deviations | tables
    assert all("RDELLIPSE" in data.formulas[k].upper() for k in ellipses)
    assert all("RDDEVIATIONELLIPSE" in data.formulas[k].upper() for k in deviations)
    assert formula_drift(data.formulas) == []
    ev = evaluate(data.grid)
    assert ev.cells[AGE_SMND] == evaluate(demo_grid).cells[AGE_SMND]


def test_xlsx_carries_cached_values_for_viewers_without_the_extension(tmp_path):
    from openpyxl import load_workbook

    lay = demo.demo_layout()
    write_xlsx(lay, tmp_path / "b.xlsx")
    wb = load_workbook(tmp_path / "b.xlsx", data_only=True)
    r, c = AGE_SMND[1], AGE_SMND[2]
    assert wb["Isochron"].cell(r, c + 1).value == pytest.approx(lay["Isochron"][(r, c)].value, rel=1e-15)
    assert wb["Results"]["A5"].value == "SN-01"


def test_computed_cells_locked_inputs_unlocked(tmp_path):
    from openpyxl import load_workbook

    write_xlsx(build_layout(), tmp_path / "t.xlsx")
    wb = load_workbook(tmp_path / "t.xlsx")
    ws = wb["Results"]
    assert ws.protection.sheet and not ws.protection.password
    assert ws["I5"].protection.locked
    assert not wb["Samples"]["F5"].protection.locked
    assert wb["Samples"]["F5"].fill.fgColor.rgb != ws["I5"].fill.fgColor.rgb


def test_ellipse_cells_are_the_ellipse_function_of_each_point(demo_grid):
    """The chart data: each selection row's 95 % outline (regression.ellipse_points) in its two columns."""
    from reduction.regression import ellipse_points
    from reduction.workbook import ELLIPSE_POINTS, ISOCHRON_BLOCK

    ev = evaluate(demo_grid)
    (top, left), (_f, srow) = sorted(ellipse_formulas().items())[1]
    pt = [ev.cells[("Isochron", srow, ISOCHRON.col_index(k))] for k in ("x", "x_1s", "y", "y_1s", "rho")]
    xs, ys = ellipse_points(*pt, n_points=ELLIPSE_POINTS, confidence=0.95)
    got = [(ev.cells[("Isochron", top + i, left)], ev.cells[("Isochron", top + i, left + 1)])
           for i in range(ELLIPSE_POINTS + 1)]
    assert got == list(zip(xs.tolist(), ys.tolist()))
    # an empty selection row has an empty outline
    last = ISOCHRON_BLOCK["Lu-Hf"][1]
    empty = [k for k, (_f, r) in ellipse_formulas().items() if r == last][0]
    assert ev.cells[("Isochron", empty[0], empty[1])] == ""


def test_edited_formula_is_reported(tmp_path):
    data = {("Results", FIRST_ROW, RESULTS.col_index("x")): "=1+1"}
    drift = formula_drift(data)
    assert len(drift) == 1 and drift[0].startswith(f"Results!{RESULTS.letter('x')}{FIRST_ROW}")


# ------------------------------------------------------------------ live reference values
def test_decay_constant_edit_changes_the_age_as_the_age_equation_says(demo_grid):
    ev0 = evaluate(demo_grid)
    g = copy.deepcopy(demo_grid)
    row = _row_of(g, "Constants", "decay.Sm147")
    lam0 = g["Constants"][row - 1][CONSTANTS.col_index("value")]
    lam1 = lam0 * 1.01
    _set(g, "Constants", row, CONSTANTS.col_index("value"), lam1)
    ev1 = evaluate(g)
    # t = ln(1 + slope) / λ: the slope is unchanged, so t·λ is invariant
    assert ev1.cells[AGE_SMND] * lam1 == pytest.approx(ev0.cells[AGE_SMND] * lam0, rel=1e-12)


def test_accepted_value_edit_scales_the_daughter_ratio(demo_grid):
    ev0 = evaluate(demo_grid)
    g = copy.deepcopy(demo_grid)
    row = _row_of(g, "Constants", "rm.JNdi-1.143Nd/144Nd")
    v = g["Constants"][row - 1][CONSTANTS.col_index("value")]
    _set(g, "Constants", row, CONSTANTS.col_index("value"), v * (1 + 1e-4))
    ev1 = evaluate(g)
    cy = RESULTS.col_index("y")
    y0, y1 = ev0.cells[("Results", FIRST_ROW, cy)], ev1.cells[("Results", FIRST_ROW, cy)]
    assert y1 / y0 == pytest.approx(1 + 1e-4, rel=1e-9)      # session factor = accepted / mean measured


def test_spike_concentration_edit_scales_the_concentration(demo_grid):
    ev0 = evaluate(demo_grid)
    g = copy.deepcopy(demo_grid)
    row = _row_of(g, "Spikes", "LH-SmNd-3", "Nd")
    col = next(s for s in SHEETS if s.name == "Spikes").col_index("conc_umol_g")
    _set(g, "Spikes", row, col, g["Spikes"][row - 1][col] * 1.002)
    ev1 = evaluate(g)
    c = RESULTS.col_index("daughter_conc")
    # isotope dilution: sample amount is proportional to the spike amount (Smith 2000)
    ratio = ev1.cells[("Results", FIRST_ROW + 1, c)] / ev0.cells[("Results", FIRST_ROW + 1, c)]
    assert ratio == pytest.approx(1.002, rel=2e-4)   # blank subtraction shifts it slightly


# ------------------------------------------------------------------ bad input
def _messages(grid):
    ev = evaluate(grid, strict=False)
    return [str(e) for e in ev.errors], ev


def test_half_filled_row_names_sheet_row_column(demo_grid):
    g = copy.deepcopy(demo_grid)
    row = FIRST_ROW + 2
    _set(g, "Samples", row, SAMPLES.col_index("sample_mass_g"), "")
    before = copy.deepcopy(g)
    msgs, ev = _messages(g)
    col = col_letter(SAMPLES.col_index("sample_mass_g"))
    assert any(m.startswith(f"Samples, row {row}, column {col} (Sample mass (g)): is empty") for m in msgs), msgs
    assert g == before                                  # nothing the user typed is changed
    cell = ev.cells[("Results", row, RESULTS.col_index("x"))]
    assert isinstance(cell, str) and cell.startswith(MARKER) and "Sample mass" in cell


def test_missing_spike_and_text_in_number_cell(demo_grid):
    g = copy.deepcopy(demo_grid)
    _set(g, "Samples", FIRST_ROW, SAMPLES.col_index("spike"), "NO-SUCH-SPIKE")
    r = _row_of(g, "Measured", "SN-02", "Nd")
    _set(g, "Measured", r, MEASURED.col_index("r1"), "0.51x")
    msgs, _ev = _messages(g)
    assert any("Samples, row 5, column G (Spike used): spike 'NO-SUCH-SPIKE' has no Sm row" in m for m in msgs), msgs
    assert any(f"Measured, row {r}, column {MEASURED.letter('r1')}" in m and "is not a number: '0.51x'" in m
               for m in msgs), msgs
    with pytest.raises(CellError) as exc:
        evaluate(g, strict=True)
    assert isinstance(exc.value, InputError)


def test_isochron_with_fewer_than_two_rows(demo_grid):
    g = copy.deepcopy(demo_grid)
    first, last = ISOCHRON_BLOCK["Sm-Nd"]
    for row in range(first + 1, last + 1):
        _set(g, "Isochron", row, ISOCHRON.col_index("use"), 0.0 if g["Isochron"][row - 1][:1] not in ([], [""])
             else "")
    msgs, ev = _messages(g)
    assert any("Isochron, column B (Use (1/0)): Sm-Nd: 1 row(s) selected; an isochron needs at least two" in m
               for m in msgs), msgs
    assert str(ev.cells[AGE_SMND]).startswith(MARKER)
    # the Lu-Hf isochron is untouched by the Sm-Nd problem
    lu = ev.cells[("Isochron", ISOCHRON_FIRST_Q_ROW + Q["age"], ISOCHRON_SUMMARY_COL + 2)]
    assert isinstance(lu, float) and math.isfinite(lu)


def test_analysis_value_is_what_the_grid_cell_receives(demo_grid):
    """The add-in passes ranges as tuples of tuples of float/str/''; the result must be identical."""
    refs = {s.name: s.range_ref() for s in SHEETS}
    args = [sheet_block(demo_grid, n, r1, c1, r2, c2) for n, r1, c1, r2, c2 in
            (refs["Samples"], refs["Measured"], refs["Spikes"], refs["Standards"], refs["Constants"])]
    v = analysis_value("y", "SN-03", *args)
    ev = evaluate(demo_grid)
    assert v == ev.cells[("Results", FIRST_ROW + 2, RESULTS.col_index("y"))]
    with pytest.raises(InputError):
        analysis_value("no-such-quantity", "SN-03", *args)


# ------------------------------------------------------------------ provenance of reference values
def test_constants_sheet_states_how_sigma_was_set_and_what_was_recalled_from_memory(demo_grid):
    """The note column carries reduction/data/*.json 'level_note' and 'status' (M = recalled from memory)."""
    from reduction.constants import decay_constant_entry, reference_set

    note_col = CONSTANTS.col_index("note")
    lu = _row_of(demo_grid, "Constants", "decay.Lu176")
    note = demo_grid["Constants"][lu - 1][note_col]
    # Soderlund et al. 2004: +/- 0.008e-11 at 2 sigma (level recalled from memory), halved to 1 sigma
    assert "0.008e-11" in note and "2 sigma" in note and "halved" in note and "recalled from memory" in note
    assert demo_grid["Constants"][lu - 1][CONSTANTS.col_index("sigma_1s")] == decay_constant_entry(
        "Lu176_S2004").sigma_1s == pytest.approx(0.008e-11 / 2)
    # Bouvier et al. 2008 CHUR values have status M: every one says so
    for ratio in ("143Nd/144Nd", "147Sm/144Nd", "176Hf/177Hf", "176Lu/177Hf"):
        assert "M" in reference_set().reservoir("CHUR", ratio).status
        row = _row_of(demo_grid, "Constants", f"CHUR.{ratio}")
        assert "recalled from memory" in demo_grid["Constants"][row - 1][note_col], ratio
    # a value checked against its source (status S) is not called recalled
    row = _row_of(demo_grid, "Constants", "rm.JMC-475.176Hf/177Hf")
    assert "recalled" not in demo_grid["Constants"][row - 1][note_col]


def test_status_codes_are_spelt_out():
    from reduction.workbook import status_text

    assert status_text("M") == "recalled from memory, not checked against the original"
    assert status_text("value S, uncertainty M") == ("value checked against the source, uncertainty recalled "
                                                     "from memory")
    assert status_text("override") == "lab override"
    assert status_text("") == ""


# ------------------------------------------------------------------ where a bad input is reported
@pytest.mark.parametrize("key,value,problem", [
    ("conc_umol_g", "abc", "is not a number: 'abc'"),
    ("conc_umol_g", 0.0, "must be > 0, got 0.0"),
    ("conc_sigma_1s", -1e-6, "must be >= 0"),
    ("iso3", "999Xx", "'999Xx' is not an isotope of Nd"),
])
def test_spike_problem_is_reported_at_its_own_column(demo_grid, key, value, problem):
    from reduction.workbook import SPIKES

    g = copy.deepcopy(demo_grid)
    row = _row_of(g, "Spikes", "LH-SmNd-3", "Nd")
    _set(g, "Spikes", row, SPIKES.col_index(key), value)
    msgs, _ev = _messages(g)
    where = f"Spikes, row {row}, column {SPIKES.letter(key)} ({SPIKES.columns[SPIKES.col_index(key)].header}): "
    assert any(m.startswith(where) and problem in m for m in msgs), msgs
    # never attributed to the spike-isotope column (D) when the fault is elsewhere
    assert not any(m.startswith(f"Spikes, row {row}, column {SPIKES.letter('spike_isotope')}") for m in msgs), msgs


def test_isochron_follow_on_message_names_the_row_and_analysis_that_failed(demo_grid):
    from reduction.workbook import SPIKES

    g = copy.deepcopy(demo_grid)
    row = _row_of(g, "Spikes", "LH-SmNd-3", "Nd")
    _set(g, "Spikes", row, SPIKES.col_index("conc_umol_g"), "abc")
    msgs, ev = _messages(g)
    first = ISOCHRON_BLOCK["Sm-Nd"][0]
    a = g["Isochron"][first - 1][0]
    iso = [m for m in msgs if m.startswith("Isochron")]
    assert len(iso) == 1, msgs                       # the ellipse cells repeat it without listing it again
    assert iso[0].startswith(f"Isochron, row {first}, column A (Analysis): Sm-Nd: analysis {a!r} (Results row ")
    assert "Spikes, row" in iso[0] and "column E" in iso[0]
    assert str(ev.cells[AGE_SMND]).startswith(MARKER + f"Isochron, row {first}")
    # the ellipse cell of that row shows which analysis and row
    (top, left), _f = next(iter(ellipse_formulas().items()))
    cell = ev.cells[("Isochron", top, left)]
    assert cell.startswith(MARKER + f"Isochron, row {first}, column C") and repr(a) in cell


# ------------------------------------------------------------------ spike calibration in the isochron age
def _used_points(ev, grid, system):
    first, last = ISOCHRON_BLOCK[system]
    pts = []
    for row in range(first, last + 1):
        if grid["Isochron"][row - 1][:2] and grid["Isochron"][row - 1][1] == 1.0:
            pts.append([ev.cells[("Isochron", row, ISOCHRON.col_index(k))] for k in ("x", "x_1s", "y", "y_1s", "rho")])
    return [list(c) for c in zip(*pts)]


@pytest.mark.parametrize("k,system,lam_key,spike", [(0, "Sm-Nd", "decay.Sm147", "LH-SmNd-3"),
                                                    (1, "Lu-Hf", "decay.Lu176", "LH-LuHf-2")])
def test_total_age_error_with_spike_calibration_by_finite_differences(demo_grid, k, system, lam_key, spike):
    """Rescale every x (and its σ) by (1 + δ), refit, and take the age change: the spike's P/D
    calibration σ times that derivative, added in quadrature to the slope-only and decay-constant
    parts, must equal the sheet's 'with decay constant and spike calibration' row."""
    from reduction.regression import fit_isochron
    from reduction.workbook import SPIKES

    ev = evaluate(demo_grid)
    col = ISOCHRON_SUMMARY_COL + 1 + k
    cell = {q: ev.cells[("Isochron", ISOCHRON_FIRST_Q_ROW + i, col)] for q, i in Q.items()}
    x, sx, y, sy, rho = _used_points(ev, demo_grid, system)
    row = _row_of(demo_grid, "Constants", lam_key)
    lam = demo_grid["Constants"][row - 1][CONSTANTS.col_index("value")]
    slam = demo_grid["Constants"][row - 1][CONSTANTS.col_index("sigma_1s")]

    def age_ma(scale):
        f = fit_isochron([scale * v for v in x], [scale * v for v in sx], y, sy, rho, treatment="analytical")
        return math.log1p(f.slope) / lam / 1e6

    d = 1e-6
    dt_dk = (age_ma(1 + d) - age_ma(1 - d)) / (2 * d)
    # the spike rows as typed: relative 1σ of each element's concentration, ρ = 0 (no column for it)
    rel = []
    for el in (("Sm", "Nd") if system == "Sm-Nd" else ("Lu", "Hf")):
        r = _row_of(demo_grid, "Spikes", spike, el)
        rel.append(demo_grid["Spikes"][r - 1][SPIKES.col_index("conc_sigma_1s")]
                   / demo_grid["Spikes"][r - 1][SPIKES.col_index("conc_umol_g")])
    s = math.hypot(*rel)
    assert cell["x_scale_1s_pct"] == pytest.approx(100 * s, rel=1e-12)
    assert cell["age"] == pytest.approx(age_ma(1.0), rel=1e-12)
    expect = 2 * math.sqrt((cell["age_2s"] / 2) ** 2 + (cell["age"] * slam / lam) ** 2 + (dt_dk * s) ** 2)
    assert cell["age_2s_total"] == pytest.approx(expect, rel=1e-6)
    assert cell["age_2s_total"] > cell["age_2s_lambda"]


def test_spike_column_matches_the_chain_systematic_part_of_x(demo_grid):
    """Results 'Spike P/D calibration 1σ (%)' is the x error the chain attributes to the spike
    (its systematic part: spike concentrations only, for x), up to the blank correction."""
    from reduction.workbook import analysis_result

    refs = {s.name: s.range_ref() for s in SHEETS}
    args = [sheet_block(demo_grid, n, r1, c1, r2, c2) for n, r1, c1, r2, c2 in
            (refs["Samples"], refs["Measured"], refs["Spikes"], refs["Standards"], refs["Constants"],
             refs["Cycles"])]
    ev = evaluate(demo_grid)
    ids = [(row, ev.cells[("Results", row, 0)]) for row in range(FIRST_ROW, RESULTS.last_row + 1)]
    ids = [(row, a) for row, a in ids if a != ""]
    assert len(ids) >= 10
    for row, a in ids:
        res = analysis_result(a, *args)
        chain = res.sigma_1s_systematic["parent_ratio"] / res.parent_ratio
        assert ev.cells[("Results", row, RESULTS.col_index("x_spike_1s_pct"))] / 100 == pytest.approx(chain, rel=2e-3)


def test_rows_from_two_spikes_have_no_common_scale(demo_grid):
    from reduction.workbook import SPIKES

    g = copy.deepcopy(demo_grid)
    rows = [_row_of(g, "Spikes", "LH-SmNd-3", el) for el in ("Sm", "Nd")]
    free = max(r for r in range(FIRST_ROW, FIRST_ROW + 20) if any(v != "" for v in g["Spikes"][r - 1][:1])) + 1
    for k, r in enumerate(rows):
        new = list(g["Spikes"][r - 1])
        new[SPIKES.col_index("spike")] = "LH-SmNd-4"
        while len(g["Spikes"]) < free + k:
            g["Spikes"].append([])
        g["Spikes"][free + k - 1] = new
    a = g["Isochron"][ISOCHRON_BLOCK["Sm-Nd"][0] - 1][0]
    _set(g, "Samples", _row_of(g, "Samples", a), SAMPLES.col_index("spike"), "LH-SmNd-4")
    ev = evaluate(g)
    col = ISOCHRON_SUMMARY_COL + 1
    tot = ev.cells[("Isochron", ISOCHRON_FIRST_Q_ROW + Q["age_2s_total"], col)]
    assert isinstance(tot, str) and tot.startswith("n/a: the rows use 2 spikes")
    assert isinstance(ev.cells[("Isochron", ISOCHRON_FIRST_Q_ROW + Q["age_2s_lambda"], col)], float)


def test_ods_isochron_sheet_embeds_an_isochron_and_a_deviation_chart_per_system(tmp_path):
    """ODF 1.2 embedded chart objects (chart:scatter): per system the isochron, whose series are its selection rows'
    ellipse cells, and the deviation chart, whose series are the same rows' deviation-outline cells."""
    import xml.etree.ElementTree as ET
    import zipfile

    from reduction.workbook import ELLIPSE_POINTS, ISOCHRON_SYSTEMS, deviation_formulas, selection_rows

    write_ods(demo.demo_layout(), tmp_path / "d.ods")
    ns = {"chart": "urn:oasis:names:tc:opendocument:xmlns:chart:1.0",
          "table": "urn:oasis:names:tc:opendocument:xmlns:table:1.0",
          "draw": "urn:oasis:names:tc:opendocument:xmlns:drawing:1.0",
          "xlink": "http://www.w3.org/1999/xlink",
          "manifest": "urn:oasis:names:tc:opendocument:xmlns:manifest:1.0"}
    n_charts = 2 * len(ISOCHRON_SYSTEMS)
    with zipfile.ZipFile(tmp_path / "d.ods") as z:
        content = ET.fromstring(z.read("content.xml"))
        manifest = ET.fromstring(z.read("META-INF/manifest.xml"))
        names = [f"Object {k + 1}" for k in range(n_charts)]
        charts = {n: ET.fromstring(z.read(f"{n}/content.xml")) for n in names}
    media = {e.get(f"{{{ns['manifest']}}}full-path"): e.get(f"{{{ns['manifest']}}}media-type")
             for e in manifest}
    assert {media[f"{n}/"] for n in names} == {"application/vnd.oasis.opendocument.chart"}
    iso = next(t for t in content.iter(f"{{{ns['table']}}}table") if t.get(f"{{{ns['table']}}}name") == "Isochron")
    hrefs = [o.get(f"{{{ns['xlink']}}}href") for o in iso.iter(f"{{{ns['draw']}}}object")]
    assert sorted(hrefs) == sorted(f"./{n}" for n in names) and n_charts == 6   # Sm-Nd, Lu-Hf, Rb-Sr x 2
    tops = {srow: left for (_t, left), (_f, srow) in ellipse_formulas().items()}
    devs = {srow: left for (_t, left), (_f, srow, _s) in deviation_formulas().items()}
    last = FIRST_ROW + ELLIPSE_POINTS
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        for kind, lefts in ((0, tops), (1, devs)):
            root = charts[f"Object {2 * k + kind + 1}"]
            assert root.find(".//chart:chart", ns).get(f"{{{ns['chart']}}}class") == "chart:scatter"
            title = "".join(root.find(".//chart:title", ns).itertext())
            assert title.startswith(system) and (("deviation" in title) == bool(kind))
            got = [(s.find("chart:domain", ns).get(f"{{{ns['table']}}}cell-range-address"),
                    s.get(f"{{{ns['chart']}}}values-cell-range-address"))
                   for s in root.iterfind(".//chart:series", ns)]
            want = [(f"Isochron.{col_letter(lefts[r])}{FIRST_ROW}:Isochron.{col_letter(lefts[r])}{last}",
                     f"Isochron.{col_letter(lefts[r] + 1)}{FIRST_ROW}:Isochron.{col_letter(lefts[r] + 1)}{last}")
                    for s_name, r in selection_rows() if s_name == system]
            assert got == want


def test_deviation_outline_is_the_pointwise_ppm_transform_of_the_ellipse():
    """rdDeviationEllipse's engine: each outline vertex (x, y) maps to (x, (y − a − b·x)/(a + b·x)·1e6); checked
    against the transform written out here with the ellipse of reduction.regression.ellipse_points, and a
    hand-worked centre: a point on the line has a deviation outline centred on 0 ppm."""
    import numpy as np

    from reduction.regression import deviation_points, ellipse_points

    x, sx, y, sy, rho, b, a = 1.2, 0.0012, 0.5142, 5e-6, 0.3, 0.0027, 0.51096
    ex, ey = ellipse_points(x, sx, y, sy, rho, n_points=40, confidence=0.95)
    dx, dv = deviation_points(x, sx, y, sy, rho, b, a, n_points=40, confidence=0.95)
    assert np.array_equal(dx, ex)
    assert np.allclose(dv, (ey - (a + b * ex)) / (a + b * ex) * 1e6, rtol=1e-13, atol=1e-9)
    _x, centred = deviation_points(x, sx, a + b * x, sy, rho, b, a, n_points=40)
    assert abs(float(np.mean(centred[:-1]))) < 0.05 and float(np.max(centred)) > 15   # ~2.45·σy/y·1e6 tall


def test_drop_down_lists_are_written_into_xlsx_and_ods(tmp_path):
    """Issue 12: system, element, fraction, spike label, material, ratio names, role, Use and treatment cells carry
    a drop-down list (data validity) in both formats; the spike list reads the Spikes sheet's labels live."""
    import xml.etree.ElementTree as ET
    import zipfile

    from openpyxl import load_workbook

    from reduction.workbook import SAMPLES, choices, write_xlsx

    cs = {c.name: c for c in choices()}
    assert cs["rd_system"].values == ("Sm-Nd", "Lu-Hf", "Rb-Sr")
    assert "143Nd/144Nd" in cs["rd_ratio_name1"].values and "87Rb/85Rb" in cs["rd_ratio_name1"].values
    assert "144Nd/144Nd" not in cs["rd_ratio_name1"].values
    lay = build_layout()
    write_xlsx(lay, tmp_path / "t.xlsx")
    ws = load_workbook(tmp_path / "t.xlsx")["Samples"]
    by_formula = {dv.formula1: dv for dv in ws.data_validations.dataValidation}
    system = by_formula['"Sm-Nd,Lu-Hf,Rb-Sr"']
    col = SAMPLES.letter("system")
    assert str(system.sqref) == f"{col}{FIRST_ROW}:{col}{SAMPLES.last_row}" and system.errorStyle == "stop"
    spike = by_formula[f"'Spikes'!$A${FIRST_ROW}:$A$24"]
    assert spike.type == "list"
    fraction = next(dv for f, dv in by_formula.items() if f.startswith('"whole rock'))
    assert fraction.errorStyle == "warning"           # another fraction word is kept after a question
    write_ods(lay, tmp_path / "t.ods")
    ns = {"table": "urn:oasis:names:tc:opendocument:xmlns:table:1.0"}
    root = ET.fromstring(zipfile.ZipFile(tmp_path / "t.ods").read("content.xml"))
    vals = {v.get(f"{{{ns['table']}}}name"): v.get(f"{{{ns['table']}}}condition")
            for v in root.iter(f"{{{ns['table']}}}content-validation")}
    assert set(vals) == set(cs)
    assert vals["rd_spike"] == f"of:cell-content-is-in-list([$Spikes.$A${FIRST_ROW}:.$A$24])"
    assert vals["rd_system"] == 'of:cell-content-is-in-list("Sm-Nd";"Lu-Hf";"Rb-Sr")'
    samples = next(t for t in root.iter(f"{{{ns['table']}}}table") if t.get(f"{{{ns['table']}}}name") == "Samples")
    row5 = list(samples.iter(f"{{{ns['table']}}}table-row"))[FIRST_ROW - 1]
    cell = list(row5)[SAMPLES.col_index("system")]
    assert cell.get(f"{{{ns['table']}}}content-validation-name") == "rd_system"
    # the collaborator copy (values only) carries no validity rules
    write_ods(lay, tmp_path / "v.ods", values_only=True)
    assert b"content-validation" not in zipfile.ZipFile(tmp_path / "v.ods").read("content.xml")
