"""The invented demo scenario: forward model and recovery of the chosen true ages.

The demo data are made by a forward model (sample + blank + spike, exponential mass bias after
Russell, Papanastassiou & Tombrello 1978, session offset, seeded noise). Reducing them with the
engine must give back what went in: exactly (to rounding) without noise, and within the stated
uncertainties with it.
"""
from __future__ import annotations

import math

import pytest

import reduction.workbook.demo as demo
from reduction.workbook import (
    FIRST_ROW,
    ISOCHRON_FIRST_Q_ROW,
    ISOCHRON_QUANTITIES,
    ISOCHRON_SUMMARY_COL,
    ISOCHRON_SYSTEMS,
    RESULTS,
    build_layout,
    evaluate,
    layout_grid,
)

Q = {q: i for i, (q, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}


def _evaluate(seed=demo.DEMO_SEED):
    lay = build_layout(demo.demo_tables(seed), constants=demo.demo_constants(),
                       isochron_selection=demo.demo_selection())
    return evaluate(layout_grid(lay))


def _iso(ev, system, q):
    col = ISOCHRON_SUMMARY_COL + 1 + ISOCHRON_SYSTEMS.index(system)
    return ev.cells[("Isochron", ISOCHRON_FIRST_Q_ROW + Q[q], col)]


def test_scenario_has_the_fractions_the_study_needs():
    kinds = {}
    for fr in demo.FRACTIONS:
        kinds.setdefault(fr.system, []).append(fr.fraction)
    for system in ("sm-nd", "lu-hf"):
        k = kinds[system]
        assert "whole rock" in k
        n_mineral = sum(1 for f in k if "garnet" in f or "leachate" in f)
        assert 3 <= n_mineral <= 5
    # Rb-Sr: mica - feldspar - whole rock (issue 12)
    assert {"whole rock", "biotite", "muscovite", "plagioclase", "K-feldspar"} <= set(kinds["rb-sr"])
    assert "fictional" in demo.SCENARIO["terrane"] and "fictional" in demo.SCENARIO["lab"]


SYSTEMS = [("Sm-Nd", "sm-nd"), ("Lu-Hf", "lu-hf"), ("Rb-Sr", "rb-sr")]


def test_demo_checks_are_clean():
    """No Check warning in the demo (no poor spike-sample mix, no σ = 0): a clean example for a newcomer."""
    ev = _evaluate()
    assert not ev.errors and not ev.warnings, ev.warnings


@pytest.mark.parametrize("system,key", SYSTEMS)
def test_demo_recovers_the_true_age_within_2_sigma(system, key):
    ev = _evaluate()
    age, a2 = _iso(ev, system, "age"), _iso(ev, system, "age_2s")
    assert abs(age - demo.TRUE_AGES_MA[key]) < a2, (age, a2)
    ini, i2 = _iso(ev, system, "initial"), _iso(ev, system, "initial_2s")
    assert abs(ini - demo.TRUE_INITIAL[key]) < i2
    assert 0.05 < _iso(ev, system, "p") <= 1.0   # scatter consistent with the stated errors


def test_noise_free_round_trip_is_exact(monkeypatch):
    """Without noise, offsets or blanks the engine returns the forward model's inputs (to ~1e-7)."""
    monkeypatch.setattr(demo, "RUN_RATIOS", {k: tuple((r, 1e-12) for r, _ in v) for k, v in demo.RUN_RATIOS.items()})
    monkeypatch.setattr(demo, "STANDARD_SD_REL", {k: 1e-12 for k in demo.STANDARD_SD_REL})
    monkeypatch.setattr(demo, "SESSION_OFFSET", {k: 0.0 for k in demo.SESSION_OFFSET})
    monkeypatch.setattr(demo, "LAB_SIGMAS", {k: 0.0 for k in demo.LAB_SIGMAS})   # typed weights etc. are the truth
    monkeypatch.setattr(demo, "LU_BETA_1S", 0.0)
    monkeypatch.setattr(demo, "CYCLE_RUNS", {})        # noise-free cycles would all be equal (SEM 0)
    fr0 = tuple(demo.DemoFraction(**{**f.__dict__, "parent_blank_ng": 0.0, "daughter_blank_ng": 0.0})
                for f in demo.FRACTIONS)
    monkeypatch.setattr(demo, "FRACTIONS", fr0)
    ev = _evaluate()
    for k, fr in enumerate(fr0):
        tv = demo.true_values(fr)
        row = FIRST_ROW + k
        for key, true in (("x", tv["x"]), ("y", tv["y"]), ("parent_conc", tv["parent_ug_g"]),
                          ("daughter_conc", tv["daughter_ug_g"])):
            got = ev.cells[("Results", row, RESULTS.col_index(key))]
            # the demo rounds measured ratios to 9 significant figures and β to 5 decimals
            assert got == pytest.approx(true, rel=1e-7), (fr.analysis, key)
    for system, key in SYSTEMS:
        assert _iso(ev, system, "age") == pytest.approx(demo.TRUE_AGES_MA[key], abs=0.01)


def test_other_seeds_scatter_like_their_errors():
    """Over several seeds the age misses the truth by about its 1σ (no bias in the chain)."""
    z = []
    for seed in range(11, 17):
        ev = _evaluate(seed)
        for system, key in SYSTEMS:
            z.append((_iso(ev, system, "age") - demo.TRUE_AGES_MA[key]) / (_iso(ev, system, "age_2s") / 2))
    rms = math.sqrt(sum(v * v for v in z) / len(z))
    assert 0.3 < rms < 2.0, z
