"""Isobaric interference stripping checked by forward models: beams built from the natural
compositions of the convention (tests/engine/independent_forward.py: CIAAW fractions, exponential-law
fractionated with AME2020 masses until the normalising ratio is exact, then 176Yb/173Yb = 0.79381),
fractionated with a chosen exponential-law bias (Russell et al. 1978), then stripped cycle by cycle."""
import independent_forward as fwd
import numpy as np
import pytest

from reduction.constants import isotope_fraction, isotope_mass
from reduction.dilution import load_demo_spikes
from reduction.errors import InputError, UndefinedResultError
from reduction.interference import INTERFERENCES, interferent_ratio, strip_beams, strip_isobar
from reduction.massbias import bias_apply


def test_interferent_ratios_from_reference_data():
    # Normalising and fixed ratios are exact in the convention: 87Rb/85Rb = 1/2.5932 (inverted 85Rb/87Rb)
    assert interferent_ratio("87Rb", "85Rb") == pytest.approx(1 / 2.5932, rel=1e-14)
    # Goolaerts, Mattielli, de Jong, Weis & Scoates 2004, Chem. Geol. 206, 1-9: 175Lu/176Lu = 37.72,
    # inverted (authors after de Jong recalled from memory, REFERENCE.md section 4)
    assert interferent_ratio("176Lu", "175Lu") == pytest.approx(0.02651, rel=1e-14)
    # Chu et al. 2002, J. Anal. At. Spectrom. 17, 1567-1574: 176Yb/173Yb = 0.79381 (number recalled from memory)
    assert interferent_ratio("176Yb", "173Yb") == pytest.approx(0.79381, rel=1e-14)
    assert interferent_ratio("171Yb", "173Yb") == pytest.approx(1 / 1.132685, rel=1e-14)  # Chu et al. 2002, inverted
    # Other ratios: the CIAAW fractions fractionated by the exponential law to the normalising ratio,
    # computed independently (independent_forward, mpmath). 144Sm/147Sm stays 0.2053 to 4 digits (CIAAW
    # 0.0308/0.1500); 172Yb/173Yb moves from the raw CIAAW 0.21754/0.16098 by ~1.3e-4.
    sm, yb = fwd.natural_fractions("Sm"), fwd.natural_fractions("Yb")
    assert interferent_ratio("144Sm", "147Sm") == pytest.approx(fwd.ratio(sm, "144Sm", "147Sm"), rel=1e-12)
    assert interferent_ratio("144Sm", "147Sm") == pytest.approx(0.2053, rel=1e-4)
    assert interferent_ratio("172Yb", "173Yb") == pytest.approx(fwd.ratio(yb, "172Yb", "173Yb"), rel=1e-12)
    assert interferent_ratio("172Yb", "173Yb") == pytest.approx(0.21754 / 0.16098, rel=3e-4)
    assert abs(interferent_ratio("172Yb", "173Yb") / (0.21754 / 0.16098) - 1) > 1e-4


def test_sm_on_nd_forward_model_per_cycle():
    rng = np.random.default_rng(11)
    n = 200
    beta_sm = 2.1  # the interfering element's own bias
    nd144 = rng.uniform(1.0, 1.2, n)  # volts, drifting
    sm147 = rng.uniform(0.001, 0.004, n)
    true_sm_ratio = interferent_ratio("144Sm", "147Sm")
    m44, m47 = isotope_mass("144Sm").value, isotope_mass("147Sm").value
    total144 = nd144 + sm147 * true_sm_ratio * (m44 / m47) ** (-beta_sm)
    s = strip_isobar(total144, sm147, "144Sm", "147Sm", bias_factor=beta_sm)
    np.testing.assert_allclose(s.corrected, nd144, rtol=1e-13)
    assert np.all(s.correction_rel > 0) and np.all(s.correction_rel < 0.002)


def test_lu_hf_two_isobars_and_sizes_reported():
    n = 50
    beta = {"Hf": 1.7, "Yb": 1.9, "Lu": 1.8}
    hf177 = np.full((2, n), 2.0)
    hf176 = hf177 * 0.2828 * (isotope_mass("176Hf").value / isotope_mass("177Hf").value) ** (-beta["Hf"])
    yb173 = np.full((2, n), 0.01)
    lu175 = np.full((2, n), 0.02)
    # 176Yb/173Yb = 0.79381 (Chu et al. 2002, recalled from memory); 176Lu/175Lu = 0.02651 (Goolaerts et al.
    # 2004, Chem. Geol. 206, 1-9: 175Lu/176Lu = 37.72, inverted)
    yb176 = yb173 * bias_apply(0.79381, isotope_mass("176Yb").value, isotope_mass("173Yb").value, beta["Yb"])
    lu176 = lu175 * bias_apply(0.02651, isotope_mass("176Lu").value, isotope_mass("175Lu").value, beta["Lu"])
    beams = {"176Hf": hf176 + yb176 + lu176, "177Hf": hf177, "173Yb": yb173, "175Lu": lu175}
    before = beams["176Hf"].copy()
    out = strip_beams(beams, "lu-hf", bias_factors={"Yb": beta["Yb"], "Lu": beta["Lu"]})
    np.testing.assert_allclose(out.beams["176Hf"], hf176, rtol=1e-13)
    np.testing.assert_array_equal(beams["176Hf"], before)
    assert set(out.corrections) == {"176Yb on 176Hf", "176Lu on 176Hf"}
    rel = out.correction_rel_mean["176Yb on 176Hf"]
    assert rel.shape == (2,)
    np.testing.assert_allclose(rel, yb176[:, 0] / beams["176Hf"][:, 0], rtol=1e-12)


def test_rb_on_sr_and_nan_cycles_pass_through():
    sr87 = np.array([[0.5, 0.5, np.nan]])
    rb85 = np.array([[0.01, 0.01, np.nan]])
    rb87 = rb85 / 2.5932
    out = strip_beams({"87Sr": sr87 + rb87, "85Rb": rb85, "86Sr": np.ones((1, 3))}, "rb-sr")
    np.testing.assert_allclose(out.beams["87Sr"][0, :2], 0.5, rtol=1e-13)
    assert np.isnan(out.beams["87Sr"][0, 2])
    assert np.isfinite(out.correction_rel_mean["87Rb on 87Sr"]).all()


def test_missing_monitor_is_named():
    with pytest.raises(InputError) as e:
        strip_beams({"144Nd": [1.0, 1.0], "143Nd": [0.5, 0.5]}, "sm-nd")
    assert "147Sm" in str(e.value)
    out = strip_beams({"144Nd": [1.0, 1.0]}, "sm-nd", require_monitors=False)
    assert out.correction_rel_mean["144Sm on 144Nd"] == 0.0


def test_interference_larger_than_beam():
    with pytest.raises(UndefinedResultError):
        strip_isobar([0.001], [1.0], "144Sm", "147Sm")


def test_wrong_monitor_element():
    with pytest.raises(InputError) as e:
        strip_isobar([1.0], [0.1], "144Sm", "146Nd")
    assert e.value.argument == "monitor"


def test_table_covers_all_systems():
    assert set(INTERFERENCES) == {"sm-nd", "lu-hf", "rb-sr"}
    assert {(t, i) for t, i, _ in INTERFERENCES["sm-nd"]} == {("144Nd", "144Sm"), ("148Nd", "148Sm"),
                                                               ("150Nd", "150Sm"), ("142Nd", "142Ce")}


def _fractionated(ratio, iso, mon, beta):
    """True ratio iso/mon as measured, exponential law R (m_iso/m_mon)^-β (independent_forward, mpmath)."""
    return fwd.fractionate(ratio, iso, mon, beta)


def test_all_sm_and_ce_isobars_on_nd_forward_model():
    # Natural Sm and Ce residue in an unspiked Nd run, each element with its own exponential-law bias
    # (Russell et al. 1978): 144Sm, 148Sm, 150Sm from 147Sm; 142Ce from 140Ce. Ratios: the natural convention
    # computed by independent_forward (Sm fractionated to 147Sm/152Sm = 0.56081; Ce, without a normalising
    # ratio, the CIAAW fractions).
    rng = np.random.default_rng(5)
    n = 30
    nd = {i: rng.uniform(0.5, 1.0, n) for i in ("142Nd", "143Nd", "144Nd", "146Nd", "148Nd", "150Nd")}
    sm147, ce140 = rng.uniform(1e-4, 3e-4, n), rng.uniform(1e-3, 2e-3, n)
    beta = {"Sm": 1.8, "Ce": 2.0}
    beams = dict(nd, **{"147Sm": sm147, "140Ce": ce140})
    for target, iso, mon, m in (("144Nd", "144Sm", "147Sm", sm147), ("148Nd", "148Sm", "147Sm", sm147),
                                ("150Nd", "150Sm", "147Sm", sm147), ("142Nd", "142Ce", "140Ce", ce140)):
        r = fwd.ratio(fwd.natural_fractions(iso.lstrip("0123456789")), iso, mon)
        beams[target] = nd[target] + m * _fractionated(r, iso, mon, beta[iso.lstrip("0123456789")])
    out = strip_beams(beams, "sm-nd", bias_factors=beta)
    for target in ("142Nd", "144Nd", "148Nd", "150Nd"):
        np.testing.assert_allclose(out.beams[target], nd[target], rtol=1e-12)
    # a 142Nd beam without its 140Ce monitor is refused (or skipped on request)
    no_ce = {k: v for k, v in beams.items() if k != "140Ce"}
    with pytest.raises(InputError) as e:
        strip_beams(no_ce, "sm-nd", bias_factors=beta)
    assert "140Ce" in str(e.value)
    assert strip_beams(no_ce, "sm-nd", bias_factors=beta, require_monitors=False) \
        .correction_rel_mean["142Ce on 142Nd"] == 0.0


def test_spiked_run_needs_the_mixture_interferent_ratio():
    # Forward model of a Hf run of an aliquot spiked with the INVENTED demo 176Lu-180Hf mixed spike
    # (Lu: 175Lu 0.25, 176Lu 0.75). The residual Lu in the Hf cut is the spike–sample Lu mixture, so its
    # 176Lu/175Lu is far above the natural 0.02651 (Goolaerts et al. 2004). Exponential law, β(Lu) = 1.8.
    lu = load_demo_spikes()["demo-LuHf-176-180 Lu"]
    n_sample_lu, n_spike_lu = 1.0, 0.5        # µmol, sample and spike Lu in the mixture
    f_nat = {i: isotope_fraction(i).value for i in ("175Lu", "176Lu")}
    mix = {i: n_sample_lu * f_nat[i] + n_spike_lu * lu.abundance(i) for i in f_nat}
    r_mix = mix["176Lu"] / mix["175Lu"]
    r_nat = interferent_ratio("176Lu", "175Lu")
    assert r_mix / r_nat > 10                  # the spiked mixture: an order of magnitude above natural
    beta_lu = 1.8
    hf176 = np.full(20, 0.5)
    lu175 = np.linspace(2e-4, 4e-4, 20)
    lu176 = lu175 * _fractionated(r_mix, "176Lu", "175Lu", beta_lu)
    beams = {"176Hf": hf176 + lu176, "177Hf": np.full(20, 1.8), "175Lu": lu175}
    over = strip_beams(beams, "lu-hf", bias_factors={"Lu": beta_lu}, require_monitors=False,
                       interferent_ratios={"176Lu/175Lu": r_mix})
    np.testing.assert_allclose(over.beams["176Hf"], hf176, rtol=1e-13)
    # with the natural ratio the stripped beam keeps lu175·(r_mix − r_nat)·fractionation too much
    nat = strip_beams(beams, "lu-hf", bias_factors={"Lu": beta_lu}, require_monitors=False)
    left = lu175 * _fractionated(r_mix - r_nat, "176Lu", "175Lu", beta_lu)
    np.testing.assert_allclose(nat.beams["176Hf"] - hf176, left, rtol=1e-9)
    # 130-270 ppm too high in 176Hf here: ten times a typical 176Hf/177Hf precision (common practice ~20 ppm)
    assert np.all((nat.beams["176Hf"] - hf176) / hf176 > 1.3e-4)
    # the natural-ratio correction is (r_nat/r_mix) of the true one: ~ 1/40 here
    np.testing.assert_allclose(nat.corrections["176Lu on 176Hf"] / over.corrections["176Lu on 176Hf"],
                               r_nat / r_mix, rtol=1e-12)


def test_interferent_ratio_keys_are_checked():
    b = {"144Nd": [1.0], "147Sm": [1e-3]}
    with pytest.raises(InputError) as e:
        strip_beams(b, "sm-nd", interferent_ratios={"176Lu/175Lu": 0.5})
    assert e.value.argument == "interferent_ratios"
    with pytest.raises(InputError):
        strip_beams(b, "sm-nd", interferent_ratios={"144Sm/147Sm": -1.0})
    with pytest.raises(InputError) as e:
        strip_beams(b, "sm-nd", bias_factors={"Sm": "analyte"})
    assert e.value.argument == "bias_factors"


def test_reduce_cycles_passes_interferent_ratios():
    # 144Sm/147Sm of a 149Sm-spiked mixture (INVENTED value 0.05, i.e. a quarter of the natural 0.2053)
    from reduction.chain import reduce_cycles
    nd144, nd143, sm147 = np.full(10, 1.0), np.full(10, 0.5), np.full(10, 1e-3)
    beams = {"143Nd": nd143, "144Nd": nd144 + sm147 * 0.05, "147Sm": sm147}
    good = reduce_cycles(beams, "sm-nd", ["143Nd/144Nd"], interferent_ratios={"144Sm/147Sm": 0.05})
    assert good.ratios["143Nd/144Nd"] == pytest.approx(0.5, rel=1e-13)
    bad = reduce_cycles(beams, "sm-nd", ["143Nd/144Nd"])
    # natural ratio over-strips by 1e-3 × (0.2053 − 0.05) of the 144 beam: ratio high by that fraction
    assert bad.ratios["143Nd/144Nd"] == pytest.approx(0.5 / (1 - 1e-3 * (interferent_ratio("144Sm", "147Sm") - 0.05)),
                                                      rel=1e-12)
