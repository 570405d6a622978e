"""Helpers of the bundled-numpy tests (tests/packaging, tests/integration/test_bundled_numpy.py).

A missing prerequisite (PyPI unreachable and the wheel not cached, no Python 3.8) skips the test
loudly; under ``CI=true`` it fails, as tests/integration/conftest.py treats a missing LibreOffice.
"""
from __future__ import annotations

import glob
import os
import shutil
import zipfile
from pathlib import Path
from typing import NoReturn, Optional

import package
import pytest


def under_ci() -> bool:
    return os.environ.get("CI", "").strip().lower() == "true"


def prerequisite_missing(reason: str) -> NoReturn:
    """Fail under CI=true, else skip with a reason that stands out in the summary."""
    if under_ci():
        pytest.fail(f"CI=true but a bundled-numpy test cannot run: {reason}")
    pytest.skip(f"BUNDLED-NUMPY TEST NOT RUN: {reason}")


def build(target: str, out: Path) -> Path:
    """package.build(target), a missing network being a missing prerequisite (any other refusal fails)."""
    try:
        return package.build(out, target)
    except package.WheelUnavailable as exc:
        prerequisite_missing(f"the numpy wheel for {target} is neither cached in {package.wheel_cache()} nor "
                             f"downloadable: {exc}")


def unpack(oxt: Path, dest: Path) -> Path:
    """Unzip an .oxt as LibreOffice does; return the folder."""
    with zipfile.ZipFile(oxt) as zf:
        zf.extractall(dest)
    return dest


def python38() -> Optional[str]:
    """A CPython 3.8 interpreter: $RATIODESK_PYTHON38, pyenv's 3.8.x, or python3.8 on PATH."""
    env = os.environ.get("RATIODESK_PYTHON38")
    if env:
        return env
    root = os.environ.get("PYENV_ROOT") or os.path.join(os.path.expanduser("~"), ".pyenv")
    found = sorted(glob.glob(os.path.join(root, "versions", "3.8.*", "bin", "python3.8")))
    return found[-1] if found else shutil.which("python3.8")
