"""Per-platform builds without the network: a stand-in numpy wheel, pinned in a temporary lock file.

The real wheels are exercised by test_bundled_py38.py and tests/integration/test_bundled_numpy.py;
here every rule of macros/package.py and the import guard of macros/cells.py is checked against a
small wheel built on the spot (a ``numpy`` package that only has a ``__version__``).
"""
import hashlib
import json
import os
import re
import subprocess
import sys
import zipfile
from pathlib import Path

import package
import pytest
import targets

HERE = Path(__file__).resolve().parent
RUNNER = HERE / "run_cells.py"
PY = targets.running_python()
PLAT = targets.running_platform()
HERE_TARGET = targets.target_name(PLAT, PY)
OTHER_PY = "310" if PY != "310" else "311"
OTHER_TARGET = targets.target_name(PLAT, OTHER_PY)
LO_TOKENS = {"windows_x86_64", "macosx_aarch64", "macosx_x86_64", "linux_x86_64"}  # dp_platform.cxx
MARK = "\u26a0 "

needs_known_platform = pytest.mark.skipif(PLAT not in targets.BY_KEY or PY not in targets.PYTHONS,
                                          reason=f"this machine ({PLAT}, cp{PY}) is not a build target")


def fake_wheel(path: Path, version: str = "9.9.9") -> Path:
    members = {
        "numpy/__init__.py": f"__version__ = {version!r}\n",
        "numpy/linalg/__init__.py": "",
        "numpy/tests/test_fake.py": "def test(): pass\n",
        "numpy/linalg/tests/test_linalg.py": "",
        "numpy/core/include/numpy/ndarraytypes.h": "/* header */\n",
        "numpy/core/lib/libnpymath.a": "!<arch>\n",
        "numpy/core/lib/npy-pkg-config/npymath.ini": "[meta]\n",
        "numpy/__init__.pyi": "__version__: str\n",
        "numpy/random/_bounded_integers.pxd": "",
        "numpy/random/LICENSE.md": "random licence\n",
        f"numpy-{version}.dist-info/LICENSE.txt": "numpy licence\n",
        f"numpy-{version}.dist-info/licenses/numpy/linalg/lapack_lite/LICENSE.txt": "lapack licence\n",
        f"numpy-{version}.dist-info/METADATA": "Name: numpy\n",
        f"numpy-{version}.dist-info/RECORD": "numpy/__init__.py,,\n",
    }
    with zipfile.ZipFile(path, "w") as zf:
        for name, text in members.items():
            zf.writestr(name, text)
    return path


def wheel_name(target: str, version: str = "9.9.9") -> str:
    plat, py = targets.parse_target(target)
    return f"numpy-{version}-cp{py}-cp{py}-{plat.wheel_tags[0]}.whl"


@pytest.fixture
def lock(tmp_path, monkeypatch):
    """A lock file pinning stand-in wheels for this machine's Python and for another one, both cached."""
    cache = tmp_path / "cache"
    cache.mkdir()
    monkeypatch.setenv("RATIODESK_WHEEL_CACHE", str(cache))
    entries = {}
    for t in (HERE_TARGET, OTHER_TARGET) if PLAT in targets.BY_KEY and PY in targets.PYTHONS else ():
        w = fake_wheel(cache / wheel_name(t))
        entries[t] = {"numpy": "9.9.9", "wheel": w.name, "sha256": hashlib.sha256(w.read_bytes()).hexdigest()}
    path = tmp_path / "numpy-wheels.lock"
    path.write_text(json.dumps({"targets": entries, "unsupported": {"win_amd64-cp38": "a reason given here"}}),
                    encoding="utf-8")
    monkeypatch.setattr(package, "LOCK", path)

    def no_network(*a, **k):
        raise AssertionError("pip was asked to download although the wheel is cached")

    monkeypatch.setattr(package, "_pip_download", no_network)
    return {"path": path, "cache": cache, "entries": entries}


def names_of(oxt: Path):
    with zipfile.ZipFile(oxt) as zf:
        return set(zf.namelist()), zf.read("description.xml").decode(), \
            zf.read("pythonpath/ratiodesk_calc/_build.py").decode()


@needs_known_platform
def test_bundled_build_holds_the_pruned_wheel(lock, tmp_path):
    oxt = package.build(tmp_path / "dist", HERE_TARGET)
    assert oxt.name == f"ratiodesk-{package.version()}-{HERE_TARGET}.oxt"
    names, desc, build = names_of(oxt)
    v = "pythonpath/ratiodesk_vendor/"
    assert {v + "numpy/__init__.py", v + "numpy/linalg/__init__.py", v + "numpy/random/LICENSE.md",
            v + "numpy-9.9.9.dist-info/LICENSE.txt", v + "numpy-9.9.9.dist-info/METADATA",
            v + "numpy-9.9.9.dist-info/licenses/numpy/linalg/lapack_lite/LICENSE.txt"} <= names
    vendor = [n for n in names if n.startswith(v)]
    assert not [n for n in vendor if "/tests/" in n or n.endswith((".h", ".a", ".pyi", ".pxd", ".ini", "RECORD"))]
    assert f'<platform value="{targets.BY_KEY[PLAT].token}"/>' in desc
    assert f"Python {targets.python_label(PY)}" in desc
    assert f"TARGET = {HERE_TARGET!r}" in build and "NUMPY = '9.9.9'" in build
    assert "VENDOR = 'ratiodesk_vendor'" in build
    assert "pythonpath/ratiodesk_calc/targets.py" in names and not any(n.startswith("pythonpath/numpy") for n in names)


def test_system_build_is_todays(lock, tmp_path):
    oxt = package.build(tmp_path / "dist")
    assert oxt.name == f"ratiodesk-{package.version()}.oxt"
    names, desc, build = names_of(oxt)
    assert not any(n.startswith("pythonpath/ratiodesk_vendor/") for n in names)
    assert '<platform value="all"/>' in desc
    assert "TARGET = 'system'" in build and "VENDOR = None" in build


@needs_known_platform
def test_a_cached_wheel_with_another_hash_is_refused(lock, tmp_path):
    (lock["cache"] / wheel_name(HERE_TARGET)).write_bytes(b"not the pinned wheel")
    with pytest.raises(SystemExit, match=r"refusing .*sha256 is [0-9a-f]{64}, but .* pins [0-9a-f]{64}"):
        package.build(tmp_path / "dist", HERE_TARGET)
    assert not list((tmp_path / "dist").glob("*.oxt*"))


@needs_known_platform
def test_a_downloaded_wheel_with_another_hash_is_refused_and_not_cached(lock, tmp_path, monkeypatch):
    name = wheel_name(HERE_TARGET)
    (lock["cache"] / name).unlink()
    asked = []

    def pip(spec, platforms, python, dest):
        asked.append((spec, platforms, python))
        return [fake_wheel(dest / name, version="9.9.8")]  # same file name, other bytes

    monkeypatch.setattr(package, "_pip_download", pip)
    with pytest.raises(SystemExit, match="not the pinned one"):
        package.build(tmp_path / "dist", HERE_TARGET)
    assert not (lock["cache"] / name).exists()
    assert asked == [("numpy==9.9.9", (targets.BY_KEY[PLAT].wheel_tags[0],), PY)]


@needs_known_platform
def test_a_download_goes_into_the_cache(lock, tmp_path, monkeypatch):
    name = wheel_name(HERE_TARGET)
    good = (lock["cache"] / name).read_bytes()
    (lock["cache"] / name).unlink()

    def pip(spec, platforms, python, dest):
        (dest / name).write_bytes(good)
        return [dest / name]

    monkeypatch.setattr(package, "_pip_download", pip)
    package.build(tmp_path / "dist", HERE_TARGET)
    assert (lock["cache"] / name).read_bytes() == good


def test_unknown_and_unsupported_targets_are_clear_messages(lock, tmp_path):
    with pytest.raises(SystemExit, match="unknown platform 'win_arm64'"):
        package.build(tmp_path, "win_arm64-cp311")
    with pytest.raises(SystemExit, match="Python cp314 is not supported"):
        package.build(tmp_path, "linux_x86_64-cp314")
    with pytest.raises(SystemExit, match="not 'system', 'all' or PLATFORM-cpXY"):
        package.build(tmp_path, "windows")
    with pytest.raises(SystemExit, match="win_amd64-cp38 is not supported: a reason given here"):
        package.build(tmp_path, "win_amd64-cp38")
    assert not list(tmp_path.glob("*.oxt*"))


@needs_known_platform
def test_an_oversized_build_fails_loudly_and_writes_nothing(lock, tmp_path, monkeypatch):
    monkeypatch.setattr(package, "MAX_OXT_BYTES", 10_000)
    with pytest.raises(SystemExit, match=r"would be .* MB, above the limit"):
        package.build(tmp_path / "dist", HERE_TARGET)
    assert not list((tmp_path / "dist").iterdir())


def test_all_is_the_system_build_and_every_locked_target(lock):
    assert package.expand_targets(["all"]) == ["system", *lock["entries"]]
    assert package.expand_targets([]) == ["system"]


def test_command_line_target_option(lock, tmp_path, capsys):
    assert package.main(["--out", str(tmp_path), "--target", "system"]) == 0
    assert f"ratiodesk-{package.version()}.oxt" in capsys.readouterr().out


# ---------------------------------------------------------------------------------------------
# the committed lock file
# ---------------------------------------------------------------------------------------------
def test_committed_lock_covers_every_target_with_a_plausible_wheel():
    data = package.read_lock()
    listed = set(data["targets"]) | set(data["unsupported"])
    every = {targets.target_name(p.key, py) for p in targets.PLATFORMS for py in targets.PYTHONS}
    assert listed == every
    tag = {"win_amd64": r"win_amd64", "macos_arm64": r"macosx_1[1-3]_0_arm64",
           "macos_x86_64": r"macosx_10_(9|1[0-5])_x86_64",
           "linux_x86_64": r"manylinux(2014|_2_(1[7-9]|2[0-8]))_x86_64(\.manylinux\w+_x86_64)?"}
    for target, e in data["targets"].items():
        plat, py = targets.parse_target(target)
        assert re.fullmatch(r"[0-9a-f]{64}", e["sha256"]), target
        assert re.fullmatch(rf"numpy-{re.escape(e['numpy'])}-cp{py}-cp{py}-{tag[plat.key]}\.whl", e["wheel"]), \
            (target, e["wheel"])
        assert package._version_key(e["numpy"]) >= (1, 24), target
    assert data["targets"]["linux_x86_64-cp38"]["numpy"].startswith("1.24.")
    for plat in targets.PLATFORMS:  # newer Pythons never get an older numpy
        vs = [package._version_key(data["targets"][t]["numpy"]) for t in
              (targets.target_name(plat.key, py) for py in targets.PYTHONS) if t in data["targets"]]
        assert vs == sorted(vs), plat.key


def test_platform_tokens_are_libreoffice_tokens():
    assert {p.token for p in targets.PLATFORMS} == LO_TOKENS
    for p in targets.PLATFORMS:
        assert f'<platform value="{p.token}"/>' in package.description_text("1.0", f"{p.key}-cp311")


def test_package_script_uses_only_the_standard_library():
    import ast
    stdlib = set(sys.stdlib_module_names) if hasattr(sys, "stdlib_module_names") else None
    for script in ("package.py", "targets.py"):
        tree = ast.parse((Path(package.__file__).parent / script).read_text(encoding="utf-8"))
        tops = {a.name.split(".")[0] for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
        tops |= {n.module.split(".")[0] for n in ast.walk(tree) if isinstance(n, ast.ImportFrom) and n.module
                 and n.level == 0}
        ours = {"functions", "targets", "__future__"}
        if stdlib is not None:
            assert tops - ours <= stdlib, (script, tops - ours - stdlib)


# ---------------------------------------------------------------------------------------------
# the import guard, in the unpacked layout, in a fresh interpreter
# ---------------------------------------------------------------------------------------------
def run_unpacked(oxt: Path, tmp: Path, python: str, flags, calls):
    root = tmp / oxt.stem
    with zipfile.ZipFile(oxt) as zf:
        zf.extractall(root)
    calls_file, out = tmp / f"{oxt.stem}.calls", tmp / f"{oxt.stem}-{len(flags)}.json"
    calls_file.write_text(repr(calls), encoding="utf-8")
    log = tmp / f"{oxt.stem}-{len(flags)}.log"
    proc = subprocess.run([python, *flags, str(RUNNER), str(root / "pythonpath"), str(calls_file), str(out)],
                          capture_output=True, text=True, timeout=300, cwd=tmp,
                          env={"RATIODESK_LOG": str(log), "PATH": os.environ.get("PATH", "/usr/bin:/bin")})
    assert proc.returncode == 0, proc.stderr
    result = json.loads(out.read_text(encoding="utf-8"))
    result["log"] = log.read_text(encoding="utf-8") if log.exists() else ""
    result["root"] = root
    result["diag"] = dict(result["diagnostics"])
    return result


G = ((1.0,), (2.0,), (3.0,))
S = ((0.1,),) * 3
CALLS = [("mswd", "rdIsochronMswd", (G, S, G, S)), ("block", "rdIsochronBlock", (G, S, G, S)),
         ("version", "rdVersion", ())]


@needs_known_platform
def test_numpy_of_the_python_comes_first(lock, tmp_path):
    oxt = package.build(tmp_path / "dist", HERE_TARGET)
    r = run_unpacked(oxt, tmp_path, sys.executable, ["-I"], CALLS)
    assert r["diag"]["numpy_source"] == "LibreOffice's Python"
    assert r["diag"]["numpy"] != "9.9.9" and "ratiodesk_vendor" not in r["diag"]["numpy_path"]
    assert not r["sys_path_vendor"]
    assert isinstance(r["results"]["mswd"], float)


@needs_known_platform
def test_without_numpy_the_bundled_one_is_loaded_and_logged(lock, tmp_path):
    oxt = package.build(tmp_path / "dist", HERE_TARGET)
    r = run_unpacked(oxt, tmp_path, sys.executable, ["-I", "-S"], CALLS)  # -S: no site-packages, no numpy
    assert r["numpy_before"] is None
    vendor = str(r["root"] / "pythonpath" / "ratiodesk_vendor")
    assert r["diag"]["numpy"] == "9.9.9" and r["diag"]["numpy_path"] == os.path.join(vendor, "numpy")
    assert r["diag"]["numpy_source"] == "bundled with RatioDesk" and r["sys_path_vendor"]
    assert f"numpy 9.9.9 loaded from {vendor}" in r["log"]
    # the stand-in numpy cannot run the engine: a readable message in every cell, never a traceback
    for key in ("mswd", "block"):
        cell = r["results"][key] if key == "mswd" else r["results"][key][0][0]
        assert cell.startswith(MARK) and "engine could not be loaded" in cell and "Traceback" not in cell, cell
    assert r["diag"]["status"] == r["results"]["mswd"] and r["diag"]["engine"] == r["results"]["mswd"]
    assert "Traceback" in r["log"]  # the details are in the log
    assert r["results"]["version"] == package.version()


@needs_known_platform
def test_wrong_python_names_the_oxt_built_for_it(lock, tmp_path):
    oxt = package.build(tmp_path / "dist", OTHER_TARGET)
    r = run_unpacked(oxt, tmp_path, sys.executable, ["-I", "-S"], CALLS)
    want = (f"{MARK}this package is built for Python {targets.python_label(OTHER_PY)} on "
            f"{targets.platform_label(PLAT)}; this LibreOffice runs Python {targets.python_label(PY)} \u2014 install "
            f"ratiodesk-{package.version()}-{HERE_TARGET}.oxt")
    assert r["results"]["mswd"].startswith(want), r["results"]["mswd"]
    assert r["results"]["block"] == [[r["results"]["mswd"]]]
    assert not r["sys_path_vendor"] and r["diag"]["numpy_path"] == ""
    assert r["diag"]["numpy"].startswith(MARK + "not loaded: this package is built for")


@needs_known_platform
def test_system_build_without_numpy_names_the_bundled_build(lock, tmp_path):
    oxt = package.build(tmp_path / "dist")
    r = run_unpacked(oxt, tmp_path, sys.executable, ["-I", "-S"], CALLS)
    msg = r["results"]["mswd"]
    assert msg.startswith(MARK + "RatioDesk needs numpy") and "scipy" not in msg
    assert f"ratiodesk-{package.version()}-{HERE_TARGET}.oxt" in msg
    assert r["diag"]["status"] == msg and r["diag"]["python"] == ".".join(map(str, sys.version_info[:3]))
    assert "import numpy failed" in r["log"] and "scipy" not in r["log"]


@pytest.mark.skipif(not os.path.exists("/usr/bin/python3") or not sys.platform.startswith("linux"),
                    reason="needs a Linux distribution's /usr/bin/python3")
def test_system_build_on_a_distribution_python_gives_the_apt_hint(lock, tmp_path):
    oxt = package.build(tmp_path / "dist")
    r = run_unpacked(oxt, tmp_path, "/usr/bin/python3", ["-I", "-S"], CALLS)
    msg = r["results"]["mswd"]
    assert msg.startswith(MARK + "RatioDesk needs numpy") and "sudo apt-get install python3-numpy" in msg
    assert "scipy" not in msg


# ---------------------------------------------------------------------------------------------
# --update-lock, with pip replaced
# ---------------------------------------------------------------------------------------------
def test_update_lock_records_newest_wheels_and_unsupported_targets(tmp_path, monkeypatch):
    monkeypatch.setattr(package, "LOCK", tmp_path / "numpy-wheels.lock")
    monkeypatch.setenv("RATIODESK_WHEEL_CACHE", str(tmp_path / "cache"))
    asked = []

    def pip(spec, platforms, python, dest):
        asked.append((spec, platforms, python))
        if platforms == targets.BY_KEY["macos_arm64"].wheel_tags and python == "38":
            raise package.WheelUnavailable("no", "ERROR: No matching distribution found for numpy>=1.24")
        w = dest / f"numpy-2.2.6-cp{python}-cp{python}-{platforms[0]}.whl"
        fake_wheel(w, "2.2.6")
        return [w]

    monkeypatch.setattr(package, "_pip_download", pip)
    data = package.update_lock()
    assert len(asked) == len(targets.PLATFORMS) * len(targets.PYTHONS)
    assert all(spec == "numpy>=1.24" for spec, _, _ in asked)
    assert "macos_arm64-cp38" in data["unsupported"] and "macos_arm64-cp38" not in data["targets"]
    e = data["targets"]["win_amd64-cp310"]
    assert e["wheel"] == "numpy-2.2.6-cp310-cp310-win_amd64.whl" and e["numpy"] == "2.2.6"
    assert e["sha256"] == hashlib.sha256((tmp_path / "cache" / e["wheel"]).read_bytes()).hexdigest()
    assert package.read_lock() == data
    with pytest.raises(SystemExit, match="macos_arm64-cp38 is not supported: no numpy >= 1.24 wheel"):
        package.build(tmp_path / "dist", "macos_arm64-cp38")


def test_update_lock_without_network_keeps_the_lock(tmp_path, monkeypatch):
    path = tmp_path / "numpy-wheels.lock"
    path.write_text('{"targets": {}}', encoding="utf-8")
    monkeypatch.setattr(package, "LOCK", path)
    monkeypatch.setenv("RATIODESK_WHEEL_CACHE", str(tmp_path / "cache"))

    def down(spec, platforms, python, dest):
        raise package.WheelUnavailable("down", "WARNING: Retrying ... NewConnectionError\nERROR: No matching "
                                       "distribution found for numpy>=1.24")

    monkeypatch.setattr(package, "_pip_download", down)
    with pytest.raises(package.WheelUnavailable):
        package.update_lock()
    assert path.read_text(encoding="utf-8") == '{"targets": {}}'

    def none_anywhere(spec, platforms, python, dest):  # an index that answers but has nothing: not written either
        raise package.WheelUnavailable("none", "ERROR: No matching distribution found for numpy>=1.24")

    monkeypatch.setattr(package, "_pip_download", none_anywhere)
    with pytest.raises(package.WheelUnavailable, match="is PyPI reachable"):
        package.update_lock()
    assert path.read_text(encoding="utf-8") == '{"targets": {}}'
