"""The Linux proof of issue 11: the ``linux_x86_64-cp38`` extension in a bare Python 3.8.

Built with its real pinned numpy wheel, unpacked, and run in ``python3.8 -I -S`` (no site-packages,
so no numpy of its own) with the extension's ``pythonpath/`` appended to sys.path, as LibreOffice
7.x's own Python would run it: every shared case of tests/cells/cases.py (every cell function of
the table, with real arguments) must give the same cells as the system build in the venv (numbers
equal or within 1e-12 relative, text identical). The wheel comes from the cache or PyPI; without
either, and without a Python 3.8, the test skips loudly (fails under CI=true).
"""
import ast
import json
import os
import subprocess
import sys
from pathlib import Path

import bundled
import functions
import package
import pytest
from cases import CASES, as_delivered

TARGET = "linux_x86_64-cp38"
RUNNER = Path(__file__).with_name("run_cells.py")
#: Every case, the two likelihood optima included (excess variance of a line, external scatter of a mean:
#: they stop on the root of the gradient, not on a comparison of rounded values, so numpy 1.24 and 2.x agree).
REL = 1e-12
pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the Linux proof runs on Linux")


def _run(python, flags, pythonpath, calls_file, out, log):
    proc = subprocess.run([python, *flags, str(RUNNER), str(pythonpath), str(calls_file), str(out)],
                          capture_output=True, text=True, timeout=900, cwd=out.parent,
                          env={"RATIODESK_LOG": str(log), "PATH": os.environ.get("PATH", "/usr/bin:/bin")})
    assert proc.returncode == 0, f"{python} {' '.join(flags)} failed:\n{proc.stderr[-4000:]}"
    r = json.loads(out.read_text(encoding="utf-8"))
    r["diag"] = dict(r["diagnostics"])
    r["log"] = log.read_text(encoding="utf-8") if log.exists() else ""
    return r


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    py38 = bundled.python38()
    if not py38 or not os.path.exists(py38):
        bundled.prerequisite_missing("no CPython 3.8 (pyenv 3.8.x, python3.8 on PATH or $RATIODESK_PYTHON38)")
    work = tmp_path_factory.mktemp("py38")
    oxt = bundled.build(TARGET, work / "dist")
    system = package.build(work / "dist")
    calls = [(c.id, c.method, tuple(as_delivered(c.method, c.args))) for c in CASES]
    text = repr(calls)
    assert ast.literal_eval(text) == calls, "the delivered arguments must survive repr/literal_eval exactly"
    calls_file = work / "calls.txt"
    calls_file.write_text(text, encoding="utf-8")
    b = bundled.unpack(oxt, work / "bundled")
    s = bundled.unpack(system, work / "system")
    return {
        "oxt": oxt, "root": b, "calls": calls,
        "bundled": _run(py38, ["-I", "-S"], b / "pythonpath", calls_file, work / "bundled.json", work / "b.log"),
        "system": _run(sys.executable, ["-I"], s / "pythonpath", calls_file, work / "system.json", work / "s.log"),
    }


def test_the_bare_python_has_no_numpy_of_its_own(runs):
    assert runs["bundled"]["numpy_before"] is None


def test_the_bundled_numpy_is_loaded(runs):
    d = runs["bundled"]["diag"]
    pinned = package.read_lock()["targets"][TARGET]["numpy"]
    vendor = str(runs["root"] / "pythonpath" / "ratiodesk_vendor")
    assert d["python"].startswith("3.8.") and d["build_target"] == TARGET
    assert d["numpy"] == pinned, d
    assert d["numpy_path"] == os.path.join(vendor, "numpy") and d["numpy_source"] == "bundled with RatioDesk"
    assert f"numpy {pinned} loaded from {vendor}" in runs["bundled"]["log"]
    assert os.path.getsize(runs["oxt"]) <= package.MAX_OXT_BYTES


def test_every_table_function_is_called(runs):
    assert {m for _, m, _ in runs["calls"]} == {f.method for f in functions.FUNCTIONS}


def _close(a, b):
    if isinstance(a, float) and isinstance(b, float):
        return a == b or abs(a - b) <= REL * max(abs(a), abs(b))
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_close(x, y) for x, y in zip(a, b))
    return type(a) is type(b) and a == b


def _worst(a, b):
    """The largest relative difference between two results (for the failure message)."""
    if isinstance(a, float) and isinstance(b, float):
        return 0.0 if a == b else abs(a - b) / max(abs(a), abs(b))
    if isinstance(a, list) and isinstance(b, list) and len(a) == len(b):
        return max([_worst(x, y) for x, y in zip(a, b)] or [0.0])
    return 0.0 if a == b else float("inf")


def test_same_cells_as_the_system_build(runs):
    sysd, bund = runs["system"], runs["bundled"]
    assert sysd["diag"]["status"] == "ok", f"the system build does not run in the venv: {sysd['diag']['status']}"
    status = bund["diag"]["status"]
    if status != "ok":
        tail = "\n".join(bund["log"].strip().splitlines()[-12:])
        pytest.fail(f"the engine is not ready for the bundled Python 3.8 build: RD.DIAGNOSTICS says {status!r}\n"
                    f"(the engine must import on Python 3.8 with numpy {bund['diag']['numpy']} and without scipy)\n"
                    f"log:\n{tail}")
    differ = []
    for case_id, _, _ in runs["calls"]:
        if case_id == "diagnostics":
            continue
        got, want = bund["results"][case_id], sysd["results"][case_id]
        if not _close(got, want):
            differ.append(f"{case_id} (largest relative difference {_worst(got, want):.2g}): Python 3.8 bundled "
                          f"{got!r:.300}\n    system {want!r:.300}")
    assert not differ, f"{len(differ)} of {len(runs['calls'])} cases differ:\n" + "\n".join(differ)
