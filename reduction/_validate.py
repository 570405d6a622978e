"""Input checks shared by every engine module (private).

Each check raises :class:`reduction.errors.InputError` naming the argument and, for arrays,
the first offending 1-based row.
"""
from __future__ import annotations

import math
from typing import Any, Optional

import numpy as np

from .errors import InputError, UndefinedResultError


def as_array(name: str, x: Any, ndim: Optional[int] = 1, min_len: int = 0) -> np.ndarray:
    """Convert ``x`` to a float array; reject text, NaN and inf, naming the row."""
    try:
        arr = np.asarray(x, dtype=float)
    except (TypeError, ValueError, OverflowError):
        try:
            obj = np.asarray(x, dtype=object).ravel()
        except (TypeError, ValueError):
            raise InputError(name, "could not be read as numbers") from None
        for i, v in enumerate(obj):
            try:
                float(v)
            except OverflowError:
                raise InputError(name, "is too large for double precision (beyond ~1.8e308)", row=i + 1) from None
            except (TypeError, ValueError):
                raise InputError(name, f"is not a number: {_short(v)}", row=i + 1) from None
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
    except OverflowError:
        raise InputError(name, "is too large for double precision (beyond ~1.8e308)") from None
    except (TypeError, ValueError):
        raise InputError(name, f"is not a number: {_short(x)}") from None
    if not math.isfinite(v):  # math, not numpy: this runs once per cell call
        raise InputError(name, f"must be a finite number, got {v!r}")
    return v


def _short(v: Any) -> str:
    """repr of a value, cut to a readable length for a message."""
    r = repr(v)
    return r if len(r) <= 60 else r[:57] + "..."


def as_name(name: str, x: Any, example: str) -> str:
    """A name argument (isotope, ratio, element) as stripped text; anything else is an InputError."""
    if not isinstance(x, str):
        raise InputError(name, f"must be text like {example!r}, got {_short(x)}")
    return x.strip()


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


def as_count(name: str, x: Any, minimum: int, maximum: int, why: str = "") -> int:
    """A whole number in ``[minimum, maximum]`` (a size, iteration or draw count).

    ``True``/``False``, text, NaN, inf and non-whole numbers are refused, and so is a count above
    ``maximum`` (``why`` says what the upper bound protects, e.g. memory), naming the argument.
    """
    bounds = f"a whole number from {minimum:,} to {maximum:,}".replace(",", " ")
    if isinstance(x, (bool, np.bool_)) or isinstance(x, str):
        raise InputError(name, f"must be {bounds}, got {_short(x)}")
    if isinstance(x, (int, np.integer)):
        v = int(x)          # exact, however large (a seed)
    else:
        try:
            f = float(x)
        except (TypeError, ValueError, OverflowError):
            raise InputError(name, f"must be {bounds}, got {_short(x)}") from None
        if not math.isfinite(f) or f != math.floor(f):
            raise InputError(name, f"must be {bounds}, got {_plain(x)}")
        v = int(f)
    if v < minimum or v > maximum:
        tail = f" ({why})" if why and v > maximum else ""
        raise InputError(name, f"must be {bounds}, got {_plain(x)}{tail}")
    return v


def _plain(x: Any) -> str:
    """A number as the user typed it (no ``np.float64(...)`` wrapper)."""
    if isinstance(x, (np.integer, int)) and not isinstance(x, bool):
        return _short(int(x))
    try:
        return repr(float(x))
    except (TypeError, ValueError, OverflowError):
        return repr(x)


def _size_text(shape: tuple) -> str:
    if shape == ():
        return "1 value"
    return f"{shape[0]} values" if len(shape) == 1 else f"shape {shape}"


def broadcast_shape(**arrays: Any) -> tuple:
    """Common broadcast shape of the arrays; an InputError names the first that does not fit."""
    shape: tuple = ()
    owner = ""
    for k, v in arrays.items():
        try:
            s = np.shape(v)
        except ValueError:      # a ragged nested list
            raise InputError(k, "could not be read as an array of numbers (rows of unequal length?)") from None
        try:
            new = np.broadcast_shapes(shape, s)
        except ValueError:
            raise InputError(k, f"has {_size_text(s)} but {owner} has {_size_text(shape)}: give one value, or "
                             "one per analysis") from None
        if new != shape:
            shape, owner = new, k
    return shape


def finite_result(what: str, **values: Any) -> None:
    """Raise :class:`UndefinedResultError` unless every named result value is finite.

    The message names the quantity and says plainly that double precision cannot hold it, so a
    NaN or inf never leaves a public function.
    """
    for k, v in values.items():
        if v is None:
            continue
        if type(v) is float:       # the common case, without an array round trip
            if v - v == 0.0:       # False for inf and NaN alone
                continue
            _not_finite(what, k)
        a = np.asarray(v)
        if a.dtype.kind not in "fc":
            a = a.astype(float)
        if a.size and not np.all(np.isfinite(a)):
            _not_finite(what, k)


def _not_finite(what: str, k: str) -> None:
    raise UndefinedResultError(
        f"{what}: the {k} is not a finite number (the inputs are so large, so small or so close "
        "together that double precision cannot hold the result); check the inputs and their units")
