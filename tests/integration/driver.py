#!/usr/bin/python3
"""The LibreOffice side of the integration tests; runs under /usr/bin/python3 (``uno``).

    /usr/bin/python3 driver.py COMMAND PORT PAYLOAD.json

Connects to the LibreOffice the test session started (harness.Office), does one job and prints
one line of JSON. Commands: ``install`` (payload: path of the .oxt), ``descriptions`` (the
Function Wizard data of every RD.* function), ``evaluate`` (payload: cases; writes them into a
sheet, reads the results, saves .ods and .xlsx, reopens both and reads again), ``bench``
(payload: timing jobs) and ``terminate``.
"""
from __future__ import annotations

import json
import sys
import time
import zipfile
from pathlib import Path
from typing import Any, Dict, List, Tuple

ROOT = Path(__file__).resolve().parents[2]
sys.path[:0] = [str(ROOT / "macros"), str(ROOT)]
import install as lo  # noqa: E402
import uno  # noqa: E402,F401  (installs the import hook for com.sun.star)
from com.sun.star.beans import PropertyValue  # noqa: E402

from reduction.workbook import col_letter as col_name  # noqa: E402

INTERNAL_PREFIX = "ORG.RATIODESK.CALCFUNCTIONS."
INPUT_COL = 20


def prop(name: str, value: Any) -> Any:
    p = PropertyValue()
    p.Name, p.Value = name, value
    return p


def desktop(ctx: Any) -> Any:
    return ctx.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", ctx)


def new_doc(ctx: Any) -> Any:
    return desktop(ctx).loadComponentFromURL("private:factory/scalc", "_blank", 0, (prop("Hidden", True),))


def open_doc(ctx: Any, path: Path) -> Any:
    return desktop(ctx).loadComponentFromURL(path.resolve().as_uri(), "_blank", 0, (prop("Hidden", True),))


def literal(v: Any) -> str:
    if isinstance(v, bool):
        return "TRUE()" if v else "FALSE()"
    if isinstance(v, (int, float)):
        return repr(float(v))
    return '"' + str(v).replace('"', '""') + '"'


def address(r0: int, c0: int, rows: int, cols: int) -> str:
    a = f"{col_name(c0)}{r0 + 1}"
    return a if rows == 1 and cols == 1 else f"{a}:{col_name(c0 + cols - 1)}{r0 + rows}"


def place(sheet: Any, cases: List[Dict[str, Any]]) -> Dict[str, Any]:
    """Write every case's inputs and formula; return where each result lives."""
    where = {}
    row = 0
    for case in cases:
        col = max(INPUT_COL, case["cols"] + 1)        # inputs right of the result, never under it
        parts: List[str] = []
        height = case["rows"]
        for a in case["args"]:
            if a["t"] == "omit":
                parts.append("")
            elif a["t"] == "lit":
                parts.append(literal(a["v"]))
            else:
                grid = a["grid"]
                for i, r in enumerate(grid):
                    for j, v in enumerate(r):
                        c = sheet.getCellByPosition(col + j, row + i)
                        if v is None:
                            continue
                        if isinstance(v, dict):
                            c.setFormula(v["f"])
                        elif isinstance(v, str):
                            c.setString(v)
                        else:
                            c.setValue(float(v))
                parts.append(address(row, col, len(grid), len(grid[0])))
                col += len(grid[0]) + 1
                height = max(height, len(grid))
        while parts and parts[-1] == "":
            parts.pop()
        formula = f"={case['display']}({';'.join(parts)})"
        target = address(row, 0, case["rows"], case["cols"])
        rng = sheet.getCellRangeByName(target)
        if case["array"]:
            rng.setArrayFormula(formula)
        else:
            rng.setFormula(formula)
        where[case["id"]] = target
        row += height + 1
    return where


def read(sheet: Any, where: Dict[str, str]) -> Dict[str, Any]:
    out = {}
    for cid, target in where.items():
        rng = sheet.getCellRangeByName(target)
        first = rng.getCellByPosition(0, 0)
        out[cid] = {"data": [list(r) for r in rng.getDataArray()], "error": first.getError(),
                    "formula": first.getFormula()}
    return out


def stored_names(path: Path, member: str) -> int:
    with zipfile.ZipFile(path) as zf:
        return zf.read(member).decode("utf-8").upper().count(INTERNAL_PREFIX)


def cmd_evaluate(ctx: Any, payload: Dict[str, Any]) -> Dict[str, Any]:
    outdir = Path(payload["outdir"])
    doc = new_doc(ctx)
    result: Dict[str, Any] = {}
    try:
        sheet = doc.Sheets.getByIndex(0)
        where = place(sheet, payload["cases"])
        doc.calculateAll()
        result["live"] = read(sheet, where)
        ods, xlsx = outdir / "cases.ods", outdir / "cases.xlsx"
        doc.storeToURL(ods.resolve().as_uri(), (prop("FilterName", "calc8"),))
        doc.storeToURL(xlsx.resolve().as_uri(), (prop("FilterName", "Calc Office Open XML"),))
    finally:
        doc.close(True)
    result["stored_names"] = {"ods": stored_names(ods, "content.xml"),
                              "xlsx": stored_names(xlsx, "xl/worksheets/sheet1.xml")}
    for kind, path in (("ods", ods), ("xlsx", xlsx)):
        doc = open_doc(ctx, path)
        try:
            sheet = doc.Sheets.getByIndex(0)
            result[kind + "_load"] = read(sheet, where)
            doc.calculateAll()
            result[kind] = read(sheet, where)
        finally:
            doc.close(True)
    return result


def cmd_descriptions(ctx: Any, payload: Any) -> Dict[str, Any]:
    fd = ctx.ServiceManager.createInstanceWithContext("com.sun.star.sheet.FunctionDescriptions", ctx)
    out = {}
    for i in range(fd.getCount()):
        d = {p.Name: p.Value for p in fd.getByIndex(i)}
        if str(d.get("Name", "")).upper().startswith("RD."):
            out[d["Name"]] = {"description": d.get("Description"), "category": d.get("Category"),
                              "arguments": [[a.Name, a.Description] for a in d.get("Arguments") or ()]}
    return out


def _bench_doc(ctx: Any, job: Dict[str, Any]) -> Tuple[Any, Any]:
    doc = new_doc(ctx)
    doc.enableAutomaticCalculation(False)  # the first calculateAll is then a cold one
    sh = doc.Sheets.getByIndex(0)
    if job.get("inputs"):
        grid = job["inputs"]
        sh.getCellRangeByName(address(0, INPUT_COL, len(grid), len(grid[0]))).setDataArray(
            tuple(tuple(r) for r in grid))
    formulas = job["formulas"]
    sh.getCellRangeByName(address(0, 0, len(formulas), 1)).setFormulaArray(tuple((f,) for f in formulas))
    for arr in job.get("array_formulas", ()):
        sh.getCellRangeByName(arr[0]).setArrayFormula(arr[1])
    return doc, sh


def cmd_bench(ctx: Any, payload: Dict[str, Any]) -> Dict[str, Any]:
    """Time full recalculations of a document filled with each job's formulas.

    ``passes`` times over all jobs (so a burst of load elsewhere on the machine is unlikely to hit
    one job in every pass): a fresh hidden document with automatic calculation off, one cold
    ``calculateAll``, then ``repeat`` warm ones; the best warm time and the first pass's cold time are kept.
    Only one benchmark document is open at a time.
    """
    out: Dict[str, Any] = {}
    for _ in range(payload.get("passes", 3)):
        for job in payload["jobs"]:
            doc, sh = _bench_doc(ctx, job)
            try:
                t0 = time.perf_counter()
                doc.calculateAll()
                cold = time.perf_counter() - t0
                warm = []
                for _ in range(job.get("repeat", 3)):
                    t0 = time.perf_counter()
                    doc.calculateAll()
                    warm.append(time.perf_counter() - t0)
                first = sh.getCellByPosition(0, 0)
                rec = out.setdefault(job["name"], {"cold_seconds": cold, "seconds": min(warm),
                                                   "cells": len(job["formulas"]), "first": first.getString(),
                                                   "error": first.getError()})
                # cold: the first pass only (later passes find the add-in's caches filled by it)
                rec["seconds"] = min(rec["seconds"], min(warm))
            finally:
                doc.close(True)
    return out


def main() -> int:
    command, port = sys.argv[1], int(sys.argv[2])
    payload = None if sys.argv[3] == "-" else json.loads(Path(sys.argv[3]).read_text(encoding="utf-8"))
    if command == "terminate":
        try:
            ctx = lo.connect(port, timeout=3.0)
            desktop(ctx).terminate()
        except Exception:  # already gone or the bridge closed while quitting
            pass
        print(json.dumps({"terminated": True}))
        return 0
    ctx = lo.connect(port, timeout=90.0)
    if command == "install":
        result: Any = {"version": lo.install_extension(ctx, Path(payload))}
    elif command == "descriptions":
        result = cmd_descriptions(ctx, payload)
    elif command == "evaluate":
        result = cmd_evaluate(ctx, payload)
    elif command == "bench":
        result = cmd_bench(ctx, payload)
    else:
        raise SystemExit(f"unknown command {command!r}")
    print(json.dumps(result))
    return 0


if __name__ == "__main__":
    sys.exit(main())
