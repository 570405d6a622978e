"""Reference-material runs per session: the accepted value, the measured mean and the factor each
analysis uses.
"""
from __future__ import annotations

import math
from functools import lru_cache
from typing import Any, Callable, Dict, List, Tuple

from ..errors import InputError
from .sheets import DEFAULT_PRIMARY, STANDARDS
from .tables import SessionStandards, Table, _constant, _constants, as_rows
from .values import MARKER, CellError, Rows, shown

_ROLES = ("primary", "check")


@lru_cache(maxsize=256)
def _session_standards(standards: Rows, constants: Rows, session: str, ratio: str) -> SessionStandards:
    """Choose the primary material of a session and ratio; normalise every other material with its factor."""
    from ..standards import standard_factor

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
