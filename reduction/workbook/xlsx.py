"""The .xlsx writer and reader (openpyxl), with the charts of the Isochron and Groups sheets."""
from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any, Callable, Dict, List, Mapping, Optional, Sequence, Tuple

from ..errors import InputError
from .choices import _xlsx_validations
from .evaluate import MAX_SHEET_ROW, too_many_rows
from .formulas import deviation_formulas, ellipse_formulas, expected_formulas, selection_rows
from .layout import _FILL, ABOUT_SHEET, SHEET_ORDER, WIDTHS, Layout
from .sheets import (
    ELLIPSE_COL0,
    ELLIPSE_POINTS,
    GROUP_CHART_ROW,
    GROUP_DEVIATION_COL,
    GROUP_ELLIPSE_COL,
    GROUP_OUTLINE_ROWS,
    GROUP_POINTS_TOP,
    ISOCHRON_FIRST_Q_ROW,
    ISOCHRON_QUANTITIES,
    ISOCHRON_SUMMARY_COL,
    ISOCHRON_SYSTEMS,
    SHEET_BY_NAME,
    col_letter,
)
from .tables import _clean, axis_titles
from .values import FIRST_ROW, Cell, LogicalCell, formula_cell, shown


# --------------------------------------------------------------------------------------------
# .xlsx writer and reader (openpyxl)
# --------------------------------------------------------------------------------------------
def write_xlsx(lay: Layout, path: Any, *, values_only: bool = False, protect: bool = True,
               extra_sheets: Optional[Mapping[str, Sequence[Sequence[Any]]]] = None) -> None:
    """Write a layout as .xlsx: formulas (with cached values) or, with ``values_only``, values."""
    from openpyxl import Workbook
    from openpyxl.styles import Alignment, Font, PatternFill, Protection
    from openpyxl.worksheet.formula import ArrayFormula

    wb = Workbook()
    wb.remove(wb.active)
    fonts = {"title": Font(bold=True, size=13), "note": Font(italic=True, color="555555"),
             "header": Font(bold=True), "key": Font(size=7, color="888888"), "label": Font(bold=True)}
    # one style object each, shared by every cell (openpyxl compares a new object with every stored one)
    fills = {k: PatternFill("solid", fgColor=v) for k, v in _FILL.items()}
    wrap = Alignment(wrap_text=True, vertical="top")
    unlocked = Protection(locked=False)
    cached: Dict[str, Dict[str, Any]] = {}
    for name in [s for s in SHEET_ORDER if s in lay] + [s for s in lay if s not in SHEET_ORDER]:
        ws = wb.create_sheet(name)
        for j, w in WIDTHS.get(name, {}).items():
            ws.column_dimensions[col_letter(j)].width = w
        for (r, c), spec in sorted(lay[name].items()):
            cell = ws.cell(row=r, column=c + 1)
            if spec.formula is not None and not values_only:
                text = spec.formula.render(name, "xlsx")
                if spec.array:
                    ref = f"{col_letter(c)}{r}:{col_letter(c + spec.array[1] - 1)}{r + spec.array[0] - 1}"
                    cell.value = ArrayFormula(ref, text)
                else:
                    cell.value = text
                cached.setdefault(name, {})[f"{col_letter(c)}{r}"] = spec.value
            else:
                _xlsx_value(cell, spec.value, name)
            if spec.style in fonts:
                cell.font = fonts[spec.style]
            if spec.style in fills:
                cell.fill = fills[spec.style]
            if spec.style == "header":
                cell.alignment = wrap
            if spec.number_format != "General":
                cell.number_format = spec.number_format
            if spec.style == "input":
                cell.protection = unlocked
        if protect and not values_only and name not in (ABOUT_SHEET,):
            ws.protection.sheet = True
            ws.protection.formatColumns = False
            ws.protection.formatRows = False
        ws.freeze_panes = None if name == ABOUT_SHEET else f"A{FIRST_ROW}"
        if name in ("Isochron", "Groups"):
            _xlsx_charts(ws)
        if not values_only:
            _xlsx_validations(ws, name)
    for name, rows in (extra_sheets or {}).items():
        ws = wb.create_sheet(name)
        for i, r in enumerate(rows, start=1):
            for j, v in enumerate(r, start=1):
                _xlsx_value(ws.cell(row=i, column=j), v, name)
        ws.column_dimensions["A"].width = 32
        ws.column_dimensions["B"].width = 60
        for cell in ws[1]:
            cell.font = Font(bold=True)
    wb.save(path)
    if cached and not values_only:
        _xlsx_add_cached_values(path, wb.sheetnames, cached)


#: Characters XML 1.0 cannot carry (an .xlsx or .ods cell cannot hold them).
_XML_ILLEGAL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")
#: The longest text an .xlsx cell holds (Excel's limit; openpyxl would cut a longer one).
XLSX_MAX_TEXT = 32767


def check_text(v: str, sheet: str, where: str, limit: Optional[int] = None) -> str:
    """A text to write into a cell, as plain ``str``; refused (never altered) when a file cannot hold it.

    Raises :class:`InputError` naming the sheet and cell for characters XML cannot carry or, with
    ``limit``, a text longer than a cell holds.
    """
    text = str.__str__(v)
    bad = _XML_ILLEGAL.search(text)
    if bad:
        raise InputError(f"{sheet}!{where}", f"the text {shown(text)} holds the control character "
                         f"U+{ord(bad.group()):04X}, which a spreadsheet file cannot store: remove it")
    if limit is not None and len(text) > limit:
        raise InputError(f"{sheet}!{where}", f"the text {shown(text)} has {len(text):,} characters; a cell of "
                         f"this file format holds at most {limit:,}: shorten it")
    return text


_XSTRING_ESCAPE = re.compile(r"_x[0-9A-Fa-f]{4}_|\r")
_XSTRING_CODE = re.compile(r"_x([0-9A-Fa-f]{4})_")


def xlsx_escape(text: str) -> str:
    """A text as an .xlsx string stores it (ECMA-376 part 1, simple type ST_Xstring): a carriage return
    (which XML would turn into a line feed) as ``_x000D_``, a literal ``_xHHHH_`` with its ``_``
    escaped as ``_x005F_``, so :func:`xlsx_unescape` gives back the very text."""
    return _XSTRING_ESCAPE.sub(lambda m: "_x000D_" if m.group() == "\r" else "_x005F_" + m.group()[1:], text)


def xlsx_unescape(text: str) -> str:
    """The text an .xlsx string stands for (``_x000D_`` → carriage return, ``_x005F_`` → ``_``), as a
    spreadsheet program shows it (ST_Xstring, ECMA-376 part 1)."""
    if "_x" not in text:
        return text
    return _XSTRING_CODE.sub(lambda m: chr(int(m.group(1), 16)), text)


def _xlsx_value(cell: Any, v: Any, sheet: str) -> None:
    """Write one value: text is always stored as text (``t="inlineStr"``), never as a formula or an error
    code, whatever it starts with (``=``, ``+``, ``-``, ``@``, ``#N/A``)."""
    if v is None or (isinstance(v, str) and v == ""):
        cell.value = None
    elif isinstance(v, LogicalCell):
        cell.value = str.__str__(v) == "TRUE"
    elif isinstance(v, str):
        cell.value = xlsx_escape(check_text(v, sheet, cell.coordinate, XLSX_MAX_TEXT))
        cell.data_type = "s"
    else:
        cell.value = v


@dataclass(frozen=True)
class ChartSpec:
    """One chart of the template, both file formats: an x-y chart of outline series, lines without markers.

    ``series`` holds (first column of the x, y pair, first row, last row) on ``sheet``; ``anchor`` is the
    (row, 0-based column) of the chart's top-left corner.
    """

    name: str
    title: str
    axes: Tuple[str, str]
    y_format: str
    sheet: str
    series: Tuple[Tuple[int, int, int], ...]
    anchor: Tuple[int, int]


def isochron_charts() -> List[ChartSpec]:
    """The template's charts: per system on the Isochron sheet the isochron at full scale (the ellipse outlines)
    and below it the deviation plot (the same ellipses as ppm from the fitted line), so garnet ellipses are
    visible; on the Groups sheet the same two for the group drawn (one stacked series each)."""
    sel = selection_rows()
    dev = {srow: left for (_t, left), (_f, srow, _s) in deviation_formulas().items()}
    ell = {srow: left for (_t, left), (_f, srow) in ellipse_formulas().items()}
    base = ISOCHRON_FIRST_Q_ROW + len(ISOCHRON_QUANTITIES) + 2
    last = FIRST_ROW + ELLIPSE_POINTS
    out = []
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        rows = [r for s_name, r in sel if s_name == system]
        xt, yt = axis_titles(system)
        out.append(ChartSpec(f"{system} isochron chart", f"{system} isochron — 95 % error ellipses", (xt, yt), "0.0000",
                             "Isochron", tuple((ell[r], FIRST_ROW, last) for r in rows),
                             (base + 40 * k, ISOCHRON_SUMMARY_COL)))
        out.append(ChartSpec(f"{system} deviation chart", f"{system} — deviation from the fitted line, 95 % ellipses",
                             (xt, f"{yt}: deviation (ppm)"), "0", "Isochron", tuple((dev[r], FIRST_ROW, last)
                                                                                  for r in rows),
                             (base + 40 * k + 20, ISOCHRON_SUMMARY_COL)))
    g_last = GROUP_POINTS_TOP + GROUP_OUTLINE_ROWS - 1
    axes = ("Parent/daughter ratio (147Sm/144Nd, 176Lu/177Hf or 87Rb/86Sr)",
            "Daughter ratio (143Nd/144Nd, 176Hf/177Hf or 87Sr/86Sr)")
    col = GROUP_DEVIATION_COL + 3
    out.append(ChartSpec("Group isochron chart", "Group drawn — isochron, 95 % error ellipses", axes, "0.0000",
                         "Groups", ((GROUP_ELLIPSE_COL, GROUP_POINTS_TOP, g_last),), (GROUP_CHART_ROW, col)))
    out.append(ChartSpec("Group deviation chart", "Group drawn — deviation from its fitted line, 95 % ellipses",
                         (axes[0], "Deviation of the daughter ratio (ppm)"), "0", "Groups",
                         ((GROUP_DEVIATION_COL, GROUP_POINTS_TOP, g_last),), (GROUP_CHART_ROW + 20, col)))
    return out


def _xlsx_charts(ws: Any) -> None:
    """The scatter charts of :func:`isochron_charts` on this sheet: outlines as lines, no markers; an empty
    row between two outlines of one series is a gap."""
    from openpyxl.chart import Reference, ScatterChart, Series

    for spec in isochron_charts():
        if spec.sheet != ws.title:
            continue
        ch = ScatterChart()
        ch.title = spec.title
        ch.style = 13
        ch.x_axis.title, ch.y_axis.title = spec.axes
        ch.legend = None
        ch.height, ch.width = 9.5, 16
        ch.display_blanks = "gap"
        for left, top, bottom in spec.series:
            xs = Reference(ws, min_col=left + 1, min_row=top, max_row=bottom)
            ys = Reference(ws, min_col=left + 2, min_row=top, max_row=bottom)
            series = Series(ys, xs)
            series.marker.symbol = "none"
            series.smooth = False
            ch.series.append(series)
        ch.x_axis.delete = False
        ch.y_axis.delete = False
        ch.x_axis.number_format = "0.00"
        ch.y_axis.number_format = spec.y_format
        ch.x_axis.majorGridlines = None
        row, col0 = spec.anchor
        ws.add_chart(ch, f"{col_letter(col0)}{row}")


def _xlsx_add_cached_values(path: Any, names: Sequence[str], cached: Mapping[str, Mapping[str, Any]]) -> None:
    """Store each formula's value in the file (openpyxl writes formulas without cached values).

    Viewers without the extension then show the numbers, as they would after LibreOffice saved it.
    """
    import zipfile
    from xml.sax.saxutils import escape

    src = str(path)
    with zipfile.ZipFile(src) as z:
        items = {n: z.read(n) for n in z.namelist()}
        infos = z.infolist()
    pat = re.compile(rb'<c r="([A-Z]+[0-9]+)"([^>]*)><f((?: [^>]*)?)>(.*?)</f><v\s*/?>(?:</v>)?</c>')
    for k, name in enumerate(names, start=1):
        if name not in cached:
            continue
        part = f"xl/worksheets/sheet{k}.xml"
        vals = cached[name]

        def sub(m: re.Match, vals: Mapping[str, Any] = vals) -> bytes:
            ref = m.group(1).decode()
            v = vals.get(ref, "")
            attrs = re.sub(rb'\s+t="[^"]*"', b"", m.group(2))
            if isinstance(v, float) and math.isfinite(v):
                return b'<c r="%s"%s><f%s>%s</f><v>%s</v></c>' % (m.group(1), attrs, m.group(3), m.group(4),
                                                                 repr(v).encode())
            text = escape("" if v is None else str(v)).encode()
            return b'<c r="%s"%s t="str"><f%s>%s</f><v>%s</v></c>' % (m.group(1), attrs, m.group(3), m.group(4),
                                                                     text)
        items[part] = pat.sub(sub, items[part])
    with zipfile.ZipFile(src, "w", zipfile.ZIP_DEFLATED) as z:
        for info in infos:
            z.writestr(info, items[info.filename])


@dataclass(frozen=True)
class WorkbookData:
    """What a reader returns: sheet grids of values and the formula text of formula cells."""

    grid: Dict[str, List[List[Cell]]]
    formulas: Dict[Tuple[str, int, int], str]
    path: str


def _reads(sheet: str) -> str:
    """How a reader treats a sheet: ``"table"`` (inputs, row limit) or ``"computed"`` (Results, whose
    cells are all recomputed, and sheets RatioDesk does not reduce, e.g. a Provenance sheet: read up
    to the row limit, rows below it are not needed)."""
    return "table" if sheet in SHEET_BY_NAME and sheet != "Results" else "computed"


class _GridBuilder:
    """Rows of one sheet as a reader finds them: empty rows are held back until a filled row follows (a
    sheet formatted to its last row costs nothing), and rows beyond :data:`MAX_SHEET_ROW` stop the
    reading with :func:`too_many_rows` (a table sheet) or end it (the recomputed Results sheet)."""

    def __init__(self, sheet: str, used_to: int = 0) -> None:
        self.sheet, self.mode, self.used_to = sheet, _reads(sheet), used_to
        self.rows: List[List[Cell]] = []
        self.pending = 0          # empty rows not yet appended
        self.filled = 0           # filled data rows so far
        self.done = self.mode == "skip"

    @property
    def next_row(self) -> int:
        return len(self.rows) + self.pending + 1

    def add(self, cells: List[Cell], repeat: int = 1) -> None:
        """Rows (``repeat`` copies of ``cells``, trailing empty cells already removed)."""
        if self.done:
            return
        if not cells:
            self.pending += repeat
            return
        first = self.next_row
        if first + repeat - 1 > MAX_SHEET_ROW:
            if self.mode == "computed":
                self.done = True
                return
            beyond = max(first, MAX_SHEET_ROW + 1)
            filled = self.filled + repeat - max(FIRST_ROW - first, 0)
            more = f" or more (the sheet's used range ends at row {self.used_to:,})" if self.used_to > beyond else \
                " or more"
            raise too_many_rows(self.sheet, filled, beyond, more)
        self.rows.extend([] for _ in range(self.pending))
        self.pending = 0
        self.rows.extend(list(cells) for _ in range(repeat))
        self.filled += max(0, first + repeat - max(first, FIRST_ROW))


def _xlsx_cell(cell: Any, formulas: Dict[Tuple[str, int, int], str], sheet: str, r: int, c: int) -> Cell:
    """One openpyxl cell: a formula (``data_type == "f"``) becomes a :class:`FormulaCell` and its text is
    kept for :func:`formula_drift`; a text cell is text whatever it starts with (``=``, ``+``, ``@`` …);
    a logical cell stays logical."""
    v = cell.value
    if getattr(cell, "data_type", None) == "f":
        text = str(v.text) if hasattr(v, "text") else str(v)   # an array formula carries its text
        if not text.startswith("="):
            text = "=" + text
        formulas[(sheet, r, c)] = text
        return formula_cell(text)
    if isinstance(v, str):
        return xlsx_unescape(v)
    return _clean(v)


def read_xlsx(path: Any) -> WorkbookData:
    """Read a RatioDesk .xlsx (openpyxl, read-only): input values, logical cells and formula text.

    Every row is read (the sheet's stored dimension is not trusted, so no row or column beyond it is
    lost); a table sheet with more than :data:`MAX_DATA_ROWS` filled data rows is refused.
    """
    import warnings

    from openpyxl import load_workbook

    with warnings.catch_warnings():
        # openpyxl warns about workbook features it does not keep (validation, extensions): values are read
        warnings.simplefilter("ignore")
        data = _read_xlsx(path, load_workbook)
        _xlsx_cached_values(path, data, load_workbook)
    return data


def _read_xlsx(path: Any, load_workbook: Callable[..., Any]) -> WorkbookData:
    wb = load_workbook(path, data_only=False, read_only=True)
    grid: Dict[str, List[List[Cell]]] = {}
    formulas: Dict[Tuple[str, int, int], str] = {}
    try:
        for ws in wb.worksheets:
            try:
                used_to = int(ws.max_row or 0)
            except (TypeError, ValueError):
                used_to = 0
            b = _GridBuilder(ws.title, used_to)
            if not b.done and hasattr(ws, "reset_dimensions"):
                ws.reset_dimensions()
            for r, row in enumerate(() if b.done else ws.iter_rows(min_row=1), start=1):
                out = [_xlsx_cell(cell, formulas, ws.title, r, c) for c, cell in enumerate(row)]
                while out and out[-1] == "":
                    out.pop()
                b.add(out)
                if b.done:
                    break
            grid[ws.title] = b.rows
    finally:
        wb.close()
    return WorkbookData(grid, formulas, str(path))


def _xlsx_cached_values(path: Any, data: WorkbookData, load_workbook: Callable[..., Any]) -> None:
    """The stored values of formulas typed into input cells (a second, values-only pass over the sheets
    that have any; the template's own formula cells need none), so that a formula showing nothing leaves
    its row empty (:func:`blank`)."""
    template = set(expected_formulas())
    where: Dict[str, List[Tuple[int, int]]] = {}
    for (sheet, r, c) in data.formulas:
        if (sheet, r, c) not in template and _reads(sheet) == "table" and not (sheet == "Isochron" and
                                                                                c >= ELLIPSE_COL0):
            where.setdefault(sheet, []).append((r, c))
    if not where:
        return
    wb = load_workbook(path, data_only=True, read_only=True)
    try:
        for sheet, cells in where.items():
            ws = wb[sheet]
            ws.reset_dimensions()
            want = set(cells)
            last = max(r for r, _c in cells)
            for r, row in enumerate(ws.iter_rows(min_row=1, max_row=last), start=1):
                for c, cell in enumerate(row):
                    if (r, c) in want:
                        v = cell.value
                        if v is None:
                            cached: Any = "" if getattr(cell, "data_type", None) == "str" else None
                        else:
                            cached = xlsx_unescape(v) if isinstance(v, str) else _clean(v)
                        data.grid[sheet][r - 1][c].cached = cached
    finally:
        wb.close()
