"""The Constants sheet's contents: reference values with their status, source and level, and the
provenance rows of results.xlsx.
"""
from __future__ import annotations

import math
import re
from typing import Any, Dict, List, Mapping, Optional, Sequence, Tuple

from ..errors import InputError

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
    from ..constants import reference_material, reference_set

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
    from ..constants import normalising_ratio

    for ratio in ("17O/16O", "18O/16O"):
        v = normalising_ratio(ratio)
        rows.append({"key": f"oxygen.{ratio}", "quantity": f"Oxygen {ratio} for oxide runs (Measured Ion 'oxide')",
                     "value": v.value, "sigma_1s": "", "note": provenance_note(v) + "; type your lab's own",
                     "unit": v.unit, "source": v.source})
    for key, quantity, unit, note in LAB_ROWS:
        rows.append({"key": key, "quantity": quantity, "value": LAB_DEFAULTS.get(key, 0.0), "sigma_1s": "",
                     "note": note, "unit": unit, "source": "the laboratory (type your own value)"})
    from ..composition import composition_rows

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
