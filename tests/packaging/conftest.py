"""The packaging tests import macros/package.py, macros/targets.py and the shared cases as top-level modules."""
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
for p in (ROOT / "macros", ROOT / "tests" / "cells", Path(__file__).resolve().parent):
    if str(p) not in sys.path:
        sys.path.insert(0, str(p))
