#!/usr/bin/env python3
"""Benchmark: cost of a RatioDesk cell function in a real headless LibreOffice.

Prints the per-call time of
* a native formula (=ABS(U1)),
* the bridge's floor: a trivial add-in function of the table (=RD.ECHO(U1)),
* RatioDesk functions that call the engine (=RD.AGE.SLOPE, =RD.INITIAL.RATIO, and a cached
  isochron accessor =RD.ISOCHRON.MSWD over a fixed range),
and the full recalculation of a sheet holding 500 analyses (per row: initial ratio, ε, model age;
one isochron block and age over all rows). Target: a RatioDesk function's per-call cost is at
most 2x the floor. Timings are the best of 3 passes over all jobs, each pass
with a fresh document: one cold recalculation and 3 warm ones (the sheets of analyses report the
cold one). Exits 0 (rule 6: speed targets
are reported here, never asserted in tests); skips when LibreOffice is absent.
"""
from __future__ import annotations

import math
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path[:0] = [str(ROOT / "tests" / "integration"), str(ROOT / "macros"), str(ROOT)]

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
    out.append(chain_sheet())
    return out


def chain_sheet() -> dict:
    """500 spiked Sm-Nd analyses, each reduced from mixture ratios by RD.ANALYSIS.ROW, then ε and one isochron.

    Mixtures are forward-modelled with the engine from invented concentrations and the engine's INVENTED
    demo spike (rule 3).
    """
    from reduction.dilution import forward_mixture, load_demo_spikes

    sp = load_demo_spikes()
    sm, nd = sp["demo-SmNd-149-150 Sm"], sp["demo-SmNd-149-150 Nd"]
    width = 7
    grid = []
    for s in (sm, nd):
        third = [s.spike_isotope, s.concentration_umol_g, s.concentration_sigma_1s]
        for r in (list(s.isotopes), list(s.abundances), third):
            grid.append(r + [""] * (width - len(r)))
    sm_keys, nd_keys = ["147Sm/152Sm", "149Sm/152Sm"], ["143Nd/144Nd", "146Nd/144Nd", "150Nd/144Nd"]
    grid.append(sm_keys + nd_keys + ["", ""])
    first = len(grid) + 1
    for i in range(ANALYSES):
        c_sm = 0.01 + 0.02 * i / ANALYSES
        ms = forward_mixture("Sm", "152Sm", c_sm, 0.3, sm, 0.08, bias_factor=1.35)
        mn = forward_mixture("Nd", "144Nd", 0.1, 0.3, nd, 0.08, bias_factor=1.6,
                             sample_ratios={"143Nd/144Nd": 0.5109 + 0.0066 * 1.2 * c_sm / 0.1})
        grid.append([round(float(ms[k]), 10) for k in sm_keys] + [round(float(mn[k]), 10) for k in nd_keys]
                    + ["", ""])
    arrays, formulas = [], []
    names_row = first - 1
    for i in range(ANALYSES):
        r = first + i
        formulas.append("=RD.VERSION()")
        arrays.append((f"B{r}:F{r}", f'=RD.ANALYSIS.ROW("sm-nd";$U${names_row}:$V${names_row};U{r}:V{r};'
                                     f'$W${names_row}:$Y${names_row};W{r}:Y{r};0.3;0.08;$U$1:$AA$3;$U$4:$AA$6;;;'
                                     f'"147Sm/152Sm")'))
        arrays.append((f"G{r}:H{r}", f'=RD.EPSILON(D{r};E{r};B{r};0;"sm-nd";C{r};F{r})'))
    last = first + ANALYSES - 1
    rng = f"$B${first}:$B${last};$C${first}:$C${last};$D${first}:$D${last};$E${first}:$E${last}"
    arrays.append((f"J{first}:K{first + 15}", f"=RD.ISOCHRON({rng};$F${first}:$F${last})"))
    arrays.append((f"L{first}:P{first}", f'=RD.AGE.ISOCHRON({rng};"sm-nd";$F${first}:$F${last})'))
    return {"name": f"sheet of {ANALYSES} spiked analyses (chain)", "inputs": grid, "formulas": formulas,
            "array_formulas": arrays}


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
    print(f"full recalculation, {ANALYSES} analyses (initial ratio, epsilon, model age per row; isochron, age): "
          f"{sheet['cold_seconds'] * 1e3:.0f} ms")
    chain = res[f"sheet of {ANALYSES} spiked analyses (chain)"]
    print(f"full recalculation, {ANALYSES} spiked analyses (RD.ANALYSIS.ROW: ID + bias + propagation per row; "
          f"epsilon; isochron; age): {chain['cold_seconds']:.2f} s cold, {chain['seconds'] * 1e3:.0f} ms with "
          "every analysis cached")
    return 0


if __name__ == "__main__":
    sys.exit(main())
