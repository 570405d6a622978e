"""RatioDesk menu commands for LibreOffice Calc (a Python UNO component, ``XJobExecutor``).

Addons.xcu puts a *RatioDesk* menu into Calc whose entries call ``service:org.ratiodesk.Commands?<name>``;
LibreOffice then creates this component and calls ``trigger("<name>")``:

``collaborator``  write a collaborator copy: a NEW document holding every sheet's values (formulas
                  replaced by what they show) and a Provenance sheet (reference values, spike
                  calibrations, software version, date, source document). The open document is only read.
``import``        import a delimited-text run file into the Measured sheet after a confirmation.
                  Text that is not a number is stored as text — never as a formula, even when it starts
                  with ``=``, ``+``, ``-`` or ``@``.

Both show their progress in the status bar (``frame.createStatusIndicator()``).

Run-file format (our own): delimited text (comma, semicolon or tab, detected), one header row and one
row per element run. Header names map to Measured columns:

* ``analysis``, ``element``, ``date`` (→ run date), ``beta`` (→ external bias factor β);
* a ratio name such as ``143Nd/144Nd`` → the measured mixture ratio;
* ``<ratio> 1s`` / ``<ratio> 2s`` (absolute) or ``<ratio> 1s%`` / ``<ratio> 2s%`` (relative) → its
  uncertainty, converted explicitly to 1σ absolute.

Lines starting with ``#map `` rename columns before that mapping, e.g. ``#map Sample ID=analysis`` or
``#map 143/144=143Nd/144Nd``; other lines starting with ``#`` are comments.

The pure parts (:func:`parse_run_file`, :func:`provenance_rows`) need no ``uno`` and are tested
without LibreOffice; the UNO parts take the document explicitly, so tests can drive them headless.
"""
from __future__ import annotations

import csv
import datetime as _dt
import io
import re
from typing import Any, Callable, Dict, List, Optional, Sequence, Tuple

IMPLEMENTATION_NAME = "org.ratiodesk.Commands.PythonImpl"
SERVICE_NAME = "org.ratiodesk.Commands"

MEASURED_SHEET = "Measured"
KEY_ROW_INDEX = 3          # 0-based row of the column keys (row 4 in the sheet)
FIRST_DATA_INDEX = 4       # 0-based first data row (row 5)
MAX_RATIOS = 4
FORMULA_STARTS = ("=", "+", "-", "@")

_RATIO = re.compile(r"^\s*(\d{1,3}[A-Z][a-z]?)\s*/\s*(\d{1,3}[A-Z][a-z]?)\s*$")
_SIGMA = re.compile(r"^\s*(\d{1,3}[A-Z][a-z]?\s*/\s*\d{1,3}[A-Z][a-z]?)\s+([12])s(%?)\s*$", re.IGNORECASE)


class RunFileError(ValueError):
    """A run file that cannot be imported; the message names the line and column."""


def _number(text: str) -> Optional[float]:
    t = text.strip()
    if not t:
        return None
    try:
        v = float(t)
    except ValueError:
        return None
    return v if v == v and abs(v) != float("inf") else None


def parse_run_file(text: str) -> List[Dict[str, Any]]:
    """Rows of a run file as Measured-sheet dicts (keys as in the sheet's key row).

    Values are floats where the text is a number, else the text unchanged (the caller stores text as
    text). Uncertainties are converted to 1σ absolute as their header says.
    """
    mapping: Dict[str, str] = {}
    body: List[str] = []
    for n, line in enumerate(text.splitlines(), start=1):
        s = line.strip()
        if s.lower().startswith("#map "):
            src, eq, dst = s[5:].partition("=")
            if not eq or not src.strip() or not dst.strip():
                raise RunFileError(f"line {n}: a #map line reads '#map <column>=<meaning>', got {s!r}")
            mapping[src.strip().lower()] = dst.strip()
            continue
        if s.startswith("#") or not s:
            continue
        body.append(line)
    if not body:
        raise RunFileError("the file has no header row")
    try:
        dialect = csv.Sniffer().sniff(body[0], delimiters=",;\t")
    except csv.Error:
        dialect = csv.excel
    rows = list(csv.reader(io.StringIO("\n".join(body)), dialect))
    header = [mapping.get(h.strip().lower(), h.strip()) for h in rows[0]]
    ratio_names: List[str] = []
    roles: List[Tuple[str, Any]] = []
    for j, h in enumerate(header):
        low = h.lower()
        if low in ("analysis", "element", "beta"):
            roles.append((low, None))
        elif low in ("date", "run date", "run_date"):
            roles.append(("run_date", None))
        elif _RATIO.match(h):
            m = _RATIO.match(h)
            name = f"{m.group(1)}/{m.group(2)}"
            ratio_names.append(name)
            roles.append(("ratio", name))
        elif _SIGMA.match(h):
            m = _SIGMA.match(h)
            r = _RATIO.match(m.group(1))
            roles.append(("sigma", (f"{r.group(1)}/{r.group(2)}", int(m.group(2)), bool(m.group(3)))))
        else:
            raise RunFileError(f"line 1, column {j + 1}: unknown column {h!r} (use analysis, element, date, beta, "
                               f"a ratio like 143Nd/144Nd, '<ratio> 2s', or map it with '#map {h}=...')")
    if "analysis" not in [r for r, _ in roles]:
        raise RunFileError("no 'analysis' column (map one with '#map <column>=analysis')")
    if len(ratio_names) > MAX_RATIOS:
        raise RunFileError(f"at most {MAX_RATIOS} ratios per run, got {len(ratio_names)}")
    out: List[Dict[str, Any]] = []
    for n, row in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in row):
            continue
        rec: Dict[str, Any] = {}
        ratios: Dict[str, Any] = {}
        sigmas: Dict[str, Any] = {}
        for j, (role, arg) in enumerate(roles):
            cell = row[j] if j < len(row) else ""
            num = _number(cell)
            if role == "ratio":
                ratios[arg] = num if num is not None else cell
            elif role == "sigma":
                name, level, rel = arg
                if num is None:
                    sigmas[name] = cell
                    continue
                sigmas[name] = ("pending", num, level, rel)
            elif role == "beta":
                rec["bias_factor"] = num if num is not None else cell
            else:
                rec[role] = cell.strip()
        for k, name in enumerate(ratio_names, start=1):
            rec[f"r{k}_name"] = name
            rec[f"r{k}"] = ratios.get(name, "")
            s = sigmas.get(name, "")
            if isinstance(s, tuple):
                _p, v, level, rel = s
                value = ratios.get(name)
                if rel:
                    if not isinstance(value, float):
                        raise RunFileError(f"line {n}: {name} is not a number, so its relative σ cannot be converted")
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


def import_run_file(doc: Any, text: str, confirm: Callable[[str], bool]) -> Dict[str, Any]:
    """Append the runs of a run file to the Measured sheet of ``doc`` after ``confirm(message)``.

    Columns are found by the sheet's key row (row 4). Numbers go in as numbers; all other text with
    ``setString`` (stored as text, never interpreted as a formula).
    """
    runs = parse_run_file(text)
    sheet = doc.getSheets().getByName(MEASURED_SHEET)
    data = _used_data(sheet)
    keys = [str(k) for k in (data[KEY_ROW_INDEX] if len(data) > KEY_ROW_INDEX else ())]
    if "analysis" not in keys:
        raise RunFileError(f"the {MEASURED_SHEET} sheet has no key row (row {KEY_ROW_INDEX + 1}) with 'analysis'")
    row0 = FIRST_DATA_INDEX
    for i in range(FIRST_DATA_INDEX, len(data)):
        if any(v != "" for v in data[i]):
            row0 = i + 1
    missing = sorted({k for r in runs for k in r} - set(keys))
    if missing:
        raise RunFileError(f"the {MEASURED_SHEET} sheet has no column for {', '.join(missing)}")
    msg = (f"Import {len(runs)} run(s) into {MEASURED_SHEET} rows {row0 + 1}-{row0 + len(runs)}? "
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
    return {"imported": len(runs), "first_row": row0 + 1, "columns": keys}


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
