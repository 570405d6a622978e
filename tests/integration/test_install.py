"""`macros/install.py` installs the .oxt into a LibreOffice profile through the ExtensionManager API."""
import subprocess
from pathlib import Path

import pytest

pytestmark = pytest.mark.libreoffice
INSTALL = Path(__file__).resolve().parents[2] / "macros" / "install.py"


def test_install_into_a_fresh_profile_then_replace(office, tmp_path):
    profile = tmp_path / "profile"
    cmd = ["/usr/bin/python3", str(INSTALL), "--oxt", str(office.oxt), "--profile", str(profile)]
    first = subprocess.run(cmd, capture_output=True, text=True, timeout=180)
    assert first.returncode == 0, first.stderr
    assert f"installed RatioDesk {office.version} from" in first.stdout
    assert "replacing" not in first.stdout
    deployed = list(profile.glob("user/uno_packages/cache/uno_packages/*/ratiodesk-*.oxt/pythonpath/ratiodesk_engine"))
    assert len(deployed) == 1
    again = subprocess.run(cmd, capture_output=True, text=True, timeout=180)
    assert again.returncode == 0, again.stderr
    assert f"(replacing {office.version})" in again.stdout
