"""Layout: what every cell of a written workbook holds (values, formulas, styles and the chart cells)."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Dict, List, Mapping, Optional, Sequence, Tuple

from .evaluate import Evaluation
from .formulas import Formula, array_formulas, deviation_formulas, ellipse_formulas, expected_formulas
from .provenance import constants_rows
from .sheets import (
    CONSTANTS,
    CYCLES,
    ELLIPSE_POINTS,
    GROUP_CHART_ROW,
    GROUP_DEVIATION_COL,
    GROUP_ELLIPSE_COL,
    GROUP_POINT_COLUMNS,
    GROUP_POINTS_TOP,
    GROUPS,
    ISOCHRON,
    ISOCHRON_BLOCK,
    ISOCHRON_FIRST_Q_ROW,
    ISOCHRON_FORMATS,
    ISOCHRON_QUANTITIES,
    ISOCHRON_SUMMARY_COL,
    ISOCHRON_SYSTEMS,
    ISOCHRON_TREATMENT_ROW,
    MEASURED,
    ROW_SHEETS,
    RUNS,
    SAMPLES,
    SHEET_BY_NAME,
    SHEETS,
    SPIKES,
    STANDARDS,
    Sheet,
    _c,
)
from .tables import _clean
from .values import FIRST_ROW, HEADER_ROW, KEY_ROW, NOTE_ROW, TITLE_ROW, Cell


# --------------------------------------------------------------------------------------------
# layout: what every cell of a written workbook holds
# --------------------------------------------------------------------------------------------
@dataclass
class CellSpec:
    """One written cell: a value or a formula, and how it looks (``style``)."""

    value: Any = ""
    formula: Optional[Formula] = None
    style: str = "plain"          # title, note, header, key, input, computed, label, plain
    number_format: str = "General"
    array: Optional[Tuple[int, int]] = None   # (rows, columns) of an array formula in its top-left cell


Layout = Dict[str, Dict[Tuple[int, int], CellSpec]]   # sheet -> (row, 0-based col) -> cell

ABOUT_SHEET = "About"
ABOUT_LINES = (
    ("RatioDesk workbook", "title"),
    ("Isotope dilution and isochron ages (Sm-Nd, Lu-Hf, Rb-Sr). Every result recalculates when an input or a "
     "reference value changes.", "note"),
    ("", "plain"),
    ("Yellow cells are inputs: type here. Blue cells are computed: they are protected against accidental "
     "typing (Tools ▸ Protect Sheet, no password, unprotects).", "plain"),
    ("Order of work: Constants (reference values) → Spikes → Standards → Samples (with each analysis's "
     "isochron group) → Measured → read Results, then the ages on Groups (by group) or Isochron (by ID).", "plain"),
    ("Uncertainties: every column states its level (1σ or 2σ) and form (abs = absolute, % or ppm = relative).",
     "plain"),
    ("Results depend on the spike calibrations and on the reference-material accepted values; state them "
     "when you report ages.", "plain"),
    ("Computed cells call the RatioDesk extension for LibreOffice Calc. Without it, send a collaborator copy "
     "(RatioDesk menu) or the batch output (ratiodesk reduce).", "plain"),
)


def _table_layout(sheet: Sheet, rows: Sequence[Mapping[str, Any]], out: Dict[Tuple[int, int], CellSpec]) -> None:
    out[(TITLE_ROW, 0)] = CellSpec(sheet.title, style="title")
    out[(NOTE_ROW, 0)] = CellSpec(sheet.note, style="note")
    for j, c in enumerate(sheet.columns):
        out[(HEADER_ROW, j)] = CellSpec(c.header, style="header")
        out[(KEY_ROW, j)] = CellSpec(c.key, style="key")
    for i in range(max(sheet.capacity, len(rows))):     # every row given: none is dropped
        row = FIRST_ROW + i
        data = rows[i] if i < len(rows) else {}
        for j, c in enumerate(sheet.columns):
            if c.computed:
                continue
            v = data.get(c.key, "")
            out[(row, j)] = CellSpec("" if v is None else v, style="input", number_format=c.number_format)


def build_layout(tables: Optional[Mapping[str, Sequence[Mapping[str, Any]]]] = None,
                 constants: Optional[Sequence[Mapping[str, Any]]] = None,
                 isochron_selection: Optional[Mapping[str, Sequence[Tuple[str, int]]]] = None,
                 about: Sequence[Tuple[str, str]] = ABOUT_LINES) -> Layout:
    """Every cell of a workbook built from the definition and (optionally) filled input tables."""
    tables = tables or {}
    lay: Layout = {ABOUT_SHEET: {}}
    for k, (text, style) in enumerate(about, start=1):
        lay[ABOUT_SHEET][(k, 0)] = CellSpec(text, style=style)
    for sheet in (CONSTANTS, SPIKES, STANDARDS, SAMPLES, MEASURED, CYCLES, GROUPS):
        cells: Dict[Tuple[int, int], CellSpec] = {}
        rows = constants if sheet is CONSTANTS else tables.get(sheet.name, ())
        _table_layout(sheet, list(rows or (constants_rows() if sheet is CONSTANTS else ())), cells)
        lay[sheet.name] = cells
    formulas = expected_formulas()
    row_sheets: Dict[str, Dict[Tuple[int, int], CellSpec]] = {}
    for sh in ROW_SHEETS + (RUNS,):
        cells_ = row_sheets[sh.name] = {}
        cells_[(TITLE_ROW, 0)] = CellSpec(sh.title, style="title")
        cells_[(NOTE_ROW, 0)] = CellSpec(sh.note, style="note")
        for j, c in enumerate(sh.columns):
            cells_[(HEADER_ROW, j)] = CellSpec(c.header, style="header")
            cells_[(KEY_ROW, j)] = CellSpec(c.key, style="key")
    iso: Dict[Tuple[int, int], CellSpec] = {(TITLE_ROW, 0): CellSpec(ISOCHRON.title, style="title"),
                                           (NOTE_ROW, 0): CellSpec(ISOCHRON.note, style="note")}
    sel = isochron_selection or {}
    for system, (first, last) in ISOCHRON_BLOCK.items():
        for j, c in enumerate(ISOCHRON.columns):
            head = f"{c.header} ({system})" if j == 0 else c.header
            iso[(first - 2, j)] = CellSpec(head, style="header")
            iso[(first - 1, j)] = CellSpec(c.key, style="key")
        picks = list(sel.get(system, ()))
        for row in range(first, last + 1):
            k = row - first
            a, use = picks[k] if k < len(picks) else ("", "")
            iso[(row, 0)] = CellSpec(a, style="input")
            iso[(row, 1)] = CellSpec(use, style="input", number_format="0")
    col0 = ISOCHRON_SUMMARY_COL
    iso[(FIRST_ROW, col0)] = CellSpec("Quantity", style="header")
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        iso[(FIRST_ROW, col0 + 1 + k)] = CellSpec(system, style="header")
    unit_col = col0 + 1 + len(ISOCHRON_SYSTEMS)
    iso[(FIRST_ROW, unit_col)] = CellSpec("Unit / level", style="header")
    iso[(ISOCHRON_TREATMENT_ROW, col0)] = CellSpec("Scatter treatment", style="label")
    for k in range(len(ISOCHRON_SYSTEMS)):
        iso[(ISOCHRON_TREATMENT_ROW, col0 + 1 + k)] = CellSpec("analytical", style="input")
    iso[(ISOCHRON_TREATMENT_ROW, unit_col)] = CellSpec("analytical, expanded, equal-weights, excess-variance",
                                                        style="note")
    fmt = ISOCHRON_FORMATS
    for q_i, (q, label, unit) in enumerate(ISOCHRON_QUANTITIES):
        iso[(ISOCHRON_FIRST_Q_ROW + q_i, col0)] = CellSpec(label, style="label")
        iso[(ISOCHRON_FIRST_Q_ROW + q_i, unit_col)] = CellSpec(unit, style="note")
        for k in range(len(ISOCHRON_SYSTEMS)):
            iso[(ISOCHRON_FIRST_Q_ROW + q_i, col0 + 1 + k)] = CellSpec(style="computed",
                                                                       number_format=fmt.get(q, "General"))
    targets = {**row_sheets, "Isochron": iso, "Standards": lay["Standards"], "Spikes": lay["Spikes"],
               "Groups": lay["Groups"]}
    _group_chart_cells(lay["Groups"])
    for (sheet, row, col), f in formulas.items():
        target = targets[sheet]
        spec = target.get((row, col)) or CellSpec(style="computed")
        spec.formula, spec.style = f, "computed"
        columns = SHEET_BY_NAME[sheet].columns
        if sheet not in ("Isochron", "Groups") or (col < len(columns) and row <= SHEET_BY_NAME[sheet].last_row):
            spec.number_format = columns[col].number_format
        target[(row, col)] = spec
    shapes = [(k, f, f"Ellipse of row {srow}: x", "y (95 % outline)")
              for k, (f, srow) in ellipse_formulas().items()]
    shapes += [(k, f, f"Deviation of row {srow}: x", "ppm from the line (95 %)")
               for k, (f, srow, _s) in deviation_formulas().items()]
    for (top, left), f, h1, h2 in shapes:
        iso[(HEADER_ROW, left)] = CellSpec(h1, style="header")
        iso[(HEADER_ROW, left + 1)] = CellSpec(h2, style="header")
        for i in range(ELLIPSE_POINTS + 1):
            for j in (0, 1):
                iso[(top + i, left + j)] = CellSpec(style="computed", number_format="0.000000E+00")
        iso[(top, left)] = CellSpec(formula=f, style="computed", number_format="0.000000E+00",
                                    array=(ELLIPSE_POINTS + 1, 2))
    for (sheet, top, left), (f, (nr, nc)) in array_formulas().items():
        target = lay[sheet] if sheet in lay else row_sheets[sheet]
        cols = SHEET_BY_NAME[sheet].columns if sheet != "Groups" else _GROUP_ARRAY_COLUMNS
        for r in range(nr):
            for c in range(nc):
                target[(top + r, left + c)] = CellSpec(style="computed", number_format=cols[left + c].number_format)
        target[(top, left)] = CellSpec(formula=f, style="computed", number_format=cols[left].number_format,
                                       array=(nr, nc))
    lay.update(row_sheets)
    lay["Isochron"] = iso
    return lay


#: Number formats of the Groups sheet's arrays, by column: the point list, then the two outline pairs.
_GROUP_ARRAY_COLUMNS = tuple(_c(k, h, number_format=f) for (k, h), f in zip(
    GROUP_POINT_COLUMNS + (("", ""),) + (("", ""),) * 4,
    ("General", "0", "0.000000", "0.0E+00", "0.0000000", "0.0E+00", "0.000", "General") + ("0.000000E+00",) * 4))


def _group_chart_cells(cells: Dict[Tuple[int, int], CellSpec]) -> None:
    """The Groups sheet's static cells below the table: the chart cell and the headers of the point list."""
    cells[(GROUP_CHART_ROW, 0)] = CellSpec("Group drawn below (type a group; empty: the first group)", style="label")
    cells[(GROUP_CHART_ROW, 1)] = CellSpec("", style="input")
    cells[(GROUP_CHART_ROW + 1, 0)] = CellSpec("Its points (every Samples row of the group) and the outlines of the "
                                              "used ones (95 % ellipses; deviation in ppm from the group's line)",
                                              style="note")
    heads = [h for _k, h in GROUP_POINT_COLUMNS]
    keys = [k for k, _h in GROUP_POINT_COLUMNS]
    for j, (h, k) in enumerate(zip(heads, keys)):
        cells[(GROUP_POINTS_TOP - 2, j)] = CellSpec(h, style="header")
        cells[(GROUP_POINTS_TOP - 1, j)] = CellSpec(k, style="key")
    for col, what in ((GROUP_ELLIPSE_COL, "ellipse"), (GROUP_DEVIATION_COL, "deviation")):
        cells[(GROUP_POINTS_TOP - 2, col)] = CellSpec("Ellipses: x" if what == "ellipse" else "Deviation: x",
                                                     style="header")
        cells[(GROUP_POINTS_TOP - 2, col + 1)] = CellSpec("y (95 % outline)" if what == "ellipse" else
                                                         "ppm from the line (95 %)", style="header")
        cells[(GROUP_POINTS_TOP - 1, col)] = CellSpec(f"{what}_x", style="key")
        cells[(GROUP_POINTS_TOP - 1, col + 1)] = CellSpec(f"{what}_y", style="key")


def layout_grid(lay: Layout) -> Dict[str, List[List[Cell]]]:
    """The input values of a layout as a sheet grid (what :func:`evaluate` reads)."""
    grid: Dict[str, List[List[Cell]]] = {}
    for sheet, cells in lay.items():
        g: List[List[Cell]] = []
        for (r, c), spec in cells.items():
            while len(g) < r:
                g.append([])
            row = g[r - 1]
            while len(row) <= c:
                row.append("")
            row[c] = "" if spec.formula is not None else _clean(spec.value)
        grid[sheet] = g
    return grid


def fill_values(lay: Layout, ev: Evaluation) -> None:
    """Put evaluated values into the computed cells of a layout (kept as cached values / for value copies)."""
    for (sheet, row, col), v in ev.cells.items():
        spec = lay.setdefault(sheet, {}).get((row, col))
        if spec is None:
            spec = lay[sheet][(row, col)] = CellSpec(style="computed")
        spec.value = v


SHEET_ORDER = (ABOUT_SHEET, "Constants", "Spikes", "Standards", "Samples", "Measured", "Cycles", "Runs", "Results",
               "Steps", "Isochron", "Groups")
_FILL = {"input": "FFF6D5", "computed": "E2ECF8", "header": "D9D9D9"}
WIDTHS: Dict[str, Dict[int, float]] = {s.name: {j: c.width for j, c in enumerate(s.columns)} for s in SHEETS}
WIDTHS[ABOUT_SHEET] = {0: 110}
WIDTHS["Isochron"].update({7: 3, 8: 34, 9: 15, 10: 15, 11: 15, 12: 30})
