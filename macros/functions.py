"""THE table of RatioDesk cell functions.

One entry per Calc function. From this table ``macros/package.py`` generates the UNO IDL (compiled
to ``ratiodesk.rdb``), the Function Wizard descriptions (``CalcAddIns.xcu``), and ``macros/addin.py``
builds its dispatch from it; ``macros/cells.py`` holds one adapter per entry (cells → arrays →
engine → cells, no math).

Names stored in saved workbooks — chosen once, never renamed
---------------------------------------------------------------
A workbook stores every add-in call as ``<SERVICE_NAME>.<method>``; in .ods for example
``of:=ORG.RATIODESK.CALCFUNCTIONS.RDISOCHRONBLOCK(...)``, in .xlsx the same name without ``of:=``.

* service name:        ``org.ratiodesk.CalcFunctions``           (:data:`SERVICE_NAME`)
* interface (IDL):     ``org.ratiodesk.XCalcFunctions``          (:data:`INTERFACE_NAME`)
* implementation name: ``org.ratiodesk.CalcFunctions.PythonImpl`` (:data:`IMPLEMENTATION_NAME`)
* method names:        ``rd`` + reduction step + quantity in CamelCase, e.g. ``rdIsochronBlock``,
  ``rdAgeIsochron``, ``rdMeanWeighted``. Argument names (``x``, ``sx``, ...) are part of the
  generated IDL and XCU as well; they may be *added* at the end of a signature (as optional
  arguments) but existing ones are never renamed, reordered or removed.

Display names (free to change, shown in the grid and the Function Wizard) follow one scheme:
``RD.<STEP>[.<QUANTITY>]`` where STEP is the reduction step in the trade's words — ``CYCLES``,
``INTERFERENCE``, ``MASSBIAS``, ``DILUTION``, ``BLANK``, ``STANDARD``, ``PROPAGATE``, ``ISOCHRON``,
``AGE``, ``INITIAL``, ``EPSILON``, ``MEAN``, ``ELLIPSE`` — plus ``RD.VERSION``, ``RD.ECHO`` and
``RD.DIAGNOSTICS``.

Argument kinds
--------------
``range``     a cell range, IDL ``sequence<sequence<any>>`` (text and empty cells arrive as text and
              ``''``, never as 0); required.
``cell``      a required single value or cell, IDL ``any`` (cheaper through the bridge than a 1x1
              ``sequence<sequence<any>>``; when omitted the cell says "<name> is required").
``value``     an optional single value or cell, IDL ``any`` (Calc treats ``any`` arguments as
              optional: an omitted one arrives as ``None``).

Measured in LibreOffice 7.4: inside a range of two or more cells an empty cell arrives as ``''``,
but a reference to one single empty cell arrives as 0.0, for ``any`` and ``any[][]`` alike. So
text arguments treat 0.0 as "not given", and a single numeric cell left empty reads as 0 (the
engine then rejects it where 0 is not allowed, e.g. a sigma).
``range_opt`` an optional range, IDL ``any``.

Return kinds: ``value`` (IDL ``any``) or ``array`` (IDL ``sequence<sequence<any>>``, entered as an
array formula; a single cell shows the first element).

This module is pure data and imports nothing outside the standard library.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Dict, Tuple

SERVICE_NAME = "org.ratiodesk.CalcFunctions"
INTERFACE_NAME = "org.ratiodesk.XCalcFunctions"
IMPLEMENTATION_NAME = "org.ratiodesk.CalcFunctions.PythonImpl"
ADDIN_SERVICE = "com.sun.star.sheet.AddIn"
#: Only LibreOffice's built-in category names are honoured; the step grouping lives in the names.
CATEGORY = "Add-In"
#: Leading marker of every RatioDesk message shown in a cell (see macros/cells.py).
MESSAGE_MARKER = "\u26a0 "

# Bounds on the work of one cell call (issue 10, item 4): every argument that sizes work or output
# has an upper bound, enforced by macros/cells.py before the engine is called and stated in the
# argument's Function Wizard text (tests/cells/test_bounds.py). Measured through the adapter on a
# 2-core machine (numpy 2, scipy 1.1x), each keeps one call within about two seconds: cycle
# statistics, weighted means (with external scatter) and session factors of 100 000 values < 0.1 s;
# a whole column of mostly empty cells ~0.15 s per range argument. The slowest is the isochron's
# excess-variance treatment, whose Nelder-Mead searches may each run to their 40 000-evaluation cap
# (seen in 1 of 8 simulated data sets at 1 000 points: 1.4 s; 2.3 s at 10 000 points, up to ~6 s
# when all three starts hit the cap), hence the isochron's lower bound.
#: Cells of any one-column or one-row range argument: one whole column of a standard sheet.
MAX_RANGE_CELLS = 1_048_576
#: Points (rows with values) of one isochron fit.
MAX_ISOCHRON_POINTS = 1_000
#: Values of one RD.CYCLES, RD.MEAN.WEIGHTED or RD.STANDARD.* call (cycles, values, runs); also the
#: largest minKept.
MAX_VALUES = 100_000
#: Segments of one RD.ELLIPSE outline (the output has one row more).
MAX_ELLIPSE_POINTS = 10_000
#: Named mixture ratios in one names/values pair (one element has at most ten stable isotopes).
MAX_NAMED_RATIOS = 100
#: Isotope columns of one spike block.
MAX_SPIKE_ISOTOPES = 20
#: Cells (rows x columns) of each table argument of the RD.WORKBOOK.* functions; the template's
#: largest table range (Measured) has 2 057. The engine keeps up to 256 recent table sets in its
#: caches; at this bound they hold ~170 MB at most (measured: ~3.3 kB per 100 cells).
MAX_TABLE_CELLS = 10_000

IDL_TYPES = {"range": "sequence< sequence< any > >", "cell": "any", "value": "any",
             "range_opt": "any",
             "array": "sequence< sequence< any > >"}


@dataclass(frozen=True)
class Arg:
    """One argument: stored IDL name, kind (see module docstring) and Function Wizard text."""

    name: str
    kind: str
    description: str

    @property
    def optional(self) -> bool:
        return self.kind in ("value", "range_opt")


@dataclass(frozen=True)
class Function:
    """One cell function.

    ``method`` is the stored internal name (never renamed); ``display`` the name users type;
    ``engine`` the engine function the adapter ``cells.<method>`` calls (documentation and tests);
    ``returns`` ``"value"`` or ``"array"``.
    """

    method: str
    display: str
    step: str
    description: str
    args: Tuple[Arg, ...]
    engine: str
    returns: str = "value"


def _r(name: str, description: str) -> Arg:
    return Arg(name, "range", description)


def _ro(name: str, description: str) -> Arg:
    return Arg(name, "range_opt", description)


def _v(name: str, description: str) -> Arg:
    return Arg(name, "value", description)


def _c(name: str, description: str) -> Arg:
    return Arg(name, "cell", description)


def _t(name: str, description: str) -> Arg:
    """A table argument of the RD.WORKBOOK.* functions (its bound stated)."""
    return _r(name, f"{description} (at most {MAX_TABLE_CELLS} cells).")


# Shared argument descriptions (the same words wherever the same input appears).
_CYCLE_TABLES = (_t("cycles", "The Cycles table (input columns) from its key row down"),
                 _t("refValues", "The Constants table (reference values) from its key row down"))
_X = _r("x", f"Parent/daughter ratios, e.g. 147Sm/144Nd (one column or one row; at most {MAX_ISOCHRON_POINTS} "
              "points).")
_SX = _r("sx", "1 sigma absolute uncertainty of each x (same length as x; > 0).")
_Y = _r("y", "Daughter ratios, e.g. 143Nd/144Nd (same length as x).")
_SY = _r("sy", "1 sigma absolute uncertainty of each y (same length as y; > 0).")
_RHO = _ro("rho", "Optional: error correlation of x and y per point, between -1 and 1 (same length as x; "
                        "empty: 0).")
_TREATMENT = _v("treatment", "Optional scatter treatment: analytical (default), expanded, equal-weights or "
                             "excess-variance.")
_SYSTEM = _c("system", "Isotope system: sm-nd, lu-hf or rb-sr.")
_REFSET = _v("refset", "Optional reference-value set: conventional (default), iupac or jw1980.")
_ANCHOR = _v("anchor", "Optional: a fixed initial ratio the line must pass through (with anchorSigma).")
_ANCHOR_1S = _v("anchorSigma", "Optional: 1 sigma of the anchor (> 0; needed with anchor).")
_FIT_ARGS = (_X, _SX, _Y, _SY, _RHO, _TREATMENT, _ANCHOR, _ANCHOR_1S)
_D = _c("daughter", "Measured daughter ratio today, e.g. 143Nd/144Nd.")
_D1S = _c("daughterSigma", "1 sigma absolute of the daughter ratio.")
_P = _c("parent", "Parent/daughter ratio today, e.g. 147Sm/144Nd.")
_P1S = _c("parentSigma", "1 sigma of the parent ratio.")
_TMA = _c("tMa", "Time in Ma (0 for today).")

_SPIKE = _r("spike", f"Spike block of 3 rows (at most {MAX_SPIKE_ISOTOPES} isotope columns): isotope names; their "
                    "abundances; spike isotope, concentration (umol/g), its 1 sigma.")
_RUNS = _r("runs", f"The session's measured values of the reference material (at most {MAX_VALUES}).")

_ANALYSIS_ARGS = (
    _SYSTEM,
    _r("parentNames", "Names of the parent element's mixture ratios, e.g. 147Sm/152Sm, 149Sm/152Sm (at most "
                      f"{MAX_NAMED_RATIOS})."),
    _r("parentValues", "Their measured values (same length as parentNames)."),
    _r("daughterNames", f"Names of the daughter element's mixture ratios, e.g. 143Nd/144Nd, ... (at most "
                        f"{MAX_NAMED_RATIOS})."),
    _r("daughterValues", "Their measured values (same length as daughterNames)."),
    _c("sampleMass", "Sample mass (g)."), _c("spikeMass", "Mixed-spike solution mass (g)."),
    _r("parentSpike", f"Spike block of the parent element (3 rows, at most {MAX_SPIKE_ISOTOPES} isotope columns, "
                      "as for RD.DILUTION)."),
    _r("daughterSpike", f"Spike block of the daughter element (3 rows, at most {MAX_SPIKE_ISOTOPES} isotope "
                        "columns)."),
    _ro("parentSigmas", "Optional: 1 sigma of each parent mixture ratio (same length and order as parentNames)."),
    _ro("daughterSigmas", "Optional: 1 sigma of each daughter mixture ratio (same length and order as "
                          "daughterNames)."),
    _v("parentNorm", "Optional: parent normalising ratio, e.g. 147Sm/152Sm."),
    _v("parentBias", "Optional: external parent mass-bias factor (two-isotope Lu, Rb)."),
    _v("parentBlankNg", "Optional: parent blank in ng (default 0)."),
    _v("daughterBlankNg", "Optional: daughter blank in ng (default 0)."),
)

FUNCTIONS: Tuple[Function, ...] = (
    # -- meta --------------------------------------------------------------------------------
    Function("rdVersion", "RD.VERSION", "meta",
             "RatioDesk version of the installed extension (and of its engine).", (), "reduction.__version__"),
    Function("rdEcho", "RD.ECHO", "meta",
             "Returns its argument unchanged: a check that the extension answers (and the speed floor of "
             "a cell function).", (_v("value", "Any value or cell."),), "(none)"),
    # -- cycles ---------------------------------------------------------------------------------
    Function("rdCycles", "RD.CYCLES", "cycles",
             "Cycle statistics of one analysis after one robust outlier pass (cycles more than k robust SD "
             "from the median are rejected; robust SD = 1.4826 x median absolute deviation): one row of 5 "
             "cells: mean, its standard error (1 sigma), cycle SD, cycles kept, cycles rejected. Empty "
             "cells are missing cycles.",
             (_r("cycles", f"The cycle values of one analysis (one row or one column; at most {MAX_VALUES} "
                           "cycles)."),
              _v("rejectK", "Optional: reject cycles more than k robust SD from the median (default 3.5, which "
                            "rejects only gross outliers and keeps the standard error honest; \"none\": "
                            "keep all)."),
              _v("minKept", f"Optional: never keep fewer cycles than this, a whole number from 2 to {MAX_VALUES} "
                            "(default 3).")),
             "cycles.cycle_stats", "array"),
    # -- interference -----------------------------------------------------------------------------
    Function("rdInterferenceStrip", "RD.INTERFERENCE.STRIP", "interference",
             "Strip an isobaric interference using a monitor isotope: one row of 3 cells: corrected beam, "
             "subtracted correction, correction / total.",
             (_c("total", "Beam (or ratio) at the interfered mass, e.g. mass 144."),
              _c("monitor", "Beam (or ratio) of the monitor isotope, e.g. 147Sm."),
              _c("interferent", "Interfering isotope, e.g. 144Sm."),
              _c("monitorIsotope", "Monitor isotope, e.g. 147Sm."),
              _v("biasFactor", "Optional: mass-bias factor of the interfering element (default 0)."),
              _v("law", "Optional mass-bias law: exponential (default), power or linear."),
              _v("trueRatio", "Optional: interferent/monitor ratio to use instead of the reference value.")),
             "interference.strip_isobar", "array"),
    # -- mass bias --------------------------------------------------------------------------------
    Function("rdMassbiasFactor", "RD.MASSBIAS.FACTOR", "massbias",
             "Mass-bias factor (beta of the exponential law, or epsilon per u) from a measured normalising ratio.",
             (_c("measuredNorm", "Measured normalising ratio, e.g. 146Nd/144Nd."),
              _c("normRatio", "Name of the normalising ratio, e.g. 146Nd/144Nd."),
              _v("law", "Optional mass-bias law: exponential (default), power or linear."),
              _v("trueNorm", "Optional: true value of the normalising ratio (default: the reference value).")),
             "massbias.bias_factor_from"),
    Function("rdMassbiasCorrect", "RD.MASSBIAS.CORRECT", "massbias",
             "Correct a measured ratio for mass bias with a known factor.",
             (_c("measured", "Measured ratio."), _c("ratio", "Its name, e.g. 143Nd/144Nd."),
              _c("factor", "Mass-bias factor (from RD.MASSBIAS.FACTOR)."),
              _v("law", "Optional mass-bias law: exponential (default), power or linear.")),
             "massbias.correct_named"),
    Function("rdMassbiasNormalise", "RD.MASSBIAS.NORMALISE", "massbias",
             "Internal normalisation: correct a ratio with the mass bias of a normalising ratio measured with it.",
             (_c("measured", "Measured ratio, e.g. 143Nd/144Nd."), _c("ratio", "Its name, e.g. 143Nd/144Nd."),
              _c("measuredNorm", "Measured normalising ratio."),
              _c("normRatio", "Name of the normalising ratio, e.g. 146Nd/144Nd."),
              _v("law", "Optional mass-bias law: exponential (default), power or linear."),
              _v("trueNorm", "Optional: true value of the normalising ratio (default: the reference value).")),
             "massbias.normalise"),
    # -- isotope dilution -------------------------------------------------------------------------
    Function("rdDilutionConc", "RD.DILUTION.CONC", "dilution",
             "Element concentration in ug/g by isotope dilution from one mixture ratio (sample of natural "
             "composition, external mass-bias factor).",
             (_c("mixRatio", "Measured spike-isotope ratio of the mixture, e.g. 150Nd/144Nd."),
              _c("ratio", "Its name, e.g. 150Nd/144Nd (numerator = the spike isotope)."),
              _c("sampleMass", "Sample mass (g)."), _c("spikeMass", "Spike solution mass (g)."),
              _SPIKE,
              _v("biasFactor", "Optional: mass-bias factor applied to mixRatio (default 0)."),
              _v("law", "Optional mass-bias law: exponential (default), power or linear.")),
             "dilution.id_concentration"),
    Function("rdDilutionBlock", "RD.DILUTION", "dilution",
             "Isotope dilution with (optional iterative internal) mass-bias correction, as a labelled block of 2 "
             "columns: concentrations, bias factor, magnification, then every solved sample ratio.",
             (_r("names", "Names of the measured mixture ratios, e.g. 143Nd/144Nd, 146Nd/144Nd, 150Nd/144Nd "
                          f"(at most {MAX_NAMED_RATIOS})."),
              _r("values", "Their measured values (interference-stripped, not bias-corrected; same length as "
                           "names)."),
              _SPIKE,
              _c("sampleMass", "Sample mass (g)."), _c("spikeMass", "Spike solution mass (g)."),
              _v("normRatio", "Optional: normalising ratio for internal normalisation, e.g. 146Nd/144Nd."),
              _v("biasFactor", "Optional: external mass-bias factor (instead of normRatio)."),
              _v("law", "Optional mass-bias law: exponential (default), power or linear.")),
             "dilution.isotope_dilution", "array"),
    # -- blank ------------------------------------------------------------------------------------
    Function("rdBlankCorrect", "RD.BLANK.CORRECT", "blank",
             "Subtract a procedural blank (mass balance): one row of 6 cells: amount, 1 sigma, ratio, 1 sigma, "
             "their correlation, blank share.",
             (_c("totalUmol", "Measured amount of the ratio's denominator isotope (sample + blank)."),
              _c("totalRatio", "Measured ratio of sample + blank."),
              _c("blankUmol", "Blank amount of the denominator isotope (same unit)."),
              _c("blankRatio", "Ratio of the blank."),
              _v("totalSigma", "Optional: 1 sigma of totalUmol (default 0)."),
              _v("blankSigma", "Optional: 1 sigma of blankUmol (default 0)."),
              _v("totalRatioSigma", "Optional: 1 sigma of totalRatio (default 0)."),
              _v("blankRatioSigma", "Optional: 1 sigma of blankRatio (default 0).")),
             "blank.blank_correct", "array"),
    Function("rdBlankUmol", "RD.BLANK.UMOL", "blank",
             "Blank of an element in ng converted to umol of one of its isotopes (natural composition).",
             (_c("blankNg", "Blank amount in ng of the element."), _c("element", "Element symbol, e.g. Nd."),
              _c("isotope", "The isotope, e.g. 144Nd.")), "blank.blank_umol"),
    # -- reference-material normalisation -----------------------------------------------------------
    Function("rdStandardFactor", "RD.STANDARD.FACTOR", "standard",
             "Session normalisation factor from reference-material runs (accepted / mean measured): one row of "
             "6 cells: factor, 1 sigma random, 1 sigma systematic, runs, mean, reproducibility (relative SD).",
             (_RUNS,
              _v("accepted", "Optional: accepted value (else looked up from material and ratio)."),
              _v("material", "Optional: reference material, e.g. JNdi-1."),
              _v("ratio", "Optional: the ratio, e.g. 143Nd/144Nd."),
              _v("acceptedSigma", "Optional: 1 sigma of the accepted value.")),
             "standards.standard_factor", "array"),
    Function("rdStandardApply", "RD.STANDARD.APPLY", "standard",
             "Normalise a sample ratio to the session's reference-material runs: one row of 3 cells: value, "
             "1 sigma random (with the standard's reproducibility), 1 sigma systematic.",
             (_c("value", "Sample ratio."), _c("sigma", "Its 1 sigma."),
              _RUNS,
              _v("accepted", "Optional: accepted value (else looked up from material and ratio)."),
              _v("material", "Optional: reference material, e.g. JNdi-1."),
              _v("ratio", "Optional: the ratio, e.g. 143Nd/144Nd."),
              _v("acceptedSigma", "Optional: 1 sigma of the accepted value."),
              _v("reproducibility", "Optional: FALSE to leave out the standard's reproducibility (default TRUE).")),
             "standards.apply_standard", "array"),
    # -- one spiked analysis, propagated ------------------------------------------------------------
    Function("rdAnalysisBlock", "RD.ANALYSIS", "propagate",
             "One spiked analysis from mixture ratios to isochron inputs with propagated uncertainties, as a "
             "labelled block of 2 columns: parent and daughter ratio with 1 sigma, their correlation rho, "
             "concentrations with 1 sigma, random and systematic parts.",
             _ANALYSIS_ARGS, "chain.reduce_spiked_analysis", "array"),
    Function("rdAnalysisRow", "RD.ANALYSIS.ROW", "propagate",
             "The isochron inputs of one spiked analysis as one row of 5 cells: x, 1 sigma, y, 1 sigma, rho "
             "(propagated; same arguments as RD.ANALYSIS, whose result it shares).",
             _ANALYSIS_ARGS, "chain.reduce_spiked_analysis", "array"),
    # -- isochron (York regression) ------------------------------------------------------------
    Function("rdIsochronBlock", "RD.ISOCHRON", "isochron",
             "Isochron by York regression (York et al. 2004) as a labelled block of 2 columns and 16 rows: "
             "slope, intercept with 1 sigma, their correlation, MSWD, p, n and the 95% limits. Enter as an "
             "array formula over 16 x 2 cells.", _FIT_ARGS, "regression.fit_isochron", "array"),
    Function("rdIsochronSlope", "RD.ISOCHRON.SLOPE", "isochron",
             "Isochron slope and its 1 sigma (one row of 2 cells; a single cell shows the slope).",
             _FIT_ARGS, "regression.fit_isochron", "array"),
    Function("rdIsochronIntercept", "RD.ISOCHRON.INTERCEPT", "isochron",
             "Isochron intercept (the initial ratio) and its 1 sigma (one row of 2 cells).",
             _FIT_ARGS, "regression.fit_isochron", "array"),
    Function("rdIsochronMswd", "RD.ISOCHRON.MSWD", "isochron",
             "MSWD of the isochron fit (undefined for 2 points).", _FIT_ARGS, "regression.fit_isochron"),
    Function("rdIsochronValue", "RD.ISOCHRON.VALUE", "isochron",
             "One quantity of the isochron fit, named as in the first column of RD.ISOCHRON (e.g. p, "
             "rho, slope_95).",
             (_c("quantity", "Name of the quantity, as in the first column of RD.ISOCHRON."),) + _FIT_ARGS,
             "regression.fit_isochron"),
    # -- ages ----------------------------------------------------------------------------------
    Function("rdAgeIsochron", "RD.AGE.ISOCHRON", "age",
             "Isochron age in Ma from a York fit: one row of 5 cells: age, 1 sigma (slope only), 1 sigma "
             "including the decay-constant uncertainty, initial ratio, its 1 sigma.",
             (_X, _SX, _Y, _SY, _SYSTEM, _RHO, _TREATMENT, _REFSET, _ANCHOR, _ANCHOR_1S), "ages.isochron_age",
             "array"),
    Function("rdAgeTwoPoint", "RD.AGE.TWOPOINT", "age",
             "Two-point (e.g. mineral - whole-rock) age in Ma: one row of 5 cells as RD.AGE.ISOCHRON.",
             (_r("point1", "First point as one row of 4 or 5 cells: x, sx, y, sy and optionally rho."),
              _r("point2", "Second point, the same way (4 or 5 cells)."), _SYSTEM, _REFSET), "ages.two_point_age",
             "array"),
    Function("rdAgeModel", "RD.AGE.MODEL", "age",
             "Single-stage model age in Ma relative to CHUR or the depleted mantle: one row of 3 cells: age, "
             "1 sigma, check (ok, or a warning: older than the solar system, P/D close to the reservoir's, "
             "sigma above half the age).",
             (_D, _D1S, _P, _P1S, _SYSTEM, _v("reservoir", "Optional reservoir: CHUR (default) or DM (UR for Sr)."),
              _v("rho", "Optional: correlation of the daughter and parent ratio errors (default 0)."), _REFSET),
             "ages.model_age", "array"),
    Function("rdInitialRatio", "RD.INITIAL.RATIO", "initial",
             "Daughter ratio of a sample at time t: R(t) = R - P (exp(lambda t) - 1).",
             (_c("daughter", "Measured daughter ratio today."), _c("parent", "Parent/daughter ratio today."),
              _TMA, _SYSTEM, _REFSET), "ages.initial_ratio"),
    Function("rdEpsilon", "RD.EPSILON", "epsilon",
             "Epsilon value (eNd, eHf) at time t relative to CHUR: one row of 2 cells: epsilon, 1 sigma.",
             (_D, _D1S, _P, _TMA, _SYSTEM, _v("parentSigma", "Optional: 1 sigma of the parent ratio (default 0)."),
              _v("rho", "Optional: correlation of the daughter and parent ratio errors (default 0)."), _REFSET,
              _v("withReference", "Optional: TRUE to add the reservoir and decay-constant uncertainties "
                                   "(default FALSE).")), "ages.epsilon", "array"),
    Function("rdAgeSlope", "RD.AGE.SLOPE", "age",
             "Age in Ma from an isochron slope: t = ln(1 + slope) / lambda.",
             (_c("slope", "Isochron slope (> -1)."), _SYSTEM, _REFSET), "ages.age_from_slope"),
    # -- weighted mean -------------------------------------------------------------------------
    Function("rdMeanWeighted", "RD.MEAN.WEIGHTED", "mean",
             "Inverse-variance weighted mean: one row of 4 cells: mean, its 1 sigma, MSWD, p.",
             (_r("values", f"Values to average (one column or one row; at most {MAX_VALUES})."),
              _r("sigma", "1 sigma absolute uncertainty of each value (same length as values; > 0)."),
              _v("external", "Optional: TRUE to add an external scatter, estimated by maximum likelihood, to every "
                             "sigma (default FALSE).")),
             "regression.weighted_mean", "array"),
    # -- the template workbook (reduction/workbook/ evaluates the same cells in batch) -----------
    Function("rdWorkbookAnalysis", "RD.WORKBOOK.ANALYSIS", "workbook",
             "One result of one analysis of the RatioDesk template, computed from its sheets' tables (the "
             "Results sheet's cells).",
             (_c("quantity", "Result to show, e.g. x, x_1s, y, y_1s, rho, parent_conc, check."),
              _c("analysis", "Analysis ID (column A of Samples)."),
              _t("samples", "The Samples table from its key row down"),
              _t("measured", "The Measured table from its key row down"),
              _t("spikes", "The Spikes table from its key row down"),
              _t("standards", "The Standards table from its key row down"),
              _t("refValues", "The Constants table (reference values) from its key row down"),
              _ro("runs", "Optional: the Runs sheet (run means from the Cycles sheet) from its key row down (at most "
                         f"{MAX_TABLE_CELLS} cells).")),
             "workbook.analysis_value"),
    Function("rdWorkbookStandard", "RD.WORKBOOK.STANDARD", "workbook",
             "One computed cell of a Standards row of the RatioDesk template: the material's role in its "
             "session, the session factor (from the primary only), the normalised value, and for a check "
             "material its mean, accepted value, deviation (ppm, epsilon) and z-score.",
             (_c("quantity", "role, factor, normalised, mean, accepted, dev_ppm, dev_eps or z."),
              _c("session", "Session of the row."), _c("material", "Reference material of the row."),
              _c("ratio", "Ratio of the row, e.g. 143Nd/144Nd."), _c("measured", "Measured value of the row."),
              _t("standards", "The Standards table (input columns) from its key row down"),
              _t("refValues", "The Constants table (reference values) from its key row down")),
             "workbook.standard_value"),
    Function("rdWorkbookIsochron", "RD.WORKBOOK.ISOCHRON", "workbook",
             "One quantity of the template's isochron of one system (the Isochron sheet's summary cells).",
             (_c("quantity", "Quantity, e.g. age, age_2s, initial, mswd, p, slope, message."),
              _SYSTEM, _c("treatment", "Scatter treatment cell (empty: analytical)."),
              _t("selection", "This system's selection block of the Isochron sheet, key row first"),
              _t("results", "The Results table from its key row down"),
              _t("refValues", "The Constants table (reference values) from its key row down")),
             "workbook.isochron_value"),
    # -- error ellipse -------------------------------------------------------------------------
    Function("rdEllipse", "RD.ELLIPSE", "ellipse",
             "Outline of a point's error ellipse for an x-y chart: points + 1 rows of 2 cells (x, y), closed. "
             "Enter as an array formula.",
             (_c("x", "x of the point."), _c("sx", "1 sigma of x (> 0)."), _c("y", "y of the point."),
              _c("sy", "1 sigma of y (> 0)."), _v("rho", "Optional: error correlation (default 0)."),
              _v("points", f"Optional: number of outline segments, a whole number from 3 to {MAX_ELLIPSE_POINTS} "
                           "(default 48)."),
              _v("confidence", "Optional: confidence level of the region (default 0.95).")),
             "regression.ellipse_points", "array"),
    # -- meta, added later (appended: the interface's existing methods keep their places) ---------
    Function("rdDiagnostics", "RD.DIAGNOSTICS", "meta",
             "What RatioDesk runs on, as label and value rows (enter as an array formula over 14 x 2 cells): its "
             "version and build target, LibreOffice's Python (version, executable, platform), the numpy in use "
             "(version, folder, whether LibreOffice's own or the one bundled with RatioDesk) or why it is "
             "missing, the engine, the RatioDesk package that fits this LibreOffice, the log file, and what to "
             "do. Works without numpy.", (), "(none)", "array"),
    Function("rdWorkbookRunRatios", "RD.WORKBOOK.RUNRATIOS", "workbook",
             "The ratios a Measured run of an element must give with a spike enriched in the given isotope (the "
             "Spikes sheet's last column): radiogenic or parent, normalising and spike isotope, each to the "
             "element's reference isotope; for Lu and Rb also the typed bias factor.",
             (_c("element", "Element of the spike row: Sm, Nd, Lu, Hf, Rb or Sr."),
              _v("spikeIsotope", "Optional: the spike's enriched isotope, e.g. 150Nd.")),
             "workbook.run_ratios"),
    Function("rdWorkbookCycleRuns", "RD.WORKBOOK.CYCLERUNS", "workbook",
             "The Runs sheet of the template: per run of the Cycles sheet its cycles, kept cycles, and per ratio the "
             "mean and 1 sigma standard error of the kept cycles (robust rule, k = lab.cycle_reject_k). Enter as an "
             "array formula.",
             _CYCLE_TABLES, "workbook.cycle_runs", "array"),
    Function("rdWorkbookCycleKept", "RD.WORKBOOK.CYCLEKEPT", "workbook",
             "The Cycles sheet's Kept column: for each cycle row, kept or the ratios it was rejected for. Enter as "
             "an array formula over the column.",
             _CYCLE_TABLES, "workbook.cycle_kept", "array"),
    Function("rdDeviationEllipse", "RD.DEVIATION.ELLIPSE", "ellipse",
             "A point's error ellipse in deviation space for a chart beside the isochron: points + 1 rows of 2 "
             "cells (x, deviation from the line in ppm), closed. Enter as an array formula.",
             (_c("x", "x of the point."), _c("sx", "1 sigma of x (> 0)."), _c("y", "y of the point."),
              _c("sy", "1 sigma of y (> 0)."), _c("rho", "Error correlation (an empty cell counts as 0)."),
              _c("slope", "Slope of the line (the isochron)."), _c("intercept", "Intercept of the line."),
              _v("points", f"Optional: number of outline segments, a whole number from 3 to {MAX_ELLIPSE_POINTS} "
                           "(default 48)."),
              _v("confidence", "Optional: confidence level of the region (default 0.95).")),
             "regression.deviation_points", "array"),
    Function("rdWorkbookGroup", "RD.WORKBOOK.GROUP", "workbook",
             "One quantity of the isochron of an isochron group of the RatioDesk template (the Groups sheet's "
             "cells): its points are the Samples rows naming the group with Use in isochron 1 or empty.",
             (_c("quantity", "Quantity: system, n, age, age_2s, initial, mswd, p, slope, message, ..."),
              _c("group", "Group name, as in the Samples column Isochron group."),
              _c("treatment", "Scatter treatment cell (empty: analytical)."),
              _t("samples", "The Samples table from its key row down"),
              _t("results", "The Results table from its key row down"),
              _t("refValues", "The Constants table (reference values) from its key row down")),
             "workbook.group_value"),
    Function("rdWorkbookGroupPoints", "RD.WORKBOOK.GROUPPOINTS", "workbook",
             "The points of one isochron group: per Samples row of the group its analysis, use (1/0), x, 1 sigma "
             "x, y, 1 sigma y and rho from the Results sheet. Enter as an array formula (7 columns).",
             (_c("group", "Group name (an empty cell: empty rows)."),
              _t("samples", "The Samples table from its key row down"),
              _t("results", "The Results table from its key row down")),
             "workbook.group_points", "array"),
    Function("rdWorkbookGroupOutlines", "RD.WORKBOOK.GROUPOUTLINES", "workbook",
             "The 95 % error ellipses of an isochron group's used points, stacked for one chart series with an "
             "empty row between outlines: at full scale (ellipse) or as ppm from the group's fitted line "
             "(deviation). Enter as an array formula (2 columns).",
             (_c("kind", "ellipse or deviation."), _c("group", "Group name (an empty cell: empty rows)."),
              _t("groups", "The Groups table (input columns) from its key row down"),
              _t("samples", "The Samples table from its key row down"),
              _t("results", "The Results table from its key row down"),
              _t("refValues", "The Constants table (reference values) from its key row down")),
             "workbook.group_outlines", "array"),
    Function("rdWorkbookGroupsUnlisted", "RD.WORKBOOK.GROUPSUNLISTED", "workbook",
             "Empty, or which isochron groups the Samples sheet names that the Groups table does not list.",
             (_t("groups", "The Groups table (input columns) from its key row down"),
              _t("samples", "The Samples table from its key row down")),
             "workbook.unlisted_groups"),
)

BY_METHOD: Dict[str, Function] = {f.method: f for f in FUNCTIONS}
BY_DISPLAY: Dict[str, Function] = {f.display.upper(): f for f in FUNCTIONS}
