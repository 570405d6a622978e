"""Build targets of the extension: which .oxt fits which LibreOffice.

``system``            the extension without numpy inside: it uses the numpy of LibreOffice's Python
                      (a Linux distribution's LibreOffice, whose Python is the system one).
``PLATFORM-cpXY``     the extension with a numpy wheel inside, for LibreOffice's own bundled Python
                      (Windows, macOS, LibreOffice's own Linux builds), e.g. ``win_amd64-cp38``.

One definition for both sides: ``macros/package.py`` builds from it, and the cell adapter (shipped
as ``ratiodesk_calc/targets.py``) uses it to name the right .oxt in its messages and in
RD.DIAGNOSTICS. Which targets really exist (a numpy wheel is pinned for them) is the lock file
``macros/numpy-wheels.lock``; its target list is also written into each build's ``_build.py``.

LibreOffice's platform tokens (``<platform value="..."/>`` in description.xml) are those its
Extension Manager accepts, listed in LibreOffice's ``desktop/source/deployment/misc/dp_platform.cxx``
(``windows_x86_64``, ``macosx_aarch64``, ``macosx_x86_64``, ``linux_x86_64``). The wheel tags are
the platform tags of the Python packaging specifications (PEP 425, PEP 600).

Standard library only; importable by Python 3.8.
"""
from __future__ import annotations

import platform as _platform
import sys
from dataclasses import dataclass
from typing import Dict, Optional, Tuple

SYSTEM = "system"
#: CPython versions (as in the wheel tag ``cpXY``) a bundled build can be made for.
PYTHONS: Tuple[str, ...] = ("38", "39", "310", "311", "312", "313")


@dataclass(frozen=True)
class Platform:
    """One operating system and processor a bundled build can be made for.

    ``key`` is our name (in the .oxt file name), ``token`` LibreOffice's platform token,
    ``wheel_tags`` the wheel platform tags pip may choose from (the oldest operating-system
    release that LibreOffice still supports, so the wheel runs wherever that LibreOffice does),
    ``label`` the words a message uses.
    """

    key: str
    token: str
    wheel_tags: Tuple[str, ...]
    label: str


PLATFORMS: Tuple[Platform, ...] = (
    Platform("win_amd64", "windows_x86_64", ("win_amd64",), "64-bit Windows"),
    # arm64 Macs run macOS 11 or later; wheels that need macOS 14 (Accelerate) are not chosen
    Platform("macos_arm64", "macosx_aarch64", ("macosx_11_0_arm64",), "macOS on Apple silicon (arm64)"),
    Platform("macos_x86_64", "macosx_x86_64", ("macosx_10_15_x86_64",), "macOS on Intel (x86_64)"),
    Platform("linux_x86_64", "linux_x86_64",
             ("manylinux2014_x86_64", "manylinux_2_17_x86_64", "manylinux_2_28_x86_64"), "64-bit Linux (x86_64)"),
)
BY_KEY: Dict[str, Platform] = {p.key: p for p in PLATFORMS}


def target_name(platform_key: str, python: str) -> str:
    """``"win_amd64"``, ``"310"`` → ``"win_amd64-cp310"``."""
    return f"{platform_key}-cp{python}"


def python_label(python: str) -> str:
    """``"310"`` → ``"3.10"``."""
    return f"{python[0]}.{python[1:]}"


def parse_target(text: str) -> Tuple[Platform, str]:
    """The platform and Python (``"311"``) of a target name; ValueError with a readable reason."""
    known = ", ".join(p.key for p in PLATFORMS)
    pythons = ", ".join(PYTHONS)
    key, sep, py = text.rpartition("-cp")
    if not sep:
        raise ValueError(f"target {text!r} is not 'system', 'all' or PLATFORM-cpXY (PLATFORM one of {known}; "
                         f"XY one of {pythons})")
    if key not in BY_KEY:
        raise ValueError(f"target {text!r}: unknown platform {key!r} (one of {known})")
    if py not in PYTHONS:
        raise ValueError(f"target {text!r}: Python cp{py} is not supported (cpXY with XY one of {pythons})")
    return BY_KEY[key], py


def oxt_name(version: str, target: str) -> str:
    """File name of a build: ``ratiodesk-0.1.0.oxt`` (system) or ``ratiodesk-0.1.0-win_amd64-cp310.oxt``."""
    return f"ratiodesk-{version}.oxt" if target == SYSTEM else f"ratiodesk-{version}-{target}.oxt"


def running_python() -> str:
    """This interpreter as in a wheel tag: ``"311"``."""
    return f"{sys.version_info[0]}{sys.version_info[1]}"


def running_platform() -> str:
    """This interpreter's platform as a :data:`PLATFORMS` key (or a descriptive name of another one)."""
    machine = _platform.machine().lower()
    bits64 = sys.maxsize > 2 ** 32
    if sys.platform == "win32":
        if machine in ("amd64", "x86_64") and bits64:
            return "win_amd64"
        return f"windows_{machine or 'unknown'}_{'64' if bits64 else '32'}bit"
    if sys.platform == "darwin":
        return {"arm64": "macos_arm64", "aarch64": "macos_arm64", "x86_64": "macos_x86_64"}.get(
            machine, f"macos_{machine or 'unknown'}")
    if sys.platform.startswith("linux"):
        if machine in ("x86_64", "amd64") and bits64:
            return "linux_x86_64"
        return f"linux_{machine or 'unknown'}_{'64' if bits64 else '32'}bit"
    return f"{sys.platform}_{machine or 'unknown'}"


def platform_label(key: str) -> str:
    """Words for a platform key (the key itself when it is not one of ours)."""
    p: Optional[Platform] = BY_KEY.get(key)
    return p.label if p else key
