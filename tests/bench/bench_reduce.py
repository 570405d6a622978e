#!/usr/bin/env python3
"""Benchmark: ``ratiodesk reduce`` on a workbook of 5 000 spiked analyses — wall time and peak memory.

    .venv/bin/python tests/bench/bench_reduce.py [--analyses N] [--keep DIR]

Fills the template the user's way — by the key row of each sheet, with ``fill_template`` of
tests/engine/test_end_to_end.py — with invented Sm-Nd analyses forward-modelled by that test's independent
forward model (``forward_analysis``: mpmath, tests/engine/independent_forward.py, never the engine) on the
invented demo spike: per analysis one Samples row and two Measured runs (Sm, Nd), in isochron groups of
:data:`GROUP_SIZE` analyses (each group its own age, listed on the Groups sheet), reference-material runs of
one session typed at their accepted value, and the first group's first analyses picked on the Isochron sheet
(as many as its Sm-Nd block holds).

It then runs the command line exactly as a user does, ``python -m reduction reduce BOOK -o DIR``, in a
child process, and measures its wall time (start-up, reading, reduction, results.xlsx and report.pdf) and
its peak resident memory (``resource.getrusage(RUSAGE_CHILDREN).ru_maxrss``; the reduce run is the only
child this script waits for). The results are read back: every analysis must be on Results with x and y
within 1e-8 of the forward model's truth (a quick guard that the timed run really reduced them).

How many analyses: ``ratiodesk reduce`` reads up to ``reduction.workbook.MAX_DATA_ROWS`` data rows per sheet,
so the template holds MAX_DATA_ROWS // 2 analyses (two Measured runs each). The benchmark measures
:data:`TARGET_ANALYSES` analyses when the template holds that many; if it holds fewer, it measures at the
template's capacity, prints the time per analysis and the figure scaled to :data:`TARGET_ANALYSES`, and the
time target is a FAIL ("template holds only N analyses"), never a pass on a smaller book.

Targets: :data:`TARGET_ANALYSES` analyses reduced in <= :data:`TARGET_SECONDS` s and <= 1 GiB peak RSS
(:data:`TARGET_RSS_BYTES`). Prints every figure next to its target with PASS/FAIL; exits 1 when any target is
missed (or the run fails or gives wrong results), 0 when all are met.
"""
from __future__ import annotations

import argparse
import math
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path[:0] = [str(ROOT / "tests" / "engine"), str(ROOT)]

import test_end_to_end as e2e  # noqa: E402  (the end-to-end test's forward model and template filling)
from openpyxl import load_workbook  # noqa: E402

from reduction.workbook import FIRST_ROW, GROUPS, ISOCHRON_BLOCK, KEY_ROW, MAX_DATA_ROWS  # noqa: E402

TARGET_ANALYSES = 5000
TARGET_SECONDS = 10.0
TARGET_RSS_BYTES = 1 << 30
#: Analyses per isochron group at least; more when the Groups table's rows (GROUPS.capacity) would not hold
#: the groups otherwise (``ratiodesk reduce`` fits a group of any size).
GROUP_SIZE = 100


def group_size(n: int) -> int:
    """Analyses per group for a book of ``n`` analyses: the groups fill at most the Groups table's rows."""
    return max(GROUP_SIZE, math.ceil(n / GROUPS.capacity))
#: Measured rows per analysis (a Sm run and a Nd run).
RUNS_PER_ANALYSIS = 2
LABEL = "demo-SmNd-149-150"
SESSION = "S1"


def capacity() -> int:
    """Spiked analyses the template holds for ``ratiodesk reduce`` (the sheet with the most rows per analysis
    bounds it)."""
    return min(MAX_DATA_ROWS, MAX_DATA_ROWS // RUNS_PER_ANALYSIS)


def tables(n: int):
    """Spikes, Standards, Samples, Measured and Groups tables of ``n`` invented analyses, the truth of each,
    and the Isochron sheet's pick (the first group).

    Each analysis takes one of the five analyses of the end-to-end test's Sm-Nd set (its x, Nd concentration,
    masses, β and blanks), with x and the concentration shifted a little so no two rows are alike; the
    analyses of group g lie on an isochron of t = 400 + 25 g Ma (invented demo values).
    """
    spec = e2e.SMND
    lam = e2e.LAMBDA["sm-nd"]
    samples, measured, truth = [], [], {}
    groups = []
    size = group_size(n)
    for i in range(n):
        g, k = divmod(i, size)
        name = f"G{g + 1:03d}"
        if k == 0:
            groups.append({"group": name})
        t_ma = 400.0 + 25.0 * g
        j = i % len(spec["xs"])
        shift = 1.0 + 0.01 * math.sin(0.37 * i)
        x = round(spec["xs"][j] * shift, 6)
        y = spec["y0"] + x * math.expm1(lam * t_ma * e2e.YEAR_MA)
        a = f"BR-{i + 1:05d}"
        s, m, tr = e2e.forward_analysis("sm-nd", a, x, y, spec["d_concs"][j] * shift, *spec["masses"][j], LABEL,
                                        spec["betas"][j], spec["blanks"], session=SESSION)
        s["group"] = name
        samples.append(s)
        measured += m
        truth[a] = tr
    book = {"Spikes": e2e.spike_rows(LABEL, ("Sm", "Nd")),
            "Standards": e2e.standard_rows(SESSION, "JNdi-1", "143Nd/144Nd"),
            "Samples": samples, "Measured": measured, "Groups": groups}
    first, last = ISOCHRON_BLOCK["Sm-Nd"]
    pick = {"Sm-Nd": list(truth)[:min(size, last - first + 1)]}
    return book, truth, pick


def reduce_timed(book: Path, out: Path):
    """Run ``python -m reduction reduce BOOK -o OUT``; return (wall seconds, peak RSS bytes, exit status,
    its output)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    t0 = time.perf_counter()
    proc = subprocess.run([sys.executable, "-m", "reduction", "reduce", str(book), "-o", str(out)], cwd=ROOT,
                          capture_output=True, text=True)
    wall = time.perf_counter() - t0
    peak_kib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss   # KiB on Linux
    if before:
        print(f"  note: an earlier child process peaked at {before / 1024:.0f} MiB; the peak RSS below is the "
              "larger of the two (an upper bound for the reduce run)")
    return wall, peak_kib * 1024, proc.returncode, proc.stdout + proc.stderr


def check_results(path: Path, truth) -> str:
    """'' when every analysis is on Results with x and y within 1e-8 of the truth, else what is wrong."""
    ws = load_workbook(path, read_only=True, data_only=True)["Results"]
    rows = list(ws.iter_rows(min_row=KEY_ROW, values_only=True))
    keys = list(rows[0])
    ix, iy = keys.index("x"), keys.index("y")
    got = {r[0]: (r[ix], r[iy]) for r in rows[FIRST_ROW - KEY_ROW:] if r and r[0]}
    missing = [a for a in truth if a not in got]
    if missing:
        return f"{len(missing)} analyses missing from Results (e.g. {missing[0]})"
    for a, tr in truth.items():
        x, y = got[a]
        if not (isinstance(x, float) and isinstance(y, float)
                and abs(x / tr["x"] - 1) <= 1e-8 and abs(y / tr["y"] - 1) <= 1e-8):
            return f"{a}: x, y = {x!r}, {y!r}; the forward model's truth is {tr['x']!r}, {tr['y']!r}"
    return ""


def main(argv=None) -> int:
    cap = capacity()
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--analyses", type=int, default=min(cap, TARGET_ANALYSES),
                    help=f"analyses in the workbook (default: {TARGET_ANALYSES}, or the template's capacity if less)")
    ap.add_argument("--keep", help="write the workbook and results into this directory and keep them")
    args = ap.parse_args(argv)
    n = args.analyses
    if not 0 < n <= cap:
        print(f"bench_reduce: --analyses must be 1-{cap} (the template holds {cap} analyses)")
        return 2
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(args.keep) if args.keep else Path(tmp)
        work.mkdir(parents=True, exist_ok=True)
        t0 = time.perf_counter()
        book_tables, truth, pick = tables(n)
        t_model = time.perf_counter() - t0
        book = work / f"bench-{n}.xlsx"
        t0 = time.perf_counter()
        e2e.fill_template(book, book_tables, pick)
        t_fill = time.perf_counter() - t0
        print(f"bench_reduce: {n} invented spiked Sm-Nd analyses ({n * RUNS_PER_ANALYSIS} Measured runs, "
              f"{math.ceil(n / group_size(n))} isochron groups of {group_size(n)}); the template holds {cap} analyses "
              f"(MAX_DATA_ROWS = {MAX_DATA_ROWS} rows per sheet)")
        print(f"  forward model {t_model:.1f} s, template filled by its key row {t_fill:.1f} s "
              f"({book.stat().st_size / 1e6:.1f} MB; not timed)")
        wall, rss, rc, output = reduce_timed(book, work / "out")
        if rc != 0:
            print(f"  `python -m reduction reduce` exited {rc}:\n{output[-3000:]}")
            print("bench_reduce: FAIL (the reduce run failed)")
            return 1
        wrong = check_results(work / "out" / "results.xlsx", truth)
    ok = not wrong
    print(f"  results: {'every analysis on Results, x and y within 1e-8 of the truth' if ok else 'WRONG: ' + wrong}")
    per = wall / n
    if n >= TARGET_ANALYSES:
        time_ok = wall * TARGET_ANALYSES / n <= TARGET_SECONDS
        print(f"  reduce, {n} analyses: {wall:.2f} s wall ({per * 1e3:.2f} ms per analysis); target <= "
              f"{TARGET_SECONDS:g} s for {TARGET_ANALYSES}: {'PASS' if time_ok else 'FAIL'}"
              + ("" if n == TARGET_ANALYSES else f" (scaled to {TARGET_ANALYSES}: {per * TARGET_ANALYSES:.2f} s)"))
        rss_note = ""
    else:
        time_ok = False
        reason = (f"template holds only {cap} analyses" if n == cap
                  else f"measured on {n} analyses (--analyses), not {TARGET_ANALYSES}")
        print(f"  reduce, {n} analyses: {wall:.2f} s wall ({per * 1e3:.2f} ms per analysis; scaled linearly to "
              f"{TARGET_ANALYSES}: {per * TARGET_ANALYSES:.2f} s); target <= {TARGET_SECONDS:g} s for "
              f"{TARGET_ANALYSES}: FAIL ({reason})")
        rss_note = f" (measured on {n} analyses, not {TARGET_ANALYSES})"
    rss_ok = rss <= TARGET_RSS_BYTES and n >= TARGET_ANALYSES
    print(f"  peak RSS of the reduce process: {rss / 2 ** 20:.0f} MiB; target <= {TARGET_RSS_BYTES / 2 ** 30:g} GiB: "
          f"{'PASS' if rss_ok else 'FAIL'}{rss_note}")
    ok &= time_ok and rss_ok
    print("bench_reduce:", "PASS (every target met)" if ok else "FAIL (a target is missed, see above)")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
