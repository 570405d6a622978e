#!/usr/bin/python3
"""Print every case's expected cell grid as JSON, computed by the engine in *this* Python.

Run under /usr/bin/python3, LibreOffice's own Python (numpy 1.24 / scipy 1.10 on Debian 12), so
the comparison with the sheet isolates the bridge from numpy-version differences.
"""
import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
for p in (ROOT, ROOT / "macros", ROOT / "tests" / "cells"):
    sys.path.insert(0, str(p))

import cases  # noqa: E402

print(json.dumps(cases.expected_all()))
