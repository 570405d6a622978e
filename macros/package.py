#!/usr/bin/env python3
"""Build dist/ratiodesk-<version>.oxt, the LibreOffice Calc extension, from the function table.

    python macros/package.py [--out DIR] [--update-generated]

Everything the extension declares is generated from ``macros/functions.py``:

* ``ratiodesk.idl`` → ``ratiodesk.rdb`` (compiled with the SDK's ``unoidl-write`` when it is
  installed; otherwise the committed ``macros/generated/ratiodesk.rdb`` is used, and only if the
  committed ``macros/generated/ratiodesk.idl`` equals the IDL the table generates now);
* ``CalcAddIns.xcu`` (the Function Wizard's names and descriptions);
* ``ratiodesk.components`` (the Python components, registered without running code);
* ``META-INF/manifest.xml``, ``description.xml`` (identifier, version, display name, licence).

Layout of the .oxt::

    addin.py                       the Calc add-in component (macros/addin.py)
    commands.py                    menu-command component (macros/commands.py, when present)
    *.xcu                          CalcAddIns.xcu and every macros/*.xcu (e.g. Addons.xcu)
    pythonpath/ratiodesk_calc/     functions.py, cells.py, targets.py, _build.py (version, build target)
    pythonpath/ratiodesk_engine/   a copy of the engine package ``reduction``
    pythonpath/ratiodesk_vendor/   bundled builds only: numpy, unpacked from its wheel (NOT on sys.path;
                                   cells.py adds it only when LibreOffice's Python has no numpy)

All extensions share one Python interpreter, and ``reduction`` is a generic name another
extension could also use, so the engine ships under the unique name ``ratiodesk_engine`` (its
modules import each other relatively; any absolute ``reduction`` import is rewritten). Code
inside the extension imports ``ratiodesk_engine`` and ``ratiodesk_calc``.

``--update-generated`` rewrites macros/generated/ratiodesk.idl and .rdb from the table (needs the
SDK); commit them so the .oxt builds without it.

Build targets (``--target``, see macros/targets.py)::

    system                 dist/ratiodesk-<version>.oxt, no numpy inside (the default)
    PLATFORM-cpXY          dist/ratiodesk-<version>-PLATFORM-cpXY.oxt with numpy for CPython X.Y on PLATFORM
                           (win_amd64, macos_arm64, macos_x86_64, linux_x86_64; XY 38 ... 313)
    all                    every target of the lock file, and the system build

A bundled build takes the numpy wheel pinned in ``macros/numpy-wheels.lock`` (target → numpy
version, wheel file name, sha256), fetched once with ``pip download --only-binary=:all: --platform
... --python-version XY --implementation cp --abi cpXY --no-deps numpy==V`` into a cache outside the
repository (``$RATIODESK_WHEEL_CACHE``, else ``$XDG_CACHE_HOME/ratiodesk-wheels`` or
``~/.cache/ratiodesk-wheels``) and refused unless its sha256 is the pinned one. The wheel goes in
unpacked, without its tests, C headers, static libraries, Cython sources and type stubs (its licence
files stay); ``description.xml`` names LibreOffice's platform token, and a build above
:data:`MAX_OXT_BYTES` is an error. ``--update-lock`` asks pip for the newest numpy (>= 1.24) with a
wheel for each target and rewrites the lock file (commit it). Standard library only (pip is run as
a program).
"""
from __future__ import annotations

import argparse
import ast
import hashlib
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import zipfile
from pathlib import Path
from typing import Any, Dict, List, Optional, Tuple
from xml.sax.saxutils import escape, quoteattr

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
GENERATED = HERE / "generated"
SDK = Path("/usr/lib/libreoffice")
UNOIDL_WRITE = SDK / "sdk" / "bin" / "unoidl-write"
BASE_TYPES = (SDK / "program" / "types.rdb", SDK / "program" / "types" / "offapi.rdb")
ENGINE_NAME = "ratiodesk_engine"
CALC_NAME = "ratiodesk_calc"
EXTENSION_ID = "org.ratiodesk.calc"
ZIP_TIME = (2024, 1, 1, 0, 0, 0)

LOCK = HERE / "numpy-wheels.lock"
VENDOR_NAME = "ratiodesk_vendor"
#: Largest .oxt we ship (LibreOffice unpacks it into every user profile that installs it).
MAX_OXT_BYTES = 20 * 1024 * 1024
#: Oldest numpy the engine supports.
NUMPY_MIN = "1.24"

sys.path.insert(0, str(HERE))
import functions as table  # noqa: E402  (the table lives beside this script)
import targets  # noqa: E402


def version() -> str:
    text = (ROOT / "reduction" / "__init__.py").read_text(encoding="utf-8")
    m = re.search(r'^__version__\s*=\s*"([^"]+)"', text, re.M)
    if not m:
        raise SystemExit("no __version__ in reduction/__init__.py")
    return m.group(1)


# --------------------------------------------------------------------------------------------
# generated text
# --------------------------------------------------------------------------------------------
def idl_text() -> str:
    """The UNO IDL of the add-in interface, one method per table entry."""
    module, _, iface = table.INTERFACE_NAME.rpartition(".")
    service = table.SERVICE_NAME.rpartition(".")[2]
    lines = ["// Generated by macros/package.py from macros/functions.py: do not edit.", ""]
    parts = module.split(".")
    lines.append(" ".join(f"module {p} {{" for p in parts))
    lines.append(f"    interface {iface} : com::sun::star::uno::XInterface")
    lines.append("    {")
    for f in table.FUNCTIONS:
        params = ", ".join(f"[in] {table.IDL_TYPES[a.kind]} {a.name}" for a in f.args)
        lines.append(f"        {table.IDL_TYPES[f.returns]} {f.method}({params});")
    lines.append("    };")
    lines.append(f"    service {service} : {iface};")
    lines.append(" ".join("};" for _ in parts))
    return "\n".join(lines) + "\n"


def _value(text: str, lang: bool = True) -> str:
    attr = ' xml:lang="en-US"' if lang else ""
    return f"<value{attr}>{escape(text)}</value>"


def xcu_text() -> str:
    """CalcAddIns.xcu: display names, descriptions and argument texts for the Function Wizard."""
    out = ['<?xml version="1.0" encoding="UTF-8"?>',
           '<oor:component-data xmlns:oor="http://openoffice.org/2001/registry" '
           'xmlns:xs="http://www.w3.org/2001/XMLSchema" oor:name="CalcAddIns" oor:package="org.openoffice.Office">',
           ' <node oor:name="AddInInfo">',
           f'  <node oor:name={quoteattr(table.SERVICE_NAME)} oor:op="replace">',
           '   <node oor:name="AddInFunctions">']
    for f in table.FUNCTIONS:
        out += [f'    <node oor:name={quoteattr(f.method)} oor:op="replace">',
                f'     <prop oor:name="DisplayName">{_value(f.display)}</prop>',
                f'     <prop oor:name="Description">{_value(f.description)}</prop>',
                f'     <prop oor:name="Category">{_value(table.CATEGORY, False)}</prop>',
                '     <node oor:name="Parameters">']
        for a in f.args:
            out += [f'      <node oor:name={quoteattr(a.name)} oor:op="replace">',
                    f'       <prop oor:name="DisplayName">{_value(a.name)}</prop>',
                    f'       <prop oor:name="Description">{_value(a.description)}</prop>',
                    '      </node>']
        out += ['     </node>', '    </node>']
    out += ['   </node>', '  </node>', ' </node>', '</oor:component-data>']
    return "\n".join(out) + "\n"


def module_constants(path: Path, names: Tuple[str, ...]) -> Dict[str, str]:
    """Module-level string constants of a Python file, read without importing it (it imports uno)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found: Dict[str, str] = {}
    for node in tree.body:
        if isinstance(node, ast.Assign) and isinstance(node.value, ast.Constant) and isinstance(node.value.value, str):
            for t in node.targets:
                if isinstance(t, ast.Name) and t.id in names:
                    found[t.id] = node.value.value
    missing = [n for n in names if n not in found]
    if missing:
        raise SystemExit(f"{path}: module-level string constant(s) {', '.join(missing)} missing")
    return found


def components() -> List[Tuple[str, str, Tuple[str, ...]]]:
    """(file in the .oxt, implementation name, services) of every Python component."""
    comps = [("addin.py", table.IMPLEMENTATION_NAME, (table.SERVICE_NAME, table.ADDIN_SERVICE))]
    commands = HERE / "commands.py"
    if commands.exists():
        c = module_constants(commands, ("IMPLEMENTATION_NAME", "SERVICE_NAME"))
        comps.append(("commands.py", c["IMPLEMENTATION_NAME"], (c["SERVICE_NAME"],)))
    return comps


def components_text() -> str:
    out = ['<?xml version="1.0" encoding="UTF-8"?>',
           '<components xmlns="http://openoffice.org/2010/uno-components">']
    for uri, impl, services in components():
        out.append(f'  <component loader="com.sun.star.loader.Python" uri={quoteattr(uri)}>')
        out.append(f'    <implementation name={quoteattr(impl)}>')
        out += [f'      <service name={quoteattr(s)}/>' for s in services]
        out += ['    </implementation>', '  </component>']
    out.append('</components>')
    return "\n".join(out) + "\n"


MEDIA = {".rdb": "application/vnd.sun.star.uno-typelibrary;type=RDB",
         ".components": "application/vnd.sun.star.uno-components",
         ".xcu": "application/vnd.sun.star.configuration-data"}


def manifest_text(files: List[str]) -> str:
    out = ['<?xml version="1.0" encoding="UTF-8"?>',
           '<manifest:manifest xmlns:manifest="http://openoffice.org/2001/manifest">']
    for name in files:
        media = MEDIA.get(Path(name).suffix)
        if media and "/" not in name:
            out.append(f' <manifest:file-entry manifest:media-type={quoteattr(media)} '
                       f'manifest:full-path={quoteattr(name)}/>')
    out.append('</manifest:manifest>')
    return "\n".join(out) + "\n"


def description_text(ver: str, target: str = targets.SYSTEM) -> str:
    """description.xml; a bundled build names its LibreOffice platform token and its Python."""
    if target == targets.SYSTEM:
        token, what = "all", ""
    else:
        plat, py = targets.parse_target(target)
        token, what = plat.token, f" (Python {targets.python_label(py)}, {plat.label}, numpy inside)"
    return f"""<?xml version="1.0" encoding="UTF-8"?>
<description xmlns="http://openoffice.org/extensions/description/2006"
             xmlns:xlink="http://www.w3.org/1999/xlink">
  <identifier value="{EXTENSION_ID}"/>
  <version value="{escape(ver)}"/>
  <platform value="{token}"/>
  <display-name><name lang="en">RatioDesk {escape(ver)}{escape(what)}: isotope-lab data reduction</name></display-name>
  <publisher><name xlink:href="https://example.invalid/ratiodesk" lang="en">RatioDesk contributors</name></publisher>
  <registration>
    <simple-license accept-by="user" suppress-on-update="true">
      <license-text xlink:href="LICENSE.txt" lang="en"/>
    </simple-license>
  </registration>
</description>
"""


LICENSE = (ROOT / "LICENSE").read_text(encoding="utf-8")

# --------------------------------------------------------------------------------------------
# type library
# --------------------------------------------------------------------------------------------
def sdk_available() -> bool:
    return UNOIDL_WRITE.exists() and all(p.exists() for p in BASE_TYPES)


def compile_idl(idl: str, out: Path) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "ratiodesk.idl"
        src.write_text(idl, encoding="utf-8")
        proc = subprocess.run([str(UNOIDL_WRITE), *map(str, BASE_TYPES), str(src), str(out)],
                              capture_output=True, text=True)
        if proc.returncode != 0:
            raise SystemExit(f"unoidl-write failed:\n{proc.stdout}{proc.stderr}")


def type_library(workdir: Path) -> Path:
    """Compile the IDL (SDK present) or fall back to the committed, matching type library."""
    idl = idl_text()
    rdb = workdir / "ratiodesk.rdb"
    if sdk_available():
        compile_idl(idl, rdb)
        return rdb
    committed_idl = GENERATED / "ratiodesk.idl"
    if not committed_idl.exists() or committed_idl.read_text(encoding="utf-8") != idl:
        raise SystemExit("the function table changed since macros/generated/ratiodesk.idl was written and the "
                         f"SDK ({UNOIDL_WRITE}) is not installed: install libreoffice-dev and run "
                         "macros/package.py --update-generated")
    shutil.copyfile(GENERATED / "ratiodesk.rdb", rdb)
    return rdb


def update_generated() -> None:
    if not sdk_available():
        raise SystemExit(f"--update-generated needs the SDK's {UNOIDL_WRITE} (apt-get install libreoffice-dev)")
    GENERATED.mkdir(exist_ok=True)
    idl = idl_text()
    (GENERATED / "ratiodesk.idl").write_text(idl, encoding="utf-8")
    compile_idl(idl, GENERATED / "ratiodesk.rdb")
    print(f"wrote {GENERATED / 'ratiodesk.idl'} and ratiodesk.rdb")


# --------------------------------------------------------------------------------------------
# the engine copy
# --------------------------------------------------------------------------------------------
_ABS_IMPORT = re.compile(r"^(\s*)(from|import)\s+reduction(?=[\s.])", re.M)


def engine_files() -> List[Tuple[str, bytes]]:
    """(path inside pythonpath/ratiodesk_engine, bytes) of the engine package."""
    src = ROOT / "reduction"
    out = []
    for p in sorted(src.rglob("*")):
        if p.is_dir() or "__pycache__" in p.parts or p.suffix in (".pyc", ".pyo"):
            continue
        data = p.read_bytes()
        if p.suffix == ".py":
            data = _ABS_IMPORT.sub(lambda m: f"{m.group(1)}{m.group(2)} {ENGINE_NAME}",
                                   data.decode("utf-8")).encode("utf-8")
        out.append((p.relative_to(src).as_posix(), data))
    return out


# --------------------------------------------------------------------------------------------
# numpy wheels: the lock file, the cache, pip
# --------------------------------------------------------------------------------------------
class WheelUnavailable(SystemExit):
    """pip could not fetch a wheel (no network, no pip, PyPI unreachable, or no such wheel)."""

    def __init__(self, message: str, output: str = "") -> None:
        super().__init__(message)
        self.output = output

    @property
    def no_such_wheel(self) -> bool:
        """pip reached the index and found no matching wheel (rather than failing to reach it)."""
        network = ("Retrying", "NewConnectionError", "ConnectTimeout", "Max retries", "name resolution",
                   "ProxyError", "SSLError", "Connection refused", "Network is unreachable")
        return "No matching distribution" in self.output and not any(w in self.output for w in network)


def wheel_cache() -> Path:
    """Where verified wheels are kept between builds (outside the repository)."""
    env = os.environ.get("RATIODESK_WHEEL_CACHE")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "ratiodesk-wheels"


def read_lock(path: Optional[Path] = None) -> Dict[str, Any]:
    """The lock file: ``{"targets": {target: {"numpy", "wheel", "sha256"}}, "unsupported": {target: why}}``."""
    path = path or LOCK
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise SystemExit(f"{path} is missing: run `python3 build.py oxt --update-lock` and commit it") from None
    except ValueError as exc:
        raise SystemExit(f"{path} is not valid JSON ({exc})") from None
    for target, entry in data.get("targets", {}).items():
        missing = [k for k in ("numpy", "wheel", "sha256") if not entry.get(k)]
        if missing:
            raise SystemExit(f"{path}: target {target} lacks {', '.join(missing)}")
    return data


def sha256_of(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _pip_download(spec: str, platforms: Tuple[str, ...], python: str, dest: Path) -> List[Path]:
    cmd = [sys.executable, "-m", "pip", "download", "--disable-pip-version-check", "--no-input",
           "--only-binary=:all:", *[a for p in platforms for a in ("--platform", p)],
           "--python-version", python, "--implementation", "cp", "--abi", f"cp{python}", "--no-deps",
           "--dest", str(dest), spec]
    try:
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=600)
    except (OSError, subprocess.TimeoutExpired) as exc:
        raise WheelUnavailable(f"pip download {spec} failed to run ({exc})") from None
    if proc.returncode != 0:
        tail = (proc.stderr or proc.stdout).strip().splitlines()[-3:]
        raise WheelUnavailable(f"pip could not download {spec} for cp{python} on {', '.join(platforms)} "
                               f"(is PyPI reachable?): {' / '.join(tail)}", proc.stderr + proc.stdout)
    return sorted(dest.glob("*.whl"))


def fetch_wheel(target: str, lock: Optional[Dict[str, Any]] = None) -> Path:
    """The pinned, verified numpy wheel of ``target`` from the cache (downloading it into the cache once)."""
    lock = lock or read_lock()
    entry = lock["targets"].get(target)
    if entry is None:
        raise SystemExit(unsupported_text(target, lock))
    cache = wheel_cache()
    cached = cache / entry["wheel"]
    if cached.exists():
        got = sha256_of(cached)
        if got != entry["sha256"]:
            raise SystemExit(f"refusing {cached}: its sha256 is {got}, but {LOCK.name} pins {entry['sha256']} for "
                             f"{target}; the cached file is not the pinned wheel (delete it to download again)")
        return cached
    # the platform tags of the pinned file name, so pip picks exactly that file
    plats = tuple(entry["wheel"][:-len(".whl")].split("-")[-1].split("."))
    py = targets.parse_target(target)[1]
    with tempfile.TemporaryDirectory() as tmp:
        got_files = _pip_download(f"numpy=={entry['numpy']}", plats, py, Path(tmp))
        names = [f.name for f in got_files]
        if names != [entry["wheel"]]:
            raise SystemExit(f"pip downloaded {names} for {target}, but {LOCK.name} pins {entry['wheel']}")
        got = sha256_of(got_files[0])
        if got != entry["sha256"]:
            raise SystemExit(f"refusing {entry['wheel']} for {target}: its sha256 is {got}, but {LOCK.name} pins "
                             f"{entry['sha256']} (the file on the index is not the pinned one)")
        cache.mkdir(parents=True, exist_ok=True)
        part = cached.with_suffix(".whl.part")
        shutil.copyfile(got_files[0], part)
        part.replace(cached)
    return cached


def _version_key(v: str) -> Tuple[int, ...]:
    return tuple(int(x) for x in re.findall(r"\d+", v)[:3])


#: What the lock cannot say by its entries alone (written into it).
LOCK_NOTES = (
    "Not built (no target): Windows on ARM (windows_aarch64), Linux on ARM (linux_aarch64), 32-bit systems, "
    "CPython 3.14 and later, free-threaded CPython (cp313t), Python before 3.8.",
    "macOS arm64: numpy has arm64 wheels from numpy 1.21.0 on (checked for cp39: none for 1.20.3); every target uses "
    "numpy >= 1.24.4, so each has one. Wheels that need macOS 14 (Accelerate) are never chosen: the wheel tags asked "
    "for are macosx_11_0_arm64 and macosx_10_15_x86_64 (see macros/targets.py).",
    "Linux: the wheels tagged manylinux_2_28 (here cp311-cp313) need glibc 2.28 or later, those tagged manylinux2014 "
    "(cp38-cp310) glibc 2.17.",
)


def update_lock(only: Optional[List[str]] = None) -> Dict[str, Any]:
    """Ask pip for the newest numpy (>= NUMPY_MIN) with a wheel for each target; rewrite the lock file."""
    old = json.loads(LOCK.read_text(encoding="utf-8")) if LOCK.exists() else {}
    found: Dict[str, Dict[str, str]] = dict(old.get("targets", {})) if only else {}
    unsupported: Dict[str, str] = dict(old.get("unsupported", {})) if only else {}
    cache = wheel_cache()
    cache.mkdir(parents=True, exist_ok=True)
    resolved = 0
    for plat in targets.PLATFORMS:
        for py in targets.PYTHONS:
            target = targets.target_name(plat.key, py)
            if only and target not in only:
                continue
            with tempfile.TemporaryDirectory() as tmp:
                try:
                    files = _pip_download(f"numpy>={NUMPY_MIN}", plat.wheel_tags, py, Path(tmp))
                except WheelUnavailable as exc:
                    if not exc.no_such_wheel:
                        raise
                    unsupported[target] = (f"no numpy >= {NUMPY_MIN} wheel for CPython {targets.python_label(py)} "
                                           f"on {', '.join(plat.wheel_tags)} on PyPI")
                    found.pop(target, None)
                    print(f"{target}: unsupported ({unsupported[target]})", flush=True)
                    continue
                wheel = files[0]
                numpy_version = wheel.name.split("-")[1]
                digest = sha256_of(wheel)
                shutil.copyfile(wheel, cache / wheel.name)
            found[target] = {"numpy": numpy_version, "wheel": wheel.name, "sha256": digest}
            resolved += 1
            unsupported.pop(target, None)
            print(f"{target}: numpy {numpy_version} ({wheel.name})", flush=True)
    if not resolved:
        raise WheelUnavailable("pip found no numpy wheel for any target: is PyPI reachable? (lock file not written)")
    data = {
        "about": ("numpy wheels bundled into the per-platform RatioDesk extensions: target -> numpy version, wheel "
                  "file name, sha256. Written by `python3 build.py oxt --update-lock` (macros/package.py); the build "
                  "refuses a wheel whose sha256 differs."),
        "numpy_min": NUMPY_MIN,
        "notes": list(LOCK_NOTES),
        "targets": {k: found[k] for k in sorted(found, key=_target_order)},
        "unsupported": {k: unsupported[k] for k in sorted(unsupported, key=_target_order)},
    }
    LOCK.write_text(json.dumps(data, indent=1) + "\n", encoding="utf-8")
    print(f"wrote {LOCK} ({len(found)} targets, {len(unsupported)} unsupported)")
    return data


def _target_order(target: str) -> Tuple[int, int]:
    plat, py = targets.parse_target(target)
    return [p.key for p in targets.PLATFORMS].index(plat.key), targets.PYTHONS.index(py)


def unsupported_text(target: str, lock: Dict[str, Any]) -> str:
    why = lock.get("unsupported", {}).get(target, f"it is not in {LOCK.name}")
    ok = ", ".join(lock.get("targets", {}))
    return f"target {target} is not supported: {why}. Supported targets: system, {ok}"


# --------------------------------------------------------------------------------------------
# the bundled numpy
# --------------------------------------------------------------------------------------------
#: Directory names whose content is left out of the bundled numpy (tests, C headers, build metadata,
#: example code) ...
PRUNE_DIRS = frozenset({"tests", "include", "npy-pkg-config", "pkgconfig", "_examples", "__pycache__"})
#: ... and file endings (headers, static libraries, Cython and C sources, type stubs).
PRUNE_SUFFIXES = (".h", ".hpp", ".a", ".lib", ".pxd", ".pyx", ".pyi", ".c", ".cpp", ".pyc")


def pruned(name: str) -> bool:
    """True when the wheel member ``name`` stays out of the .oxt (never a licence file)."""
    parts = name.split("/")
    if "licen" in parts[-1].lower() or "copying" in parts[-1].lower():
        return False
    if parts[0].endswith(".dist-info") and parts[-1] == "RECORD":  # lists the pruned files: stale
        return True
    return any(p in PRUNE_DIRS for p in parts[:-1]) or parts[-1].endswith(PRUNE_SUFFIXES)


def vendor_members(wheel: Path) -> List[Tuple[str, bytes]]:
    """(path inside pythonpath/ratiodesk_vendor, bytes) of the wheel, pruned."""
    out = []
    with zipfile.ZipFile(wheel) as zf:
        for info in zf.infolist():
            if info.is_dir() or pruned(info.filename):
                continue
            out.append((info.filename, zf.read(info)))
    if not any(n == "numpy/__init__.py" for n, _ in out):
        raise SystemExit(f"{wheel.name} holds no numpy/__init__.py")
    return out


def build_module(ver: str, target: str, lock: Dict[str, Any], numpy_version: Optional[str] = None) -> str:
    """``_build.py`` of a build: version, target, what it was built for, every supported target."""
    plat, py = (None, None) if target == targets.SYSTEM else targets.parse_target(target)
    lines = ['"""Written by macros/package.py: which build of the RatioDesk extension this is."""',
             f"VERSION = {ver!r}",
             f"TARGET = {target!r}",
             f"PYTHON = {None if py is None else targets.python_label(py)!r}",
             f"PLATFORM = {None if plat is None else plat.key!r}",
             f"NUMPY = {numpy_version!r}",
             f"VENDOR = {None if plat is None else VENDOR_NAME!r}",
             f"TARGETS = {tuple(lock.get('targets', {}))!r}"]
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------------------------
# the .oxt
# --------------------------------------------------------------------------------------------
def oxt_members(workdir: Path, target: str = targets.SYSTEM) -> List[Tuple[str, bytes]]:
    """Every (name, bytes) of the extension, in a fixed order."""
    ver = version()
    members: List[Tuple[str, bytes]] = []

    def add(name: str, data: object) -> None:
        members.append((name, data.encode("utf-8") if isinstance(data, str) else data))  # type: ignore[arg-type]

    lock = read_lock() if LOCK.exists() or target != targets.SYSTEM else {}
    wheel = None if target == targets.SYSTEM else fetch_wheel(target, lock)
    add("description.xml", description_text(ver, target))
    add("LICENSE.txt", LICENSE)
    add("ratiodesk.rdb", type_library(workdir).read_bytes())
    add("ratiodesk.components", components_text())
    add("CalcAddIns.xcu", xcu_text())
    for xcu in sorted(HERE.glob("*.xcu")):
        add(xcu.name, xcu.read_bytes())
    add("addin.py", (HERE / "addin.py").read_bytes())
    if (HERE / "commands.py").exists():
        add("commands.py", (HERE / "commands.py").read_bytes())
    calc = f"pythonpath/{CALC_NAME}/"
    add(calc + "__init__.py", '"""RatioDesk Calc add-in: the function table and the cell adapter."""\n')
    add(calc + "_build.py", build_module(ver, target, lock,
                                         None if wheel is None else lock["targets"][target]["numpy"]))
    add(calc + "functions.py", (HERE / "functions.py").read_bytes())
    add(calc + "cells.py", (HERE / "cells.py").read_bytes())
    add(calc + "targets.py", (HERE / "targets.py").read_bytes())
    for name, data in engine_files():
        add(f"pythonpath/{ENGINE_NAME}/{name}", data)
    if wheel is not None:
        for name, data in vendor_members(wheel):
            add(f"pythonpath/{VENDOR_NAME}/{name}", data)
    names = [n for n, _ in members]
    if len(set(names)) != len(names):
        raise SystemExit(f"duplicate names in the .oxt: {sorted(n for n in names if names.count(n) > 1)}")
    members.insert(0, ("META-INF/manifest.xml", manifest_text(names).encode("utf-8")))
    return members


def build(out_dir: Path, target: str = targets.SYSTEM) -> Path:
    """Write the .oxt of ``target`` into ``out_dir``; return its path."""
    if target != targets.SYSTEM:
        try:
            targets.parse_target(target)
        except ValueError as exc:
            raise SystemExit(str(exc)) from None
    out_dir.mkdir(parents=True, exist_ok=True)
    path = out_dir / targets.oxt_name(version(), target)
    with tempfile.TemporaryDirectory() as tmp:
        members = oxt_members(Path(tmp), target)
    partial = path.with_suffix(".oxt.part")
    vendor = f"pythonpath/{VENDOR_NAME}/"
    with zipfile.ZipFile(partial, "w", zipfile.ZIP_DEFLATED) as zf:
        for name, data in members:
            info = zipfile.ZipInfo(name, ZIP_TIME)
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = 0o644 << 16
            zf.writestr(info, data, compresslevel=9 if name.startswith(vendor) else None)
    size = partial.stat().st_size
    if size > MAX_OXT_BYTES:
        partial.unlink()
        raise SystemExit(f"{path.name} would be {size / 2 ** 20:.1f} MB, above the limit of "
                         f"{MAX_OXT_BYTES / 2 ** 20:.0f} MB (MAX_OXT_BYTES in macros/package.py): not written")
    partial.replace(path)
    return path


def expand_targets(requested: List[str]) -> List[str]:
    """``--target`` values → target names (``all``: the system build and every target of the lock)."""
    out: List[str] = []
    for t in requested or [targets.SYSTEM]:
        names = [targets.SYSTEM, *read_lock()["targets"]] if t == "all" else [t]
        out += [n for n in names if n not in out]
    return out


def main(argv: Optional[List[str]] = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[1])
    ap.add_argument("--out", type=Path, default=ROOT / "dist", help="output folder (default dist/)")
    ap.add_argument("--target", action="append", default=[],
                    help="system (default), PLATFORM-cpXY (e.g. win_amd64-cp310) or all; may be repeated")
    ap.add_argument("--update-generated", action="store_true",
                    help="rewrite macros/generated/ratiodesk.idl and .rdb from the table (needs the SDK)")
    ap.add_argument("--update-lock", action="store_true",
                    help=f"ask pip for the newest numpy wheel of every target and rewrite {LOCK.name}")
    args = ap.parse_args(argv)
    if args.update_generated:
        update_generated()
    if args.update_lock:
        update_lock([t for t in args.target if t != "all"] or None)
        if not args.target:
            return 0
    how = "compiled with unoidl-write" if sdk_available() else "committed macros/generated/ratiodesk.rdb"
    for target in expand_targets(args.target):
        path = build(args.out, target)
        size = path.stat().st_size / 2 ** 20
        print(f"wrote {path} ({size:.1f} MB, target {target}; {len(table.FUNCTIONS)} functions; type library {how})",
              flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
