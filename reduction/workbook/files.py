"""The .ods reader (zipfile and ElementTree; OpenDocument 1.2 table:table), and opening a workbook of
either format.
"""
from __future__ import annotations

import os
from typing import Any, Dict, List, Tuple

from ..errors import InputError, RatioDeskError
from .sheets import SHEETS
from .values import Cell, CellError, WorkbookFileError, formula_cell, logical, shown
from .xlsx import WorkbookData, _GridBuilder, read_xlsx

# --------------------------------------------------------------------------------------------
# .ods reader (zipfile + ElementTree; OpenDocument 1.2 table:table)
# --------------------------------------------------------------------------------------------
_NS = {"office": "urn:oasis:names:tc:opendocument:xmlns:office:1.0",
       "table": "urn:oasis:names:tc:opendocument:xmlns:table:1.0",
       "text": "urn:oasis:names:tc:opendocument:xmlns:text:1.0"}
#: Columns of a sheet the .ods reader keeps (every table of the template ends far left of it).
MAX_COLUMNS = 1024


def _q(prefix: str, tag: str) -> str:
    return "{" + _NS[prefix] + "}" + tag


def _ods_text(p: Any) -> str:
    """The text of one ``text:p`` as typed: ``text:s`` (spaces), ``text:tab``, ``text:line-break`` and
    the text of spans and links (ODF 1.2 part 1, paragraph content)."""
    out = [p.text or ""]
    for child in p:
        if child.tag == _q("text", "s"):
            out.append(" " * int(child.get(_q("text", "c"), "1") or "1"))
        elif child.tag == _q("text", "tab"):
            out.append("\t")
        elif child.tag == _q("text", "line-break"):
            out.append("\n")
        else:
            out.append(_ods_text(child))
        out.append(child.tail or "")
    return "".join(out)


def _ods_cell_value(el: Any) -> Cell:
    vt = el.get(_q("office", "value-type"))
    if vt in ("float", "percentage", "currency"):
        return float(el.get(_q("office", "value")))
    if vt == "boolean":
        return logical(el.get(_q("office", "boolean-value")) == "true")
    if vt == "date":
        return str(el.get(_q("office", "date-value")))[:10]
    if vt == "time":
        return str(el.get(_q("office", "time-value")))
    if vt == "string" and el.get(_q("office", "string-value")) is not None:
        return str(el.get(_q("office", "string-value")))
    parts = [_ods_text(p) for p in el if p.tag == _q("text", "p")]
    return "\n".join(parts) if vt is not None or parts else ""


def _repeat(el: Any, attr: str) -> int:
    raw = el.get(_q("table", attr), "1")
    try:
        n = int(raw)
    except ValueError:
        raise ValueError(f"table:{attr}={raw!r} is not a whole number") from None
    if n < 1:
        raise ValueError(f"table:{attr}={raw!r} is not a count")
    return n


def read_ods(path: Any) -> WorkbookData:
    """Read a RatioDesk .ods: input values, logical cells and formula text (``of:=...``).

    ``content.xml`` is parsed as a stream, row by row, so a sheet with a million rows neither fills
    the memory nor is cut at some count: repeated rows (``table:number-rows-repeated``) are counted,
    and a table sheet with more than :data:`MAX_DATA_ROWS` filled data rows is refused.
    """
    import xml.etree.ElementTree as ET
    import zipfile

    grid: Dict[str, List[List[Cell]]] = {}
    formulas: Dict[Tuple[str, int, int], str] = {}
    t_table, t_row = _q("table", "table"), _q("table", "table-row")
    t_cells = (_q("table", "table-cell"), _q("table", "covered-table-cell"))
    t_formula = _q("table", "formula")
    with zipfile.ZipFile(path) as z, z.open("content.xml") as f:
        stack: List[Any] = []
        builders: List[_GridBuilder] = []
        for event, el in ET.iterparse(f, events=("start", "end")):
            if event == "start":
                stack.append(el)
                if el.tag == t_table:
                    builders.append(_GridBuilder(str(el.get(_q("table", "name")))))
                continue
            stack.pop()
            if el.tag == t_row and builders:
                b = builders[-1]
                if not b.done:
                    r = b.next_row
                    cells: List[Cell] = []
                    gap = 0
                    for cell in el:
                        if cell.tag not in t_cells:
                            continue
                        crep = _repeat(cell, "number-columns-repeated")
                        f_text = cell.get(t_formula)
                        v: Cell = _ods_cell_value(cell)
                        if f_text is not None:
                            v = formula_cell(f_text, v)
                        if v == "":
                            gap += crep
                            continue
                        if len(cells) + gap >= MAX_COLUMNS:
                            continue
                        cells.extend([""] * gap)
                        gap = 0
                        for _ in range(min(crep, MAX_COLUMNS - len(cells))):
                            if f_text is not None:
                                formulas[(b.sheet, r, len(cells))] = f_text
                            cells.append(v)
                    b.add(cells, _repeat(el, "number-rows-repeated"))
                if stack:
                    stack[-1].remove(el)      # rows are done with: keep the memory of one row
            elif el.tag == t_table and builders:
                b = builders.pop()
                grid[b.sheet] = b.rows
                if stack:
                    stack[-1].remove(el)
    return WorkbookData(grid, formulas, str(path))


#: The first bytes of an OLE compound file (Office 97-2003 documents and encrypted Office files).
_OLE_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_ODS_MIME = "application/vnd.oasis.opendocument.spreadsheet"


def _sniff(path: str, kind: str) -> None:
    """Refuse, with a readable reason, a file that is not a workbook of its extension's kind."""
    import zipfile

    size = os.path.getsize(path)
    if size == 0:
        raise WorkbookFileError(path, "the file is empty (0 bytes): it is not a workbook")
    with open(path, "rb") as fh:
        head = fh.read(4096)
    if head.startswith(_OLE_MAGIC):
        with open(path, "rb") as fh:
            data = fh.read(min(size, 64 * 1024 * 1024))
        if "EncryptionInfo".encode("utf-16-le") in data or "EncryptedPackage".encode("utf-16-le") in data:
            raise WorkbookFileError(path, "the workbook is password-protected (encrypted): save a copy without "
                                          "a password (File ▸ Save As, no password) and reduce that copy")
        raise WorkbookFileError(path, "the file is an Office 97-2003 document (OLE compound file, e.g. an .xls), "
                                      f"not an .{kind}: open it and save it as .xlsx or .ods")
    if not head.startswith(b"PK"):
        looks_text = all(b >= 32 or b in (9, 10, 13) for b in head[:512])
        what = ("a text file (a CSV or similar renamed?)" if looks_text else "not a zip archive (random or "
                "unknown bytes)")
        raise WorkbookFileError(path, f"the file is {what}, not an .{kind} workbook: an .xlsx or .ods is a zip "
                                      "archive; open the data in a spreadsheet program and save it as .xlsx or .ods")
    try:
        with zipfile.ZipFile(path) as z:
            names = set(z.namelist())
            mime = z.read("mimetype").decode("ascii", "replace").strip() if "mimetype" in names else ""
    except zipfile.BadZipFile as exc:
        raise WorkbookFileError(path, f"the file is damaged: its zip archive is incomplete or corrupt ({exc}); "
                                      "was it copied or downloaded completely?") from None
    if kind == "xlsx" and "xl/workbook.xml" not in names:
        other = " (it is an .ods spreadsheet: name it .ods)" if mime == _ODS_MIME else ""
        raise WorkbookFileError(path, f"the zip archive is not an .xlsx workbook (no xl/workbook.xml){other}")
    if kind == "ods":
        if "xl/workbook.xml" in names:
            raise WorkbookFileError(path, "the file is an .xlsx workbook named .ods: name it .xlsx")
        if mime and mime != _ODS_MIME:
            raise WorkbookFileError(path, f"the file is an OpenDocument {mime.rsplit('.', 1)[-1]} document, "
                                          "not a spreadsheet")
        if "content.xml" not in names:
            raise WorkbookFileError(path, "the zip archive is not an .ods spreadsheet (no content.xml)")


def read_workbook(path: Any) -> WorkbookData:
    """Read a RatioDesk workbook, .xlsx or .ods, by its extension.

    Raises
    ------
    WorkbookFileError
        The file is empty, damaged, encrypted, of another format (an .xls, a CSV renamed .xlsx, an
        .ods without content) or cannot be parsed; one readable line, the file is only read.
    CellError
        A sheet has more than :data:`MAX_DATA_ROWS` filled data rows.
    OSError
        The file cannot be opened (missing, no permission).
    """
    p = str(path)
    low = p.lower()
    if low.endswith(".xls") or low.endswith(".xlsm") or low.endswith(".xlsb"):
        raise WorkbookFileError(p, f"an .{low.rsplit('.', 1)[-1]} workbook cannot be reduced: open it and save it "
                                   "as .xlsx (or .ods)")
    if not (low.endswith(".xlsx") or low.endswith(".ods")):
        raise InputError("workbook", f"must be a .xlsx or .ods file, got {shown(p)}")
    if os.path.isdir(p):
        raise WorkbookFileError(p, "is a folder, not a workbook file")
    kind = "xlsx" if low.endswith(".xlsx") else "ods"
    _sniff(p, kind)
    try:
        return read_xlsx(p) if kind == "xlsx" else read_ods(p)
    except (RatioDeskError, OSError, KeyboardInterrupt):
        raise
    except Exception as exc:  # noqa: BLE001 - whatever a damaged file makes the parser raise: one readable line
        detail = str(exc).strip().splitlines()[0][:200] if str(exc).strip() else ""
        raise WorkbookFileError(p, f"the .{kind} file cannot be read ({type(exc).__name__}"
                                   f"{': ' + detail if detail else ''}); is it damaged? Open and save it again "
                                   "in a spreadsheet program") from None


#: Sheets a workbook made by an earlier template may lack (read as empty).
OPTIONAL_SHEETS = ("Groups",)


def check_sheets(data: WorkbookData) -> None:
    """Every sheet the definition reads must be present (named exactly)."""
    for s in SHEETS:
        if s.name not in data.grid and s.name not in OPTIONAL_SHEETS:
            raise CellError(s.name, None, None, "", f"sheet missing from {data.path} (sheets there: "
                                                    f"{', '.join(data.grid) or 'none'})")
