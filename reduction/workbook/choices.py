"""Drop-down lists (data validity) of the input cells."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Dict, List, Optional, Tuple

from .analysis import WORKBOOK_SYSTEMS
from .formulas import selection_rows
from .provenance import _REFERENCE_MATERIALS
from .sheets import (
    DEFAULT_PRIMARY,
    ELEMENTS,
    FRACTION_TYPES,
    GROUPS,
    ISOCHRON,
    ISOCHRON_SUMMARY_COL,
    ISOCHRON_SYSTEMS,
    ISOCHRON_TREATMENT_ROW,
    MEASURED,
    RATIO_SLOTS,
    SAMPLES,
    SHEET_BY_NAME,
    SPIKES,
    STANDARDS,
    Sheet,
    col_letter,
)
from .standards import _ROLES
from .tables import _MONITOR_NAMES, _REFERENCE_ISOTOPE
from .values import FIRST_ROW

#: Reference materials the Constants sheet carries accepted values for (a lab may add more there).
MATERIALS = tuple(dict.fromkeys(m for m, _r in _REFERENCE_MATERIALS))
TREATMENTS = ("analytical", "expanded", "equal-weights", "excess-variance")


def run_ratio_names() -> Tuple[str, ...]:
    """Every ratio name a Measured run may carry: <isotope>/<reference isotope> of each element."""
    from ..dilution import element_isotopes

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
