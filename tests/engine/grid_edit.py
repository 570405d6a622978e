"""Helpers for tests that edit a workbook grid (sheet -> rows of cell values) the way a user types."""
from __future__ import annotations

from reduction.workbook import FIRST_ROW


def row_of(grid, sheet, analysis, element=None):
    """Sheet row whose column A is ``analysis`` (and column B ``element`` when given)."""
    for r in range(FIRST_ROW, len(grid[sheet]) + 1):
        row = grid[sheet][r - 1]
        if row and row[0] == analysis and (element is None or row[1] == element):
            return r
    raise AssertionError(analysis)


def set_cell(grid, sheet, row, col, v):
    """Type ``v`` into (row, 0-based col), extending the row as needed."""
    g = grid[sheet]
    while len(g[row - 1]) <= col:
        g[row - 1].append("")
    g[row - 1][col] = v
