"""The batch path: reduce a filled RatioDesk workbook without LibreOffice.

``ratiodesk reduce BOOK.xlsx|BOOK.ods -o DIR`` reads the workbook (openpyxl or the ODS reader in
:mod:`reduction.workbook`), evaluates the template definition with the engine — the very
functions the grid's cells call — and writes ``DIR/results.xlsx`` (values and a provenance sheet)
and ``DIR/report.pdf``. ``ratiodesk demo`` writes the invented demo workbook first and reduces it
into ``out/demo/``.

Bad input stops the run with exit status 1 and one line per problem naming the sheet, row and
column; the input workbook is never written to.
"""
from __future__ import annotations

import argparse
import datetime as _dt
import hashlib
import os
import platform
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Dict, List, Mapping, Optional, Sequence, Tuple

from .. import __version__
from .._validate import as_count
from ..errors import RatioDeskError
from .evaluate import Evaluation, evaluate, sheet_block, table_extent
from .files import check_sheets, read_workbook
from .formulas import formula_drift
from .layout import build_layout, fill_values
from .provenance import PROVENANCE_HEADER, provenance_constant_rows
from .sheets import (
    GROUP_CHART_ROW,
    GROUPS,
    ISOCHRON,
    ISOCHRON_BLOCK,
    ISOCHRON_FIRST_Q_ROW,
    ISOCHRON_QUANTITIES,
    ISOCHRON_SUMMARY_COL,
    ISOCHRON_SYSTEMS,
    ISOCHRON_TREATMENT_ROW,
    RESULTS,
    SHEET_BY_NAME,
    STANDARDS,
)
from .values import FIRST_ROW, KEY_ROW, MARKER, FormulaCell
from .xlsx import WorkbookData, write_xlsx

__all__ = ["BatchError", "ReduceOutcome", "add_arguments_demo", "add_arguments_reduce", "reduce_workbook",
           "run_demo", "run_reduce", "tables_from_grid", "write_demo_workbook"]


#: Problems a BatchError lists line by line (the count of the rest is stated).
LISTED_PROBLEMS = 100


class BatchError(RatioDeskError):
    """The workbook has problems; ``problems`` lists them (sheet, row and column named in each).

    The message lists the first :data:`LISTED_PROBLEMS` and states how many more there are.
    """

    def __init__(self, path: str, problems: Sequence[str]) -> None:
        self.problems = tuple(problems)
        head = f"{path}: {len(problems)} problem(s); nothing was written"
        shown_ = problems[:LISTED_PROBLEMS]
        rest = len(problems) - len(shown_)
        tail = f"\n  … and {rest} more problem(s) (fix those above first)" if rest else ""
        super().__init__(head + "".join(f"\n  {p}" for p in shown_) + tail)


@dataclass(frozen=True)
class ReduceOutcome:
    results_xlsx: Path
    report_pdf: Path
    evaluation: Evaluation
    warnings: Tuple[str, ...]
    #: the name typed on each filled Groups row (sheet row -> name), for the summary
    group_names: Mapping[int, str] = field(default_factory=dict)


def tables_from_grid(grid: Mapping[str, Sequence[Sequence[Any]]]) -> Tuple[Dict[str, List[Dict[str, Any]]],
                                                                           List[Dict[str, Any]],
                                                                           Dict[str, List[Tuple[Any, Any]]],
                                                                           Dict[str, Any]]:
    """Input tables of a read workbook as row dicts (by the key row), for rewriting it as values."""
    tables: Dict[str, List[Dict[str, Any]]] = {}
    for name in ("Spikes", "Standards", "Samples", "Measured", "Constants", "Cycles", "Groups"):
        sh = SHEET_BY_NAME[name]
        last = sh.last_row if name == "Groups" else table_extent(grid, sh)   # below Groups: its chart area
        block = sheet_block(grid, name, KEY_ROW, 0, last, sh.input_width - 1)
        keys = [str(k) for k in block[0]]
        rows = []
        for r in block[1:]:
            rows.append({k: _shown_value(v) for k, v in zip(keys, r) if k})
        while rows and all(v == "" for v in rows[-1].values()):
            rows.pop()
        tables[name] = rows
    selection: Dict[str, List[Tuple[Any, Any]]] = {}
    for system, (first, last) in ISOCHRON_BLOCK.items():
        block = sheet_block(grid, "Isochron", first, 0, last, 1)
        selection[system] = [(_shown_value(a), _shown_value(u)) for a, u in block]
    treatments = {}
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        col = ISOCHRON_SUMMARY_COL + 1 + k
        treatments[system] = sheet_block(grid, "Isochron", ISOCHRON_TREATMENT_ROW, col, ISOCHRON_TREATMENT_ROW,
                                         col)[0][0] or "analytical"
    constants = tables.pop("Constants")
    return tables, constants, selection, treatments


def _shown_value(v: Any) -> Any:
    """A cell as results.xlsx repeats it: a formula (one the reduction does not read, such as a note)
    by the value the file stored for it, else by its text, written as text."""
    if isinstance(v, FormulaCell):
        return str.__str__(v) if v.cached is None else v.cached
    return v


def _provenance(data: WorkbookData, constants: Sequence[Mapping[str, Any]], spikes: Sequence[Mapping[str, Any]],
                now: str, drift: Sequence[str]) -> List[Tuple[Any, ...]]:
    import numpy

    digest = hashlib.sha256(Path(data.path).read_bytes()).hexdigest()
    rows: List[Tuple[Any, ...]] = [
        ("Provenance", "", "", "", "", ""),
        ("Input workbook", os.path.basename(data.path), "", "", "", ""),
        ("Input SHA-256", digest, "", "", "", ""),
        ("Software", f"RatioDesk {__version__} (batch path, engine evaluated without LibreOffice)", "", "", "", ""),
        ("Python / numpy", f"{platform.python_version()} / {numpy.__version__}", "", "", "", ""),
        ("Date (UTC)", now, "", "", "", ""),
        ("Formulas edited by hand", f"{len(drift)} cell(s)" if drift else "none", "", "", "", ""),
        ("", "", "", "", "", ""),
        ("Reference values (Constants sheet)", "", "", "", "", ""),
        PROVENANCE_HEADER,
    ]
    rows += provenance_constant_rows(constants)
    rows += [("", "", "", "", "", ""), ("Spike calibrations (Spikes sheet)", "", "", "", "", ""),
             ("Spike", "Element", "Calibrated on", "Spike isotope", "µmol/g", "1σ (abs, µmol/g)")]
    for s in spikes:
        rows.append(tuple(s.get(k, "") for k in ("spike", "element", "calibrated", "spike_isotope", "conc_umol_g",
                                                  "conc_sigma_1s")))
    rows += [("", "", "", "", "", ""), ("Caution", "Results depend on the spike calibrations and the "
                                                   "reference-material accepted values above.", "", "", "", "")]
    for d in drift:
        rows.append(("Edited formula", d, "", "", "", ""))
    return rows


def _report_data(data: WorkbookData, ev: Evaluation, tables: Mapping[str, Any], constants: Sequence[Mapping],
                 selection: Mapping[str, Sequence[Tuple[Any, Any]]], treatments: Mapping[str, Any],
                 now: str) -> Any:
    from .report import IsochronPanel, ReportData, _axis_labels

    def cell(sheet: str, row: int, col: int) -> Any:
        return ev.cells.get((sheet, row, col), "")

    rows = []
    last = max((r for (sheet, r, _c) in ev.cells if sheet == "Results"), default=RESULTS.last_row)
    for row in range(FIRST_ROW, last + 1):        # every reduced row, below the template's rows too
        if cell("Results", row, 0) in ("", None):
            continue
        rows.append({c.key: cell("Results", row, j) for j, c in enumerate(RESULTS.columns)})
    panels = []
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        col = ISOCHRON_SUMMARY_COL + 1 + k
        summary = {q: cell("Isochron", ISOCHRON_FIRST_Q_ROW + i, col) for i, (q, _l, _u) in
                   enumerate(ISOCHRON_QUANTITIES)}
        first, last = ISOCHRON_BLOCK[system]
        pts = []
        for row in range(first, last + 1):
            a = sheet_block(data.grid, "Isochron", row, 0, row, 1)[0]
            if a[0] == "":
                continue
            vals = [cell("Isochron", row, ISOCHRON.col_index(key)) for key in ("x", "x_1s", "y", "y_1s", "rho")]
            if not all(isinstance(v, float) for v in vals):
                continue
            pts.append((str(a[0]), *vals, a[1] == 1.0))
        if not pts:
            continue
        xl, yl = _axis_labels(system)
        panels.append(IsochronPanel(system, xl, yl, tuple(pts), summary, str(treatments.get(system, ""))))
    panels += _group_panels(data, ev)
    const_rows = tuple(provenance_constant_rows(constants))
    spike_rows = tuple(tuple(s.get(k, "") for k in ("spike", "element", "calibrated", "spike_isotope", "conc_umol_g",
                                                     "conc_sigma_1s")) for s in tables.get("Spikes", ()))
    name = os.path.basename(data.path)
    return ReportData(name, name, __version__, now, tuple(rows), tuple(panels), const_rows, spike_rows,
                      tuple(ev.warnings), _standards_summary(data.grid, ev))


def _group_panels(data: WorkbookData, ev: Evaluation) -> List[Any]:
    """One report panel per fitted row of the Groups sheet (its points from the Samples rows of the group)."""
    from .evaluate import table_extent
    from .isochrons import group_points
    from .report import IsochronPanel, _axis_labels
    from .sheets import SAMPLES

    sam = sheet_block(data.grid, "Samples", KEY_ROW, 0, table_extent(data.grid, SAMPLES), SAMPLES.input_width - 1)
    last = max((r for (sheet, r, _c) in ev.cells if sheet == "Results"), default=RESULTS.last_row)
    res = (tuple(c.key for c in RESULTS.columns),) + tuple(
        tuple(ev.cells.get(("Results", r, j), "") for j in range(len(RESULTS.columns))) for r in range(FIRST_ROW,
                                                                                                    last + 1))
    typed = sheet_block(data.grid, "Groups", FIRST_ROW, 0, GROUPS.last_row, 1)
    col = {c.key: j for j, c in enumerate(GROUPS.columns)}
    panels = []
    for i, (name, treatment) in enumerate(typed):
        row = FIRST_ROW + i
        system = ev.cells.get(("Groups", row, col["system"]), "")
        if name == "" or not isinstance(ev.cells.get(("Groups", row, col["age"])), float):
            continue
        label = f"{name:g}" if isinstance(name, float) else str(name).strip()
        summary = {q: ev.cells.get(("Groups", row, col[q]), "") for q, _l, _u in ISOCHRON_QUANTITIES}
        pts = tuple((str(a), *vals, use == 1.0) for a, use, *vals in group_points(label, sam, res, cap=None)
                    if a != "" and all(isinstance(v, float) for v in vals))
        xl, yl = _axis_labels(str(system))
        panels.append(IsochronPanel(str(system), xl, yl, pts, summary, str(treatment or "analytical"),
                                    name=f"Group {label} ({system})"))
    return panels


def _standards_summary(grid: Mapping[str, Any], ev: Evaluation) -> Tuple[Tuple[Any, ...], ...]:
    """One row per (session, ratio, material) of the Standards sheet with its computed check values."""
    col = {c.key: j for j, c in enumerate(STANDARDS.columns)}
    seen: Dict[Tuple[str, ...], List[Any]] = {}
    for row in range(FIRST_ROW, table_extent(grid, STANDARDS) + 1):
        typed = sheet_block(grid, "Standards", row, 0, row, STANDARDS.input_width - 1)[0]
        if typed[col["session"]] in ("", None):
            continue
        key = tuple(str(typed[col[k]]) for k in ("session", "ratio", "material"))
        if key in seen:
            seen[key][4] += 1
            continue
        role = ev.cells.get(("Standards", row, col["role_used"]), "")
        vals = [ev.cells.get(("Standards", row, col[k]), "") for k in ("check_mean", "accepted", "dev_ppm",
                                                                       "dev_eps", "z")]
        seen[key] = [*key, role, 1, *vals]
    return tuple(tuple(v) for v in seen.values())


def _monte_carlo(ev_grid: Mapping[str, Any], draws: int, progress: Callable[[str], None]) -> List[Tuple[Any, ...]]:
    """Monte Carlo σ of every analysis (seeded), reported beside the linear σ."""
    from .evaluate import BookTables

    book = BookTables(ev_grid)
    ids = [r[0] for r in book.rows["Samples"][1:] if r and r[0] != ""]
    out: List[Tuple[Any, ...]] = [("Analysis", "P/D 1σ linear", "P/D 1σ Monte Carlo", "D ratio 1σ linear",
                                   "D ratio 1σ Monte Carlo", "ρ linear", "ρ Monte Carlo", "draws")]
    for k, a in enumerate(ids, start=1):
        progress(f"Monte Carlo {k}/{len(ids)}: {a} ({draws} draws)")
        res = book.analysis(f"{a:g}" if isinstance(a, float) else str(a).strip(), mc_draws=draws)[0]
        mc = res.mc_sigma_1s or {}
        out.append((a, res.parent_ratio_sigma_1s, mc.get("parent_ratio", ""), res.daughter_ratio_sigma_1s,
                    mc.get("daughter_ratio", ""), res.rho, res.mc_rho if res.mc_rho is not None else "", draws))
    return out


#: The sheet of results.xlsx that lists every warning of the reduction (the report prints the first ones).
WARNINGS_SHEET = "Warnings"
#: Warnings the command prints; the rest are counted (all are on the Warnings sheet).
PRINTED_WARNINGS = 20


def reduce_workbook(path: Any, out_dir: Any, *, mc_draws: int = 0, report_rows: Optional[int] = None,
                    progress: Callable[[str], None] = lambda s: None) -> ReduceOutcome:
    """Reduce one workbook; write results.xlsx and report.pdf into ``out_dir``.

    ``report_rows`` bounds the rows of the report's per-analysis tables (default
    :data:`~reduction.workbook.report.REPORT_ROWS`, 0 = all); results.xlsx always holds every analysis.
    """
    from .report import REPORT_ROWS, write_report

    max_rows = REPORT_ROWS if report_rows is None else as_count("report_rows", report_rows, 0, 10 ** 9)

    t0 = time.perf_counter()
    data = read_workbook(path)
    check_sheets(data)
    drift = formula_drift(data.formulas)
    progress(f"read {data.path}: {sum(len(g) for g in data.grid.values())} rows on {len(data.grid)} sheets "
             f"({time.perf_counter() - t0:.1f} s)")
    t1 = time.perf_counter()
    ev = evaluate(data.grid, strict=False)
    if ev.errors:
        raise BatchError(data.path, [str(e) for e in ev.errors])
    n = sum(1 for (sheet, _r, c), v in ev.cells.items() if sheet == "Results" and c == 0 and v not in ("", None))
    progress(f"reduced {n} analyses ({time.perf_counter() - t1:.1f} s)")
    tables, constants, selection, treatments = tables_from_grid(data.grid)
    now = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    lay = build_layout(tables, constants, selection)
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        lay["Isochron"][(ISOCHRON_TREATMENT_ROW, ISOCHRON_SUMMARY_COL + 1 + k)].value = treatments[system]
    drawn = sheet_block(data.grid, "Groups", GROUP_CHART_ROW, 1, GROUP_CHART_ROW, 1)[0][0]
    lay["Groups"][(GROUP_CHART_ROW, 1)].value = _shown_value(drawn)
    fill_values(lay, ev)
    extra = {"Provenance": _provenance(data, constants, tables.get("Spikes", ()), now, drift)}
    warned = tuple(drift) + tuple(ev.warnings)
    if warned:
        extra[WARNINGS_SHEET] = [("Warning (where: what)",)] + [(w,) for w in warned]
    if mc_draws:
        extra["Monte Carlo"] = _monte_carlo(data.grid, mc_draws, progress)
    results = out / "results.xlsx"
    write_xlsx(lay, results, values_only=True, extra_sheets=extra)
    report = out / "report.pdf"
    progress("drawing the report")
    t2 = time.perf_counter()
    write_report(_report_data(data, ev, tables, constants, selection, treatments, now), report, max_rows=max_rows)
    if 0 < max_rows < n:
        progress(f"the report's per-analysis tables list the first {max_rows:,} of {n:,} analyses (--report-rows 0 "
                 "lists all); results.xlsx holds every analysis")
    progress(f"report drawn ({time.perf_counter() - t2:.1f} s; {time.perf_counter() - t0:.1f} s in all)")
    names = {FIRST_ROW + i: str(_shown_value(r[0])).strip()
             for i, r in enumerate(sheet_block(data.grid, "Groups", FIRST_ROW, 0, GROUPS.last_row, 0)) if r[0] != ""}
    return ReduceOutcome(results, report, ev, tuple(drift) + tuple(ev.warnings), names)


# --------------------------------------------------------------------------------------------
# command line
# --------------------------------------------------------------------------------------------
def add_arguments_reduce(p: argparse.ArgumentParser) -> None:
    p.add_argument("workbook", help="filled RatioDesk workbook (.xlsx or .ods)")
    p.add_argument("-o", "--out", default="out/reduce", help="output directory (default: out/reduce)")
    p.add_argument("--mc", type=int, default=0, metavar="N",
                   help="also run a seeded Monte Carlo with N draws per analysis (progress is shown)")
    p.add_argument("--report-rows", type=int, default=None, metavar="N",
                   help="rows of each per-analysis table in report.pdf (default 260; 0 = every analysis); "
                        "results.xlsx always holds every analysis")


def _progress(msg: str) -> None:
    print(msg, file=sys.stderr, flush=True)


def _print_isochron(name: str, q: Mapping[str, Any]) -> None:
    """One line of the reduce summary for an isochron with an age (and its note, if any)."""
    age, a2, tot, mswd = (q.get(k) for k in ("age", "age_2s", "age_2s_total", "mswd"))
    if not isinstance(age, float):
        return
    m = f"{mswd:.2f}" if isinstance(mswd, float) else str(mswd)
    t = f"± {tot:.2f} Ma (2σ, with decay constant and spike calibration)" if isinstance(tot, float) else \
        f"total: {tot}"
    lo, hi, msg = (q.get(k) for k in ("mswd_low", "mswd_high", "message"))
    rng = f" (acceptance range {lo:.2f}-{hi:.2f})" if isinstance(lo, float) and isinstance(hi, float) else ""
    print(f"  {name}: {age:.2f} ± {a2:.2f} Ma (2σ, slope only), {t}, MSWD {m}{rng}")
    if isinstance(msg, str) and msg not in ("", "ok"):
        print(f"    note: {msg}")


def _summarise(outcome: ReduceOutcome) -> None:
    ev = outcome.evaluation
    qrow = {q: ISOCHRON_FIRST_Q_ROW + i for i, (q, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        col = ISOCHRON_SUMMARY_COL + 1 + k
        _print_isochron(f"{system} isochron", {q: ev.cells.get(("Isochron", r, col)) for q, r in qrow.items()})
    gcol = {c.key: j for j, c in enumerate(GROUPS.columns)}
    for row in range(FIRST_ROW, GROUPS.last_row + 1):
        got = {q: ev.cells.get(("Groups", row, j)) for q, j in gcol.items()}
        if isinstance(got.get("age"), float):
            name = outcome.group_names.get(row, f"Groups row {row}")
            _print_isochron(f"group {name} ({got['system']})", got)
    checks = sorted((row, v) for (sheet, row, col), v in ev.cells.items()
                    if sheet == "Results" and col == RESULTS.col_index("check") and isinstance(v, str)
                    and v not in ("", "ok"))
    if checks:
        print(f"  {len(checks)} analyses have Check warnings (Results column {RESULTS.letter('check')}), "
              f"e.g. row {checks[0][0]}: {checks[0][1].lstrip(MARKER)}")
    # the workbook-wide warnings first: the per-analysis Check warnings are counted above
    ordered = sorted(outcome.warnings, key=lambda w: w.startswith("Results!"))
    for w in ordered[:PRINTED_WARNINGS]:
        print(f"  warning: {w}")
    if len(ordered) > PRINTED_WARNINGS:
        print(f"  … and {len(ordered) - PRINTED_WARNINGS:,} more warnings: every one is on the "
              f"{WARNINGS_SHEET} sheet of {outcome.results_xlsx.name}")
    print(f"wrote {outcome.results_xlsx}")
    print(f"wrote {outcome.report_pdf}")


def run_reduce(args: argparse.Namespace) -> int:
    outcome = reduce_workbook(args.workbook, args.out, mc_draws=args.mc, report_rows=args.report_rows,
                              progress=_progress)
    _summarise(outcome)
    return 0


def add_arguments_demo(p: argparse.ArgumentParser) -> None:
    p.add_argument("-o", "--out", default="out/demo", help="output directory (default: out/demo)")
    p.add_argument("--mc", type=int, default=0, metavar="N", help="also run a seeded Monte Carlo with N draws")


def write_demo_workbook(path: Any) -> Path:
    """Write the invented demo workbook (.xlsx) with cached values computed by the engine."""
    from .demo import demo_layout

    lay = demo_layout()
    write_xlsx(lay, path)
    return Path(path)


def run_demo(args: argparse.Namespace) -> int:
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    book = write_demo_workbook(out / "demo-workbook.xlsx")
    print(f"wrote {book} (invented demo scenario, forward-modelled)")
    outcome = reduce_workbook(book, out, mc_draws=args.mc, progress=_progress)
    _summarise(outcome)
    from .demo import TRUE_AGES_MA

    print("  true ages of the invented scenario: " + ", ".join(f"{k} {v:.1f} Ma" for k, v in TRUE_AGES_MA.items()))
    return 0

