#!/usr/bin/env python3
"""Write the RatioDesk template workbook and the demo workbook to dist/ (.ods and .xlsx).

    .venv/bin/python templates/build_template.py [--out DIR]

The sheets, columns and formulas come from the single definition in ``reduction/workbook/``;
the demo data from ``reduction/workbook/demo.py`` (an invented, forward-modelled scenario). Computed cells
carry the engine's values as cached values, so the files show numbers before any recalculation.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path[:0] = [str(ROOT), str(HERE)]

from odswriter import write_ods  # noqa: E402

from reduction.workbook import build_layout, write_xlsx  # noqa: E402
from reduction.workbook.demo import demo_layout  # noqa: E402

TEMPLATE = "ratiodesk-template"
DEMO = "ratiodesk-demo"


def build(out: Path) -> list:
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for stem, lay in ((TEMPLATE, build_layout()), (DEMO, demo_layout())):
        for ext, writer in ((".xlsx", write_xlsx), (".ods", write_ods)):
            path = out / (stem + ext)
            writer(lay, path)
            written.append(path)
    return written


def main(argv: list | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--out", default=str(ROOT / "dist"), help="output directory (default: dist/)")
    args = p.parse_args(argv)
    for path in build(Path(args.out)):
        print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
