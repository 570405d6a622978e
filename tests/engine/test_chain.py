"""End-to-end: a synthetic Sm-Nd garnet–whole-rock set, from raw cycle beams to the isochron inputs.

Invented scenario (demo data, rule 3): the fictional "Quillmere schist" (samples QM-Grt1, QM-Grt2,
QM-Lch (garnet leachate), QM-WR), forward-modelled from a chosen true age of 412.0 Ma and initial
143Nd/144Nd = 0.511900 with λ(147Sm) of the default reference set (Lugmair & Marti 1978). Natural
compositions: the convention of tests/engine/independent_forward.py (CIAAW fractions, exponential-law
fractionated with AME2020 masses until the normalising ratio is exact; Russell et al. 1978), computed
there in mpmath without the engine's code; spikes: the INVENTED demo mixed spike; mass bias:
exponential law with a different β per run; residual Sm in the Nd run (144Sm on 144Nd, 150Sm on
150Nd) added per cycle from a drifting 147Sm monitor with the composition of the spike–sample Sm
mixture (the Sm is spiked too). The forward model adds the moles of each isotope (independent_forward).
"""
import statistics

import independent_forward as fwd
import numpy as np
import pytest

from reduction.chain import reduce_cycles, reduce_spiked_analysis
from reduction.constants import reference_set
from reduction.dilution import load_demo_spikes
from reduction.errors import InputError
from reduction.standards import standard_factor

SP = load_demo_spikes()
SM, ND = SP["demo-SmNd-149-150 Sm"], SP["demo-SmNd-149-150 Nd"]
LAM = reference_set().decay_constant("Sm147").value
T_MA, INITIAL = 412.0, 0.511900
GROWTH = np.expm1(LAM * T_MA * 1e6)
# sample: (147Sm/144Nd, Nd µg/g, sample mass g)
SET = {"QM-Grt1": (1.25, 0.45, 0.25), "QM-Grt2": (0.95, 0.60, 0.22), "QM-Lch": (0.42, 1.1, 0.05),
       "QM-WR": (0.128, 22.0, 0.02)}


def truth(name):
    x, nd_ugg, ws = SET[name]
    y = INITIAL + x * GROWTH
    rn = fwd.sample_fractions("Nd", {"143Nd/144Nd": y})      # atom fractions (mpmath)
    rs = fwd.natural_fractions("Sm")
    n_nd = nd_ugg / fwd.molar_mass(rn) * ws                    # µmol Nd
    n144 = n_nd * rn["144Nd"]
    n_sm = x * n144 / rs["147Sm"]                              # µmol Sm
    sm_ugg = n_sm / ws * fwd.molar_mass(rs)
    return dict(x=x, y=y, nd_ugg=nd_ugg, sm_ugg=float(sm_ugg), ws=ws, rn=rn, rs=rs, n_nd=n_nd, n_sm=n_sm)


def _spike_args(spike, w_t):
    return spike.concentration_umol_g * w_t, spike.spike_isotope, dict(zip(spike.isotopes, spike.abundances))


def mixture_beams(fr, element, ref, n_sample, spike, w_t, beta, isos, scale, n_cycles, pattern_iso):
    """Beams (V) per cycle of a spiked mixture (sample of fractions ``fr``, ``n_sample`` µmol), exponential-law
    fractionated (independent_forward.mixture_ratios); a zero-sum ±δ pattern on one beam."""
    meas = fwd.mixture_ratios(element, ref, n_sample, fr, *_spike_args(spike, w_t), beta=beta)
    meas[f"{ref}/{ref}"] = 1.0
    beams = {i: np.full(n_cycles, scale * meas[f"{i}/{ref}"]) for i in isos}
    pat = np.where(np.arange(n_cycles) % 2 == 0, 1.0, -1.0) * 2e-5
    beams[pattern_iso] = beams[pattern_iso] * (1 + pat)
    return beams


def raw_runs(name, w_t=0.08, beta_nd=1.62, beta_sm=1.35, n_cycles=60):
    t = truth(name)
    nd = mixture_beams(t["rn"], "Nd", "144Nd", t["n_nd"], ND, w_t, beta_nd,
                       ["143Nd", "144Nd", "146Nd", "150Nd"], 2.0, n_cycles, "143Nd")
    sm = mixture_beams(t["rs"], "Sm", "152Sm", t["n_sm"], SM, w_t, beta_sm,
                       ["147Sm", "149Sm", "152Sm"], 1.5, n_cycles, "147Sm")
    # residual Sm in the Nd cut: drifting 147Sm monitor; 144Sm and 150Sm added on masses 144 and 150 with
    # the Sm bias and the composition of the spiked Sm mixture (its true ratios, as the Sm run measures them)
    mon = np.linspace(2e-4, 6e-4, n_cycles)
    true_mix = fwd.mixture_ratios("Sm", "147Sm", t["n_sm"], t["rs"], *_spike_args(SM, w_t), beta=0.0)
    meas_mix = fwd.mixture_ratios("Sm", "147Sm", t["n_sm"], t["rs"], *_spike_args(SM, w_t), beta=beta_sm)
    t["sm_mix_ratios"] = {k: true_mix[k] for k in ("144Sm/147Sm", "150Sm/147Sm")}
    for iso, target in (("144Sm", "144Nd"), ("150Sm", "150Nd")):
        nd[target] = nd[target] + mon * meas_mix[f"{iso}/147Sm"]
    nd["147Sm"] = mon
    # one wild cycle in each run, appended (a gross outlier: rejected by the robust pass)
    for b, iso in ((nd, "143Nd"), (sm, "147Sm")):
        for k in b:
            b[k] = np.append(b[k], b[k][-1])
        b[iso][-1] *= 1.01
    return t, nd, sm, beta_sm


def reduce(name, **kw):
    t, nd, sm, beta_sm = raw_runs(name)
    cn = reduce_cycles(nd, "sm-nd", ["143Nd/144Nd", "146Nd/144Nd", "150Nd/144Nd"], bias_factors={"Sm": beta_sm},
                       interferent_ratios=t["sm_mix_ratios"])
    cs = reduce_cycles(sm, "sm-nd", ["147Sm/152Sm", "149Sm/152Sm"])
    assert cn.n_rejected["143Nd/144Nd"] == 1 and cs.n_rejected["147Sm/152Sm"] == 1
    assert 0 < cn.correction_rel_mean["144Sm on 144Nd"] < 1e-2
    r = reduce_spiked_analysis("sm-nd", cs.ratios, cn.ratios, t["ws"], 0.08, SM, ND,
                               parent_mix_sigma_1s=cs.sem_1s, daughter_mix_sigma_1s=cn.sem_1s,
                               parent_norm_ratio="147Sm/152Sm", sample_mass_sigma_1s=2e-5,
                               spike_mass_sigma_1s=2e-5, **kw)
    return t, r


@pytest.mark.parametrize("name", list(SET))
def test_garnet_whole_rock_set_recovers_truth(name):
    t, r = reduce(name)
    assert r.parent_ratio_name == "147Sm/144Nd" and r.daughter_ratio_name == "143Nd/144Nd"
    assert r.parent_ratio == pytest.approx(t["x"], rel=1e-9)
    assert r.daughter_ratio == pytest.approx(t["y"], rel=1e-9)
    assert r.daughter_conc_ug_g == pytest.approx(t["nd_ugg"], rel=1e-9)
    assert r.parent_conc_ug_g == pytest.approx(t["sm_ugg"], rel=1e-9)
    assert r.parent_ratio_sigma_1s > 0 and r.daughter_ratio_sigma_1s > 0 and -1 < r.rho < 1
    assert r.poor_mix == ()


def test_set_gives_the_forward_modelled_age():
    # The isochron inputs, fitted with York regression (helper A's reduction.regression), give the age.
    regression = pytest.importorskip("reduction.regression")
    ages = pytest.importorskip("reduction.ages")
    rows = [reduce(n)[1] for n in SET]
    fit = regression.fit_isochron([r.parent_ratio for r in rows], [r.parent_ratio_sigma_1s for r in rows],
                                  [r.daughter_ratio for r in rows], [r.daughter_ratio_sigma_1s for r in rows],
                                  [r.rho for r in rows])
    age = ages.isochron_age(fit, "sm-nd")
    assert age.age_ma == pytest.approx(T_MA, rel=1e-7)
    assert age.initial == pytest.approx(INITIAL, rel=1e-9)


def test_random_systematic_split_and_monte_carlo():
    _, r = reduce("QM-Grt1", mc_draws=20000, seed=99)
    for k in r.output_names:
        j = r.output_names.index(k)
        tot = np.sqrt(r.cov[j, j])
        assert np.hypot(r.sigma_1s_random[k], r.sigma_1s_systematic[k]) == pytest.approx(tot, rel=1e-9)
        assert r.mc_sigma_1s[k] == pytest.approx(tot, rel=0.03)
    # the daughter ratio has no systematic part without a standard; the spike calibration dominates Sm/Nd
    assert r.sigma_1s_systematic["daughter_ratio"] == 0.0
    assert r.sigma_1s_systematic["parent_ratio"] > r.sigma_1s_random["parent_ratio"]
    assert r.mc_rho == pytest.approx(r.rho, abs=0.03)


def test_mixed_spike_correlation_reduces_sm_nd_error():
    # A mixed spike calibrated as one solution: correlated Sm and Nd concentrations cancel in 147Sm/144Nd.
    _, r0 = reduce("QM-Grt2")
    _, r1 = reduce("QM-Grt2", spike_rho=0.99)
    assert r1.sigma_1s_systematic["parent_ratio"] < 0.2 * r0.sigma_1s_systematic["parent_ratio"]


def test_blank_and_standard_applied():
    # The raw runs carry no blank; declaring a 50 pg Nd blank (natural composition) must remove exactly
    # 50 pg from the sample's Nd and its 144Nd from the 143Nd/144Nd mass balance; the session factor
    # (JNdi-1 accepted 0.512115, Tanaka et al. 2000) must scale the ratio, and the standard's scatter
    # (INVENTED runs, ±1.5e-5 around a mean 2e-5 low) is added to the daughter ratio's random σ by default.
    t = truth("QM-Lch")
    runs = [0.512115 * (1 - 2e-5) * (1 + d) for d in (-1.5e-5, -0.5e-5, 0.5e-5, 1.5e-5)]
    f = standard_factor(runs, material="JNdi-1", ratio="143Nd/144Nd")
    _, r = reduce("QM-Lch", standard=f, daughter_blank_ng=0.05, daughter_blank_sigma_ng=0.02)
    # by hand: blank of the natural convention (independent_forward), 0.05 ng = 0.05e-3 µg
    nat = fwd.natural_fractions("Nd")
    b144 = 0.05e-3 / fwd.molar_mass(nat) * nat["144Nd"]        # µmol 144Nd of the blank
    n144 = t["n_nd"] * t["rn"]["144Nd"]                         # µmol 144Nd of the sample
    assert r.blank_share_daughter == pytest.approx(float(b144 / n144), rel=1e-9)
    assert r.daughter_conc_ug_g == pytest.approx(t["nd_ugg"] - 0.05e-3 / t["ws"], rel=1e-9)
    y_blank_free = (n144 * t["y"] - b144 * nat["143Nd"] / nat["144Nd"]) / (n144 - b144)
    factor = 0.512115 / statistics.fmean(runs)
    assert r.daughter_ratio == pytest.approx(float(y_blank_free) * factor, rel=1e-9)
    assert r.daughter_ratio > t["y"]  # factor > 1 raises the ratio
    assert r.sigma_1s_systematic["daughter_ratio"] > 0  # accepted-value σ of JNdi-1
    # default daughter reproducibility = the session's SD/mean of the standard runs (computed by hand here)
    rep = statistics.stdev(runs) / statistics.fmean(runs)
    assert f.reproducibility_rel_1s == pytest.approx(rep, rel=1e-9)
    _, r0 = reduce("QM-Lch", standard=f, daughter_blank_ng=0.05, daughter_blank_sigma_ng=0.02,
                   daughter_ratio_reproducibility_rel_1s=0.0)
    assert r0.daughter_ratio == r.daughter_ratio
    added = r.sigma_1s_random["daughter_ratio"] ** 2 - r0.sigma_1s_random["daughter_ratio"] ** 2
    assert added == pytest.approx((r.daughter_ratio * rep) ** 2, rel=1e-6)
    assert r.sigma_1s_systematic["daughter_ratio"] == pytest.approx(r0.sigma_1s_systematic["daughter_ratio"],
                                                                    rel=1e-9)


def test_separate_unspiked_aliquot():
    t, nd, sm, beta_sm = raw_runs("QM-WR")
    # unspiked Nd run: per-cycle internal normalisation to 146Nd/144Nd = 0.7219; natural Sm residue with the
    # Nd run's β (independent_forward: exponential law, AME2020 masses)
    beta = 1.58
    un = {i: np.full(40, 3.0 * fwd.fractionate(fwd.ratio(t["rn"], i, "144Nd"), i, "144Nd", beta))
          for i in ("143Nd", "144Nd", "146Nd")}
    un["147Sm"] = np.full(40, 1e-4)
    sm144 = fwd.ratio(fwd.natural_fractions("Sm"), "144Sm", "147Sm")
    un["144Nd"] = un["144Nd"] + 1e-4 * fwd.fractionate(sm144, "144Sm", "147Sm", beta)
    cu = reduce_cycles(un, "sm-nd", ["143Nd/144Nd"], norm_ratio="146Nd/144Nd", bias_factors={"Sm": "analyte"})
    assert cu.ratios["143Nd/144Nd"] == pytest.approx(t["y"], rel=1e-10)
    assert cu.bias_factor_mean == pytest.approx(beta, rel=1e-9)
    cn = reduce_cycles(nd, "sm-nd", ["146Nd/144Nd", "150Nd/144Nd"], bias_factors={"Sm": beta_sm},
                       interferent_ratios=t["sm_mix_ratios"])
    cs = reduce_cycles(sm, "sm-nd", ["147Sm/152Sm", "149Sm/152Sm"])
    r = reduce_spiked_analysis("sm-nd", cs.ratios, cn.ratios, t["ws"], 0.08, SM, ND,
                               parent_norm_ratio="147Sm/152Sm", daughter_unspiked=cu.ratios,
                               daughter_unspiked_sigma_1s=cu.sem_1s)
    assert r.daughter_ratio == pytest.approx(t["y"], rel=1e-9)
    assert r.parent_ratio == pytest.approx(t["x"], rel=1e-9)


def test_lu_hf_and_rb_sr_chains():
    lu, hf = SP["demo-LuHf-176-180 Lu"], SP["demo-LuHf-176-180 Hf"]
    # Lu-Hf garnet: 176Lu/177Hf = 2.0, 176Hf/177Hf = 0.2850; Lu with an external bias factor (two isotopes)
    rh = fwd.sample_fractions("Hf", {"176Hf/177Hf": 0.2850})
    rl = fwd.natural_fractions("Lu")
    ws, wt, n_hf = 0.2, 0.1, 2.0e-4
    n177 = n_hf * rh["177Hf"]
    n_lu = 2.0 * n177 / rl["176Lu"]
    bh, bl = 1.9, 1.7
    bh_ = mixture_beams(rh, "Hf", "177Hf", n_hf, hf, wt, bh, ["176Hf", "177Hf", "179Hf", "180Hf"], 1, 4, "176Hf")
    bl_ = mixture_beams(rl, "Lu", "175Lu", n_lu, lu, wt, bl, ["175Lu", "176Lu"], 1, 4, "176Lu")
    r = reduce_spiked_analysis("lu-hf", {"176Lu/175Lu": bl_["176Lu"].mean() / bl_["175Lu"][0]},
                               {k: bh_[k.split("/")[0]].mean() / bh_["177Hf"][0]
                                for k in ("176Hf/177Hf", "179Hf/177Hf", "180Hf/177Hf")},
                               ws, wt, lu, hf, parent_bias_factor=bl)
    assert r.parent_ratio == pytest.approx(2.0, rel=1e-9)
    assert r.daughter_ratio == pytest.approx(0.2850, rel=1e-9)
    # Rb-Sr: 87Rb/86Sr = 5.0, 87Sr/86Sr = 0.7400; Sr normalised to 86Sr/88Sr = 0.1194
    rb, sr = SP["demo-RbSr-87-84 Rb"], SP["demo-RbSr-87-84 Sr"]
    rsr = fwd.sample_fractions("Sr", {"87Sr/86Sr": 0.7400})
    rrb = fwd.natural_fractions("Rb")
    n_sr = 0.01
    n86 = n_sr * rsr["86Sr"]
    n_rb = 5.0 * n86 / rrb["87Rb"]
    bs = mixture_beams(rsr, "Sr", "86Sr", n_sr, sr, 0.3, -0.8, ["84Sr", "86Sr", "87Sr", "88Sr"], 1, 4, "87Sr")
    br = mixture_beams(rrb, "Rb", "85Rb", n_rb, rb, 0.3, 0.9, ["85Rb", "87Rb"], 1, 4, "87Rb")
    r = reduce_spiked_analysis("rb-sr", {"87Rb/85Rb": br["87Rb"].mean() / br["85Rb"][0]},
                               {k: bs[k.split("/")[0]].mean() / bs["86Sr"][0]
                                for k in ("84Sr/86Sr", "87Sr/86Sr", "88Sr/86Sr")},
                               0.1, 0.3, rb, sr, parent_bias_factor=0.9)
    assert r.parent_ratio == pytest.approx(5.0, rel=1e-9)
    assert r.daughter_ratio == pytest.approx(0.7400, rel=1e-9)


def test_bad_input_is_named():
    t, nd, sm, beta_sm = raw_runs("QM-WR")
    cn = reduce_cycles(nd, "sm-nd", ["143Nd/144Nd", "146Nd/144Nd", "150Nd/144Nd"], bias_factors={"Sm": beta_sm},
                       interferent_ratios=t["sm_mix_ratios"])
    cs = reduce_cycles(sm, "sm-nd", ["147Sm/152Sm", "149Sm/152Sm"])
    base = dict(system="sm-nd", parent_mix=cs.ratios, daughter_mix=cn.ratios, sample_mass_g=0.02, spike_mass_g=0.08,
                parent_spike=SM, daughter_spike=ND, parent_norm_ratio="147Sm/152Sm")
    for change, arg in ((dict(sample_mass_g=0.0), "sample_mass_g"), (dict(spike_mass_g=-0.1), "spike_mass_g"),
                        (dict(parent_spike=ND), "parent_spike"), (dict(parent_norm_ratio=None), "parent_bias_factor"),
                        (dict(daughter_mix={"143Nd/144Nd": 0.5}), "measured"),
                        (dict(parent_mix_sigma_1s={"148Sm/152Sm": 1e-5}), "parent_mix_sigma_1s")):
        with pytest.raises(InputError) as e:
            reduce_spiked_analysis(**{**base, **change})
        assert e.value.argument == arg
    with pytest.raises(InputError) as e:
        reduce_cycles({k: v for k, v in nd.items() if k != "147Sm"}, "sm-nd", ["143Nd/144Nd"])
    assert "147Sm" in str(e.value)
