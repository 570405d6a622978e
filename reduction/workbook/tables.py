"""Reading tables from cell values (shared by the add-in and the batch path): constants, spikes, runs
and cycles.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache
from types import MappingProxyType
from typing import Any, Callable, Dict, List, Mapping, Optional, Sequence, Tuple

from ..errors import InputError, RatioDeskError
from .sheets import CONSTANTS, CYCLES, ELEMENTS, RATIO_SLOTS, RUNS, Sheet, col_letter
from .values import FIRST_ROW, MARKER, Cell, CellError, FormulaCell, Rows, SpecialCell, blank, logical, shown


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
    from ..constants import reference_set

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
    from ..composition import natural_composition

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
    from ..systems import get_system

    return get_system(text).key


_NORM_RATIO = {"Nd": "146Nd/144Nd", "Sm": "147Sm/152Sm", "Hf": "179Hf/177Hf", "Sr": "86Sr/88Sr"}
_REFERENCE_ISOTOPE = {"Nd": "144Nd", "Sm": "152Sm", "Hf": "177Hf", "Lu": "175Lu", "Sr": "86Sr", "Rb": "85Rb"}


def axis_titles(system: str) -> Tuple[str, str]:
    """(x, y) axis titles of a system's isochron: its parent/daughter and daughter ratios."""
    from ..systems import get_system

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
    from ..dilution import element_isotopes

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
    from ..dilution import make_spike

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
    from ..constants import normalising_ratio

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
        from ..oxide import oxide_to_metal

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
    from ..dilution import element_isotopes

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
    from ..cycles import cycle_stats

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
