"""soffice must not inherit a PATH or variables that point its embedded Python at another interpreter.

Found in CI: started from a pyenv Python (PATH beginning with the pyenv version's bin folder), the
embedded system Python of LibreOffice 7.4 loaded the foreign standard library and every add-in call
failed with "std::bad_alloc" in the UNO bridge.
"""
import os

import install
import pytest


def test_foreign_python_folders_and_variables_are_removed(tmp_path):
    foreign = tmp_path / "pyenv" / "versions" / "3.11.7" / "bin"
    foreign.mkdir(parents=True)
    (foreign / "python3").write_text("#!/bin/sh\n")
    plain = tmp_path / "tools"
    plain.mkdir()
    env = {
        "PATH": os.pathsep.join([str(foreign), str(plain), "/usr/bin", "/bin"]),
        "PYENV_VERSION": "3.11.7", "PYTHONHOME": "/x", "PYTHONPATH": "/y", "VIRTUAL_ENV": "/z", "HOME": "/root",
    }
    out = install.soffice_environment(env)
    assert out["PATH"].split(os.pathsep) == [str(plain), "/usr/bin", "/bin"]
    for var in ("PYENV_VERSION", "PYTHONHOME", "PYTHONPATH", "VIRTUAL_ENV"):
        assert var not in out
    assert out["HOME"] == "/root"
    assert env["PYENV_VERSION"] == "3.11.7"  # the caller's mapping is not changed


def test_system_python_folder_is_kept():
    out = install.soffice_environment({"PATH": "/usr/bin:/bin"})
    assert out["PATH"] == "/usr/bin:/bin"


def test_install_picks_only_the_system_build(tmp_path, monkeypatch):
    """`build.py install` installs ratiodesk-<version>.oxt, never a newer per-platform build beside it."""
    dist = tmp_path / "dist"
    dist.mkdir()
    system = dist / "ratiodesk-0.1.0.oxt"
    system.write_bytes(b"x")
    platform_build = dist / "ratiodesk-0.1.0-win_amd64-cp311.oxt"
    platform_build.write_bytes(b"x")
    os.utime(system, (1_000_000, 1_000_000))  # the per-platform build is the newer file
    monkeypatch.setattr(install, "ROOT", tmp_path)
    assert install.newest_oxt() == system
    system.unlink()
    with pytest.raises(SystemExit, match="ratiodesk-<version>.oxt"):
        install.newest_oxt()
