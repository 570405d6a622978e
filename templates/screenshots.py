#!/usr/bin/python3
"""Screenshots of the demo workbook in a real LibreOffice window (Xvfb), for the README.

    /usr/bin/python3 templates/screenshots.py OXT DEMO.ods OUTDIR [FILE.png:SHEET:CELL ...]

Needs the full ``libreoffice-calc`` and ``libreoffice-gtk3`` packages, ``xvfb`` and ``imagemagick``
(``import``), and ``xdotool`` to size the window. Starts ``Xvfb`` on a free display and LibreOffice
with its own throwaway profile
(RatioDesk installed into it), opens the workbook, shows a few sheets and grabs the screen;
stops both by their process ids.
"""
from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "macros"))
import install as lo  # noqa: E402

SHOTS = (  # (file, sheet, cell to select)
    ("samples.png", "Samples", "F7"),
    ("standards.png", "Standards", "N11"),
    ("results.png", "Results", "I5"),
    ("steps.png", "Steps", "C5"),
    ("spikes.png", "Spikes", "U5"),
    ("isochron.png", "Isochron", "J9"),
)


def _prop(name, value):
    from com.sun.star.beans import PropertyValue

    p = PropertyValue()
    p.Name, p.Value = name, value
    return p


def _give_up(*_args) -> None:
    raise TimeoutError("LibreOffice did not finish within 240 s (a dialog may be open)")


def _always_recalculate_on_load(ctx) -> None:
    """No "recalculate?" prompt on load in this throwaway profile (it would block the UNO call)."""
    cp = ctx.ServiceManager.createInstanceWithContext("com.sun.star.configuration.ConfigurationProvider", ctx)
    node = cp.createInstanceWithArguments("com.sun.star.configuration.ConfigurationUpdateAccess",
                                          (_prop("nodepath", "/org.openoffice.Office.Calc/Formula/Load"),))
    node.setPropertyValue("OOXMLRecalcMode", 0)
    node.setPropertyValue("ODFRecalcMode", 0)
    node.commitChanges()


def main(argv) -> int:
    oxt, book, outdir = Path(argv[0]).resolve(), Path(argv[1]).resolve(), Path(argv[2]).resolve()
    outdir.mkdir(parents=True, exist_ok=True)
    shots = [tuple(a.split(":")) for a in argv[3:]] or list(SHOTS)
    work = Path(tempfile.mkdtemp(prefix="rd-shots-"))
    shutil.copy(book, work / book.name)          # no lock files next to the caller's copy
    book = work / book.name
    signal.signal(signal.SIGALRM, _give_up)
    signal.alarm(240)                            # a blocking dialog must not leave processes behind
    profile = work / "profile"
    lo.install_into_profile(oxt, profile)
    display = f":{70 + os.getpid() % 20}"
    xvfb = subprocess.Popen(["Xvfb", display, "-screen", "0", "1500x900x24", "-nolisten", "tcp"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    office = None
    ctx = None
    try:
        time.sleep(1.0)
        port = lo.free_port()
        env = dict(os.environ, DISPLAY=display, SAL_USE_VCLPLUGIN="gtk3")
        office = subprocess.Popen([lo.soffice_binary(), "--norestore", "--nologo", "--nolockcheck", "--nodefault",
                                   f"-env:UserInstallation={profile.as_uri()}",
                                   f"--accept=socket,host=127.0.0.1,port={port};urp;"],
                                  env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                  start_new_session=True)
        ctx = lo.connect(port, office, timeout=90)
        desktop = ctx.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", ctx)
        _always_recalculate_on_load(ctx)
        doc = desktop.loadComponentFromURL(book.as_uri(), "_default", 0, (_prop("Hidden", False),))
        doc.calculateAll()
        ctrl = doc.getCurrentController()
        win = ctrl.getFrame().getContainerWindow()
        win.setVisible(True)
        win.setPosSize(0, 0, 1500, 900, 15)
        try:
            win.toFront()
        except Exception:  # noqa: BLE001 - not every window peer is a top window
            pass
        time.sleep(2.0)
        # without a window manager the gtk3 window keeps its first tiny size: size it from outside
        if shutil.which("xdotool"):
            subprocess.run(["xdotool", "search", "--name", "LibreOffice Calc", "windowmove", "0", "0",
                            "windowsize", "1500", "900"], env=env, check=False)
            time.sleep(2.0)
        if os.environ.get("RD_SHOTS_DEBUG"):
            subprocess.run(["xwininfo", "-display", display, "-root", "-tree"])
        for name, sheet, cell in shots:
            sh = doc.getSheets().getByName(sheet)
            ctrl.setActiveSheet(sh)
            ctrl.select(sh.getCellRangeByName(cell))
            time.sleep(2.5)
            subprocess.run(["import", "-display", display, "-window", "root", str(outdir / name)], check=True)
            print(f"wrote {outdir / name}")
        doc.close(True)
    finally:
        if office is not None:
            lo.stop_soffice(office, ctx)
        xvfb.terminate()
        try:
            xvfb.wait(5)
        except subprocess.TimeoutExpired:
            xvfb.kill()
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
