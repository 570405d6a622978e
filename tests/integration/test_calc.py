"""RatioDesk in a real headless LibreOffice: listing, evaluation, save and reopen.

Every case of tests/cells/cases.py is typed into a sheet as the technician would type it; the
cell results must equal the engine called directly (relative 1e-12), live, after saving as .ods
and .xlsx, and after reopening and recalculating.
"""
import json
import subprocess
import zipfile
from pathlib import Path

import functions
import pytest
from cases import CASES, MARK, Formula, L, Msg, R, check, grid_of

pytestmark = pytest.mark.libreoffice


def _arg(a):
    if a is None:
        return {"t": "omit"}
    if isinstance(a, L):
        return {"t": "lit", "v": a.value}
    assert isinstance(a, R)
    return {"t": "range", "grid": [[{"f": v.formula} if isinstance(v, Formula) else v for v in r] for r in a.grid]}


def _payload(outdir):
    cases = []
    for c in CASES:
        if c.array and not isinstance(c.expect, Msg):
            g = grid_of(c.expect())
            rows, cols = len(g), len(g[0])
        else:
            rows, cols = 1, 1
        cases.append({"id": c.id, "display": functions.BY_METHOD[c.method].display, "args": [_arg(a) for a in c.args],
                      "rows": rows, "cols": cols, "array": c.array and rows * cols > 1})
    return {"cases": cases, "outdir": str(outdir)}


@pytest.fixture(scope="module")
def evaluated(office, tmp_path_factory):
    return office.run("evaluate", _payload(tmp_path_factory.mktemp("books")))


@pytest.fixture(scope="module")
def expected(office):
    """The engine called directly in LibreOffice's own Python (/usr/bin/python3: same numpy/scipy)."""
    script = Path(__file__).with_name("expected.py")
    out = subprocess.run(["/usr/bin/python3", str(script)], capture_output=True, text=True, check=True)
    return json.loads(out.stdout)


def test_installed_version(office):
    assert office.version == functions_version()


def functions_version():
    import cells
    return cells.VERSION


def test_oxt_manifest_lists_only_files_inside(office):
    with zipfile.ZipFile(office.oxt) as zf:
        names = set(zf.namelist())
        manifest = zf.read("META-INF/manifest.xml").decode()
    import re
    listed = re.findall(r'manifest:full-path="([^"]+)"', manifest)
    assert listed and all(n in names for n in listed)
    assert {"ratiodesk.rdb", "ratiodesk.components", "CalcAddIns.xcu"} <= set(listed)


def test_every_function_is_listed_with_its_descriptions(office):
    got = office.run("descriptions")
    for f in functions.FUNCTIONS:
        assert f.display in got, f"{f.display} missing from the Function Wizard"
        d = got[f.display]
        assert d["description"] == f.description
        assert [a[0] for a in d["arguments"]] == [a.name for a in f.args]
        assert [a[1] for a in d["arguments"]] == [a.description for a in f.args]
    assert set(got) == {f.display for f in functions.FUNCTIONS}


@pytest.mark.parametrize("stage", ["live", "ods_load", "ods", "xlsx_load", "xlsx"])
def test_every_case_matches_the_engine(evaluated, expected, stage):
    problems = []
    for c in CASES:
        got = evaluated[stage][c.id]
        want = expected[c.id]
        p = check(c, tuple(tuple(r) for r in got["data"]), want=None if want is None else tuple(map(tuple, want)))
        if p:
            problems.append(f"{c.id}: {p} (formula {got['formula']}, error code {got['error']})")
    assert not problems, "\n".join(problems)


def test_files_store_internal_names(evaluated):
    n = len(CASES)
    assert evaluated["stored_names"]["ods"] >= n
    assert evaluated["stored_names"]["xlsx"] >= n


def test_messages_are_text_not_error_codes(evaluated):
    for c in CASES:
        if isinstance(c.expect, Msg):
            got = evaluated["live"][c.id]
            assert got["error"] == 0 and str(got["data"][0][0]).startswith(MARK)
