"""The batch evaluator: every computed cell of a filled workbook, from the same definition and the same
engine calls as the grid.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Dict, List, Mapping, Optional, Sequence, Tuple

from ..errors import InputError, RatioDeskError
from .analysis import AnalysisOutcome, _analysis_cell, _analysis_of
from .formulas import (
    ORPHAN_CELL,
    Ref,
    deviation_formulas,
    ellipse_formulas,
    expected_formulas,
    isochron_selection_ref,
    orphan_message,
    unmatched_runs,
)
from .isochrons import (
    GroupFits,
    _cell_message,
    _isochron,
    _isochron_cell,
    group_outlines,
    group_points,
    unlisted_groups,
)
from .sheets import (
    COPIED_FROM_SAMPLES,
    CYCLES,
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
    SHEET_BY_NAME,
    SPIKES,
    STANDARDS,
    Sheet,
    col_letter,
)
from .standards import _session_standards, _standard_cell
from .tables import SessionStandards, Table, _clean, _cycle_table, _norm, run_ratios
from .values import (
    FIRST_ROW,
    KEY_ROW,
    MARKER,
    Cell,
    CellError,
    FollowOnError,
    FormulaCell,
    Rows,
    SpecialCell,
    blank,
    shown,
)


# --------------------------------------------------------------------------------------------
# the batch evaluator
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Evaluation:
    """Every computed cell of a workbook, evaluated by the engine (no LibreOffice)."""

    cells: Dict[Tuple[str, int, int], Any]
    errors: Tuple[CellError, ...]
    warnings: Tuple[str, ...]


def sheet_block(grid: Mapping[str, Sequence[Sequence[Cell]]], sheet: str, r1: int, c1: int, r2: int,
                c2: int) -> Rows:
    """Cells of a rectangle (1-based rows, 0-based columns) of a sheet grid, padded with ''."""
    g = grid.get(sheet, ())
    out = []
    for r in range(r1, r2 + 1):
        row = g[r - 1] if r - 1 < len(g) else ()
        out.append(tuple(_clean(row[c]) if c < len(row) else "" for c in range(c1, c2 + 1)))
    return tuple(out)


def _block(grid: Mapping[str, Sequence[Sequence[Cell]]], ref: Ref) -> Rows:
    return sheet_block(grid, ref.sheet, ref.row, ref.col, ref.row2 or ref.row, ref.col2 if ref.col2 is not None
                       else ref.col)


def _point(pt: Sequence[Cell], row: Optional[int], what: str) -> Tuple[str, List[float]]:
    """(analysis label, [x, sx, y, sy, ρ]) of one selection row, each a number, else the message of its cell."""
    ci = [ISOCHRON.col_index(k) for k in ("x", "x_1s", "y", "y_1s", "rho")]
    vals = [pt[i] for i in ci]
    a = pt[0] if not isinstance(pt[0], float) else f"{pt[0]:g}"
    for v, i in zip(vals, ci):
        if not isinstance(v, float):
            text = _cell_message(str(v)) if isinstance(v, str) and v.strip() else repr(v)
            err = FollowOnError if isinstance(v, str) and v.strip().startswith(MARKER.strip()) else CellError
            raise err("Isochron", row, col_letter(i), ISOCHRON.columns[i].header,
                      f"{what} of analysis {shown(a)} needs a number here, the cell shows: {text}")
    return a, vals


def _ellipse(pt: Sequence[Cell], row: Optional[int] = None) -> List[Tuple[float, float]]:
    """The ellipse outline of one selection row (sheet row ``row``), as the ellipse cell function returns it."""
    from ..regression import ellipse_points

    a, vals = _point(pt, row, "ellipse")
    try:
        xs, ys = ellipse_points(*vals, n_points=ELLIPSE_POINTS, confidence=ELLIPSE_CONFIDENCE)
    except InputError as exc:
        raise CellError("Isochron", row, None, "", f"ellipse of analysis {shown(a)}: {exc}") from None
    return [(float(a), float(b)) for a, b in zip(xs.tolist(), ys.tolist())]


def _deviation(pt: Sequence[Cell], row: int, line: Sequence[Any]) -> List[Tuple[float, float]]:
    """The deviation outline of one selection row, as rdDeviationEllipse returns it."""
    from ..regression import deviation_points

    a, vals = _point(pt, row, "ellipse")        # the point's own cells: the same messages as its ellipse
    if not all(isinstance(v, float) for v in line):
        bad = next(v for v in line if not isinstance(v, float))
        raise FollowOnError("Isochron", row, None, "", f"deviation of analysis {shown(a)}: the isochron has no line "
                            f"({_cell_message(str(bad)) if str(bad).strip() else 'no fit'})")
    try:
        xs, ds = deviation_points(*vals, line[0], line[1], n_points=ELLIPSE_POINTS, confidence=ELLIPSE_CONFIDENCE)
    except RatioDeskError as exc:
        raise CellError("Isochron", row, None, "", f"deviation of analysis {shown(a)}: {exc}") from None
    return [(float(u), float(v)) for u, v in zip(xs.tolist(), ds.tolist())]


def _raise(exc: Exception) -> Any:
    raise exc


#: Data rows per table sheet the batch path reads at most (bounds memory and time): a sheet with more
#: filled rows is refused with a message (split the workbook), never read in part.
MAX_DATA_ROWS = 20_000
#: The last sheet row a reader keeps (data rows start at :data:`FIRST_ROW`).
MAX_SHEET_ROW = FIRST_ROW - 1 + MAX_DATA_ROWS


def too_many_rows(sheet: str, filled: int, first_beyond: int, more: str = "") -> CellError:
    """The message for a sheet with more filled data rows than :data:`MAX_DATA_ROWS`."""
    return CellError(sheet, first_beyond, None, "",
                     f"the sheet has {filled:,} filled data rows{more}, more than the {MAX_DATA_ROWS:,} per sheet "
                     f"ratiodesk reduce reads (rows {FIRST_ROW}-{MAX_SHEET_ROW:,}); nothing was read in part: split "
                     f"the workbook into several of at most {MAX_DATA_ROWS:,} rows per sheet")


def last_filled_row(grid: Mapping[str, Sequence[Sequence[Cell]]], sheet: Sheet) -> int:
    """The last sheet row with a filled cell in the input columns of a table sheet (0: none)."""
    g = grid.get(sheet.name, ())
    width = sheet.input_width
    for r in range(len(g), FIRST_ROW - 1, -1):
        row = g[r - 1]
        if any(not blank(v) for v in row[:width]):
            return r
    return 0


def table_extent(grid: Mapping[str, Sequence[Sequence[Cell]]], sheet: Sheet) -> int:
    """The last sheet row of a table as the batch path reads it: the template's rows, or further down
    to the last filled row (every filled row is reduced, :data:`MAX_DATA_ROWS` at most)."""
    last = last_filled_row(grid, sheet)
    if last > MAX_SHEET_ROW:
        g = grid.get(sheet.name, ())
        filled = sum(1 for r in g[FIRST_ROW - 1:] if any(not blank(v) for v in r[:sheet.input_width]))
        raise too_many_rows(sheet.name, filled, MAX_SHEET_ROW + 1)
    return max(sheet.last_row, last)


def _beyond_template(grid: Mapping[str, Sequence[Sequence[Cell]]], sheet: Sheet) -> Optional[CellError]:
    """The first filled row below a table's template rows, as a message (None when there is none)."""
    g = grid.get(sheet.name, ())
    rows = [r for r in range(sheet.last_row + 1, len(g) + 1)
            if any(not blank(v) for v in g[r - 1][:sheet.input_width])]
    if not rows:
        return None
    return CellError(sheet.name, rows[0], None, "",
                     f"{len(rows)} filled row(s) below row {sheet.last_row}, outside the template's "
                     f"{sheet.capacity} rows: LibreOffice Calc does not reduce them (ratiodesk reduce reduces "
                     f"every row); or split the workbook")


EXTENTS = ("data", "template")


class BookTables:
    """The input tables of a grid, each read once with indexed look-ups (the batch path).

    ``rows`` holds each table key row first, to its extent (:func:`table_extent`, or the template's
    rows with ``extent="template"``); the session standards are computed once per session and ratio.
    """

    def __init__(self, grid: Mapping[str, Sequence[Sequence[Cell]]], extent: str = "data") -> None:
        sheets = [SHEET_BY_NAME[n] for n in ("Samples", "Measured", "Spikes", "Standards", "Constants", "Cycles")]
        self.last = {sh.name: table_extent(grid, sh) if extent == "data" else sh.last_row for sh in sheets}
        self.rows: Dict[str, Rows] = {sh.name: sheet_block(grid, sh.name, KEY_ROW, 0, self.last[sh.name],
                                                           sh.input_width - 1) for sh in sheets}
        self.samples = Table.from_range(SAMPLES, self.rows["Samples"])
        self.measured = Table.from_range(MEASURED, self.rows["Measured"])
        self.spikes = Table.from_range(SPIKES, self.rows["Spikes"])
        self.standards = Table.from_range(STANDARDS, self.rows["Standards"])
        self._sessions: Dict[Tuple[str, str], Any] = {}
        #: The Runs table (the run means of the Cycles sheet), computed on first use (:meth:`runs_table`).
        self.runs: Optional[Table] = None
        self._runs_read = False

    def runs_table(self) -> Optional[Table]:
        """The Runs table of the Cycles sheet (None without cycles); a Cycles problem raises its CellError."""
        if not self._runs_read:
            self._runs_read = True
            got = _cycle_table(self.rows["Cycles"], self.rows["Constants"])
            if got[0]:
                keys = tuple(c.key for c in RUNS.columns)
                self.runs = Table.from_range(RUNS, (keys,) + tuple(tuple(r) for r in got[0]))
        return self.runs

    def session_standards(self, ses: str, rat: str) -> SessionStandards:
        """:func:`_session_standards` of one session and ratio (its problem, if any, raised each time)."""
        key = (ses, rat)
        if key not in self._sessions:
            try:
                self._sessions[key] = _session_standards(self.rows["Standards"], self.rows["Constants"], ses, rat)
            except CellError as exc:
                self._sessions[key] = exc
        got = self._sessions[key]
        if isinstance(got, CellError):
            raise got
        return got

    def standard(self, session: str, ratio: str, where: Callable[[str], CellError]) -> Any:
        """The session factor, as :func:`_standard` gives it."""
        if not self.standards.find(session=session, ratio=ratio):
            raise where(f"no {ratio} reference-material runs for session {shown(session)} on the Standards sheet")
        return self.session_standards(session, ratio).factor

    def analysis(self, analysis: str, mc_draws: int = 0) -> AnalysisOutcome:
        """:func:`_analysis` of one analysis ID (optionally with a seeded Monte Carlo)."""
        try:
            runs = self.runs_table()
        except CellError:
            runs = None           # the Cycles sheet's own cells carry its problem (see evaluate)
        return _analysis_of(analysis, self.samples, self.measured, self.spikes, self.standard,
                            self.rows["Constants"], mc_draws, runs)


def evaluate(grid: Mapping[str, Sequence[Sequence[Cell]]], *, strict: bool = True,
             extent: str = "data") -> Evaluation:
    """Compute every computed cell from the input cells of ``grid`` (sheet -> rows of values).

    Parameters
    ----------
    grid : mapping of sheet name to rows of cell values
        The typed inputs; computed cells already in it are ignored. The order is the grid's
        dependency order: Standards, Results, then the Isochron points, then the Isochron summaries.
    strict : bool
        The first problem raises :class:`CellError`; otherwise problems are collected and the
        cell holds the message, as it would in LibreOffice.
    extent : {"data", "template"}
        ``"data"`` (the batch path) reads every filled row of a table, below the template's rows too
        (:data:`MAX_DATA_ROWS` per sheet at most), and writes a Results row for each Samples row.
        ``"template"`` evaluates what LibreOffice Calc evaluates (the template's rows) and reports the
        first filled row below them on each sheet as a problem, so no row goes unreduced unnoticed.

    Returns
    -------
    Evaluation
        Every computed cell's value, the problems and the warnings.
    """
    if extent not in EXTENTS:
        raise InputError("extent", f"must be one of {', '.join(EXTENTS)}, got {extent!r}")
    work: Dict[str, List[List[Cell]]] = {s: [list(r) for r in rows] for s, rows in grid.items()}
    cells: Dict[Tuple[str, int, int], Any] = {}
    errors: List[CellError] = []
    listed: set = set()
    warnings: List[str] = []

    def put(sheet: str, row: int, col: int, v: Any) -> None:
        g = work.setdefault(sheet, [])
        while len(g) < row:
            g.append([])
        r = g[row - 1]
        while len(r) <= col:
            r.append("")
        r[col] = v
        cells[(sheet, row, col)] = v

    def put_outline(top: int, left: int, vals: Any) -> None:
        """An outline array (ELLIPSE_POINTS + 1 rows x 2) as Calc shows it: "" fills the whole range, a message
        shows in the first cell and #N/A beside it (what Calc shows beside a one-cell answer in a larger range)."""
        for i in range(ELLIPSE_POINTS + 1):
            for j in (0, 1):
                if not isinstance(vals, str):
                    v = vals[i][j]
                elif vals == "" or (i == 0 and j == 0):
                    v = vals
                else:
                    v = "#N/A"
                put("Isochron", top + i, left + j, v)

    def run(f: Callable[[], Any]) -> Any:
        try:
            return f()
        except CellError as exc:
            if strict:
                raise
            if not isinstance(exc, FollowOnError) and str(exc) not in listed:
                listed.add(str(exc))
                errors.append(exc)
            return MARKER + str(exc)

    if extent == "template":
        for name in ("Samples", "Measured", "Spikes", "Standards", "Constants", "Cycles"):
            beyond = _beyond_template(work, SHEET_BY_NAME[name])
            if beyond is not None:
                run(lambda beyond=beyond: _raise(beyond))
    book = BookTables(work, extent)
    last = book.last
    res_last = max(RESULTS.last_row, last["Samples"])
    # clear computed cells first (a workbook from LibreOffice carries cached values); every row of the
    # Results sheet is computed, so rows below the template's are cleared too
    for sh in ROW_SHEETS:
        del work.setdefault(sh.name, [])[KEY_ROW:]
    for (sheet, row, col) in expected_formulas():
        put(sheet, row, col, "")
    std_computed = [j for j, c in enumerate(STANDARDS.columns) if c.computed]
    for row in range(STANDARDS.last_row + 1, min(last["Standards"], len(work.get("Standards", ()))) + 1):
        line = work["Standards"][row - 1]
        for j in std_computed:
            if j < len(line):
                line[j] = ""
    # Standards: one primary per session and ratio (computed once per session, used by every row)
    std_t = book.standards

    def standard_cell(q: str, i: int) -> float | str:
        session = std_t.get(i, "session")
        ses = str(session).strip() if not isinstance(session, float) else f"{session:g}"
        if not ses:
            return ""
        mat, rat = str(std_t.get(i, "material")).strip(), str(std_t.get(i, "ratio")).strip()
        return _standard_cell(q, book.session_standards(ses, rat), ses, mat, std_t.get(i, "measured"))

    _check_standard_runs(std_t, run)
    for i in range(len(std_t.rows)):
        if not std_t.filled(i):
            continue
        row = FIRST_ROW + i
        for j in std_computed:
            c = STANDARDS.columns[j]
            if std_t.get(i, "session") == "":
                v: Any = run(lambda i=i: _raise(std_t.error(i, "session", "is empty but the row has data")))
            elif isinstance(std_t.get(i, "session"), FormulaCell):
                v = run(lambda i=i: std_t.text(i, "session"))
            else:
                v = run(lambda c=c, i=i: standard_cell(c.quantity, i))
            put("Standards", row, j, v)

    # Cycles -> Runs: each run's mean and SEM from its kept cycles, one evaluation for the whole sheet
    j_kept = CYCLES.col_index("kept")
    cyc_rows = book.rows["Cycles"]
    n_cyc = max(CYCLES.capacity, len(cyc_rows) - 1) if extent == "data" else CYCLES.capacity
    del work.setdefault("Runs", [])[KEY_ROW:]
    got = run(lambda: _cycle_table(cyc_rows, book.rows["Constants"]))
    if isinstance(got, str):
        kept_col: Sequence[Any] = [got] + ["#N/A"] * (n_cyc - 1)
        run_rows: Sequence[Sequence[Any]] = [[got] + ["#N/A"] * (len(RUNS.columns) - 1)] + \
            [["#N/A"] * len(RUNS.columns)] * (RUNS.capacity - 1)
    else:
        kept_col = list(got[1]) + [""] * (n_cyc - len(got[1]))
        run_rows = [list(r) for r in got[0]] + [[""] * len(RUNS.columns)] * (RUNS.capacity - len(got[0]))
    for r, v in enumerate(kept_col[:n_cyc]):
        put("Cycles", FIRST_ROW + r, j_kept, v)
    for r, line in enumerate(run_rows):
        for j, v in enumerate(line):
            put("Runs", FIRST_ROW + r, j, v)

    # Spikes: what a run of each row's element must give
    spk_t = book.spikes
    j_rr = SPIKES.col_index("run_ratios")
    for i in range(min(len(spk_t.rows), SPIKES.capacity if extent == "template" else len(spk_t.rows))):
        if spk_t.get(i, "element") == "":
            continue

        def rr(i: int = i) -> str:
            try:
                return run_ratios(spk_t.text(i, "element"), spk_t.text(i, "spike_isotope", required=False))
            except InputError as exc:
                raise spk_t.error(i, "spike_isotope" if exc.argument == "spike_isotope" else "element",
                                  exc.problem) from None
        put("Spikes", FIRST_ROW + i, j_rr, run(rr))

    # Samples -> Results: each analysis reduced once, every Results column read from that
    samples = book.samples
    for i in range(len(samples.rows)):
        row = FIRST_ROW + i
        if not samples.filled(i):
            continue
        analysis = samples.get(i, "analysis")
        outcome: Any = None
        if analysis == "":
            outcome = run(lambda i=i: _raise(samples.error(i, "analysis", "is empty but the row has data")))
        elif isinstance(analysis, FormulaCell):
            outcome = run(lambda i=i: samples.text(i, "analysis"))
        else:
            a = str(analysis).strip() if not isinstance(analysis, float) else f"{analysis:g}"
            if a:
                outcome = run(lambda a=a: book.analysis(a))
        for sh in ROW_SHEETS:
            for j, c in enumerate(sh.columns):
                if c.quantity in COPIED_FROM_SAMPLES:
                    v = samples.get(i, c.quantity)
                    if isinstance(v, FormulaCell):
                        v = run(lambda i=i, c=c: samples.text(i, c.quantity))
                    put(sh.name, row, j, v)
                    continue
                if outcome is None:
                    v = ""
                elif isinstance(outcome, str):
                    v = outcome
                else:
                    v = run(lambda c=c, o=outcome: _analysis_cell(c.quantity, o))
                put(sh.name, row, j, v)
                if c.quantity == "check" and isinstance(v, str) and v.startswith(MARKER) and "poor" in v:
                    warnings.append(f"Results!{col_letter(j)}{row}: {v[len(MARKER):]}")
    orphans = unmatched_runs(samples, book.measured)
    warnings.extend(orphans)
    if orphans and extent == "template":     # the template's own cell says so, as Calc does
        put(*ORPHAN_CELL, orphan_message(len(orphans)))
    results = sheet_block(work, "Results", KEY_ROW, 0, res_last, len(RESULTS.columns) - 1)
    res_t = Table.from_range(RESULTS, results)
    if extent == "data":
        _check_isochron_extent(work, run)
    for first, last_sel in ISOCHRON_BLOCK.values():
        for row in range(first, last_sel + 1):
            a = sheet_block(work, "Isochron", row, 0, row, 0)[0][0]
            for j, c in enumerate(ISOCHRON.columns):
                if not c.computed:
                    continue
                if a == "":
                    put("Isochron", row, j, "")
                    continue
                hits = res_t.find(analysis=str(a))
                put("Isochron", row, j, res_t.get(hits[0], c.quantity) if hits else "#N/A")
    for (top, left), (_f, srow) in ellipse_formulas().items():
        pt = sheet_block(work, "Isochron", srow, 0, srow, len(ISOCHRON.columns) - 1)[0]
        vals: Any = ""
        if pt[0] != "":
            vals = run(lambda pt=pt, srow=srow: _ellipse(pt, srow))
        put_outline(top, left, vals)
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        col = ISOCHRON_SUMMARY_COL + 1 + k
        treat = sheet_block(work, "Isochron", ISOCHRON_TREATMENT_ROW, col, ISOCHRON_TREATMENT_ROW, col)[0][0]
        sel = _block(work, isochron_selection_ref(system))
        if not any(r[0] != "" for r in sel[1:]):
            continue
        if isinstance(treat, SpecialCell):
            fit: Any = run(lambda t=treat, col=col: _raise(CellError(
                "Isochron", ISOCHRON_TREATMENT_ROW, col_letter(col), "Scatter treatment", t.problem())))
        else:
            fit = run(lambda s=system, t=treat, sel=sel: _isochron(
                str(s).strip(), str(t or "").strip().lower(), sel, results, book.rows["Constants"]))
        for q_i, (q, _l, _u) in enumerate(ISOCHRON_QUANTITIES):
            v = fit if isinstance(fit, str) else run(lambda q=q, fit=fit: _isochron_cell(q, fit))
            put("Isochron", ISOCHRON_FIRST_Q_ROW + q_i, col, v)
    qrow = {name: ISOCHRON_FIRST_Q_ROW + i for i, (name, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}
    for (top, left), (_f, srow, system) in deviation_formulas().items():
        pt = sheet_block(work, "Isochron", srow, 0, srow, len(ISOCHRON.columns) - 1)[0]
        col = ISOCHRON_SUMMARY_COL + 1 + ISOCHRON_SYSTEMS.index(system)
        line = [cells.get(("Isochron", qrow[q], col), "") for q in ("slope", "initial")]
        vals = "" if pt[0] == "" else run(lambda pt=pt, srow=srow, line=line: _deviation(pt, srow, line))
        put_outline(top, left, vals)
    _evaluate_groups(work, book.rows["Samples"], results, book.rows["Constants"], put, run, warnings)
    return Evaluation(cells, tuple(errors), tuple(warnings))


def _label(v: Any) -> str:
    """A cell typed as a name (a group), as the cell functions receive it: numbers as ``%g``, trimmed."""
    return (f"{v:g}" if isinstance(v, float) else str(v)).strip()


def _evaluate_groups(work: Mapping[str, Sequence[Sequence[Cell]]], samples: Rows, results: Rows, constants: Rows,
                     put: Callable[[str, int, int, Any], None], run: Callable[[Callable[[], Any]], Any],
                     warnings: List[str]) -> None:
    """The Groups sheet's computed cells as Calc computes them (the batch path's part of :func:`evaluate`)."""
    groups = sheet_block(work, "Groups", KEY_ROW, 0, GROUPS.last_row, GROUPS.input_width - 1)
    tab = Table.from_range(GROUPS, groups)
    below = sheet_block(work, "Groups", GROUPS.last_row + 1, 0, GROUPS.last_row + 1, GROUPS.input_width - 1)[0]
    if any(v != "" for v in below):
        run(lambda: _raise(CellError("Groups", GROUPS.last_row + 1, None, "", f"a group below the table's "
                                     f"{GROUPS.capacity} rows (rows {FIRST_ROW}-{GROUPS.last_row}) is not fitted: "
                                     "move it into the table")))
    fits = GroupFits(samples, results, constants)
    for i in range(len(tab.rows)):
        g = tab.get(i, "group")
        for j, c in enumerate(GROUPS.columns):
            if not c.computed:
                continue
            if g == "":
                v: Any = ""
            elif isinstance(g, SpecialCell):
                v = run(lambda i=i: tab.text(i, "group"))
            else:
                t = tab.get(i, "treatment")
                if isinstance(t, SpecialCell):
                    v = run(lambda i=i: tab.text(i, "treatment"))
                else:
                    v = run(lambda c=c, g=g, t=t: fits.value(c.quantity, _label(g), t))
            put("Groups", FIRST_ROW + i, j, v)
    unlisted = run(lambda: unlisted_groups(groups, samples))
    put(*GROUP_UNLISTED_CELL, unlisted)
    if unlisted:
        warnings.append(f"Groups!A{GROUP_UNLISTED_CELL[1]}: {unlisted[len(MARKER):]}")
    typed = sheet_block(work, "Groups", GROUP_CHART_ROW, 1, GROUP_CHART_ROW, 1)[0][0]
    first = tab.get(0, "group") if tab.rows else ""
    drawn = _label(typed) if typed != "" else ("" if first == "" else _label(first))
    put("Groups", GROUP_CHART_ROW, 2, drawn)

    def put_array(top: int, left: int, width: int, rows: Any, n: int) -> None:
        for r in range(n):
            for k in range(width):
                if not isinstance(rows, str):
                    v = rows[r][k]
                else:
                    v = rows if (r == 0 and k == 0) else "#N/A"
                put("Groups", top + r, left + k, v)

    size = run(lambda: fits.size(drawn)) if drawn != "" else 0
    if isinstance(size, int) and size > GROUP_POINTS_CAP:
        # a group of any size is fitted (above); only its point list and charts have fixed rows
        why = (MARKER + f"group {shown(drawn)} has {size:,} rows: the point list and charts hold {GROUP_POINTS_CAP}, "
               f"so it is not drawn (its fit on the Groups table uses all {size:,}); type a group of at most "
               f"{GROUP_POINTS_CAP} rows in B{GROUP_CHART_ROW} to draw it")
        warnings.append(f"Groups!A{GROUP_POINTS_TOP}: {why[len(MARKER):]}")
        for col, width in ((0, len(GROUP_POINT_COLUMNS)), (GROUP_ELLIPSE_COL, 2), (GROUP_DEVIATION_COL, 2)):
            put_array(GROUP_POINTS_TOP, col, width, why, GROUP_POINTS_CAP if col == 0 else GROUP_OUTLINE_ROWS)
        return
    put_array(GROUP_POINTS_TOP, 0, len(GROUP_POINT_COLUMNS),
              run(lambda: group_points(drawn, samples, results)), GROUP_POINTS_CAP)
    for kind, col in (("ellipse", GROUP_ELLIPSE_COL), ("deviation", GROUP_DEVIATION_COL)):
        put_array(GROUP_POINTS_TOP, col, 2, run(lambda kind=kind: group_outlines(kind, drawn, groups, samples,
                                                                                 results, constants)),
                  GROUP_OUTLINE_ROWS)


def _check_standard_runs(std_t: Table, run: Callable[[Callable[[], Any]], Any]) -> None:
    """A run label given twice for one material, ratio and session is a problem at its second row
    (the same run would count twice in the session factor or a check's mean)."""
    seen: Dict[Tuple[str, ...], int] = {}
    for i in range(len(std_t.rows)):
        label = std_t.get(i, "run")
        if not std_t.filled(i) or label == "" or isinstance(label, SpecialCell):
            continue
        key = tuple(_norm(std_t.get(i, k)) for k in ("session", "material", "ratio")) + (_norm(label),)
        if key in seen:
            run(lambda i=i, first=seen[key], label=label: _raise(std_t.error(
                i, "run", f"run {shown(label)} of {shown(std_t.get(i, 'material'))} is listed twice in session "
                          f"{shown(std_t.get(i, 'session'))} (first on row {first}): list each run once")))
        else:
            seen[key] = std_t.first_row + i


def _check_isochron_extent(work: Mapping[str, Sequence[Sequence[Cell]]],
                           run: Callable[[Callable[[], Any]], Any]) -> None:
    """Analysis IDs or Use flags typed below the last selection block are reported, never ignored."""
    g = work.get("Isochron", ())
    bottom = max(last for _first, last in ISOCHRON_BLOCK.values())
    blocks = ", ".join(f"{s} rows {a}-{b}" for s, (a, b) in ISOCHRON_BLOCK.items())
    per = min(b - a + 1 for a, b in ISOCHRON_BLOCK.values())
    for r in range(bottom + 1, len(g) + 1):
        line = g[r - 1]
        for j in (0, 1):
            if j < len(line) and line[j] != "":
                c = ISOCHRON.columns[j]
                run(lambda r=r, j=j, c=c, v=line[j]: _raise(CellError(
                    "Isochron", r, col_letter(j), c.header,
                    f"{shown(v)} is below the selection blocks ({blocks}): the Isochron sheet selects "
                    f"{per} analyses per system; move it into its system's block")))
                return
