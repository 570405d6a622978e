"""Formulas for the grid: the add-in formula each computed cell holds, and the check that a workbook's
formulas were not edited.
"""
from __future__ import annotations

import functools
import re
from dataclasses import dataclass
from typing import Any, Dict, List, Mapping, Optional, Tuple

from .sheets import (
    CONSTANTS,
    COPIED_FROM_SAMPLES,
    CYCLES,
    DEVIATION_COL0,
    ELLIPSE_COL0,
    ELLIPSE_CONFIDENCE,
    ELLIPSE_POINTS,
    GROUP_CHART_ROW,
    GROUP_DEVIATION_COL,
    GROUP_ELLIPSE_COL,
    GROUP_OUTLINE_ROWS,
    GROUP_POINT_COLUMNS,
    GROUP_POINTS_CAP,
    GROUP_POINTS_TOP,
    GROUP_UNLISTED_CELL,
    GROUPS,
    ISOCHRON,
    ISOCHRON_BLOCK,
    ISOCHRON_FIRST_Q_ROW,
    ISOCHRON_QUANTITIES,
    ISOCHRON_SUMMARY_COL,
    ISOCHRON_SYSTEMS,
    ISOCHRON_TREATMENT_ROW,
    MEASURED,
    RESULTS,
    ROW_SHEETS,
    RUNS,
    SAMPLES,
    SPIKES,
    STANDARDS,
    Column,
    Sheet,
    col_letter,
)
from .tables import Table, _norm
from .values import FIRST_ROW, MARKER, SERVICE, SpecialCell, shown


# --------------------------------------------------------------------------------------------
# formulas for the grid
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Ref:
    """A cell or range reference for a formula (0-based columns, 1-based rows)."""

    sheet: str
    col: int
    row: int
    col2: Optional[int] = None
    row2: Optional[int] = None
    absolute: bool = True
    abs_col_only: bool = False

    def xlsx(self, here: str) -> str:
        def one(c: int, r: int) -> str:
            if self.absolute:
                return f"${col_letter(c)}${r}"
            if self.abs_col_only:
                return f"${col_letter(c)}{r}"
            return f"{col_letter(c)}{r}"
        s = one(self.col, self.row)
        if self.col2 is not None:
            s += ":" + one(self.col2, self.row2 or self.row)
        return s if self.sheet == here else f"{self.sheet}!{s}"

    def ods(self, here: str) -> str:
        def one(c: int, r: int, sheet: str) -> str:
            if self.absolute:
                cell = f"${col_letter(c)}${r}"
            elif self.abs_col_only:
                cell = f"${col_letter(c)}{r}"
            else:
                cell = f"{col_letter(c)}{r}"
            return f"${sheet}.{cell}" if sheet else f".{cell}"
        sheet = self.sheet if self.sheet != here else ""
        s = one(self.col, self.row, sheet)
        if self.col2 is not None:
            s += ":" + one(self.col2, self.row2 or self.row, "")
        return f"[{s}]"


@dataclass(frozen=True)
class Formula:
    """A formula: an add-in call (``method``) or a native function, with literal/Ref arguments."""

    func: str
    args: Tuple[Any, ...]
    addin: bool = True
    guard: Optional[Ref] = None   # IF(guard="";"";...)

    def _arg(self, a: Any, here: str, fmt: str) -> str:
        if isinstance(a, Ref):
            return a.xlsx(here) if fmt == "xlsx" else a.ods(here)
        if isinstance(a, Formula):
            return a.render(here, fmt, top=False)
        if isinstance(a, str):
            return '"' + a.replace('"', '""') + '"'
        a = float(a)
        return str(int(a)) if a.is_integer() and abs(a) < 1e15 else repr(a)

    def render(self, here: str, fmt: str, top: bool = True) -> str:
        sep = "," if fmt == "xlsx" else ";"
        name = f"{SERVICE}.{self.func.upper()}" if self.addin else self.func
        body = f"{name}(" + sep.join(self._arg(a, here, fmt) for a in self.args) + ")"
        if self.guard is not None:
            g = self._arg(self.guard, here, fmt)
            body = f'IF({g}=""{sep}""{sep}{body})'
        if not top:
            return body
        return "=" + body if fmt == "xlsx" else "of:=" + body


def table_ref(sheet: Sheet) -> Ref:
    name, r1, c1, r2, c2 = sheet.range_ref()
    return Ref(name, c1, r1, c2, r2)


def isochron_selection_ref(system: str) -> Ref:
    """The selection block of one system on the Isochron sheet, with its key row first.

    The key row is row 4 and the block's rows follow; the function receives a contiguous range,
    so each system's block repeats the key row above itself (row 4 for Sm-Nd, the row above the
    Lu-Hf block for Lu-Hf).
    """
    first, last = ISOCHRON_BLOCK[system]
    return Ref("Isochron", 0, first - 1, len(ISOCHRON.columns) - 1, last)


def results_formula(column: Column, row: int, sheet: str = "Results") -> Formula:
    """The formula of one Results (or Steps) cell (row is the sheet row)."""
    here = Ref(sheet, 0, row, absolute=False, abs_col_only=True)
    if column.quantity in COPIED_FROM_SAMPLES:
        src = Ref("Samples", SAMPLES.col_index(column.quantity), row, absolute=False)
        return Formula("IF", (Formula("ISBLANK", (src,), addin=False), "", src), addin=False)
    args = (column.quantity, here, table_ref(SAMPLES), table_ref(MEASURED), table_ref(SPIKES),
            table_ref(STANDARDS), table_ref(CONSTANTS), table_ref(RUNS))
    return Formula("rdWorkbookAnalysis", args, guard=here)


def array_formulas() -> Dict[Tuple[str, int, int], Tuple[Formula, Tuple[int, int]]]:
    """The template's table-wide array formulas: (sheet, top row, left column) -> (formula, (rows, columns)).

    The Cycles sheet's Kept column and the whole Runs sheet are each one call over the Cycles table, so a
    cycle edit recalculates them once (not once per cell); the Groups sheet's point list and the two outline
    columns of its charts are one call each.
    """
    cyc = (table_ref(CYCLES), table_ref(CONSTANTS))
    drawn = Ref("Groups", 2, GROUP_CHART_ROW)
    books = (table_ref(SAMPLES), table_ref(RESULTS))
    outline = (drawn, table_ref(GROUPS)) + books + (table_ref(CONSTANTS),)
    return {("Cycles", FIRST_ROW, CYCLES.col_index("kept")): (Formula("rdWorkbookCycleKept", cyc),
                                                             (CYCLES.capacity, 1)),
            ("Runs", FIRST_ROW, 0): (Formula("rdWorkbookCycleRuns", cyc), (RUNS.capacity, len(RUNS.columns))),
            ("Groups", GROUP_POINTS_TOP, 0): (Formula("rdWorkbookGroupPoints", (drawn,) + books),
                                              (GROUP_POINTS_CAP, len(GROUP_POINT_COLUMNS))),
            ("Groups", GROUP_POINTS_TOP, GROUP_ELLIPSE_COL): (
                Formula("rdWorkbookGroupOutlines", ("ellipse",) + outline), (GROUP_OUTLINE_ROWS, 2)),
            ("Groups", GROUP_POINTS_TOP, GROUP_DEVIATION_COL): (
                Formula("rdWorkbookGroupOutlines", ("deviation",) + outline), (GROUP_OUTLINE_ROWS, 2))}


def group_formula(column: Column, row: int) -> Formula:
    """The formula of one computed Groups cell (a quantity of the row's group isochron)."""
    def here(key: str) -> Ref:
        return Ref("Groups", GROUPS.col_index(key), row, absolute=False, abs_col_only=True)

    return Formula("rdWorkbookGroup", (column.quantity, here("group"), here("treatment"), table_ref(SAMPLES),
                                       table_ref(RESULTS), table_ref(CONSTANTS)), guard=here("group"))


def group_drawn_formula() -> Formula:
    """The group the Groups charts draw: the chart cell (column B), or when it is empty the first group."""
    typed, first = Ref("Groups", 1, GROUP_CHART_ROW), Ref("Groups", 0, FIRST_ROW)
    fallback = Formula("IF", (Formula("ISBLANK", (first,), addin=False), "", first), addin=False)
    return Formula("IF", (Formula("ISBLANK", (typed,), addin=False), fallback, typed), addin=False)


def standards_formula(column: Column, row: int) -> Formula:
    """The formula of one computed Standards cell (role, factor, normalised, check statistics)."""
    def here(key: str) -> Ref:
        return Ref("Standards", STANDARDS.col_index(key), row, absolute=False, abs_col_only=True)

    args = (column.quantity, here("session"), here("material"), here("ratio"), here("measured"),
            table_ref(STANDARDS), table_ref(CONSTANTS))
    return Formula("rdWorkbookStandard", args, guard=here("session"))


def spikes_formula(row: int) -> Formula:
    """The Spikes sheet's computed cell: the ratios a run of the row's element must give."""
    def here(key: str) -> Ref:
        return Ref("Spikes", SPIKES.col_index(key), row, absolute=False, abs_col_only=True)

    return Formula("rdWorkbookRunRatios", (here("element"), here("spike_isotope")), guard=here("element"))


def isochron_point_formula(column: Column, row: int) -> Formula:
    """x, sx, y, sy, ρ of a selected row: looked up on the Results sheet by analysis ID."""
    here = Ref("Isochron", 0, row, absolute=False, abs_col_only=True)
    col = RESULTS.col_index(column.quantity)
    target = Ref("Results", col, FIRST_ROW, col, RESULTS.last_row)
    keys = Ref("Results", 0, FIRST_ROW, 0, RESULTS.last_row)
    match = Formula("MATCH", (here, keys, 0.0), addin=False)
    return Formula("INDEX", (target, match), addin=False, guard=here)


def isochron_summary_formula(quantity: str, system: str, treatment_cell: Ref) -> Formula:
    return Formula("rdWorkbookIsochron", (quantity, system, treatment_cell, isochron_selection_ref(system),
                                       table_ref(RESULTS), table_ref(CONSTANTS)))


#: The last row of a sheet in LibreOffice Calc (and in an .xlsx).
SHEET_MAX_ROW = 1_048_576
#: Where the template tells a Calc user that rows below a table's template rows are not reduced: the
#: first Results row below its formula rows (where the next result would be looked for).
CAPACITY_CELL = ("Results", RESULTS.last_row + 1, 0)


def capacity_formula() -> Formula:
    """The template's capacity check (a native formula, shown in :data:`CAPACITY_CELL`).

    Empty while every filled cell of the input tables is within the template's rows; otherwise it names
    each sheet with filled cells below them (their count, the last template row and the row capacity)
    and how to proceed. The batch path reads every row and writes its own results there instead.
    """
    parts, counts = [], []
    for sheet in (SAMPLES, MEASURED, SPIKES, STANDARDS, CONSTANTS):
        below = Ref(sheet.name, 0, sheet.last_row + 1, sheet.input_width - 1, SHEET_MAX_ROW)
        count = Formula("COUNTA", (below,), addin=False)
        counts.append(count)
        parts.append(Formula("IF", (count, Formula("CONCATENATE", (
            f"{sheet.name}: ", count, f" filled cell(s) below row {sheet.last_row} (the template has "
            f"{sheet.capacity} rows); "), addin=False), ""), addin=False))
    message = Formula("CONCATENATE", (MARKER + "not reduced in Calc — ", *parts,
                                      "ratiodesk reduce reads every row; or split the workbook"), addin=False)
    return Formula("IF", (Formula("OR", tuple(counts), addin=False), message, ""), addin=False)


#: Where the template says that runs on Measured name an analysis that Samples does not list (such runs
#: are not reduced): the cell below :data:`CAPACITY_CELL`.
ORPHAN_CELL = ("Results", RESULTS.last_row + 2, 0)


def orphan_message(count: Any) -> str:
    """The text of :data:`ORPHAN_CELL` for ``count`` unmatched runs (shared by Calc and the batch path)."""
    return (f"{MARKER}Measured: {count} run(s) name an analysis that is not on Samples; they are not "
            "reduced — add the analysis on Samples or correct the ID")


def orphan_formula() -> Formula:
    """Count of filled Measured analysis IDs that match no Samples ID (trimmed, as the add-in compares
    them; MATCH ignores case as the add-in does), and :func:`orphan_message` when there are any."""
    ids = Ref(MEASURED.name, 0, FIRST_ROW, 0, MEASURED.last_row)
    keys = Ref(SAMPLES.name, 0, FIRST_ROW, 0, SAMPLES.last_row)
    unmatched = Formula("ISNA", (Formula("MATCH", (Formula("TRIM", (ids,), addin=False),
                                                  Formula("TRIM", (keys,), addin=False), 0.0), addin=False),),
                        addin=False)
    filled = Formula("NOT", (Formula("ISBLANK", (ids,), addin=False),), addin=False)
    count = Formula("SUMPRODUCT", (unmatched, filled), addin=False)
    head, _n, tail = orphan_message("\0").partition("\0")
    return Formula("IF", (count, Formula("CONCATENATE", (head, count, tail), addin=False), ""), addin=False)


def unmatched_runs(samples: Table, measured: Table) -> List[str]:
    """One warning per Measured run whose analysis ID matches no Samples row (never silently skipped)."""
    known = {_norm(samples.get(i, "analysis")) for i in range(len(samples.rows)) if samples.filled(i)}
    out = []
    for i in range(len(measured.rows)):
        a = measured.get(i, "analysis")
        if not measured.filled(i) or a == "" or isinstance(a, SpecialCell) or _norm(a) in known:
            continue
        out.append(f"Measured!A{measured.first_row + i}: the run of analysis {shown(a)} "
                   f"(element {shown(measured.get(i, 'element'))}) matches no analysis on Samples and is not reduced — "
                   "add the analysis on Samples or correct the ID")
    return out


def selection_rows() -> List[Tuple[str, int]]:
    """(system, sheet row) of every isochron selection row, in order."""
    return [(system, row) for system, (first, last) in ISOCHRON_BLOCK.items() for row in range(first, last + 1)]


def ellipse_formulas() -> Dict[Tuple[int, int], Tuple[Formula, int]]:
    """(top row, left column) of each ellipse array formula on the Isochron sheet -> (formula, selection row)."""
    out: Dict[Tuple[int, int], Tuple[Formula, int]] = {}
    for k, (_system, row) in enumerate(selection_rows()):
        here = Ref("Isochron", 0, row, absolute=False, abs_col_only=True)
        args = tuple(Ref("Isochron", ISOCHRON.col_index(key), row, absolute=False, abs_col_only=True)
                     for key in ("x", "x_1s", "y", "y_1s", "rho")) + (float(ELLIPSE_POINTS), ELLIPSE_CONFIDENCE)
        out[(FIRST_ROW, ELLIPSE_COL0 + 2 * k)] = (Formula("rdEllipse", args, guard=here), row)
    return out


def deviation_formulas() -> Dict[Tuple[int, int], Tuple[Formula, int, str]]:
    """(top row, left column) of each deviation-ellipse array formula -> (formula, selection row, system).

    Beside the ellipse outlines: the same point's 95 % ellipse as x against its deviation from the system's
    fitted line in ppm (rdDeviationEllipse, the report's deviation panel), for the deviation chart.
    """
    out: Dict[Tuple[int, int], Tuple[Formula, int, str]] = {}
    rows = selection_rows()
    q = {name: ISOCHRON_FIRST_Q_ROW + i for i, (name, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}
    for k, (system, row) in enumerate(rows):
        col = ISOCHRON_SUMMARY_COL + 1 + ISOCHRON_SYSTEMS.index(system)
        here = Ref("Isochron", 0, row, absolute=False, abs_col_only=True)
        args = tuple(Ref("Isochron", ISOCHRON.col_index(key), row, absolute=False, abs_col_only=True)
                     for key in ("x", "x_1s", "y", "y_1s", "rho"))
        args += (Ref("Isochron", col, q["slope"]), Ref("Isochron", col, q["initial"]), float(ELLIPSE_POINTS),
                 ELLIPSE_CONFIDENCE)
        out[(FIRST_ROW, DEVIATION_COL0 + 2 * k)] = (Formula("rdDeviationEllipse", args, guard=here), row, system)
    return out


def all_computed_cells() -> List[Tuple[str, int, int]]:
    """Every computed cell, ellipse outlines included (for comparing the grid with the batch path)."""
    cells = set(expected_formulas())
    for (sheet, top, left), (_f, (nr, nc)) in array_formulas().items():
        cells.update((sheet, top + r, left + c) for r in range(nr) for c in range(nc))
    for (top, left), _f in list(ellipse_formulas().items()) + list(deviation_formulas().items()):
        for r in range(top, top + ELLIPSE_POINTS + 1):
            cells.update({("Isochron", r, left), ("Isochron", r, left + 1)})
    return sorted(cells)


def expected_formulas() -> Dict[Tuple[str, int, int], Formula]:
    """Every computed cell of the template: (sheet, row, 0-based column) -> formula (a fresh dict of the
    template's fixed formulas, built once per process)."""
    return dict(_expected_formulas())


@functools.lru_cache(maxsize=1)
def _expected_formulas() -> Dict[Tuple[str, int, int], Formula]:
    out: Dict[Tuple[str, int, int], Formula] = {}
    for row in range(FIRST_ROW, STANDARDS.last_row + 1):
        for j, c in enumerate(STANDARDS.columns):
            if c.computed:
                out[("Standards", row, j)] = standards_formula(c, row)
    for row in range(FIRST_ROW, SPIKES.last_row + 1):
        out[("Spikes", row, SPIKES.col_index("run_ratios"))] = spikes_formula(row)
    for sh in ROW_SHEETS:
        for row in range(FIRST_ROW, sh.last_row + 1):
            for j, c in enumerate(sh.columns):
                out[(sh.name, row, j)] = results_formula(c, row, sh.name)
    for first, last in ISOCHRON_BLOCK.values():
        for row in range(first, last + 1):
            for j, c in enumerate(ISOCHRON.columns):
                if c.computed:
                    out[("Isochron", row, j)] = isochron_point_formula(c, row)
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        col = ISOCHRON_SUMMARY_COL + 1 + k
        tcell = Ref("Isochron", col, ISOCHRON_TREATMENT_ROW)
        for q_i, (q, _label, _unit) in enumerate(ISOCHRON_QUANTITIES):
            out[("Isochron", ISOCHRON_FIRST_Q_ROW + q_i, col)] = isochron_summary_formula(q, system, tcell)
    for row in range(FIRST_ROW, GROUPS.last_row + 1):
        for j, c in enumerate(GROUPS.columns):
            if c.computed:
                out[("Groups", row, j)] = group_formula(c, row)
    out[GROUP_UNLISTED_CELL] = Formula("rdWorkbookGroupsUnlisted", (table_ref(GROUPS), table_ref(SAMPLES)))
    out[("Groups", GROUP_CHART_ROW, 2)] = group_drawn_formula()
    out[CAPACITY_CELL] = capacity_formula()
    out[ORPHAN_CELL] = orphan_formula()
    return out


_WS = re.compile(r"\s+")


def normalise_formula(text: str) -> str:
    """Formula text in a comparable form (no ``of:``, no whitespace, upper case, ``;`` → ``,``)."""
    t = text.strip()
    if t.startswith("of:"):
        t = t[3:]
    t = _WS.sub("", t).upper().replace(";", ",")
    t = re.sub(r"\[\$?([A-Z0-9_]+)?\.?", lambda m: (m.group(1) + "!" if m.group(1) else ""), t)
    t = t.replace("]", "").replace(":.", ":")
    return t.lstrip("=")


def formula_drift(formulas: Mapping[Tuple[str, int, int], str]) -> List[str]:
    """Computed cells whose formula differs from the template definition (edited by a user)."""
    out = []
    for (sheet, row, col), f in sorted(expected_formulas().items()):
        have = formulas.get((sheet, row, col))
        if have is None:
            continue
        fmt = "ods" if have.startswith("of:") else "xlsx"
        if normalise_formula(have) != normalise_formula(f.render(sheet, fmt)):
            out.append(f"{sheet}!{col_letter(col)}{row}: formula differs from the template ({have})")
    return out
