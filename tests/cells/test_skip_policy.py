"""Without LibreOffice the integration tests skip loudly; under CI=true that absence fails the run."""
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _run(ci: str):
    env = dict(os.environ, RATIODESK_PRETEND_NO_LIBREOFFICE="1", CI=ci)
    return subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider",
                           "tests/integration/test_calc.py::test_installed_version"],
                          cwd=ROOT, env=env, capture_output=True, text=True, timeout=120)


def test_absent_libreoffice_skips_loudly():
    out = _run("false")
    assert out.returncode == 0, out.stdout + out.stderr
    assert "1 skipped" in out.stdout
    assert "LibreOffice integration tests NOT RUN" in out.stdout


def test_absent_libreoffice_fails_under_ci():
    out = _run("true")
    assert out.returncode != 0
    assert "CI=true but the LibreOffice integration tests cannot run" in out.stdout
