"""Isochrons of the workbook: the by-ID picks of the Isochron sheet and the groups of the Groups sheet,
fitted and dated.
"""
from __future__ import annotations

import math
from functools import lru_cache
from typing import Any, Callable, Dict, List, Mapping, Optional, Sequence, Tuple

from ..errors import InputError, RatioDeskError
from .analysis import WORKBOOK_SYSTEMS
from .sheets import (
    ELLIPSE_CONFIDENCE,
    ELLIPSE_POINTS,
    GROUP_OUTLINE_ROWS,
    GROUP_POINT_COLUMNS,
    GROUP_POINTS_CAP,
    GROUPS,
    ISOCHRON,
    ISOCHRON_BLOCK,
    ISOCHRON_SUMMARY_COL,
    ISOCHRON_SYSTEMS,
    ISOCHRON_TREATMENT_ROW,
    RESULTS,
    SAMPLES,
    col_letter,
)
from .tables import Table, _norm, _refset, _system_of, as_rows
from .values import FIRST_ROW, MARKER, CellError, LogicalCell, Rows, SpecialCell, shown


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
    from ..ages import epsilon, isochron_age
    from ..regression import fit_isochron

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
    return GroupFits(samples, results, constants).value(quantity, group, treatment)


class GroupFits:
    """:func:`group_value` for many cells of one workbook: the tables are read once and each group's fit is
    made once (the batch path asks every quantity of every group; a fit per cell would make a workbook of
    many groups quadratic in its analyses). A fit that fails fails the same way for each of its cells."""

    def __init__(self, samples: Any, results: Any, constants: Any) -> None:
        self.samples, self.results, self.constants = as_rows(samples), as_rows(results), as_rows(constants)
        self._fits: Dict[Tuple[str, str], Tuple[Any, Optional[BaseException]]] = {}

    def size(self, group: Any) -> int:
        """Samples rows of a group (used or not)."""
        return len(_group_members(str(group).strip(), self.samples, self.results)[1])

    def value(self, quantity: str, group: Any, treatment: Any) -> float | str:
        """One quantity of one group's isochron, as :func:`group_value`."""
        g = str(group).strip()
        if not g:
            raise InputError("group", "is empty")
        if quantity.strip().lower() == "system":
            key = _group_members(g, self.samples, self.results)[0]
            return WORKBOOK_SYSTEMS.get(key, key)
        t = str(treatment or "").strip().lower()
        got = self._fits.get((g, t))
        if got is None:
            try:
                got = (_group_isochron(g, t, self.samples, self.results, self.constants), None)
            except Exception as exc:    # kept and raised again for each cell of the group, as a new fit would
                got = (None, exc)
            self._fits[(g, t)] = got
        if got[1] is not None:
            raise got[1]
        return _isochron_cell(quantity, got[0])


def group_points(group: Any, samples: Any, results: Any, cap: Optional[int] = GROUP_POINTS_CAP
                 ) -> Tuple[Tuple[Any, ...], ...]:
    """The Groups sheet's point list of one group: analysis, use (1/0), x, sx, y, sy, ρ per member row, padded
    with empty rows to ``cap`` rows (:data:`GROUP_POINTS_CAP`, the list's rows; an unused row without numbers
    shows why). ``cap=None``: every member row, unpadded (the report draws a group of any size)."""
    g = str(group).strip()
    rows: List[Tuple[Any, ...]] = []
    if g:
        _key, members, _scales = _group_members(g, as_rows(samples), as_rows(results))
        for a, used, vals, _row in members:
            nums = tuple(vals) if not isinstance(vals, str) else (MARKER + vals, "", "", "", "")
            rows.append((a, 1.0 if used else 0.0) + nums)
    if cap is None:
        return tuple(rows)
    if len(rows) > cap:
        raise InputError("group", f"group {shown(g)} has {len(rows)} rows, more than the {cap} the "
                         "list holds")
    return tuple(rows) + (("",) * len(GROUP_POINT_COLUMNS),) * (cap - len(rows))


def group_outlines(kind: str, group: Any, groups: Any, samples: Any, results: Any, constants: Any
                   ) -> Tuple[Tuple[Any, Any], ...]:
    """The 95 % error ellipses of a group's used points, stacked for one chart series: each outline
    (ELLIPSE_POINTS + 1 rows of x, y, closed) followed by an empty row, padded to :data:`GROUP_OUTLINE_ROWS`.

    ``kind`` ``ellipse``: at full scale (:func:`reduction.regression.ellipse_points`); ``deviation``: x against
    the deviation from the group's fitted line in ppm (:func:`reduction.regression.deviation_points`), the line
    fitted with the treatment the Groups table gives the group.
    """
    from ..regression import deviation_points, ellipse_points

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
    from ..regression import mswd_notes

    notes = mswd_notes(fit)
    return "; ".join(notes) if notes else "ok"
