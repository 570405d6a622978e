"""Cell-function cases shared by the adapter tests (no LibreOffice) and the integration tests.

Each :class:`Case` gives the cells a technician would type (ranges, literals, omitted
arguments) and the expected cell result computed by calling the engine *directly* (or, for bad
input, the words the message must contain). ``as_delivered`` turns the cells into the Python
values LibreOffice hands an add-in (measured with LibreOffice 7.4: a range arrives as a tuple of
tuples with '' for an empty cell; a single-cell reference to an ``any`` argument arrives as its
value, 0.0 when empty; an omitted argument as None).

Demo data (invented, rule 3): five fictional garnet/whole-rock fractions of a "Cedar Tarn
gneiss", forward-modelled from a chosen true Sm-Nd age of 1000 Ma and initial 0.51090 with small
invented offsets; λ(147Sm) = 6.54e-12 /a (Lugmair & Marti 1978).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable, Dict, List, Optional, Sequence, Tuple, Union

import functions as table

import reduction
from reduction import ages, blank, chain, constants, cycles, dilution, interference, massbias, regression, standards

MARK = table.MESSAGE_MARKER


@dataclass(frozen=True)
class R:
    """A range of cells placed on the sheet (rows of values; None = empty; Formula = a formula cell)."""

    grid: Tuple[Tuple[Any, ...], ...]


@dataclass(frozen=True)
class Formula:
    """A formula cell inside a range, with the value it evaluates to (for the adapter tests)."""

    formula: str
    value: Any


@dataclass(frozen=True)
class L:
    """A literal typed into the formula (number or text)."""

    value: Any


OMIT = None


@dataclass(frozen=True)
class Msg:
    """Expected: a RatioDesk message (marker first) containing every one of ``parts``."""

    parts: Tuple[str, ...]


Expected = Union[Callable[[], Any], Msg]


@dataclass(frozen=True)
class Case:
    id: str
    method: str
    args: Tuple[Any, ...]
    expect: Expected
    array: bool = field(default=False)


def col(values: Sequence[Any]) -> R:
    return R(tuple((v,) for v in values))


def _cell_value(v: Any) -> Any:
    if isinstance(v, Formula):
        v = v.value
    return "" if v is None else v


def as_delivered(method: str, args: Sequence[Any]) -> List[Any]:
    """The Python values LibreOffice passes for ``args`` to the table's method ``method``."""
    fn = table.BY_METHOD[method]
    out: List[Any] = []
    for spec, a in zip(fn.args, args):
        if a is OMIT:
            out.append(None)
        elif isinstance(a, L):
            out.append(((a.value,),) if spec.kind == "range" else a.value)
        else:
            grid = tuple(tuple(_cell_value(v) for v in r) for r in a.grid)
            single = len(grid) == 1 and len(grid[0]) == 1
            if spec.kind in ("value", "cell", "range_opt") and single:
                v = grid[0][0]
                out.append(0.0 if v == "" else v)
            else:
                out.append(grid)
    out += [None] * (len(fn.args) - len(out))
    return out


def grid_of(result: Any) -> Tuple[Tuple[Any, ...], ...]:
    """A result as rows of cells."""
    if isinstance(result, tuple):
        return result
    return ((result,),)


def _close(a: Any, b: Any, rel: float) -> bool:
    if isinstance(a, float) and isinstance(b, float):
        return a == b or abs(a - b) <= rel * max(abs(a), abs(b))
    return a == b


def check(case: Case, got: Any, rel: float = 1e-12, want: Any = None) -> Optional[str]:
    """None when ``got`` (a cell value or rows of cells) matches the case, else what differs.

    ``want`` replaces ``case.expect()`` (the integration tests compute it with the engine in
    LibreOffice's own Python, whose numpy/scipy versions differ from the venv's).
    """
    g = grid_of(got)
    if isinstance(case.expect, Msg):
        v = g[0][0]
        if not isinstance(v, str) or not v.startswith(MARK) or not all(p in v for p in case.expect.parts):
            return f"expected a message containing {case.expect.parts}, got {v!r}"
        return None
    want = grid_of(case.expect() if want is None else want)
    if len(g) < len(want) or any(len(gr) < len(wr) for gr, wr in zip(g, want)):
        return f"shape: expected {len(want)}x{len(want[0])}, got {g!r}"
    for i, wr in enumerate(want):
        for j, w in enumerate(wr):
            w = float(w) if isinstance(w, (int, float)) and not isinstance(w, bool) else w
            if not _close(w, g[i][j], rel):
                return f"cell ({i + 1},{j + 1}): expected {w!r}, got {g[i][j]!r}"
    return None


# --------------------------------------------------------------------------------------------
# demo data (invented) and the engine called directly
# --------------------------------------------------------------------------------------------
LAM = 6.54e-12
SLOPE = math.expm1(LAM * 1000e6)
X = [0.1012, 0.1407, 0.1795, 0.2213, 0.2611]
OFFSETS = [2.1e-6, -3.0e-6, 0.8e-6, 2.6e-6, -1.9e-6]
# Rounded as a technician types them (and as .ods/.xlsx store them: 15 significant digits).
Y = [round(0.51090 + SLOPE * x + d, 8) for x, d in zip(X, OFFSETS)]
SX = [round(0.002 * x, 9) for x in X]
SY = [4.0e-6] * 5
RHO = [0.1, 0.2, 0.0, 0.15, 0.05]
FIT = (col(X), col(SX), col(Y), col(SY))
V = [10.02, 10.11, 9.95, 10.07]
SV = [0.05, 0.04, 0.06, 0.05]


def _fit(treatment: str = "analytical", rho: Optional[List[float]] = RHO, n: int = 5) -> Any:
    return regression.fit_isochron(X[:n], SX[:n], Y[:n], SY[:n], rho[:n] if rho else None, treatment=treatment)


def block(f: Any) -> Tuple[Tuple[Any, ...], ...]:
    lim = f.mswd_limits_95
    return (("slope", f.slope), ("slope_1s", f.slope_sigma_1s), ("intercept", f.intercept),
            ("intercept_1s", f.intercept_sigma_1s), ("rho", f.rho_slope_intercept), ("mswd", f.mswd),
            ("p", f.p_value), ("mswd_low_95", lim[0]), ("mswd_high_95", lim[1]), ("n", f.n), ("dof", f.dof),
            ("slope_95", f.slope_sigma_95_expanded), ("intercept_95", f.intercept_sigma_95_expanded),
            ("excess_sy_1s", f.excess_sigma_y_1s), ("sigma_scale", f.sigma_scale), ("treatment", f.treatment))


def _age(ref: Optional[str] = None) -> Any:
    a = ages.isochron_age(_fit(), "sm-nd", constants.reference_set(ref))
    return ((a.age_ma, a.age_sigma_1s_ma, a.age_sigma_1s_ma_with_lambda, a.initial, a.initial_sigma_1s),)


def _wm(external: bool = False) -> Any:
    m = regression.weighted_mean(V, SV, external_scatter=external)
    return ((m.mean, m.mean_sigma_1s, m.mswd, m.p_value),)


def _two_point() -> Any:
    a = ages.two_point_age(X[0], SX[0], Y[0], SY[0], X[4], SX[4], Y[4], SY[4], "sm-nd", rho1=RHO[0], rho2=RHO[4])
    return ((a.age_ma, a.age_sigma_1s_ma, a.age_sigma_1s_ma_with_lambda, a.initial, a.initial_sigma_1s),)


def _model(reservoir: str = "CHUR", rho: float = 0.0, d: float = 0.51150, p: float = 0.1100) -> Any:
    m = ages.model_age(d, 5e-6, p, 0.0011, "sm-nd", reservoir, None, rho)
    return ((m.age_ma, m.age_sigma_1s_ma, "ok" if not m.flags else MARK + "; ".join(m.flags)),)


def _eps(with_reference: bool = False) -> Any:
    e = ages.epsilon(Y[0], SY[0], X[0], 1000.0, "sm-nd", None, SX[0], RHO[0], include_reference=with_reference)
    return ((e.value, e.sigma_1s),)


def _ellipse() -> Any:
    xs, ys = regression.ellipse_points(X[0], SX[0], Y[0], SY[0], RHO[0], n_points=24)
    return tuple((float(a), float(b)) for a, b in zip(xs, ys))


def _anchored() -> Any:
    return block(regression.fit_isochron(X, SX, Y, SY, RHO, anchor=(0.51090, 1e-5)))


# part 2: raw data -> corrected ratios (invented run values; spikes are the engine's INVENTED demo spikes)
CYC = [0.5121105, 0.5121098, 0.5121112, 0.5121101, 0.5121109, 0.5121095, 0.5121230, 0.5121103, 0.5121107,
       0.5121099]
_SPK = dilution.load_demo_spikes()
ND_SPIKE, SM_SPIKE = _SPK["demo-SmNd-149-150 Nd"], _SPK["demo-SmNd-149-150 Sm"]


def spike_block(sp: Any) -> R:
    n = len(sp.isotopes)
    third = (sp.spike_isotope, sp.concentration_umol_g, sp.concentration_sigma_1s) + (None,) * (n - 3)
    return R((tuple(sp.isotopes), tuple(sp.abundances), third))


def spike_of(sp: Any) -> Any:
    """The spike exactly as the adapter builds it from the block."""
    return dilution.make_spike(sp.element, sp.isotopes, sp.abundances, sp.spike_isotope, sp.concentration_umol_g,
                               sp.concentration_sigma_1s)


def _rounded(d: Dict[str, float], keys: Sequence[str]) -> Dict[str, float]:
    return {k: round(float(d[k]), 9) for k in keys}


ND_KEYS = ("143Nd/144Nd", "146Nd/144Nd", "150Nd/144Nd")
SM_KEYS = ("147Sm/152Sm", "149Sm/152Sm")
ND_MIX = _rounded(dilution.forward_mixture("Nd", "144Nd", 0.10, 0.30, ND_SPIKE, 0.08, bias_factor=1.6,
                                           sample_ratios={"143Nd/144Nd": 0.5121}), ND_KEYS)
SM_MIX = _rounded(dilution.forward_mixture("Sm", "152Sm", 0.02, 0.30, SM_SPIKE, 0.08, bias_factor=1.35), SM_KEYS)
ND_MIX_1S = {k: 2e-6 * v for k, v in ND_MIX.items()}
SM_MIX_1S = {k: 3e-6 * v for k, v in SM_MIX.items()}
RUNS = [0.512098, 0.512105, 0.512101, 0.512110]


def _row(names: Sequence[str], d: Dict[str, float]) -> Tuple[R, R]:
    return R((tuple(names),)), R((tuple(d[k] for k in names),))


def _cycles(k: Any = 3.5) -> Any:
    st = cycles.cycle_stats(CYC, reject_k=k)
    return ((st.mean, st.sem_1s, st.sd_1s, st.n_kept, st.n_rejected),)


def _strip() -> Any:
    st = interference.strip_isobar(2.0, 4e-4, "144Sm", "147Sm", bias_factor=1.3)
    return ((st.corrected, st.correction, st.correction_rel),)


def _dil_block() -> Any:
    d = dilution.isotope_dilution(dict(ND_MIX), spike_of(ND_SPIKE), 0.30, 0.08, norm_ratio="146Nd/144Nd")
    rows = [("conc_ug_g", d.conc_ug_g), ("conc_umol_g", d.conc_umol_g), ("ref_umol_g", d.ref_umol_g),
            ("bias_factor", d.bias_factor), ("magnification", d.magnification),
            ("magnification_min", d.magnification_min), ("poor_mix", "yes" if d.poor_mix else "no"),
            ("iterations", d.iterations)]
    return tuple(rows + [(k, v) for k, v in d.sample_ratios.items()])


def _blank() -> Any:
    b = blank.blank_correct(0.002, 0.5125, 1e-5, 0.5110, total_sigma_1s=2e-6, blank_sigma_1s=3e-6,
                            total_ratio_sigma_1s=1e-6, blank_ratio_sigma_1s=0.002)
    return ((b.amount_umol, b.amount_sigma_1s, b.ratio, b.ratio_sigma_1s, b.rho_amount_ratio, b.blank_share),)


def _std() -> Any:
    return standards.standard_factor(RUNS, material="JNdi-1", ratio="143Nd/144Nd")


def _analysis() -> Any:
    r = chain.reduce_spiked_analysis("sm-nd", dict(SM_MIX), dict(ND_MIX), 0.30, 0.08, spike_of(SM_SPIKE),
                                     spike_of(ND_SPIKE), parent_mix_sigma_1s=dict(SM_MIX_1S),
                                     daughter_mix_sigma_1s=dict(ND_MIX_1S), parent_norm_ratio="147Sm/152Sm",
                                     daughter_blank_ng=0.02)
    rows = [(r.parent_ratio_name, r.parent_ratio), ("1s", r.parent_ratio_sigma_1s),
            (r.daughter_ratio_name, r.daughter_ratio), ("1s", r.daughter_ratio_sigma_1s), ("rho", r.rho),
            ("parent_ug_g", r.parent_conc_ug_g), ("parent_ug_g_1s", r.parent_conc_sigma_1s),
            ("daughter_ug_g", r.daughter_conc_ug_g), ("daughter_ug_g_1s", r.daughter_conc_sigma_1s),
            ("rho_random", r.rho_random)]
    for kind, parts in (("random", r.sigma_1s_random), ("systematic", r.sigma_1s_systematic)):
        rows += [(f"{name} 1s {kind}", v) for name, v in parts.items()]
    rows.append(("poor_mix", ", ".join(r.poor_mix) if r.poor_mix else "no"))
    return tuple(rows)


_ND_NAMES, _ND_VALUES = _row(ND_KEYS, ND_MIX)
_SM_NAMES, _SM_VALUES = _row(SM_KEYS, SM_MIX)
#: Three cycles of one run; without a lab.cycle_reject_k row every cycle is kept (k = 0).
_CYC_KEYS = ("analysis", "element", "cycle") + tuple(k for j in range(1, 7) for k in (f"r{j}_name", f"r{j}"))
_CYCLES = R((_CYC_KEYS,) + tuple(("HM-1", "Nd", float(c + 1), "143Nd/144Nd", v) + ("",) * 10
                                 for c, v in enumerate((1.0, 1.1, 0.9))))


def _cycle_runs() -> Any:
    """Hand-worked: mean 1.0, SD 0.1 (ddof = 1), SEM 0.1/√3; the Runs sheet's other rows empty."""
    import math

    from reduction.workbook import RUNS
    first = ("HM-1", "Nd", 3.0, 3.0, "143Nd/144Nd", 1.0, 0.1 / math.sqrt(3)) + ("",) * (len(RUNS.columns) - 7)
    return (first,) + (("",) * len(RUNS.columns),) * (RUNS.capacity - 1)


PART2: List[Case] = [
    Case("cycles", "rdCycles", (R((tuple(CYC[:5]) + (None,) + tuple(CYC[5:]),)),), _cycles, array=True),
    Case("cycles-k3", "rdCycles", (col(CYC), L(3.0)), lambda: _cycles(3.0), array=True),
    Case("cycles-none", "rdCycles", (col(CYC), L("none")), lambda: _cycles(None), array=True),
    Case("interference-strip", "rdInterferenceStrip", (L(2.0), L(4e-4), L("144Sm"), L("147Sm"), L(1.3)), _strip,
         array=True),
    Case("massbias-factor", "rdMassbiasFactor", (L(0.7235), L("146Nd/144Nd")),
         lambda: massbias.bias_factor_from(0.7235, "146Nd/144Nd")),
    Case("massbias-factor-power", "rdMassbiasFactor", (L(0.7235), L("146Nd/144Nd"), L("power"), L(0.7219)),
         lambda: massbias.bias_factor_from(0.7235, "146Nd/144Nd", true_norm=0.7219, law="power")),
    Case("massbias-correct", "rdMassbiasCorrect", (L(0.5118), L("143Nd/144Nd"), L(1.62)),
         lambda: massbias.correct_named(0.5118, "143Nd/144Nd", 1.62)),
    Case("massbias-normalise", "rdMassbiasNormalise", (L(0.5118), L("143Nd/144Nd"), L(0.7235), L("146Nd/144Nd")),
         lambda: massbias.normalise(0.5118, "143Nd/144Nd", 0.7235, "146Nd/144Nd")),
    Case("dilution-conc", "rdDilutionConc",
         (L(ND_MIX["150Nd/144Nd"]), L("150Nd/144Nd"), L(0.30), L(0.08), spike_block(ND_SPIKE), L(1.6)),
         lambda: dilution.id_concentration(ND_MIX["150Nd/144Nd"], "150Nd/144Nd", 0.30, 0.08, spike_of(ND_SPIKE),
                                           bias_factor=1.6)),
    Case("dilution-block", "rdDilutionBlock",
         (_ND_NAMES, _ND_VALUES, spike_block(ND_SPIKE), L(0.30), L(0.08), L("146Nd/144Nd")), _dil_block, array=True),
    Case("blank-correct", "rdBlankCorrect", (L(0.002), L(0.5125), L(1e-5), L(0.5110), L(2e-6), L(3e-6), L(1e-6),
                                             L(0.002)), _blank, array=True),
    Case("blank-umol", "rdBlankUmol", (L(0.05), L("Nd"), L("144Nd")), lambda: blank.blank_umol(0.05, "Nd", "144Nd")),
    Case("standard-factor", "rdStandardFactor", (col(RUNS), OMIT, L("JNdi-1"), L("143Nd/144Nd")),
         lambda: ((_std().factor, _std().factor_sigma_1s_random, _std().factor_sigma_1s_systematic, _std().n,
                   _std().mean, _std().reproducibility_rel_1s),), array=True),
    Case("standard-apply", "rdStandardApply", (L(0.51230), L(4e-6), col(RUNS), OMIT, L("JNdi-1"), L("143Nd/144Nd")),
         lambda: (tuple(standards.apply_standard(0.51230, 4e-6, _std())),), array=True),
    Case("analysis", "rdAnalysisBlock",
         (L("sm-nd"), _SM_NAMES, _SM_VALUES, _ND_NAMES, _ND_VALUES, L(0.30), L(0.08), spike_block(SM_SPIKE),
          spike_block(ND_SPIKE), R((tuple(SM_MIX_1S[k] for k in SM_KEYS),)),
          R((tuple(ND_MIX_1S[k] for k in ND_KEYS),)), L("147Sm/152Sm"), OMIT, OMIT, L(0.02)), _analysis, array=True),
    # the template's own functions: numbers are checked against the batch path by
    # tests/integration/test_template_live.py; here the messages naming the sheet cell
    Case("msg-workbook-analysis", "rdWorkbookAnalysis",
         (L("x"), L("QM-1"), R((("analysis",), ("QM-1",))), R((("a",),)), R((("a",),)), R((("a",),)),
          R((("a",),))), Msg(("Samples, row 4", "'system' is missing"))),
    Case("msg-workbook-standard", "rdWorkbookStandard",
         (L("factor"), L("S-1"), L("JNdi-1"), L("143Nd/144Nd"), L(0.5121), R((("session", "material"),
                                                                            ("S-1", "JNdi-1"))), R((("a",),))),
         Msg(("Standards, row 4", "'ratio' is missing"))),
    Case("msg-workbook-isochron", "rdWorkbookIsochron",
         (L("age"), L("Sm-Nd"), OMIT, R((("analysis", "use"), ("QM-1", 1.0))), R((("analysis",), (None,))),
          R((("a",),))), Msg(("Isochron, row 5", "'QM-1' is not on the Results sheet"))),
    Case("deviation-ellipse", "rdDeviationEllipse",
         (L(1.2), L(0.0012), L(0.5142), L(5e-6), L(0.3), L(0.0027), L(0.51096), L(16.0)),
         lambda: tuple(zip(*(v.tolist() for v in regression.deviation_points(
             1.2, 0.0012, 0.5142, 5e-6, 0.3, 0.0027, 0.51096, n_points=16)))), array=True),
    Case("msg-deviation-ellipse", "rdDeviationEllipse",
         (L(1.2), L(0.0012), L(0.5142), L(5e-6), L(0.3), L(-1.0), L(0.51096)),
         Msg(("the line's value is not > 0",)), array=True),
    # isochron groups: hand-written expectations (a group no Samples row names; empty chart cells; a group
    # named on Samples that the Groups table does not list)
    Case("msg-workbook-group", "rdWorkbookGroup",
         (L("age"), L("G2"), OMIT, R((("analysis", "group"), ("QM-1", "G1"))), R((("analysis",), ("QM-1",))),
          R((("a",),))), Msg(("no Samples row names the group 'G2'",))),
    Case("workbook-group-points-empty", "rdWorkbookGroupPoints",
         (L(""), R((("analysis", "group"), ("QM-1", "G1"))), R((("analysis",), ("QM-1",)))),
         lambda: (("",) * 7,) * 120, array=True),
    Case("workbook-group-outlines-empty", "rdWorkbookGroupOutlines",
         (L("ellipse"), L(""), R((("group", "treatment"),)), R((("analysis", "group"), ("QM-1", "G1"))),
          R((("analysis",), ("QM-1",))), R((("a",),))), lambda: (("", ""),) * (120 * 34), array=True),
    Case("workbook-groups-unlisted", "rdWorkbookGroupsUnlisted",
         (R((("group", "treatment"), ("G1", ""))), R((("analysis", "group"), ("QM-1", "g1"), ("QM-2", "G9")))),
         Msg(("groups named on Samples but not listed above, so not fitted: 'G9' (Samples row 6)",))),
    Case("workbook-cycle-runs", "rdWorkbookCycleRuns", (_CYCLES, R((("key", "value"),))), _cycle_runs, array=True),
    Case("workbook-cycle-kept", "rdWorkbookCycleKept", (_CYCLES, R((("key", "value"),))),
         lambda: (("kept",), ("kept",), ("kept",)), array=True),
    Case("workbook-run-ratios", "rdWorkbookRunRatios", (L("Nd"), L("150Nd")),
         lambda: "143Nd/144Nd, 146Nd/144Nd, 150Nd/144Nd"),     # hand-written: what the demo's Nd runs give
    Case("workbook-run-ratios-rb", "rdWorkbookRunRatios", (L("rb"), L("87rb")),
         lambda: "87Rb/85Rb; and β with its 1σ (Rb has two isotopes)"),
    Case("msg-workbook-run-ratios", "rdWorkbookRunRatios", (L("Nd"), L("150Sm")),
         Msg(("'150Sm' is not an isotope of Nd",))),
    Case("analysis-row", "rdAnalysisRow",
         (L("sm-nd"), _SM_NAMES, _SM_VALUES, _ND_NAMES, _ND_VALUES, L(0.30), L(0.08), spike_block(SM_SPIKE),
          spike_block(ND_SPIKE), R((tuple(SM_MIX_1S[k] for k in SM_KEYS),)),
          R((tuple(ND_MIX_1S[k] for k in ND_KEYS),)), L("147Sm/152Sm"), OMIT, OMIT, L(0.02)),
         lambda: ((_analysis()[0][1], _analysis()[1][1], _analysis()[2][1], _analysis()[3][1], _analysis()[4][1]),),
         array=True),
    Case("msg-spike-block", "rdDilutionConc",
         (L(0.26), L("150Nd/144Nd"), L(0.30), L(0.08), R((("150Nd", "x144"), (0.97, 0.03), ("150Nd", 0.004)))),
         Msg(("'x144' is not an isotope name",))),
    Case("msg-cycles-text", "rdCycles", (col(CYC[:3] + ["spike"] + CYC[4:]),), Msg(("row 4 of cycles", "text")),
         array=True),
    Case("msg-names-values", "rdDilutionBlock",
         (R((ND_KEYS[:2],)), _ND_VALUES, spike_block(ND_SPIKE), L(0.30), L(0.08)), Msg(("names has 2 cells",)),
         array=True),
]

def _diagnostics() -> Any:
    """RD.DIAGNOSTICS of the system build: every label, and the values known here without the adapter.

    Rows of one cell compare the label only (paths and executables differ between the venv and
    LibreOffice); the Python and numpy versions are those of the Python the engine runs in.
    """
    import platform

    import numpy
    return (("ratiodesk", reduction.__version__), ("build_target", "system"), ("built_for",),
            ("python", platform.python_version()), ("python_executable",), ("python_prefix",), ("platform",),
            ("numpy", numpy.__version__), ("numpy_path",), ("numpy_source", "LibreOffice's Python"), ("engine",),
            ("oxt_for_this_python",), ("log",), ("status", "ok"))


_P1 = R(((X[0], SX[0], Y[0], SY[0], RHO[0]),))
_P2 = R(((X[4], SX[4], Y[4], SY[4], RHO[4]),))
_GAP = [None]
CASES: List[Case] = [
    Case("version", "rdVersion", (), lambda: reduction.__version__),
    Case("echo-number", "rdEcho", (L(2.5),), lambda: 2.5),
    Case("echo-text", "rdEcho", (L("garnet"),), lambda: "garnet"),
    Case("diagnostics", "rdDiagnostics", (), _diagnostics, array=True),
    Case("isochron-block", "rdIsochronBlock", FIT + (col(RHO),), lambda: block(_fit()), array=True),
    Case("isochron-block-no-rho", "rdIsochronBlock", FIT, lambda: block(_fit(rho=None)), array=True),
    Case("isochron-block-expanded", "rdIsochronBlock", FIT + (col(RHO), L("expanded")),
         lambda: block(_fit("expanded")), array=True),
    Case("isochron-block-excess", "rdIsochronBlock", FIT + (OMIT, L("excess-variance")),
         lambda: block(_fit("excess-variance", rho=None)), array=True),
    Case("isochron-block-equal", "rdIsochronBlock", FIT + (col(RHO), R((("Equal-Weights",),))),
         lambda: block(_fit("equal-weights")), array=True),
    Case("isochron-slope", "rdIsochronSlope", FIT + (col(RHO),),
         lambda: ((_fit().slope, _fit().slope_sigma_1s),), array=True),
    Case("isochron-intercept", "rdIsochronIntercept", FIT + (col(RHO),),
         lambda: ((_fit().intercept, _fit().intercept_sigma_1s),), array=True),
    Case("isochron-mswd", "rdIsochronMswd", FIT + (col(RHO),), lambda: _fit().mswd),
    Case("isochron-value-p", "rdIsochronValue", (L("p"),) + FIT + (col(RHO),), lambda: _fit().p_value),
    Case("isochron-value-slope95", "rdIsochronValue", (L("slope_95"),) + FIT,
         lambda: _fit(rho=None).slope_sigma_95_expanded),
    Case("isochron-gap-rows-skipped", "rdIsochronSlope",
         tuple(col(c[:2] + _GAP + c[2:]) for c in (X, SX, Y, SY)),
         lambda: ((_fit(rho=None).slope, _fit(rho=None).slope_sigma_1s),), array=True),
    Case("age-isochron", "rdAgeIsochron", FIT + (L("sm-nd"), col(RHO)), _age, array=True),
    Case("age-isochron-iupac", "rdAgeIsochron", FIT + (L("Sm-Nd"), col(RHO), OMIT, L("iupac")),
         lambda: _age("iupac"), array=True),
    Case("age-slope", "rdAgeSlope", (L(SLOPE), L("sm-nd")), lambda: ages.age_from_slope(SLOPE, LAM) / 1e6),
    Case("mean-weighted", "rdMeanWeighted", (col(V), col(SV)), _wm, array=True),
    Case("mean-weighted-external", "rdMeanWeighted", (col(V), col(SV), L(True)), lambda: _wm(True), array=True),
    Case("isochron-block-anchored", "rdIsochronBlock", FIT + (col(RHO), OMIT, L(0.51090), L(1e-5)), _anchored,
         array=True),
    Case("age-two-point", "rdAgeTwoPoint", (_P1, _P2, L("sm-nd")), _two_point, array=True),
    Case("age-model-chur", "rdAgeModel", (L(0.51150), L(5e-6), L(0.1100), L(0.0011), L("sm-nd")), _model,
         array=True),
    # 147Sm/144Nd 0.1900, within 10 % of CHUR's: the age comes with its warning in the third cell
    Case("age-model-flagged", "rdAgeModel", (L(0.51250), L(5e-6), L(0.1900), L(0.0011), L("sm-nd")),
         lambda: _model(d=0.51250, p=0.1900), array=True),
    Case("age-model-dm", "rdAgeModel", (L(0.51150), L(5e-6), L(0.1100), L(0.0011), L("sm-nd"), L("DM"), L(0.3)),
         lambda: _model("DM", 0.3), array=True),
    Case("initial-ratio", "rdInitialRatio", (L(Y[0]), L(X[0]), L(1000.0), L("sm-nd")),
         lambda: ages.initial_ratio(Y[0], X[0], 1000.0, "sm-nd")),
    Case("epsilon", "rdEpsilon", (L(Y[0]), L(SY[0]), L(X[0]), L(1000.0), L("sm-nd"), L(SX[0]), L(RHO[0])), _eps,
         array=True),
    Case("epsilon-with-reference", "rdEpsilon",
         (L(Y[0]), L(SY[0]), L(X[0]), L(1000.0), L("sm-nd"), L(SX[0]), L(RHO[0]), OMIT, L(True)),
         lambda: _eps(True), array=True),
    Case("ellipse", "rdEllipse", (L(X[0]), L(SX[0]), L(Y[0]), L(SY[0]), L(RHO[0]), L(24)), _ellipse, array=True),
    # cells never lie: readable messages naming the argument and the range row
    Case("msg-point-empty", "rdAgeTwoPoint", (R(((X[0], None, Y[0], SY[0]),)), _P2, L("sm-nd")),
         Msg(("sx of point1 is required",)), array=True),
    Case("msg-ellipse-points", "rdEllipse", (L(X[0]), L(SX[0]), L(Y[0]), L(SY[0]), OMIT, L(2)),
         Msg(("points must be a whole number from 3 to 10000", "got 2")), array=True),
    Case("msg-sigma-zero", "rdIsochronSlope", (col(X), col(SX), col(Y), col([4e-6, 4e-6, 0.0, 4e-6, 4e-6])),
         Msg(("must be > 0", "row 3 of sy")), array=True),
    Case("msg-sigma-zero-after-gap", "rdIsochronSlope",
         tuple(col(c[:1] + _GAP + c[1:]) for c in (X, SX, Y, [4e-6, 4e-6, 0.0, 4e-6, 4e-6])),
         Msg(("must be > 0", "row 4 of sy")), array=True),
    Case("msg-text-in-range", "rdIsochronMswd", (col([X[0], "n.d."] + X[2:]), col(SX), col(Y), col(SY)),
         Msg(("row 2 of x", "text", "n.d."))),
    Case("msg-empty-in-one-range", "rdIsochronMswd", (col(X), col(SX[:3] + [None] + SX[4:]), col(Y), col(SY)),
         Msg(("row 4 of sx is empty",))),
    Case("msg-lengths", "rdIsochronMswd", (col(X), col(SX[:4]), col(Y), col(SY)), Msg(("sx has 4 cells",))),
    Case("msg-passed-on", "rdIsochronMswd",
         (col(X), col(SX), col(Y), col(SY[:1] + [Formula(f'=RD.ECHO("{MARK}blank run missing")',
                                                        MARK + "blank run missing")] + SY[2:])),
         Msg(("from sy: blank run missing",))),
    Case("msg-mswd-two-points", "rdIsochronMswd", tuple(col(c[:2]) for c in (X, SX, Y, SY)),
         Msg(("MSWD is undefined for 2 points",))),
    Case("msg-unknown-treatment", "rdIsochronMswd", FIT + (OMIT, L("robust")), Msg(("unknown treatment",))),
    Case("msg-unknown-system", "rdAgeIsochron", FIT + (L("u-pb"),), Msg(("unknown isotope system",)), array=True),
    Case("msg-system-empty", "rdAgeIsochron", FIT + (R(((None,),)),), Msg(("system is required",)), array=True),
    # a typed 0 reaches the add-in as an empty cell does (LibreOffice 7.4): the message names both
    Case("msg-system-zero", "rdAgeIsochron", FIT + (R(((0.0,),)),), Msg(("system is required", "empty or holds 0")),
         array=True),
    Case("msg-quantity", "rdIsochronValue", (L("age"),) + FIT, Msg(("quantity 'age' is not one of",))),
    Case("msg-two-columns", "rdMeanWeighted", (R(((1.0, 2.0), (3.0, 4.0))), col(SV[:2])),
         Msg(("values must be one column or one row",)), array=True),
    Case("msg-slope-undefined", "rdAgeSlope", (L(-1.5), L("sm-nd")), Msg(("undefined", "slope"))),
]

# Bounded work (issue 10, item 4): every argument that sizes work or output has an upper bound,
# stated in its Function Wizard text (macros/functions.py, MAX_*); at the bound the call works, one
# above it is a message naming the argument. The bounds on 100 000 values (cycles, weighted-mean
# values, standard runs) and on a range's cells are in test_bounds.py only: placing 100 001 cells
# one by one in a real Calc would take minutes.
N_BOUND = table.MAX_ISOCHRON_POINTS
XB = [round(0.1 + 0.15 * i / (N_BOUND - 1), 6) for i in range(N_BOUND)]
YB = [round(0.51090 + SLOPE * x + 2.5e-6 * math.sin(1.7 * i), 8) for i, x in enumerate(XB)]
SXB = [round(0.002 * x, 9) for x in XB]
SYB = [4.0e-6] * N_BOUND
_BIG_TABLE = R((("analysis",),) + ((None,),) * table.MAX_TABLE_CELLS)      # 10 001 cells, one of them filled
BOUNDS: List[Case] = [
    # the call: 1E9 points ran 102 s and used 24 GB before soffice was killed
    Case("msg-ellipse-points-issue", "rdEllipse", (L(0.1), L(0.0002), L(0.51), L(0.000004), L(0.0), L(1e9)),
         Msg(("points must be a whole number from 3 to 10000", "got 1e+09")), array=True),
    Case("msg-ellipse-points-above", "rdEllipse", (L(X[0]), L(SX[0]), L(Y[0]), L(SY[0]), OMIT, L(10001)),
         Msg(("points must be a whole number from 3 to 10000", "got 10001")), array=True),
    Case("msg-ellipse-points-fraction", "rdEllipse", (L(X[0]), L(SX[0]), L(Y[0]), L(SY[0]), OMIT, L(24.5)),
         Msg(("points must be a whole number", "got 24.5")), array=True),
    Case("ellipse-points-at-bound", "rdEllipse",
         (L(X[0]), L(SX[0]), L(Y[0]), L(SY[0]), L(RHO[0]), L(float(table.MAX_ELLIPSE_POINTS))),
         lambda: tuple((float(a), float(b)) for a, b in zip(*regression.ellipse_points(
             X[0], SX[0], Y[0], SY[0], RHO[0], n_points=table.MAX_ELLIPSE_POINTS))), array=True),
    Case("msg-cycles-minkept-above", "rdCycles", (col(CYC), OMIT, L(100001)),
         Msg(("minKept must be a whole number from 2 to 100000", "got 100001")), array=True),
    Case("msg-cycles-minkept-one", "rdCycles", (col(CYC), OMIT, L(1)),
         Msg(("minKept must be a whole number from 2 to 100000", "got 1")), array=True),
    Case("isochron-points-at-bound", "rdIsochronMswd", (col(XB), col(SXB), col(YB), col(SYB)),
         lambda: regression.fit_isochron(XB, SXB, YB, SYB).mswd),
    Case("msg-isochron-points-above", "rdIsochronMswd",
         (col(XB + [0.26]), col(SXB + [0.00052]), col(YB + [0.5126]), col(SYB + [4e-6])),
         Msg(("x has 1001 points; at most 1000 points in one call",))),
    Case("msg-age-isochron-points-above", "rdAgeIsochron",
         (col(XB + [0.26]), col(SXB + [0.00052]), col(YB + [0.5126]), col(SYB + [4e-6]), L("sm-nd")),
         Msg(("x has 1001 points; at most 1000 points",)), array=True),
    Case("msg-dilution-ratios-above", "rdDilutionBlock",
         (R((tuple(f"{100 + k}Nd/144Nd" for k in range(101)),)), R((tuple(0.5 for _ in range(101)),)),
          spike_block(ND_SPIKE), L(0.30), L(0.08)),
         Msg(("names has 101 ratios; at most 100 ratios",)), array=True),
    Case("msg-dilution-ratio-repeated", "rdDilutionBlock",
         (R(((ND_KEYS[0], ND_KEYS[1], ND_KEYS[0]),)), R(((ND_MIX[ND_KEYS[0]], ND_MIX[ND_KEYS[1]], 0.5),)),
          spike_block(ND_SPIKE), L(0.30), L(0.08)),
         Msg(("row 3 of names repeats '143Nd/144Nd' (first on row 1)",)), array=True),
    Case("msg-spike-isotopes-above", "rdDilutionConc",
         (L(0.26), L("150Nd/144Nd"), L(0.30), L(0.08),
          R((tuple(f"{130 + k}Nd" for k in range(21)), (0.01,) * 21, ("150Nd", 0.004) + (None,) * 19))),
         Msg(("column 21 of spike: more than 20 isotope columns",))),
    Case("msg-workbook-table-cells", "rdWorkbookIsochron",
         (L("age"), L("Sm-Nd"), OMIT, _BIG_TABLE, R((("analysis",),)), R((("key",),))),
         Msg(("selection is a range of 10001 x 1 = 10001 cells; at most 10000 cells per table",))),
]

CASES += PART2
CASES += BOUNDS
BY_ID: Dict[str, Case] = {c.id: c for c in CASES}


def expected_all() -> Dict[str, Any]:
    """Every case's expected grid from the engine called directly (None for message cases)."""
    return {c.id: None if isinstance(c.expect, Msg) else [list(r) for r in grid_of(c.expect())] for c in CASES}
