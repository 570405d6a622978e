"""A real LibreOffice whose Python has no numpy loads the numpy bundled in the .oxt (issue 11).

One extra headless soffice, with its own throwaway profile, runs this machine's system Python 3.11
(as LibreOffice's Debian build does) with Debian's numpy and scipy hidden: a ``sitecustomize`` on
``PYTHONPATH`` puts a meta-path finder first that refuses ``numpy`` and ``scipy`` from
/usr/lib/python3/dist-packages only (uno lives there too, so the folder itself stays on sys.path).
The ``linux_x86_64-cp311`` build is deployed into that soffice as a bundled extension (the
``-env:BUNDLED_EXTENSIONS`` folder LibreOffice synchronises at start), so one start suffices; then
RD.DIAGNOSTICS must show the bundled numpy (version from the lock, path inside the extension) and
real functions must equal the engine called directly in /usr/bin/python3 (Debian's numpy there).
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path
from typing import Any, Dict

import harness
import install as lo
import pytest
from cases import BY_ID, check

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "packaging"))
import bundled  # noqa: E402
import functions  # noqa: E402
import package  # noqa: E402

pytestmark = pytest.mark.libreoffice
TARGET = "linux_x86_64-cp311"
HIDDEN = "/usr/lib/python3/dist-packages"
REAL_CASES = ("age-slope", "isochron-mswd", "isochron-block", "mean-weighted", "ellipse")

SITECUSTOMIZE = textwrap.dedent(f'''
    """Test-only: hide Debian's numpy and scipy from this Python (tests/integration/test_bundled_numpy.py)."""
    import importlib.machinery
    import sys

    HIDDEN = {HIDDEN!r}


    class HideDistributionNumpy:
        """Find numpy/scipy anywhere but in the system's dist-packages folders (HIDDEN and, e.g., a stray
        /usr/lib/python3.11/dist-packages/numpy); refuse them when only those have them."""

        @classmethod
        def find_spec(cls, name, path=None, target=None):
            if name.partition(".")[0] not in ("numpy", "scipy"):
                return None
            where = [p for p in (sys.path if path is None else path)
                     if not (str(p).startswith("/usr/lib/python3") and str(p).rstrip("/").endswith("dist-packages"))]
            spec = importlib.machinery.PathFinder.find_spec(name, where)
            if spec is None:
                raise ModuleNotFoundError(
                    f"No module named {{name!r}} (hidden from the system's dist-packages by the test)", name=name)
            return spec


    sys.meta_path.insert(0, HideDistributionNumpy)
    for _dir in sys.path[1:]:  # then whatever sitecustomize this Python has of its own
        _own = _dir + "/sitecustomize.py"
        try:
            with open(_own, encoding="utf-8") as _fh:
                exec(compile(_fh.read(), _own, "exec"), {{"__name__": "sitecustomize"}})
            break
        except OSError:
            continue
''')


class HiddenNumpyOffice(harness.Office):
    """harness.Office with the bundled-extension folder and the numpy-hiding PYTHONPATH."""

    def __init__(self, workdir: Path, extensions: Path, hide: Path, log: Path) -> None:
        super().__init__(workdir)
        self.extensions, self.hide, self.rd_log = extensions, hide, log

    def start(self) -> HiddenNumpyOffice:
        self.profile.mkdir(parents=True, exist_ok=True)
        env = lo.soffice_environment()
        env.update(PYTHONPATH=str(self.hide), RATIODESK_LOG=str(self.rd_log))
        cmd = [lo.soffice_binary(), "--headless", "--invisible", "--norestore", "--nologo", "--nodefault",
               "--nolockcheck", f"-env:UserInstallation={self.profile.resolve().as_uri()}",
               f"-env:BUNDLED_EXTENSIONS={self.extensions.resolve().as_uri()}",
               f"--accept=socket,host=127.0.0.1,port={self.port};urp;"]
        with open(self.log, "ab") as out:
            self.proc = subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=out, stderr=out,
                                         start_new_session=True, env=env)
        return self


def _arg(a: Any) -> Dict[str, Any]:
    if a is None:
        return {"t": "omit"}
    if hasattr(a, "grid"):
        return {"t": "range", "grid": [list(r) for r in a.grid]}
    return {"t": "lit", "v": a.value}


def _payload(ids, expected, outdir: Path) -> Dict[str, Any]:
    cases = []
    for cid in ids:
        c = BY_ID[cid]
        want = expected.get(cid) or [[None]]
        rows, cols = (len(want), max(len(r) for r in want)) if c.array else (1, 1)
        cases.append({"id": cid, "display": functions.BY_METHOD[c.method].display,
                      "args": [_arg(a) for a in c.args], "rows": rows, "cols": cols, "array": rows * cols > 1})
    return {"cases": cases, "outdir": str(outdir)}


def _require_libreoffice() -> None:
    missing = harness.why_unavailable()
    if missing is not None:
        if bundled.under_ci():
            pytest.fail(f"CI=true but the LibreOffice integration tests cannot run: {missing}")
        pytest.skip(f"LIBREOFFICE INTEGRATION TESTS SKIPPED: {missing}")


@pytest.fixture(scope="module")
def expected():
    """Every case computed by the engine directly in /usr/bin/python3 (Debian's numpy, not hidden there)."""
    _require_libreoffice()
    script = Path(__file__).with_name("expected.py")
    out = subprocess.run([harness.SYSTEM_PYTHON, str(script)], capture_output=True, text=True, check=True)
    return json.loads(out.stdout)


@pytest.fixture(scope="module")
def evaluated(tmp_path_factory, expected):
    _require_libreoffice()
    rc = subprocess.run([harness.SYSTEM_PYTHON, "-c", "import numpy"], capture_output=True).returncode
    assert rc == 0, f"{harness.SYSTEM_PYTHON} has no numpy: this test proves hiding one, so it needs one"
    work = tmp_path_factory.mktemp("bundled-lo")
    oxt = bundled.build(TARGET, work / "dist")
    ext = work / "extensions"
    bundled.unpack(oxt, ext / "ratiodesk")
    hide = work / "hide"
    hide.mkdir()
    (hide / "sitecustomize.py").write_text(SITECUSTOMIZE, encoding="utf-8")
    log = work / "ratiodesk.log"
    off = HiddenNumpyOffice(work, ext, hide, log)
    ids = ("diagnostics",) + REAL_CASES
    expected = dict(expected)
    expected["diagnostics"] = [["", ""]] * 14
    try:
        off.start()
        got = off.run("evaluate", _payload(ids, expected, work))
    finally:
        off.stop()
        off.cleanup()
    diag = {r[0]: r[1] for r in got["live"]["diagnostics"]["data"]}
    print("\nRD.DIAGNOSTICS in the soffice without Debian's numpy:")
    for k, v in diag.items():
        print(f"  {k:20} {v}")
    return {"got": got, "diag": diag, "root": ext / "ratiodesk", "log": log.read_text(encoding="utf-8")
            if log.exists() else "", "oxt": oxt}


def test_the_bundled_numpy_is_the_one_loaded(evaluated):
    d = evaluated["diag"]
    pinned = package.read_lock()["targets"][TARGET]["numpy"]
    vendor = str(evaluated["root"] / "pythonpath" / "ratiodesk_vendor")
    assert d["build_target"] == TARGET, d
    assert d["numpy"] == pinned, d
    assert d["numpy_path"] == os.path.join(vendor, "numpy"), d
    assert d["numpy_source"] == "bundled with RatioDesk", d
    assert d["python_executable"] == harness.SYSTEM_PYTHON or d["python_prefix"] == "/usr", d
    log = evaluated["log"]
    assert "import numpy failed" in log and "hidden from the system's dist-packages by the test" in log, log[-2000:]
    assert f"numpy {pinned} loaded from {vendor}/numpy/__init__.py (bundled with RatioDesk" in log, log[-2000:]


def test_real_functions_work_with_the_bundled_numpy(evaluated, expected):
    status = evaluated["diag"]["status"]
    if status != "ok":
        pytest.fail(f"the engine does not load with the bundled numpy (no scipy): RD.DIAGNOSTICS says {status!r}")
    problems = []
    for cid in REAL_CASES:
        got = evaluated["got"]["live"][cid]
        p = check(BY_ID[cid], tuple(tuple(r) for r in got["data"]), want=tuple(map(tuple, expected[cid])))
        if p:
            problems.append(f"{cid}: {p} (formula {got['formula']})")
    assert not problems, "\n".join(problems)
