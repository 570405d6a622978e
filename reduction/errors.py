"""Exceptions raised by the engine.

Every error names the argument (and, where it applies, the row) and says what was expected and
what arrived, so the cell layer and the command line can show it as it is.
"""
from __future__ import annotations

from typing import Optional

__all__ = ["ConvergenceError", "InputError", "RatioDeskError", "UndefinedResultError"]


class RatioDeskError(ValueError):
    """Base class of every error the engine raises on purpose."""


class InputError(RatioDeskError):
    """An argument is not acceptable (wrong type, out of range, wrong shape).

    Parameters
    ----------
    argument : str
        Name of the offending argument, as the caller knows it.
    problem : str
        What is wrong, e.g. ``"must be > 0"``.
    row : int, optional
        1-based row (element) index inside the argument, if one element is at fault.
    """

    def __init__(self, argument: str, problem: str, row: Optional[int] = None) -> None:
        self.argument = argument
        self.problem = problem
        self.row = row
        where = f"row {row} of {argument}" if row is not None else argument
        super().__init__(f"{argument}: {problem}" if row is None else f"{problem} ({where})")


class UndefinedResultError(RatioDeskError, ArithmeticError):
    """The inputs are valid one by one but the requested result is undefined (e.g. all x equal)."""


class ConvergenceError(RatioDeskError, ArithmeticError):
    """An iterative solution did not converge within its iteration limit."""
