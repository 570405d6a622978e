"""One headless LibreOffice for the whole integration session, with the freshly built .oxt.

When LibreOffice or ``/usr/bin/python3 -c 'import uno'`` is absent the tests are skipped LOUDLY
(a banner in the summary); under ``CI=true`` that absence is a failure.
"""
import os
import sys
from pathlib import Path

import pytest

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
for p in (HERE, ROOT / "macros", ROOT / "tests" / "cells"):
    if str(p) not in sys.path:
        sys.path.insert(0, str(p))

import harness  # noqa: E402

_MISSING = harness.why_unavailable()


def pytest_collection_modifyitems(config, items):
    if _MISSING is None:
        return
    for item in items:
        if "integration" in str(item.fspath):
            item.add_marker(pytest.mark.libreoffice)


def pytest_terminal_summary(terminalreporter):
    if _MISSING is not None:
        terminalreporter.write_sep("!", "LibreOffice integration tests NOT RUN", red=True, bold=True)
        terminalreporter.write_line(f"reason: {_MISSING}", red=True, bold=True)
        terminalreporter.write_line("install: apt-get install libreoffice-calc-nogui python3-uno "
                                    "libreoffice-script-provider-python python3-numpy", red=True)


@pytest.fixture(scope="session")
def office(tmp_path_factory):
    """The running LibreOffice with RatioDesk installed into a throwaway profile."""
    if _MISSING is not None:
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail(f"CI=true but the LibreOffice integration tests cannot run: {_MISSING}")
        pytest.skip(f"LIBREOFFICE INTEGRATION TESTS SKIPPED: {_MISSING}")
    import package

    work = tmp_path_factory.mktemp("lo")
    oxt = package.build(work / "dist")
    off = harness.Office(work)
    try:
        # a live-installed type library is not seen by the running office: install, then restart
        off.start()
        off.version = off.run("install", str(oxt))["version"]
        off.stop()
        off.start()
        off.oxt = oxt
        yield off
    finally:
        off.stop()
        off.cleanup()
