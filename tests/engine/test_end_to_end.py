"""End to end through the user's path: fill the template by its key row, run ``ratiodesk reduce``,
read results.xlsx.

The data are forward-modelled by :mod:`independent_forward` (mpmath, its own composition arithmetic:
CIAAW fractions fractionated by the exponential law to the normalising ratio), never by the engine.
Tolerances (issue 9): ratios 1e-8 relative, concentrations 1e-7, ages 1e-6.

Decay constants as published: λ(147Sm) = 6.54e-12 /a (Lugmair & Marti 1978, Earth Planet. Sci. Lett.
39, 349), λ(176Lu) = 1.867e-11 /a (Söderlund et al. 2004, Earth Planet. Sci. Lett. 219, 311).
Accepted JNdi-1 143Nd/144Nd = 0.512115 (Tanaka et al. 2000, Chem. Geol. 168, 279) and JMC-475
176Hf/177Hf = 0.282161 (Goolaerts et al. 2004, Chem. Geol. 206, 1); the reference-material runs are
typed at those values, so the session factor is 1 and the truth needs no standard arithmetic.
"""
from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import mpmath as mp
import pytest
from openpyxl import load_workbook

sys.path.insert(0, str(Path(__file__).resolve().parent))
import independent_forward as ind  # noqa: E402

from reduction.workbook import (  # noqa: E402
    FIRST_ROW,
    ISOCHRON_BLOCK,
    ISOCHRON_FIRST_Q_ROW,
    ISOCHRON_QUANTITIES,
    ISOCHRON_SUMMARY_COL,
    ISOCHRON_SYSTEMS,
    KEY_ROW,
    MEASURED,
    build_layout,
    write_xlsx,
)
from reduction.workbook.cli import main  # noqa: E402

LAMBDA = {"sm-nd": 6.54e-12, "lu-hf": 1.867e-11, "rb-sr": 1.42e-11}
# NIST SRM 987 87Sr/86Sr = 0.710248 (Thirlwall 1991, Chem. Geol. 94, 85; recalled from memory)
ACCEPTED = {"JNdi-1": 0.512115, "JMC-475": 0.282161, "NIST SRM 987": 0.710248}
#: Per system: parent and daughter element, their reference isotopes, the radiogenic pair, the ratios each run
#: reports, and the Samples System text (the template's conventions, written out here on their own).
RUNS = {"sm-nd": ("Sm", "Nd", "152Sm", "144Nd", "147Sm", "143Nd", ("147Sm/152Sm", "149Sm/152Sm"),
                  ("143Nd/144Nd", "146Nd/144Nd", "150Nd/144Nd"), "Sm-Nd"),
        "lu-hf": ("Lu", "Hf", "175Lu", "177Hf", "176Lu", "176Hf", ("176Lu/175Lu",),
                  ("176Hf/177Hf", "179Hf/177Hf", "180Hf/177Hf"), "Lu-Hf"),
        "rb-sr": ("Rb", "Sr", "85Rb", "86Sr", "87Rb", "87Sr", ("87Rb/85Rb",), ("84Sr/86Sr", "87Sr/86Sr", "88Sr/86Sr"),
                  "Rb-Sr")}
SPIKES = json.loads((ind.DATA / "spikes.json").read_text())
YEAR_MA = 1e6


def spike_rows(label, elements):
    rows = []
    for el in elements:
        d = SPIKES[f"{label} {el}"]
        row = {"spike": label, "element": el, "calibrated": "test", "spike_isotope": d["spike_isotope"],
               "conc_umol_g": d["concentration_umol_g"], "conc_sigma_1s": d["concentration_sigma_1s"]}
        for k, (iso, ab) in enumerate(d["abundances"].items(), start=1):
            row[f"iso{k}"], row[f"ab{k}"] = iso, ab
        rows.append(row)
    return rows


def fill_template(path, tables, selection):
    """Write the template, then fill it as a user would: by the key row of each sheet."""
    write_xlsx(build_layout(), path)
    wb = load_workbook(path)
    for sheet, rows in tables.items():
        ws = wb[sheet]
        col = {ws.cell(KEY_ROW, c).value: c for c in range(1, ws.max_column + 1) if ws.cell(KEY_ROW, c).value}
        for i, row in enumerate(rows):
            for key, v in row.items():
                ws.cell(FIRST_ROW + i, col[key]).value = v
    ws = wb["Isochron"]
    for system, picks in selection.items():
        first, _last = ISOCHRON_BLOCK[system]
        for i, a in enumerate(picks):
            ws.cell(first + i, 1).value = a
            ws.cell(first + i, 2).value = 1
    wb.save(path)


def reduce_and_read(tmp_path, tables, selection, name="book"):
    path = tmp_path / f"{name}.xlsx"
    fill_template(path, tables, selection)
    out = tmp_path / f"{name}-out"
    assert main(["reduce", str(path), "-o", str(out)]) == 0
    wb = load_workbook(out / "results.xlsx", data_only=True)
    ws = wb["Results"]
    keys = [ws.cell(KEY_ROW, c).value for c in range(1, ws.max_column + 1)]
    results = {}
    for r in range(FIRST_ROW, ws.max_row + 1):
        a = ws.cell(r, 1).value
        if a:
            results[a] = {k: ws.cell(r, c + 1).value for c, k in enumerate(keys) if k}
    iso = wb["Isochron"]
    q = {name: ISOCHRON_FIRST_Q_ROW + i for i, (name, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}
    ages = {}
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        c = ISOCHRON_SUMMARY_COL + 2 + k
        ages[system] = {name: iso.cell(row, c).value for name, row in q.items()}
    return results, ages, wb


def forward_analysis(system, analysis, x, y, d_ug_g, w_s, w_t, label, beta, blanks=(0.0, 0.0),
                     session="S1", beta_ext=None):
    """Samples and Measured rows of one noise-free analysis (independent arithmetic)."""
    p_el, d_el, p_ref, d_ref, p_iso, d_iso, p_ratios, d_ratios, system_text = RUNS[system]
    d_fr = ind.sample_fractions(d_el, {f"{d_iso}/{d_ref}": y})
    p_fr = ind.sample_fractions(p_el)
    d_umol_g = mp.mpf(d_ug_g) / ind.molar_mass(d_fr)           # µmol of Nd per g
    p_umol_g = mp.mpf(repr(x)) * d_umol_g * d_fr[d_ref] / p_fr[p_iso]
    pb_ng, db_ng = blanks
    nat_p, nat_d = ind.natural_fractions(p_el), ind.natural_fractions(d_el)
    pb_umol = mp.mpf(pb_ng) * mp.mpf("1e-3") / ind.molar_mass(nat_p)
    db_umol = mp.mpf(db_ng) * mp.mpf("1e-3") / ind.molar_mass(nat_d)
    rows = []
    for el, ref, n_umol, fr, b_umol, names, b in ((p_el, p_ref, p_umol_g * w_s, p_fr, pb_umol, p_ratios, beta[0]),
                                                   (d_el, d_ref, d_umol_g * w_s, d_fr, db_umol, d_ratios, beta[1])):
        sp = SPIKES[f"{label} {el}"]
        mix = ind.mixture_ratios(el, ref, float(n_umol), fr, sp["concentration_umol_g"] * w_t, sp["spike_isotope"],
                                 sp["abundances"], beta=b, blank_umol=float(b_umol))
        row = {"analysis": analysis, "element": el}
        for k, name in enumerate(names, start=1):
            row[f"r{k}_name"], row[f"r{k}"], row[f"r{k}_sigma_1s"] = name, mix[name], mix[name] * 1e-5
        if el == p_el and beta_ext is not None:
            row["bias_factor"], row["bias_factor_1s"] = b, 0.005
        rows.append(row)
    sample = {"analysis": analysis, "sample": analysis, "fraction": "garnet", "system": system_text, "session": session,
              "sample_mass_g": w_s, "spike": label, "spike_mass_g": w_t,
              "parent_blank_ng": pb_ng, "daughter_blank_ng": db_ng,
              "sample_mass_1s_g": 2e-5, "spike_mass_1s_g": 2e-5}
    truth = {"x": x, "y": y, "daughter_conc": d_ug_g, "parent_conc": float(p_umol_g * ind.molar_mass(p_fr))}
    return sample, rows, truth


def standard_rows(session, material, ratio, n=4, extra=()):
    rows = [{"session": session, "material": material, "ratio": ratio, "measured": ACCEPTED[material],
             "sigma_1s": 3e-6} for _ in range(n)]
    rows += [{"session": session, "material": m, "ratio": ratio, "measured": v, "sigma_1s": 3e-6, "role": "check"}
             for m, v in extra]
    return rows


def isochron_set(system, t_ma, y0, xs, d_concs, masses, label, betas, blanks, session="S1"):
    lam = LAMBDA[system]
    g = math.expm1(lam * t_ma * YEAR_MA)
    samples, measured, truths = [], [], {}
    for k, (x, c, (w_s, w_t)) in enumerate(zip(xs, d_concs, masses)):
        a = f"{system[:2].upper()}-{k + 1:02d}"
        s, m, tr = forward_analysis(system, a, x, y0 + x * g, c, w_s, w_t, label, betas[k], blanks,
                                    beta_ext=True if system in ("lu-hf", "rb-sr") else None, session=session)
        samples.append(s)
        measured += m
        truths[a] = tr
    return samples, measured, truths


SMND = dict(system="sm-nd", t_ma=1650.0, y0=0.50980, xs=(0.105, 0.162, 0.231, 0.418, 0.915),
            d_concs=(31.0, 18.5, 9.2, 3.1, 0.84), masses=((0.10, 0.05), (0.12, 0.06), (0.15, 0.07), (0.25, 0.12),
                                                         (0.30, 0.20)),
            label="demo-SmNd-149-150", betas=[(1.35, 1.62), (1.30, 1.58), (1.41, 1.66), (1.28, 1.55), (1.37, 1.61)],
            blanks=(0.005, 0.020))
LUHF = dict(system="lu-hf", t_ma=418.0, y0=0.282410, xs=(0.012, 0.41, 0.95, 1.62),
            d_concs=(2.4, 0.35, 0.21, 0.15), masses=((0.10, 0.10), (0.22, 0.12), (0.25, 0.13), (0.26, 0.14)),
            label="demo-LuHf-176-180", betas=[(1.90, 1.95), (1.85, 1.92), (1.93, 1.99), (1.88, 1.96)],
            blanks=(0.003, 0.030))


def _tables(sets, standards):
    samples, measured, truths, spikes = [], [], {}, []
    for spec in sets:
        s, m, t = isochron_set(**spec)
        samples += s
        measured += m
        truths.update(t)
        els = RUNS[spec["system"]][:2]
        spikes += spike_rows(spec["label"], els)
    return {"Spikes": spikes, "Standards": standards, "Samples": samples, "Measured": measured}, truths


def _assert_every_analysis_comes_back(results, truths):
    """Every analysis of the forward model is on Results with its true ratios (1e-8) and concentrations (1e-7)."""
    assert set(results) == set(truths)
    for a, tr in truths.items():
        r = results[a]
        assert r["x"] == pytest.approx(tr["x"], rel=1e-8), a
        assert r["y"] == pytest.approx(tr["y"], rel=1e-8), a
        assert r["daughter_conc"] == pytest.approx(tr["daughter_conc"], rel=1e-7), a
        assert r["parent_conc"] == pytest.approx(tr["parent_conc"], rel=1e-7), a
        assert r["x_1s"] > 0 and r["y_1s"] > 0


def test_sm_nd_mixed_spike_and_lu_hf_come_back_through_the_template(tmp_path):
    standards = standard_rows("S1", "JNdi-1", "143Nd/144Nd") + standard_rows("S1", "JMC-475", "176Hf/177Hf")
    tables, truths = _tables((SMND, LUHF), standards)
    sel = {"Sm-Nd": [a for a in truths if a.startswith("SM")], "Lu-Hf": [a for a in truths if a.startswith("LU")]}
    results, ages, _wb = reduce_and_read(tmp_path, tables, sel)
    _assert_every_analysis_comes_back(results, truths)
    assert ages["Sm-Nd"]["age"] == pytest.approx(SMND["t_ma"], rel=1e-6)
    assert ages["Sm-Nd"]["initial"] == pytest.approx(SMND["y0"], rel=1e-8)
    assert ages["Lu-Hf"]["age"] == pytest.approx(LUHF["t_ma"], rel=1e-6)
    # the decay constant's σ (Villa et al. 2020 for 147Sm) widens the age error
    assert ages["Sm-Nd"]["age_2s_lambda"] > ages["Sm-Nd"]["age_2s"]
    # n = 5 and 4: an MSWD acceptance range is shown (Wendt & Carl 1991: χ² 5-95 % over dof)
    assert 0 < ages["Sm-Nd"]["mswd_low"] < 1 < ages["Sm-Nd"]["mswd_high"]


def test_single_spike_sm_nd(tmp_path):
    """A single 150Nd spike for Nd and a 149Sm spike for Sm, as two labels of one spike row pair."""
    spec = dict(SMND, xs=(0.12, 0.35), d_concs=(20.0, 4.0), masses=((0.1, 0.05), (0.2, 0.1)),
                betas=[(1.3, 1.6), (1.4, 1.7)])
    tables, truths = _tables((spec,), standard_rows("S1", "JNdi-1", "143Nd/144Nd"))
    results, ages, _wb = reduce_and_read(tmp_path, tables, {"Sm-Nd": list(truths)})
    for a, tr in truths.items():
        assert results[a]["x"] == pytest.approx(tr["x"], rel=1e-8)
        assert results[a]["y"] == pytest.approx(tr["y"], rel=1e-8)
    assert "no MSWD" in ages["Sm-Nd"]["message"]


def test_secondary_reference_material_changes_no_sample_result(tmp_path):
    """A BCR-2 check run in the session moves nothing (to 1e-12); it is reported as a check."""
    base_std = standard_rows("S1", "JNdi-1", "143Nd/144Nd")
    tables, truths = _tables((SMND,), base_std)
    sel = {"Sm-Nd": list(truths)}
    r0, a0, _ = reduce_and_read(tmp_path, tables, sel, "a")
    tables["Standards"] = base_std + [{"session": "S1", "material": "BCR-2", "ratio": "143Nd/144Nd",
                                       "measured": 0.512645, "sigma_1s": 4e-6}]
    r1, a1, wb = reduce_and_read(tmp_path, tables, sel, "b")
    for a in truths:
        for k in ("x", "y", "x_1s", "y_1s", "parent_conc", "daughter_conc"):
            assert r1[a][k] == pytest.approx(r0[a][k], rel=1e-12, abs=0), (a, k)
    assert a1["Sm-Nd"]["age"] == pytest.approx(a0["Sm-Nd"]["age"], rel=1e-12)
    ws = wb["Standards"]
    keys = {ws.cell(KEY_ROW, c).value: c for c in range(1, ws.max_column + 1)}
    row = FIRST_ROW + len(base_std)
    assert ws.cell(row, keys["role_used"]).value == "check"
    # BCR-2 accepted 143Nd/144Nd 0.512637 (Jweda et al. 2016, Geostand. Geoanal. Res. 40, 101)
    dev = ws.cell(row, keys["dev_ppm"]).value
    assert dev == pytest.approx((0.512645 / 0.512637 - 1) * 1e6, abs=0.5)


def test_rb_sr_isochron_through_the_library():
    """Rb-Sr (not yet a template system): the chain and the isochron recover a 500 Ma line exactly.

    λ(87Rb) = 1.42e-11 /a (Steiger & Jäger 1977, Earth Planet. Sci. Lett. 36, 359); Sr normalised to
    86Sr/88Sr = 0.1194 and 84Sr/86Sr = 0.056584 in the natural composition (recalled from memory).
    """
    from reduction.ages import isochron_age
    from reduction.chain import reduce_spiked_analysis
    from reduction.dilution import load_demo_spikes
    from reduction.regression import fit_isochron

    sp = load_demo_spikes()
    rb_sp, sr_sp = sp["demo-RbSr-87-84 Rb"], sp["demo-RbSr-87-84 Sr"]
    t_ma, y0 = 500.0, 0.70400
    g = math.expm1(1.42e-11 * t_ma * YEAR_MA)
    xs, ys, sx, sy, rh = [], [], [], [], []
    for x, sr_ug_g, beta_rb, beta_sr in ((0.35, 420.0, 1.10, -0.9), (2.1, 160.0, 1.05, -0.85),
                                          (8.7, 45.0, 1.12, -0.95), (25.0, 12.0, 1.08, -0.88)):
        y = y0 + x * g
        sr_fr = ind.sample_fractions("Sr", {"87Sr/86Sr": y})
        sr_umol = mp.mpf(sr_ug_g) / ind.molar_mass(sr_fr) * mp.mpf("0.1")          # 0.1 g of sample
        rb_fr = ind.natural_fractions("Rb")
        rb_umol = mp.mpf(repr(x)) * sr_umol * sr_fr["86Sr"] / rb_fr["87Rb"]
        dsr = SPIKES["demo-RbSr-87-84 Sr"]
        drb = SPIKES["demo-RbSr-87-84 Rb"]
        # spike amounts scaled so the mixes are near optimal for every sample: a spike mass per sample
        w_t_sr = float(sr_umol * sr_fr["86Sr"] / (mp.mpf(dsr["concentration_umol_g"])))
        w_t = max(min(w_t_sr, 5.0), 1e-3)
        srm = ind.mixture_ratios("Sr", "86Sr", float(sr_umol), sr_fr, dsr["concentration_umol_g"] * w_t,
                                 dsr["spike_isotope"], dsr["abundances"], beta=beta_sr)
        rbm = ind.mixture_ratios("Rb", "85Rb", float(rb_umol), rb_fr, drb["concentration_umol_g"] * w_t,
                                 drb["spike_isotope"], drb["abundances"], beta=beta_rb)
        r = reduce_spiked_analysis(
            "rb-sr", {"87Rb/85Rb": rbm["87Rb/85Rb"]}, {k: srm[k] for k in ("84Sr/86Sr", "87Sr/86Sr", "88Sr/86Sr")},
            0.1, w_t, rb_sp, sr_sp, parent_bias_factor=beta_rb, parent_bias_sigma_1s=0.005,
            parent_mix_sigma_1s={"87Rb/85Rb": 1e-5 * rbm["87Rb/85Rb"]},
            daughter_mix_sigma_1s={k: 1e-5 * srm[k] for k in ("84Sr/86Sr", "87Sr/86Sr", "88Sr/86Sr")})
        assert r.parent_ratio == pytest.approx(x, rel=1e-8)
        assert r.daughter_ratio == pytest.approx(y, rel=1e-8)
        assert r.daughter_conc_ug_g == pytest.approx(sr_ug_g, rel=1e-7)
        xs.append(r.parent_ratio)
        ys.append(r.daughter_ratio)
        sx.append(r.sigma_1s_random["parent_ratio"])
        sy.append(r.sigma_1s_random["daughter_ratio"])
        rh.append(r.rho_random)
    fit = fit_isochron(xs, sx, ys, sy, rh)
    age = isochron_age(fit, "rb-sr")
    assert age.age_ma == pytest.approx(t_ma, rel=1e-6)
    assert age.initial == pytest.approx(y0, rel=1e-8)


# Rb-Sr: a mica - feldspar - whole-rock line. Spike masses chosen per sample so the 84Sr/86Sr mix is near
# its optimum (the invented demo-RbSr-87-84 mixed spike); β of Rb typed (two isotopes), Sr normalised.
RBSR = dict(system="rb-sr", t_ma=385.0, y0=0.70480, xs=(0.058, 1.74, 4.3, 27.5, 96.0),
            d_concs=(560.0, 215.0, 150.0, 21.0, 6.2),
            masses=((0.030, 0.60), (0.050, 0.50), (0.040, 0.30), (0.030, 0.030), (0.025, 0.008)),
            label="demo-RbSr-87-84", betas=[(1.10, -0.90), (1.05, -0.85), (1.12, -0.95), (1.08, -0.88), (1.0, -0.8)],
            blanks=(0.005, 0.05), session="S2")


def test_rb_sr_comes_back_through_the_template(tmp_path):
    """Rb-Sr through the template: 87Rb/86Sr, 87Sr/86Sr (normalised to 86Sr/88Sr = 0.1194, Steiger & Jäger
    1977), concentrations, the age with λ(87Rb) = 1.42e-11 /a (Steiger & Jäger 1977) and the initial ratio."""
    tables, truths = _tables((RBSR,), standard_rows("S2", "NIST SRM 987", "87Sr/86Sr"))
    results, ages, wb = reduce_and_read(tmp_path, tables, {"Rb-Sr": list(truths)})
    _assert_every_analysis_comes_back(results, truths)
    assert ages["Rb-Sr"]["age"] == pytest.approx(RBSR["t_ma"], rel=1e-6)
    assert ages["Rb-Sr"]["initial"] == pytest.approx(RBSR["y0"], rel=1e-8)
    assert ages["Rb-Sr"]["n"] == 5
    # εSr at the age relative to the uniform reservoir of the Constants sheet: a finite number, typed units
    assert isinstance(ages["Rb-Sr"]["eps_t"], float)
    ws = wb["Isochron"]
    assert ws.cell(FIRST_ROW, ISOCHRON_SUMMARY_COL + 2 + ISOCHRON_SYSTEMS.index("Rb-Sr")).value == "Rb-Sr"


def test_rb_without_a_bias_factor_is_named_at_its_cell(tmp_path, capsys):
    """Rb has two isotopes: without a typed β the Results row names the Measured cell, nothing is guessed."""
    tables, truths = _tables((dict(RBSR, xs=RBSR["xs"][:2], d_concs=RBSR["d_concs"][:2], masses=RBSR["masses"][:2]),),
                             standard_rows("S2", "NIST SRM 987", "87Sr/86Sr"))
    rb_row = next(i for i, m in enumerate(tables["Measured"]) if m["element"] == "Rb")
    del tables["Measured"][rb_row]["bias_factor"]
    del tables["Measured"][rb_row]["bias_factor_1s"]
    path = tmp_path / "b.xlsx"
    fill_template(path, tables, {"Rb-Sr": list(truths)})
    rc = main(["reduce", str(path), "-o", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert rc != 0
    cell = f"Measured, row {FIRST_ROW + rb_row}, column {MEASURED.letter('bias_factor')} (β external (exp. law))"
    assert f"{cell}: Rb has two isotopes" in err, err


def test_steps_sheet_shows_the_chain_stages(tmp_path):
    """The Steps sheet of results.xlsx: β of both runs as forward-modelled (Sm and Nd normalised internally, Lu
    typed), session factor 1 (standards typed at their accepted values), blank shares as put in (independent
    arithmetic: blank / (sample + blank) amount of the element)."""
    standards = standard_rows("S1", "JNdi-1", "143Nd/144Nd") + standard_rows("S1", "JMC-475", "176Hf/177Hf")
    tables, truths = _tables((SMND, LUHF), standards)
    _results, _ages, wb = reduce_and_read(tmp_path, tables, {"Sm-Nd": [a for a in truths if a.startswith("SM")],
                                                             "Lu-Hf": [a for a in truths if a.startswith("LU")]})
    ws = wb["Steps"]
    keys = [ws.cell(KEY_ROW, c).value for c in range(1, ws.max_column + 1)]
    steps = {ws.cell(r, 1).value: {k: ws.cell(r, c + 1).value for c, k in enumerate(keys)}
             for r in range(FIRST_ROW, ws.max_row + 1) if ws.cell(r, 1).value}
    assert set(steps) == set(truths)
    for spec in (SMND, LUHF):
        p_el, d_el = RUNS[spec["system"]][:2]
        for k, (bp, bd) in enumerate(spec["betas"]):
            a = f"{spec['system'][:2].upper()}-{k + 1:02d}"
            st = steps[a]
            assert st["beta_daughter"] == pytest.approx(bd, rel=1e-9), a
            assert st["beta_parent"] == pytest.approx(bp, rel=1e-9), a
            assert st["std_factor"] == pytest.approx(1.0, abs=1e-15) and st["std_runs"] == 4
            assert st["y_before_factor"] == pytest.approx(truths[a]["y"], rel=1e-8)
            assert st["mag_parent"] >= 1 and st["mag_daughter"] >= 1
            # blank share of the daughter's reference isotope (144Nd, 177Hf): blank / (sample + blank) atoms of it,
            # mpmath, from the forward model's numbers
            d_ref = RUNS[spec["system"]][3]
            d_fr = ind.sample_fractions(d_el, {RUNS[spec["system"]][5] + "/" + d_ref: truths[a]["y"]})
            nat = ind.natural_fractions(d_el)
            w_s = spec["masses"][k][0]
            d_umol = mp.mpf(spec["d_concs"][k]) / ind.molar_mass(d_fr) * mp.mpf(repr(w_s)) * d_fr[d_ref]
            b_umol = mp.mpf(spec["blanks"][1]) * mp.mpf("1e-3") / ind.molar_mass(nat) * nat[d_ref]
            assert st["blank_share_daughter_pct"] == pytest.approx(float(100 * b_umol / (d_umol + b_umol)), rel=1e-9)


# ---- isobars stripped in the grid (issue 12), forward-modelled at the beam level -------------------------------
# Each run's beams are the atoms at every mass number (analyte + interfering elements), each isotope fractionated
# by the run's exponential-law β with its own mass (the interferent shares the analyte's β, common practice);
# ratios are to the total beam at the reference mass. Interfering elements: Ce and Yb natural; the analysis's own
# parent element (Sm on Nd, Lu on Hf, Rb on Sr) is the spike–sample mixture of its own run, in mpmath.
INTERF = {"sm-nd": {"Sm": "2e-4", "Ce": "1.5e-4"}, "lu-hf": {"Yb": "3e-4", "Lu": "2e-4"}, "rb-sr": {"Rb": "5e-4"}}
MONITOR = {"Sm": "147Sm", "Ce": "140Ce", "Yb": "173Yb", "Lu": "175Lu", "Rb": "85Rb"}


def _fractions_of(element, ratios, reference):
    f = {reference: mp.mpf(1)}
    f.update({k.split("/")[0]: mp.mpf(repr(v)) for k, v in ratios.items()})
    tot = mp.fsum(f.values())
    return {k: v / tot for k, v in f.items()}


def _beams(parts, beta, reference):
    """Fractionated beams per mass number from {element: (atoms, fractions)}; returns (beam(mass), ref mass)."""
    b = mp.mpf(repr(float(beta)))
    beams = {}
    m_ref = ind.mass(reference)
    for _el, (atoms, fr) in parts.items():
        for iso, f in fr.items():
            a = int(iso[:len(iso) - len(iso.lstrip("0123456789"))])
            beams[a] = beams.get(a, mp.mpf(0)) + atoms * f * (ind.mass(iso) / m_ref) ** (-b)
    return beams


def forward_interfered(system, analysis, x, y, d_ug_g, w_s, w_t, label, beta, doping=False, session="S1"):
    """Samples and Measured rows of one analysis whose runs carry isobars and monitor ratios (mpmath)."""
    p_el, d_el, p_ref, d_ref, p_iso, d_iso, p_ratios, d_ratios, system_text = RUNS[system]
    d_fr = ind.sample_fractions(d_el, {f"{d_iso}/{d_ref}": y})
    p_fr = ind.sample_fractions(p_el)
    d_umol = mp.mpf(d_ug_g) / ind.molar_mass(d_fr) * mp.mpf(repr(w_s))
    p_umol = mp.mpf(repr(x)) * d_umol / mp.mpf(repr(w_s)) * d_fr[d_ref] / p_fr[p_iso] * mp.mpf(repr(w_s))
    mix = {}
    for el, ref, n, fr in ((p_el, p_ref, p_umol, p_fr), (d_el, d_ref, d_umol, d_fr)):
        sp = SPIKES[f"{label} {el}"]
        true = ind.mixture_ratios(el, ref, float(n), fr, sp["concentration_umol_g"] * w_t, sp["spike_isotope"],
                                  sp["abundances"], beta=0.0)
        mix[el] = _fractions_of(el, true, ref)
    rows = []
    for el, ref, names, b, interf in ((p_el, p_ref, p_ratios, beta[0], {"Yb": "0.5"} if doping else {}),
                                       (d_el, d_ref, d_ratios, beta[1], INTERF[system])):
        parts = {el: (mp.mpf(1), mix[el])}
        for iel, share in interf.items():
            parts[iel] = (mp.mpf(share), mix[iel] if iel in mix else ind.natural_fractions(iel))
        beams = _beams(parts, b, ref)
        m_ref = int(ref[:len(ref) - len(ref.lstrip("0123456789"))])
        row = {"analysis": analysis, "element": el}
        vals = [(n, float(beams[int(n.split("/")[0][:-len(el)])] / beams[m_ref])) for n in names]
        for iel, share in interf.items():       # monitor: the interferent's monitor isotope / total reference beam
            mon = MONITOR[iel]
            fr = parts[iel][1]
            m_beam = mp.mpf(share) * fr[mon] * (ind.mass(mon) / ind.mass(ref)) ** (-mp.mpf(repr(float(b))))
            vals.append((f"{mon}/{ref}", float(m_beam / beams[m_ref])))
        if doping and el == p_el:                # Yb doping of the Lu run: 171Yb too
            fr = parts["Yb"][1]
            m_beam = mp.mpf("0.5") * fr["171Yb"] * (ind.mass("171Yb") / ind.mass(ref)) ** (-mp.mpf(repr(float(b))))
            vals.append(("171Yb/175Lu", float(m_beam / beams[m_ref])))
        slots = [1, 2, 3, 4, 5, 6]
        for k, (name, v) in zip(slots, vals):
            row[f"r{k}_name"], row[f"r{k}"], row[f"r{k}_sigma_1s"] = name, v, v * 1e-5
        if el == p_el and p_el in ("Lu", "Rb") and not doping:
            row["bias_factor"], row["bias_factor_1s"] = b, 0.005
        rows.append(row)
    sample = {"analysis": analysis, "sample": analysis, "fraction": "garnet", "system": system_text, "session": session,
              "sample_mass_g": w_s, "spike": label, "spike_mass_g": w_t, "sample_mass_1s_g": 2e-5,
              "spike_mass_1s_g": 2e-5}
    return sample, rows, {"x": x, "y": y}


@pytest.mark.parametrize("spec,doping", [(SMND, False), (LUHF, False), (LUHF, True), (RBSR, False)],
                         ids=["Sm-Nd: Sm and Ce on Nd", "Lu-Hf: Yb and Lu on 176Hf", "Lu-Hf: Yb-doped Lu run",
                              "Rb-Sr: Rb on 87Sr"])
def test_isobars_are_stripped_in_the_grid(tmp_path, spec, doping):
    """Runs with isobars and monitor ratios come back to the truth (1e-8) through the template; the Steps sheet
    says how much was stripped and where the parent's β came from."""
    system = spec["system"]
    g = math.expm1(LAMBDA[system] * spec["t_ma"] * YEAR_MA)
    session = spec.get("session", "S1")
    samples, measured, truths = [], [], {}
    for k, (x, c, (w_s, w_t)) in enumerate(zip(spec["xs"], spec["d_concs"], spec["masses"])):
        a = f"IS-{k + 1:02d}"
        s, m, tr = forward_interfered(system, a, x, spec["y0"] + x * g, c, w_s, w_t, spec["label"], spec["betas"][k],
                                      doping=doping, session=session)
        samples.append(s)
        measured += m
        truths[a] = tr
    material = {"sm-nd": "JNdi-1", "lu-hf": "JMC-475", "rb-sr": "NIST SRM 987"}[system]
    ratio = {"sm-nd": "143Nd/144Nd", "lu-hf": "176Hf/177Hf", "rb-sr": "87Sr/86Sr"}[system]
    tables = {"Spikes": spike_rows(spec["label"], RUNS[system][:2]),
              "Standards": standard_rows(session, material, ratio), "Samples": samples, "Measured": measured}
    text = RUNS[system][8]
    results, ages, wb = reduce_and_read(tmp_path, tables, {text: list(truths)})
    for a, tr in truths.items():
        assert results[a]["x"] == pytest.approx(tr["x"], rel=1e-8), a
        assert results[a]["y"] == pytest.approx(tr["y"], rel=1e-8), a
    assert ages[text]["age"] == pytest.approx(spec["t_ma"], rel=1e-6)
    ws = wb["Steps"]
    keys = {ws.cell(KEY_ROW, c).value: c for c in range(1, ws.max_column + 1)}
    strip_d = [ws.cell(FIRST_ROW + k, keys["strip_daughter_ppm"]).value for k in range(len(truths))]
    assert all(v > 1 for v in strip_d), strip_d           # something was stripped from every daughter run
    src = ws.cell(FIRST_ROW, keys["beta_parent_from"]).value
    assert src == ("Yb doping (173Yb/171Yb)" if doping else ("internal" if system == "sm-nd" else "typed"))
    if doping:
        for k, (bp, _bd) in enumerate(spec["betas"]):
            assert ws.cell(FIRST_ROW + k, keys["beta_parent"]).value == pytest.approx(bp, rel=1e-9)
            assert ws.cell(FIRST_ROW + k, keys["strip_parent_ppm"]).value > 1     # 176Yb on 176Lu


def test_rb_sr_decay_constant_is_a_live_constant(tmp_path):
    """decay.Rb87 on the Constants sheet drives the Rb-Sr age: with λ = 1.3972e-11 /a (Villa et al. 2015,
    Geochim. Cosmochim. Acta 164, 382) the age is t·1.42/1.3972 exactly (t = ln(1 + slope)/λ)."""
    tables, truths = _tables((RBSR,), standard_rows("S2", "NIST SRM 987", "87Sr/86Sr"))
    path = tmp_path / "rbsr.xlsx"
    fill_template(path, tables, {"Rb-Sr": list(truths)})
    wb = load_workbook(path)
    ws = wb["Constants"]
    col = {ws.cell(KEY_ROW, c).value: c for c in range(1, ws.max_column + 1)}
    row = next(r for r in range(FIRST_ROW, ws.max_row + 1) if ws.cell(r, col["key"]).value == "decay.Rb87")
    ws.cell(row, col["value"]).value = 1.3972e-11
    wb.save(path)
    out = tmp_path / "out"
    assert main(["reduce", str(path), "-o", str(out)]) == 0
    iso = load_workbook(out / "results.xlsx", data_only=True)["Isochron"]
    q = {name: ISOCHRON_FIRST_Q_ROW + i for i, (name, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}
    age = iso.cell(q["age"], ISOCHRON_SUMMARY_COL + 2 + ISOCHRON_SYSTEMS.index("Rb-Sr")).value
    assert age == pytest.approx(RBSR["t_ma"] * 1.42 / 1.3972, rel=1e-9)


def test_ndo_oxide_run_comes_back_through_the_template(tmp_path):
    """A Nd run measured as NdO+ (Measured Ion 'oxide', every Nd isotope given): oxygen-corrected with 17O/16O =
    379.9e-6 and 18O/16O = 2005.20e-6 (VSMOW; Li et al. 1988, Baertschi 1976 — recalled from memory), then
    reduced as metal. Forward model in mpmath: fractionated metal beams, then each oxide mass m carries
    N(m−16) + o17·N(m−17) + o18·N(m−18)."""
    o17, o18 = mp.mpf("379.9e-6"), mp.mpf("2005.20e-6")
    spec = dict(SMND, xs=SMND["xs"][:3], d_concs=SMND["d_concs"][:3], masses=SMND["masses"][:3])
    tables, truths = _tables((spec,), standard_rows("S1", "JNdi-1", "143Nd/144Nd"))
    nd_isos = ind.isotopes("Nd")
    for k, row in enumerate(r for r in tables["Measured"] if r["element"] == "Nd"):
        a = row["analysis"]
        y = truths[a]["y"]
        w_s, w_t = spec["masses"][k]
        d_fr = ind.sample_fractions("Nd", {"143Nd/144Nd": y})
        d_umol = mp.mpf(spec["d_concs"][k]) / ind.molar_mass(d_fr) * mp.mpf(repr(w_s))
        sp = SPIKES[f"{spec['label']} Nd"]
        true = ind.mixture_ratios("Nd", "144Nd", float(d_umol), d_fr, sp["concentration_umol_g"] * w_t,
                                  sp["spike_isotope"], sp["abundances"], beta=0.0,
                                  blank_umol=float(mp.mpf(spec["blanks"][1]) * mp.mpf("1e-3")
                                                   / ind.molar_mass(ind.natural_fractions("Nd"))))
        b = mp.mpf(repr(spec["betas"][k][1]))
        metal = {int(i[:-2]): (mp.mpf(1) if i == "144Nd" else mp.mpf(repr(true[f"{i}/144Nd"])))
                 * (ind.mass(i) / ind.mass("144Nd")) ** (-b) for i in nd_isos}
        oxide = {m + 16: metal[m] + o17 * metal.get(m - 1, 0) + o18 * metal.get(m - 2, 0) for m in metal}
        for key in list(row):
            if key.startswith("r"):
                del row[key]
        for j, i in enumerate((i for i in nd_isos if i != "144Nd"), start=1):
            v = float(oxide[int(i[:-2]) + 16] / oxide[160])
            row[f"r{j}_name"], row[f"r{j}"], row[f"r{j}_sigma_1s"] = f"{i}/144Nd", v, v * 1e-5
        row["ion"] = "oxide"
    results, ages, _wb = reduce_and_read(tmp_path, tables, {"Sm-Nd": list(truths)})
    for a, tr in truths.items():
        assert results[a]["x"] == pytest.approx(tr["x"], rel=1e-8), a
        assert results[a]["y"] == pytest.approx(tr["y"], rel=1e-8), a
    assert ages["Sm-Nd"]["age"] == pytest.approx(SMND["t_ma"], rel=1e-6)


# ---- cycles in the grid (issue 12) ------------------------------------------------------------------------------
def _robust_mean_sem(v, k=3.5):
    """Mean and SEM of the cycles kept by one robust pass, written out here: |x − median| > k·1.4826·MAD rejected
    (modified z-score, Iglewicz & Hoaglin 1993), then mean and SD/√n (ddof = 1) of the kept cycles."""
    import numpy as np

    v = np.asarray(v, dtype=float)
    med = np.median(v)
    mad = np.median(np.abs(v - med))
    keep = np.abs(v - med) <= k * 1.4826 * mad if k > 0 else np.ones(v.size, dtype=bool)
    kept = v[keep]
    return float(kept.mean()), float(kept.std(ddof=1) / math.sqrt(kept.size)), int(keep.sum())


@pytest.mark.parametrize("k", [3.5, 0.0])
def test_cycles_in_the_grid_feed_the_reduction(tmp_path, k):
    """Nd runs given as cycles (one gross outlier each) reduce exactly as the same runs typed as the mean and SEM
    of their kept cycles, computed here (x, y and their σ to 1e-12); k = 0 keeps every cycle."""
    import numpy as np

    spec = dict(SMND, xs=SMND["xs"][:3], d_concs=SMND["d_concs"][:3], masses=SMND["masses"][:3])
    tables, truths = _tables((spec,), standard_rows("S1", "JNdi-1", "143Nd/144Nd"))
    rng = np.random.default_rng(7)
    with_cycles = json.loads(json.dumps(tables))
    typed = json.loads(json.dumps(tables))
    with_cycles["Cycles"] = []
    n = 30
    for m_c, m_t in zip(with_cycles["Measured"], typed["Measured"]):
        if m_c["element"] != "Nd":
            continue
        names = [(j, m_c[f"r{j}_name"], m_c[f"r{j}"]) for j in (1, 2, 3)]
        cyc = {name: v * (1 + 2e-5 * rng.standard_normal(n)) for _j, name, v in names}
        cyc[names[0][1]][4] *= 1 + 2e-3                     # a gross outlier in the radiogenic ratio
        for c in range(n):
            line = {"analysis": m_c["analysis"], "element": "Nd", "cycle": c + 1}
            for j, name, _v in names:
                line[f"r{j}_name"], line[f"r{j}"] = name, float(cyc[name][c])
            with_cycles["Cycles"].append(line)
        for j, name, _v in names:
            del m_c[f"r{j}_name"], m_c[f"r{j}"], m_c[f"r{j}_sigma_1s"]
            mean, sem, kept = _robust_mean_sem(cyc[name], k)
            m_t[f"r{j}"], m_t[f"r{j}_sigma_1s"] = mean, sem
            assert kept <= n - 1 if (k and j == 1) else (kept == n or k)
    for t in (with_cycles, typed):
        t["Constants"] = None
    c = [dict(r) for r in __import__("reduction.workbook", fromlist=["constants_rows"]).constants_rows()]
    for r in c:
        if r["key"] == "lab.cycle_reject_k":
            r["value"] = k
    results = []
    for name, t in (("cyc", with_cycles), ("typed", typed)):
        t.pop("Constants")
        path = tmp_path / f"{name}.xlsx"
        write_xlsx(build_layout(t, constants=c, isochron_selection={"Sm-Nd": [(a, 1) for a in truths]}), path)
        out = tmp_path / f"{name}-out"
        assert main(["reduce", str(path), "-o", str(out)]) == 0
        wb = load_workbook(out / "results.xlsx", data_only=True)
        ws = wb["Results"]
        keys = [ws.cell(KEY_ROW, j).value for j in range(1, ws.max_column + 1)]
        results.append({ws.cell(r, 1).value: {kk: ws.cell(r, j + 1).value for j, kk in enumerate(keys)}
                        for r in range(FIRST_ROW, FIRST_ROW + len(truths))})
        if name == "cyc":
            kept = [wb["Cycles"].cell(r, 16).value for r in range(FIRST_ROW, FIRST_ROW + n)]
            assert kept.count("kept") <= n - 1 if k else kept.count("kept") == n
            assert kept[4].startswith("rejected: 143Nd/144Nd") == bool(k)
    for a in truths:
        for q in ("x", "y", "x_1s", "y_1s", "rho", "daughter_conc"):
            assert results[0][a][q] == pytest.approx(results[1][a][q], rel=1e-12, abs=1e-15), (a, q)
