"""The template definition: every sheet, its input columns (read by the key in row 4) and its computed
columns.
"""
from __future__ import annotations

import functools
from dataclasses import dataclass, field
from typing import Any, List, Mapping, Sequence, Tuple

from .values import FIRST_ROW, KEY_ROW


# --------------------------------------------------------------------------------------------
# the definition
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Column:
    """One column of a table sheet.

    ``kind`` is ``"text"``, ``"number"``, ``"flag"`` (1 or 0) for inputs, ``"computed"`` for a column
    the template fills with a formula. A computed column names its ``quantity`` (what
    :func:`analysis_value` / :func:`isochron_value` returns) or a native ``formula`` template.
    """

    key: str
    header: str
    kind: str = "number"
    required: bool = True
    width: float = 12.0
    quantity: str = ""
    number_format: str = "General"
    help: str = ""

    @property
    def computed(self) -> bool:
        return self.kind == "computed"


@dataclass(frozen=True)
class Sheet:
    name: str
    title: str
    note: str
    columns: Tuple[Column, ...]
    capacity: int = 60
    extra: Mapping[str, Any] = field(default_factory=dict)

    def col_index(self, key: str) -> int:
        for i, c in enumerate(self.columns):
            if c.key == key:
                return i
        raise KeyError(key)

    def letter(self, key: str) -> str:
        return col_letter(self.col_index(key))

    @property
    def last_row(self) -> int:
        return FIRST_ROW + self.capacity - 1

    @functools.cached_property
    def input_width(self) -> int:
        """Columns of the table range: all of them, or only the inputs of a sheet whose computed columns
        follow its inputs (the Standards sheet), so that those formulas do not read themselves."""
        kinds = [c.computed for c in self.columns]
        if all(kinds) or not any(kinds):
            return len(self.columns)
        first = kinds.index(True)
        if any(not k for k in kinds[first:]):
            raise ValueError(f"{self.name}: computed columns must follow the input columns")
        return first

    def range_ref(self) -> Tuple[str, int, int, int, int]:
        """The table range every function receives: key row to the last data row, the input columns
        (all columns of an all-computed sheet)."""
        return (self.name, KEY_ROW, 0, self.last_row, self.input_width - 1)


def col_letter(i: int) -> str:
    s = ""
    i += 1
    while i:
        i, r = divmod(i - 1, 26)
        s = chr(65 + r) + s
    return s


def _c(key: str, header: str, kind: str = "number", **kw: Any) -> Column:
    return Column(key, header, kind, **kw)


#: Ratio slots of a Measured row (ratios of the element, and monitor ratios of interfering elements).
RATIO_SLOTS = 6
_RATIO_COLS: List[Column] = []
for _k in range(1, RATIO_SLOTS + 1):
    _RATIO_COLS += [_c(f"r{_k}_name", f"Ratio {_k}", "text", required=_k == 1, width=13),
                    _c(f"r{_k}", f"Ratio {_k} measured", required=_k == 1, width=14, number_format="0.0000000"),
                    _c(f"r{_k}_sigma_1s", f"Ratio {_k} 1σ (abs)", required=_k == 1, width=12,
                       number_format="0.00E+00")]
_ISO_COLS: List[Column] = []
for _k in range(1, 8):
    _ISO_COLS += [_c(f"iso{_k}", f"Isotope {_k}", "text", required=_k <= 2, width=9),
                  _c(f"ab{_k}", f"Atom fraction {_k}", required=_k <= 2, width=11, number_format="0.00000")]

CONSTANTS = Sheet(
    "Constants", "Reference values — the single live source every formula reads",
    "Edit a value here and every result recalculates. Uncertainties are 1σ absolute. Keys in column A are "
    "read by RatioDesk; do not change them.",
    (_c("key", "Key", "text", width=30), _c("quantity", "Quantity", "text", width=44),
     _c("value", "Value", width=16, number_format="0.000000E+00"),
     _c("sigma_1s", "1σ (abs)", width=14, number_format="0.000E+00"),
     _c("note", "How the 1σ (abs) was set / status", "text", required=False, width=60),
     _c("unit", "Unit", "text", required=False, width=10),
     _c("source", "Source", "text", required=False, width=80)),
    capacity=90)

SPIKES = Sheet(
    "Spikes", "Spike calibrations",
    "One row per element of a spike; a mixed spike has two rows with the same label. Concentration of the "
    "spike isotope in µmol per g of spike solution, 1σ absolute. Atom fractions of the spike's composition.",
    (_c("spike", "Spike", "text", width=14), _c("element", "Element", "text", width=8),
     _c("calibrated", "Calibrated on", "text", width=12), _c("spike_isotope", "Spike isotope", "text", width=10),
     _c("conc_umol_g", "Spike isotope (µmol/g)", width=14, number_format="0.000000"),
     _c("conc_sigma_1s", "1σ (abs, µmol/g)", width=14, number_format="0.00E+00"), *_ISO_COLS,
     _c("run_ratios", "A run of this element on Measured must give", "computed", quantity="run_ratios", width=44)),
    capacity=20)

#: The reference material a session normalises to when no row of the session says "primary".
DEFAULT_PRIMARY = {"143Nd/144Nd": "JNdi-1", "176Hf/177Hf": "JMC-475", "87Sr/86Sr": "NIST SRM 987"}

STANDARDS = Sheet(
    "Standards", "Reference-material runs per session: one primary, the others are checks",
    "Normalised ratios of reference materials measured in each session. Per session and ratio ONE material is "
    "primary (Role 'primary'; empty Role: " + ", ".join(f"{m} for {r}" for r, m in DEFAULT_PRIMARY.items())
    + "): factor = its accepted value (Constants) / mean of its runs, applied to every sample of the session. "
    "Every other material is a check ('check' or empty): normalised with that factor and compared with its "
    "accepted value — never part of the factor.",
    (_c("session", "Session", "text", width=13), _c("material", "Material", "text", width=11),
     _c("ratio", "Ratio", "text", width=13), _c("measured", "Measured", width=12, number_format="0.0000000"),
     _c("sigma_1s", "1σ (abs)", required=False, width=11, number_format="0.00E+00"),
     _c("date", "Date", "text", required=False, width=11), _c("run", "Run", "text", required=False, width=14),
     _c("role", "Role (primary/check)", "text", required=False, width=11),
     _c("role_used", "Role used", "computed", quantity="role", width=16),
     _c("factor", "Session factor", "computed", quantity="factor", number_format="0.0000000", width=11),
     _c("normalised", "Normalised", "computed", quantity="normalised", number_format="0.0000000", width=12),
     _c("check_mean", "Mean normalised (material, session)", "computed", quantity="mean", number_format="0.0000000",
        width=13),
     _c("accepted", "Accepted (Constants)", "computed", quantity="accepted", number_format="0.0000000", width=12),
     _c("dev_ppm", "Mean − accepted (ppm)", "computed", quantity="dev_ppm", number_format="0.0", width=10),
     _c("dev_eps", "Mean − accepted (ε)", "computed", quantity="dev_eps", number_format="0.00", width=9),
     _c("z", "z-score", "computed", quantity="z", number_format="0.00", width=8)),
    capacity=120)

FRACTION_TYPES = ("whole rock", "garnet", "garnet leachate", "leachate", "residue", "omphacite",
                  "clinopyroxene", "amphibole", "plagioclase", "apatite", "biotite", "muscovite", "K-feldspar",
                  "other")

SAMPLES = Sheet(
    "Samples", "Samples: what was weighed and spiked",
    "One row per analysis. Masses in g; blanks in ng of element (procedural blank, subtracted; natural "
    "composition from Constants unless a blank daughter ratio is typed). System: Sm-Nd, Lu-Hf or Rb-Sr. The spike "
    "label must appear on the Spikes sheet. Empty σ columns take the lab defaults of the Constants sheet "
    "(lab.*); a σ of 0 is named in Check. Isochron group: the analyses of one isochron share a name (listed on the "
    "Groups sheet); Use 0 leaves a row out of its group's fit.",
    (_c("analysis", "Analysis", "text", width=10), _c("sample", "Sample", "text", width=10),
     _c("fraction", "Fraction type", "text", width=16, help="one of: " + ", ".join(FRACTION_TYPES)),
     _c("system", "System", "text", width=8), _c("session", "Session", "text", width=13),
     _c("sample_mass_g", "Sample mass (g)", width=12, number_format="0.00000"),
     _c("spike", "Spike used", "text", width=12),
     _c("spike_mass_g", "Spike mass (g)", width=12, number_format="0.00000"),
     _c("parent_blank_ng", "Parent blank (ng)", required=False, width=12, number_format="0.000"),
     _c("daughter_blank_ng", "Daughter blank (ng)", required=False, width=12, number_format="0.000"),
     _c("sample_mass_1s_g", "Sample mass 1σ (abs, g)", required=False, width=11, number_format="0.0E+00"),
     _c("spike_mass_1s_g", "Spike mass 1σ (abs, g)", required=False, width=11, number_format="0.0E+00"),
     _c("parent_blank_1s_ng", "Parent blank 1σ (abs, ng)", required=False, width=11, number_format="0.000"),
     _c("daughter_blank_1s_ng", "Daughter blank 1σ (abs, ng)", required=False, width=11, number_format="0.000"),
     _c("daughter_blank_ratio", "Blank daughter ratio (empty: natural)", required=False, width=12,
        number_format="0.000000"),
     _c("daughter_blank_ratio_1s", "Blank daughter ratio 1σ (abs)", required=False, width=11,
        number_format="0.0E+00"),
     _c("group", "Isochron group", "text", required=False, width=14,
        help="The isochron this analysis belongs to (a name of the Groups sheet); empty: none."),
     _c("use", "Use in isochron (1/0)", "flag", required=False, width=10, number_format="0",
        help="1 or empty: a point of its group's isochron; 0: listed, left out of the fit.")),
    capacity=120)

MEASURED = Sheet(
    "Measured", "Measured ratios of the spiked mixtures (run means)",
    "One row per element run: mixture ratios to the reference isotope, interference-stripped, NOT corrected "
    "for mass bias; 1σ absolute standard error of the run mean. Elements with a normalising pair are "
    "internally normalised (146Nd/144Nd, 147Sm/152Sm, 179Hf/177Hf, 86Sr/88Sr); a two-isotope element (Lu, Rb) "
    "needs a bias factor β (exponential law) with its 1σ, e.g. from a reference-material run. Ratio names: "
    "<isotope>/<reference isotope> of the row's element (144Nd, 152Sm, 177Hf, 175Lu, 86Sr, 85Rb). Monitor ratios "
    "strip isobars (ratios 5-6 have room for them): 147Sm/144Nd and 140Ce/144Nd on Nd, 173Yb/177Hf and 175Lu/177Hf "
    "on Hf, 85Rb/86Sr on Sr, 173Yb/175Lu on Lu; 171Yb/175Lu with 173Yb/175Lu on Lu gives Lu's β from Yb doping. "
    "Ion 'oxide': the ratios are of monoxide beams (e.g. 143Nd16O/144Nd16O, written 143Nd/144Nd), every isotope of "
    "the element given; they are corrected for 17O and 18O (Constants oxygen.*) before anything else.",
    (_c("analysis", "Analysis", "text", width=10), _c("element", "Element", "text", width=8),
     _c("run_date", "Run date", "text", required=False, width=11), *_RATIO_COLS[:12],
     _c("bias_factor", "β external (exp. law)", required=False, width=12, number_format="0.0000"),
     _c("bias_factor_1s", "β 1σ (abs)", required=False, width=10, number_format="0.0000"), *_RATIO_COLS[12:],
     _c("ion", "Ion (metal / oxide)", "text", required=False, width=10,
        help="empty or metal; oxide: the ratios are of monoxide beams (e.g. NdO+), oxygen-corrected first")),
    capacity=240)

_CYCLE_COLS: List[Column] = []
for _k in range(1, RATIO_SLOTS + 1):
    _CYCLE_COLS += [_c(f"r{_k}_name", f"Ratio {_k}", "text", required=_k == 1, width=13),
                    _c(f"r{_k}", f"Ratio {_k} (this cycle)", required=_k == 1, width=14, number_format="0.0000000")]
CYCLES = Sheet(
    "Cycles", "Cycles of each run (optional): paste one row per cycle (or block)",
    "A run given here (analysis + element) is reduced from its cycles: each ratio's mean and SEM over the kept "
    "cycles (one robust pass, |x − median| > k × 1.4826 × MAD rejected, k = Constants lab.cycle_reject_k; 0 keeps "
    "every cycle) feed the chain, as the Runs sheet shows. Keep the run's Measured row for β and Ion only, or leave "
    "it out; its ratio columns must then be empty. Ratio names as on Measured (monitor ratios too). Delete a cycle "
    "row or change k and the age follows.",
    (_c("analysis", "Analysis", "text", width=10), _c("element", "Element", "text", width=8),
     _c("cycle", "Cycle", required=False, width=7, number_format="0"), *_CYCLE_COLS,
     _c("kept", "Kept / rejected", "computed", quantity="kept", width=30)),
    capacity=600)
_RUN_COLS: List[Column] = [_c("analysis", "Analysis", "computed", quantity="analysis", width=10),
                           _c("element", "Element", "computed", quantity="element", width=8),
                           _c("n_cycles", "Cycles", "computed", quantity="n_cycles", width=7, number_format="0"),
                           _c("n_kept", "Kept", "computed", quantity="n_kept", width=7, number_format="0")]
for _k in range(1, RATIO_SLOTS + 1):
    _RUN_COLS += [_c(f"r{_k}_name", f"Ratio {_k}", "computed", quantity=f"r{_k}_name", width=13),
                  _c(f"r{_k}", f"Ratio {_k} mean", "computed", quantity=f"r{_k}", width=14, number_format="0.0000000"),
                  _c(f"r{_k}_sigma_1s", f"Ratio {_k} SEM 1σ (abs)", "computed", quantity=f"r{_k}_sigma_1s", width=12,
                     number_format="0.00E+00")]
RUNS = Sheet(
    "Runs", "Runs from cycles — mean and SEM of each run on the Cycles sheet (do not type here)",
    "One row per run (analysis + element) of the Cycles sheet, in order of first appearance: the cycles given, "
    "the cycles kept, and per ratio the mean and 1σ standard error of the mean of the kept cycles. These are "
    "the run's measured ratios for the reduction.",
    tuple(_RUN_COLS), capacity=120)

def _row_columns(spec: Sequence[Tuple[str, str, str, str]], width: float) -> Tuple[Column, ...]:
    """Computed columns of a sheet with one formula row per analysis, from (key, header, quantity, format);
    quantity "" = copied from Samples (narrower)."""
    return tuple(_c(k, h, "computed", quantity=q or k, number_format=f, width=width if q else 11)
                 for k, h, q, f in spec)


# Results: (key, header, quantity, number format); quantity "" = copied from Samples
_RESULT_SPEC = (
    ("analysis", "Analysis", "", "General"), ("sample", "Sample", "", "General"),
    ("fraction", "Fraction type", "", "General"), ("system", "System", "", "General"),
    ("spike", "Spike used", "", "General"),
    ("parent_conc", "Parent (µg/g)", "parent_conc", "0.0000"),
    ("parent_conc_1s", "Parent 1σ (abs, µg/g, total)", "parent_conc_1s", "0.0000"),
    ("daughter_conc", "Daughter (µg/g)", "daughter_conc", "0.0000"),
    ("daughter_conc_1s", "Daughter 1σ (abs, µg/g, total)", "daughter_conc_1s", "0.0000"),
    ("x", "Parent/daughter ratio", "x", "0.000000"),
    ("x_1s", "P/D 1σ (abs, random)", "x_1s", "0.0E+00"),
    ("x_2s_pct", "P/D 2σ (%, random)", "x_2s_pct", "0.000"),
    ("x_1s_total", "P/D 1σ (abs, total)", "x_1s_total", "0.0E+00"),
    ("x_spike_1s_pct", "Spike P/D calibration 1σ (%)", "x_spike_1s_pct", "0.0000"),
    ("y", "Daughter ratio", "y", "0.0000000"),
    ("y_1s", "D ratio 1σ (abs, random)", "y_1s", "0.0E+00"),
    ("y_2s_ppm", "D ratio 2σ (ppm, random)", "y_2s_ppm", "0.0"),
    ("y_1s_total", "D ratio 1σ (abs, total)", "y_1s_total", "0.0E+00"),
    ("rho", "ρ (random)", "rho", "0.000"),
    ("eps0", "ε today", "eps0", "0.00"),
    ("eps0_2s", "ε today 2σ (abs)", "eps0_2s", "0.00"),
    ("blank_share", "Daughter blank share (%)", "blank_share_pct", "0.000"),
    ("check", "Check", "check", "General"),
)
RESULTS = Sheet(
    "Results", "Results — one formula row per analysis (do not type here)",
    "Parent/daughter ratio = 147Sm/144Nd, 176Lu/177Hf or 87Rb/86Sr; daughter ratio = 143Nd/144Nd, 176Hf/177Hf "
    "or 87Sr/86Sr, "
    "mass-bias, spike, blank and reference-material corrected. Random σ (measurement) feed the isochron; "
    "total σ add the spike calibration and the accepted value. ε relative to CHUR (Constants). "
    "Every uncertainty states its level (1σ/2σ) and form (abs/%/ppm).",
    _row_columns(_RESULT_SPEC, width=12),
    capacity=120)

# Steps: the chain's intermediate values of every analysis, one row per Results row (issue 12)
_STEP_SPEC = (
    ("analysis", "Analysis", "", "General"), ("system", "System", "", "General"),
    ("beta_parent", "β parent (exp. law)", "beta_parent", "0.00000"),
    ("beta_daughter", "β daughter (exp. law)", "beta_daughter", "0.00000"),
    ("mag_parent", "Error magnification, parent mix", "mag_parent", "0.000"),
    ("mag_daughter", "Error magnification, daughter mix", "mag_daughter", "0.000"),
    ("iterations", "Spike-stripping iterations (daughter)", "iterations", "0"),
    ("blank_share_parent_pct", "Parent blank share (%)", "blank_share_parent_pct", "0.0000"),
    ("blank_share_daughter_pct", "Daughter blank share (%)", "blank_share_pct", "0.0000"),
    ("std_factor", "Session factor (accepted / mean of primary)", "std_factor", "0.0000000"),
    ("std_factor_1s", "Session factor 1σ (abs, random)", "std_factor_1s", "0.0E+00"),
    ("std_runs", "Primary runs in the session", "std_runs", "0"),
    ("y_before_factor", "Daughter ratio before the session factor", "y_before_factor", "0.0000000"),
    ("strip_daughter_ppm", "Isobars stripped, daughter run (largest, ppm of a ratio)", "strip_daughter_ppm", "0.0"),
    ("strip_parent_ppm", "Isobars stripped, parent run (largest, ppm of a ratio)", "strip_parent_ppm", "0.0"),
    ("beta_parent_from", "Parent β from", "beta_parent_from", "General"),
)
STEPS = Sheet(
    "Steps", "Steps — what each stage of the chain did, one row per analysis (do not type here)",
    "Mass-bias factors β (exponential law; internal normalisation, or the typed value for Lu and Rb), the error "
    "magnification of each spike-sample mix (1 = no loss; Check warns at twice the optimum), spike-stripping "
    "iterations, blank shares (blank / total atoms of the element's reference isotope: 152Sm, 144Nd, 175Lu, "
    "177Hf, 85Rb, 86Sr), and the session factor that normalises the daughter ratio to the primary reference "
    "material. Read with the Results row of the same analysis.",
    _row_columns(_STEP_SPEC, width=13),
    capacity=120)

ANALYSIS_QUANTITIES = tuple(q for _k, _h, q, _f in _RESULT_SPEC if q)
#: Results columns copied from the Samples sheet (no engine call).
COPIED_FROM_SAMPLES = tuple(k for k, _h, q, _f in _RESULT_SPEC if not q)

ISOCHRON_SYSTEMS = ("Sm-Nd", "Lu-Hf", "Rb-Sr")
ISOCHRON = Sheet(
    "Isochron", "Isochrons — choose the rows, read the ages",
    "Type analysis IDs in column A and 1 (use) or 0 (leave out) in column B; choose the scatter treatment. "
    "Ages in Ma. The fit is the York regression (York et al. 2004); ages use the decay constants of the "
    "Constants sheet. The spike calibration scales every P/D ratio alike: it enters only the total age error. "
    "ε: εNd and εHf relative to CHUR, εSr relative to the uniform reservoir (Constants).",
    (_c("analysis", "Analysis", "text", width=10), _c("use", "Use (1/0)", "flag", width=9),
     _c("x", "P/D ratio", "computed", quantity="x", number_format="0.000000"),
     _c("x_1s", "P/D 1σ (abs, random)", "computed", quantity="x_1s", number_format="0.0E+00"),
     _c("y", "D ratio", "computed", quantity="y", number_format="0.0000000"),
     _c("y_1s", "D ratio 1σ (abs, random)", "computed", quantity="y_1s", number_format="0.0E+00"),
     _c("rho", "ρ (random)", "computed", quantity="rho", number_format="0.000")),
    capacity=16)

# Isochron summary block: rows of (quantity, label, unit/level)
ISOCHRON_QUANTITIES: Tuple[Tuple[str, str, str], ...] = (
    ("n", "Rows used", "count"),
    ("age", "Age", "Ma"),
    ("age_2s", "Age ± (2σ, slope only)", "Ma, 2σ abs"),
    ("age_2s_lambda", "Age ± (2σ, with decay constant)", "Ma, 2σ abs"),
    ("age_2s_total", "Age ± (2σ, with decay constant and spike calibration)", "Ma, 2σ abs"),
    ("x_scale_1s_pct", "Spike P/D calibration used (1σ %, scales every x)", "1σ %"),
    ("age_95", "Age ± (95 %, t·√MSWD expanded)", "Ma, 95 % abs"),
    ("initial", "Initial ratio", "mol/mol"),
    ("initial_2s", "Initial ratio ± (2σ)", "2σ abs"),
    ("eps_t", "ε at the age", "ε units"),
    ("eps_t_2s", "ε at the age ± (2σ)", "2σ abs"),
    ("mswd", "MSWD", ""),
    ("p", "p (χ²)", ""),
    ("slope", "Slope", ""),
    ("slope_1s", "Slope 1σ (abs)", "1σ abs"),
    ("mswd_low", "MSWD acceptance range, low (χ² 5 %)", "Wendt & Carl 1991"),
    ("mswd_high", "MSWD acceptance range, high (χ² 95 %)", "Wendt & Carl 1991"),
    ("message", "Check", ""),
)
ISOCHRON_BLOCK_ROWS = 3 + len(ISOCHRON_QUANTITIES)  # title, system, treatment, quantities
ISOCHRON_SUMMARY_COL = 8                            # column I (0-based 8): labels; J, K, L: the systems
ISOCHRON_TREATMENT_ROW = FIRST_ROW + 1              # row with the treatment inputs
ISOCHRON_FIRST_Q_ROW = FIRST_ROW + 3

#: Error-ellipse outlines for the isochron charts: one array formula (points + 1 rows x 2 columns) per
#: selection row, side by side from column N, drawn from the ellipse function (rdEllipse).
ELLIPSE_COL0 = 13
ELLIPSE_POINTS = 32
ELLIPSE_CONFIDENCE = 0.95


#: Isochron selection: one block of rows per system, Sm-Nd first.
ISOCHRON_BLOCK = {"Sm-Nd": (FIRST_ROW, FIRST_ROW + 7), "Lu-Hf": (FIRST_ROW + 10, FIRST_ROW + 17),
                  "Rb-Sr": (FIRST_ROW + 20, FIRST_ROW + 27)}
#: First column of the deviation-ellipse outlines (after every selection row's ellipse, two columns each).
DEVIATION_COL0 = ELLIPSE_COL0 + 2 * sum(last - first + 1 for first, last in ISOCHRON_BLOCK.values())
#: Each block has a header row and a key row right above it (rows 3-4 and 13-14).

#: Number formats of the isochron quantities (Isochron summary cells, Groups columns).
ISOCHRON_FORMATS = {"age": "0.00", "age_2s": "0.00", "age_2s_lambda": "0.00", "age_2s_total": "0.00",
                    "x_scale_1s_pct": "0.0000", "age_95": "0.00", "initial": "0.0000000", "initial_2s": "0.0E+00",
                    "eps_t": "0.00", "eps_t_2s": "0.00", "mswd": "0.00", "p": "0.000", "slope": "0.0000000",
                    "slope_1s": "0.0E+00", "n": "0", "mswd_low": "0.00", "mswd_high": "0.00"}

GROUPS = Sheet(
    "Groups", "Isochron groups — one isochron per group of Samples rows",
    "Type each group's name as the Samples sheet's Isochron group column spells it (any case), and its scatter "
    "treatment (empty: analytical). Every Samples row of the group with Use in isochron 1 or empty is a point; 0 "
    "leaves it out. One system per group; several groups per system. Below: the points of the group named in the "
    "chart cell (empty: the first group) and its charts. Ages in Ma; the York regression (York et al. 2004) and "
    "the Constants sheet's decay constants, as on the Isochron sheet.",
    (_c("group", "Isochron group", "text", width=16),
     _c("treatment", "Scatter treatment", "text", required=False, width=14,
        help="analytical (or empty), expanded, equal-weights or excess-variance"),
     _c("system", "System", "computed", quantity="system", width=8),
     *(_c(q, f"{label} ({unit})" if unit and unit != "count" else label, "computed", quantity=q, width=12,
          number_format=ISOCHRON_FORMATS.get(q, "General")) for q, label, unit in ISOCHRON_QUANTITIES)),
    capacity=12)
#: The Groups sheet's chart area: the cell naming the group drawn (column B), its points and outlines below.
GROUP_CHART_ROW = GROUPS.last_row + 4
GROUP_UNLISTED_CELL = ("Groups", GROUPS.last_row + 2, 0)
GROUP_POINT_COLUMNS = (("analysis", "Analysis"), ("use", "Use (1/0)"), ("x", "P/D ratio"),
                       ("x_1s", "P/D 1σ (abs, random)"), ("y", "D ratio"), ("y_1s", "D ratio 1σ (abs, random)"),
                       ("rho", "ρ (random)"))
GROUP_POINTS_TOP = GROUP_CHART_ROW + 4        # header and key rows above it
#: Points a group can have in the list and the charts (every Samples row of the template).
GROUP_POINTS_CAP = SAMPLES.capacity
GROUP_OUTLINE_ROWS = GROUP_POINTS_CAP * (ELLIPSE_POINTS + 2)
GROUP_ELLIPSE_COL = len(GROUP_POINT_COLUMNS) + 1
GROUP_DEVIATION_COL = GROUP_ELLIPSE_COL + 2

SHEETS: Tuple[Sheet, ...] = (CONSTANTS, SPIKES, STANDARDS, SAMPLES, MEASURED, CYCLES, RUNS, RESULTS, STEPS,
                             ISOCHRON, GROUPS)
#: The computed sheets with one formula row per Samples row.
ROW_SHEETS: Tuple[Sheet, ...] = (RESULTS, STEPS)
SHEET_BY_NAME = {s.name: s for s in SHEETS}
INPUT_TABLES = ("Spikes", "Standards", "Samples", "Measured", "Cycles", "Groups")


# --------------------------------------------------------------------------------------------
# drop-down lists (data validity) of the input cells
# --------------------------------------------------------------------------------------------
#: Elements a run or a spike row can name.
ELEMENTS = ("Sm", "Nd", "Lu", "Hf", "Rb", "Sr")
