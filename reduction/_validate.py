"""Input checks shared by every engine module (private).

Each check raises :class:`reduction.errors.InputError` naming the argument and, for arrays,
the first offending 1-based row.
"""
from __future__ import annotations

import math
from typing import Any, Optional

import numpy as np

from .errors import InputError


def as_array(name: str, x: Any, ndim: Optional[int] = 1, min_len: int = 0) -> np.ndarray:
    """Convert ``x`` to a float array; reject text, NaN and inf, naming the row."""
    try:
        arr = np.asarray(x, dtype=float)
    except (TypeError, ValueError):
        obj = np.asarray(x, dtype=object).ravel()
        for i, v in enumerate(obj):
            try:
                float(v)
            except (TypeError, ValueError):
                raise InputError(name, f"is not a number: {v!r}", row=i + 1) from None
        raise InputError(name, "could not be read as numbers") from None
    if ndim is not None and arr.ndim != ndim:
        if ndim == 1 and arr.ndim == 0:
            arr = arr.reshape(1)
        else:
            raise InputError(name, f"must be {ndim}-dimensional, got shape {arr.shape}")
    bad = ~np.isfinite(arr)
    if bad.any():
        i = int(np.flatnonzero(bad.ravel())[0])
        raise InputError(name, f"must be a finite number, got {float(arr.ravel()[i])!r}", row=i + 1)
    if arr.ndim == 1 and arr.size < min_len:
        raise InputError(name, f"needs at least {min_len} values, got {arr.size}")
    return arr


def as_scalar(name: str, x: Any) -> float:
    """Convert ``x`` to a finite float, naming the argument if it is not one."""
    try:
        v = float(x)
    except (TypeError, ValueError):
        raise InputError(name, f"is not a number: {x!r}") from None
    if not math.isfinite(v):  # math, not numpy: this runs once per cell call
        raise InputError(name, f"must be a finite number, got {v!r}")
    return v


def require_positive(name: str, arr: np.ndarray, allow_zero: bool = False) -> np.ndarray:
    """Reject values <= 0 (or < 0 with ``allow_zero``), naming the first bad row."""
    a = np.asarray(arr, dtype=float)
    bad = a < 0 if allow_zero else a <= 0
    if np.any(bad):
        op = ">= 0" if allow_zero else "> 0"
        if a.ndim == 0:
            raise InputError(name, f"must be {op}, got {float(a)!r}")
        i = int(np.flatnonzero(bad.ravel())[0])
        raise InputError(name, f"must be {op}, got {float(a.ravel()[i])!r}", row=i + 1)
    return a


def require_same_length(**arrays: np.ndarray) -> int:
    """Check that all 1-D arrays have the same length; return it."""
    lengths = {k: np.shape(v)[0] for k, v in arrays.items() if v is not None}
    n = next(iter(lengths.values()))
    for k, m in lengths.items():
        if m != n:
            first = next(iter(lengths))
            raise InputError(k, f"has {m} values but {first} has {n}")
    return n


def require_correlation(name: str, rho: np.ndarray) -> np.ndarray:
    """Reject error correlations outside (-1, 1)."""
    r = np.asarray(rho, dtype=float)
    bad = np.abs(r) >= 1
    if np.any(bad):
        i = int(np.flatnonzero(bad.ravel())[0])
        raise InputError(name, f"must lie strictly between -1 and 1, got {float(r.ravel()[i])!r}", row=i + 1)
    return r
