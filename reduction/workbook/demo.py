"""The demo scenario: an invented garnet study, forward-modelled from chosen true ages.

Everything here is invented: the terrane, the samples, the laboratory, the spikes and the session
offsets. Nothing is a real sample or a real dataset. The numbers are made the way an instrument
would make them: a sample of known composition is weighed, spiked and contaminated by a blank; the
mixture's isotope ratios are fractionated by the exponential mass-bias law (Russell,
Papanastassiou & Tombrello 1978, Geochim. Cosmochim. Acta 42, 1075-1090), offset by a session
bias that the reference-material runs reveal, and perturbed by seeded Gaussian noise of the stated
1σ. Reducing these numbers with the engine must give back the chosen ages within their
uncertainties (``tests/engine/test_demo.py``).

Scenario
--------
The *Harrowmere eclogite belt* of the fictional *Quillon terrane*: an eclogite (sample HM-07) and a
garnet amphibolite (HM-12), analysed by the invented *Lantern Hill Isotope Laboratory*. True ages:
Sm-Nd garnet growth 412.0 Ma, Lu-Hf 418.0 Ma (Lu-Hf records earlier, prograde growth, as is common
practice to expect from Lu's strong partitioning into garnet cores), and a Rb-Sr mica - feldspar -
whole-rock cooling age of 384.0 Ma for a pegmatite vein (HM-21) that cuts the belt.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Dict, List, Mapping, Tuple

import numpy as np

from ..composition import natural_composition
from ..constants import isotope_mass, reference_material, reference_set
from ..dilution import Spike, element_isotopes, forward_mixture, make_spike, sample_composition
from ..systems import get_system

__all__ = ["DEMO_SEED", "FRACTIONS", "LAB_SIGMAS", "SCENARIO", "TRUE_AGES_MA", "DemoFraction", "demo_constants",
           "demo_spikes", "demo_tables", "true_values"]

#: The demo's noise seed. Any seed gives a valid demo (tests/engine/test_demo.py checks over several seeds that
#: the ages scatter as their errors say); this one puts every system's age and initial ratio within 2σ of the
#: truth, so the first thing a newcomer sees is a recovery rather than a 1-in-20 miss.
DEMO_SEED = 16
TRUE_AGES_MA: Dict[str, float] = {"sm-nd": 412.0, "lu-hf": 418.0, "rb-sr": 384.0}
TRUE_INITIAL: Dict[str, float] = {"sm-nd": 0.511850, "lu-hf": 0.282410, "rb-sr": 0.706150}

SCENARIO = {
    "terrane": "Quillon terrane (fictional)",
    "unit": "Harrowmere eclogite belt (fictional)",
    "lab": "Lantern Hill Isotope Laboratory (fictional)",
    "analyst": "demo analyst",
    "note": "Invented demonstration data, forward-modelled from chosen true ages "
            "(Sm-Nd 412.0 Ma, Lu-Hf 418.0 Ma, Rb-Sr 384.0 Ma). Not real samples or measurements.",
}

# Invented spikes: (label, element, calibrated, spike isotope, µmol/g of spike isotope, 1σ, abundances)
SPIKES = (
    ("LH-SmNd-3", "Sm", "2025-11-03", "149Sm", 0.0150, 0.0150 * 0.0008,
     {"144Sm": 0.0004, "147Sm": 0.0062, "148Sm": 0.0071, "149Sm": 0.9711, "150Sm": 0.0086,
      "152Sm": 0.0047, "154Sm": 0.0019}),
    ("LH-SmNd-3", "Nd", "2025-11-03", "150Nd", 0.0250, 0.0250 * 0.0008,
     {"142Nd": 0.0059, "143Nd": 0.0031, "144Nd": 0.0066, "145Nd": 0.0028, "146Nd": 0.0061,
      "148Nd": 0.0085, "150Nd": 0.9670}),
    ("LH-LuHf-2", "Lu", "2025-09-18", "176Lu", 0.00060, 0.00060 * 0.0010,
     {"175Lu": 0.2410, "176Lu": 0.7590}),
    ("LH-LuHf-2", "Hf", "2025-09-18", "180Hf", 0.0040, 0.0040 * 0.0010,
     {"174Hf": 0.0002, "176Hf": 0.0016, "177Hf": 0.0061, "178Hf": 0.0108, "179Hf": 0.0093,
      "180Hf": 0.9720}),
    ("LH-RbSr-1", "Rb", "2026-01-20", "87Rb", 1.00, 1.00 * 0.0010, {"85Rb": 0.0200, "87Rb": 0.9800}),
    ("LH-RbSr-1", "Sr", "2026-01-20", "84Sr", 0.050, 0.050 * 0.0008,
     {"84Sr": 0.8200, "86Sr": 0.0500, "87Sr": 0.0200, "88Sr": 0.1100}),
)


@dataclass(frozen=True)
class DemoFraction:
    """One invented analysis: its true composition and how it was weighed."""

    analysis: str
    sample: str
    fraction: str
    system: str
    session: str
    x_true: float          # true parent/daughter ratio (147Sm/144Nd, 176Lu/177Hf or 87Rb/86Sr)
    daughter_ug_g: float   # Nd, Hf or Sr concentration, µg/g
    sample_mass_g: float
    spike_mass_g: float
    parent_blank_ng: float
    daughter_blank_ng: float


FRACTIONS = (
    DemoFraction("SN-01", "HM-07", "whole rock", "sm-nd", "N-2026-03A", 0.1385, 14.2, 0.0512, 0.2050, 0.004, 0.020),
    DemoFraction("SN-02", "HM-07", "garnet", "sm-nd", "N-2026-03A", 0.9210, 0.92, 0.2104, 0.0860, 0.004, 0.020),
    DemoFraction("SN-03", "HM-07", "garnet", "sm-nd", "N-2026-03A", 1.2730, 0.71, 0.2356, 0.0950, 0.004, 0.020),
    DemoFraction("SN-04", "HM-07", "garnet leachate", "sm-nd", "N-2026-03B", 0.4120, 2.35, 0.0820, 0.0900, 0.004,
                 0.020),
    DemoFraction("SN-05", "HM-07", "garnet", "sm-nd", "N-2026-03B", 1.6480, 0.55, 0.2618, 0.1120, 0.004, 0.020),
    DemoFraction("SN-06", "HM-12", "omphacite", "sm-nd", "N-2026-03B", 0.2210, 6.80, 0.0755, 0.2300, 0.004, 0.020),
    DemoFraction("LH-01", "HM-07", "whole rock", "lu-hf", "H-2026-04A", 0.0125, 2.10, 0.1020, 0.1150, 0.003, 0.030),
    DemoFraction("LH-02", "HM-07", "garnet", "lu-hf", "H-2026-04A", 0.7850, 0.24, 0.2210, 0.1240, 0.003, 0.030),
    DemoFraction("LH-03", "HM-07", "garnet", "lu-hf", "H-2026-04A", 1.1420, 0.19, 0.2405, 0.1330, 0.003, 0.030),
    DemoFraction("LH-04", "HM-07", "garnet leachate", "lu-hf", "H-2026-04B", 0.3160, 0.52, 0.1210, 0.0990, 0.003,
                 0.030),
    DemoFraction("LH-05", "HM-07", "garnet", "lu-hf", "H-2026-04B", 1.5230, 0.16, 0.2650, 0.1450, 0.003, 0.030),
    # Rb-Sr: spike masses put each 84Sr/86Sr and 87Rb/85Rb mix within a factor ~4 of its optimum
    DemoFraction("RS-01", "HM-21", "whole rock", "rb-sr", "S-2026-05A", 1.850, 210.0, 0.0500, 0.2400, 0.005, 0.050),
    DemoFraction("RS-02", "HM-21", "plagioclase", "rb-sr", "S-2026-05A", 0.0620, 540.0, 0.0300, 0.1500, 0.005,
                 0.050),
    DemoFraction("RS-03", "HM-21", "K-feldspar", "rb-sr", "S-2026-05A", 4.200, 160.0, 0.0400, 0.1450, 0.005, 0.050),
    DemoFraction("RS-04", "HM-21", "muscovite", "rb-sr", "S-2026-05A", 28.50, 22.0, 0.0300, 0.0220, 0.005, 0.050),
    DemoFraction("RS-05", "HM-21", "biotite", "rb-sr", "S-2026-05A", 96.00, 6.5, 0.0250, 0.0200, 0.005, 0.050),
)

#: Isochron groups of the demo's Samples rows, by (sample, system): one rock per isochron (HM-12's single
#: omphacite stays out of the groups; the Isochron sheet's by-ID pick keeps it with HM-07).
DEMO_GROUP = {("HM-07", "sm-nd"): "HM-07 Sm-Nd", ("HM-07", "lu-hf"): "HM-07 Lu-Hf", ("HM-21", "rb-sr"): "HM-21 Rb-Sr"}

# Session offsets of the normalised radiogenic ratio (relative), seen in the reference-material runs.
SESSION_OFFSET = {"N-2026-03A": +18e-6, "N-2026-03B": -9e-6, "H-2026-04A": +25e-6, "H-2026-04B": +12e-6,
                  "S-2026-05A": +14e-6}
SESSION_MATERIAL = {"N-2026-03A": ("JNdi-1", "143Nd/144Nd"), "N-2026-03B": ("JNdi-1", "143Nd/144Nd"),
                    "H-2026-04A": ("JMC-475", "176Hf/177Hf"), "H-2026-04B": ("JMC-475", "176Hf/177Hf"),
                    "S-2026-05A": ("NIST SRM 987", "87Sr/86Sr")}
SESSION_DATE = {"N-2026-03A": "2026-03-10", "N-2026-03B": "2026-03-12", "H-2026-04A": "2026-04-02",
                "H-2026-04B": "2026-04-03", "S-2026-05A": "2026-05-06"}
STANDARD_RUNS_PER_SESSION = 6
#: Secondary (check) reference materials run beside the primary: (session, material, ratio, runs).
CHECK_RUNS = (("N-2026-03A", "BCR-2", "143Nd/144Nd", 2), ("N-2026-03B", "BCR-2", "143Nd/144Nd", 2),
              ("H-2026-04B", "BCR-2", "176Hf/177Hf", 1), ("S-2026-05A", "BCR-2", "87Sr/86Sr", 2))
#: The invented laboratory's uncertainty defaults (Constants lab.* rows), and the matching scatter the
#: forward model gives the true weights, blanks and parent/daughter ratios (so the stated σ are honest).
LAB_SIGMAS = {"lab.weighing_1s_g": 2e-5, "lab.blank_1s_pct": 30.0, "lab.pd_reproducibility_1s_pct": 0.1}
#: 1σ of the external β typed for the two-isotope elements Lu and Rb (its typed value scatters by this about
#: the true β).
LU_BETA_1S = 0.01
STANDARD_SD_REL = {"143Nd/144Nd": 9e-6, "176Hf/177Hf": 14e-6, "87Sr/86Sr": 10e-6}

# Measured ratios per element run: (ratio, relative 1σ of the run mean). Ratios are to the reference isotope.
RUN_RATIOS: Dict[str, Tuple[Tuple[str, float], ...]] = {
    "Nd": (("143Nd/144Nd", 4e-6), ("146Nd/144Nd", 5e-6), ("150Nd/144Nd", 15e-6)),
    "Sm": (("147Sm/152Sm", 20e-6), ("149Sm/152Sm", 25e-6)),
    "Lu": (("176Lu/175Lu", 60e-6),),
    "Hf": (("176Hf/177Hf", 6e-6), ("179Hf/177Hf", 6e-6), ("180Hf/177Hf", 15e-6)),
    "Rb": (("87Rb/85Rb", 80e-6),),
    "Sr": (("84Sr/86Sr", 12e-6), ("87Sr/86Sr", 5e-6), ("88Sr/86Sr", 5e-6)),
}
# exponential-law β of the invented instrument
BIAS_FACTOR = {"Nd": -1.92, "Sm": -1.88, "Lu": -1.75, "Hf": -1.80, "Rb": -1.45, "Sr": -1.60}
SYSTEM_ELEMENTS = {"sm-nd": ("Sm", "Nd"), "lu-hf": ("Lu", "Hf"), "rb-sr": ("Rb", "Sr")}
SYSTEM_TEXT = {"sm-nd": "Sm-Nd", "lu-hf": "Lu-Hf", "rb-sr": "Rb-Sr"}
SPIKE_OF_SYSTEM = {"sm-nd": "LH-SmNd-3", "lu-hf": "LH-LuHf-2", "rb-sr": "LH-RbSr-1"}
REFERENCE_ISOTOPE = {"Nd": "144Nd", "Sm": "152Sm", "Hf": "177Hf", "Lu": "175Lu", "Sr": "86Sr", "Rb": "85Rb"}
BLANK_DAUGHTER_RATIO: Dict[str, float] = {}  # blanks of natural composition (the template's default)
#: Runs the demo gives as cycles (Cycles sheet) instead of run means: (analysis, element) -> cycles, with one
#: gross outlier cycle each (the robust rule rejects it); their cycles come from a separate seeded stream, so
#: every other number of the demo is as without them.
CYCLE_RUNS: Dict[Tuple[str, str], int] = {("SN-05", "Nd"): 40, ("RS-04", "Sr"): 30}
CYCLE_OUTLIER_SD = 25.0


def _sample_ratios(element: str, reference: str, ratios: Mapping[str, float]) -> Dict[str, float]:
    """A sample's ratios to ``reference``: the natural composition of the workbook's convention
    (:func:`reduction.composition.natural_composition`: CIAAW fractionated by the exponential law to
    the element's normalising ratio) with the radiogenic ``ratios`` laid over them."""
    out = natural_composition(element).ratios_to(reference)
    out.pop(f"{reference}/{reference}", None)
    out.update(ratios)
    return out


def _composition(element: str, reference: str, ratios: Mapping[str, float]) -> Dict[str, float]:
    """Atom fractions of a sample element (see :func:`_sample_ratios`)."""
    comp = sample_composition(element, reference, _sample_ratios(element, reference, ratios))
    total = sum(float(comp[f"{iso}/{reference}"]) for iso in element_isotopes(element))
    return {iso: float(comp[f"{iso}/{reference}"]) / total for iso in element_isotopes(element)}


def _molar_mass(fractions: Mapping[str, float]) -> float:
    return sum(isotope_mass(i).value * f for i, f in fractions.items())


def demo_spikes() -> Dict[Tuple[str, str], Spike]:
    """The invented laboratory's spikes, keyed by (label, element)."""
    return {(lab, el): make_spike(el, tuple(ab), tuple(ab.values()), iso, conc, s, label=lab, calibrated=date)
            for lab, el, date, iso, conc, s, ab in SPIKES}


def _lambda(system: str) -> float:
    return reference_set().decay_constant(get_system(system).decay_key).value


def true_values(fr: DemoFraction) -> Dict[str, float]:
    """True ratios and concentrations (µg/g) of a demo fraction, before any blank or spike."""
    system = get_system(fr.system)
    y = TRUE_INITIAL[fr.system] + fr.x_true * math.expm1(_lambda(fr.system) * TRUE_AGES_MA[fr.system] * 1e6)
    d_comp = _composition(system.daughter_element, system.reference, {system.daughter_ratio: y})
    d_umol_g = fr.daughter_ug_g / _molar_mass(d_comp)
    p_ref = REFERENCE_ISOTOPE[system.parent_element]
    p_comp = _composition(system.parent_element, p_ref, {})
    p_umol_g = fr.x_true * d_umol_g * d_comp[system.reference] / p_comp[system.parent]
    return {"x": fr.x_true, "y": y, "daughter_ug_g": fr.daughter_ug_g, "daughter_umol_g": d_umol_g,
            "parent_umol_g": p_umol_g, "parent_ug_g": p_umol_g * _molar_mass(p_comp)}


def _measured_mixtures(fr: DemoFraction, betas: Mapping[str, float], z: Mapping[str, float] | None = None
                       ) -> Dict[str, Dict[str, float]]:
    """Fractionated mixture ratios of both element runs (before the session offset and noise).

    ``z`` holds standard-normal draws that move the true sample and spike masses, blanks and parent
    amount away from the typed values by the laboratory's stated 1σ (:data:`LAB_SIGMAS`); without it
    the typed values are the truth.
    """
    z = z or {}
    system = get_system(fr.system)
    tv = true_values(fr)
    spikes = demo_spikes()
    label = SPIKE_OF_SYSTEM[fr.system]
    w = LAB_SIGMAS["lab.weighing_1s_g"]
    blank_rel = LAB_SIGMAS["lab.blank_1s_pct"] / 100
    ws = fr.sample_mass_g + w * z.get("ws", 0.0)
    wt = fr.spike_mass_g + w * z.get("wt", 0.0)
    p_scale = 1 + LAB_SIGMAS["lab.pd_reproducibility_1s_pct"] / 100 * z.get("pd", 0.0)
    out = {}
    for el, conc, ratios, blank_ng in (
            (system.parent_element, tv["parent_umol_g"] * p_scale, {}, fr.parent_blank_ng * (1 + blank_rel * z.get(
                "pb", 0.0))),
            (system.daughter_element, tv["daughter_umol_g"], {system.daughter_ratio: tv["y"]},
             fr.daughter_blank_ng * (1 + blank_rel * z.get("db", 0.0)))):
        ref = REFERENCE_ISOTOPE[el]
        blank_ratios = {system.daughter_ratio: BLANK_DAUGHTER_RATIO[el]} if el in BLANK_DAUGHTER_RATIO else {}
        blank_umol = max(blank_ng, 0.0) * 1e-3 / _molar_mass(_composition(el, ref, blank_ratios))
        out[el] = forward_mixture(el, ref, conc, ws, spikes[(label, el)], wt,
                                  sample_ratios=_sample_ratios(el, ref, ratios) or None, bias_factor=betas[el],
                                  blank_umol=blank_umol, blank_ratios=blank_ratios or None)
    return out


def demo_tables(seed: int = DEMO_SEED) -> Dict[str, List[Dict[str, object]]]:
    """Rows of every input sheet of the demo workbook, keyed by the template's column keys.

    Returns a mapping ``sheet name -> list of row dicts`` for the Spikes, Standards, Samples,
    Measured and Isochron selection tables (Constants come from the default reference set).
    """
    rng = np.random.default_rng(seed)
    spikes = []
    for lab, el, date, iso, conc, s, ab in SPIKES:
        row: Dict[str, object] = {"spike": lab, "element": el, "calibrated": date, "spike_isotope": iso,
                                  "conc_umol_g": conc, "conc_sigma_1s": s}
        for k, (i, a) in enumerate(ab.items(), start=1):
            row[f"iso{k}"] = i
            row[f"ab{k}"] = a
        spikes.append(row)

    standards = []
    for session, (material, ratio) in SESSION_MATERIAL.items():
        runs = [(material, STANDARD_RUNS_PER_SESSION)] + [(m, n) for s_, m, r_, n in CHECK_RUNS
                                                           if s_ == session and r_ == ratio]
        for mat, n_runs in runs:
            accepted = reference_material(mat, ratio).value
            sd = STANDARD_SD_REL[ratio]
            for k in range(n_runs):
                v = accepted * (1 + SESSION_OFFSET[session]) * (1 + sd * rng.standard_normal())
                standards.append({"session": session, "material": mat, "ratio": ratio,
                                  "measured": float(f"{v:.7f}"), "sigma_1s": float(f"{accepted * 4e-6:.7f}"),
                                  "date": SESSION_DATE[session], "run": f"{mat} #{k + 1}",
                                  "role": "" if mat == material else "check"})

    samples, measured = [], []
    for fr in FRACTIONS:
        label = SPIKE_OF_SYSTEM[fr.system]
        samples.append({"analysis": fr.analysis, "sample": fr.sample, "fraction": fr.fraction,
                        "system": SYSTEM_TEXT[fr.system], "session": fr.session,
                        "sample_mass_g": fr.sample_mass_g, "spike": label, "spike_mass_g": fr.spike_mass_g,
                        "parent_blank_ng": fr.parent_blank_ng, "daughter_blank_ng": fr.daughter_blank_ng,
                        "group": DEMO_GROUP.get((fr.sample, fr.system), "")})
        system = get_system(fr.system)
        betas = {el: BIAS_FACTOR[el] + 0.02 * rng.standard_normal() for el in SYSTEM_ELEMENTS[fr.system]}
        z = {k: float(rng.standard_normal()) for k in ("ws", "wt", "pb", "db", "pd")}
        mix = _measured_mixtures(fr, betas, z)
        for el in SYSTEM_ELEMENTS[fr.system]:
            row = {"analysis": fr.analysis, "element": el, "run_date": SESSION_DATE[fr.session]}
            beta = betas[el]
            for k, (ratio, rel) in enumerate(RUN_RATIOS[el], start=1):
                r = float(mix[el][ratio])
                if ratio == system.daughter_ratio:
                    # the session bias the reference material reveals, and the run-to-run scatter
                    # (external reproducibility) that the standards' SD measures
                    r *= (1 + SESSION_OFFSET[fr.session]) * (1 + STANDARD_SD_REL[ratio] * rng.standard_normal())
                r_meas = r * (1 + rel * rng.standard_normal())
                row[f"r{k}_name"] = ratio
                row[f"r{k}"] = float(f"{r_meas:.9g}")
                row[f"r{k}_sigma_1s"] = float(f"{r_meas * rel:.3g}")
            if len(RUN_RATIOS[el]) == 1:   # two-isotope element (Lu, Rb): external bias factor (common practice)
                row["bias_factor"] = round(beta + LU_BETA_1S * rng.standard_normal(), 6)
                row["bias_factor_1s"] = LU_BETA_1S
            measured.append(row)
    cycles = _cycle_rows(measured, seed)
    groups = [{"group": g, "treatment": "analytical"} for g in dict.fromkeys(DEMO_GROUP.values())]
    return {"Spikes": spikes, "Standards": standards, "Samples": samples, "Measured": measured, "Cycles": cycles,
            "Groups": groups}


def _cycle_rows(measured: List[Dict[str, object]], seed: int) -> List[Dict[str, object]]:
    """Cycles of the runs in :data:`CYCLE_RUNS`: n cycles scattered by √n × the run's relative σ about the
    forward-modelled run value (so the mean of the cycles has the stated σ), one outlier cycle; the run's
    Measured row keeps only its analysis, element and date (its ratios now come from the cycles)."""
    rng = np.random.default_rng(seed + 1000)
    rows: List[Dict[str, object]] = []
    for row in measured:
        key = (str(row["analysis"]), str(row["element"]))
        if key not in CYCLE_RUNS:
            continue
        n = CYCLE_RUNS[key]
        names = [(k, str(row[f"r{k}_name"]), float(row[f"r{k}"]), float(row[f"r{k}_sigma_1s"]))
                 for k in range(1, 7) if row.get(f"r{k}_name")]
        bad = int(rng.integers(n))
        for c in range(n):
            line: Dict[str, object] = {"analysis": key[0], "element": key[1], "cycle": c + 1}
            for k, name, value, sigma in names:
                sd = sigma * math.sqrt(n)
                v = value + sd * (CYCLE_OUTLIER_SD if c == bad and k == 1 else rng.standard_normal())
                line[f"r{k}_name"], line[f"r{k}"] = name, float(f"{v:.9g}")
            rows.append(line)
        for k, _name, _v, _s in names:
            for col in (f"r{k}_name", f"r{k}", f"r{k}_sigma_1s"):
                row.pop(col, None)
    return rows


def demo_selection() -> Dict[str, List[Tuple[str, int]]]:
    """Rows chosen for each isochron of the demo workbook (all of them)."""
    out: Dict[str, List[Tuple[str, int]]] = {t: [] for t in SYSTEM_TEXT.values()}
    for fr in FRACTIONS:
        out[SYSTEM_TEXT[fr.system]].append((fr.analysis, 1))
    return out


def demo_constants() -> List[Dict[str, Any]]:
    """The Constants rows of the demo: the default reference set with the invented lab's σ defaults."""
    from .provenance import constants_rows

    rows = constants_rows()
    for row in rows:
        if row["key"] in LAB_SIGMAS:
            row["value"] = LAB_SIGMAS[row["key"]]
            row["source"] = f"{SCENARIO['lab']}: invented demo value"
    return rows


def demo_layout(seed: int = DEMO_SEED) -> Any:
    """The demo workbook's cells (inputs filled, computed cells carrying engine values)."""
    from .evaluate import evaluate
    from .layout import ABOUT_LINES, build_layout, fill_values, layout_grid

    about = (("RatioDesk demo workbook — invented data", "title"),
             (SCENARIO["note"], "note"), ("", "plain"),
             (f"Terrane: {SCENARIO['terrane']}; unit: {SCENARIO['unit']}; laboratory: {SCENARIO['lab']}.",
              "plain")) + ABOUT_LINES[3:]
    lay = build_layout(demo_tables(seed), constants=demo_constants(), isochron_selection=demo_selection(),
                       about=about)
    fill_values(lay, evaluate(layout_grid(lay), strict=False))
    return lay
