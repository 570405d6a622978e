"""Cycle statistics: mean, SD, standard error and iterative outlier rejection.

A mass-spectrometer run reports one ratio per cycle (integration). The run's value is the mean of
the cycles that survive an outlier test at ``reject_k`` standard deviations (2σ is common practice),
applied iteratively: compute mean and SD of the kept cycles, drop the cycles further than k·SD from
the mean, and repeat until no cycle is dropped.

The 2-D form (rows = analyses or blocks, columns = cycles) is vectorised over rows and is the one
place in the engine where NaN is accepted: it means "no cycle here" (rows of unequal length).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Optional, Union

import numpy as np

from .errors import InputError, UndefinedResultError

__all__ = ["CycleStats", "cycle_mean", "cycle_sem_1s", "cycle_stats"]

ArrayOrFloat = Union[float, np.ndarray]


@dataclass(frozen=True)
class CycleStats:
    """Statistics of the cycles of one or many analyses.

    For 1-D input the per-analysis fields are floats / ints; for 2-D input they are 1-D arrays with
    one entry per row.

    Attributes
    ----------
    mean : float or ndarray
        Mean of the kept cycles.
    sd_1s : float or ndarray
        Sample standard deviation (ddof = 1) of the kept cycles.
    sem_1s : float or ndarray
        Standard error of the mean, ``sd_1s / sqrt(n_kept)``.
    n_kept, n_rejected : int or ndarray
        Number of cycles kept and rejected (missing cycles are in neither).
    kept : ndarray of bool
        Mask of kept cycles, the shape of the input.
    reject_k : float or None
        Rejection threshold in SD units (None: no rejection).
    passes : int
        Number of rejection passes made (the last one rejected nothing, unless max_passes was hit).
    rule : str
        Plain-language statement of the rejection rule.
    """

    mean: ArrayOrFloat
    sd_1s: ArrayOrFloat
    sem_1s: ArrayOrFloat
    n_kept: Any
    n_rejected: Any
    kept: np.ndarray
    reject_k: Optional[float]
    passes: int
    rule: str


def _masked_mean_sd(x: np.ndarray, mask: np.ndarray):
    n = mask.sum(axis=1)
    xs = np.where(mask, x, 0.0)
    mean = xs.sum(axis=1) / n
    dev = np.where(mask, x - mean[:, None], 0.0)
    sd = np.sqrt((dev * dev).sum(axis=1) / (n - 1))
    return mean, sd, n


def cycle_stats(values: Any, *, reject_k: Optional[float] = 2.0, max_passes: int = 10,
                min_kept: int = 3) -> CycleStats:
    """Mean, SD and standard error of cycles with iterative k·SD outlier rejection.

    Parameters
    ----------
    values : array_like
        1-D (the cycles of one analysis) or 2-D (rows = analyses/blocks, columns = cycles). In the 2-D
        form NaN marks a missing cycle; elsewhere NaN and inf are rejected.
    reject_k : float or None, default 2.0
        Reject cycles with ``|x - mean| > reject_k * SD`` of the currently kept cycles, recomputing
        mean and SD after each pass (common practice: 2σ). ``None`` keeps every cycle.
    max_passes : int, default 10
        Upper limit on rejection passes.
    min_kept : int, default 3
        A pass that would leave fewer than ``min_kept`` cycles in a row is not applied to that row.

    Returns
    -------
    CycleStats

    Raises
    ------
    InputError
        Wrong shape, non-numbers, NaN in 1-D input, fewer than 2 cycles in a row, bad ``reject_k``.

    Notes
    -----
    Iterative sigma-clipping (common practice in isotope-ratio mass spectrometry; e.g. the
    2σ rejection used on TIMS and MC-ICP-MS cycle data). The SD uses ddof = 1.

    Examples
    --------
    >>> s = cycle_stats([1.0, 1.1, 0.9, 1.0, 5.0, 1.05, 0.95])
    >>> s.n_rejected, round(s.mean, 6)
    (1, 1.0)
    """
    try:
        x = np.array(values, dtype=float)  # a copy: never touch the caller's array
    except (TypeError, ValueError):
        raise InputError("values", "could not be read as numbers") from None
    if x.ndim not in (1, 2):
        raise InputError("values", f"must be 1-D (cycles) or 2-D (analyses x cycles), got shape {x.shape}")
    one_d = x.ndim == 1
    if one_d:
        if not np.all(np.isfinite(x)):
            i = int(np.flatnonzero(~np.isfinite(x))[0])
            raise InputError("values", f"must be a finite number, got {x[i]!r} (NaN is only allowed as a "
                             "missing cycle in the 2-D form)", row=i + 1)
        x = x[None, :]
    elif np.any(np.isinf(x)):
        i = int(np.flatnonzero(np.isinf(x).any(axis=1))[0])
        raise InputError("values", "contains inf", row=i + 1)
    if reject_k is not None and not (np.isfinite(reject_k) and reject_k > 0):
        raise InputError("reject_k", f"must be > 0 or None, got {reject_k!r}")
    if int(max_passes) < 1:
        raise InputError("max_passes", f"must be >= 1, got {max_passes!r}")
    min_kept = max(int(min_kept), 2)
    present = np.isfinite(x)
    n_present = present.sum(axis=1)
    if np.any(n_present < 2):
        i = int(np.flatnonzero(n_present < 2)[0])
        raise InputError("values", f"needs at least 2 cycles per analysis, got {int(n_present[i])}", row=i + 1)
    kept = present.copy()
    passes = 0
    if reject_k is not None:
        for _ in range(int(max_passes)):
            passes += 1
            mean, sd, n = _masked_mean_sd(x, kept)
            with np.errstate(invalid="ignore"):
                out = kept & (np.abs(np.where(present, x, 0.0) - mean[:, None]) > reject_k * sd[:, None])
            new = kept & ~out
            ok_rows = new.sum(axis=1) >= min_kept
            new = np.where(ok_rows[:, None], new, kept)
            if np.array_equal(new, kept):
                break
            kept = new
    mean, sd, n = _masked_mean_sd(x, kept)
    sem = sd / np.sqrt(n)
    if np.any(~np.isfinite(mean)) or np.any(~np.isfinite(sd)):
        raise UndefinedResultError("values: cycle statistics undefined (too few kept cycles)")
    n_rej = n_present - n
    rule = ("no outlier rejection" if reject_k is None else
            f"iterative rejection of cycles beyond {reject_k:g} SD of the kept cycles' mean "
            f"(SD ddof=1; at least {min_kept} cycles kept)")
    if one_d:
        return CycleStats(float(mean[0]), float(sd[0]), float(sem[0]), int(n[0]), int(n_rej[0]), kept[0],
                          reject_k, passes, rule)
    return CycleStats(mean, sd, sem, n.astype(int), n_rej.astype(int), kept, reject_k, passes, rule)


def _one_run(values: Any) -> np.ndarray:
    """A cell range (row or column) as one 1-D run of cycles."""
    try:
        x = np.array(values, dtype=float)
    except (TypeError, ValueError):
        raise InputError("values", "could not be read as numbers") from None
    if x.ndim == 2 and 1 in x.shape:
        x = x.ravel()
    return x


def cycle_mean(values: Any, reject_k: Optional[float] = 2.0) -> float:
    """Mean of one analysis' cycles after iterative k·SD rejection (float front of :func:`cycle_stats`)."""
    return float(cycle_stats(_one_run(values), reject_k=reject_k).mean)


def cycle_sem_1s(values: Any, reject_k: Optional[float] = 2.0) -> float:
    """1σ standard error of the mean of one analysis' cycles after rejection (float front)."""
    return float(cycle_stats(_one_run(values), reject_k=reject_k).sem_1s)
