"""The chain's Jacobian (complex step) against black-box derivatives of the chain's own *values*.

Independent of the Jacobian code: each input is moved in a fresh call of the public
``reduce_spiked_analysis`` and the outputs' change is turned into a derivative by Richardson-extrapolated
central differences (Richardson 1911; Press et al. 2007, Numerical Recipes, 3rd ed., §5.7), error
O(h⁴) + ε/h ≈ 1e-11 relative here. The covariance J·C·Jᵀ built from those derivatives must equal the
chain's ``cov`` (random and systematic parts) to 1e-7 relative: a derivative that drops out of the
complex-step path (an input cast to float on the way) would give a zero column and fail by 100 %.
Scenario data: the invented demo spikes and samples of test_chain.py (Quillmere schist).
"""
import dataclasses

import independent_forward as fwd
import numpy as np
import pytest
import test_chain as tc

from reduction.chain import reduce_spiked_analysis
from reduction.standards import standard_factor

SP = tc.SP

#: relative 1σ given to every input, so that each one moves the outputs
REL_SIGMA = 1e-3


def _case(system):
    """(args, kwargs, perturbable inputs) of one analysis per system, every σ given."""
    if system == "sm-nd":
        t, nd, sm, beta_sm = tc.raw_runs("QM-Grt1")
        pm = {"147Sm/152Sm": float(np.mean(sm["147Sm"] / sm["152Sm"])),
              "149Sm/152Sm": float(np.mean(sm["149Sm"] / sm["152Sm"]))}
        dm = {k: float(np.mean(nd[k.split("/")[0]][:-1] / nd["144Nd"][:-1]))
              for k in ("143Nd/144Nd", "146Nd/144Nd", "150Nd/144Nd")}
        # INVENTED session runs of JNdi-1 (accepted 0.512115, Tanaka et al. 2000)
        std = standard_factor([0.512115 * (1 - 2e-5) * (1 + d) for d in (-1.5e-5, -0.5e-5, 0.5e-5, 1.5e-5)],
                              material="JNdi-1", ratio="143Nd/144Nd")
        args = ("sm-nd", pm, dm, t["ws"], 0.08, tc.SM, tc.ND)
        kw = dict(parent_norm_ratio="147Sm/152Sm", parent_blank_ng=0.02, daughter_blank_ng=0.05,
                  standard=std, daughter_blank_ratio=0.5118, spike_rho=0.4,
                  parent_ratio_reproducibility_rel_1s=2e-3, daughter_ratio_reproducibility_rel_1s=1e-5)
    elif system == "lu-hf":
        rh = fwd.sample_fractions("Hf", {"176Hf/177Hf": 0.2850})
        rl = fwd.natural_fractions("Lu")
        lu, hf = SP["demo-LuHf-176-180 Lu"], SP["demo-LuHf-176-180 Hf"]
        n_hf = 2.0e-4
        n_lu = 2.0 * n_hf * rh["177Hf"] / rl["176Lu"]
        mh = fwd.mixture_ratios("Hf", "177Hf", n_hf, rh, *tc._spike_args(hf, 0.1), beta=1.9)
        ml = fwd.mixture_ratios("Lu", "175Lu", n_lu, rl, *tc._spike_args(lu, 0.1), beta=1.7)
        args = ("lu-hf", {"176Lu/175Lu": ml["176Lu/175Lu"]},
                {k: mh[k] for k in ("176Hf/177Hf", "179Hf/177Hf", "180Hf/177Hf")}, 0.2, 0.1, lu, hf)
        kw = dict(parent_bias_factor=1.7, parent_blank_ng=0.01, daughter_blank_ng=0.02)
    else:
        rsr = fwd.sample_fractions("Sr", {"87Sr/86Sr": 0.7400})
        rrb = fwd.natural_fractions("Rb")
        rb, sr = SP["demo-RbSr-87-84 Rb"], SP["demo-RbSr-87-84 Sr"]
        n_sr = 0.01
        n_rb = 5.0 * n_sr * rsr["86Sr"] / rrb["87Rb"]
        ms = fwd.mixture_ratios("Sr", "86Sr", n_sr, rsr, *tc._spike_args(sr, 0.3), beta=-0.8)
        mr = fwd.mixture_ratios("Rb", "85Rb", n_rb, rrb, *tc._spike_args(rb, 0.3), beta=0.9)
        args = ("rb-sr", {"87Rb/85Rb": mr["87Rb/85Rb"]},
                {k: ms[k] for k in ("84Sr/86Sr", "87Sr/86Sr", "88Sr/86Sr")}, 0.1, 0.3, rb, sr)
        kw = dict(parent_bias_factor=0.9, daughter_unspiked={"87Sr/86Sr": 0.74003, "88Sr/86Sr": 8.3752},
                  parent_blank_ng=0.3, daughter_blank_ng=1.0)
    return args, kw


def _with_sigmas(args, kw):
    """Every input gets σ = REL_SIGMA × value (or 1e-3 absolute for a value of 0)."""
    s = lambda v: REL_SIGMA * abs(v) or 1e-3  # noqa: E731
    kw = dict(kw)
    kw["parent_mix_sigma_1s"] = {k: s(v) for k, v in args[1].items()}
    kw["daughter_mix_sigma_1s"] = {k: s(v) for k, v in args[2].items()}
    kw.update(sample_mass_sigma_1s=s(args[3]), spike_mass_sigma_1s=s(args[4]),
              parent_blank_sigma_ng=s(kw["parent_blank_ng"]), daughter_blank_sigma_ng=s(kw["daughter_blank_ng"]))
    if "daughter_unspiked" in kw:
        kw["daughter_unspiked_sigma_1s"] = {k: s(v) for k, v in kw["daughter_unspiked"].items()}
    if "parent_bias_factor" in kw:
        kw["parent_bias_sigma_1s"] = s(kw["parent_bias_factor"])
    if kw.get("daughter_blank_ratio"):
        kw["daughter_blank_ratio_sigma_1s"] = s(kw["daughter_blank_ratio"])
    return kw


def _setters(args, kw):
    """name -> (value, σ, group, function(value) -> (args, kwargs)) for each input of the chain."""
    out = {}

    def put(name, v, sg, grp, f):
        out[name] = (v, sg, grp, f)

    for k, v in args[1].items():
        put(f"parent_mix {k}", v, kw["parent_mix_sigma_1s"][k], "random",
            lambda x, k=k: (args[:1] + ({**args[1], k: x},) + args[2:], kw))
    for k, v in args[2].items():
        put(f"daughter_mix {k}", v, kw["daughter_mix_sigma_1s"][k], "random",
            lambda x, k=k: (args[:2] + ({**args[2], k: x},) + args[3:], kw))
    for k, v in kw.get("daughter_unspiked", {}).items():
        put(f"daughter_unspiked {k}", v, kw["daughter_unspiked_sigma_1s"][k], "random",
            lambda x, k=k: (args, {**kw, "daughter_unspiked": {**kw["daughter_unspiked"], k: x}}))
    put("sample_mass_g", args[3], kw["sample_mass_sigma_1s"], "random",
        lambda x: (args[:3] + (x,) + args[4:], kw))
    put("spike_mass_g", args[4], kw["spike_mass_sigma_1s"], "random",
        lambda x: (args[:4] + (x,) + args[5:], kw))
    for b in ("parent_blank_ng", "daughter_blank_ng"):
        put(b, kw[b], kw[b.replace("_ng", "_sigma_ng")], "random", lambda x, b=b: (args, {**kw, b: x}))
    for j, name in ((5, "parent_spike_conc"), (6, "daughter_spike_conc")):
        sp = args[j]
        put(name, sp.concentration_umol_g, sp.concentration_sigma_1s, "systematic",
            lambda x, j=j, sp=sp: (args[:j] + (dataclasses.replace(sp, concentration_umol_g=x),) + args[j + 1:],
                                   kw))
    if "parent_bias_factor" in kw:
        put("parent_bias_factor", kw["parent_bias_factor"], kw["parent_bias_sigma_1s"], "random",
            lambda x: (args, {**kw, "parent_bias_factor": x}))
    if kw.get("daughter_blank_ratio"):
        put("daughter_blank_ratio", kw["daughter_blank_ratio"], kw["daughter_blank_ratio_sigma_1s"], "random",
            lambda x: (args, {**kw, "daughter_blank_ratio": x}))
    if kw.get("standard") is not None:
        st = kw["standard"]
        put("standard_factor", st.factor, st.factor_sigma_1s_random, "random",
            lambda x: (args, {**kw, "standard": dataclasses.replace(st, factor=x)}))
    return out


def _values(args, kw):
    r = reduce_spiked_analysis(*args, **kw)
    return np.array([r.parent_ratio, r.daughter_ratio, r.parent_conc_ug_g, r.daughter_conc_ug_g])


def _richardson(f, x0):
    """df/dx at x0: Richardson extrapolation of central differences with h and h/2 (h = 1e-4·|x0|)."""
    h = 1e-4 * (abs(x0) or 1.0)

    def d(h):
        return (f(x0 + h) - f(x0 - h)) / (2 * h)
    return (4 * d(h / 2) - d(h)) / 3


@pytest.mark.parametrize("system", ["sm-nd", "lu-hf", "rb-sr"])
def test_chain_covariance_equals_black_box_derivatives(system):
    args, kw = _case(system)
    kw = _with_sigmas(args, kw)
    r = reduce_spiked_analysis(*args, **kw)
    inputs = _setters(args, kw)
    cols = {g: [] for g in ("random", "systematic")}
    for name, (v, sg, grp, f) in inputs.items():
        assert name in r.input_names, name
        cols[grp].append(_richardson(lambda x, f=f: _values(*f(x)), v) * sg)
    jr = np.array(cols["random"]).T
    cov_r = jr @ jr.T
    js = np.array(cols["systematic"]).T
    rho = kw.get("spike_rho", 0.0)
    cs = np.array([[1.0, rho], [rho, 1.0]])
    cov_s = js @ cs @ js.T
    # reproducibility factors (inputs of value 1) and the accepted value enter as pure multipliers: their
    # contribution is exact by hand — σ_rel² × value² on their output
    y = _values(args, kw)
    rep_p = kw.get("parent_ratio_reproducibility_rel_1s", 0.0)
    rep_d = kw.get("daughter_ratio_reproducibility_rel_1s", 0.0)
    cov_r[0, 0] += (rep_p * y[0]) ** 2
    cov_r[1, 1] += (rep_d * y[1]) ** 2
    if kw.get("standard") is not None:
        st = kw["standard"]
        cov_s[1, 1] += (st.factor_sigma_1s_systematic / st.factor * y[1]) ** 2
    scale = np.sqrt(np.outer(np.diag(r.cov), np.diag(r.cov)))
    np.testing.assert_allclose(r.cov_random / scale, cov_r / scale, rtol=0, atol=1e-7)
    np.testing.assert_allclose(r.cov_systematic / scale, cov_s / scale, rtol=0, atol=1e-7)
    assert r.rho == pytest.approx((cov_r + cov_s)[0, 1] / np.sqrt((cov_r + cov_s)[0, 0] * (cov_r + cov_s)[1, 1]),
                                  abs=1e-7)


def test_chain_sigma_is_the_same_for_any_numbers_of_the_last_digit():
    """Exact derivatives: moving an input by one ulp moves σ by ~ulps, not by ε/h (~1e-10) as finite
    differences do — the property that makes grid (LibreOffice's numpy) and batch (any numpy) agree."""
    args, kw = _case("sm-nd")
    kw = _with_sigmas(args, kw)
    r0 = reduce_spiked_analysis(*args, **kw)
    pm = {k: float(np.nextafter(v, 2 * v)) for k, v in args[1].items()}
    r1 = reduce_spiked_analysis(args[0], pm, *args[2:], **kw)
    for a, b in ((r0.parent_ratio_sigma_1s, r1.parent_ratio_sigma_1s),
                 (r0.daughter_ratio_sigma_1s, r1.daughter_ratio_sigma_1s), (r0.rho, r1.rho)):
        assert abs(a - b) <= 1e-13 * abs(a)
