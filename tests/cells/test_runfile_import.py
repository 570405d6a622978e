"""Run-file import (menu RatioDesk ▸ Import run file into Measured…): the pure parser, without UNO.

Issue 10, item 5: the delimiter used to be sniffed from the header line only, so standard CSV
quoting shifted columns (``"HM-07 ""rim"", grt",Nd,0.5121,0.00001`` put the element into the ratio
column), and fields beyond the header were dropped silently. The reference for what a row holds is
RFC 4180 (Shafranovich 2005, "Common Format and MIME Type for CSV Files", section 2): a field with
the delimiter, a quote or a line break is enclosed in double quotes (rule 6), a quote inside it is
doubled (rule 7), and every record has the same number of fields (rule 4) — so the expected values
below are written out by hand from those rules, not produced by a CSV library.
"""
import subprocess
import sys
from pathlib import Path

import commands
import pytest
from commands import RunFileError, parse_run_file

MACROS = Path(commands.__file__).resolve().parent
HEADER = "analysis,element,143Nd/144Nd,143Nd/144Nd 1s"
ISSUE_ROW = '"HM-07 ""rim"", grt",Nd,0.5121,0.00001'
#: What RFC 4180 says ISSUE_ROW holds: four fields, the first with its doubled quotes made single.
ISSUE_RUN = {"analysis": 'HM-07 "rim", grt', "element": "Nd", "r1_name": "143Nd/144Nd", "r1": 0.5121,
             "r1_sigma_1s": 0.00001}
PLAIN_RUN = {"analysis": "HM-08", "element": "Nd", "r1_name": "143Nd/144Nd", "r1": 0.5122, "r1_sigma_1s": 0.00002}


def test_the_issue_row_keeps_its_columns():
    runs = parse_run_file("\n".join([HEADER, ISSUE_ROW, "HM-08,Nd,0.5122,0.00002"]) + "\n")
    assert runs == [ISSUE_RUN, PLAIN_RUN]


def test_the_issue_row_alone_after_the_header():
    assert parse_run_file(HEADER + "\n" + ISSUE_ROW + "\n") == [ISSUE_RUN]


def test_bom_and_crlf():
    text = "\ufeff" + "\r\n".join([HEADER, ISSUE_ROW, "HM-08,Nd,0.5122,0.00002"]) + "\r\n"
    assert parse_run_file(text) == [ISSUE_RUN, PLAIN_RUN]


def test_semicolon_file():
    text = ("analysis;element;143Nd/144Nd;143Nd/144Nd 1s\n"
            '"HM-07 ""rim""; grt";Nd;0.5121;0.00001\n'
            "HM-08;Nd;0.5122;0.00002\n")
    assert parse_run_file(text) == [dict(ISSUE_RUN, analysis='HM-07 "rim"; grt'), PLAIN_RUN]


def test_tab_file():
    text = ("analysis\telement\t143Nd/144Nd\t143Nd/144Nd 1s\n"
            '"HM-07\t""rim"", grt"\tNd\t0.5121\t0.00001\n'
            "HM-08\tNd\t0.5122\t0.00002\n")
    assert parse_run_file(text) == [dict(ISSUE_RUN, analysis='HM-07\t"rim", grt'), PLAIN_RUN]


def test_comma_file_with_semicolons_in_text():
    text = HEADER + "\nHM-07;a,Nd,0.5121,0.00001\nHM-08,Nd,0.5122,0.00002\n"
    assert parse_run_file(text) == [dict(ISSUE_RUN, analysis="HM-07;a"), PLAIN_RUN]


def test_one_column_file_falls_back_to_comma():
    runs = parse_run_file("analysis\nHM-07\nHM-08\n")
    assert runs == [{"analysis": "HM-07"}, {"analysis": "HM-08"}]


# ------------------------------------------------------------------ rows that differ from the header
def test_an_extra_field_is_refused_with_its_line_and_column():
    text = ("# run file\n#map Sample=analysis\n" + HEADER +
            "\nHM-08,Nd,0.5122,0.00002\nHM-07 rim, grt,Nd,0.5121,0.00001\n")
    with pytest.raises(RunFileError) as err:
        parse_run_file(text)
    msg = str(err.value)
    assert msg.startswith("line 5: 5 fields, but the header (line 3) has 4: field 5 ('0.00001') has no column")
    assert "comma must be in double quotes" in msg


def test_a_missing_field_is_refused_naming_the_column():
    with pytest.raises(RunFileError, match=r"^line 3: 3 fields, but the header \(line 1\) has 4: column 4 "
                                           r"\('143Nd/144Nd 1s'\) is missing"):
        parse_run_file(HEADER + "\nHM-08,Nd,0.5122,0.00002\nHM-07,Nd,0.5121\n")


def test_a_bad_row_in_a_semicolon_file_is_named_as_such():
    """The counts differ, so the whole-file sniff fails; the header still tells the delimiter."""
    text = "analysis;element;143Nd/144Nd;143Nd/144Nd 1s\nHM-08;Nd;0.5122;0.00002\nHM-07;Nd;0.5121;0.00001;x\n"
    with pytest.raises(RunFileError, match=r"^line 3: 5 fields, .* field 5 \('x'\) has no column. A field that "
                                           r"contains a semicolon"):
        parse_run_file(text)


def test_an_unclosed_quote_is_refused_at_its_line():
    with pytest.raises(RunFileError, match=r"^line 3: a quoted field starts on this line and is never closed"):
        parse_run_file(HEADER + '\nHM-08,Nd,0.5122,0.00002\n"HM-07 rim,Nd,0.5121,0.00001\nHM-09,Nd,0.5,0.1\n')


def test_text_after_a_closing_quote_is_refused():
    with pytest.raises(RunFileError, match=r'^line 2: text follows the closing quote .* doubled \(""\)'):
        parse_run_file(HEADER + '\n"HM-07" rim,Nd,0.5121,0.00001\n')


def test_a_line_break_inside_quotes_and_the_line_numbers_after_it():
    text = HEADER + '\n"HM-07\n# not a comment",Nd,0.5121,0.00001\n\n# a comment\nHM-08,Nd,0.5122,0.00002,9\n'
    with pytest.raises(RunFileError, match=r"^line 6: 5 fields"):
        parse_run_file(text)
    runs = parse_run_file(text.replace(",9\n", "\n"))
    assert runs == [dict(ISSUE_RUN, analysis="HM-07\n# not a comment"), PLAIN_RUN]


def test_blank_rows_are_no_runs():
    assert parse_run_file(HEADER + "\n,,,\n\nHM-08,Nd,0.5122,0.00002\n") == [PLAIN_RUN]


# ------------------------------------------------------------------ the header
def test_header_errors_name_the_file_line():
    with pytest.raises(RunFileError, match=r"^line 3, column 2: unknown column 'elem'"):
        parse_run_file("# comment\n\nanalysis,elem\nA,Nd\n")


def test_a_repeated_column_is_refused():
    with pytest.raises(RunFileError, match=r"^line 1, column 3: '143Nd/144Nd' gives the same quantity as column 2"):
        parse_run_file("analysis,143Nd/144Nd,143Nd/144Nd\nA,0.5,0.6\n")
    with pytest.raises(RunFileError, match=r"^line 1, column 4: '143Nd/144Nd 1s' gives the same quantity as "
                                           r"column 3 \('143Nd/144Nd 2s'\)"):
        parse_run_file("analysis,143Nd/144Nd,143Nd/144Nd 2s,143Nd/144Nd 1s\nA,0.5,1e-5,5e-6\n")


def test_a_sigma_without_its_ratio_is_refused():
    with pytest.raises(RunFileError, match=r"^line 1, column 3: '146Nd/144Nd 2s' is an uncertainty of 146Nd/144Nd, "
                                           r"but the file has no 146Nd/144Nd column"):
        parse_run_file("analysis,143Nd/144Nd,146Nd/144Nd 2s\nA,0.5,1e-5\n")


def test_a_bad_map_line_names_its_line():
    with pytest.raises(RunFileError, match=r"^line 2: a #map line reads"):
        parse_run_file("analysis,143Nd/144Nd\n#map Sample\nA,0.5\n")


# ------------------------------------------------------------------ values
def test_sigma_levels_are_converted_to_one_sigma_absolute():
    """2σ / 2 and % of the value (common practice), written out by hand."""
    runs = parse_run_file("analysis,143Nd/144Nd,143Nd/144Nd 2s%,146Nd/144Nd,146Nd/144Nd 2s\nA,0.5,0.002,0.72,8e-6\n")
    assert runs[0]["r1_sigma_1s"] == pytest.approx(0.5 * 0.002 / 100 / 2, rel=1e-15)
    assert runs[0]["r2_sigma_1s"] == pytest.approx(4e-6, rel=1e-15)


def test_a_relative_sigma_of_text_names_line_and_columns():
    with pytest.raises(RunFileError, match=r"^line 2, column 3: a relative σ of 143Nd/144Nd, but 143Nd/144Nd "
                                           r"\(column 2\) is 'n.d.'"):
        parse_run_file("analysis,143Nd/144Nd,143Nd/144Nd 1s%\nA,n.d.,0.002\n")


def test_formula_looking_text_stays_text():
    """The live test's file (tests/integration/test_template_live.py): the parser keeps the text as typed."""
    text = ("# invented run file (RatioDesk run-file format)\n#map Sample ID=analysis\n"
            "Sample ID,element,date,143Nd/144Nd,143Nd/144Nd 2s,146Nd/144Nd,146Nd/144Nd 2s\n"
            "SN-99,Nd,2026-05-01,0.5041,4e-6,0.7477,8e-6\n"
            '=HYPERLINK("http://example.invalid"),+Nd,@SUM(1),-0.5,+1e-6,0.7,1e-6\n')
    first, second = parse_run_file(text)
    assert first["analysis"] == "SN-99" and first["r1_sigma_1s"] == 2e-6 and first["r2_sigma_1s"] == 4e-6
    assert second["analysis"] == '=HYPERLINK("http://example.invalid")'
    assert (second["element"], second["run_date"], second["r1"], second["r1_sigma_1s"]) == ("+Nd", "@SUM(1)", -0.5,
                                                                                             5e-7)


def test_the_parser_needs_no_uno():
    code = ("import sys; sys.modules['uno'] = None; sys.modules['unohelper'] = None; sys.path.insert(0, sys.argv[1]);"
            "import commands; print(commands.parse_run_file('analysis;143Nd/144Nd\\nA;0.5\\n'))")
    out = subprocess.run([sys.executable, "-c", code, str(MACROS)], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "[{'analysis': 'A', 'r1_name': '143Nd/144Nd', 'r1': 0.5, 'r1_sigma_1s': ''}]"


def test_a_cycle_file_goes_to_the_cycles_sheet_with_one_value_per_cycle():
    """Issue 12: a file with a 'cycle' column is a cycle file: one row per cycle, no σ columns, for the Cycles
    sheet; text stays text (never a formula)."""
    from commands import run_file_sheet

    text = "analysis,element,cycle,143Nd/144Nd,146Nd/144Nd\nHM-07,Nd,1,0.51210,0.7219\nHM-07,Nd,2,0.51211,0.7218\n" \
           "=HYPERLINK(1),Nd,3,0.51212,0.7220\n"
    rows = parse_run_file(text)
    assert run_file_sheet(rows) == "Cycles"
    assert rows[0] == {"analysis": "HM-07", "element": "Nd", "cycle": 1.0, "r1_name": "143Nd/144Nd", "r1": 0.5121,
                       "r2_name": "146Nd/144Nd", "r2": 0.7219}
    assert rows[2]["analysis"] == "=HYPERLINK(1)"
    assert run_file_sheet(parse_run_file(HEADER + "\n" + ISSUE_ROW + "\n")) == "Measured"
    with pytest.raises(RunFileError, match="line 1, column 5: '143Nd/144Nd 1s' in a cycle file"):
        parse_run_file("analysis,element,cycle,143Nd/144Nd,143Nd/144Nd 1s\nHM-07,Nd,1,0.5121,0.00001\n")
