"""The RatioDesk workbook: one template definition, two evaluators.

The template is defined here once — its sheets, their input columns, and every computed column as
(engine function, the inputs it reads, the formula written into the grid). Two things use that
definition:

* the build (``templates/build_template.py``) writes it into ``.xlsx`` and ``.ods`` workbooks whose
  computed cells are Calc add-in formulas (the ``rd*`` functions of ``macros/functions.py``);
* the batch path (``ratiodesk reduce``) reads the same workbook with :func:`read_workbook` and
  evaluates the same definition with :func:`evaluate`, calling the very functions the add-in calls
  (:func:`analysis_value`, :func:`isochron_value`) on the same cell values. The grid and the batch
  path therefore cannot drift apart; a workbook whose formulas were edited is reported by
  :func:`formula_drift`.

Tables are read by the machine-readable column keys in row :data:`KEY_ROW` (small grey text under
the headers), not by position, so a user may insert a column without breaking anything. Every
problem is reported as a :class:`CellError` naming the sheet, row and column.

Sheets (names of our own): ``Constants`` (the live reference values), ``Spikes``, ``Standards``
(reference-material runs per session), ``Samples``, ``Measured`` (raw mixture ratios per element
run), ``Results`` (one formula row per analysis), ``Isochron`` (selection, fit, age, chart data).
"""
from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass, field
from functools import lru_cache
from types import MappingProxyType
from typing import Any, Callable, Dict, List, Mapping, Optional, Sequence, Tuple

from .errors import InputError, RatioDeskError

__all__ = [
    "ANALYSIS_QUANTITIES",
    "MAX_DATA_ROWS",
    "BookTables",
    "CellError",
    "Column",
    "FormulaCell",
    "ISOCHRON_QUANTITIES",
    "LogicalCell",
    "SHEETS",
    "Sheet",
    "WorkbookFileError",
    "analysis_value",
    "constants_rows",
    "evaluate",
    "isochron_value",
    "provenance_constant_rows",
    "provenance_note",
    "read_workbook",
    "shown",
    "status_text",
    "table_extent",
]

TITLE_ROW, NOTE_ROW, HEADER_ROW, KEY_ROW, FIRST_ROW = 1, 2, 3, 4, 5
SERVICE = "ORG.RATIODESK.CALCFUNCTIONS"   # internal add-in name stored in files (macros/functions.py)
MARKER = "\u26a0 "                         # leading marker of a cell message (macros/functions.py)

Cell = Any           # float | str ('' = empty)
Rows = Tuple[Tuple[Cell, ...], ...]


class CellError(InputError):
    """A problem at one cell of the workbook: sheet, 1-based row, column letter and header."""

    def __init__(self, sheet: str, row: Optional[int], column: Optional[str], header: str, problem: str) -> None:
        self.sheet, self.cell_row, self.column, self.header = sheet, row, column, header
        where = sheet
        if row is not None:
            where += f", row {row}"
        if column:
            where += f", column {column}" + (f" ({header})" if header else "")
        super().__init__(where, problem)
        self.args = (f"{where}: {problem}",)

    def __str__(self) -> str:
        return self.args[0]


class FollowOnError(CellError):
    """A cell that only repeats another cell's problem (already listed): shown in the cell, not listed again."""


class WorkbookFileError(InputError):
    """A file that cannot be read as a RatioDesk workbook (corrupt, encrypted, another format)."""

    def __init__(self, path: str, problem: str) -> None:
        super().__init__("workbook", problem)
        self.path = path
        self.args = (f"{path}: {problem}",)

    def __str__(self) -> str:
        return self.args[0]


#: Characters of a typed text that a message quotes; longer text is cut there (with its length stated).
SHOWN_CHARS = 40


def shown(v: Any) -> str:
    """A typed value as a message quotes it: ``repr`` of the text, cut to :data:`SHOWN_CHARS` characters.

    A 10 000-character ID is shown as its first 40 characters, ``…`` and its length, so a message
    stays one readable line; control characters appear escaped (``'\\t=1'``).
    """
    s = f"{v:g}" if isinstance(v, float) else str(v)
    if len(s) > SHOWN_CHARS:
        return repr(s[:SHOWN_CHARS]) + f"… ({len(s)} characters)"
    return repr(s)


class SpecialCell(str):
    """A cell value that is neither a number nor typed text: a logical value or a formula.

    It is a ``str`` (code unaware of it treats it as text, never as a number) that compares equal
    only to a special cell of the same kind and text, so a cached result never mixes it up with
    typed text (or TRUE with 1).
    """

    def __eq__(self, other: object) -> bool:
        return type(other) is type(self) and str.__eq__(self, other)

    def __ne__(self, other: object) -> bool:
        return not self.__eq__(other)

    def __hash__(self) -> int:
        return hash((type(self).__name__, str.__str__(self)))

    def problem(self) -> str:
        """Why the cell is not a number (or a text the batch path can read)."""
        raise NotImplementedError


class LogicalCell(SpecialCell):
    """A logical cell (TRUE or FALSE): .xlsx ``t="b"``, .ods ``office:value-type="boolean"``."""

    def problem(self) -> str:
        return f"is {str.__str__(self)} (a logical value), not a number: type the number"


class FormulaCell(SpecialCell):
    """A formula typed into a cell the batch path reads as input (its text, e.g. ``=B5*2``).

    ``cached`` is the value the file stores for it (what the spreadsheet showed when it was saved),
    ``None`` when the file stores none. A formula that showed nothing (``""``) leaves its row empty,
    as it looks in the spreadsheet; any other formula in an input cell is reported, never read as
    empty or as its possibly stale cached value.
    """

    cached: Any = None

    def problem(self) -> str:
        return (f"holds a formula ({shown(str.__str__(self))}), which ratiodesk reduce does not evaluate: "
                "type the value (or paste the cell as a value)")


def logical(v: bool) -> LogicalCell:
    """The cell value of a logical cell."""
    return LogicalCell("TRUE" if v else "FALSE")


def formula_cell(text: str, cached: Any = None) -> FormulaCell:
    """The cell value of a formula cell (its text and the value the file caches for it, if any)."""
    f = FormulaCell(text)
    f.cached = cached
    return f


def blank(v: Any) -> bool:
    """Whether a cell shows nothing: empty, or a formula whose stored value is empty."""
    return (isinstance(v, str) and v == "") or (type(v) is FormulaCell and v.cached == "")


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

    @property
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
# Constants sheet contents
# --------------------------------------------------------------------------------------------
_STATUS_WORDS = {"M": "recalled from memory, not checked against the original",
                 "S": "checked against the source", "C": "computed from published data"}


def status_text(status: str) -> str:
    """A reference value's status code spelt out (``"M"`` → recalled from memory, ...).

    Codes are those of ``reduction/data/*.json`` (see :class:`reduction.constants.RefValue`):
    ``M`` recalled from memory, ``S`` checked against the source, ``C`` computed from published
    data; a compound status such as ``"value S, uncertainty M"`` is spelt out word by word.
    """
    st = status.strip()
    if not st:
        return ""
    if st == "override":
        return "lab override"
    if st in _STATUS_WORDS:
        return _STATUS_WORDS[st]
    return re.sub(r"\b([MSC])\b", lambda m: _STATUS_WORDS[m.group(1)].split(",")[0], st)


def provenance_note(v: Any) -> str:
    """'How the 1σ (abs) was set / status' of a :class:`reduction.constants.RefValue`: its level note and its status."""
    note = re.sub(r"\blevel M\b", "level recalled from memory", v.note.strip())
    st = status_text(v.status)
    if note and st:
        return f"{note}; status: {st}"
    return note or (f"status: {st}" if st else "")


def constants_rows(refset: Optional[str] = None) -> List[Dict[str, Any]]:
    """Rows of the Constants sheet from a reference set (default: the engine's default set).

    Each row carries ``note``: how the published uncertainty was converted to 1σ and whether the
    value was checked against the original or recalled from memory (:func:`provenance_note`).
    """
    from .constants import reference_material, reference_set

    rs = reference_set(refset)
    rows: List[Dict[str, Any]] = [
        {"key": "set", "quantity": "Reference set these values started from", "value": rs.name, "sigma_1s": "",
         "note": "", "unit": "", "source": rs.description}]
    for key, label in (("Sm147", "λ 147Sm"), ("Lu176", "λ 176Lu"), ("Rb87", "λ 87Rb")):
        v = rs.decay_constant(key)
        rows.append({"key": f"decay.{key}", "quantity": f"Decay constant {label}", "value": v.value,
                     "sigma_1s": v.sigma_1s, "note": provenance_note(v), "unit": v.unit, "source": v.source})
    for ratio in ("143Nd/144Nd", "147Sm/144Nd", "176Hf/177Hf", "176Lu/177Hf"):
        v = rs.reservoir("CHUR", ratio)
        rows.append({"key": f"CHUR.{ratio}", "quantity": f"CHUR present-day {ratio}", "value": v.value,
                     "sigma_1s": v.sigma_1s, "note": provenance_note(v), "unit": v.unit, "source": v.source})
    for ratio in ("87Sr/86Sr", "87Rb/86Sr"):
        v = rs.reservoir("UR", ratio)
        rows.append({"key": f"UR.{ratio}", "quantity": f"Uniform reservoir (bulk Earth) present-day {ratio}",
                     "value": v.value, "sigma_1s": v.sigma_1s, "note": provenance_note(v), "unit": v.unit,
                     "source": v.source})
    for material, ratio in _REFERENCE_MATERIALS:
        v = reference_material(material, ratio)
        rows.append({"key": f"rm.{material}.{ratio}", "quantity": f"{material} accepted {ratio}",
                     "value": v.value, "sigma_1s": v.sigma_1s, "note": provenance_note(v), "unit": v.unit,
                     "source": v.source})
    from .constants import normalising_ratio

    for ratio in ("17O/16O", "18O/16O"):
        v = normalising_ratio(ratio)
        rows.append({"key": f"oxygen.{ratio}", "quantity": f"Oxygen {ratio} for oxide runs (Measured Ion 'oxide')",
                     "value": v.value, "sigma_1s": "", "note": provenance_note(v) + "; type your lab's own",
                     "unit": v.unit, "source": v.source})
    for key, quantity, unit, note in LAB_ROWS:
        rows.append({"key": key, "quantity": quantity, "value": LAB_DEFAULTS.get(key, 0.0), "sigma_1s": "",
                     "note": note, "unit": unit, "source": "the laboratory (type your own value)"})
    from .composition import composition_rows

    for el in NATURAL_ELEMENTS:
        for key, quantity, value, source in composition_rows(el):
            # 15 significant digits: the value an .xlsx file keeps exactly (it stores 16 at most), so the
            # composition read back from either file format is the same (it differs from the engine's
            # default by < 1e-15, relative)
            rows.append({"key": key, "quantity": quantity, "value": float(f"{value:.15g}"), "sigma_1s": "",
                         "note": "convention: CIAAW representative composition fractionated by the exponential law "
                                 "to the normalising ratio; replace the whole element with your lab's measured "
                                 "composition if you have one",
                         "unit": "mol/mol", "source": source})
    return rows


#: Reference materials whose accepted values the Constants sheet carries (primary and check materials).
_REFERENCE_MATERIALS = (("JNdi-1", "143Nd/144Nd"), ("BCR-2", "143Nd/144Nd"), ("BHVO-2", "143Nd/144Nd"),
                        ("JMC-475", "176Hf/177Hf"), ("BCR-2", "176Hf/177Hf"), ("BHVO-2", "176Hf/177Hf"),
                        ("NIST SRM 987", "87Sr/86Sr"), ("BCR-2", "87Sr/86Sr"), ("BHVO-2", "87Sr/86Sr"))
#: Elements whose natural composition the Constants sheet shows (and a lab may replace).
NATURAL_ELEMENTS = ("Nd", "Sm", "Hf", "Lu", "Sr", "Rb")
#: Lab-wide uncertainty defaults: (key, quantity, unit, note).
LAB_ROWS = (
    ("lab.weighing_1s_g", "Weighing 1σ (abs) used when a Samples σ column is empty", "g",
     "your balance's 1σ for one weighing; 0 = not included (Check then says so)"),
    ("lab.blank_1s_pct", "Blank 1σ (% of the blank) used when a Samples blank σ is empty", "%",
     "e.g. the scatter of your procedural blanks; 0 = not included (Check then says so)"),
    ("lab.pd_reproducibility_1s_pct", "Parent/daughter ratio external reproducibility (1σ %)", "%",
     "basis: replicate analyses of a reference material or sample powder; added to every P/D ratio "
     "(random); 0 = not included (Check then says so)"),
    ("lab.cycle_reject_k", "Cycle rejection threshold k (robust SDs from the median; Cycles sheet)", "robust SD",
     "one pass: |x − median| > k × 1.4826 × MAD rejected (Iglewicz & Hoaglin 1993); 0 = keep every cycle"),
)
#: Values of the lab rows in a new template (the others start at 0: the lab types its own).
LAB_DEFAULTS = {"lab.cycle_reject_k": 3.5}


#: Columns of the reference-value tables of the Provenance sheets and the report.
PROVENANCE_KEYS = ("key", "quantity", "value", "sigma_1s", "note", "unit", "source")
PROVENANCE_HEADER = ("Key", "Quantity", "Value", "1σ (abs)", "How the 1σ (abs) was set / status", "Unit", "Source")


def _same_number(a: Any, b: Any) -> bool:
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        return math.isclose(float(a), float(b), rel_tol=1e-12, abs_tol=0.0)
    return a == b


def provenance_constant_rows(constants: Sequence[Mapping[str, Any]]) -> List[Tuple[Any, ...]]:
    """Reference-value rows for a Provenance sheet or the report (:data:`PROVENANCE_KEYS` order).

    A row whose value or σ differs from the reference set it started from (the ``set`` row) is
    marked as edited in the workbook: its shipped status then no longer describes the value.
    """
    name = ""
    for r in constants:
        if str(r.get("key", "")).strip() == "set":
            name = str(r.get("value", "")).strip()
    try:
        shipped = {r["key"]: r for r in constants_rows(name or None)}
    except InputError:
        shipped = {}
    out = []
    for r in constants:
        key = str(r.get("key", "")).strip()
        if not key:
            continue
        row = dict(r)
        ref = shipped.get(key)
        if key != "set" and ref is not None:
            same = all(_same_number(row.get(k), ref[k]) for k in ("value", "sigma_1s"))
            if not same:
                row["note"] = (f"EDITED in this workbook (the set {name or 'default'!r} has "
                               f"{ref['value']!r} ± {ref['sigma_1s']!r}); the shipped note was: "
                               f"{ref['note'] or 'none'}")
            elif str(row.get("note", "")).strip() == "":
                row["note"] = ref["note"]
        out.append(tuple(row.get(k, "") for k in PROVENANCE_KEYS))
    return out


# --------------------------------------------------------------------------------------------
# reading tables from cell values (shared by the add-in and the batch path)
# --------------------------------------------------------------------------------------------
def _clean(v: Any) -> Cell:
    """One cell value as the tables read it: float, text ('' = empty) or a :class:`SpecialCell`.

    A logical value stays a logical cell (never 1.0/0.0: TRUE in a mass cell is not 1 g).
    """
    if v is None:
        return ""
    if isinstance(v, str):
        return v
    if isinstance(v, bool):
        return logical(v)
    if isinstance(v, (int, float)):
        return float(v)
    if hasattr(v, "isoformat"):
        return v.isoformat()[:10]
    return str(v)


def as_rows(rows: Any) -> Rows:
    """Normalise a 2-D block of cell values to a hashable tuple of tuples of float | str."""
    return tuple(tuple(_clean(v) for v in r) for r in rows)


@dataclass(frozen=True)
class Table:
    """A table read from a key-row-first range: column keys and data rows (with sheet row numbers)."""

    sheet: Sheet
    keys: Tuple[str, ...]
    rows: Rows
    first_row: int = FIRST_ROW
    #: look-up indexes of :meth:`find`, built on first use (column keys -> normalised values -> row indexes)
    _index: Dict[Tuple[str, ...], Dict[Tuple[str, ...], List[int]]] = field(
        default_factory=dict, compare=False, repr=False)

    @classmethod
    def from_range(cls, sheet: Sheet, rows: Any, first_row: int = FIRST_ROW) -> Table:
        r = as_rows(rows)
        if not r:
            raise CellError(sheet.name, first_row - 1, None, "", "the table range is empty")
        keys = tuple(str(k).strip() for k in r[0])
        return cls(sheet, keys, r[1:], first_row)

    def index(self, key: str) -> int:
        try:
            return self.keys.index(key)
        except ValueError:
            raise CellError(self.sheet.name, self.first_row - 1, None, "",
                            f"the column key {shown(key)} is missing from row {self.first_row - 1}") from None

    def header(self, key: str) -> str:
        try:
            return self.sheet.columns[self.sheet.col_index(key)].header
        except KeyError:
            return key

    def get(self, i: int, key: str) -> Cell:
        row = self.rows[i]
        j = self.index(key)
        return row[j] if j < len(row) else ""

    def error(self, i: int, key: str, problem: str) -> CellError:
        return CellError(self.sheet.name, self.first_row + i, col_letter(self.index(key)), self.header(key), problem)

    def text(self, i: int, key: str, required: bool = True) -> str:
        v = self.get(i, key)
        if isinstance(v, FormulaCell):
            raise self.error(i, key, v.problem())
        if isinstance(v, float):
            v = f"{v:g}"
        v = str(v).strip()
        if v.startswith(MARKER.strip()):
            raise self.error(i, key, f"from this cell: {v}")
        if required and not v:
            raise self.error(i, key, "is empty")
        return v

    def number(self, i: int, key: str, required: bool = True, positive: bool = False,
               default: float = 0.0) -> float:
        v = self.get(i, key)
        if isinstance(v, SpecialCell):
            raise self.error(i, key, v.problem())
        if isinstance(v, str):
            s = v.strip()
            if not s:
                if required:
                    raise self.error(i, key, "is empty")
                return default
            if s.startswith(MARKER.strip()):
                raise self.error(i, key, f"from this cell: {s}")
            raise self.error(i, key, f"is not a number: {shown(s)}")
        if not math.isfinite(v):
            raise self.error(i, key, f"must be a finite number, got {v!r}")
        if positive and not v > 0:
            raise self.error(i, key, f"must be > 0, got {v!r}")
        return v

    def filled(self, i: int) -> bool:
        return any(not blank(v) for v in self.rows[i])

    def find(self, **match: str) -> List[int]:
        """Indexes of the rows whose cells equal ``match`` (trimmed, case-insensitive), in sheet order.

        The first look-up by a set of columns builds an index, so looking up every analysis of a
        large table costs one pass over it, not one pass per analysis.
        """
        if not self.rows:
            return []
        keys = tuple(sorted(match))
        idx = self._index.get(keys)
        if idx is None:
            cols = [self.index(k) for k in keys]
            idx = {}
            for i, row in enumerate(self.rows):
                idx.setdefault(tuple(_norm(row[j] if j < len(row) else "") for j in cols), []).append(i)
            self._index[keys] = idx
        return list(idx.get(tuple(_norm(match[k]) for k in keys), ()))


def _norm(v: Any) -> str:
    """A cell as :meth:`Table.find` compares it (trimmed, lower case; numbers as ``%g``)."""
    return (f"{v:g}" if isinstance(v, float) else str(v)).strip().lower()


@lru_cache(maxsize=64)
def _constants(rows: Rows) -> Mapping[str, Tuple[float, float, int]]:
    """key -> (value, sigma_1s, sheet row) from a Constants range (read-only: the result is cached).

    A key given twice is reported at its second row: which of the two values a formula would use
    is not obvious to the reader of the sheet.
    """
    t = Table.from_range(CONSTANTS, rows)
    out: Dict[str, Tuple[float, float, int]] = {}
    for i in range(len(t.rows)):
        key = t.text(i, "key", required=False)
        if not key or key == "set":
            continue
        if key in out:
            raise t.error(i, "key", f"the key {shown(key)} is given twice (first on row {out[key][2]}): keep one row")
        out[key] = (t.number(i, "value"), t.number(i, "sigma_1s", required=False), FIRST_ROW + i)
    return MappingProxyType(out)


@lru_cache(maxsize=64)
def _refset(constants: Rows) -> Any:
    """The engine ReferenceSet of the workbook: the named set with the Constants values laid over it."""
    from .constants import reference_set

    t = Table.from_range(CONSTANTS, constants)
    name, set_row = None, None
    for i in range(len(t.rows)):
        if t.text(i, "key", required=False) == "set":
            name, set_row = t.text(i, "value", required=False) or None, i
    try:
        base = reference_set(name)
    except InputError as exc:
        raise CellError("Constants", None if set_row is None else FIRST_ROW + set_row, "C", "Value",
                        f"reference set: {exc.problem}") from None
    overrides = {}
    for k, (v, s, row) in _constants(constants).items():
        if k.split(".")[0] not in ("decay", "CHUR", "DM", "UR"):
            continue
        # each override checked on its own first, so a bad one is named at its own row
        try:
            base.with_overrides({k: (v, s)})
        except (InputError, KeyError) as exc:
            if isinstance(exc, InputError) and "override" in exc.problem:
                col, head = ("D", "1σ (abs)") if v > 0 else ("C", "Value")
                raise CellError("Constants", row, col, head, f"{k}: {exc.problem}") from None
            problem = exc.problem if isinstance(exc, InputError) else "no such reference value in the set"
            raise CellError("Constants", row, "A", "Key", f"{shown(k)}: {problem}") from None
        overrides[k] = (v, s)
    return base.with_overrides(overrides)


@lru_cache(maxsize=64)
def _naturals(constants: Rows) -> Dict[str, Any]:
    """Element -> NaturalComposition from the Constants rows ``nat.<element>.<i>/<reference>``.

    An element without rows takes the engine's convention; rows of an element replace it whole.
    """
    from .composition import natural_composition

    t = Table.from_range(CONSTANTS, constants)
    rows: Dict[str, Dict[str, float]] = {}
    where: Dict[str, int] = {}
    for i in range(len(t.rows)):
        key = t.text(i, "key", required=False)
        if not key.startswith("nat."):
            continue
        _nat, _sep, rest = key.partition(".")
        el, _sep, ratio = rest.partition(".")
        rows.setdefault(el, {})[ratio] = t.number(i, "value", positive=True)
        where.setdefault(el, i)
    out: Dict[str, Any] = {}
    for el, ratios in rows.items():
        try:
            out[el] = natural_composition(el, ratios)
        except InputError as exc:
            raise t.error(where[el], "key", f"natural {el} composition: {exc.problem}") from None
    return out


def _lab(constants: Rows, key: str) -> float:
    """A lab default of the Constants sheet (0 when the row is missing)."""
    c = _constants(constants)
    if key not in c:
        return 0.0
    v, _s, row = c[key]
    if v < 0:
        raise CellError("Constants", row, "C", "Value", f"{key} must be >= 0, got {v!r}")
    return v


def _constant(constants: Rows, key: str, positive: bool = False) -> Tuple[float, float]:
    """(value, 1σ) of a Constants row; with ``positive`` a value <= 0 or a σ < 0 is named at its cell."""
    c = _constants(constants)
    if key not in c:
        raise CellError("Constants", None, "A", "Key", f"no row with the key {shown(key)}")
    v, s, row = c[key]
    if positive and not v > 0:
        raise CellError("Constants", row, "C", "Value", f"{key} must be > 0, got {v!r}")
    if positive and s < 0:
        raise CellError("Constants", row, "D", "1σ (abs)", f"{key}: a 1σ must be >= 0, got {s!r}")
    return v, s


def _system_of(text: str) -> str:
    from .systems import get_system

    return get_system(text).key


_NORM_RATIO = {"Nd": "146Nd/144Nd", "Sm": "147Sm/152Sm", "Hf": "179Hf/177Hf", "Sr": "86Sr/88Sr"}
_REFERENCE_ISOTOPE = {"Nd": "144Nd", "Sm": "152Sm", "Hf": "177Hf", "Lu": "175Lu", "Sr": "86Sr", "Rb": "85Rb"}


def axis_titles(system: str) -> Tuple[str, str]:
    """(x, y) axis titles of a system's isochron: its parent/daughter and daughter ratios."""
    from .systems import get_system

    s = get_system(system)
    return f"{s.parent}/{s.reference}", s.daughter_ratio


#: Per element: the isotopes (besides the spike isotope) whose ratio to the reference isotope every run must
#: give — the radiogenic or parent isotope and the normalising isotope (the template's conventions).
_RUN_ISOTOPES = {"Sm": ("147Sm",), "Nd": ("143Nd", "146Nd"), "Lu": ("176Lu",), "Hf": ("176Hf", "179Hf"),
                 "Rb": ("87Rb",), "Sr": ("87Sr", "88Sr")}


def run_ratios(element: str, spike_isotope: str = "") -> str:
    """The ratios a Measured run of ``element`` must give with a spike enriched in ``spike_isotope``.

    The radiogenic (daughter) or parent isotope, the normalising isotope (146Nd, 147Sm, 179Hf; 88Sr for
    86Sr/88Sr) and the spike isotope, each to the element's reference isotope, in mass order; a two-isotope
    element (Lu, Rb) also needs its typed β. Raises :class:`InputError` naming ``element`` or
    ``spike_isotope``.
    """
    from .dilution import element_isotopes

    el = str(element).strip().capitalize()          # typed in any case: "nd", "ND" -> "Nd"
    if el not in _RUN_ISOTOPES:
        raise InputError("element", f"{shown(el)} is not an element the template reduces: one of {', '.join(ELEMENTS)}")
    iso = str(spike_isotope).strip()
    digits = iso[:len(iso) - len(iso.lstrip("0123456789"))]
    iso = digits + iso[len(digits):].capitalize()
    isos = element_isotopes(el)
    if iso and iso not in isos:
        raise InputError("spike_isotope", f"{shown(iso)} is not an isotope of {el} (one of {', '.join(isos)})")
    ref = _REFERENCE_ISOTOPE[el]
    need = set(_RUN_ISOTOPES[el]) | ({iso} if iso and iso != ref else set())
    text = ", ".join(f"{i}/{ref}" for i in isos if i in need)
    if el not in _NORM_RATIO:
        text += f"; and β with its 1σ ({el} has two isotopes)"
    return text


def _spike(spikes: Table, label: str, element: str, where: Callable[[str], CellError]) -> Any:
    from .dilution import make_spike

    hits = spikes.find(spike=label, element=element)
    if not hits:
        known = sorted({spikes.text(i, "spike", required=False) for i in range(len(spikes.rows))} - {""})
        listed = ", ".join(shown(k) for k in known[:12]) + (f" and {len(known) - 12} more" if len(known) > 12 else "")
        raise where(f"spike {shown(label)} has no {element} row on the Spikes sheet (spikes there: "
                    f"{listed or 'none'})")
    if len(hits) > 1:
        raise spikes.error(hits[1], "spike", f"spike {shown(label)} has a second {element} row (the first is row "
                           f"{spikes.first_row + hits[0]}): keep one row per element of a spike")
    i = hits[0]
    isotopes, abundances, slots = [], [], []
    for k in range(1, 8):
        iso = spikes.text(i, f"iso{k}", required=k <= 2)
        if not iso:
            continue
        isotopes.append(iso)
        abundances.append(spikes.number(i, f"ab{k}", positive=False))
        slots.append(k)
    # every cell is read (and a bad one reported at its own column) before the engine sees them
    spike_isotope = spikes.text(i, "spike_isotope")
    conc = spikes.number(i, "conc_umol_g", positive=True)
    conc_s = spikes.number(i, "conc_sigma_1s", required=False)
    calibrated = spikes.text(i, "calibrated", required=False)
    try:
        return make_spike(element, tuple(isotopes), tuple(abundances), spike_isotope, conc, conc_s, label=label,
                          calibrated=calibrated)
    except InputError as exc:
        raise spikes.error(i, _spike_column(exc, slots, isotopes, abundances), exc.problem) from None


def _spike_column(exc: InputError, slots: Sequence[int], isotopes: Sequence[str], abundances: Sequence[float]
                  ) -> str:
    """The Spikes column a :func:`reduction.dilution.make_spike` error is about (by its argument name)."""
    arg = exc.argument
    if arg == "isotopes":
        named = [k for k, iso in zip(slots, isotopes) if repr(iso) in exc.problem]
        return f"iso{(named or list(slots))[0]}"
    if arg == "abundances":
        bad = [k for k, a in zip(slots, abundances) if not (math.isfinite(a) and a >= 0)]
        return f"ab{(bad or list(slots))[0]}"
    return {"concentration_umol_g": "conc_umol_g", "concentration_sigma_1s": "conc_sigma_1s",
            "spike_isotope": "spike_isotope"}.get(arg, "element")


#: Monitor ratios a run may carry besides its own ratios (stripping; Yb doping of a Lu run).
_MONITOR_NAMES: Dict[str, Tuple[str, ...]] = {
    "Nd": ("147Sm/144Nd", "140Ce/144Nd"), "Hf": ("173Yb/177Hf", "175Lu/177Hf"), "Sr": ("85Rb/86Sr",),
    "Lu": ("173Yb/175Lu", "171Yb/175Lu")}
#: Yb doping of a Lu run: β from 173Yb/171Yb (the two monitor ratios' quotient), normalising.json's value.
_YB_PAIR = ("173Yb/175Lu", "171Yb/175Lu", "173Yb/171Yb")


def _oxygen(constants: Rows, ratio: str) -> float:
    """17O/16O or 18O/16O for oxide runs: the Constants row ``oxygen.<ratio>``, else the convention."""
    from .constants import normalising_ratio

    row = _constants(constants).get(f"oxygen.{ratio}")
    return row[0] if row is not None else normalising_ratio(ratio).value


#: What :func:`_run` returns: ratios, their 1σ, external β or None, β 1σ, row index, monitors (value, 1σ).
RunRow = Tuple[Dict[str, float], Dict[str, float], Optional[float], float, int, Dict[str, Tuple[float, float]]]


def _run(measured: Table, analysis: str, element: str, where: Callable[[str], CellError],
         oxygen: Tuple[float, float] = (0.0, 0.0), runs: Optional[Table] = None) -> RunRow:
    """(ratios, their 1σ, external β or None, β 1σ, row index, monitors) of one element run on Measured.

    Every ratio name is checked here, so a bad one is reported at its own cell; ``monitors`` maps each
    monitor ratio name (:data:`_MONITOR_NAMES`) to (value, 1σ). A run with cycles on the Cycles sheet takes
    its ratios from its row of the Runs sheet (``runs``); its Measured row, if any, gives only β and Ion
    (row index −1 when there is none).
    """
    hits = measured.find(analysis=analysis, element=element)
    if len(hits) > 1:
        raise measured.error(hits[1], "analysis", f"a second {element} run of analysis {shown(analysis)} (the first "
                             f"is row {measured.first_row + hits[0]}): keep one row per element run")
    from_cycles = runs.find(analysis=analysis, element=element) if runs is not None else []
    if not hits and not from_cycles:
        raise where(f"no {element} run for analysis {shown(analysis)} on the Measured sheet (or the Cycles sheet)")
    i = hits[0] if hits else -1
    if from_cycles:
        if hits and measured.text(i, "r1_name", required=False):
            raise measured.error(i, "r1_name", f"the {element} run of {shown(analysis)} has cycles on the Cycles sheet "
                                 f"(Runs row {runs.first_row + from_cycles[0]}), which give its ratios: leave the "
                                 "Measured ratio columns empty (β and Ion are read here)")
        vals, sig, monitors = _run_ratios(runs, from_cycles[0], element)
    else:
        vals, sig, monitors = _run_ratios(measured, i, element)
    if i < 0:
        return vals, sig, None, 0.0, i, monitors
    ref = _REFERENCE_ISOTOPE.get(element, "")
    typed_ion = measured.text(i, "ion", required=False)
    ion = typed_ion.lower()
    if ion not in ("", "metal", "oxide"):
        raise measured.error(i, "ion", f"{shown(typed_ion)}: type metal (or leave empty) or oxide")
    if ion == "oxide":
        if monitors:
            raise measured.error(i, "ion", "an oxide run with monitor ratios is not reduced here (the oxide masses "
                                 "of the interferents overlap other masses): strip them before, or run as metal")
        from .oxide import oxide_to_metal

        try:
            ox = oxide_to_metal(element, ref, vals, sig, *oxygen)
        except InputError as exc:
            raise measured.error(i, "ion", f"oxide run: {exc.problem}") from None
        vals, sig = ox.ratios, ox.sigma_1s
    bf = measured.number(i, "bias_factor", required=False, default=float("nan"))
    bf_s = measured.number(i, "bias_factor_1s", required=False)
    if bf_s < 0:
        raise measured.error(i, "bias_factor_1s", f"must be >= 0, got {bf_s!r}")
    return vals, sig, (None if math.isnan(bf) else bf), bf_s, i, monitors


def _run_ratios(t: Table, i: int, element: str
                ) -> Tuple[Dict[str, float], Dict[str, float], Dict[str, Tuple[float, float]]]:
    """Ratios, 1σ and monitor ratios of row ``i`` of a Measured-like table (Measured, or Runs)."""
    from .dilution import element_isotopes

    isos = element_isotopes(element)
    ref = _REFERENCE_ISOTOPE.get(element, "")
    vals: Dict[str, float] = {}
    sig: Dict[str, float] = {}
    monitors: Dict[str, Tuple[float, float]] = {}
    allowed = _MONITOR_NAMES.get(element, ())
    for k in range(1, RATIO_SLOTS + 1):
        name = t.text(i, f"r{k}_name", required=k == 1)
        if not name:
            continue
        num, sep, den = name.replace(" ", "").partition("/")
        if f"{num}/{den}" in allowed:
            if f"{num}/{den}" in monitors:
                raise t.error(i, f"r{k}_name", f"{shown(name)} is given twice")
            # a monitor may be 0 (nothing of the interferent seen); its 1σ must be > 0 like any measurement
            monitors[f"{num}/{den}"] = (t.number(i, f"r{k}", positive=False),
                                        t.number(i, f"r{k}_sigma_1s", positive=True))
            continue
        if not sep or num not in isos or den != ref:
            more = f", or a monitor ratio: {', '.join(allowed)}" if allowed else ""
            raise t.error(i, f"r{k}_name", f"{shown(name)} is not a {element} ratio to {ref}: write it as "
                          f"<isotope>/{ref} with one of {', '.join(x for x in isos if x != ref)}{more}")
        if num == ref or f"{num}/{den}" in vals:
            raise t.error(i, f"r{k}_name", f"{shown(name)} is given twice or is {ref}/{ref}")
        vals[f"{num}/{den}"] = t.number(i, f"r{k}", positive=True)
        sig[f"{num}/{den}"] = t.number(i, f"r{k}_sigma_1s", positive=True)
    return vals, sig, monitors


@lru_cache(maxsize=16)
def _cycle_table(cycles: Rows, constants: Rows) -> Tuple[Tuple[Tuple[Any, ...], ...], Tuple[str, ...]]:
    """(Runs rows, Kept column) of a Cycles range: the per-run statistics and each cycle row's verdict.

    Runs rows follow :data:`RUNS`' columns; the Kept column has one text per Cycles row ("" for an empty
    row). Each ratio of a run is treated on its own: mean and SEM of its kept cycles
    (:func:`reduction.cycles.cycle_stats`, robust rule, k from ``lab.cycle_reject_k``).
    """
    from .cycles import cycle_stats

    t = Table.from_range(CYCLES, cycles)
    k = _lab(constants, "lab.cycle_reject_k")
    runs: Dict[Tuple[str, str], List[int]] = {}
    for i in range(len(t.rows)):
        if not t.filled(i):
            continue
        a = t.text(i, "analysis")
        el = t.text(i, "element")
        runs.setdefault((a, el), []).append(i)
    if len(runs) > RUNS.capacity:
        raise CellError("Cycles", None, "A", "Analysis", f"{len(runs)} runs; the Runs sheet holds "
                        f"{RUNS.capacity}: split the workbook")
    kept_text = [""] * len(t.rows)
    out: List[Tuple[Any, ...]] = []
    for (a, el), idx in runs.items():
        values: Dict[str, List[Tuple[int, float]]] = {}
        for i in idx:
            seen = set()
            for j in range(1, RATIO_SLOTS + 1):
                name = t.text(i, f"r{j}_name", required=j == 1)
                if not name:
                    continue
                name = name.replace(" ", "")
                if name in seen:
                    raise t.error(i, f"r{j}_name", f"{shown(name)} is given twice on this cycle row")
                seen.add(name)
                values.setdefault(name, []).append((i, t.number(i, f"r{j}", positive=False)))
        rejected: Dict[int, List[str]] = {}
        row: List[Any] = [a, el, float(len(idx)), 0.0]
        n_kept = len(idx)
        if len(values) > RATIO_SLOTS:
            raise t.error(idx[0], "r1_name", f"run {shown(a)} {el} has {len(values)} different ratios; a run has at "
                          f"most {RATIO_SLOTS}")
        for name, pairs in values.items():
            if len(pairs) < 2:
                raise t.error(pairs[0][0], "r1_name", f"{shown(name)} of run {shown(a)} {el} has one cycle; a mean "
                              "and its SEM need at least 2")
            try:
                st = cycle_stats([v for _i, v in pairs], rule="robust" if k > 0 else "none",
                                 reject_k=k if k > 0 else None)
            except RatioDeskError as exc:
                raise t.error(pairs[0][0], "r1", f"{shown(name)} of run {shown(a)} {el}: {exc}") from None
            for (i, _v), keep in zip(pairs, st.kept.ravel().tolist()):
                if not keep:
                    rejected.setdefault(i, []).append(name)
            n_kept = min(n_kept, int(st.n_kept))
            row += [name, float(st.mean), float(st.sem_1s)]
        row[3] = float(n_kept)
        row += [""] * (len(RUNS.columns) - len(row))
        out.append(tuple(row))
        for i in idx:
            kept_text[i] = "rejected: " + ", ".join(rejected[i]) if i in rejected else "kept"
    return tuple(out), tuple(kept_text)


def cycle_runs(cycles: Any, constants: Any) -> Tuple[Tuple[Any, ...], ...]:
    """The Runs sheet: one row per run of the Cycles sheet, padded with empty rows to its capacity."""
    runs, _kept = _cycle_table(as_rows(cycles), as_rows(constants))
    blank_row = ("",) * len(RUNS.columns)
    return runs + (blank_row,) * (RUNS.capacity - len(runs))


def cycle_kept(cycles: Any, constants: Any) -> Tuple[Tuple[str], ...]:
    """The Cycles sheet's Kept column, one cell per data row of the range (the key row excluded)."""
    _runs, kept = _cycle_table(as_rows(cycles), as_rows(constants))
    return tuple((k,) for k in kept)


@dataclass(frozen=True)
class SessionStandards:
    """The reference-material runs of one session and ratio: the primary's factor and every check.

    ``checks`` maps material -> (rows, normalised mean, its 1σ, accepted, accepted 1σ, problem text);
    the problem text is non-empty when a check cannot be evaluated (e.g. no accepted value).
    """

    session: str
    ratio: str
    primary: str
    primary_rows: Tuple[int, ...]
    factor: Any
    checks: Mapping[str, Tuple[Tuple[int, ...], float, float, float, float, str]]
    how: str


_ROLES = ("primary", "check")


@lru_cache(maxsize=256)
def _session_standards(standards: Rows, constants: Rows, session: str, ratio: str) -> SessionStandards:
    """Choose the primary material of a session and ratio; normalise every other material with its factor."""
    from .standards import standard_factor

    t = Table.from_range(STANDARDS, standards)
    hits = t.find(session=session, ratio=ratio)
    if not hits:
        raise CellError("Standards", None, "A", "Session",
                        f"no {ratio} reference-material runs for session {shown(session)} on the Standards sheet")
    by_mat: Dict[str, List[int]] = {}
    roles: Dict[str, set] = {}
    for i in hits:
        m = t.text(i, "material")
        role = t.text(i, "role", required=False).lower()
        if role not in ("",) + _ROLES:
            raise t.error(i, "role", f"must be 'primary', 'check' or empty, got {shown(role)}")
        by_mat.setdefault(m, []).append(i)
        roles.setdefault(m, set()).add(role)
    for m, r in roles.items():
        if {"primary", "check"} <= r:
            i = by_mat[m][0]
            raise t.error(i, "role", f"{m} is marked both primary and check in session {shown(session)}")
    typed = [m for m, r in roles.items() if "primary" in r]
    if len(typed) > 1:
        raise t.error(by_mat[typed[1]][0], "role", f"session {shown(session)} has two primary materials for {ratio} "
                      f"({', '.join(typed)}): mark one 'primary', the others 'check'")
    default = DEFAULT_PRIMARY.get(ratio)
    not_check = [m for m, r in roles.items() if "check" not in r]
    if typed:
        primary, how = typed[0], "marked"
    elif default in by_mat and "check" not in roles[default]:
        primary, how = default, "default"
    elif len(not_check) == 1 and len(by_mat) == 1:
        primary, how = not_check[0], "only material"
    else:
        raise t.error(hits[0], "role", f"session {shown(session)} has no primary reference material for {ratio} "
                      f"(materials: {', '.join(by_mat)}): type 'primary' in the Role column of its rows")
    rows = tuple(by_mat[primary])
    values = [t.number(i, "measured", positive=True) for i in rows]
    key = f"rm.{primary}.{ratio}"
    if key not in _constants(constants):
        raise t.error(rows[0], "material", f"the primary material {shown(primary)} has no accepted {ratio} on the "
                      f"Constants sheet (no row with the key {shown(key)})")
    accepted, accepted_s = _constant(constants, key, positive=True)
    try:
        f = standard_factor(values, accepted, accepted_sigma_1s=accepted_s)
    except InputError as exc:
        raise t.error(rows[0], "measured", str(exc)) from None
    checks: Dict[str, Tuple[Tuple[int, ...], float, float, float, float, str]] = {}
    for m, idx in by_mat.items():
        if m == primary:
            continue
        vals = [t.number(i, "measured", positive=True) for i in idx]
        sigs = [t.number(i, "sigma_1s", required=False) for i in idx]
        n = len(vals)
        mean = sum(vals) / n * f.factor
        if n > 1:
            sd = math.sqrt(sum((v * f.factor - mean) ** 2 for v in vals) / (n - 1))
            s_mean = sd / math.sqrt(n)
        elif sigs[0] > 0:
            s_mean = sigs[0] * f.factor
        else:   # one run, no σ typed: the primary's session scatter stands in for the run's own
            s_mean = mean * f.reproducibility_rel_1s
        if f"rm.{m}.{ratio}" in _constants(constants):
            acc, acc_s = _constant(constants, f"rm.{m}.{ratio}", positive=True)
            problem = ""
        else:
            acc, acc_s = float("nan"), float("nan")
            problem = (f"{m} has no accepted {ratio} on the Constants sheet (add a row with the key "
                       f"'rm.{m}.{ratio}'); the check is not evaluated")
        checks[m] = (tuple(idx), mean, s_mean, acc, acc_s, problem)
    return SessionStandards(session, ratio, primary, rows, f, checks, how)


def standard_value(quantity: str, session: Any, material: Any, ratio: Any, measured: Any, standards: Any,
                   constants: Any) -> float | str:
    """One computed cell of a Standards row: its role, the session factor, the normalised value, and for a
    check material its mean, accepted value, deviation (ppm, ε) and z-score.

    The factor comes from the session's primary material only (:func:`_session_standards`); a check
    never enters it. z = (mean − accepted) / √(σ_mean² + (mean·σ_f,rel)² + σ_acc² + (mean·σ_acc,primary,rel)²),
    with σ_mean the standard error of the check's normalised runs (one run: its typed σ, else the
    primary's session scatter) and σ_f,rel the factor's random relative σ (common practice).
    """
    ses = str(session).strip() if not isinstance(session, float) else f"{session:g}"
    if not ses:
        return ""
    mat = str(material).strip()
    rat = str(ratio).strip()
    ss = _session_standards(as_rows(standards), as_rows(constants), ses, rat)
    return _standard_cell(quantity, ss, ses, mat, measured)


def _standard_cell(quantity: str, ss: SessionStandards, ses: str, mat: str, measured: Any) -> float | str:
    """:func:`standard_value` once the session's standards are known."""
    f = ss.factor
    q = quantity.strip().lower()
    is_primary = mat.lower() == ss.primary.lower()
    try:
        x = float(measured)
    except (TypeError, ValueError):
        x = float("nan")
    if q == "role":
        return f"primary ({ss.how})" if is_primary else "check"
    if q == "factor":
        return float(f.factor)
    if q == "normalised":
        if not (math.isfinite(x) and x > 0):
            raise CellError("Standards", None, "D", "Measured", f"is not a number > 0: {shown(measured)}")
        return float(x * f.factor)
    if is_primary:
        mean = f.mean * f.factor
        table: Dict[str, Any] = {"mean": mean, "accepted": f.accepted, "dev_ppm": (mean / f.accepted - 1) * 1e6,
                                 "dev_eps": (mean / f.accepted - 1) * 1e4, "z": "n/a: primary"}
    else:
        hit = next((v for k, v in ss.checks.items() if k.lower() == mat.lower()), None)
        if hit is None:
            raise CellError("Standards", None, "B", "Material", f"{shown(mat)} has no runs in session {shown(ses)}")
        _rows, mean, s_mean, acc, acc_s, problem = hit
        if problem and q != "mean":
            return MARKER + problem
        rel_f = f.factor_sigma_1s_random / f.factor
        rel_p = f.accepted_sigma_1s / f.accepted
        s_tot = math.sqrt(s_mean ** 2 + (mean * rel_f) ** 2 + acc_s ** 2 + (mean * rel_p) ** 2)
        table = {"mean": mean, "accepted": acc, "dev_ppm": (mean / acc - 1) * 1e6 if acc == acc else "",
                 "dev_eps": (mean / acc - 1) * 1e4 if acc == acc else "",
                 "z": (mean - acc) / s_tot if s_tot > 0 else "n/a: no uncertainty"}
    if q not in table:
        raise InputError("quantity", f"unknown quantity {quantity!r}; use one of role, factor, normalised, "
                         + ", ".join(table))
    v = table[q]
    return v if isinstance(v, str) else float(v)


def _standard(standards: Rows, constants: Rows, session: str, ratio: str,
              where: Callable[[str], CellError]) -> Any:
    """The session factor from the session's primary material (checks never enter it)."""
    t = Table.from_range(STANDARDS, standards)
    if not t.find(session=session, ratio=ratio):
        raise where(f"no {ratio} reference-material runs for session {shown(session)} on the Standards sheet")
    return _session_standards(standards, constants, session, ratio).factor


#: Correlation of a mixed spike's two concentrations the workbook passes to the chain (the Spikes
#: sheet has no column for it: the two calibrations are treated as independent).
SPIKE_RHO = 0.0


def spike_ratio_sigma_rel(parent_spike: Any, daughter_spike: Any, spike_rho: float = SPIKE_RHO) -> float:
    """Relative 1σ of a spike's parent/daughter concentration ratio (e.g. 149Sm/150Nd of a mixed spike).

    First-order propagation of a ratio of two quantities with relative 1σ ``r_p``, ``r_d`` and
    correlation ρ: ``(r_p² + r_d² − 2 ρ r_p r_d)^½`` (e.g. Taylor 1997, An Introduction to Error
    Analysis, 2nd ed., eq. 9.9 — recalled from memory), with the same ρ the chain receives
    (:func:`reduction.chain.reduce_spiked_analysis` ``spike_rho``). Every parent/daughter ratio
    reduced with that spike scales with this ratio, so its error is common to all of them.
    """
    rp = parent_spike.concentration_sigma_1s / parent_spike.concentration_umol_g
    rd = daughter_spike.concentration_sigma_1s / daughter_spike.concentration_umol_g
    return math.sqrt(max(rp * rp + rd * rd - 2.0 * spike_rho * rp * rd, 0.0))


#: Broad plausibility ranges (common practice, not published limits): a value outside gets a warning in
#: Check, never a refusal. Masses in g (a value in mg typed as g lands far above the upper limit).
PLAUSIBLE_SAMPLE_MASS_G = (1e-4, 5.0)
PLAUSIBLE_SPIKE_MASS_G = (1e-4, 5.0)
#: Error magnification of the spike–sample mix above which Check warns (common practice).
PLAUSIBLE_MAGNIFICATION_MAX = 10.0
#: Blank share of the daughter (or parent) above which Check warns, as a fraction (common practice).
PLAUSIBLE_BLANK_SHARE_MAX = 0.05
#: Broad natural concentration ranges of rocks and minerals, µg/g (common practice, generous on purpose).
PLAUSIBLE_CONC_UG_G = {"Sm": (1e-4, 5000.0), "Nd": (1e-4, 20000.0), "Lu": (1e-5, 1000.0),
                       "Hf": (1e-4, 50000.0), "Rb": (1e-4, 10000.0), "Sr": (1e-3, 20000.0)}

#: Plain words for the chain's zero-σ input names (AnalysisResult.zero_sigma).
_SIGMA_WORDS = {"sample_mass_g": "sample mass", "spike_mass_g": "spike mass",
                "parent_bias_factor": "external β", "parent_spike_conc": "parent spike concentration",
                "daughter_spike_conc": "daughter spike concentration",
                "parent_ratio_reproducibility": "P/D external reproducibility",
                "daughter_ratio_reproducibility": "daughter-ratio external reproducibility",
                "parent_blank_ng": "parent blank", "daughter_blank_ng": "daughter blank"}


def _plausibility(res: Any, system: Any, sample_mass: float, spike_mass: float) -> List[str]:
    """Plausibility warnings of one analysis (ranges above)."""
    out: List[str] = []
    lo, hi = PLAUSIBLE_SAMPLE_MASS_G
    if not lo <= sample_mass <= hi:
        out.append(f"sample mass {sample_mass:g} g is outside {lo:g}-{hi:g} g (typed in mg?)")
    lo, hi = PLAUSIBLE_SPIKE_MASS_G
    if not lo <= spike_mass <= hi:
        out.append(f"spike mass {spike_mass:g} g is outside {lo:g}-{hi:g} g (typed in mg?)")
    for el, mag in ((system.parent_element, res.parent_magnification),
                    (system.daughter_element, res.daughter_magnification)):
        if mag > PLAUSIBLE_MAGNIFICATION_MAX:
            out.append(f"{el} error magnification {mag:.3g} > {PLAUSIBLE_MAGNIFICATION_MAX:g}")
    for el, share in ((system.parent_element, res.blank_share_parent),
                      (system.daughter_element, res.blank_share_daughter)):
        if share > PLAUSIBLE_BLANK_SHARE_MAX:
            out.append(f"{el} blank is {100 * share:.3g} % of the measured total "
                       f"(> {100 * PLAUSIBLE_BLANK_SHARE_MAX:g} %)")
    for el, c in ((system.parent_element, res.parent_conc_ug_g), (system.daughter_element, res.daughter_conc_ug_g)):
        lo, hi = PLAUSIBLE_CONC_UG_G.get(el, (0.0, math.inf))
        if not lo <= c <= hi:
            out.append(f"{el} {c:.4g} µg/g is outside the broad natural range {lo:g}-{hi:g} µg/g")
    return out


# result, ε, spike x scale, warnings, session factor, intermediate steps (stripping, where β came from)
AnalysisOutcome = Tuple[Any, Any, float, Tuple[str, ...], Any, Dict[str, Any]]
#: Passes of the stripping-and-reduction fixed point (converges in 2-4 for any realistic interference).
_STRIP_PASSES = 12
StandardLookup = Callable[[str, str, Callable[[str], CellError]], Any]

#: The systems the template's sheets reduce (Samples column System).
WORKBOOK_SYSTEMS = {"sm-nd": "Sm-Nd", "lu-hf": "Lu-Hf", "rb-sr": "Rb-Sr"}


@lru_cache(maxsize=256)
def _analysis(analysis: str, samples: Rows, measured: Rows, spikes: Rows, standards: Rows,
              constants: Rows, mc_draws: int = 0, runs: Rows = ()) -> AnalysisOutcome:
    """(AnalysisResult, epsilon today, spike P/D calibration rel. 1σ, Check warnings, ...) of one analysis."""
    return _analysis_of(analysis, Table.from_range(SAMPLES, samples), Table.from_range(MEASURED, measured),
                        Table.from_range(SPIKES, spikes),
                        lambda session, ratio, where: _standard(standards, constants, session, ratio, where),
                        constants, mc_draws, Table.from_range(RUNS, runs) if runs else None)


def _analysis_of(analysis: str, st: Table, mt: Table, sp: Table, standard: StandardLookup, constants: Rows,
                 mc_draws: int = 0, rt: Optional[Table] = None) -> AnalysisOutcome:
    """:func:`_analysis` on tables already read (the batch path reads each table once for every analysis).

    ``standard(session, ratio, where)`` returns the session factor (:func:`_standard`).
    """
    from .ages import epsilon
    from .chain import reduce_spiked_analysis
    from .systems import get_system

    hits = st.find(analysis=analysis)
    if not hits:
        raise CellError("Samples", None, "A", "Analysis", f"no row for analysis {shown(analysis)}")
    if len(hits) > 1:
        raise st.error(hits[1], "analysis", f"analysis ID {shown(analysis)} is used twice (first on row "
                       f"{st.first_row + hits[0]}): every analysis needs its own ID")
    i = hits[0]
    system_text = st.text(i, "system")
    try:
        system = get_system(system_text)
    except InputError:
        raise st.error(i, "system", f"unknown isotope system {shown(system_text)}: type one of "
                       f"{', '.join(WORKBOOK_SYSTEMS.values())}") from None
    if system.key not in WORKBOOK_SYSTEMS:
        raise st.error(i, "system", f"{shown(system_text)}: the workbook reduces "
                       f"{' and '.join(WORKBOOK_SYSTEMS.values())} only")
    sample_mass = st.number(i, "sample_mass_g", positive=True)
    spike_mass = st.number(i, "spike_mass_g", positive=True)
    label = st.text(i, "spike")
    session = st.text(i, "session")
    pb = st.number(i, "parent_blank_ng", required=False)
    db = st.number(i, "daughter_blank_ng", required=False)
    weighing = _lab(constants, "lab.weighing_1s_g")
    blank_rel = _lab(constants, "lab.blank_1s_pct") / 100.0
    nan = float("nan")

    def sigma(key: str, default: float) -> float:
        v = st.number(i, key, required=False, default=nan)
        if math.isnan(v):
            return default
        if v < 0:
            raise st.error(i, key, f"a 1σ must be >= 0, got {v!r}")
        return v

    for key in ("parent_blank_ng", "daughter_blank_ng"):
        if st.number(i, key, required=False) < 0:
            raise st.error(i, key, "a blank must be >= 0 ng")
    ws_s = sigma("sample_mass_1s_g", weighing)
    wt_s = sigma("spike_mass_1s_g", weighing)
    pb_s = sigma("parent_blank_1s_ng", pb * blank_rel)
    db_s = sigma("daughter_blank_1s_ng", db * blank_rel)
    rb = st.number(i, "daughter_blank_ratio", required=False, default=nan)
    rb_s = sigma("daughter_blank_ratio_1s", 0.0)
    if not math.isnan(rb) and rb <= 0:
        raise st.error(i, "daughter_blank_ratio", f"must be > 0, got {rb!r}")
    if math.isnan(rb) and rb_s > 0:
        raise st.error(i, "daughter_blank_ratio_1s", "a 1σ without a blank daughter ratio: type the ratio too")

    def at(key: str) -> Callable[[str], CellError]:
        return lambda problem: st.error(i, key, problem)

    p_el, d_el = system.parent_element, system.daughter_element
    p_spike = _spike(sp, label, p_el, at("spike"))
    d_spike = _spike(sp, label, d_el, at("spike"))
    oxygen = (_oxygen(constants, "17O/16O"), _oxygen(constants, "18O/16O"))

    def run_err(row: int, key: str, problem: str) -> CellError:
        """A problem of a run: at its Measured cell, or (a run from cycles only) at the analysis."""
        if row >= 0:
            return mt.error(row, key, problem)
        return st.error(i, "analysis", f"{problem} (this run comes from the Cycles sheet: add a Measured row with "
                        "its analysis and element for β and Ion, its ratio columns empty)")

    p_mix, p_sig, p_bf, p_bf_s, _pi, p_mon = _run(mt, analysis, p_el, at("analysis"), oxygen, rt)
    d_mix, d_sig, d_bf, _d_bf_s, d_i, d_mon = _run(mt, analysis, d_el, at("analysis"), oxygen, rt)
    if d_bf is not None:
        raise run_err(d_i, "bias_factor", f"{d_el} is normalised to {_NORM_RATIO[d_el]} within its own run, so a "
                       "typed β would not be used: leave β and its 1σ empty on this row")
    std = standard(session, system.daughter_ratio, at("session"))
    ref = _refset(constants)
    naturals = _naturals(constants)
    beta_from = "typed" if p_bf is not None else ("internal" if p_el in _NORM_RATIO else "")
    if _YB_PAIR[0] in p_mon or _YB_PAIR[1] in p_mon:
        p_bf, p_bf_s = _beta_from_doping(lambda key, problem: run_err(_pi, key, problem), p_mon, p_bf)
        beta_from = "Yb doping (173Yb/171Yb)"
    if p_mon.keys() - {_YB_PAIR[1]}:
        if p_bf is None:
            raise run_err(_pi, "bias_factor", f"stripping the isobars of the {p_el} run needs its β: type β, or "
                           "give Yb doping ratios")
        p_mix, p_sig, p_strip = _strip(lambda key, problem: run_err(_pi, key, problem), p_el, p_mix, p_sig,
                                       {k: v for k, v in p_mon.items() if k != _YB_PAIR[1]}, {}, p_bf)
    else:
        p_strip = {}
    kw: Dict[str, Any] = {}
    if p_bf is None and p_el not in _NORM_RATIO:
        raise run_err(_pi, "bias_factor", f"{p_el} has two isotopes, so its run cannot normalise itself: type its "
                       "mass-bias factor β (exponential law) and β 1σ, e.g. from a reference-material run of the "
                       "same session")
    if p_bf is None:
        kw["parent_norm_ratio"] = _NORM_RATIO.get(p_el)
    else:
        kw["parent_bias_factor"] = p_bf
        kw["parent_bias_sigma_1s"] = p_bf_s
    natural = {el: naturals[el] for el in (p_el, d_el) if el in naturals}

    def chain(d_ratios: Mapping[str, float], d_sigmas: Mapping[str, float], draws: int) -> Any:
        return reduce_spiked_analysis(
            system.key, p_mix, d_ratios, sample_mass, spike_mass, p_spike, d_spike,
            parent_mix_sigma_1s=p_sig, daughter_mix_sigma_1s=d_sigmas, daughter_norm_ratio=_NORM_RATIO.get(d_el),
            sample_mass_sigma_1s=ws_s, spike_mass_sigma_1s=wt_s,
            parent_blank_ng=pb, parent_blank_sigma_ng=pb_s, daughter_blank_ng=db, daughter_blank_sigma_ng=db_s,
            daughter_blank_ratio=None if math.isnan(rb) else rb, daughter_blank_ratio_sigma_1s=rb_s,
            parent_ratio_reproducibility_rel_1s=_lab(constants, "lab.pd_reproducibility_1s_pct") / 100.0,
            natural=natural, standard=std, spike_rho=SPIKE_RHO, mc_draws=draws, **kw)

    d_strip: Dict[str, float] = {}
    try:
        if not d_mon:
            res = chain(d_mix, d_sig, mc_draws)
        else:
            # the isobars are fractionated with the daughter's β, which the chain finds from the stripped
            # ratios: iterate to the fixed point (the correction is small, so a few passes suffice)
            res = chain(d_mix, d_sig, 0)
            for _ in range(_STRIP_PASSES):
                comps = _interferent_compositions(d_mon, p_el, p_spike, p_mix, res.parent_bias_factor,
                                                  naturals.get(p_el))
                d_s, d_ss, d_strip = _strip(lambda key, problem: run_err(d_i, key, problem), d_el, d_mix, d_sig,
                                            d_mon, comps, res.daughter_bias_factor)
                beta_before = res.daughter_bias_factor
                res = chain(d_s, d_ss, 0)
                if abs(res.daughter_bias_factor - beta_before) <= 1e-15 * max(1.0, abs(beta_before)):
                    break
            if mc_draws:
                res = chain(d_s, d_ss, mc_draws)
        eps = epsilon(res.daughter_ratio, res.daughter_ratio_sigma_1s, res.parent_ratio, 0.0, system, ref)
    except RatioDeskError as exc:
        raise CellError("Samples", FIRST_ROW + i, "A", "Analysis", f"analysis {shown(analysis)}: {exc}") from None
    warn: List[str] = [f"poor spike-sample mix for {el}" for el in res.poor_mix]
    warn += _plausibility(res, system, sample_mass, spike_mass)
    zero = [_SIGMA_WORDS.get(n, n) for n in res.zero_sigma if not n.startswith(("parent_mix", "daughter_mix"))]
    if any(n.startswith(("parent_mix", "daughter_mix")) for n in res.zero_sigma):
        zero.append("measured ratio")
    if zero:
        warn.append("σ = 0 (nothing typed, no lab default) for: " + ", ".join(dict.fromkeys(zero)))
    steps = {"strip_parent_ppm": 1e6 * max(p_strip.values(), default=0.0),
             "strip_daughter_ppm": 1e6 * max(d_strip.values(), default=0.0), "beta_parent_from": beta_from}
    return res, eps, spike_ratio_sigma_rel(p_spike, d_spike), tuple(warn), std, steps


def _beta_from_doping(err: Callable[[str, str], CellError], mon: Mapping[str, Tuple[float, float]],
                      typed: Optional[float]) -> Tuple[float, float]:
    """β of a Lu run from its Yb doping: 173Yb/171Yb = (173Yb/175Lu)/(171Yb/175Lu) against the convention.

    The exponential law's β is applied to Lu (common practice: the dopant's bias stands for the analyte's);
    1σ from the two ratios' 1σ, taken as independent.
    """
    from .massbias import bias_factor_from, ratio_masses

    a, b, pair = _YB_PAIR
    if a not in mon or b not in mon:
        raise err("r1_name", f"Yb doping needs both {a} and {b} on the Lu row (one is missing)")
    if typed is not None:
        raise err("bias_factor", "β is typed and also given by Yb doping: keep one (clear β and β 1σ to use "
                       "the doping)")
    (ra, sa), (rb_, sb) = mon[a], mon[b]
    if not (ra > 0 and rb_ > 0):
        raise err("r1_name", f"the Yb doping ratios must be > 0 (got {a} = {ra!r}, {b} = {rb_!r})")
    beta = float(bias_factor_from(ra / rb_, pair))
    m1, m2 = ratio_masses(pair)
    sigma = math.hypot(sa / ra, sb / rb_) / abs(math.log(m1 / m2))
    return beta, sigma


def _interferent_compositions(monitors: Mapping[str, Any], parent: str, parent_spike: Any,
                              parent_mix: Mapping[str, float], parent_beta: float, parent_natural: Any
                              ) -> Dict[str, Dict[str, float]]:
    """True atom fractions of each interfering element of a daughter run.

    The parent element of the analysis (Sm on Nd, Lu on Hf, Rb on Sr) is a spike–sample mixture: its
    composition follows from the parent run's spike-isotope ratio, bias-corrected with the parent's β
    (:func:`reduction.dilution.mixture_fractions`). Others (Ce, Yb) are natural.
    """
    from .composition import natural_composition
    from .dilution import mixture_fractions
    from .massbias import correct_named

    out: Dict[str, Dict[str, float]] = {}
    for name in monitors:
        el = name.partition("/")[0].lstrip("0123456789")
        if el in out:
            continue
        if el == parent:
            ref = _REFERENCE_ISOTOPE[parent]
            ratio = f"{parent_spike.spike_isotope}/{ref}"
            r_true = float(correct_named(parent_mix[ratio], ratio, parent_beta))
            out[el] = mixture_fractions(parent_natural or natural_composition(el), parent_spike, ref, r_true)
        else:
            comp = natural_composition(el)
            out[el] = {iso: float(comp.fraction(iso)) for iso in comp.isotopes}
    return out


def _strip(err: Callable[[str, str], CellError], element: str, ratios: Mapping[str, float], sigmas: Mapping[str, float],
           monitors: Mapping[str, Tuple[float, float]], comps: Mapping[str, Mapping[str, float]], beta: float
           ) -> Tuple[Dict[str, float], Dict[str, float], Dict[str, float]]:
    """:func:`reduction.interference.strip_run_ratios` for one Measured row; a failure names the row."""
    from .composition import natural_composition
    from .interference import strip_run_ratios

    comps = dict(comps)
    for name in monitors:
        el = name.partition("/")[0].lstrip("0123456789")
        if el not in comps:
            c = natural_composition(el)
            comps[el] = {iso: float(c.fraction(iso)) for iso in c.isotopes}
    try:
        st = strip_run_ratios(element, _REFERENCE_ISOTOPE[element], ratios, sigmas, monitors, comps, beta)
    except RatioDeskError as exc:
        raise err("analysis", f"stripping the isobars of this {element} run: {exc}") from None
    return st.ratios, st.sigma_1s, st.correction_rel


def _runs_from_cycles(cycles: Any, constants: Rows) -> Rows:
    """The Runs block (key row first) of a Cycles table, or () without one."""
    if cycles is None:
        return ()
    got = _cycle_table(as_rows(cycles), constants)[0]
    return ((tuple(c.key for c in RUNS.columns),) + tuple(got)) if got else ()


def analysis_checks(analysis: Any, samples: Any, measured: Any, spikes: Any, standards: Any, constants: Any,
                    cycles: Any = None) -> Tuple[str, ...]:
    """The Check warnings of one analysis (empty: "ok"); ``cycles``: the Cycles table, if any."""
    rows = tuple(as_rows(t) for t in (samples, measured, spikes, standards, constants))
    return _analysis(str(analysis).strip(), *rows, runs=_runs_from_cycles(cycles, rows[4]))[3]


def analysis_result(analysis: str, samples: Any, measured: Any, spikes: Any, standards: Any, constants: Any,
                    cycles: Any = None, *, mc_draws: int = 0) -> Any:
    """The engine's AnalysisResult of one analysis (optionally with a seeded Monte Carlo); ``cycles``: the
    Cycles table (key row first), whose runs then take their ratios from their cycles."""
    rows = tuple(as_rows(t) for t in (samples, measured, spikes, standards, constants))
    return _analysis(str(analysis).strip(), *rows, mc_draws=int(mc_draws),
                     runs=_runs_from_cycles(cycles, rows[4]))[0]


def analysis_value(quantity: str, analysis: Any, samples: Any, measured: Any, spikes: Any, standards: Any,
                   constants: Any, runs: Any = None) -> float | str:
    """One result of one analysis, computed from the workbook's tables (the Results sheet's cells).

    Parameters
    ----------
    quantity : str
        One of :data:`ANALYSIS_QUANTITIES` (``"x"``, ``"x_1s"``, ``"y"``, ``"rho"``, ...).
    analysis : str
        Analysis ID (column A of Samples).
    samples, measured, spikes, standards, constants : 2-D blocks of cell values
        Each sheet's table from its key row (row 4) down, as the cells arrive (float, str, '').
    runs : 2-D block, optional
        The Runs sheet (run means of the Cycles sheet) from its key row down; runs found there take their
        ratios from it.

    Returns
    -------
    float or str
        The value; ``"check"`` returns ``"ok"`` or the list of warnings (poor spike–sample mix,
        implausible masses, magnification, blank share or concentration, inputs with σ = 0).
        ``"sample"``, ``"fraction"``, ``"system"`` return the Samples text.

    Raises
    ------
    CellError
        Naming the sheet, row and column of the first problem.
    """
    a = str(analysis).strip() if not isinstance(analysis, float) else f"{analysis:g}"
    if not a:
        return ""
    rows = tuple(as_rows(t) for t in (samples, measured, spikes, standards, constants))
    return _analysis_cell(quantity, _analysis(a, *rows, runs=_runs_rows(runs)))


def _runs_rows(runs: Any) -> Rows:
    """The Runs block, or () when it is absent or holds no run (the key row alone counts as none)."""
    if runs is None:
        return ()
    r = as_rows(runs)
    return r if any(v != "" for row in r[1:] for v in row[:1]) else ()


def _analysis_cell(quantity: str, outcome: AnalysisOutcome) -> float | str:
    """:func:`analysis_value` once the analysis is reduced."""
    res, eps, x_scale, warnings, std, steps = outcome
    rnd = res.sigma_1s_random
    q = quantity.strip().lower()
    table: Dict[str, Callable[[], Any]] = {
        "parent_conc": lambda: res.parent_conc_ug_g, "parent_conc_1s": lambda: res.parent_conc_sigma_1s,
        "daughter_conc": lambda: res.daughter_conc_ug_g, "daughter_conc_1s": lambda: res.daughter_conc_sigma_1s,
        "x": lambda: res.parent_ratio, "x_1s": lambda: rnd["parent_ratio"],
        "x_2s_pct": lambda: 2 * rnd["parent_ratio"] / res.parent_ratio * 100,
        "x_1s_total": lambda: res.parent_ratio_sigma_1s, "x_spike_1s_pct": lambda: 100 * x_scale,
        "y": lambda: res.daughter_ratio, "y_1s": lambda: rnd["daughter_ratio"],
        "y_2s_ppm": lambda: 2 * rnd["daughter_ratio"] / res.daughter_ratio * 1e6,
        "y_1s_total": lambda: res.daughter_ratio_sigma_1s,
        "rho": lambda: res.rho_random, "eps0": lambda: eps.value, "eps0_2s": lambda: 2 * eps.sigma_1s,
        "blank_share_pct": lambda: 100 * res.blank_share_daughter,
        "check": lambda: ("ok" if not warnings else MARKER + "; ".join(warnings)),
        "beta_parent": lambda: res.parent_bias_factor, "beta_daughter": lambda: res.daughter_bias_factor,
        "mag_parent": lambda: res.parent_magnification, "mag_daughter": lambda: res.daughter_magnification,
        "iterations": lambda: res.iterations, "blank_share_parent_pct": lambda: 100 * res.blank_share_parent,
        "std_factor": lambda: std.factor, "std_factor_1s": lambda: std.factor_sigma_1s_random,
        "std_runs": lambda: std.n, "y_before_factor": lambda: res.daughter_ratio / std.factor,
        "strip_parent_ppm": lambda: steps["strip_parent_ppm"],
        "strip_daughter_ppm": lambda: steps["strip_daughter_ppm"],
        "beta_parent_from": lambda: steps["beta_parent_from"],
    }
    if q not in table:
        raise InputError("quantity", f"unknown quantity {quantity!r}; use one of {', '.join(table)}")
    v = table[q]()
    return v if isinstance(v, str) else float(v)


# --------------------------------------------------------------------------------------------
# isochrons
# --------------------------------------------------------------------------------------------
@lru_cache(maxsize=64)
def _isochron(system: str, treatment: str, selection: Rows, results: Rows, constants: Rows
              ) -> Tuple[Any, Any, Any, str]:
    """(fit, age, ε at the age, why no spike-calibration total ('' when there is one))."""
    sel = Table.from_range(ISOCHRON, selection, ISOCHRON_BLOCK.get(system, (FIRST_ROW, 0))[0])
    res = Table.from_range(RESULTS, results)
    sys_key = _system_of(system)
    x, sx, y, sy, r = [], [], [], [], []
    scales: Dict[str, float] = {}
    used = 0
    listed: Dict[str, int] = {}
    for i in range(len(sel.rows)):
        if not sel.filled(i):
            continue
        a = sel.text(i, "analysis", required=False)
        use = sel.get(i, "use")
        if not a:
            raise sel.error(i, "analysis", "a row with a Use flag but no analysis ID")
        if a.lower() in listed:
            raise sel.error(i, "analysis", f"analysis {shown(a)} is listed twice (first on row {listed[a.lower()]}): "
                            "list each analysis once")
        listed[a.lower()] = sel.first_row + i
        if use == "":
            raise sel.error(i, "use", "is empty: type 1 to use the row or 0 to leave it out")
        if isinstance(use, LogicalCell):
            raise sel.error(i, "use", f"is {str.__str__(use)} (a logical value): type 1 to use the row or 0 to "
                            "leave it out")
        if isinstance(use, SpecialCell) or use not in (0.0, 1.0):
            raise sel.error(i, "use", f"must be 1 or 0, got {shown(use) if isinstance(use, str) else repr(use)}")
        if use == 0.0:
            continue
        hits = res.find(analysis=a)
        if not hits:
            raise sel.error(i, "analysis", f"analysis {shown(a)} is not on the Results sheet")
        j = hits[0]
        try:
            other = _system_of(res.text(j, "system"))
        except InputError as exc:
            raise sel.error(i, "analysis", f"{system}: analysis {shown(a)} (Results row {res.first_row + j}) has "
                            f"the system {shown(res.text(j, 'system'))}: {exc.problem}") from None
        if other != sys_key:
            raise sel.error(i, "analysis", f"analysis {shown(a)} is {res.text(j, 'system')}, not {system}")
        for key, out in (("x", x), ("x_1s", sx), ("y", y), ("y_1s", sy), ("rho", r)):
            v = res.get(j, key)
            if isinstance(v, str) and v.strip():
                raise sel.error(i, "analysis", f"{system}: analysis {shown(a)} (Results row {res.first_row + j}) "
                                f"has no {res.header(key)}: {_cell_message(v)}")
            out.append(res.number(j, key))
        if "spike" in res.keys and "x_spike_1s_pct" in res.keys:
            scales.setdefault(res.text(j, "spike"), res.number(j, "x_spike_1s_pct") / 100.0)
        used += 1
    if used < 2:
        raise CellError("Isochron", None, "B", "Use (1/0)",
                        f"{system}: {used} row(s) selected; an isochron needs at least two")
    col = ISOCHRON_SUMMARY_COL + 1 + ISOCHRON_SYSTEMS.index(system) if system in ISOCHRON_SYSTEMS else None

    def failed(problem: str) -> CellError:
        return CellError("Isochron", None, "B", "Use (1/0)", f"{system}: {problem}")

    def bad_treatment(problem: str) -> CellError:
        return CellError("Isochron", ISOCHRON_TREATMENT_ROW, None if col is None else col_letter(col),
                         "Scatter treatment", f"{system}: {problem}")

    return _fit_age(sys_key, treatment, (x, sx, y, sy, r), scales, constants, failed, bad_treatment)


def _fit_age(sys_key: str, treatment: str, pts: Sequence[Sequence[float]], scales: Mapping[str, float],
             constants: Rows, failed: Callable[[str], CellError], bad_treatment: Callable[[str], CellError]
             ) -> Tuple[Any, Any, Any, str]:
    """(fit, age, ε at the age, why no spike-calibration total) of selected points (x, sx, y, sy, ρ lists).

    The York fit (:func:`reduction.regression.fit_isochron`) and the age (:func:`reduction.ages.isochron_age`)
    shared by the Isochron and Groups sheets; ``scales`` maps each spike of the points to its P/D calibration
    (1σ relative); ``failed`` and ``bad_treatment`` make the message of a failed fit or an unknown treatment.
    """
    from .ages import epsilon, isochron_age
    from .regression import fit_isochron

    try:
        fit = fit_isochron(*pts, treatment=treatment or "analytical")
    except InputError as exc:
        if exc.argument == "treatment":
            raise bad_treatment(exc.problem) from None
        raise failed(f"the isochron fit failed: {exc}") from None
    except RatioDeskError as exc:
        raise failed(f"the isochron fit failed: {exc}") from None
    ref = _refset(constants)
    # one spike: its P/D calibration scales every x alike (a common factor, ages.isochron_age);
    # several spikes: independent factors per group, which one scale factor does not describe
    why = ""
    if not scales:
        why = "n/a: the Results sheet has no spike columns"
    elif len(scales) > 1:
        why = f"n/a: the rows use {len(scales)} spikes ({', '.join(sorted(scales))}); no common x scale"
    ks = next(iter(scales.values())) if len(scales) == 1 else 0.0
    try:
        age = isochron_age(fit, sys_key, ref, x_scale_sigma_rel=ks)
        eps = epsilon(age.initial, age.initial_sigma_1s, 0.0, age.age_ma, sys_key, ref)
    except RatioDeskError as exc:
        raise failed(f"no age from this fit: {exc}") from None
    return fit, age, eps, why


def _cell_message(v: str) -> str:
    """The problem a message cell shows, without its marker (cells that repeat another cell's message)."""
    t = v.strip()
    if t.startswith(MARKER.strip()):
        t = t[len(MARKER.strip()):].strip()
    return t if len(t) <= 300 else t[:297] + "..."


def isochron_value(quantity: str, system: Any, treatment: Any, selection: Any, results: Any,
                   constants: Any) -> float | str:
    """One quantity of an isochron (the Isochron sheet's summary cells).

    ``selection`` is the Isochron sheet's block (key row first: analysis, use, ...) of that system;
    ``results`` the Results table (key row first); ``constants`` the Constants table. ``quantity``
    is one of the first entries of :data:`ISOCHRON_QUANTITIES`. The fit is
    :func:`reduction.regression.fit_isochron` (York et al. 2004, Am. J. Phys. 72, 367) and the age
    :func:`reduction.ages.isochron_age`, with the decay constant of the Constants sheet.
    ``age_2s_total`` adds the spike calibration: every x of an isochron reduced with one spike scales
    with that spike's parent/daughter concentration ratio (Results column ``x_spike_1s_pct``), a
    common factor passed as ``x_scale_sigma_rel``; with rows from several spikes it is text ("n/a").
    """
    return _isochron_cell(quantity, _isochron(str(system).strip(), str(treatment or "").strip().lower(),
                                              as_rows(selection), as_rows(results), as_rows(constants)))


def _isochron_cell(quantity: str, outcome: Tuple[Any, Any, Any, str]) -> float | str:
    """:func:`isochron_value` once the isochron is fitted."""
    fit, age, eps, why = outcome
    q = quantity.strip().lower()
    t95 = fit.t95 if fit.t95 is not None else float("nan")
    table: Dict[str, Callable[[], Any]] = {
        "n": lambda: fit.n, "age": lambda: age.age_ma, "age_2s": lambda: 2 * age.age_sigma_1s_ma,
        "age_2s_lambda": lambda: 2 * age.age_sigma_1s_ma_with_lambda,
        "age_2s_total": lambda: why or 2 * age.age_sigma_1s_ma_total,
        "x_scale_1s_pct": lambda: why or 100 * age.x_scale_sigma_rel,
        "age_95": lambda: _age_95(fit, age, t95),
        "initial": lambda: age.initial, "initial_2s": lambda: 2 * age.initial_sigma_1s,
        "eps_t": lambda: eps.value, "eps_t_2s": lambda: 2 * eps.sigma_1s,
        "mswd": lambda: _none_text(fit.mswd, "n/a for 2 rows"), "p": lambda: _none_text(fit.p_value, "n/a"),
        "slope": lambda: fit.slope, "slope_1s": lambda: fit.slope_sigma_1s,
        "mswd_low": lambda: fit.mswd_limits_95[0] if fit.mswd_limits_95 else "n/a for 2 rows",
        "mswd_high": lambda: fit.mswd_limits_95[1] if fit.mswd_limits_95 else "n/a for 2 rows",
        "message": lambda: _fit_message(fit),
    }
    if q not in table:
        raise InputError("quantity", f"unknown quantity {quantity!r}; use one of {', '.join(table)}")
    v = table[q]()
    return v if isinstance(v, str) else float(v)


# --------------------------------------------------------------------------------------------
# isochron groups (the Groups sheet): the points come from the Samples rows that name the group
# --------------------------------------------------------------------------------------------
def _sample_use(samples: Table, i: int) -> bool:
    """A Samples row's Use in isochron flag: empty or 1 → used, 0 → listed but left out; anything else a problem."""
    use = samples.get(i, "use")
    if use == "":
        return True
    if isinstance(use, LogicalCell):
        raise samples.error(i, "use", f"is {str.__str__(use)} (a logical value): type 1 (or leave it empty) to use "
                            "the row in its group's isochron, 0 to leave it out")
    if isinstance(use, SpecialCell) or use not in (0.0, 1.0):
        raise samples.error(i, "use", f"must be 1, 0 or empty, got {shown(use) if isinstance(use, str) else repr(use)}")
    return use == 1.0


#: A group's member: (analysis, used, [x, sx, y, sy, ρ] or the message of the Results cell that has none,
#: Samples sheet row).
Member = Tuple[str, bool, Any, int]


@lru_cache(maxsize=64)
def _group_members(group: str, samples: Rows, results: Rows) -> Tuple[str, Tuple[Member, ...], Dict[str, float]]:
    """(system key, the group's Samples rows in sheet order, P/D calibration 1σ of each spike of the used rows)."""
    sam = Table.from_range(SAMPLES, samples)
    res = Table.from_range(RESULTS, results)
    want = _norm(group)
    members: List[Member] = []
    system: Optional[Tuple[str, int]] = None
    scales: Dict[str, float] = {}
    for i in range(len(sam.rows)):
        g = sam.get(i, "group")
        if not sam.filled(i) or g == "" or isinstance(g, SpecialCell) or _norm(g) != want:
            continue
        row = sam.first_row + i
        a = sam.text(i, "analysis")
        used = _sample_use(sam, i)
        try:
            key = _system_of(sam.text(i, "system"))
        except InputError as exc:
            raise sam.error(i, "system", f"group {shown(group)}: {exc.problem}") from None
        if system is None:
            system = (key, row)
        elif key != system[0]:
            raise sam.error(i, "group", f"group {shown(group)} mixes {WORKBOOK_SYSTEMS.get(system[0], system[0])} "
                            f"(row {system[1]}) and {WORKBOOK_SYSTEMS.get(key, key)} (this row): one system per group")
        vals: Any = []
        if i < len(res.rows):
            for k in ("x", "x_1s", "y", "y_1s", "rho"):
                v = res.get(i, k)
                if not isinstance(v, float):
                    vals = (f"Results row {row} has no {res.header(k)}: "
                            f"{_cell_message(v) if isinstance(v, str) and v.strip() else 'empty'}")
                    break
                vals.append(v)
        else:
            vals = f"Results row {row} is beyond the Results table"
        if used and isinstance(vals, str):
            raise sam.error(i, "group", f"group {shown(group)}: analysis {shown(a)}: {vals} (fix the analysis, or "
                            "type 0 in Use in isochron to leave it out)")
        if used and "spike" in res.keys and "x_spike_1s_pct" in res.keys:
            scales.setdefault(res.text(i, "spike"), res.number(i, "x_spike_1s_pct") / 100.0)
        members.append((a, used, vals, row))
    if system is None:
        raise CellError("Groups", None, "A", "Isochron group", f"no Samples row names the group {shown(group)} "
                        "(Samples column Isochron group)")
    return system[0], tuple(members), scales


@lru_cache(maxsize=64)
def _group_isochron(group: str, treatment: str, samples: Rows, results: Rows, constants: Rows
                    ) -> Tuple[Any, Any, Any, str]:
    """(fit, age, ε at the age, why no spike-calibration total) of one group's used points."""
    sys_key, members, scales = _group_members(group, samples, results)
    used = [m[2] for m in members if m[1]]
    if len(used) < 2:
        raise CellError("Groups", None, "A", "Isochron group",
                        f"group {shown(group)}: {len(used)} row(s) used; an isochron needs at least two")

    def failed(problem: str) -> CellError:
        return CellError("Groups", None, "A", "Isochron group", f"group {shown(group)}: {problem}")

    def bad_treatment(problem: str) -> CellError:
        return CellError("Groups", None, "B", "Scatter treatment", f"group {shown(group)}: {problem}")

    pts = [list(c) for c in zip(*used)]
    return _fit_age(sys_key, treatment, pts, scales, constants, failed, bad_treatment)


def group_value(quantity: str, group: Any, treatment: Any, samples: Any, results: Any, constants: Any
                ) -> float | str:
    """One quantity of a group's isochron (the Groups sheet's computed cells).

    The points are the Samples rows whose Isochron group is ``group`` (trimmed, any case) and whose Use in
    isochron is 1 or empty, with x, sx, y, sy and ρ from the Results row of the same sheet row. ``quantity`` is
    ``system`` or one of :data:`ISOCHRON_QUANTITIES`; the fit is :func:`reduction.regression.fit_isochron`
    (York et al. 2004, Am. J. Phys. 72, 367) and the age :func:`reduction.ages.isochron_age`, as on the
    Isochron sheet.
    """
    g = str(group).strip()
    if not g:
        raise InputError("group", "is empty")
    if quantity.strip().lower() == "system":
        key = _group_members(g, as_rows(samples), as_rows(results))[0]
        return WORKBOOK_SYSTEMS.get(key, key)
    return _isochron_cell(quantity, _group_isochron(g, str(treatment or "").strip().lower(), as_rows(samples),
                                                    as_rows(results), as_rows(constants)))


def group_points(group: Any, samples: Any, results: Any) -> Tuple[Tuple[Any, ...], ...]:
    """The Groups sheet's point list of one group: analysis, use (1/0), x, sx, y, sy, ρ per member row, padded
    with empty rows to :data:`GROUP_POINTS_CAP` rows (an unused row without numbers shows why)."""
    g = str(group).strip()
    rows: List[Tuple[Any, ...]] = []
    if g:
        _key, members, _scales = _group_members(g, as_rows(samples), as_rows(results))
        for a, used, vals, _row in members:
            nums = tuple(vals) if not isinstance(vals, str) else (MARKER + vals, "", "", "", "")
            rows.append((a, 1.0 if used else 0.0) + nums)
    if len(rows) > GROUP_POINTS_CAP:
        raise InputError("group", f"group {shown(g)} has {len(rows)} rows, more than the {GROUP_POINTS_CAP} the "
                         "list holds")
    return tuple(rows) + (("",) * len(GROUP_POINT_COLUMNS),) * (GROUP_POINTS_CAP - len(rows))


def group_outlines(kind: str, group: Any, groups: Any, samples: Any, results: Any, constants: Any
                   ) -> Tuple[Tuple[Any, Any], ...]:
    """The 95 % error ellipses of a group's used points, stacked for one chart series: each outline
    (ELLIPSE_POINTS + 1 rows of x, y, closed) followed by an empty row, padded to :data:`GROUP_OUTLINE_ROWS`.

    ``kind`` ``ellipse``: at full scale (:func:`reduction.regression.ellipse_points`); ``deviation``: x against
    the deviation from the group's fitted line in ppm (:func:`reduction.regression.deviation_points`), the line
    fitted with the treatment the Groups table gives the group.
    """
    from .regression import deviation_points, ellipse_points

    k = kind.strip().lower()
    if k not in ("ellipse", "deviation"):
        raise InputError("kind", f"unknown kind {kind!r}; use ellipse or deviation")
    g = str(group).strip()
    out: List[Tuple[Any, Any]] = []
    if g:
        _key, members, _scales = _group_members(g, as_rows(samples), as_rows(results))
        line: Tuple[float, float] = (0.0, 0.0)
        if k == "deviation":
            tab = Table.from_range(GROUPS, as_rows(groups))
            hits = tab.find(group=g)
            treatment = tab.text(hits[0], "treatment", required=False).lower() if hits else ""
            outcome = _group_isochron(g, treatment, as_rows(samples), as_rows(results), as_rows(constants))
            line = (float(_isochron_cell("slope", outcome)), float(_isochron_cell("initial", outcome)))
        for a, used, vals, row in members:
            if not used:
                continue
            try:
                if k == "ellipse":
                    xs, ys = ellipse_points(*vals, n_points=ELLIPSE_POINTS, confidence=ELLIPSE_CONFIDENCE)
                else:
                    xs, ys = deviation_points(*vals, *line, n_points=ELLIPSE_POINTS, confidence=ELLIPSE_CONFIDENCE)
            except RatioDeskError as exc:
                raise CellError("Samples", row, None, "", f"group {shown(g)}: the ellipse of analysis {shown(a)}: "
                                f"{exc}") from None
            out += [(float(u), float(v)) for u, v in zip(xs.tolist(), ys.tolist())] + [("", "")]
    return tuple(out) + (("", ""),) * (GROUP_OUTLINE_ROWS - len(out))


def unlisted_groups(groups: Any, samples: Any) -> str:
    """Empty, or a message naming the groups the Samples sheet names that the Groups table does not list."""
    tab = Table.from_range(GROUPS, as_rows(groups))
    listed = {_norm(tab.get(i, "group")) for i in range(len(tab.rows)) if tab.filled(i)}
    sam = Table.from_range(SAMPLES, as_rows(samples))
    missing: Dict[str, List[int]] = {}
    if "group" not in sam.keys:         # a Samples sheet of an earlier template: no groups
        return ""
    for i in range(len(sam.rows)):
        g = sam.get(i, "group")
        if sam.filled(i) and g != "" and not isinstance(g, SpecialCell) and _norm(g) not in listed:
            missing.setdefault(str(g).strip(), []).append(sam.first_row + i)
    if not missing:
        return ""
    names = "; ".join(f"{shown(g)} (Samples row{'s' if len(r) > 1 else ''} {', '.join(map(str, r[:5]))}"
                      f"{', …' if len(r) > 5 else ''})" for g, r in missing.items())
    return (f"{MARKER}groups named on Samples but not listed above, so not fitted: {names} — type each name in "
            "column A")


def _none_text(v: Optional[float], text: str) -> float | str:
    return text if v is None else float(v)


def _age_95(fit: Any, age: Any, t95: float) -> float:
    v = getattr(age, "age_sigma_95_expanded_ma", None)
    if v is not None:
        return float(v)
    scale = math.sqrt(max(fit.mswd or 1.0, 1.0))
    return float(t95 * scale * age.age_sigma_1s_ma)


def _fit_message(fit: Any) -> str:
    """"ok", or the notes on the MSWD test (:func:`reduction.regression.mswd_notes`): no MSWD for two
    rows, a weak test at dof <= 2, an MSWD outside its χ² 5–95 % range (Wendt & Carl 1991)."""
    from .regression import mswd_notes

    notes = mswd_notes(fit)
    return "; ".join(notes) if notes else "ok"


# --------------------------------------------------------------------------------------------
# formulas for the grid
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Ref:
    """A cell or range reference for a formula (0-based columns, 1-based rows)."""

    sheet: str
    col: int
    row: int
    col2: Optional[int] = None
    row2: Optional[int] = None
    absolute: bool = True
    abs_col_only: bool = False

    def xlsx(self, here: str) -> str:
        def one(c: int, r: int) -> str:
            if self.absolute:
                return f"${col_letter(c)}${r}"
            if self.abs_col_only:
                return f"${col_letter(c)}{r}"
            return f"{col_letter(c)}{r}"
        s = one(self.col, self.row)
        if self.col2 is not None:
            s += ":" + one(self.col2, self.row2 or self.row)
        return s if self.sheet == here else f"{self.sheet}!{s}"

    def ods(self, here: str) -> str:
        def one(c: int, r: int, sheet: str) -> str:
            if self.absolute:
                cell = f"${col_letter(c)}${r}"
            elif self.abs_col_only:
                cell = f"${col_letter(c)}{r}"
            else:
                cell = f"{col_letter(c)}{r}"
            return f"${sheet}.{cell}" if sheet else f".{cell}"
        sheet = self.sheet if self.sheet != here else ""
        s = one(self.col, self.row, sheet)
        if self.col2 is not None:
            s += ":" + one(self.col2, self.row2 or self.row, "")
        return f"[{s}]"


@dataclass(frozen=True)
class Formula:
    """A formula: an add-in call (``method``) or a native function, with literal/Ref arguments."""

    func: str
    args: Tuple[Any, ...]
    addin: bool = True
    guard: Optional[Ref] = None   # IF(guard="";"";...)

    def _arg(self, a: Any, here: str, fmt: str) -> str:
        if isinstance(a, Ref):
            return a.xlsx(here) if fmt == "xlsx" else a.ods(here)
        if isinstance(a, Formula):
            return a.render(here, fmt, top=False)
        if isinstance(a, str):
            return '"' + a.replace('"', '""') + '"'
        a = float(a)
        return str(int(a)) if a.is_integer() and abs(a) < 1e15 else repr(a)

    def render(self, here: str, fmt: str, top: bool = True) -> str:
        sep = "," if fmt == "xlsx" else ";"
        name = f"{SERVICE}.{self.func.upper()}" if self.addin else self.func
        body = f"{name}(" + sep.join(self._arg(a, here, fmt) for a in self.args) + ")"
        if self.guard is not None:
            g = self._arg(self.guard, here, fmt)
            body = f'IF({g}=""{sep}""{sep}{body})'
        if not top:
            return body
        return "=" + body if fmt == "xlsx" else "of:=" + body


def table_ref(sheet: Sheet) -> Ref:
    name, r1, c1, r2, c2 = sheet.range_ref()
    return Ref(name, c1, r1, c2, r2)


def isochron_selection_ref(system: str) -> Ref:
    """The selection block of one system on the Isochron sheet, with its key row first.

    The key row is row 4 and the block's rows follow; the function receives a contiguous range,
    so each system's block repeats the key row above itself (row 4 for Sm-Nd, the row above the
    Lu-Hf block for Lu-Hf).
    """
    first, last = ISOCHRON_BLOCK[system]
    return Ref("Isochron", 0, first - 1, len(ISOCHRON.columns) - 1, last)


def results_formula(column: Column, row: int, sheet: str = "Results") -> Formula:
    """The formula of one Results (or Steps) cell (row is the sheet row)."""
    here = Ref(sheet, 0, row, absolute=False, abs_col_only=True)
    if column.quantity in COPIED_FROM_SAMPLES:
        src = Ref("Samples", SAMPLES.col_index(column.quantity), row, absolute=False)
        return Formula("IF", (Formula("ISBLANK", (src,), addin=False), "", src), addin=False)
    args = (column.quantity, here, table_ref(SAMPLES), table_ref(MEASURED), table_ref(SPIKES),
            table_ref(STANDARDS), table_ref(CONSTANTS), table_ref(RUNS))
    return Formula("rdWorkbookAnalysis", args, guard=here)


def array_formulas() -> Dict[Tuple[str, int, int], Tuple[Formula, Tuple[int, int]]]:
    """The template's table-wide array formulas: (sheet, top row, left column) -> (formula, (rows, columns)).

    The Cycles sheet's Kept column and the whole Runs sheet are each one call over the Cycles table, so a
    cycle edit recalculates them once (not once per cell); the Groups sheet's point list and the two outline
    columns of its charts are one call each.
    """
    cyc = (table_ref(CYCLES), table_ref(CONSTANTS))
    drawn = Ref("Groups", 2, GROUP_CHART_ROW)
    books = (table_ref(SAMPLES), table_ref(RESULTS))
    outline = (drawn, table_ref(GROUPS)) + books + (table_ref(CONSTANTS),)
    return {("Cycles", FIRST_ROW, CYCLES.col_index("kept")): (Formula("rdWorkbookCycleKept", cyc),
                                                             (CYCLES.capacity, 1)),
            ("Runs", FIRST_ROW, 0): (Formula("rdWorkbookCycleRuns", cyc), (RUNS.capacity, len(RUNS.columns))),
            ("Groups", GROUP_POINTS_TOP, 0): (Formula("rdWorkbookGroupPoints", (drawn,) + books),
                                              (GROUP_POINTS_CAP, len(GROUP_POINT_COLUMNS))),
            ("Groups", GROUP_POINTS_TOP, GROUP_ELLIPSE_COL): (
                Formula("rdWorkbookGroupOutlines", ("ellipse",) + outline), (GROUP_OUTLINE_ROWS, 2)),
            ("Groups", GROUP_POINTS_TOP, GROUP_DEVIATION_COL): (
                Formula("rdWorkbookGroupOutlines", ("deviation",) + outline), (GROUP_OUTLINE_ROWS, 2))}


def group_formula(column: Column, row: int) -> Formula:
    """The formula of one computed Groups cell (a quantity of the row's group isochron)."""
    def here(key: str) -> Ref:
        return Ref("Groups", GROUPS.col_index(key), row, absolute=False, abs_col_only=True)

    return Formula("rdWorkbookGroup", (column.quantity, here("group"), here("treatment"), table_ref(SAMPLES),
                                       table_ref(RESULTS), table_ref(CONSTANTS)), guard=here("group"))


def group_drawn_formula() -> Formula:
    """The group the Groups charts draw: the chart cell (column B), or when it is empty the first group."""
    typed, first = Ref("Groups", 1, GROUP_CHART_ROW), Ref("Groups", 0, FIRST_ROW)
    fallback = Formula("IF", (Formula("ISBLANK", (first,), addin=False), "", first), addin=False)
    return Formula("IF", (Formula("ISBLANK", (typed,), addin=False), fallback, typed), addin=False)


def standards_formula(column: Column, row: int) -> Formula:
    """The formula of one computed Standards cell (role, factor, normalised, check statistics)."""
    def here(key: str) -> Ref:
        return Ref("Standards", STANDARDS.col_index(key), row, absolute=False, abs_col_only=True)

    args = (column.quantity, here("session"), here("material"), here("ratio"), here("measured"),
            table_ref(STANDARDS), table_ref(CONSTANTS))
    return Formula("rdWorkbookStandard", args, guard=here("session"))


def spikes_formula(row: int) -> Formula:
    """The Spikes sheet's computed cell: the ratios a run of the row's element must give."""
    def here(key: str) -> Ref:
        return Ref("Spikes", SPIKES.col_index(key), row, absolute=False, abs_col_only=True)

    return Formula("rdWorkbookRunRatios", (here("element"), here("spike_isotope")), guard=here("element"))


def isochron_point_formula(column: Column, row: int) -> Formula:
    """x, sx, y, sy, ρ of a selected row: looked up on the Results sheet by analysis ID."""
    here = Ref("Isochron", 0, row, absolute=False, abs_col_only=True)
    col = RESULTS.col_index(column.quantity)
    target = Ref("Results", col, FIRST_ROW, col, RESULTS.last_row)
    keys = Ref("Results", 0, FIRST_ROW, 0, RESULTS.last_row)
    match = Formula("MATCH", (here, keys, 0.0), addin=False)
    return Formula("INDEX", (target, match), addin=False, guard=here)


def isochron_summary_formula(quantity: str, system: str, treatment_cell: Ref) -> Formula:
    return Formula("rdWorkbookIsochron", (quantity, system, treatment_cell, isochron_selection_ref(system),
                                       table_ref(RESULTS), table_ref(CONSTANTS)))


#: The last row of a sheet in LibreOffice Calc (and in an .xlsx).
SHEET_MAX_ROW = 1_048_576
#: Where the template tells a Calc user that rows below a table's template rows are not reduced: the
#: first Results row below its formula rows (where the next result would be looked for).
CAPACITY_CELL = ("Results", RESULTS.last_row + 1, 0)


def capacity_formula() -> Formula:
    """The template's capacity check (a native formula, shown in :data:`CAPACITY_CELL`).

    Empty while every filled cell of the input tables is within the template's rows; otherwise it names
    each sheet with filled cells below them (their count, the last template row and the row capacity)
    and how to proceed. The batch path reads every row and writes its own results there instead.
    """
    parts, counts = [], []
    for sheet in (SAMPLES, MEASURED, SPIKES, STANDARDS, CONSTANTS):
        below = Ref(sheet.name, 0, sheet.last_row + 1, sheet.input_width - 1, SHEET_MAX_ROW)
        count = Formula("COUNTA", (below,), addin=False)
        counts.append(count)
        parts.append(Formula("IF", (count, Formula("CONCATENATE", (
            f"{sheet.name}: ", count, f" filled cell(s) below row {sheet.last_row} (the template has "
            f"{sheet.capacity} rows); "), addin=False), ""), addin=False))
    message = Formula("CONCATENATE", (MARKER + "not reduced in Calc — ", *parts,
                                      "ratiodesk reduce reads every row; or split the workbook"), addin=False)
    return Formula("IF", (Formula("OR", tuple(counts), addin=False), message, ""), addin=False)


#: Where the template says that runs on Measured name an analysis that Samples does not list (such runs
#: are not reduced): the cell below :data:`CAPACITY_CELL`.
ORPHAN_CELL = ("Results", RESULTS.last_row + 2, 0)


def orphan_message(count: Any) -> str:
    """The text of :data:`ORPHAN_CELL` for ``count`` unmatched runs (shared by Calc and the batch path)."""
    return (f"{MARKER}Measured: {count} run(s) name an analysis that is not on Samples; they are not "
            "reduced — add the analysis on Samples or correct the ID")


def orphan_formula() -> Formula:
    """Count of filled Measured analysis IDs that match no Samples ID (trimmed, as the add-in compares
    them; MATCH ignores case as the add-in does), and :func:`orphan_message` when there are any."""
    ids = Ref(MEASURED.name, 0, FIRST_ROW, 0, MEASURED.last_row)
    keys = Ref(SAMPLES.name, 0, FIRST_ROW, 0, SAMPLES.last_row)
    unmatched = Formula("ISNA", (Formula("MATCH", (Formula("TRIM", (ids,), addin=False),
                                                  Formula("TRIM", (keys,), addin=False), 0.0), addin=False),),
                        addin=False)
    filled = Formula("NOT", (Formula("ISBLANK", (ids,), addin=False),), addin=False)
    count = Formula("SUMPRODUCT", (unmatched, filled), addin=False)
    head, _n, tail = orphan_message("\0").partition("\0")
    return Formula("IF", (count, Formula("CONCATENATE", (head, count, tail), addin=False), ""), addin=False)


def unmatched_runs(samples: Table, measured: Table) -> List[str]:
    """One warning per Measured run whose analysis ID matches no Samples row (never silently skipped)."""
    known = {_norm(samples.get(i, "analysis")) for i in range(len(samples.rows)) if samples.filled(i)}
    out = []
    for i in range(len(measured.rows)):
        a = measured.get(i, "analysis")
        if not measured.filled(i) or a == "" or isinstance(a, SpecialCell) or _norm(a) in known:
            continue
        out.append(f"Measured!A{measured.first_row + i}: the run of analysis {shown(a)} "
                   f"(element {shown(measured.get(i, 'element'))}) matches no analysis on Samples and is not reduced — "
                   "add the analysis on Samples or correct the ID")
    return out


def selection_rows() -> List[Tuple[str, int]]:
    """(system, sheet row) of every isochron selection row, in order."""
    return [(system, row) for system, (first, last) in ISOCHRON_BLOCK.items() for row in range(first, last + 1)]


def ellipse_formulas() -> Dict[Tuple[int, int], Tuple[Formula, int]]:
    """(top row, left column) of each ellipse array formula on the Isochron sheet -> (formula, selection row)."""
    out: Dict[Tuple[int, int], Tuple[Formula, int]] = {}
    for k, (_system, row) in enumerate(selection_rows()):
        here = Ref("Isochron", 0, row, absolute=False, abs_col_only=True)
        args = tuple(Ref("Isochron", ISOCHRON.col_index(key), row, absolute=False, abs_col_only=True)
                     for key in ("x", "x_1s", "y", "y_1s", "rho")) + (float(ELLIPSE_POINTS), ELLIPSE_CONFIDENCE)
        out[(FIRST_ROW, ELLIPSE_COL0 + 2 * k)] = (Formula("rdEllipse", args, guard=here), row)
    return out


def deviation_formulas() -> Dict[Tuple[int, int], Tuple[Formula, int, str]]:
    """(top row, left column) of each deviation-ellipse array formula -> (formula, selection row, system).

    Beside the ellipse outlines: the same point's 95 % ellipse as x against its deviation from the system's
    fitted line in ppm (rdDeviationEllipse, the report's deviation panel), for the deviation chart.
    """
    out: Dict[Tuple[int, int], Tuple[Formula, int, str]] = {}
    rows = selection_rows()
    q = {name: ISOCHRON_FIRST_Q_ROW + i for i, (name, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}
    for k, (system, row) in enumerate(rows):
        col = ISOCHRON_SUMMARY_COL + 1 + ISOCHRON_SYSTEMS.index(system)
        here = Ref("Isochron", 0, row, absolute=False, abs_col_only=True)
        args = tuple(Ref("Isochron", ISOCHRON.col_index(key), row, absolute=False, abs_col_only=True)
                     for key in ("x", "x_1s", "y", "y_1s", "rho"))
        args += (Ref("Isochron", col, q["slope"]), Ref("Isochron", col, q["initial"]), float(ELLIPSE_POINTS),
                 ELLIPSE_CONFIDENCE)
        out[(FIRST_ROW, DEVIATION_COL0 + 2 * k)] = (Formula("rdDeviationEllipse", args, guard=here), row, system)
    return out


def all_computed_cells() -> List[Tuple[str, int, int]]:
    """Every computed cell, ellipse outlines included (for comparing the grid with the batch path)."""
    cells = set(expected_formulas())
    for (sheet, top, left), (_f, (nr, nc)) in array_formulas().items():
        cells.update((sheet, top + r, left + c) for r in range(nr) for c in range(nc))
    for (top, left), _f in list(ellipse_formulas().items()) + list(deviation_formulas().items()):
        for r in range(top, top + ELLIPSE_POINTS + 1):
            cells.update({("Isochron", r, left), ("Isochron", r, left + 1)})
    return sorted(cells)


def expected_formulas() -> Dict[Tuple[str, int, int], Formula]:
    """Every computed cell of the template: (sheet, row, 0-based column) -> formula."""
    out: Dict[Tuple[str, int, int], Formula] = {}
    for row in range(FIRST_ROW, STANDARDS.last_row + 1):
        for j, c in enumerate(STANDARDS.columns):
            if c.computed:
                out[("Standards", row, j)] = standards_formula(c, row)
    for row in range(FIRST_ROW, SPIKES.last_row + 1):
        out[("Spikes", row, SPIKES.col_index("run_ratios"))] = spikes_formula(row)
    for sh in ROW_SHEETS:
        for row in range(FIRST_ROW, sh.last_row + 1):
            for j, c in enumerate(sh.columns):
                out[(sh.name, row, j)] = results_formula(c, row, sh.name)
    for first, last in ISOCHRON_BLOCK.values():
        for row in range(first, last + 1):
            for j, c in enumerate(ISOCHRON.columns):
                if c.computed:
                    out[("Isochron", row, j)] = isochron_point_formula(c, row)
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        col = ISOCHRON_SUMMARY_COL + 1 + k
        tcell = Ref("Isochron", col, ISOCHRON_TREATMENT_ROW)
        for q_i, (q, _label, _unit) in enumerate(ISOCHRON_QUANTITIES):
            out[("Isochron", ISOCHRON_FIRST_Q_ROW + q_i, col)] = isochron_summary_formula(q, system, tcell)
    for row in range(FIRST_ROW, GROUPS.last_row + 1):
        for j, c in enumerate(GROUPS.columns):
            if c.computed:
                out[("Groups", row, j)] = group_formula(c, row)
    out[GROUP_UNLISTED_CELL] = Formula("rdWorkbookGroupsUnlisted", (table_ref(GROUPS), table_ref(SAMPLES)))
    out[("Groups", GROUP_CHART_ROW, 2)] = group_drawn_formula()
    out[CAPACITY_CELL] = capacity_formula()
    out[ORPHAN_CELL] = orphan_formula()
    return out


_WS = re.compile(r"\s+")


def normalise_formula(text: str) -> str:
    """Formula text in a comparable form (no ``of:``, no whitespace, upper case, ``;`` → ``,``)."""
    t = text.strip()
    if t.startswith("of:"):
        t = t[3:]
    t = _WS.sub("", t).upper().replace(";", ",")
    t = re.sub(r"\[\$?([A-Z0-9_]+)?\.?", lambda m: (m.group(1) + "!" if m.group(1) else ""), t)
    t = t.replace("]", "").replace(":.", ":")
    return t.lstrip("=")


def formula_drift(formulas: Mapping[Tuple[str, int, int], str]) -> List[str]:
    """Computed cells whose formula differs from the template definition (edited by a user)."""
    out = []
    for (sheet, row, col), f in sorted(expected_formulas().items()):
        have = formulas.get((sheet, row, col))
        if have is None:
            continue
        fmt = "ods" if have.startswith("of:") else "xlsx"
        if normalise_formula(have) != normalise_formula(f.render(sheet, fmt)):
            out.append(f"{sheet}!{col_letter(col)}{row}: formula differs from the template ({have})")
    return out


# --------------------------------------------------------------------------------------------
# the batch evaluator
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Evaluation:
    """Every computed cell of a workbook, evaluated by the engine (no LibreOffice)."""

    cells: Dict[Tuple[str, int, int], Any]
    errors: Tuple[CellError, ...]
    warnings: Tuple[str, ...]


def sheet_block(grid: Mapping[str, Sequence[Sequence[Cell]]], sheet: str, r1: int, c1: int, r2: int,
                c2: int) -> Rows:
    """Cells of a rectangle (1-based rows, 0-based columns) of a sheet grid, padded with ''."""
    g = grid.get(sheet, ())
    out = []
    for r in range(r1, r2 + 1):
        row = g[r - 1] if r - 1 < len(g) else ()
        out.append(tuple(_clean(row[c]) if c < len(row) else "" for c in range(c1, c2 + 1)))
    return tuple(out)


def _block(grid: Mapping[str, Sequence[Sequence[Cell]]], ref: Ref) -> Rows:
    return sheet_block(grid, ref.sheet, ref.row, ref.col, ref.row2 or ref.row, ref.col2 if ref.col2 is not None
                       else ref.col)


def _point(pt: Sequence[Cell], row: Optional[int], what: str) -> Tuple[str, List[float]]:
    """(analysis label, [x, sx, y, sy, ρ]) of one selection row, each a number, else the message of its cell."""
    ci = [ISOCHRON.col_index(k) for k in ("x", "x_1s", "y", "y_1s", "rho")]
    vals = [pt[i] for i in ci]
    a = pt[0] if not isinstance(pt[0], float) else f"{pt[0]:g}"
    for v, i in zip(vals, ci):
        if not isinstance(v, float):
            text = _cell_message(str(v)) if isinstance(v, str) and v.strip() else repr(v)
            err = FollowOnError if isinstance(v, str) and v.strip().startswith(MARKER.strip()) else CellError
            raise err("Isochron", row, col_letter(i), ISOCHRON.columns[i].header,
                      f"{what} of analysis {shown(a)} needs a number here, the cell shows: {text}")
    return a, vals


def _ellipse(pt: Sequence[Cell], row: Optional[int] = None) -> List[Tuple[float, float]]:
    """The ellipse outline of one selection row (sheet row ``row``), as the ellipse cell function returns it."""
    from .regression import ellipse_points

    a, vals = _point(pt, row, "ellipse")
    try:
        xs, ys = ellipse_points(*vals, n_points=ELLIPSE_POINTS, confidence=ELLIPSE_CONFIDENCE)
    except InputError as exc:
        raise CellError("Isochron", row, None, "", f"ellipse of analysis {shown(a)}: {exc}") from None
    return [(float(a), float(b)) for a, b in zip(xs.tolist(), ys.tolist())]


def _deviation(pt: Sequence[Cell], row: int, line: Sequence[Any]) -> List[Tuple[float, float]]:
    """The deviation outline of one selection row, as rdDeviationEllipse returns it."""
    from .regression import deviation_points

    a, vals = _point(pt, row, "ellipse")        # the point's own cells: the same messages as its ellipse
    if not all(isinstance(v, float) for v in line):
        bad = next(v for v in line if not isinstance(v, float))
        raise FollowOnError("Isochron", row, None, "", f"deviation of analysis {shown(a)}: the isochron has no line "
                            f"({_cell_message(str(bad)) if str(bad).strip() else 'no fit'})")
    try:
        xs, ds = deviation_points(*vals, line[0], line[1], n_points=ELLIPSE_POINTS, confidence=ELLIPSE_CONFIDENCE)
    except RatioDeskError as exc:
        raise CellError("Isochron", row, None, "", f"deviation of analysis {shown(a)}: {exc}") from None
    return [(float(u), float(v)) for u, v in zip(xs.tolist(), ds.tolist())]


def _raise(exc: Exception) -> Any:
    raise exc


#: Data rows per table sheet the batch path reads at most (bounds memory and time): a sheet with more
#: filled rows is refused with a message (split the workbook), never read in part.
MAX_DATA_ROWS = 20_000
#: The last sheet row a reader keeps (data rows start at :data:`FIRST_ROW`).
MAX_SHEET_ROW = FIRST_ROW - 1 + MAX_DATA_ROWS


def too_many_rows(sheet: str, filled: int, first_beyond: int, more: str = "") -> CellError:
    """The message for a sheet with more filled data rows than :data:`MAX_DATA_ROWS`."""
    return CellError(sheet, first_beyond, None, "",
                     f"the sheet has {filled:,} filled data rows{more}, more than the {MAX_DATA_ROWS:,} per sheet "
                     f"ratiodesk reduce reads (rows {FIRST_ROW}-{MAX_SHEET_ROW:,}); nothing was read in part: split "
                     f"the workbook into several of at most {MAX_DATA_ROWS:,} rows per sheet")


def last_filled_row(grid: Mapping[str, Sequence[Sequence[Cell]]], sheet: Sheet) -> int:
    """The last sheet row with a filled cell in the input columns of a table sheet (0: none)."""
    g = grid.get(sheet.name, ())
    width = sheet.input_width
    for r in range(len(g), FIRST_ROW - 1, -1):
        row = g[r - 1]
        if any(not blank(v) for v in row[:width]):
            return r
    return 0


def table_extent(grid: Mapping[str, Sequence[Sequence[Cell]]], sheet: Sheet) -> int:
    """The last sheet row of a table as the batch path reads it: the template's rows, or further down
    to the last filled row (every filled row is reduced, :data:`MAX_DATA_ROWS` at most)."""
    last = last_filled_row(grid, sheet)
    if last > MAX_SHEET_ROW:
        g = grid.get(sheet.name, ())
        filled = sum(1 for r in g[FIRST_ROW - 1:] if any(not blank(v) for v in r[:sheet.input_width]))
        raise too_many_rows(sheet.name, filled, MAX_SHEET_ROW + 1)
    return max(sheet.last_row, last)


def _beyond_template(grid: Mapping[str, Sequence[Sequence[Cell]]], sheet: Sheet) -> Optional[CellError]:
    """The first filled row below a table's template rows, as a message (None when there is none)."""
    g = grid.get(sheet.name, ())
    rows = [r for r in range(sheet.last_row + 1, len(g) + 1)
            if any(not blank(v) for v in g[r - 1][:sheet.input_width])]
    if not rows:
        return None
    return CellError(sheet.name, rows[0], None, "",
                     f"{len(rows)} filled row(s) below row {sheet.last_row}, outside the template's "
                     f"{sheet.capacity} rows: LibreOffice Calc does not reduce them (ratiodesk reduce reduces "
                     f"every row); or split the workbook")


EXTENTS = ("data", "template")


class BookTables:
    """The input tables of a grid, each read once with indexed look-ups (the batch path).

    ``rows`` holds each table key row first, to its extent (:func:`table_extent`, or the template's
    rows with ``extent="template"``); the session standards are computed once per session and ratio.
    """

    def __init__(self, grid: Mapping[str, Sequence[Sequence[Cell]]], extent: str = "data") -> None:
        sheets = [SHEET_BY_NAME[n] for n in ("Samples", "Measured", "Spikes", "Standards", "Constants", "Cycles")]
        self.last = {sh.name: table_extent(grid, sh) if extent == "data" else sh.last_row for sh in sheets}
        self.rows: Dict[str, Rows] = {sh.name: sheet_block(grid, sh.name, KEY_ROW, 0, self.last[sh.name],
                                                           sh.input_width - 1) for sh in sheets}
        self.samples = Table.from_range(SAMPLES, self.rows["Samples"])
        self.measured = Table.from_range(MEASURED, self.rows["Measured"])
        self.spikes = Table.from_range(SPIKES, self.rows["Spikes"])
        self.standards = Table.from_range(STANDARDS, self.rows["Standards"])
        self._sessions: Dict[Tuple[str, str], Any] = {}
        #: The Runs table (the run means of the Cycles sheet), computed on first use (:meth:`runs_table`).
        self.runs: Optional[Table] = None
        self._runs_read = False

    def runs_table(self) -> Optional[Table]:
        """The Runs table of the Cycles sheet (None without cycles); a Cycles problem raises its CellError."""
        if not self._runs_read:
            self._runs_read = True
            got = _cycle_table(self.rows["Cycles"], self.rows["Constants"])
            if got[0]:
                keys = tuple(c.key for c in RUNS.columns)
                self.runs = Table.from_range(RUNS, (keys,) + tuple(tuple(r) for r in got[0]))
        return self.runs

    def session_standards(self, ses: str, rat: str) -> SessionStandards:
        """:func:`_session_standards` of one session and ratio (its problem, if any, raised each time)."""
        key = (ses, rat)
        if key not in self._sessions:
            try:
                self._sessions[key] = _session_standards(self.rows["Standards"], self.rows["Constants"], ses, rat)
            except CellError as exc:
                self._sessions[key] = exc
        got = self._sessions[key]
        if isinstance(got, CellError):
            raise got
        return got

    def standard(self, session: str, ratio: str, where: Callable[[str], CellError]) -> Any:
        """The session factor, as :func:`_standard` gives it."""
        if not self.standards.find(session=session, ratio=ratio):
            raise where(f"no {ratio} reference-material runs for session {shown(session)} on the Standards sheet")
        return self.session_standards(session, ratio).factor

    def analysis(self, analysis: str, mc_draws: int = 0) -> AnalysisOutcome:
        """:func:`_analysis` of one analysis ID (optionally with a seeded Monte Carlo)."""
        try:
            runs = self.runs_table()
        except CellError:
            runs = None           # the Cycles sheet's own cells carry its problem (see evaluate)
        return _analysis_of(analysis, self.samples, self.measured, self.spikes, self.standard,
                            self.rows["Constants"], mc_draws, runs)


def evaluate(grid: Mapping[str, Sequence[Sequence[Cell]]], *, strict: bool = True,
             extent: str = "data") -> Evaluation:
    """Compute every computed cell from the input cells of ``grid`` (sheet -> rows of values).

    Parameters
    ----------
    grid : mapping of sheet name to rows of cell values
        The typed inputs; computed cells already in it are ignored. The order is the grid's
        dependency order: Standards, Results, then the Isochron points, then the Isochron summaries.
    strict : bool
        The first problem raises :class:`CellError`; otherwise problems are collected and the
        cell holds the message, as it would in LibreOffice.
    extent : {"data", "template"}
        ``"data"`` (the batch path) reads every filled row of a table, below the template's rows too
        (:data:`MAX_DATA_ROWS` per sheet at most), and writes a Results row for each Samples row.
        ``"template"`` evaluates what LibreOffice Calc evaluates (the template's rows) and reports the
        first filled row below them on each sheet as a problem, so no row goes unreduced unnoticed.

    Returns
    -------
    Evaluation
        Every computed cell's value, the problems and the warnings.
    """
    if extent not in EXTENTS:
        raise InputError("extent", f"must be one of {', '.join(EXTENTS)}, got {extent!r}")
    work: Dict[str, List[List[Cell]]] = {s: [list(r) for r in rows] for s, rows in grid.items()}
    cells: Dict[Tuple[str, int, int], Any] = {}
    errors: List[CellError] = []
    listed: set = set()
    warnings: List[str] = []

    def put(sheet: str, row: int, col: int, v: Any) -> None:
        g = work.setdefault(sheet, [])
        while len(g) < row:
            g.append([])
        r = g[row - 1]
        while len(r) <= col:
            r.append("")
        r[col] = v
        cells[(sheet, row, col)] = v

    def put_outline(top: int, left: int, vals: Any) -> None:
        """An outline array (ELLIPSE_POINTS + 1 rows x 2) as Calc shows it: "" fills the whole range, a message
        shows in the first cell and #N/A beside it (what Calc shows beside a one-cell answer in a larger range)."""
        for i in range(ELLIPSE_POINTS + 1):
            for j in (0, 1):
                if not isinstance(vals, str):
                    v = vals[i][j]
                elif vals == "" or (i == 0 and j == 0):
                    v = vals
                else:
                    v = "#N/A"
                put("Isochron", top + i, left + j, v)

    def run(f: Callable[[], Any]) -> Any:
        try:
            return f()
        except CellError as exc:
            if strict:
                raise
            if not isinstance(exc, FollowOnError) and str(exc) not in listed:
                listed.add(str(exc))
                errors.append(exc)
            return MARKER + str(exc)

    if extent == "template":
        for name in ("Samples", "Measured", "Spikes", "Standards", "Constants", "Cycles"):
            beyond = _beyond_template(work, SHEET_BY_NAME[name])
            if beyond is not None:
                run(lambda beyond=beyond: _raise(beyond))
    book = BookTables(work, extent)
    last = book.last
    res_last = max(RESULTS.last_row, last["Samples"])
    # clear computed cells first (a workbook from LibreOffice carries cached values); every row of the
    # Results sheet is computed, so rows below the template's are cleared too
    for sh in ROW_SHEETS:
        del work.setdefault(sh.name, [])[KEY_ROW:]
    for (sheet, row, col) in expected_formulas():
        put(sheet, row, col, "")
    std_computed = [j for j, c in enumerate(STANDARDS.columns) if c.computed]
    for row in range(STANDARDS.last_row + 1, min(last["Standards"], len(work.get("Standards", ()))) + 1):
        line = work["Standards"][row - 1]
        for j in std_computed:
            if j < len(line):
                line[j] = ""
    # Standards: one primary per session and ratio (computed once per session, used by every row)
    std_t = book.standards

    def standard_cell(q: str, i: int) -> float | str:
        session = std_t.get(i, "session")
        ses = str(session).strip() if not isinstance(session, float) else f"{session:g}"
        if not ses:
            return ""
        mat, rat = str(std_t.get(i, "material")).strip(), str(std_t.get(i, "ratio")).strip()
        return _standard_cell(q, book.session_standards(ses, rat), ses, mat, std_t.get(i, "measured"))

    _check_standard_runs(std_t, run)
    for i in range(len(std_t.rows)):
        if not std_t.filled(i):
            continue
        row = FIRST_ROW + i
        for j in std_computed:
            c = STANDARDS.columns[j]
            if std_t.get(i, "session") == "":
                v: Any = run(lambda i=i: _raise(std_t.error(i, "session", "is empty but the row has data")))
            elif isinstance(std_t.get(i, "session"), FormulaCell):
                v = run(lambda i=i: std_t.text(i, "session"))
            else:
                v = run(lambda c=c, i=i: standard_cell(c.quantity, i))
            put("Standards", row, j, v)

    # Cycles -> Runs: each run's mean and SEM from its kept cycles, one evaluation for the whole sheet
    j_kept = CYCLES.col_index("kept")
    cyc_rows = book.rows["Cycles"]
    n_cyc = max(CYCLES.capacity, len(cyc_rows) - 1) if extent == "data" else CYCLES.capacity
    del work.setdefault("Runs", [])[KEY_ROW:]
    got = run(lambda: _cycle_table(cyc_rows, book.rows["Constants"]))
    if isinstance(got, str):
        kept_col: Sequence[Any] = [got] + ["#N/A"] * (n_cyc - 1)
        run_rows: Sequence[Sequence[Any]] = [[got] + ["#N/A"] * (len(RUNS.columns) - 1)] + \
            [["#N/A"] * len(RUNS.columns)] * (RUNS.capacity - 1)
    else:
        kept_col = list(got[1]) + [""] * (n_cyc - len(got[1]))
        run_rows = [list(r) for r in got[0]] + [[""] * len(RUNS.columns)] * (RUNS.capacity - len(got[0]))
    for r, v in enumerate(kept_col[:n_cyc]):
        put("Cycles", FIRST_ROW + r, j_kept, v)
    for r, line in enumerate(run_rows):
        for j, v in enumerate(line):
            put("Runs", FIRST_ROW + r, j, v)

    # Spikes: what a run of each row's element must give
    spk_t = book.spikes
    j_rr = SPIKES.col_index("run_ratios")
    for i in range(min(len(spk_t.rows), SPIKES.capacity if extent == "template" else len(spk_t.rows))):
        if spk_t.get(i, "element") == "":
            continue

        def rr(i: int = i) -> str:
            try:
                return run_ratios(spk_t.text(i, "element"), spk_t.text(i, "spike_isotope", required=False))
            except InputError as exc:
                raise spk_t.error(i, "spike_isotope" if exc.argument == "spike_isotope" else "element",
                                  exc.problem) from None
        put("Spikes", FIRST_ROW + i, j_rr, run(rr))

    # Samples -> Results: each analysis reduced once, every Results column read from that
    samples = book.samples
    for i in range(len(samples.rows)):
        row = FIRST_ROW + i
        if not samples.filled(i):
            continue
        analysis = samples.get(i, "analysis")
        outcome: Any = None
        if analysis == "":
            outcome = run(lambda i=i: _raise(samples.error(i, "analysis", "is empty but the row has data")))
        elif isinstance(analysis, FormulaCell):
            outcome = run(lambda i=i: samples.text(i, "analysis"))
        else:
            a = str(analysis).strip() if not isinstance(analysis, float) else f"{analysis:g}"
            if a:
                outcome = run(lambda a=a: book.analysis(a))
        for sh in ROW_SHEETS:
            for j, c in enumerate(sh.columns):
                if c.quantity in COPIED_FROM_SAMPLES:
                    v = samples.get(i, c.quantity)
                    if isinstance(v, FormulaCell):
                        v = run(lambda i=i, c=c: samples.text(i, c.quantity))
                    put(sh.name, row, j, v)
                    continue
                if outcome is None:
                    v = ""
                elif isinstance(outcome, str):
                    v = outcome
                else:
                    v = run(lambda c=c, o=outcome: _analysis_cell(c.quantity, o))
                put(sh.name, row, j, v)
                if c.quantity == "check" and isinstance(v, str) and v.startswith(MARKER) and "poor" in v:
                    warnings.append(f"Results!{col_letter(j)}{row}: {v[len(MARKER):]}")
    orphans = unmatched_runs(samples, book.measured)
    warnings.extend(orphans)
    if orphans and extent == "template":     # the template's own cell says so, as Calc does
        put(*ORPHAN_CELL, orphan_message(len(orphans)))
    results = sheet_block(work, "Results", KEY_ROW, 0, res_last, len(RESULTS.columns) - 1)
    res_t = Table.from_range(RESULTS, results)
    if extent == "data":
        _check_isochron_extent(work, run)
    for first, last_sel in ISOCHRON_BLOCK.values():
        for row in range(first, last_sel + 1):
            a = sheet_block(work, "Isochron", row, 0, row, 0)[0][0]
            for j, c in enumerate(ISOCHRON.columns):
                if not c.computed:
                    continue
                if a == "":
                    put("Isochron", row, j, "")
                    continue
                hits = res_t.find(analysis=str(a))
                put("Isochron", row, j, res_t.get(hits[0], c.quantity) if hits else "#N/A")
    for (top, left), (_f, srow) in ellipse_formulas().items():
        pt = sheet_block(work, "Isochron", srow, 0, srow, len(ISOCHRON.columns) - 1)[0]
        vals: Any = ""
        if pt[0] != "":
            vals = run(lambda pt=pt, srow=srow: _ellipse(pt, srow))
        put_outline(top, left, vals)
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        col = ISOCHRON_SUMMARY_COL + 1 + k
        treat = sheet_block(work, "Isochron", ISOCHRON_TREATMENT_ROW, col, ISOCHRON_TREATMENT_ROW, col)[0][0]
        sel = _block(work, isochron_selection_ref(system))
        if not any(r[0] != "" for r in sel[1:]):
            continue
        if isinstance(treat, SpecialCell):
            fit: Any = run(lambda t=treat, col=col: _raise(CellError(
                "Isochron", ISOCHRON_TREATMENT_ROW, col_letter(col), "Scatter treatment", t.problem())))
        else:
            fit = run(lambda s=system, t=treat, sel=sel: _isochron(
                str(s).strip(), str(t or "").strip().lower(), sel, results, book.rows["Constants"]))
        for q_i, (q, _l, _u) in enumerate(ISOCHRON_QUANTITIES):
            v = fit if isinstance(fit, str) else run(lambda q=q, fit=fit: _isochron_cell(q, fit))
            put("Isochron", ISOCHRON_FIRST_Q_ROW + q_i, col, v)
    qrow = {name: ISOCHRON_FIRST_Q_ROW + i for i, (name, _l, _u) in enumerate(ISOCHRON_QUANTITIES)}
    for (top, left), (_f, srow, system) in deviation_formulas().items():
        pt = sheet_block(work, "Isochron", srow, 0, srow, len(ISOCHRON.columns) - 1)[0]
        col = ISOCHRON_SUMMARY_COL + 1 + ISOCHRON_SYSTEMS.index(system)
        line = [cells.get(("Isochron", qrow[q], col), "") for q in ("slope", "initial")]
        vals = "" if pt[0] == "" else run(lambda pt=pt, srow=srow, line=line: _deviation(pt, srow, line))
        put_outline(top, left, vals)
    _evaluate_groups(work, book.rows["Samples"], results, book.rows["Constants"], put, run, warnings)
    return Evaluation(cells, tuple(errors), tuple(warnings))


def _label(v: Any) -> str:
    """A cell typed as a name (a group), as the cell functions receive it: numbers as ``%g``, trimmed."""
    return (f"{v:g}" if isinstance(v, float) else str(v)).strip()


def _evaluate_groups(work: Mapping[str, Sequence[Sequence[Cell]]], samples: Rows, results: Rows, constants: Rows,
                     put: Callable[[str, int, int, Any], None], run: Callable[[Callable[[], Any]], Any],
                     warnings: List[str]) -> None:
    """The Groups sheet's computed cells as Calc computes them (the batch path's part of :func:`evaluate`)."""
    groups = sheet_block(work, "Groups", KEY_ROW, 0, GROUPS.last_row, GROUPS.input_width - 1)
    tab = Table.from_range(GROUPS, groups)
    below = sheet_block(work, "Groups", GROUPS.last_row + 1, 0, GROUPS.last_row + 1, GROUPS.input_width - 1)[0]
    if any(v != "" for v in below):
        run(lambda: _raise(CellError("Groups", GROUPS.last_row + 1, None, "", f"a group below the table's "
                                     f"{GROUPS.capacity} rows (rows {FIRST_ROW}-{GROUPS.last_row}) is not fitted: "
                                     "move it into the table")))
    for i in range(len(tab.rows)):
        g = tab.get(i, "group")
        for j, c in enumerate(GROUPS.columns):
            if not c.computed:
                continue
            if g == "":
                v: Any = ""
            elif isinstance(g, SpecialCell):
                v = run(lambda i=i: tab.text(i, "group"))
            else:
                t = tab.get(i, "treatment")
                if isinstance(t, SpecialCell):
                    v = run(lambda i=i: tab.text(i, "treatment"))
                else:
                    v = run(lambda c=c, g=g, t=t: group_value(c.quantity, _label(g), t, samples, results, constants))
            put("Groups", FIRST_ROW + i, j, v)
    unlisted = run(lambda: unlisted_groups(groups, samples))
    put(*GROUP_UNLISTED_CELL, unlisted)
    if unlisted:
        warnings.append(f"Groups!A{GROUP_UNLISTED_CELL[1]}: {unlisted[len(MARKER):]}")
    typed = sheet_block(work, "Groups", GROUP_CHART_ROW, 1, GROUP_CHART_ROW, 1)[0][0]
    first = tab.get(0, "group") if tab.rows else ""
    drawn = _label(typed) if typed != "" else ("" if first == "" else _label(first))
    put("Groups", GROUP_CHART_ROW, 2, drawn)

    def put_array(top: int, left: int, width: int, rows: Any, n: int) -> None:
        for r in range(n):
            for k in range(width):
                if not isinstance(rows, str):
                    v = rows[r][k]
                else:
                    v = rows if (r == 0 and k == 0) else "#N/A"
                put("Groups", top + r, left + k, v)

    put_array(GROUP_POINTS_TOP, 0, len(GROUP_POINT_COLUMNS),
              run(lambda: group_points(drawn, samples, results)), GROUP_POINTS_CAP)
    for kind, col in (("ellipse", GROUP_ELLIPSE_COL), ("deviation", GROUP_DEVIATION_COL)):
        put_array(GROUP_POINTS_TOP, col, 2, run(lambda kind=kind: group_outlines(kind, drawn, groups, samples,
                                                                                 results, constants)),
                  GROUP_OUTLINE_ROWS)


def _check_standard_runs(std_t: Table, run: Callable[[Callable[[], Any]], Any]) -> None:
    """A run label given twice for one material, ratio and session is a problem at its second row
    (the same run would count twice in the session factor or a check's mean)."""
    seen: Dict[Tuple[str, ...], int] = {}
    for i in range(len(std_t.rows)):
        label = std_t.get(i, "run")
        if not std_t.filled(i) or label == "" or isinstance(label, SpecialCell):
            continue
        key = tuple(_norm(std_t.get(i, k)) for k in ("session", "material", "ratio")) + (_norm(label),)
        if key in seen:
            run(lambda i=i, first=seen[key], label=label: _raise(std_t.error(
                i, "run", f"run {shown(label)} of {shown(std_t.get(i, 'material'))} is listed twice in session "
                          f"{shown(std_t.get(i, 'session'))} (first on row {first}): list each run once")))
        else:
            seen[key] = std_t.first_row + i


def _check_isochron_extent(work: Mapping[str, Sequence[Sequence[Cell]]],
                           run: Callable[[Callable[[], Any]], Any]) -> None:
    """Analysis IDs or Use flags typed below the last selection block are reported, never ignored."""
    g = work.get("Isochron", ())
    bottom = max(last for _first, last in ISOCHRON_BLOCK.values())
    blocks = ", ".join(f"{s} rows {a}-{b}" for s, (a, b) in ISOCHRON_BLOCK.items())
    per = min(b - a + 1 for a, b in ISOCHRON_BLOCK.values())
    for r in range(bottom + 1, len(g) + 1):
        line = g[r - 1]
        for j in (0, 1):
            if j < len(line) and line[j] != "":
                c = ISOCHRON.columns[j]
                run(lambda r=r, j=j, c=c, v=line[j]: _raise(CellError(
                    "Isochron", r, col_letter(j), c.header,
                    f"{shown(v)} is below the selection blocks ({blocks}): the Isochron sheet selects "
                    f"{per} analyses per system; move it into its system's block")))
                return


# --------------------------------------------------------------------------------------------
# layout: what every cell of a written workbook holds
# --------------------------------------------------------------------------------------------
@dataclass
class CellSpec:
    """One written cell: a value or a formula, and how it looks (``style``)."""

    value: Any = ""
    formula: Optional[Formula] = None
    style: str = "plain"          # title, note, header, key, input, computed, label, plain
    number_format: str = "General"
    array: Optional[Tuple[int, int]] = None   # (rows, columns) of an array formula in its top-left cell


Layout = Dict[str, Dict[Tuple[int, int], CellSpec]]   # sheet -> (row, 0-based col) -> cell

ABOUT_SHEET = "About"
ABOUT_LINES = (
    ("RatioDesk workbook", "title"),
    ("Isotope dilution and isochron ages (Sm-Nd, Lu-Hf, Rb-Sr). Every result recalculates when an input or a "
     "reference value changes.", "note"),
    ("", "plain"),
    ("Yellow cells are inputs: type here. Blue cells are computed: they are protected against accidental "
     "typing (Tools ▸ Protect Sheet, no password, unprotects).", "plain"),
    ("Order of work: Constants (reference values) → Spikes → Standards → Samples (with each analysis's "
     "isochron group) → Measured → read Results, then the ages on Groups (by group) or Isochron (by ID).", "plain"),
    ("Uncertainties: every column states its level (1σ or 2σ) and form (abs = absolute, % or ppm = relative).",
     "plain"),
    ("Results depend on the spike calibrations and on the reference-material accepted values; state them "
     "when you report ages.", "plain"),
    ("Computed cells call the RatioDesk extension for LibreOffice Calc. Without it, send a collaborator copy "
     "(RatioDesk menu) or the batch output (ratiodesk reduce).", "plain"),
)


def _table_layout(sheet: Sheet, rows: Sequence[Mapping[str, Any]], out: Dict[Tuple[int, int], CellSpec]) -> None:
    out[(TITLE_ROW, 0)] = CellSpec(sheet.title, style="title")
    out[(NOTE_ROW, 0)] = CellSpec(sheet.note, style="note")
    for j, c in enumerate(sheet.columns):
        out[(HEADER_ROW, j)] = CellSpec(c.header, style="header")
        out[(KEY_ROW, j)] = CellSpec(c.key, style="key")
    for i in range(max(sheet.capacity, len(rows))):     # every row given: none is dropped
        row = FIRST_ROW + i
        data = rows[i] if i < len(rows) else {}
        for j, c in enumerate(sheet.columns):
            if c.computed:
                continue
            v = data.get(c.key, "")
            out[(row, j)] = CellSpec("" if v is None else v, style="input", number_format=c.number_format)


def build_layout(tables: Optional[Mapping[str, Sequence[Mapping[str, Any]]]] = None,
                 constants: Optional[Sequence[Mapping[str, Any]]] = None,
                 isochron_selection: Optional[Mapping[str, Sequence[Tuple[str, int]]]] = None,
                 about: Sequence[Tuple[str, str]] = ABOUT_LINES) -> Layout:
    """Every cell of a workbook built from the definition and (optionally) filled input tables."""
    tables = tables or {}
    lay: Layout = {ABOUT_SHEET: {}}
    for k, (text, style) in enumerate(about, start=1):
        lay[ABOUT_SHEET][(k, 0)] = CellSpec(text, style=style)
    for sheet in (CONSTANTS, SPIKES, STANDARDS, SAMPLES, MEASURED, CYCLES, GROUPS):
        cells: Dict[Tuple[int, int], CellSpec] = {}
        rows = constants if sheet is CONSTANTS else tables.get(sheet.name, ())
        _table_layout(sheet, list(rows or (constants_rows() if sheet is CONSTANTS else ())), cells)
        lay[sheet.name] = cells
    formulas = expected_formulas()
    row_sheets: Dict[str, Dict[Tuple[int, int], CellSpec]] = {}
    for sh in ROW_SHEETS + (RUNS,):
        cells_ = row_sheets[sh.name] = {}
        cells_[(TITLE_ROW, 0)] = CellSpec(sh.title, style="title")
        cells_[(NOTE_ROW, 0)] = CellSpec(sh.note, style="note")
        for j, c in enumerate(sh.columns):
            cells_[(HEADER_ROW, j)] = CellSpec(c.header, style="header")
            cells_[(KEY_ROW, j)] = CellSpec(c.key, style="key")
    iso: Dict[Tuple[int, int], CellSpec] = {(TITLE_ROW, 0): CellSpec(ISOCHRON.title, style="title"),
                                           (NOTE_ROW, 0): CellSpec(ISOCHRON.note, style="note")}
    sel = isochron_selection or {}
    for system, (first, last) in ISOCHRON_BLOCK.items():
        for j, c in enumerate(ISOCHRON.columns):
            head = f"{c.header} ({system})" if j == 0 else c.header
            iso[(first - 2, j)] = CellSpec(head, style="header")
            iso[(first - 1, j)] = CellSpec(c.key, style="key")
        picks = list(sel.get(system, ()))
        for row in range(first, last + 1):
            k = row - first
            a, use = picks[k] if k < len(picks) else ("", "")
            iso[(row, 0)] = CellSpec(a, style="input")
            iso[(row, 1)] = CellSpec(use, style="input", number_format="0")
    col0 = ISOCHRON_SUMMARY_COL
    iso[(FIRST_ROW, col0)] = CellSpec("Quantity", style="header")
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        iso[(FIRST_ROW, col0 + 1 + k)] = CellSpec(system, style="header")
    unit_col = col0 + 1 + len(ISOCHRON_SYSTEMS)
    iso[(FIRST_ROW, unit_col)] = CellSpec("Unit / level", style="header")
    iso[(ISOCHRON_TREATMENT_ROW, col0)] = CellSpec("Scatter treatment", style="label")
    for k in range(len(ISOCHRON_SYSTEMS)):
        iso[(ISOCHRON_TREATMENT_ROW, col0 + 1 + k)] = CellSpec("analytical", style="input")
    iso[(ISOCHRON_TREATMENT_ROW, unit_col)] = CellSpec("analytical, expanded, equal-weights, excess-variance",
                                                        style="note")
    fmt = ISOCHRON_FORMATS
    for q_i, (q, label, unit) in enumerate(ISOCHRON_QUANTITIES):
        iso[(ISOCHRON_FIRST_Q_ROW + q_i, col0)] = CellSpec(label, style="label")
        iso[(ISOCHRON_FIRST_Q_ROW + q_i, unit_col)] = CellSpec(unit, style="note")
        for k in range(len(ISOCHRON_SYSTEMS)):
            iso[(ISOCHRON_FIRST_Q_ROW + q_i, col0 + 1 + k)] = CellSpec(style="computed",
                                                                       number_format=fmt.get(q, "General"))
    targets = {**row_sheets, "Isochron": iso, "Standards": lay["Standards"], "Spikes": lay["Spikes"],
               "Groups": lay["Groups"]}
    _group_chart_cells(lay["Groups"])
    for (sheet, row, col), f in formulas.items():
        target = targets[sheet]
        spec = target.get((row, col)) or CellSpec(style="computed")
        spec.formula, spec.style = f, "computed"
        columns = SHEET_BY_NAME[sheet].columns
        if sheet not in ("Isochron", "Groups") or (col < len(columns) and row <= SHEET_BY_NAME[sheet].last_row):
            spec.number_format = columns[col].number_format
        target[(row, col)] = spec
    shapes = [(k, f, f"Ellipse of row {srow}: x", "y (95 % outline)")
              for k, (f, srow) in ellipse_formulas().items()]
    shapes += [(k, f, f"Deviation of row {srow}: x", "ppm from the line (95 %)")
               for k, (f, srow, _s) in deviation_formulas().items()]
    for (top, left), f, h1, h2 in shapes:
        iso[(HEADER_ROW, left)] = CellSpec(h1, style="header")
        iso[(HEADER_ROW, left + 1)] = CellSpec(h2, style="header")
        for i in range(ELLIPSE_POINTS + 1):
            for j in (0, 1):
                iso[(top + i, left + j)] = CellSpec(style="computed", number_format="0.000000E+00")
        iso[(top, left)] = CellSpec(formula=f, style="computed", number_format="0.000000E+00",
                                    array=(ELLIPSE_POINTS + 1, 2))
    for (sheet, top, left), (f, (nr, nc)) in array_formulas().items():
        target = lay[sheet] if sheet in lay else row_sheets[sheet]
        cols = SHEET_BY_NAME[sheet].columns if sheet != "Groups" else _GROUP_ARRAY_COLUMNS
        for r in range(nr):
            for c in range(nc):
                target[(top + r, left + c)] = CellSpec(style="computed", number_format=cols[left + c].number_format)
        target[(top, left)] = CellSpec(formula=f, style="computed", number_format=cols[left].number_format,
                                       array=(nr, nc))
    lay.update(row_sheets)
    lay["Isochron"] = iso
    return lay


#: Number formats of the Groups sheet's arrays, by column: the point list, then the two outline pairs.
_GROUP_ARRAY_COLUMNS = tuple(_c(k, h, number_format=f) for (k, h), f in zip(
    GROUP_POINT_COLUMNS + (("", ""),) + (("", ""),) * 4,
    ("General", "0", "0.000000", "0.0E+00", "0.0000000", "0.0E+00", "0.000", "General") + ("0.000000E+00",) * 4))


def _group_chart_cells(cells: Dict[Tuple[int, int], CellSpec]) -> None:
    """The Groups sheet's static cells below the table: the chart cell and the headers of the point list."""
    cells[(GROUP_CHART_ROW, 0)] = CellSpec("Group drawn below (type a group; empty: the first group)", style="label")
    cells[(GROUP_CHART_ROW, 1)] = CellSpec("", style="input")
    cells[(GROUP_CHART_ROW + 1, 0)] = CellSpec("Its points (every Samples row of the group) and the outlines of the "
                                              "used ones (95 % ellipses; deviation in ppm from the group's line)",
                                              style="note")
    heads = [h for _k, h in GROUP_POINT_COLUMNS]
    keys = [k for k, _h in GROUP_POINT_COLUMNS]
    for j, (h, k) in enumerate(zip(heads, keys)):
        cells[(GROUP_POINTS_TOP - 2, j)] = CellSpec(h, style="header")
        cells[(GROUP_POINTS_TOP - 1, j)] = CellSpec(k, style="key")
    for col, what in ((GROUP_ELLIPSE_COL, "ellipse"), (GROUP_DEVIATION_COL, "deviation")):
        cells[(GROUP_POINTS_TOP - 2, col)] = CellSpec("Ellipses: x" if what == "ellipse" else "Deviation: x",
                                                     style="header")
        cells[(GROUP_POINTS_TOP - 2, col + 1)] = CellSpec("y (95 % outline)" if what == "ellipse" else
                                                         "ppm from the line (95 %)", style="header")
        cells[(GROUP_POINTS_TOP - 1, col)] = CellSpec(f"{what}_x", style="key")
        cells[(GROUP_POINTS_TOP - 1, col + 1)] = CellSpec(f"{what}_y", style="key")


def layout_grid(lay: Layout) -> Dict[str, List[List[Cell]]]:
    """The input values of a layout as a sheet grid (what :func:`evaluate` reads)."""
    grid: Dict[str, List[List[Cell]]] = {}
    for sheet, cells in lay.items():
        g: List[List[Cell]] = []
        for (r, c), spec in cells.items():
            while len(g) < r:
                g.append([])
            row = g[r - 1]
            while len(row) <= c:
                row.append("")
            row[c] = "" if spec.formula is not None else _clean(spec.value)
        grid[sheet] = g
    return grid


def fill_values(lay: Layout, ev: Evaluation) -> None:
    """Put evaluated values into the computed cells of a layout (kept as cached values / for value copies)."""
    for (sheet, row, col), v in ev.cells.items():
        spec = lay.setdefault(sheet, {}).get((row, col))
        if spec is None:
            spec = lay[sheet][(row, col)] = CellSpec(style="computed")
        spec.value = v


SHEET_ORDER = (ABOUT_SHEET, "Constants", "Spikes", "Standards", "Samples", "Measured", "Cycles", "Runs", "Results",
               "Steps", "Isochron", "Groups")
_FILL = {"input": "FFF6D5", "computed": "E2ECF8", "header": "D9D9D9"}
WIDTHS: Dict[str, Dict[int, float]] = {s.name: {j: c.width for j, c in enumerate(s.columns)} for s in SHEETS}
WIDTHS[ABOUT_SHEET] = {0: 110}
WIDTHS["Isochron"].update({7: 3, 8: 34, 9: 15, 10: 15, 11: 15, 12: 30})


# --------------------------------------------------------------------------------------------
# drop-down lists (data validity) of the input cells
# --------------------------------------------------------------------------------------------
#: Elements a run or a spike row can name.
ELEMENTS = ("Sm", "Nd", "Lu", "Hf", "Rb", "Sr")
#: Reference materials the Constants sheet carries accepted values for (a lab may add more there).
MATERIALS = tuple(dict.fromkeys(m for m, _r in _REFERENCE_MATERIALS))
TREATMENTS = ("analytical", "expanded", "equal-weights", "excess-variance")


def run_ratio_names() -> Tuple[str, ...]:
    """Every ratio name a Measured run may carry: <isotope>/<reference isotope> of each element."""
    from .dilution import element_isotopes

    out: List[str] = []
    for el in ELEMENTS:
        ref = _REFERENCE_ISOTOPE[el]
        out += [f"{iso}/{ref}" for iso in element_isotopes(el) if iso != ref]
    return tuple(out)


@dataclass(frozen=True)
class Choice:
    """A drop-down list on input cells: literal ``values`` or the cells of ``source`` (sheet, column key).

    ``strict``: a value outside the list is refused as typed (a closed vocabulary); otherwise Calc warns
    and keeps it (the engine still checks every value and names the cell). ``rows``: sheet rows; ``col``:
    0-based column. Data validity applies to typing only; pasted values are checked by the engine.
    """

    name: str
    sheet: str
    col: int
    rows: Tuple[int, ...]
    values: Tuple[str, ...] = ()
    source: Optional[Tuple[str, str]] = None
    strict: bool = True
    whole_0_1: bool = False
    title: str = ""
    help: str = ""

    def source_range(self) -> Tuple[str, str, int, int]:
        """(sheet, column letter, first row, last row) of the ``source`` cells."""
        sh = SHEET_BY_NAME[self.source[0]] if self.source else SAMPLES
        return sh.name, sh.letter(self.source[1]) if self.source else "A", FIRST_ROW, sh.last_row


def choices() -> Tuple[Choice, ...]:
    """Every drop-down list of the template (written into .xlsx and .ods alike)."""
    def rows(sheet: Sheet) -> Tuple[int, ...]:
        return tuple(range(FIRST_ROW, sheet.last_row + 1))

    out = [
        Choice("rd_system", "Samples", SAMPLES.col_index("system"), rows(SAMPLES), tuple(WORKBOOK_SYSTEMS.values()),
               title="System", help="The isotope system of the analysis."),
        Choice("rd_fraction", "Samples", SAMPLES.col_index("fraction"), rows(SAMPLES), FRACTION_TYPES, strict=False,
               title="Fraction type", help="What was dissolved; another word is kept (Calc asks first)."),
        Choice("rd_spike", "Samples", SAMPLES.col_index("spike"), rows(SAMPLES), source=("Spikes", "spike"),
               title="Spike used", help="A spike label of the Spikes sheet."),
        Choice("rd_element", "Measured", MEASURED.col_index("element"), rows(MEASURED), ELEMENTS,
               title="Element", help="The element of the run."),
        Choice("rd_spike_element", "Spikes", SPIKES.col_index("element"), rows(SPIKES), ELEMENTS,
               title="Element", help="The element of this spike row."),
        Choice("rd_ratio", "Standards", STANDARDS.col_index("ratio"), rows(STANDARDS), tuple(DEFAULT_PRIMARY),
               title="Ratio", help="The normalised radiogenic ratio of the run."),
        Choice("rd_material", "Standards", STANDARDS.col_index("material"), rows(STANDARDS), MATERIALS,
               strict=False, title="Material",
               help="A reference material with an accepted value on the Constants sheet (rm.<material>.<ratio>)."),
        Choice("rd_role", "Standards", STANDARDS.col_index("role"), rows(STANDARDS), _ROLES,
               title="Role", help="primary (the session factor) or check; empty: see the sheet's note."),
    ]
    names = run_ratio_names() + tuple(dict.fromkeys(m for ms in _MONITOR_NAMES.values() for m in ms))
    for k in range(1, RATIO_SLOTS + 1):
        out.append(Choice(f"rd_ratio_name{k}", "Measured", MEASURED.col_index(f"r{k}_name"), rows(MEASURED), names,
                          strict=False, title=f"Ratio {k}",
                          help="<isotope>/<reference isotope> of the row's element."))
    out.append(Choice("rd_ion", "Measured", MEASURED.col_index("ion"), rows(MEASURED), ("metal", "oxide"),
                      title="Ion", help="metal (or empty), or oxide: the ratios are of monoxide beams."))
    use_rows = tuple(r for _s, r in selection_rows())
    out.append(Choice("rd_use", "Isochron", ISOCHRON.col_index("use"), use_rows, whole_0_1=True, title="Use",
                      help="1 = use the row in the isochron, 0 = leave it out."))
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        out.append(Choice(f"rd_treatment{k + 1}", "Isochron", ISOCHRON_SUMMARY_COL + 1 + k,
                          (ISOCHRON_TREATMENT_ROW,), TREATMENTS, title=f"{system} scatter treatment",
                          help="How scatter beyond the analytical errors is treated."))
    out.append(Choice("rd_group", "Samples", SAMPLES.col_index("group"), rows(SAMPLES), source=("Groups", "group"),
                      strict=False, title="Isochron group",
                      help="A group of the Groups sheet; a new name is kept (Calc asks first): list it there."))
    out.append(Choice("rd_sample_use", "Samples", SAMPLES.col_index("use"), rows(SAMPLES), whole_0_1=True,
                      title="Use in isochron", help="1 or empty = a point of its group's isochron, 0 = leave it out."))
    out.append(Choice("rd_group_treatment", "Groups", GROUPS.col_index("treatment"), rows(GROUPS), TREATMENTS,
                      title="Scatter treatment", help="How scatter beyond the analytical errors is treated."))
    return tuple(out)


def choice_cells() -> Dict[Tuple[str, int, int], Choice]:
    """(sheet, row, 0-based column) -> the drop-down list of that input cell."""
    return {(c.sheet, r, c.col): c for c in choices() for r in c.rows}


def _xlsx_validations(ws: Any, name: str) -> None:
    from openpyxl.worksheet.datavalidation import DataValidation

    for c in choices():
        if c.sheet != name:
            continue
        col = col_letter(c.col)
        if c.whole_0_1:
            dv = DataValidation(type="whole", operator="between", formula1="0", formula2="1", allow_blank=True)
        elif c.source is not None:
            sheet, letter, r1, r2 = c.source_range()
            dv = DataValidation(type="list", formula1=f"'{sheet}'!${letter}${r1}:${letter}${r2}", allow_blank=True)
        else:
            dv = DataValidation(type="list", formula1='"' + ",".join(c.values) + '"', allow_blank=True)
        dv.errorStyle = "stop" if c.strict else "warning"
        dv.error = (f"{c.title}: choose a value from the list" if c.strict else
                    f"{c.title}: not one of the usual values; keep it?")
        dv.errorTitle = "RatioDesk"
        dv.prompt, dv.promptTitle = c.help, c.title
        dv.showErrorMessage = dv.showInputMessage = True
        rows = sorted(c.rows)
        ranges, start, prev = [], rows[0], rows[0]
        for r in rows[1:] + [None]:
            if r is not None and r == prev + 1:
                prev = r
                continue
            ranges.append(f"{col}{start}:{col}{prev}" if prev != start else f"{col}{start}")
            if r is not None:
                start = prev = r
        dv.sqref = " ".join(ranges)
        ws.add_data_validation(dv)


# --------------------------------------------------------------------------------------------
# .xlsx writer and reader (openpyxl)
# --------------------------------------------------------------------------------------------
def write_xlsx(lay: Layout, path: Any, *, values_only: bool = False, protect: bool = True,
               extra_sheets: Optional[Mapping[str, Sequence[Sequence[Any]]]] = None) -> None:
    """Write a layout as .xlsx: formulas (with cached values) or, with ``values_only``, values."""
    from openpyxl import Workbook
    from openpyxl.styles import Alignment, Font, PatternFill, Protection
    from openpyxl.worksheet.formula import ArrayFormula

    wb = Workbook()
    wb.remove(wb.active)
    fonts = {"title": Font(bold=True, size=13), "note": Font(italic=True, color="555555"),
             "header": Font(bold=True), "key": Font(size=7, color="888888"), "label": Font(bold=True)}
    # one style object each, shared by every cell (openpyxl compares a new object with every stored one)
    fills = {k: PatternFill("solid", fgColor=v) for k, v in _FILL.items()}
    wrap = Alignment(wrap_text=True, vertical="top")
    unlocked = Protection(locked=False)
    cached: Dict[str, Dict[str, Any]] = {}
    for name in [s for s in SHEET_ORDER if s in lay] + [s for s in lay if s not in SHEET_ORDER]:
        ws = wb.create_sheet(name)
        for j, w in WIDTHS.get(name, {}).items():
            ws.column_dimensions[col_letter(j)].width = w
        for (r, c), spec in sorted(lay[name].items()):
            cell = ws.cell(row=r, column=c + 1)
            if spec.formula is not None and not values_only:
                text = spec.formula.render(name, "xlsx")
                if spec.array:
                    ref = f"{col_letter(c)}{r}:{col_letter(c + spec.array[1] - 1)}{r + spec.array[0] - 1}"
                    cell.value = ArrayFormula(ref, text)
                else:
                    cell.value = text
                cached.setdefault(name, {})[f"{col_letter(c)}{r}"] = spec.value
            else:
                _xlsx_value(cell, spec.value, name)
            if spec.style in fonts:
                cell.font = fonts[spec.style]
            if spec.style in fills:
                cell.fill = fills[spec.style]
            if spec.style == "header":
                cell.alignment = wrap
            if spec.number_format != "General":
                cell.number_format = spec.number_format
            if spec.style == "input":
                cell.protection = unlocked
        if protect and not values_only and name not in (ABOUT_SHEET,):
            ws.protection.sheet = True
            ws.protection.formatColumns = False
            ws.protection.formatRows = False
        ws.freeze_panes = None if name == ABOUT_SHEET else f"A{FIRST_ROW}"
        if name in ("Isochron", "Groups"):
            _xlsx_charts(ws)
        if not values_only:
            _xlsx_validations(ws, name)
    for name, rows in (extra_sheets or {}).items():
        ws = wb.create_sheet(name)
        for i, r in enumerate(rows, start=1):
            for j, v in enumerate(r, start=1):
                _xlsx_value(ws.cell(row=i, column=j), v, name)
        ws.column_dimensions["A"].width = 32
        ws.column_dimensions["B"].width = 60
        for cell in ws[1]:
            cell.font = Font(bold=True)
    wb.save(path)
    if cached and not values_only:
        _xlsx_add_cached_values(path, wb.sheetnames, cached)


#: Characters XML 1.0 cannot carry (an .xlsx or .ods cell cannot hold them).
_XML_ILLEGAL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")
#: The longest text an .xlsx cell holds (Excel's limit; openpyxl would cut a longer one).
XLSX_MAX_TEXT = 32767


def check_text(v: str, sheet: str, where: str, limit: Optional[int] = None) -> str:
    """A text to write into a cell, as plain ``str``; refused (never altered) when a file cannot hold it.

    Raises :class:`InputError` naming the sheet and cell for characters XML cannot carry or, with
    ``limit``, a text longer than a cell holds.
    """
    text = str.__str__(v)
    bad = _XML_ILLEGAL.search(text)
    if bad:
        raise InputError(f"{sheet}!{where}", f"the text {shown(text)} holds the control character "
                         f"U+{ord(bad.group()):04X}, which a spreadsheet file cannot store: remove it")
    if limit is not None and len(text) > limit:
        raise InputError(f"{sheet}!{where}", f"the text {shown(text)} has {len(text):,} characters; a cell of "
                         f"this file format holds at most {limit:,}: shorten it")
    return text


_XSTRING_ESCAPE = re.compile(r"_x[0-9A-Fa-f]{4}_|\r")
_XSTRING_CODE = re.compile(r"_x([0-9A-Fa-f]{4})_")


def xlsx_escape(text: str) -> str:
    """A text as an .xlsx string stores it (ECMA-376 part 1, simple type ST_Xstring): a carriage return
    (which XML would turn into a line feed) as ``_x000D_``, a literal ``_xHHHH_`` with its ``_``
    escaped as ``_x005F_``, so :func:`xlsx_unescape` gives back the very text."""
    return _XSTRING_ESCAPE.sub(lambda m: "_x000D_" if m.group() == "\r" else "_x005F_" + m.group()[1:], text)


def xlsx_unescape(text: str) -> str:
    """The text an .xlsx string stands for (``_x000D_`` → carriage return, ``_x005F_`` → ``_``), as a
    spreadsheet program shows it (ST_Xstring, ECMA-376 part 1)."""
    if "_x" not in text:
        return text
    return _XSTRING_CODE.sub(lambda m: chr(int(m.group(1), 16)), text)


def _xlsx_value(cell: Any, v: Any, sheet: str) -> None:
    """Write one value: text is always stored as text (``t="inlineStr"``), never as a formula or an error
    code, whatever it starts with (``=``, ``+``, ``-``, ``@``, ``#N/A``)."""
    if v is None or (isinstance(v, str) and v == ""):
        cell.value = None
    elif isinstance(v, LogicalCell):
        cell.value = str.__str__(v) == "TRUE"
    elif isinstance(v, str):
        cell.value = xlsx_escape(check_text(v, sheet, cell.coordinate, XLSX_MAX_TEXT))
        cell.data_type = "s"
    else:
        cell.value = v


@dataclass(frozen=True)
class ChartSpec:
    """One chart of the template, both file formats: an x-y chart of outline series, lines without markers.

    ``series`` holds (first column of the x, y pair, first row, last row) on ``sheet``; ``anchor`` is the
    (row, 0-based column) of the chart's top-left corner.
    """

    name: str
    title: str
    axes: Tuple[str, str]
    y_format: str
    sheet: str
    series: Tuple[Tuple[int, int, int], ...]
    anchor: Tuple[int, int]


def isochron_charts() -> List[ChartSpec]:
    """The template's charts: per system on the Isochron sheet the isochron at full scale (the ellipse outlines)
    and below it the deviation plot (the same ellipses as ppm from the fitted line), so garnet ellipses are
    visible; on the Groups sheet the same two for the group drawn (one stacked series each)."""
    sel = selection_rows()
    dev = {srow: left for (_t, left), (_f, srow, _s) in deviation_formulas().items()}
    ell = {srow: left for (_t, left), (_f, srow) in ellipse_formulas().items()}
    base = ISOCHRON_FIRST_Q_ROW + len(ISOCHRON_QUANTITIES) + 2
    last = FIRST_ROW + ELLIPSE_POINTS
    out = []
    for k, system in enumerate(ISOCHRON_SYSTEMS):
        rows = [r for s_name, r in sel if s_name == system]
        xt, yt = axis_titles(system)
        out.append(ChartSpec(f"{system} isochron chart", f"{system} isochron — 95 % error ellipses", (xt, yt), "0.0000",
                             "Isochron", tuple((ell[r], FIRST_ROW, last) for r in rows),
                             (base + 40 * k, ISOCHRON_SUMMARY_COL)))
        out.append(ChartSpec(f"{system} deviation chart", f"{system} — deviation from the fitted line, 95 % ellipses",
                             (xt, f"{yt}: deviation (ppm)"), "0", "Isochron", tuple((dev[r], FIRST_ROW, last)
                                                                                  for r in rows),
                             (base + 40 * k + 20, ISOCHRON_SUMMARY_COL)))
    g_last = GROUP_POINTS_TOP + GROUP_OUTLINE_ROWS - 1
    axes = ("Parent/daughter ratio (147Sm/144Nd, 176Lu/177Hf or 87Rb/86Sr)",
            "Daughter ratio (143Nd/144Nd, 176Hf/177Hf or 87Sr/86Sr)")
    col = GROUP_DEVIATION_COL + 3
    out.append(ChartSpec("Group isochron chart", "Group drawn — isochron, 95 % error ellipses", axes, "0.0000",
                         "Groups", ((GROUP_ELLIPSE_COL, GROUP_POINTS_TOP, g_last),), (GROUP_CHART_ROW, col)))
    out.append(ChartSpec("Group deviation chart", "Group drawn — deviation from its fitted line, 95 % ellipses",
                         (axes[0], "Deviation of the daughter ratio (ppm)"), "0", "Groups",
                         ((GROUP_DEVIATION_COL, GROUP_POINTS_TOP, g_last),), (GROUP_CHART_ROW + 20, col)))
    return out


def _xlsx_charts(ws: Any) -> None:
    """The scatter charts of :func:`isochron_charts` on this sheet: outlines as lines, no markers; an empty
    row between two outlines of one series is a gap."""
    from openpyxl.chart import Reference, ScatterChart, Series

    for spec in isochron_charts():
        if spec.sheet != ws.title:
            continue
        ch = ScatterChart()
        ch.title = spec.title
        ch.style = 13
        ch.x_axis.title, ch.y_axis.title = spec.axes
        ch.legend = None
        ch.height, ch.width = 9.5, 16
        ch.display_blanks = "gap"
        for left, top, bottom in spec.series:
            xs = Reference(ws, min_col=left + 1, min_row=top, max_row=bottom)
            ys = Reference(ws, min_col=left + 2, min_row=top, max_row=bottom)
            series = Series(ys, xs)
            series.marker.symbol = "none"
            series.smooth = False
            ch.series.append(series)
        ch.x_axis.delete = False
        ch.y_axis.delete = False
        ch.x_axis.number_format = "0.00"
        ch.y_axis.number_format = spec.y_format
        ch.x_axis.majorGridlines = None
        row, col0 = spec.anchor
        ws.add_chart(ch, f"{col_letter(col0)}{row}")


def _xlsx_add_cached_values(path: Any, names: Sequence[str], cached: Mapping[str, Mapping[str, Any]]) -> None:
    """Store each formula's value in the file (openpyxl writes formulas without cached values).

    Viewers without the extension then show the numbers, as they would after LibreOffice saved it.
    """
    import zipfile
    from xml.sax.saxutils import escape

    src = str(path)
    with zipfile.ZipFile(src) as z:
        items = {n: z.read(n) for n in z.namelist()}
        infos = z.infolist()
    pat = re.compile(rb'<c r="([A-Z]+[0-9]+)"([^>]*)><f((?: [^>]*)?)>(.*?)</f><v\s*/?>(?:</v>)?</c>')
    for k, name in enumerate(names, start=1):
        if name not in cached:
            continue
        part = f"xl/worksheets/sheet{k}.xml"
        vals = cached[name]

        def sub(m: re.Match, vals: Mapping[str, Any] = vals) -> bytes:
            ref = m.group(1).decode()
            v = vals.get(ref, "")
            attrs = re.sub(rb'\s+t="[^"]*"', b"", m.group(2))
            if isinstance(v, float) and math.isfinite(v):
                return b'<c r="%s"%s><f%s>%s</f><v>%s</v></c>' % (m.group(1), attrs, m.group(3), m.group(4),
                                                                 repr(v).encode())
            text = escape("" if v is None else str(v)).encode()
            return b'<c r="%s"%s t="str"><f%s>%s</f><v>%s</v></c>' % (m.group(1), attrs, m.group(3), m.group(4),
                                                                     text)
        items[part] = pat.sub(sub, items[part])
    with zipfile.ZipFile(src, "w", zipfile.ZIP_DEFLATED) as z:
        for info in infos:
            z.writestr(info, items[info.filename])


@dataclass(frozen=True)
class WorkbookData:
    """What a reader returns: sheet grids of values and the formula text of formula cells."""

    grid: Dict[str, List[List[Cell]]]
    formulas: Dict[Tuple[str, int, int], str]
    path: str


def _reads(sheet: str) -> str:
    """How a reader treats a sheet: ``"table"`` (inputs, row limit) or ``"computed"`` (Results, whose
    cells are all recomputed, and sheets RatioDesk does not reduce, e.g. a Provenance sheet: read up
    to the row limit, rows below it are not needed)."""
    return "table" if sheet in SHEET_BY_NAME and sheet != "Results" else "computed"


class _GridBuilder:
    """Rows of one sheet as a reader finds them: empty rows are held back until a filled row follows (a
    sheet formatted to its last row costs nothing), and rows beyond :data:`MAX_SHEET_ROW` stop the
    reading with :func:`too_many_rows` (a table sheet) or end it (the recomputed Results sheet)."""

    def __init__(self, sheet: str, used_to: int = 0) -> None:
        self.sheet, self.mode, self.used_to = sheet, _reads(sheet), used_to
        self.rows: List[List[Cell]] = []
        self.pending = 0          # empty rows not yet appended
        self.filled = 0           # filled data rows so far
        self.done = self.mode == "skip"

    @property
    def next_row(self) -> int:
        return len(self.rows) + self.pending + 1

    def add(self, cells: List[Cell], repeat: int = 1) -> None:
        """Rows (``repeat`` copies of ``cells``, trailing empty cells already removed)."""
        if self.done:
            return
        if not cells:
            self.pending += repeat
            return
        first = self.next_row
        if first + repeat - 1 > MAX_SHEET_ROW:
            if self.mode == "computed":
                self.done = True
                return
            beyond = max(first, MAX_SHEET_ROW + 1)
            filled = self.filled + repeat - max(FIRST_ROW - first, 0)
            more = f" or more (the sheet's used range ends at row {self.used_to:,})" if self.used_to > beyond else \
                " or more"
            raise too_many_rows(self.sheet, filled, beyond, more)
        self.rows.extend([] for _ in range(self.pending))
        self.pending = 0
        self.rows.extend(list(cells) for _ in range(repeat))
        self.filled += max(0, first + repeat - max(first, FIRST_ROW))


def _xlsx_cell(cell: Any, formulas: Dict[Tuple[str, int, int], str], sheet: str, r: int, c: int) -> Cell:
    """One openpyxl cell: a formula (``data_type == "f"``) becomes a :class:`FormulaCell` and its text is
    kept for :func:`formula_drift`; a text cell is text whatever it starts with (``=``, ``+``, ``@`` …);
    a logical cell stays logical."""
    v = cell.value
    if getattr(cell, "data_type", None) == "f":
        text = str(v.text) if hasattr(v, "text") else str(v)   # an array formula carries its text
        if not text.startswith("="):
            text = "=" + text
        formulas[(sheet, r, c)] = text
        return formula_cell(text)
    if isinstance(v, str):
        return xlsx_unescape(v)
    return _clean(v)


def read_xlsx(path: Any) -> WorkbookData:
    """Read a RatioDesk .xlsx (openpyxl, read-only): input values, logical cells and formula text.

    Every row is read (the sheet's stored dimension is not trusted, so no row or column beyond it is
    lost); a table sheet with more than :data:`MAX_DATA_ROWS` filled data rows is refused.
    """
    import warnings

    from openpyxl import load_workbook

    with warnings.catch_warnings():
        # openpyxl warns about workbook features it does not keep (validation, extensions): values are read
        warnings.simplefilter("ignore")
        data = _read_xlsx(path, load_workbook)
        _xlsx_cached_values(path, data, load_workbook)
    return data


def _read_xlsx(path: Any, load_workbook: Callable[..., Any]) -> WorkbookData:
    wb = load_workbook(path, data_only=False, read_only=True)
    grid: Dict[str, List[List[Cell]]] = {}
    formulas: Dict[Tuple[str, int, int], str] = {}
    try:
        for ws in wb.worksheets:
            try:
                used_to = int(ws.max_row or 0)
            except (TypeError, ValueError):
                used_to = 0
            b = _GridBuilder(ws.title, used_to)
            if not b.done and hasattr(ws, "reset_dimensions"):
                ws.reset_dimensions()
            for r, row in enumerate(() if b.done else ws.iter_rows(min_row=1), start=1):
                out = [_xlsx_cell(cell, formulas, ws.title, r, c) for c, cell in enumerate(row)]
                while out and out[-1] == "":
                    out.pop()
                b.add(out)
                if b.done:
                    break
            grid[ws.title] = b.rows
    finally:
        wb.close()
    return WorkbookData(grid, formulas, str(path))


def _xlsx_cached_values(path: Any, data: WorkbookData, load_workbook: Callable[..., Any]) -> None:
    """The stored values of formulas typed into input cells (a second, values-only pass over the sheets
    that have any; the template's own formula cells need none), so that a formula showing nothing leaves
    its row empty (:func:`blank`)."""
    template = set(expected_formulas())
    where: Dict[str, List[Tuple[int, int]]] = {}
    for (sheet, r, c) in data.formulas:
        if (sheet, r, c) not in template and _reads(sheet) == "table" and not (sheet == "Isochron" and
                                                                                c >= ELLIPSE_COL0):
            where.setdefault(sheet, []).append((r, c))
    if not where:
        return
    wb = load_workbook(path, data_only=True, read_only=True)
    try:
        for sheet, cells in where.items():
            ws = wb[sheet]
            ws.reset_dimensions()
            want = set(cells)
            last = max(r for r, _c in cells)
            for r, row in enumerate(ws.iter_rows(min_row=1, max_row=last), start=1):
                for c, cell in enumerate(row):
                    if (r, c) in want:
                        v = cell.value
                        if v is None:
                            cached: Any = "" if getattr(cell, "data_type", None) == "str" else None
                        else:
                            cached = xlsx_unescape(v) if isinstance(v, str) else _clean(v)
                        data.grid[sheet][r - 1][c].cached = cached
    finally:
        wb.close()


# --------------------------------------------------------------------------------------------
# .ods reader (zipfile + ElementTree; OpenDocument 1.2 table:table)
# --------------------------------------------------------------------------------------------
_NS = {"office": "urn:oasis:names:tc:opendocument:xmlns:office:1.0",
       "table": "urn:oasis:names:tc:opendocument:xmlns:table:1.0",
       "text": "urn:oasis:names:tc:opendocument:xmlns:text:1.0"}
#: Columns of a sheet the .ods reader keeps (every table of the template ends far left of it).
MAX_COLUMNS = 1024


def _q(prefix: str, tag: str) -> str:
    return "{" + _NS[prefix] + "}" + tag


def _ods_text(p: Any) -> str:
    """The text of one ``text:p`` as typed: ``text:s`` (spaces), ``text:tab``, ``text:line-break`` and
    the text of spans and links (ODF 1.2 part 1, paragraph content)."""
    out = [p.text or ""]
    for child in p:
        if child.tag == _q("text", "s"):
            out.append(" " * int(child.get(_q("text", "c"), "1") or "1"))
        elif child.tag == _q("text", "tab"):
            out.append("\t")
        elif child.tag == _q("text", "line-break"):
            out.append("\n")
        else:
            out.append(_ods_text(child))
        out.append(child.tail or "")
    return "".join(out)


def _ods_cell_value(el: Any) -> Cell:
    vt = el.get(_q("office", "value-type"))
    if vt in ("float", "percentage", "currency"):
        return float(el.get(_q("office", "value")))
    if vt == "boolean":
        return logical(el.get(_q("office", "boolean-value")) == "true")
    if vt == "date":
        return str(el.get(_q("office", "date-value")))[:10]
    if vt == "time":
        return str(el.get(_q("office", "time-value")))
    if vt == "string" and el.get(_q("office", "string-value")) is not None:
        return str(el.get(_q("office", "string-value")))
    parts = [_ods_text(p) for p in el if p.tag == _q("text", "p")]
    return "\n".join(parts) if vt is not None or parts else ""


def _repeat(el: Any, attr: str) -> int:
    raw = el.get(_q("table", attr), "1")
    try:
        n = int(raw)
    except ValueError:
        raise ValueError(f"table:{attr}={raw!r} is not a whole number") from None
    if n < 1:
        raise ValueError(f"table:{attr}={raw!r} is not a count")
    return n


def read_ods(path: Any) -> WorkbookData:
    """Read a RatioDesk .ods: input values, logical cells and formula text (``of:=...``).

    ``content.xml`` is parsed as a stream, row by row, so a sheet with a million rows neither fills
    the memory nor is cut at some count: repeated rows (``table:number-rows-repeated``) are counted,
    and a table sheet with more than :data:`MAX_DATA_ROWS` filled data rows is refused.
    """
    import xml.etree.ElementTree as ET
    import zipfile

    grid: Dict[str, List[List[Cell]]] = {}
    formulas: Dict[Tuple[str, int, int], str] = {}
    t_table, t_row = _q("table", "table"), _q("table", "table-row")
    t_cells = (_q("table", "table-cell"), _q("table", "covered-table-cell"))
    t_formula = _q("table", "formula")
    with zipfile.ZipFile(path) as z, z.open("content.xml") as f:
        stack: List[Any] = []
        builders: List[_GridBuilder] = []
        for event, el in ET.iterparse(f, events=("start", "end")):
            if event == "start":
                stack.append(el)
                if el.tag == t_table:
                    builders.append(_GridBuilder(str(el.get(_q("table", "name")))))
                continue
            stack.pop()
            if el.tag == t_row and builders:
                b = builders[-1]
                if not b.done:
                    r = b.next_row
                    cells: List[Cell] = []
                    gap = 0
                    for cell in el:
                        if cell.tag not in t_cells:
                            continue
                        crep = _repeat(cell, "number-columns-repeated")
                        f_text = cell.get(t_formula)
                        v: Cell = _ods_cell_value(cell)
                        if f_text is not None:
                            v = formula_cell(f_text, v)
                        if v == "":
                            gap += crep
                            continue
                        if len(cells) + gap >= MAX_COLUMNS:
                            continue
                        cells.extend([""] * gap)
                        gap = 0
                        for _ in range(min(crep, MAX_COLUMNS - len(cells))):
                            if f_text is not None:
                                formulas[(b.sheet, r, len(cells))] = f_text
                            cells.append(v)
                    b.add(cells, _repeat(el, "number-rows-repeated"))
                if stack:
                    stack[-1].remove(el)      # rows are done with: keep the memory of one row
            elif el.tag == t_table and builders:
                b = builders.pop()
                grid[b.sheet] = b.rows
                if stack:
                    stack[-1].remove(el)
    return WorkbookData(grid, formulas, str(path))


#: The first bytes of an OLE compound file (Office 97-2003 documents and encrypted Office files).
_OLE_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_ODS_MIME = "application/vnd.oasis.opendocument.spreadsheet"


def _sniff(path: str, kind: str) -> None:
    """Refuse, with a readable reason, a file that is not a workbook of its extension's kind."""
    import zipfile

    size = os.path.getsize(path)
    if size == 0:
        raise WorkbookFileError(path, "the file is empty (0 bytes): it is not a workbook")
    with open(path, "rb") as fh:
        head = fh.read(4096)
    if head.startswith(_OLE_MAGIC):
        with open(path, "rb") as fh:
            data = fh.read(min(size, 64 * 1024 * 1024))
        if "EncryptionInfo".encode("utf-16-le") in data or "EncryptedPackage".encode("utf-16-le") in data:
            raise WorkbookFileError(path, "the workbook is password-protected (encrypted): save a copy without "
                                          "a password (File ▸ Save As, no password) and reduce that copy")
        raise WorkbookFileError(path, "the file is an Office 97-2003 document (OLE compound file, e.g. an .xls), "
                                      f"not an .{kind}: open it and save it as .xlsx or .ods")
    if not head.startswith(b"PK"):
        looks_text = all(b >= 32 or b in (9, 10, 13) for b in head[:512])
        what = ("a text file (a CSV or similar renamed?)" if looks_text else "not a zip archive (random or "
                "unknown bytes)")
        raise WorkbookFileError(path, f"the file is {what}, not an .{kind} workbook: an .xlsx or .ods is a zip "
                                      "archive; open the data in a spreadsheet program and save it as .xlsx or .ods")
    try:
        with zipfile.ZipFile(path) as z:
            names = set(z.namelist())
            mime = z.read("mimetype").decode("ascii", "replace").strip() if "mimetype" in names else ""
    except zipfile.BadZipFile as exc:
        raise WorkbookFileError(path, f"the file is damaged: its zip archive is incomplete or corrupt ({exc}); "
                                      "was it copied or downloaded completely?") from None
    if kind == "xlsx" and "xl/workbook.xml" not in names:
        other = " (it is an .ods spreadsheet: name it .ods)" if mime == _ODS_MIME else ""
        raise WorkbookFileError(path, f"the zip archive is not an .xlsx workbook (no xl/workbook.xml){other}")
    if kind == "ods":
        if "xl/workbook.xml" in names:
            raise WorkbookFileError(path, "the file is an .xlsx workbook named .ods: name it .xlsx")
        if mime and mime != _ODS_MIME:
            raise WorkbookFileError(path, f"the file is an OpenDocument {mime.rsplit('.', 1)[-1]} document, "
                                          "not a spreadsheet")
        if "content.xml" not in names:
            raise WorkbookFileError(path, "the zip archive is not an .ods spreadsheet (no content.xml)")


def read_workbook(path: Any) -> WorkbookData:
    """Read a RatioDesk workbook, .xlsx or .ods, by its extension.

    Raises
    ------
    WorkbookFileError
        The file is empty, damaged, encrypted, of another format (an .xls, a CSV renamed .xlsx, an
        .ods without content) or cannot be parsed; one readable line, the file is only read.
    CellError
        A sheet has more than :data:`MAX_DATA_ROWS` filled data rows.
    OSError
        The file cannot be opened (missing, no permission).
    """
    p = str(path)
    low = p.lower()
    if low.endswith(".xls") or low.endswith(".xlsm") or low.endswith(".xlsb"):
        raise WorkbookFileError(p, f"an .{low.rsplit('.', 1)[-1]} workbook cannot be reduced: open it and save it "
                                   "as .xlsx (or .ods)")
    if not (low.endswith(".xlsx") or low.endswith(".ods")):
        raise InputError("workbook", f"must be a .xlsx or .ods file, got {shown(p)}")
    if os.path.isdir(p):
        raise WorkbookFileError(p, "is a folder, not a workbook file")
    kind = "xlsx" if low.endswith(".xlsx") else "ods"
    _sniff(p, kind)
    try:
        return read_xlsx(p) if kind == "xlsx" else read_ods(p)
    except (RatioDeskError, OSError, KeyboardInterrupt):
        raise
    except Exception as exc:  # noqa: BLE001 - whatever a damaged file makes the parser raise: one readable line
        detail = str(exc).strip().splitlines()[0][:200] if str(exc).strip() else ""
        raise WorkbookFileError(p, f"the .{kind} file cannot be read ({type(exc).__name__}"
                                   f"{': ' + detail if detail else ''}); is it damaged? Open and save it again "
                                   "in a spreadsheet program") from None


#: Sheets a workbook made by an earlier template may lack (read as empty).
OPTIONAL_SHEETS = ("Groups",)


def check_sheets(data: WorkbookData) -> None:
    """Every sheet the definition reads must be present (named exactly)."""
    for s in SHEETS:
        if s.name not in data.grid and s.name not in OPTIONAL_SHEETS:
            raise CellError(s.name, None, None, "", f"sheet missing from {data.path} (sheets there: "
                                                    f"{', '.join(data.grid) or 'none'})")
