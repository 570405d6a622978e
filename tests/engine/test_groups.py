"""Isochron groups end to end (issue 12): each Samples row names its group and a use flag; the Groups sheet
fits every group, ≥ 100 points per isochron and several isochrons per system, through the user's path (fill
the template by its key row, ``ratiodesk reduce``, read results.xlsx).

The analyses are forward-modelled by :mod:`independent_forward` (mpmath; see test_end_to_end), never by the
engine; the truth of each group is the age and initial ratio it was modelled from. λ(147Sm) = 6.54e-12 /a
(Lugmair & Marti 1978, Earth Planet. Sci. Lett. 39, 349). Tolerances as in test_end_to_end: ages 1e-6,
ratios 1e-8.
"""
from __future__ import annotations

import math
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))
import test_end_to_end as e2e  # noqa: E402

from reduction.workbook import (  # noqa: E402
    FIRST_ROW,
    GROUP_POINTS_TOP,
    GROUPS,
    KEY_ROW,
    SAMPLES,
)
from reduction.workbook.cli import main  # noqa: E402


def _group_set(spec, prefix, group):
    """The analyses of one forward-modelled isochron, renamed ``<prefix>NNN`` and put in ``group``."""
    samples, measured, truths = e2e.isochron_set(**spec)
    new = {a: f"{prefix}{k + 1:03d}" for k, a in enumerate(truths)}
    for row in samples:
        row["analysis"], row["group"] = new[row["analysis"]], group
    for row in measured:
        row["analysis"] = new[row["analysis"]]
    return samples, measured, {new[a]: t for a, t in truths.items()}


def _spec(t_ma, y0, n, x_lo, x_hi):
    xs = [x_lo + (x_hi - x_lo) * k / (n - 1) for k in range(n)]
    return dict(system="sm-nd", t_ma=t_ma, y0=y0, xs=xs, d_concs=[3.1 * math.sqrt(0.418 / x) for x in xs],
                masses=[(0.25, 0.12)] * n, label="demo-SmNd-149-150", betas=[(1.35, 1.62)] * n,
                blanks=(0.005, 0.020))


def _groups_sheet(wb):
    ws = wb["Groups"]
    keys = {ws.cell(KEY_ROW, c).value: c for c in range(1, ws.max_column + 1) if ws.cell(KEY_ROW, c).value}
    out = {}
    for r in range(FIRST_ROW, GROUPS.last_row + 1):
        name = ws.cell(r, 1).value
        if name:
            out[name] = {k: ws.cell(r, c).value for k, c in keys.items()}
    return out


def test_two_sm_nd_groups_one_of_100_points_come_back(tmp_path):
    """Two Sm-Nd isochrons in one workbook (1650 Ma, 100 points; 900 Ma, 12 points) and one outlier row with
    Use 0: each group's age and initial ratio are those it was modelled from; the outlier is listed, not fitted."""
    big = _spec(1650.0, 0.50980, 100, 0.10, 1.20)
    small = _spec(900.0, 0.51050, 12, 0.12, 0.90)
    s1, m1, t1 = _group_set(big, "A", "Cratonic gneiss")
    s2, m2, t2 = _group_set(small, "B", "Dyke swarm")
    # an outlier of the first group (its 143Nd/144Nd 2000 ppm off the line), left out by its use flag
    lam_g = math.expm1(e2e.LAMBDA["sm-nd"] * 1650.0 * e2e.YEAR_MA)
    s3, m3, _t3 = e2e.forward_analysis("sm-nd", "A-OUT", 0.5, (0.50980 + 0.5 * lam_g) * 1.002, 3.8, 0.25, 0.12,
                                       "demo-SmNd-149-150", (1.35, 1.62), (0.005, 0.020))
    s3.update(group="cratonic gneiss ", use=0)          # another case and a trailing space: the same group
    samples = s1 + [s3] + s2
    assert len(samples) == 113 <= SAMPLES.capacity
    tables = {"Spikes": e2e.spike_rows("demo-SmNd-149-150", ("Sm", "Nd")),
              "Standards": e2e.standard_rows("S1", "JNdi-1", "143Nd/144Nd"), "Samples": samples,
              "Measured": m1 + m3 + m2,
              "Groups": [{"group": "Cratonic gneiss"}, {"group": "Dyke swarm", "treatment": "analytical"}]}
    results, _ages, wb = e2e.reduce_and_read(tmp_path, tables, {})
    e2e._assert_every_analysis_comes_back({a: results[a] for a in {**t1, **t2}}, {**t1, **t2})
    got = _groups_sheet(wb)
    for name, spec, n in (("Cratonic gneiss", big, 100), ("Dyke swarm", small, 12)):
        g = got[name]
        assert g["system"] == "Sm-Nd"
        assert g["n"] == n
        assert g["age"] == pytest.approx(spec["t_ma"], rel=1e-6), name
        assert g["initial"] == pytest.approx(spec["y0"], rel=1e-8), name
        assert g["mswd"] < 1e-6                     # noise-free points lie on the line
        assert g["message"] == "ok" or "MSWD" in g["message"]
    # the chart's point list shows the first group: its 100 points and the outlier with Use 0
    ws = wb["Groups"]
    listed = {ws.cell(r, 1).value: ws.cell(r, 2).value for r in range(GROUP_POINTS_TOP, GROUP_POINTS_TOP + 120)
              if ws.cell(r, 1).value}
    assert len(listed) == 101 and listed["A-OUT"] == 0 and listed["A001"] == 1


def test_a_group_longer_than_the_point_list_is_fitted_whole_and_said_not_drawn(tmp_path, capsys):
    """A group of 130 rows (the point list and charts hold 120): ``ratiodesk reduce`` fits all 130 (age and
    initial as modelled) and writes results.xlsx; the point list says why the group is not drawn, and so does a
    warning — never a failed reduction, never a list cut at 120."""
    spec = _spec(1200.0, 0.51010, 130, 0.10, 1.10)
    samples, measured, truth = _group_set(spec, "L", "Long belt")
    tables = {"Spikes": e2e.spike_rows("demo-SmNd-149-150", ("Sm", "Nd")),
              "Standards": e2e.standard_rows("S1", "JNdi-1", "143Nd/144Nd"), "Samples": samples,
              "Measured": measured, "Groups": [{"group": "Long belt"}]}
    results, _ages, wb = e2e.reduce_and_read(tmp_path, tables, {})
    e2e._assert_every_analysis_comes_back(results, truth)
    g = _groups_sheet(wb)["Long belt"]
    assert g["n"] == 130
    assert g["age"] == pytest.approx(1200.0, rel=1e-6) and g["initial"] == pytest.approx(0.51010, rel=1e-8)
    top = wb["Groups"].cell(GROUP_POINTS_TOP, 1).value
    assert "130 rows" in top and "not drawn" in top and "120" in top
    out = capsys.readouterr().out
    assert f"warning: Groups!A{GROUP_POINTS_TOP}:" in out and "not drawn" in out


def test_group_problems_are_named_and_nothing_is_written(tmp_path, capsys):
    """A group mixing two systems and a Use that is not 1/0 are named at their Samples cells; reduce stops."""
    tables, truths = e2e._tables((e2e.SMND, e2e.LUHF), e2e.standard_rows("S1", "JNdi-1", "143Nd/144Nd")
                                 + e2e.standard_rows("S1", "JMC-475", "176Hf/177Hf"))
    for row in tables["Samples"]:
        row["group"] = "G"
    tables["Samples"][1]["use"] = 2
    tables["Groups"] = [{"group": "G"}]
    path = tmp_path / "bad.xlsx"
    e2e.fill_template(path, tables, {})
    rc = main(["reduce", str(path), "-o", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert rc != 0 and not (tmp_path / "out" / "results.xlsx").exists()
    use = f"Samples, row {FIRST_ROW + 1}, column {SAMPLES.letter('use')} (Use in isochron (1/0)): must be 1, 0 or empty"
    assert use in err, err
    tables["Samples"][1]["use"] = 1
    e2e.fill_template(path, tables, {})
    rc = main(["reduce", str(path), "-o", str(tmp_path / "out")])
    err = capsys.readouterr().err
    first_lu = next(i for i, r in enumerate(tables["Samples"]) if r["system"] == "Lu-Hf")
    mix = (f"Samples, row {FIRST_ROW + first_lu}, column {SAMPLES.letter('group')} (Isochron group): group 'G' "
           f"mixes Sm-Nd (row {FIRST_ROW}) and Lu-Hf (this row)")
    assert rc != 0 and mix in err, err


def test_a_group_named_only_on_samples_is_reported(tmp_path, capsys):
    """Samples rows naming a group the Groups table does not list: reduce warns by name, and the template's cell
    says so; the listed group is fitted."""
    tables, _truths = e2e._tables((e2e.SMND,), e2e.standard_rows("S1", "JNdi-1", "143Nd/144Nd"))
    for k, row in enumerate(tables["Samples"]):
        row["group"] = "Listed" if k < 3 else "Forgotten"
    tables["Groups"] = [{"group": "Listed"}]
    results, _ages, wb = e2e.reduce_and_read(tmp_path, tables, {})
    out = capsys.readouterr()
    assert "'Forgotten' (Samples rows 8, 9)" in out.out + out.err
    assert _groups_sheet(wb)["Listed"]["n"] == 3
