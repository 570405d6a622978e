"""Cell values of the workbook: the errors that name a cell, special cells (logical, formula), and the
row numbers every sheet shares.
"""
from __future__ import annotations

from typing import Any, Optional, Tuple

from ..errors import InputError

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
