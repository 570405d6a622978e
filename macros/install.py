#!/usr/bin/python3
"""Install the RatioDesk .oxt into a LibreOffice user profile through the ExtensionManager API.

    /usr/bin/python3 macros/install.py [--oxt dist/ratiodesk-<version>.oxt] [--profile DIR]

Runs under the system Python (``uno`` imports only there). ``unopkg`` refuses to run as root
without ``--shared``; this script instead starts a headless LibreOffice on 127.0.0.1 with the
chosen profile (default: this user's own, ``~/.config/libreoffice/4``), adds the extension to the
"user" repository (accepting its licence), and stops that LibreOffice again by its process id.
Close LibreOffice windows using the same profile first. A newer version replaces an older one.

The start/connect/stop helpers here are also the integration tests' harness
(tests/integration/harness.py).
"""
from __future__ import annotations

import argparse
import glob
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path
from typing import Any, Optional, Tuple

ROOT = Path(__file__).resolve().parent.parent
EXTENSION_ID = "org.ratiodesk.calc"


def soffice_binary() -> Optional[str]:
    """The soffice launcher, or None when LibreOffice is not installed."""
    return shutil.which("soffice") or next(
        (p for p in ("/usr/lib/libreoffice/program/soffice", "/opt/libreoffice/program/soffice") if os.path.exists(p)),
        None)


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def soffice_environment(env: Optional[dict] = None) -> dict:
    """The environment for soffice, without whatever selects another Python.

    LibreOffice embeds the system Python, which finds its standard library from the first
    ``python3`` on PATH. Started from a pyenv or virtual-environment Python (as ``build.py`` and
    the venv's pytest do), PATH begins with that interpreter's folder, the embedded Python then
    loads a foreign standard library and site-packages, and every add-in call dies with
    "std::bad_alloc". So drop those PATH entries and the variables that point at other Pythons.
    """
    env = dict(os.environ if env is None else env)
    for var in ("PYTHONHOME", "PYTHONPATH", "VIRTUAL_ENV", "PYTHONSTARTUP"):
        env.pop(var, None)
    for var in [k for k in env if k.startswith("PYENV")]:
        env.pop(var)
    system_dirs = {"/usr/bin", "/bin", "/usr/sbin", "/sbin"}
    keep = [d for d in env.get("PATH", "").split(os.pathsep)
            if d in system_dirs or not os.path.exists(os.path.join(d, "python3"))]
    env["PATH"] = os.pathsep.join(keep) or "/usr/bin:/bin"
    return env


def start_soffice(profile: Path, port: int, log_path: Optional[Path] = None) -> subprocess.Popen:
    """Start a headless LibreOffice listening on 127.0.0.1:port with its own profile folder.

    It runs in a new session, so :func:`stop_soffice` can stop it and its child processes by its
    process id (the process-group id equals it).
    """
    exe = soffice_binary()
    if exe is None:
        raise RuntimeError("LibreOffice (soffice) is not installed")
    profile = Path(profile).resolve()
    profile.mkdir(parents=True, exist_ok=True)
    cmd = [exe, "--headless", "--invisible", "--norestore", "--nologo", "--nodefault", "--nolockcheck",
           f"-env:UserInstallation={profile.as_uri()}",
           f"--accept=socket,host=127.0.0.1,port={port};urp;"]
    if log_path is None:
        return subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                start_new_session=True, env=soffice_environment())
    with open(log_path, "ab") as out:  # the child keeps its own copy of the handle
        return subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=out, stderr=out, start_new_session=True,
                                env=soffice_environment())


def connect(port: int, proc: Optional[subprocess.Popen] = None, timeout: float = 60.0) -> Any:
    """Connect to LibreOffice on 127.0.0.1:port, retrying until it listens; return the component context."""
    import uno
    from com.sun.star.connection import NoConnectException

    local = uno.getComponentContext()
    resolver = local.ServiceManager.createInstanceWithContext("com.sun.star.bridge.UnoUrlResolver", local)
    url = f"uno:socket,host=127.0.0.1,port={port};urp;StarOffice.ComponentContext"
    deadline = time.monotonic() + timeout
    while True:
        try:
            return resolver.resolve(url)
        except NoConnectException:
            if proc is not None and proc.poll() is not None:
                raise RuntimeError(f"soffice exited with code {proc.returncode} before accepting connections") from None
            if time.monotonic() > deadline:
                raise TimeoutError(f"LibreOffice did not listen on port {port} within {timeout} s") from None
            time.sleep(0.1)


def stop_soffice(proc: subprocess.Popen, ctx: Any = None, grace: float = 10.0) -> None:
    """Stop LibreOffice: ask it to terminate, then signal its process group by its id."""
    if ctx is not None:
        try:
            desktop = ctx.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", ctx)
            desktop.terminate()
        except Exception:  # the bridge usually drops while terminating; the signals below make sure
            pass
    steps = ((None, grace), (signal.SIGTERM, 5.0), (signal.SIGKILL, 5.0))
    if ctx is None:  # nobody asked it to quit: a short wait for one that is already quitting
        steps = ((None, 2.0),) + steps[1:]
    for sig, wait in steps:
        if sig is not None:
            try:
                os.killpg(proc.pid, sig)
            except ProcessLookupError:
                pass
        try:
            proc.wait(wait)
            break
        except subprocess.TimeoutExpired:
            continue
    try:  # children (soffice.bin) live in the same process group
        os.killpg(proc.pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError):
        pass


def _command_environment() -> Any:
    """A command environment that accepts the licence dialogue and ignores progress."""
    import uno
    import unohelper
    from com.sun.star.task import XInteractionHandler
    from com.sun.star.ucb import XCommandEnvironment, XProgressHandler

    approve = uno.getTypeByName("com.sun.star.task.XInteractionApprove")

    class Handler(unohelper.Base, XInteractionHandler):
        def handle(self, request: Any) -> None:
            for c in request.getContinuations():
                if c.queryInterface(approve) is not None:
                    c.select()
                    return

    class Progress(unohelper.Base, XProgressHandler):
        def push(self, status: Any) -> None:
            pass

        def update(self, status: Any) -> None:
            pass

        def pop(self) -> None:
            pass

    class Env(unohelper.Base, XCommandEnvironment):
        def getInteractionHandler(self) -> Any:
            return Handler()

        def getProgressHandler(self) -> Any:
            return Progress()

    return Env()


def install_extension(ctx: Any, oxt: Path) -> str:
    """Add (or update) the extension in the "user" repository; return the installed version."""
    em = ctx.getValueByName("/singletons/com.sun.star.deployment.ExtensionManager")
    env = _command_environment()
    pkg = em.addExtension(Path(oxt).resolve().as_uri(), (), "user", em.createAbortChannel(), env)
    if pkg is None:
        raise RuntimeError(f"LibreOffice did not install {oxt}")
    return pkg.getVersion()


def installed_version(ctx: Any) -> Optional[str]:
    em = ctx.getValueByName("/singletons/com.sun.star.deployment.ExtensionManager")
    for pkg in em.getDeployedExtensions("user", em.createAbortChannel(), _command_environment()):
        if pkg.getIdentifier().Value == EXTENSION_ID:
            return pkg.getVersion()
    return None


def default_profile() -> Path:
    base = os.environ.get("XDG_CONFIG_HOME") or os.path.join(os.path.expanduser("~"), ".config")
    return Path(base) / "libreoffice" / "4"


def newest_oxt() -> Path:
    # Only the system build (ratiodesk-<version>.oxt): a per-platform build (ratiodesk-<version>-<TARGET>.oxt)
    # or the demo workbook's neighbours are never picked by accident.
    found = sorted((p for p in glob.glob(str(ROOT / "dist" / "ratiodesk-*.oxt"))
                    if re.fullmatch(r"ratiodesk-\d+(\.\d+)*\.oxt", os.path.basename(p))), key=os.path.getmtime)
    if not found:
        raise SystemExit("no dist/ratiodesk-<version>.oxt: run `python3 build.py oxt` first")
    return Path(found[-1])


def install_into_profile(oxt: Path, profile: Path, port: Optional[int] = None) -> Tuple[str, Optional[str]]:
    """Start a headless LibreOffice on ``profile``, install ``oxt``, stop it. Returns (before, after) versions."""
    port = port or free_port()
    proc = start_soffice(profile, port)
    ctx = None
    try:
        ctx = connect(port, proc)
        before = installed_version(ctx)
        after = install_extension(ctx, oxt)
        return before or "", after
    finally:
        stop_soffice(proc, ctx)


def main(argv: Optional[list] = None) -> int:
    ap = argparse.ArgumentParser(description="Install the RatioDesk extension into a LibreOffice profile.")
    ap.add_argument("--oxt", type=Path, help="the .oxt (default: the newest dist/ratiodesk-*.oxt)")
    ap.add_argument("--profile", type=Path, default=None,
                    help=f"LibreOffice user-installation folder (default {default_profile()})")
    args = ap.parse_args(argv)
    try:
        import uno  # noqa: F401
    except ImportError:
        print("the Python UNO bridge is missing: run this with /usr/bin/python3 and "
              "`apt-get install python3-uno libreoffice-script-provider-python`", file=sys.stderr)
        return 1
    if soffice_binary() is None:
        print("LibreOffice is not installed (apt-get install libreoffice-calc-nogui)", file=sys.stderr)
        return 1
    oxt = args.oxt or newest_oxt()
    profile = args.profile or default_profile()
    before, after = install_into_profile(oxt, profile)
    was = f" (replacing {before})" if before else ""
    print(f"installed RatioDesk {after}{was} from {oxt} into the LibreOffice profile {profile}")
    print("restart LibreOffice; the functions are in the Function Wizard under Add-In, named RD.*")
    return 0


if __name__ == "__main__":
    sys.exit(main())
