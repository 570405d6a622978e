"""Reusable harness: one headless LibreOffice on 127.0.0.1 with a throwaway profile.

Usable from the venv (start/stop need no ``uno``) and from /usr/bin/python3 (``driver.py``, which
connects and does the LibreOffice work). The process helpers live in macros/install.py, which the
``install`` command uses too.
"""
from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path
from typing import Any, Optional

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "macros"))
import install as lo  # noqa: E402

SYSTEM_PYTHON = "/usr/bin/python3"
DRIVER = Path(__file__).with_name("driver.py")


def why_unavailable() -> Optional[str]:
    """None when LibreOffice and the system Python's uno are present, else what is missing.

    ``RATIODESK_PRETEND_NO_LIBREOFFICE=1`` reports it missing (to test the skip and CI paths).
    """
    if os.environ.get("RATIODESK_PRETEND_NO_LIBREOFFICE") == "1":
        return "RATIODESK_PRETEND_NO_LIBREOFFICE=1 (pretending LibreOffice is absent)"
    if lo.soffice_binary() is None:
        return "LibreOffice (soffice) is not installed"
    if not os.path.exists(SYSTEM_PYTHON):
        return f"{SYSTEM_PYTHON} is missing"
    rc = subprocess.run([SYSTEM_PYTHON, "-c", "import uno"], capture_output=True).returncode
    if rc != 0:
        return f"`{SYSTEM_PYTHON} -c 'import uno'` fails (apt-get install python3-uno)"
    return None


class Office:
    """A running headless LibreOffice; ``run(command, payload)`` asks the driver to work in it."""

    def __init__(self, workdir: Path) -> None:
        self.workdir = Path(workdir)
        self.profile = self.workdir / "profile"
        self.port = lo.free_port()
        self.log = self.workdir / "soffice.log"
        self.proc: Optional[subprocess.Popen] = None

    def start(self) -> Office:
        self.proc = lo.start_soffice(self.profile, self.port, self.log)
        return self

    def run(self, command: str, payload: Any = None, timeout: float = 120.0) -> Any:
        """Run driver.py under the system Python; return the JSON it prints."""
        inp = self.workdir / f"{command}-in.json"
        inp.write_text(json.dumps(payload), encoding="utf-8")
        proc = subprocess.run([SYSTEM_PYTHON, str(DRIVER), command, str(self.port), str(inp)],
                              capture_output=True, text=True, timeout=timeout)
        if proc.returncode != 0:
            raise RuntimeError(f"driver {command} failed ({proc.returncode}):\n{proc.stderr[-4000:]}")
        return json.loads(proc.stdout.strip().splitlines()[-1])

    def stop(self) -> None:
        """Ask LibreOffice to quit, then stop it by its process id (always; also after failures)."""
        if self.proc is None:
            return
        try:
            if self.proc.poll() is None:
                subprocess.run([SYSTEM_PYTHON, str(DRIVER), "terminate", str(self.port), "-"],
                               capture_output=True, timeout=20)
        except (subprocess.TimeoutExpired, OSError):
            pass
        lo.stop_soffice(self.proc, None)
        self.proc = None

    def cleanup(self) -> None:
        shutil.rmtree(self.profile, ignore_errors=True)
