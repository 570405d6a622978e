"""The RatioDesk workbook application: one template definition, two evaluators.

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

Layout of this package (it depends on the engine, never the other way round): ``values`` (cell
values and the errors naming a cell), ``sheets`` (the template definition), ``provenance`` (the
Constants sheet), ``tables`` (reading tables), ``standards``, ``analysis``, ``isochrons`` (the cell
functions' engine calls), ``formulas`` (the grid's formulas), ``evaluate`` (the batch evaluator),
``layout``, ``choices``, ``xlsx`` and ``files`` (writing and reading workbooks); the applications
on top: ``batch`` (``ratiodesk reduce`` / ``demo``), ``report`` (the PDF), ``demo`` (the invented
scenario), ``cli`` and ``cli_fit`` (the command line). This module is the package's face: the
names the add-in, the build and the tests use.
"""
from __future__ import annotations

from .analysis import (  # noqa: F401
    analysis_result,
    analysis_value,
)
from .choices import (  # noqa: F401
    choice_cells,
    choices,
)
from .evaluate import (  # noqa: F401
    MAX_DATA_ROWS,
    MAX_SHEET_ROW,
    BookTables,
    Evaluation,
    evaluate,
    sheet_block,
    table_extent,
)
from .files import (  # noqa: F401
    check_sheets,
    read_ods,
    read_workbook,
)
from .formulas import (  # noqa: F401
    CAPACITY_CELL,
    ORPHAN_CELL,
    Formula,
    all_computed_cells,
    array_formulas,
    deviation_formulas,
    ellipse_formulas,
    expected_formulas,
    formula_drift,
    orphan_message,
    selection_rows,
)
from .isochrons import (  # noqa: F401
    group_outlines,
    group_points,
    group_value,
    isochron_value,
    unlisted_groups,
)
from .layout import (  # noqa: F401
    ABOUT_LINES,
    SHEET_ORDER,
    WIDTHS,
    CellSpec,
    Layout,
    build_layout,
    fill_values,
    layout_grid,
)
from .provenance import (  # noqa: F401
    PROVENANCE_HEADER,
    constants_rows,
    provenance_constant_rows,
    provenance_note,
    status_text,
)
from .sheets import (  # noqa: F401
    ANALYSIS_QUANTITIES,
    CONSTANTS,
    CYCLES,
    DEVIATION_COL0,
    ELLIPSE_COL0,
    ELLIPSE_POINTS,
    GROUP_CHART_ROW,
    GROUP_DEVIATION_COL,
    GROUP_ELLIPSE_COL,
    GROUP_POINT_COLUMNS,
    GROUP_POINTS_TOP,
    GROUPS,
    ISOCHRON,
    ISOCHRON_BLOCK,
    ISOCHRON_FIRST_Q_ROW,
    ISOCHRON_QUANTITIES,
    ISOCHRON_SUMMARY_COL,
    ISOCHRON_SYSTEMS,
    ISOCHRON_TREATMENT_ROW,
    MEASURED,
    RESULTS,
    RUNS,
    SAMPLES,
    SHEET_BY_NAME,
    SHEETS,
    SPIKES,
    STANDARDS,
    Column,
    Sheet,
    col_letter,
)
from .standards import (  # noqa: F401
    standard_value,
)
from .tables import (  # noqa: F401
    cycle_kept,
    cycle_runs,
    run_ratios,
)
from .values import (  # noqa: F401
    FIRST_ROW,
    KEY_ROW,
    MARKER,
    SERVICE,
    CellError,
    FormulaCell,
    LogicalCell,
    WorkbookFileError,
    shown,
)
from .xlsx import (  # noqa: F401
    WorkbookData,
    check_text,
    isochron_charts,
    write_xlsx,
)

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
