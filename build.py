#!/usr/bin/env python3
"""RatioDesk build driver (standard library only).

    python3 build.py demo       reduce the demo workbook with the engine, write report + results
    python3 build.py test       lint + every test (LibreOffice integration tests included when present)
    python3 build.py bench      benchmarks (speed and memory targets live here, never in tests)
    python3 build.py oxt        build dist/ratiodesk-<version>.oxt
    python3 build.py install    build the .oxt and install it into this user's LibreOffice
    python3 build.py template   write the template and demo workbooks (.ods, .xlsx) to dist/

Each command first makes (or refreshes) the virtual environment ``.venv`` with the project and
its development tools installed, so a fresh clone needs nothing but Python >= 3.9.
"""
from __future__ import annotations

import hashlib
import os
import subprocess
import sys
import venv
from pathlib import Path

ROOT = Path(__file__).resolve().parent
VENV = ROOT / ".venv"
PY = VENV / ("Scripts/python.exe" if os.name == "nt" else "bin/python")
STAMP = VENV / ".ratiodesk-installed"


def run(*cmd: object, check: bool = True, **kw: object) -> int:
    print("+", " ".join(str(c) for c in cmd), flush=True)
    rc = subprocess.call([str(c) for c in cmd], cwd=kw.pop("cwd", ROOT), **kw)  # type: ignore[arg-type]
    if check and rc != 0:
        sys.exit(rc)
    return rc


def bootstrap() -> None:
    """Create .venv and install the project with its dev extras when pyproject.toml changed."""
    want = hashlib.sha256((ROOT / "pyproject.toml").read_bytes()).hexdigest()
    if PY.exists() and STAMP.exists() and STAMP.read_text().strip() == want:
        return
    if not PY.exists():
        print(f"creating {VENV}", flush=True)
        venv.EnvBuilder(with_pip=True).create(VENV)
    run(PY, "-m", "pip", "install", "--quiet", "--disable-pip-version-check", "-e", ".[dev]")
    STAMP.write_text(want)


def cmd_demo(args: list) -> int:
    return run(PY, "-m", "reduction", "demo", *args, check=False)


def cmd_oxt(args: list) -> int:
    """Build the extension: ``oxt [--target system|PLATFORM-cpXY|all] [--update-lock] [--out DIR]``.

    Without ``--target`` the system build ``dist/ratiodesk-<version>.oxt`` (no numpy inside);
    ``--target win_amd64-cp310`` etc. bundles the numpy wheel pinned in macros/numpy-wheels.lock
    (see macros/package.py; ``--help`` lists every option). The arguments are macros/package.py's.
    """
    return run(PY, ROOT / "macros" / "package.py", *args, check=False)


def cmd_install(args: list) -> int:
    rc = cmd_oxt([])
    if rc:
        return rc
    # Installing talks to LibreOffice through UNO, importable only from the system Python.
    return run("/usr/bin/python3", ROOT / "macros" / "install.py", *args, check=False)


def cmd_template(args: list) -> int:
    return run(PY, ROOT / "templates" / "build_template.py", *args, check=False)


def cmd_test(args: list) -> int:
    rc = run(PY, "-m", "ruff", "check", ".", check=False)
    if rc:
        print("ruff found problems (above); fix them before the tests run", flush=True)
        return rc
    if (ROOT / "macros" / "package.py").exists():
        rc = cmd_oxt([])
        if rc:
            return rc
    rc = run(PY, "-m", "pytest", *(args or ["tests"]), check=False)
    if rc == 5:
        print("pytest collected no tests: that is a failure here, not a pass", flush=True)
        return 1
    if rc or args:
        return rc
    # the engine on the oldest and newest supported Python (issue 11); needs pyenv's Pythons
    pythons = compat_pythons()
    if not pythons:
        print(f"no pyenv Python {COMPAT_RANGE[0]}-{COMPAT_RANGE[1]} found: the compatibility runs are missing",
              flush=True)
        return 1 if os.environ.get("CI") else 0
    for ver, exe in pythons:
        rc = compat_run(ver, exe)
        if rc:
            print(f"engine tests failed on Python {ver[0]}.{ver[1]}", flush=True)
            return rc
    return 0


#: Python versions the engine supports (issue 11: LibreOffice bundles 3.8 in its 7.x builds, 3.13 is current)
COMPAT_RANGE = ((3, 8), (3, 13))


def compat_pythons() -> list:
    """The oldest and the newest supported CPython that pyenv holds on this machine (PYENV_ROOT or ~/.pyenv)."""
    root = Path(os.environ.get("PYENV_ROOT", Path.home() / ".pyenv")) / "versions"
    found = {}
    for d in sorted(root.glob("3.*")) if root.is_dir() else []:
        parts = d.name.split(".")
        if len(parts) < 2 or not (parts[0].isdigit() and parts[1].isdigit()):
            continue
        ver = (int(parts[0]), int(parts[1]))
        exe = d / "bin" / "python3"
        if COMPAT_RANGE[0] <= ver <= COMPAT_RANGE[1] and exe.exists():
            found[ver] = exe
    if not found:
        return []
    return [(v, found[v]) for v in sorted({min(found), max(found)})]


def compat_run(ver: tuple, exe: Path) -> int:
    """The engine tests (tests/engine, no LibreOffice) in a venv of another Python."""
    env_dir = ROOT / f".venv-py{ver[0]}{ver[1]}"
    py = env_dir / "bin" / "python"
    stamp = env_dir / ".ratiodesk-installed"
    want = hashlib.sha256((ROOT / "pyproject.toml").read_bytes()).hexdigest()
    if not (py.exists() and stamp.exists() and stamp.read_text().strip() == want):
        if not py.exists():
            run(exe, "-m", "venv", env_dir)
        run(py, "-m", "pip", "install", "--quiet", "--disable-pip-version-check", "-e", ".[dev]")
        stamp.write_text(want)
    print(f"engine tests on Python {ver[0]}.{ver[1]} ({exe})", flush=True)
    rc = run(py, "-m", "pytest", "-q", "-p", "no:cacheprovider", "tests/engine", check=False)
    return 1 if rc == 5 else rc


def cmd_bench(args: list) -> int:
    """Run ``tests/bench/bench_*.py`` (those whose name contains an argument, when given) one after the other.

    Each prints its figures next to their targets with PASS/FAIL and exits 1 when a target is missed; this
    exits 1 when any benchmark did, after a last line naming them.
    """
    benches = sorted((ROOT / "tests" / "bench").glob("bench_*.py"))
    if args:
        benches = [b for b in benches if any(a in b.name for a in args)]
    if not benches:
        print(f"no benchmark matches {' '.join(args)}", flush=True)
        return 2
    failed = []
    for b in benches:
        print(f"\n=== {b.name} ===", flush=True)
        if run(PY, b, check=False) != 0:
            failed.append(b.stem)
    print(f"\nbenchmarks failed ({len(failed)} of {len(benches)}): {', '.join(failed) or 'none'}", flush=True)
    return 1 if failed else 0


COMMANDS = {"demo": cmd_demo, "test": cmd_test, "bench": cmd_bench, "oxt": cmd_oxt,
            "install": cmd_install, "template": cmd_template}


def main() -> int:
    if len(sys.argv) < 2 or sys.argv[1] not in COMMANDS:
        print(__doc__)
        return 2
    bootstrap()
    return COMMANDS[sys.argv[1]](sys.argv[2:])


if __name__ == "__main__":
    sys.exit(main())
