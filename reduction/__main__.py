"""``python -m reduction`` is the ``ratiodesk`` command."""
import sys

from .workbook.cli import main

sys.exit(main())
