"""The adapter tests import macros/functions.py and macros/cells.py as top-level modules."""
import sys
from pathlib import Path

MACROS = Path(__file__).resolve().parents[2] / "macros"
if str(MACROS) not in sys.path:
    sys.path.insert(0, str(MACROS))
