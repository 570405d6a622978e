"""Benchmark: 1 000 000 cycles through isobar stripping (144Sm on 144Nd) and exponential-law
normalisation (146Nd/144Nd = 0.7219): the vectorised engine against plain Python loops.

Two loops, each timed on a subset and scaled to 1 000 000 cycles:
  * bare loop     — the bare arithmetic (math module, no validation); the 50x target is checked on
                    this one, the stricter peer;
  * engine loop   — the same engine functions called once per cycle (what a cycle-by-cycle
                    reduction without vectorisation costs), printed for information.
The vectorised path and the bare loop run in interleaved rounds (best of each), so both see the
same machine load; the three paths must agree (relative 1e-12).
Target: the vectorised engine (stripping + bias) at least 50x faster than the bare loop. Prints every
figure next to its target with PASS/FAIL; exits 1 when the target is missed (or the paths disagree), 0
otherwise.
"""
from __future__ import annotations

import math
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from reduction.constants import isotope_mass  # noqa: E402
from reduction.interference import interferent_ratio, strip_isobar  # noqa: E402
from reduction.massbias import normalise  # noqa: E402

N = 1_000_000
N_LOOP = 50_000
N_ENGINE_LOOP = 5_000
TARGET = 50.0
ROUNDS = 5


def beams(n: int, seed: int = 1):
    rng = np.random.default_rng(seed)
    b144 = rng.normal(2.0, 1e-4, n)
    return dict(b143=b144 * 0.5125 * (1 + rng.normal(0, 2e-5, n)), b144=b144 + 4e-4 * 0.2053,
                b146=b144 * 0.7180, b147=np.full(n, 4e-4))


def vectorised(b):
    s = strip_isobar(b["b144"], b["b147"], "144Sm", "147Sm", bias_factor=1.5)
    return normalise(b["b143"] / s.corrected, "143Nd/144Nd", b["b146"] / s.corrected, "146Nd/144Nd")


def engine_loop(b):
    out = []
    for i in range(len(b["b144"])):
        s = strip_isobar(b["b144"][i], b["b147"][i], "144Sm", "147Sm", bias_factor=1.5)
        out.append(normalise(b["b143"][i] / s.corrected, "143Nd/144Nd", b["b146"][i] / s.corrected, "146Nd/144Nd"))
    return out


def loop(b):
    m143, m144 = isotope_mass("143Nd").value, isotope_mass("144Nd").value
    m146, m147 = isotope_mass("146Nd").value, isotope_mass("147Sm").value
    m144sm = isotope_mass("144Sm").value
    r_sm = interferent_ratio("144Sm", "147Sm") * (m144sm / m147) ** (-1.5)
    out = []
    for i in range(len(b["b144"])):
        n144 = b["b144"][i] - b["b147"][i] * r_sm
        r46 = b["b146"][i] / n144
        beta = math.log(0.7219 / r46) / math.log(m146 / m144)
        out.append(b["b143"][i] / n144 * (m143 / m144) ** beta)
    return out


def main() -> int:
    b = beams(N)
    sub = {k: v_[:N_LOOP].tolist() for k, v_ in b.items()}
    # interleaved rounds, best of each: the vectorised path and the bare loop see the same machine load
    t_vec = t_loop = float("inf")
    for _ in range(ROUNDS):
        for _ in range(3):
            t0 = time.perf_counter()
            v = vectorised(b)
            t_vec = min(t_vec, time.perf_counter() - t0)
        t0 = time.perf_counter()
        ref = loop(sub)
        t_loop = min(t_loop, (time.perf_counter() - t0) * N / N_LOOP)
    sub_e = {k: v_[:N_ENGINE_LOOP].tolist() for k, v_ in b.items()}
    t0 = time.perf_counter()
    ref_e = engine_loop(sub_e)
    t_eng = (time.perf_counter() - t0) * N / N_ENGINE_LOOP
    agree = np.allclose(v[:N_LOOP], ref, rtol=1e-12) and np.allclose(v[:N_ENGINE_LOOP], ref_e, rtol=1e-13)
    ratio, ratio_bare = t_eng / t_vec, t_loop / t_vec
    verdict = "PASS" if ratio_bare >= TARGET and agree else "FAIL"
    print(f"bench_cycles: {N} cycles, 144Sm stripping + exponential-law normalisation")
    print(f"  vectorised engine      {t_vec * 1e3:9.1f} ms (best of {3 * ROUNDS})")
    print(f"  bare arithmetic loop   {t_loop * 1e3:9.0f} ms (best of {ROUNDS}, scaled from {N_LOOP})  "
          f"speed-up {ratio_bare:7.1f}x")
    print(f"  engine loop per cycle  {t_eng * 1e3:9.0f} ms (scaled from {N_ENGINE_LOOP})  speed-up {ratio:7.0f}x "
          "(information)")
    print(f"  results agree: {agree}; speed-up {ratio_bare:.1f}x on the bare loop, target >= {TARGET:.0f}x: "
          f"{verdict}")
    return 0 if verdict == "PASS" else 1


if __name__ == "__main__":
    sys.exit(main())
