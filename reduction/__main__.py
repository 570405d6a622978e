"""``python -m reduction`` is the ``ratiodesk`` command."""
import sys

from .cli import main

sys.exit(main())
