#!/usr/bin/env python3
"""Benchmark: cost of a RatioDesk cell function in a real headless LibreOffice.

Prints the per-call time of
* a native formula (=ABS(U1)),
* the bridge's floor: a trivial add-in function of the table (=RD.ECHO(U1)),
* RatioDesk functions that call the engine (=RD.AGE.SLOPE, =RD.INITIAL.RATIO, and a cached
  isochron accessor =RD.ISOCHRON.MSWD over a fixed range),
and the full recalculation of a sheet holding 500 analyses (per row: initial ratio, ε, model age;
one isochron block and age over all rows). Target: a RatioDesk function's per-call cost is at
most 2x the floor. Timings are the best of 7 full recalculations. Exits 0 (rule 6: speed targets
are reported here, never asserted in tests); skips when LibreOffice is absent.
"""
from __future__ import annotations

import math
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path[:0] = [str(ROOT / "tests" / "integration"), str(ROOT / "macros")]

import harness  # noqa: E402
import package  # noqa: E402

N = 4000
ANALYSES = 500


def jobs() -> list:
    lam = 6.54e-12
    slopes = [[0.001 + 1e-6 * i] for i in range(N)]
    base = [[0.1 + 1e-5 * i, 0.5112 + 1e-7 * i] for i in range(N)]
    fit_in = [[0.10 + 0.04 * i, 0.0002, 0.5115 + 0.00026 * i + (1e-6 if i % 2 else -1e-6), 4e-6] for i in range(5)]
    out = [
        {"name": "native ABS", "inputs": slopes, "formulas": [f"=ABS(U{i + 1})" for i in range(N)]},
        {"name": "floor RD.ECHO", "inputs": slopes, "formulas": [f"=RD.ECHO(U{i + 1})" for i in range(N)]},
        {"name": "RD.AGE.SLOPE", "inputs": slopes,
         "formulas": [f'=RD.AGE.SLOPE(U{i + 1};"sm-nd")' for i in range(N)]},
        {"name": "RD.INITIAL.RATIO", "inputs": base,
         "formulas": [f'=RD.INITIAL.RATIO(V{i + 1};U{i + 1};1000;"sm-nd")' for i in range(N)]},
        {"name": "RD.ISOCHRON.MSWD (cached fit)", "inputs": fit_in,
         "formulas": ["=RD.ISOCHRON.MSWD($U$1:$U$5;$V$1:$V$5;$W$1:$W$5;$X$1:$X$5)"] * N},
    ]
    # 500 analyses: x, sx, y, sy, rho in U:Y, forward-modelled from 1000 Ma (invented demo values)
    slope = math.expm1(lam * 1000e6)
    rows = []
    for i in range(ANALYSES):
        x = 0.08 + 0.0004 * i
        rows.append([x, 0.002 * x, round(0.51090 + slope * x + 3e-6 * math.sin(i), 8), 4e-6, 0.1])
    formulas = []
    for i in range(ANALYSES):
        r = i + 1
        formulas.append(f'=RD.INITIAL.RATIO(W{r};U{r};1000;"sm-nd")')
    arrays = []
    for i in range(ANALYSES):
        r = i + 1
        arrays.append((f"B{r}:C{r}", f'=RD.EPSILON(W{r};X{r};U{r};1000;"sm-nd";V{r};Y{r})'))
        arrays.append((f"D{r}:E{r}", f'=RD.AGE.MODEL(W{r};X{r};U{r};V{r};"sm-nd";"DM";Y{r})'))
    rng = f"$U$1:$U${ANALYSES};$V$1:$V${ANALYSES};$W$1:$W${ANALYSES};$X$1:$X${ANALYSES};$Y$1:$Y${ANALYSES}"
    arrays.append(("G1:H16", f"=RD.ISOCHRON({rng})"))
    arrays.append(("I1:M1", f'=RD.AGE.ISOCHRON({rng.replace(";$Y$1", ";" + chr(34) + "sm-nd" + chr(34) + ";$Y$1")})'))
    out.append({"name": f"sheet of {ANALYSES} analyses", "inputs": rows, "formulas": formulas,
                "array_formulas": arrays})
    return out


def main() -> int:
    missing = harness.why_unavailable()
    if missing:
        print(f"SKIPPED: {missing}")
        return 0
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        oxt = package.build(work / "dist")
        office = harness.Office(work)
        try:
            office.start()
            office.run("install", str(oxt))
            office.stop()
            office.start()
            res = office.run("bench", {"jobs": jobs()}, timeout=600)
        finally:
            office.stop()
    per = {k: v["seconds"] / v["cells"] * 1e6 for k, v in res.items()}
    for k, v in res.items():
        bad = f"  (first cell {v['first']!r}, error {v['error']})" if v["error"] or v["first"].startswith("\u26a0") \
            else ""
        print(f"{k:34s} {v['seconds'] * 1e3:9.1f} ms  {per[k]:8.1f} us/cell{bad}")
    native, floor = per["native ABS"], per["floor RD.ECHO"]
    print(f"\nbridge floor (RD.ECHO) / native: {floor / native:6.1f}x")
    for k in ("RD.AGE.SLOPE", "RD.INITIAL.RATIO", "RD.ISOCHRON.MSWD (cached fit)"):
        print(f"{k:34s} / floor: {per[k] / floor:5.2f}x (target <= 2)   / native: {per[k] / native:6.1f}x")
    sheet = res[f"sheet of {ANALYSES} analyses"]
    print(f"full recalculation, {ANALYSES} analyses ({ANALYSES * 3 + 2} RatioDesk formulas): "
          f"{sheet['seconds'] * 1e3:.0f} ms")
    return 0


if __name__ == "__main__":
    sys.exit(main())
