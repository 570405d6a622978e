"""The batch path: ``ratiodesk reduce`` and ``ratiodesk demo`` without LibreOffice."""
from __future__ import annotations

import copy
import hashlib

import pytest
from openpyxl import load_workbook

import reduction.workbook.demo as demo
from reduction.workbook import (
    FIRST_ROW,
    ISOCHRON_FIRST_Q_ROW,
    ISOCHRON_QUANTITIES,
    ISOCHRON_SUMMARY_COL,
    RESULTS,
    SAMPLES,
    build_layout,
    write_xlsx,
)
from reduction.workbook.batch import reduce_workbook, write_demo_workbook
from reduction.workbook.cli import main

Q = {q: i for i, (q, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}


@pytest.fixture(scope="module")
def book(tmp_path_factory):
    return write_demo_workbook(tmp_path_factory.mktemp("book") / "demo.xlsx")


def test_reduce_writes_results_and_report(book, tmp_path, capsys):
    digest = hashlib.sha256(book.read_bytes()).hexdigest()
    rc = main(["reduce", str(book), "-o", str(tmp_path / "out")])
    assert rc == 0
    out = capsys.readouterr().out
    assert "Sm-Nd isochron:" in out and "wrote" in out
    assert hashlib.sha256(book.read_bytes()).hexdigest() == digest       # the input is never written to
    pdf = (tmp_path / "out" / "report.pdf").read_bytes()
    assert pdf.startswith(b"%PDF") and pdf.count(b"/Type /Page") >= 6
    wb = load_workbook(tmp_path / "out" / "results.xlsx")
    assert "Provenance" in wb.sheetnames
    prov = [[c for c in r if c is not None] for r in wb["Provenance"].iter_rows(values_only=True)]
    flat = " ".join(str(c) for r in prov for c in r)
    assert "RatioDesk" in flat and "LH-SmNd-3" in flat and "decay.Sm147" in flat and "Date (UTC)" in flat
    # values only: no formula anywhere
    for ws in wb.worksheets:
        for row in ws.iter_rows(values_only=True):
            assert not any(isinstance(v, str) and v.startswith("=") for v in row)
    lay = demo.demo_layout()
    r, c = ISOCHRON_FIRST_Q_ROW + Q["age"], ISOCHRON_SUMMARY_COL + 1
    # openpyxl stores floats with 16 significant digits (1 ulp from repr at most)
    assert wb["Isochron"].cell(r, c + 1).value == pytest.approx(lay["Isochron"][(r, c)].value, rel=1e-15)


def test_bad_workbook_exits_nonzero_naming_sheet_row_column(tmp_path, capsys):
    tables = copy.deepcopy(demo.demo_tables())
    tables["Samples"][3]["spike_mass_g"] = "lots"
    path = tmp_path / "bad.xlsx"
    write_xlsx(build_layout(tables, constants=demo.demo_constants(), isochron_selection=demo.demo_selection()), path)
    rc = main(["reduce", str(path), "-o", str(tmp_path / "o")])
    assert rc == 1
    err = capsys.readouterr().err
    col = SAMPLES.letter("spike_mass_g")
    assert f"Samples, row {FIRST_ROW + 3}, column {col} (Spike mass (g)): is not a number: 'lots'" in err
    assert not (tmp_path / "o" / "results.xlsx").exists()


def test_reduce_reads_ods_the_same_as_xlsx(tmp_path):
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "templates"))
    from odswriter import write_ods

    lay = demo.demo_layout()
    write_ods(lay, tmp_path / "d.ods")
    write_xlsx(lay, tmp_path / "d.xlsx")
    a = reduce_workbook(tmp_path / "d.ods", tmp_path / "a").evaluation.cells
    b = reduce_workbook(tmp_path / "d.xlsx", tmp_path / "b").evaluation.cells
    assert a == b


def test_monte_carlo_shows_progress_and_agrees_with_linear(book, tmp_path):
    seen = []
    out = reduce_workbook(book, tmp_path, mc_draws=2000, progress=seen.append)
    mc_lines = [s for s in seen if s.startswith("Monte Carlo")]
    assert len(mc_lines) == len(demo.FRACTIONS) and mc_lines[-1].startswith(f"Monte Carlo {len(demo.FRACTIONS)}/")
    wb = load_workbook(out.results_xlsx)
    rows = list(wb["Monte Carlo"].iter_rows(values_only=True))[1:]
    for r in rows:
        lin, mc = r[3], r[4]
        # seeded Monte Carlo of the same chain: σ agree to the sampling error of 2000 draws (~3 %, 1σ)
        assert mc == pytest.approx(lin, rel=0.15), r


def test_demo_command_writes_into_out_demo(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["demo"]) == 0
    out = capsys.readouterr().out
    for name in ("demo-workbook.xlsx", "results.xlsx", "report.pdf"):
        assert (tmp_path / "out" / "demo" / name).exists()
        assert name in out
    assert "true ages" in out
    assert RESULTS.name == "Results"


def test_provenance_sheet_and_report_carry_how_sigma_was_set(tmp_path):
    """results.xlsx Provenance and the report's reference table show the note/status column; a value
    edited in the workbook is marked as edited (its shipped status no longer describes it)."""
    import shutil
    import subprocess

    from reduction.workbook import PROVENANCE_HEADER, constants_rows, provenance_constant_rows

    path = tmp_path / "d.xlsx"
    write_xlsx(demo.demo_layout(), path)
    reduce_workbook(path, tmp_path / "o")
    wb = load_workbook(tmp_path / "o" / "results.xlsx")
    rows = [tuple(r) for r in wb["Provenance"].iter_rows(values_only=True)]
    assert PROVENANCE_HEADER in [r[:len(PROVENANCE_HEADER)] for r in rows]
    # Soderlund et al. 2004: +/- 0.008e-11 at 2 sigma, the level recalled from memory
    lu = next(r for r in rows if r[0] == "decay.Lu176")
    assert "2 sigma" in lu[4] and "recalled from memory" in lu[4]
    chur = next(r for r in rows if r[0] == "CHUR.143Nd/144Nd")      # Bouvier et al. 2008, status M
    assert "recalled from memory" in chur[4]
    if shutil.which("pdftotext"):
        text = subprocess.run(["pdftotext", "-layout", str(tmp_path / "o" / "report.pdf"), "-"],
                              capture_output=True, text=True, check=True).stdout
        assert "How the 1σ (abs) was set / status" in text and "recalled from memory" in text
    # an edited value is flagged
    edited = [dict(r) for r in constants_rows()]
    k = next(i for i, r in enumerate(edited) if r["key"] == "decay.Sm147")
    edited[k]["value"] = 6.5238e-12
    out = {r[0]: r for r in provenance_constant_rows(edited)}
    assert out["decay.Sm147"][4].startswith("EDITED in this workbook")
    assert not out["decay.Lu176"][4].startswith("EDITED")


def test_report_rows_bounds_the_report_tables_never_results_and_every_warning_is_kept(book, tmp_path, capsys):
    """--report-rows N: the report's per-analysis tables stop at N rows and say so; results.xlsx keeps every
    analysis on Results and every warning on its Warnings sheet; a bad N is refused before anything runs."""
    import shutil
    import subprocess

    from reduction.workbook import KEY_ROW
    from reduction.workbook.batch import WARNINGS_SHEET

    full = reduce_workbook(book, tmp_path / "full")
    cut = reduce_workbook(book, tmp_path / "cut", report_rows=2)
    n = sum(1 for (sheet, _r, c), v in cut.evaluation.cells.items() if sheet == "Results" and c == 0 and v)
    assert n > 2
    wb = load_workbook(cut.results_xlsx, read_only=True)
    ids = [r[0] for r in wb["Results"].iter_rows(min_row=FIRST_ROW, values_only=True) if r and r[0]]
    assert len(ids) == n                                                  # results.xlsx: every analysis
    keys = next(wb["Results"].iter_rows(min_row=KEY_ROW, max_row=KEY_ROW, values_only=True))
    assert keys[0] is not None
    if cut.warnings:
        listed = [r[0] for r in wb[WARNINGS_SHEET].iter_rows(min_row=2, values_only=True)]
        assert listed == list(cut.warnings)
    pages = (tmp_path / "full" / "report.pdf").read_bytes().count(b"/Type /Page")
    assert (tmp_path / "cut" / "report.pdf").read_bytes().count(b"/Type /Page") <= pages
    if shutil.which("pdftotext"):
        text = subprocess.run(["pdftotext", str(tmp_path / "cut" / "report.pdf"), "-"], capture_output=True,
                              text=True, check=True).stdout
        assert f"first 2 of {n}" in text and "results.xlsx" in text
        full_text = subprocess.run(["pdftotext", str(tmp_path / "full" / "report.pdf"), "-"],
                                   capture_output=True, text=True, check=True).stdout
        assert "first 2 of" not in full_text
    assert full.evaluation.cells == cut.evaluation.cells                  # the bound changes the report only
    capsys.readouterr()
    rc = main(["reduce", str(book), "-o", str(tmp_path / "bad"), "--report-rows", "-1"])
    err = capsys.readouterr()
    assert rc != 0 and "report_rows" in err.out + err.err
    assert not (tmp_path / "bad" / "results.xlsx").exists()
