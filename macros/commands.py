"""RatioDesk menu commands for LibreOffice Calc (a Python UNO component, ``XJobExecutor``).

Addons.xcu puts a *RatioDesk* menu into Calc whose entries call ``service:org.ratiodesk.Commands?<name>``;
LibreOffice then creates this component and calls ``trigger("<name>")``:

``collaborator``  write a collaborator copy: a NEW document holding every sheet's values (formulas
                  replaced by what they show) and a Provenance sheet (reference values, spike
                  calibrations, software version, date, source document). The open document is only read.
``import``        import a delimited-text run file into the Measured sheet (run means) or the Cycles sheet
                  (a file with a ``cycle`` column) after a confirmation.
                  Text that is not a number is stored as text — never as a formula, even when it starts
                  with ``=``, ``+``, ``-`` or ``@``.

Both show their progress in the status bar (``frame.createStatusIndicator()``).

Run-file format (our own): standard CSV (RFC 4180 quoting: a field holding the delimiter, a quote or a
line break is in double quotes, a quote inside it doubled; a byte-order mark and CRLF line ends are
fine) with a comma, semicolon or tab delimiter, sniffed from the whole file (comma when it cannot be
told); one header row and one row per element run, every row with as many fields as the header (a
row with more or fewer is refused, naming its line and column). Header names map to Measured columns:

* ``analysis``, ``element``, ``date`` (→ run date), ``beta`` (→ external bias factor β);
* a ratio name such as ``143Nd/144Nd`` → the measured mixture ratio;
* ``<ratio> 1s`` / ``<ratio> 2s`` (absolute) or ``<ratio> 1s%`` / ``<ratio> 2s%`` (relative) → its
  uncertainty, converted explicitly to 1σ absolute.

A **cycle file** has a ``cycle`` column (the cycle or block number) and one row per cycle: each ratio
column then holds that cycle's value, and uncertainty columns are refused (a run's SEM is computed
from its kept cycles on the Runs sheet). Such a file is imported into the Cycles sheet.

Lines starting with ``#map `` rename columns before that mapping, e.g. ``#map Sample ID=analysis`` or
``#map 143/144=143Nd/144Nd``; other lines starting with ``#`` are comments.

The pure parts (:func:`parse_run_file`, :func:`provenance_rows`) need no ``uno`` and are tested
without LibreOffice; the UNO parts take the document explicitly, so tests can drive them headless.
"""
from __future__ import annotations

import csv
import datetime as _dt
import re
from typing import Any, Callable, Dict, List, Mapping, Optional, Sequence, Tuple

IMPLEMENTATION_NAME = "org.ratiodesk.Commands.PythonImpl"
SERVICE_NAME = "org.ratiodesk.Commands"

MEASURED_SHEET = "Measured"
KEY_ROW_INDEX = 3          # 0-based row of the column keys (row 4 in the sheet)
FIRST_DATA_INDEX = 4       # 0-based first data row (row 5)
MAX_RATIOS = 6               # ratio slots of a Measured (and a Cycles) row
FORMULA_STARTS = ("=", "+", "-", "@")

_RATIO = re.compile(r"^\s*(\d{1,3}[A-Z][a-z]?)\s*/\s*(\d{1,3}[A-Z][a-z]?)\s*$")
_SIGMA = re.compile(r"^\s*(\d{1,3}[A-Z][a-z]?\s*/\s*\d{1,3}[A-Z][a-z]?)\s+([12])s(%?)\s*$", re.IGNORECASE)


class RunFileError(ValueError):
    """A run file that cannot be imported; the message names the line and column."""


#: Field delimiters a run file may use (detected): comma, semicolon, tab.
DELIMITERS = ",;\t"
DELIMITER_NAMES = {",": "comma", ";": "semicolon", "\t": "tab"}
#: Characters of the file (whole lines, comments left out) the delimiter is sniffed from.
SNIFF_CHARS = 65536


def _number(text: str) -> Optional[float]:
    t = text.strip()
    if not t:
        return None
    try:
        v = float(t)
    except ValueError:
        return None
    return v if v == v and abs(v) != float("inf") else None


def _physical_lines(text: str) -> List[str]:
    """The file's lines without their ends (CRLF, CR or LF) and without a leading byte-order mark."""
    if text.startswith("\ufeff"):
        text = text[1:]
    lines = text.replace("\r\n", "\n").replace("\r", "\n").split("\n")
    if lines and lines[-1] == "":
        lines.pop()
    return lines


def _between_records(line: str) -> bool:
    """True for a line that is no part of the table when it starts a record: blank, comment or #map."""
    s = line.strip()
    return not s or s.startswith("#")


def sniff_delimiter(lines: Sequence[str]) -> str:
    """The field delimiter of a run file: comma, semicolon or tab.

    Parameters
    ----------
    lines : sequence of str
        The file's physical lines (comment, ``#map`` and blank lines are left out of the sample).

    Returns
    -------
    str
        The delimiter :class:`csv.Sniffer` finds in the whole sample (up to :data:`SNIFF_CHARS`
        characters of whole lines); when it cannot tell, the one it finds in the header line
        alone; else a comma (the ``excel`` dialect's).
    """
    body = [ln for ln in lines if not _between_records(ln)]
    if not body:
        return ","
    sample: List[str] = []
    size = 0
    for ln in body:
        if sample and size + len(ln) + 1 > SNIFF_CHARS:
            break
        sample.append(ln)
        size += len(ln) + 1
    for text in ("\n".join(sample) + "\n", body[0] + "\n"):
        try:
            return csv.Sniffer().sniff(text, delimiters=DELIMITERS).delimiter
        except csv.Error:
            continue
    return ","


class _Lines:
    """The lines csv.reader reads; between records it skips blank, comment and ``#map`` lines (kept in
    :attr:`maps`), inside a quoted field every line is the field's."""

    def __init__(self, lines: Sequence[str]) -> None:
        self.lines = lines
        self.read = 0              # lines read so far = 1-based number of the last line read
        self.between = True        # set before each record
        self.start = 0             # 1-based line where the current record starts
        self.maps: List[Tuple[int, str]] = []

    def __iter__(self) -> _Lines:
        return self

    def __next__(self) -> str:
        while self.read < len(self.lines):
            line = self.lines[self.read]
            self.read += 1
            if self.between:
                if _between_records(line):
                    s = line.strip()
                    if s.lower().startswith("#map "):
                        self.maps.append((self.read, s))
                    continue
                self.between = False
                self.start = self.read
            return line + "\n"
        raise StopIteration


def read_records(text: str) -> Tuple[List[Tuple[int, int, List[str]]], List[Tuple[int, str]], str]:
    """The records of a run file as standard CSV, with their file lines.

    Standard CSV (RFC 4180): a field holding the delimiter, a quote or a line break is in double
    quotes, a quote inside it is doubled; a byte-order mark and CRLF line ends are accepted; spaces
    after a delimiter are not part of the field. Blank, comment (``#``) and ``#map`` lines between
    records are no records.

    Parameters
    ----------
    text : str
        The whole file.

    Returns
    -------
    records : list of (int, int, list of str)
        First and last file line (1-based) of each record, and its fields.
    maps : list of (int, str)
        The ``#map`` lines with their line numbers.
    delimiter : str
        The delimiter used (:func:`sniff_delimiter`).

    Raises
    ------
    RunFileError
        A quote that is never closed, or text after a closing quote, naming the line.
    """
    lines = _physical_lines(text)
    delimiter = sniff_delimiter(lines)
    feed = _Lines(lines)
    reader = csv.reader(feed, "excel", delimiter=delimiter, skipinitialspace=True, strict=True)
    records: List[Tuple[int, int, List[str]]] = []
    while True:
        feed.between = True
        try:
            row = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            if feed.read >= len(lines) and "end of data" in str(exc):
                raise RunFileError(f"line {feed.start}: a quoted field starts on this line and is never closed "
                                   "(the file ends inside it)") from None
            if "expected after" in str(exc):
                raise RunFileError(f"line {feed.read}: text follows the closing quote of a field; in standard CSV "
                                   'a quote inside a quoted field is doubled ("")') from None
            raise RunFileError(f"line {feed.read}: not readable as CSV ({exc})") from None
        records.append((feed.start, feed.read, row))
    return records, feed.maps, delimiter


def _field_count_error(line: int, last: int, row: Sequence[str], header: Sequence[str], header_line: int,
                       delimiter: str) -> RunFileError:
    name = DELIMITER_NAMES.get(delimiter, repr(delimiter))
    head = f"line {line}: {len(row)} fields, but the header (line {header_line}) has {len(header)}"
    if len(row) > len(header):
        text = (f"{head}: field {len(header) + 1} ({row[len(header)]!r}) has no column. A field that contains "
                f'a {name} must be in double quotes ("..."), with a quote inside it doubled ("").')
    else:
        text = f"{head}: column {len(row) + 1} ({header[len(row)]!r}) is missing."
    if last > line:
        text += f" The record runs on to line {last}: is a quote opened on line {line} left unclosed?"
    return RunFileError(text)


def parse_run_file(text: str) -> List[Dict[str, Any]]:
    """Rows of a run file as Measured-sheet dicts (keys as in the sheet's key row).

    The file is standard CSV (:func:`read_records`). Values are floats where the text is a number,
    else the text unchanged (the caller stores text as text). Uncertainties are converted to 1σ
    absolute as their header says.

    Parameters
    ----------
    text : str
        The whole run file.

    Returns
    -------
    list of dict
        One dict per data row: ``analysis``, ``element``, ``run_date``, ``bias_factor`` and, per
        ratio k = 1..6, ``r<k>_name``, ``r<k>``, ``r<k>_sigma_1s``; a cycle file (a ``cycle``
        column): ``cycle`` and no σ.

    Raises
    ------
    RunFileError
        Anything that cannot be imported as it stands, naming the file line and the column: an
        unknown, repeated or unpaired column, a row whose field count differs from the header's,
        a relative σ of a ratio that is not a number, unreadable CSV.
    """
    records, maps, delimiter = read_records(text)
    mapping: Dict[str, str] = {}
    for n, s in maps:
        src, eq, dst = s[5:].partition("=")
        if not eq or not src.strip() or not dst.strip():
            raise RunFileError(f"line {n}: a #map line reads '#map <column>=<meaning>', got {s!r}")
        mapping[src.strip().lower()] = dst.strip()
    if not records:
        raise RunFileError("the file has no header row")
    header_line, _last, fields = records[0]
    header = [mapping.get(h.strip().lower(), h.strip()) for h in fields]
    ratio_names: List[str] = []
    ratio_column: Dict[str, int] = {}
    roles: List[Tuple[str, Any]] = []
    seen: Dict[Any, int] = {}
    for j, h in enumerate(header):
        low = h.lower()
        where = f"line {header_line}, column {j + 1}"
        if low in ("analysis", "element", "beta", "cycle"):
            role: Tuple[str, Any] = (low, None)
        elif low in ("date", "run date", "run_date"):
            role = ("run_date", None)
        elif _RATIO.match(h):
            m = _RATIO.match(h)
            role = ("ratio", f"{m.group(1)}/{m.group(2)}")
        elif _SIGMA.match(h):
            m = _SIGMA.match(h)
            r = _RATIO.match(m.group(1))
            role = ("sigma", (f"{r.group(1)}/{r.group(2)}", int(m.group(2)), bool(m.group(3))))
        else:
            raise RunFileError(f"{where}: unknown column {h!r} (use analysis, element, date, beta, cycle, "
                               f"a ratio like 143Nd/144Nd, '<ratio> 2s', or map it with '#map {h}=...')")
        key = (role[0], role[1][0] if role[0] == "sigma" else role[1])
        if key in seen:
            k = seen[key]
            raise RunFileError(f"{where}: {fields[j].strip()!r} gives the same quantity as column {k + 1} "
                               f"({fields[k].strip()!r}); give each column once")
        seen[key] = j
        roles.append(role)
        if role[0] == "ratio":
            ratio_names.append(role[1])
            ratio_column[role[1]] = j
    for j, (role_name, arg) in enumerate(roles):
        if role_name == "sigma" and arg[0] not in ratio_column:
            raise RunFileError(f"line {header_line}, column {j + 1}: {fields[j].strip()!r} is an uncertainty of "
                               f"{arg[0]}, but the file has no {arg[0]} column")
    cycle_file = "cycle" in [r for r, _ in roles]
    if cycle_file:
        for j, (role_name, _arg) in enumerate(roles):
            if role_name in ("sigma", "beta", "run_date"):
                raise RunFileError(f"line {header_line}, column {j + 1}: {fields[j].strip()!r} in a cycle file (it has "
                                   "a 'cycle' column): a cycle file gives one value per cycle and ratio; the SEM "
                                   "is computed from the kept cycles, and β and the date go on the Measured row")
    if "analysis" not in [r for r, _ in roles]:
        raise RunFileError(f"line {header_line}: no 'analysis' column (map one with '#map <column>=analysis')")
    if len(ratio_names) > MAX_RATIOS:
        raise RunFileError(f"line {header_line}: at most {MAX_RATIOS} ratios per run, got {len(ratio_names)}")
    out: List[Dict[str, Any]] = []
    for n, last, row in records[1:]:
        if not any(c.strip() for c in row):
            continue
        if len(row) != len(header):
            raise _field_count_error(n, last, row, header, header_line, delimiter)
        rec: Dict[str, Any] = {}
        ratios: Dict[str, Any] = {}
        sigmas: Dict[str, Any] = {}
        for j, (role_name, arg) in enumerate(roles):
            cell = row[j]
            num = _number(cell)
            if role_name == "ratio":
                ratios[arg] = num if num is not None else cell
            elif role_name == "sigma":
                name, level, rel = arg
                sigmas[name] = cell if num is None else ("pending", num, level, rel, j)
            elif role_name == "beta":
                rec["bias_factor"] = num if num is not None else cell
            elif role_name == "cycle":
                rec["cycle"] = num if num is not None else cell
            else:
                rec[role_name] = cell.strip()
        for k, name in enumerate(ratio_names, start=1):
            rec[f"r{k}_name"] = name
            rec[f"r{k}"] = ratios.get(name, "")
            if cycle_file:
                continue
            s = sigmas.get(name, "")
            if isinstance(s, tuple):
                _p, v, level, rel, j = s
                value = ratios.get(name)
                if rel:
                    if not isinstance(value, float):
                        raise RunFileError(f"line {n}, column {j + 1}: a relative σ of {name}, but {name} (column "
                                           f"{ratio_column[name] + 1}) is {value!r}, not a number, so it cannot "
                                           "be converted")
                    v = v / 100.0 * value
                s = v / level                       # explicit: 2σ -> 1σ, % -> absolute
            rec[f"r{k}_sigma_1s"] = s
        out.append(rec)
    return out


def provenance_rows(constants: Sequence[Sequence[Any]], spikes: Sequence[Sequence[Any]], version: str,
                    source: str, now: Optional[str] = None) -> List[Tuple[Any, ...]]:
    """Rows of the collaborator copy's Provenance sheet (from the Constants and Spikes tables, key row first)."""
    now = now or _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    rows: List[Tuple[Any, ...]] = [
        ("Provenance", "", "", "", "", ""),
        ("Collaborator copy of", source, "", "", "", ""),
        ("Written by", f"RatioDesk {version} (menu command; formulas replaced by their values)", "", "", "", ""),
        ("Date (UTC)", now, "", "", "", ""),
        ("", "", "", "", "", ""),
        ("Reference values", "", "", "", "", ""),
        ("Key", "Quantity", "Value", "1σ (abs)", "How the 1σ (abs) was set / status", "Unit", "Source")]
    keys = [str(k) for k in (constants[0] if constants else ())]
    for r in constants[1:]:
        d = dict(zip(keys, r))
        if d.get("key", "") != "":
            rows.append(tuple(d.get(k, "") for k in ("key", "quantity", "value", "sigma_1s", "note", "unit",
                                                      "source")))
    rows += [("", "", "", "", "", ""), ("Spike calibrations", "", "", "", "", ""),
             ("Spike", "Element", "Calibrated on", "Spike isotope", "µmol/g", "1σ (abs, µmol/g)")]
    keys = [str(k) for k in (spikes[0] if spikes else ())]
    for r in spikes[1:]:
        d = dict(zip(keys, r))
        if d.get("spike", "") != "":
            rows.append(tuple(d.get(k, "") for k in ("spike", "element", "calibrated", "spike_isotope",
                                                      "conc_umol_g", "conc_sigma_1s")))
    rows += [("", "", "", "", "", ""),
             ("Caution", "Results depend on the spike calibrations and reference-material values above.", "", "",
              "", "")]
    return rows


def _version() -> str:
    for name in ("ratiodesk_engine", "reduction"):
        try:
            mod = __import__(name)
            return str(getattr(mod, "__version__", "?"))
        except Exception:  # noqa: BLE001 - any import problem: report an unknown version
            continue
    return "?"


# --------------------------------------------------------------------------------------------
# UNO parts (imported lazily: the pure parts above are testable without LibreOffice)
# --------------------------------------------------------------------------------------------
def _prop(name: str, value: Any) -> Any:
    from com.sun.star.beans import PropertyValue

    p = PropertyValue()
    p.Name, p.Value = name, value
    return p


class _Progress:
    """Status-bar progress of the document's frame (no-op when there is no frame, e.g. hidden)."""

    def __init__(self, doc: Any, text: str, total: int) -> None:
        self.ind = None
        try:
            frame = doc.getCurrentController().getFrame()
            self.ind = frame.createStatusIndicator()
            self.ind.start(text, max(total, 1))
        except Exception:  # noqa: BLE001 - headless hidden documents have no frame
            self.ind = None

    def step(self, k: int, text: Optional[str] = None) -> None:
        if self.ind is not None:
            if text:
                self.ind.setText(text)
            self.ind.setValue(k)

    def end(self) -> None:
        if self.ind is not None:
            self.ind.end()


def _used_data(sheet: Any) -> Tuple[Tuple[Any, ...], ...]:
    cur = sheet.createCursor()
    cur.gotoEndOfUsedArea(False)
    addr = cur.getRangeAddress()
    if addr.EndRow < 0 or addr.EndColumn < 0:
        return ()
    return sheet.getCellRangeByPosition(0, 0, addr.EndColumn, addr.EndRow).getDataArray()


def write_collaborator_copy(ctx: Any, doc: Any, target_url: str) -> Dict[str, Any]:
    """Write a values-only copy of ``doc`` plus a Provenance sheet to ``target_url``; ``doc`` is only read.

    The filter follows the extension (.ods, or .xlsx). Returns a summary (sheets and cells written).
    """
    smgr = ctx.ServiceManager
    desktop = smgr.createInstanceWithContext("com.sun.star.frame.Desktop", ctx)
    names = list(doc.getSheets().getElementNames())
    prog = _Progress(doc, "RatioDesk: writing the collaborator copy", len(names) + 2)
    new = desktop.loadComponentFromURL("private:factory/scalc", "_blank", 0, (_prop("Hidden", True),))
    cells = 0
    try:
        sheets = new.getSheets()
        first = sheets.getElementNames()[0]
        data_of = {}
        for k, name in enumerate(names):
            prog.step(k, f"RatioDesk: copying values of {name}")
            src = doc.getSheets().getByName(name)
            data = _used_data(src)
            if any(v is None for r in data for v in r):   # error cells: keep what they show, as text
                data = tuple(tuple(src.getCellByPosition(j, i).getString() if v is None else v
                                   for j, v in enumerate(r)) for i, r in enumerate(data))
            data_of[name] = data
            sheets.insertNewByName(name, sheets.getCount())
            if data:
                tgt = sheets.getByName(name)
                rng = tgt.getCellRangeByPosition(0, 0, len(data[0]) - 1, len(data) - 1)
                rng.setDataArray(data)          # values and text only: setDataArray never parses formulas
                cells += sum(1 for r in data for v in r if v != "")
                for j in range(len(data[0])):
                    w = src.getColumns().getByIndex(j).Width
                    tgt.getColumns().getByIndex(j).Width = w
        sheets.removeByName(first)
        prog.step(len(names), "RatioDesk: provenance")

        def table(name: str) -> Tuple[Tuple[Any, ...], ...]:
            return tuple(data_of.get(name, ())[KEY_ROW_INDEX:])

        rows = provenance_rows(table("Constants"), table("Spikes"), _version(), doc.getURL() or doc.getTitle())
        sheets.insertNewByName("Provenance", sheets.getCount())
        pv = sheets.getByName("Provenance")
        width = max(len(r) for r in rows)
        pv.getCellRangeByPosition(0, 0, width - 1, len(rows) - 1).setDataArray(
            tuple(tuple(r) + ("",) * (width - len(r)) for r in rows))
        pv.getColumns().getByIndex(0).Width = 6000
        pv.getColumns().getByIndex(1).Width = 9000
        filt = "Calc MS Excel 2007 XML" if target_url.lower().endswith(".xlsx") else "calc8"
        new.storeToURL(target_url, (_prop("FilterName", filt), _prop("Overwrite", True)))
    finally:
        new.close(True)
        prog.end()
    return {"sheets": names + ["Provenance"], "cells": cells, "url": target_url}


def run_file_sheet(rows: Sequence[Mapping[str, Any]]) -> str:
    """The sheet a parsed run file goes to: Cycles for a cycle file (rows with a ``cycle``), else Measured."""
    return "Cycles" if any("cycle" in r for r in rows) else MEASURED_SHEET


def import_run_file(doc: Any, text: str, confirm: Callable[[str], bool]) -> Dict[str, Any]:
    """Append the runs of a run file to the Measured sheet of ``doc`` after ``confirm(message)``.

    Columns are found by the sheet's key row (row 4). Numbers go in as numbers; all other text with
    ``setString`` (stored as text, never interpreted as a formula).
    """
    runs = parse_run_file(text)
    target = run_file_sheet(runs)
    sheet = doc.getSheets().getByName(target)
    data = _used_data(sheet)
    keys = [str(k) for k in (data[KEY_ROW_INDEX] if len(data) > KEY_ROW_INDEX else ())]
    if "analysis" not in keys:
        raise RunFileError(f"the {target} sheet has no key row (row {KEY_ROW_INDEX + 1}) with 'analysis'")
    row0 = FIRST_DATA_INDEX
    for i in range(FIRST_DATA_INDEX, len(data)):
        if any(v != "" for v in data[i]):
            row0 = i + 1
    missing = sorted({k for r in runs for k in r} - set(keys))
    if missing:
        raise RunFileError(f"the {target} sheet has no column for {', '.join(missing)}")
    what = "cycle row(s)" if target == "Cycles" else "run(s)"
    msg = (f"Import {len(runs)} {what} into {target} rows {row0 + 1}-{row0 + len(runs)}? "
           f"Nothing else in the workbook is changed.")
    if not runs or not confirm(msg):
        return {"imported": 0, "first_row": row0 + 1}
    prog = _Progress(doc, "RatioDesk: importing the run file", len(runs))
    try:
        for k, rec in enumerate(runs):
            prog.step(k)
            for key, v in rec.items():
                cell = sheet.getCellByPosition(keys.index(key), row0 + k)
                if isinstance(v, float):
                    cell.setValue(v)
                elif v != "":
                    cell.setString(str(v))
    finally:
        prog.end()
    return {"imported": len(runs), "first_row": row0 + 1, "columns": keys, "sheet": target}


def _message(ctx: Any, doc: Any, text: str, buttons: str = "ok") -> bool:
    from com.sun.star.awt.MessageBoxType import QUERYBOX

    toolkit = ctx.ServiceManager.createInstanceWithContext("com.sun.star.awt.Toolkit", ctx)
    window = doc.getCurrentController().getFrame().getContainerWindow()
    flags = 3 if buttons == "okcancel" else 1     # MessageBoxButtons: BUTTONS_OK_CANCEL = 3, BUTTONS_OK = 1
    box = toolkit.createMessageBox(window, QUERYBOX, flags, "RatioDesk", text)
    return box.execute() == 1


def _pick_file(ctx: Any, save: bool, title: str, filters: Sequence[Tuple[str, str]]) -> str:
    fp = ctx.ServiceManager.createInstanceWithContext("com.sun.star.ui.dialogs.FilePicker", ctx)
    fp.initialize((10 if save else 0,))   # FILESAVE_SIMPLE = 10, FILEOPEN_SIMPLE = 0
    fp.setTitle(title)
    for name, pattern in filters:
        fp.appendFilter(name, pattern)
    if fp.execute() != 1:
        return ""
    files = fp.getSelectedFiles()
    return files[0] if files else ""


try:
    import unohelper
    from com.sun.star.lang import XServiceInfo
    from com.sun.star.task import XJobExecutor

    class RatioDeskCommands(unohelper.Base, XJobExecutor, XServiceInfo):
        """The component behind the RatioDesk menu (``trigger(name)``)."""

        def __init__(self, ctx: Any) -> None:
            self.ctx = ctx

        def getImplementationName(self) -> str:
            return IMPLEMENTATION_NAME

        def supportsService(self, name: str) -> bool:
            return name == SERVICE_NAME

        def getSupportedServiceNames(self) -> Tuple[str, ...]:
            return (SERVICE_NAME,)

        def trigger(self, args: str) -> None:
            desktop = self.ctx.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", self.ctx)
            doc = desktop.getCurrentComponent()
            if doc is None or not hasattr(doc, "getSheets"):
                return
            try:
                if args == "collaborator":
                    url = _pick_file(self.ctx, True, "Collaborator copy (values only)",
                                     (("OpenDocument spreadsheet", "*.ods"), ("Excel 2007-365", "*.xlsx")))
                    if url:
                        out = write_collaborator_copy(self.ctx, doc, url)
                        _message(self.ctx, doc, f"Wrote {out['url']}: {len(out['sheets'])} sheets, values only, "
                                                f"with a Provenance sheet. This workbook was not changed.")
                elif args == "import":
                    url = _pick_file(self.ctx, False, "Import a run file into Measured",
                                     (("Delimited text", "*.csv;*.txt;*.tsv"), ("All files", "*.*")))
                    if url:
                        import uno

                        with open(uno.fileUrlToSystemPath(url), encoding="utf-8-sig") as fh:
                            text = fh.read()
                        out = import_run_file(doc, text, lambda m: _message(self.ctx, doc, m, "okcancel"))
                        if out["imported"]:
                            _message(self.ctx, doc, f"Imported {out['imported']} run(s) from row {out['first_row']}.")
            except Exception as exc:  # noqa: BLE001 - show every failure to the user, never a silent one
                _message(self.ctx, doc, f"RatioDesk: {exc}")

    g_ImplementationHelper = unohelper.ImplementationHelper()
    g_ImplementationHelper.addImplementation(RatioDeskCommands, IMPLEMENTATION_NAME, (SERVICE_NAME,))
except ImportError:  # outside LibreOffice: the pure functions above stay importable
    pass
