"""soffice must not inherit a PATH or variables that point its embedded Python at another interpreter.

Found in CI: started from a pyenv Python (PATH beginning with the pyenv version's bin folder), the
embedded system Python of LibreOffice 7.4 loaded the foreign standard library and every add-in call
failed with "std::bad_alloc" in the UNO bridge.
"""
import os

import install


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
