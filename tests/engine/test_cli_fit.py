"""``ratiodesk isochron`` / ``ratiodesk wmean`` through reduction.workbook.cli.main (and once via subprocess).

Numbers are checked against the Pearson (1901) data with York (1966) weights (REFERENCE.md §6a)
and against the engine functions; bad input must give one line naming the file line and column.
"""
from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from reduction.workbook.cli import main

DATA = Path(__file__).with_name("data")
PEARSON = DATA / "pearson_york.csv"
ROOT = Path(__file__).resolve().parents[2]


def run(capsys, *argv):
    rc = main(list(argv))
    out, err = capsys.readouterr()
    return rc, out, err


def write(tmp_path, text, name="in.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return str(p)


def test_isochron_json_pearson(capsys):
    rc, out, err = run(capsys, "isochron", str(PEARSON), "--json")
    assert rc == 0 and err == ""
    r = json.loads(out)
    # REFERENCE.md §6a
    assert r["n"] == 10 and r["dof"] == 8
    assert r["slope"] == pytest.approx(-0.480533407, abs=1e-9)
    assert r["intercept"] == pytest.approx(5.479910224, abs=1e-9)
    assert r["slope_se"] == pytest.approx(0.0579850, abs=5e-8)
    assert r["intercept_se"] == pytest.approx(0.2949707, abs=5e-8)
    assert r["mswd"] == pytest.approx(1.48329, abs=5e-6)
    assert r["p_value"] == pytest.approx(0.157, abs=5e-4)


def test_isochron_expanded_keeps_unscaled_se(capsys):
    rc, out, _ = run(capsys, "isochron", str(PEARSON), "--json", "--treatment", "expanded")
    r = json.loads(out)
    assert r["slope_se"] == pytest.approx(0.0579850, abs=5e-8)          # unscaled
    assert r["slope_se_scaled"] == pytest.approx(0.0706203, abs=5e-7)   # REFERENCE.md §6a scaled


def test_isochron_with_system_and_demo_file(capsys):
    demo = ROOT / "reduction" / "data" / "demo_isochron.csv"
    rc, out, _ = run(capsys, "isochron", str(demo), "--system", "sm-nd", "--json")
    r = json.loads(out)
    assert rc == 0
    # the demo was forward-modelled from 1850 Ma, initial 0.510200 (λ = 6.54e-12, Lugmair & Marti 1978)
    assert abs(r["age_ma"] - 1850) < 3 * r["age_se_ma"]
    assert abs(r["initial"] - 0.510200) < 3 * r["initial_se"]
    assert r["age_ma"] == pytest.approx(math.log1p(r["slope"]) / 6.54e-12 / 1e6, rel=1e-12)
    assert r["age_se_ma"] == pytest.approx(r["slope_se"] / (1 + r["slope"]) / 6.54e-12 / 1e6, rel=1e-12)
    for key in ("age_se_ma_with_lambda", "initial_se", "decay_constant_source"):
        assert key in r


def test_isochron_iupac_set_adds_lambda_error(capsys):
    demo = ROOT / "reduction" / "data" / "demo_isochron.csv"
    rc, out, _ = run(capsys, "isochron", str(demo), "--system", "sm-nd", "--reference-set", "iupac", "--json")
    r = json.loads(out)
    assert r["decay_constant"] == pytest.approx(math.log(2) / 1.0625e11, rel=2e-5)   # Villa et al. 2020
    assert r["age_se_ma_with_lambda"] > r["age_se_ma"]


def test_isochron_x_scale_option(capsys):
    # --x-scale-sigma-rel 0.4 --sigma 2 = 0.2 % at 1σ; the total adds b·s/((1 + b)λ) in quadrature (first
    # order of t = ln(1 + b/k)/λ at k = 1; the engine's finite-difference test checks the derivative)
    demo = ROOT / "reduction" / "data" / "demo_isochron.csv"
    rc, out, _ = run(capsys, "isochron", str(demo), "--system", "sm-nd", "--json", "--sigma", "2",
                     "--x-scale-sigma-rel", "0.4")
    r = json.loads(out)
    assert rc == 0 and r["x_scale_sigma_rel"] == pytest.approx(0.002, rel=1e-15)
    term = r["slope"] * 0.002 / (1 + r["slope"]) / r["decay_constant"] / 1e6
    assert r["age_se_ma_total"] == pytest.approx(math.hypot(r["age_se_ma_with_lambda"], term), rel=1e-12)
    rc, out, _ = run(capsys, "isochron", str(demo), "--system", "sm-nd", "--x-scale-sigma-rel", "0.2")
    assert rc == 0 and "x-scale 0.2 %" in out
    rc, _, err = run(capsys, "isochron", str(demo), "--system", "sm-nd", "--x-scale-sigma-rel", "-1")
    assert rc == 1 and "--x-scale-sigma-rel" in err


def test_isochron_table_states_levels(capsys):
    rc, out, _ = run(capsys, "isochron", str(PEARSON))
    assert rc == 0
    assert "1 sigma" in out and "95 %" in out and "MSWD" in out and "-0.4805334" in out


def test_sigma_level_and_relative(tmp_path, capsys):
    x = [1.0, 2.0, 3.0, 4.0]
    y = [1.1, 2.0, 3.1, 3.9]
    abs1 = "x,sx,y,sy\n" + "".join(f"{a},{0.01 * a},{b},{0.02 * b}\n" for a, b in zip(x, y))
    two = "x,sx,y,sy\n" + "".join(f"{a},{0.02 * a},{b},{0.04 * b}\n" for a, b in zip(x, y))
    rel = "x,sx,y,sy\n" + "".join(f"{a},1,{b},2\n" for a, b in zip(x, y))   # percent
    r1 = json.loads(run(capsys, "isochron", write(tmp_path, abs1, "a.csv"), "--json")[1])
    r2 = json.loads(run(capsys, "isochron", write(tmp_path, two, "b.csv"), "--json", "--sigma", "2")[1])
    r3 = json.loads(run(capsys, "isochron", write(tmp_path, rel, "c.csv"), "--json", "--relative")[1])
    for r in (r2, r3):
        assert r["slope"] == pytest.approx(r1["slope"], rel=1e-12)
        assert r["slope_se"] == pytest.approx(r1["slope_se"], rel=1e-12)


def test_anchor_option(capsys):
    rc, out, _ = run(capsys, "isochron", str(PEARSON), "--json", "--anchor", "5.5", "0.1")
    r = json.loads(out)
    assert r["dof"] == 9 and r["anchor"] == [5.5, 0.1]
    # --sigma 2 halves the file's sigmas and the anchor's alike
    rc, out2, _ = run(capsys, "isochron", str(PEARSON), "--json", "--anchor", "5.5", "0.2", "--sigma", "2")
    from reduction.regression import fit_isochron
    d = np.loadtxt(PEARSON, delimiter=",", skiprows=1)
    fit = fit_isochron(d[:, 0], d[:, 1] / 2, d[:, 2], d[:, 3] / 2, anchor=(5.5, 0.1))
    assert json.loads(out2)["slope"] == pytest.approx(fit.slope, rel=1e-12)
    assert json.loads(out2)["slope_se"] == pytest.approx(fit.slope_sigma_1s, rel=1e-12)


def test_excess_variance_option(capsys):
    rc, out, _ = run(capsys, "isochron", str(PEARSON), "--json", "--treatment", "excess-variance")
    r = json.loads(out)
    assert rc == 0 and r["excess_sigma_y"] > 0 and r["excess_sigma_y_se"] > 0


def test_rho_column_optional_and_used(tmp_path, capsys):
    base = np.loadtxt(PEARSON, delimiter=",", skiprows=1)
    text = "x,sx,y,sy,rho\n" + "".join(f"{a},{b},{c},{d},0.5\n" for a, b, c, d, _ in base)
    r = json.loads(run(capsys, "isochron", write(tmp_path, text), "--json")[1])
    from reduction.regression import york_fit
    fit = york_fit(base[:, 0], base[:, 1], base[:, 2], base[:, 3], np.full(10, 0.5))
    assert r["slope"] == pytest.approx(fit.slope, rel=1e-12)


def test_comments_and_blank_lines_keep_line_numbers(tmp_path, capsys):
    text = "# a comment\nx,sx,y,sy\n\n1,0.1,1,0.1\n2,0.1,2,0.1\n3,-0.1,3,0.1\n"
    rc, out, err = run(capsys, "isochron", write(tmp_path, text))
    assert rc == 1 and "line 6, column sx" in err and "> 0" in err


@pytest.mark.parametrize("text, expected", [
    ("x,sx,y,sy\n1,0.1,1,0.1\n2,0.1,abc,0.1\n3,0.1,3,0.1\n", "line 3, column y: 'abc' is not a number"),
    ("x,sx,y\n1,0.1,1\n2,0.1,2\n", "missing column sy"),
    ("x,sx,y,sy\n1,0.1,1,0.1\n2,0.1,2,0.1\n3,0.1,3,0\n", "line 4, column sy"),
    ("x,sx,y,sy,rho\n1,0.1,1,0.1,0\n2,0.1,2,0.1,1.0\n3,0.1,3,0.1,0\n", "line 3, column rho"),
    ("x,sx,y,sy\n1,0.1,1,0.1\n1,0.1,2,0.1\n1,0.1,3,0.1\n", "all x values are equal"),
    ("x,sx,y,sy\n0.1,0.01,1,0.1\n0.1,0.01,2,0.1\n0.1,0.01,3,0.1\n", "all x values are equal"),
    ("x,sx,y,sy\n1,1e-300,1,1e-300\n2,1e-300,2,1e-300\n3.3,1e-300,3.1,1e-300\n", "too large or too small"),
    ("x,sx,y,sy\n1e200,1e199,1e200,1e199\n2e200,1e199,2e200,1e199\n3.3e200,1e199,3.1e200,1e199\n",
     "too large or too small"),
    ("x,sx,y,sy\n1,0.1,1,0.1\n2,0.1,2,0.1\n3,0.1,3,0.0\n", "got 0.0"),
    ("x,sx,y,sy\n1,0.1,1,0.1\n2,0.1,nan,0.1\n3,0.1,3,0.1\n", "line 3, column y: must be a finite number"),
    ("x,sx,y,sy\n1,0.1,1,0.1\n2,inf,2,0.1\n3,0.1,3,0.1\n", "line 3, column sx: must be a finite number"),
    ("x,sx,y,sy\n1,0.1,1,0.1\n2,0.1,,0.1\n3,0.1,3,0.1\n", "line 3, column y: empty cell"),
    ("x,sx,y,sy\n1,0.1,1,0.1\n", "at least 2"),
    ("", "empty"),
])
def test_isochron_bad_input(tmp_path, capsys, text, expected):
    rc, out, err = run(capsys, "isochron", write(tmp_path, text))
    assert rc == 1 and out == ""
    assert expected in err
    assert err.count("\n") == 1 and "Traceback" not in err


def test_isochron_messages_have_no_numpy_reprs(tmp_path, capsys):
    rc, _, err = run(capsys, "isochron", write(tmp_path, "x,sx,y,sy,rho\n1,0.1,1,0.1,0\n2,0.1,2,0.1,1.5\n"))
    assert rc == 1 and "got 1.5" in err and "np." not in err


def test_non_utf8_and_binary_files(tmp_path, capsys):
    p = tmp_path / "latin1.csv"
    p.write_bytes("x,sx,y,sy\n1,0.1,1,0.1 \xb5\n".encode("latin-1") + b"\xff\xfe\n")
    rc, out, err = run(capsys, "isochron", str(p))
    assert rc == 1 and out == "" and "is not a UTF-8 text CSV" in err and str(p) in err
    assert err.count("\n") == 1
    q = tmp_path / "nul.csv"
    q.write_bytes(b"x,sx,y,sy\n1,0.1,1\x00,0.1\n")
    rc, out, err = run(capsys, "isochron", str(q))
    assert rc == 1 and out == "" and "Traceback" not in err
    # a field beyond the csv module's field size limit (csv.Error) names the file
    big = tmp_path / "big.csv"
    big.write_text('x,sx,y,sy\n"' + "1" * 200000 + '",0.1,1,0.1\n', encoding="utf-8")
    rc, out, err = run(capsys, "isochron", str(big))
    assert rc == 1 and out == "" and "is not a readable CSV" in err and str(big) in err


def test_missing_file(capsys):
    rc, out, err = run(capsys, "isochron", "/nonexistent/file.csv")
    assert rc == 1 and "No such file" in err


def test_wmean_json(tmp_path, capsys):
    text = "value,sigma\n10.1,0.2\n9.8,0.1\n10.4,0.3\n10.0,0.15\n9.7,0.25\n"
    rc, out, _ = run(capsys, "wmean", write(tmp_path, text), "--json")
    r = json.loads(out)
    v = np.array([10.1, 9.8, 10.4, 10.0, 9.7])
    s = np.array([0.2, 0.1, 0.3, 0.15, 0.25])
    w = 1 / s ** 2
    mean = np.sum(w * v) / w.sum()
    assert r["n"] == 5 and r["mean"] == pytest.approx(mean, rel=1e-14)
    assert r["mean_se"] == pytest.approx(1 / np.sqrt(w.sum()), rel=1e-14)
    assert r["mswd"] == pytest.approx(np.sum(w * (v - mean) ** 2) / 4, rel=1e-12)
    assert 0 < r["p_value"] < 1


def test_wmean_outliers_reported_by_file_line(tmp_path, capsys):
    text = "value,sigma\n10.0,0.1\n10.1,0.1\n9.9,0.1\n# note\n11.5,0.1\n10.05,0.1\n"
    rc, out, _ = run(capsys, "wmean", write(tmp_path, text), "--json", "--outlier-k", "3")
    r = json.loads(out)
    assert r["outlier_lines"] == [6]
    rc, out, _ = run(capsys, "wmean", write(tmp_path, text), "--json", "--external")
    assert json.loads(out)["external_sigma"] > 0.1
    rc, out, _ = run(capsys, "wmean", write(tmp_path, text), "--outlier-k", "3")
    assert "1 sigma" in out and "outliers flagged (file lines): 6" in out


def test_wmean_bad_sigma(tmp_path, capsys):
    rc, out, err = run(capsys, "wmean", write(tmp_path, "value,sigma\n1,0.1\n2,-0.1\n"))
    assert rc == 1 and "line 3, column sigma" in err


def test_subprocess_bad_input_no_traceback(tmp_path):
    p = write(tmp_path, "x,sx,y,sy\n1,0.1,1,0.1\n2,0.1,2,zero\n3,0.1,3,0.1\n")
    res = subprocess.run([sys.executable, "-m", "reduction", "isochron", p], capture_output=True, text=True,
                         cwd=str(ROOT), timeout=120)
    assert res.returncode == 1
    assert "line 3, column sy" in res.stderr and "Traceback" not in res.stderr
    ok = subprocess.run([sys.executable, "-m", "reduction", "isochron", str(PEARSON), "--json"],
                        capture_output=True, text=True, cwd=str(ROOT), timeout=120)
    assert ok.returncode == 0 and json.loads(ok.stdout)["dof"] == 8


def test_mswd_range_position_and_weak_test_note(tmp_path, capsys):
    """The CLI shows the MSWD acceptance range (χ² 5-95 % over dof; Wendt & Carl 1991) and says when
    dof <= 2 makes the test weak. scipy.stats.chi2 is the independent oracle."""
    from scipy.stats import chi2

    r = json.loads(run(capsys, "isochron", str(PEARSON), "--json")[1])
    assert r["mswd_limits_95"] == pytest.approx([chi2.ppf(0.05, 8) / 8, chi2.ppf(0.95, 8) / 8], rel=1e-6)
    assert r["mswd_position"] == "within" and r["notes"] == []
    base = np.loadtxt(PEARSON, delimiter=",", skiprows=1)[:3]
    text = "x,sx,y,sy\n" + "".join(f"{a},{b},{c},{d}\n" for a, b, c, d, _ in base)
    rc, out, _ = run(capsys, "isochron", write(tmp_path, text))
    assert rc == 0
    assert "1 degree of freedom" in out and "weak" in out
    lo, hi = chi2.ppf(0.05, 1), chi2.ppf(0.95, 1)
    assert f"{lo:.3g} - {hi:.3g}" in out
