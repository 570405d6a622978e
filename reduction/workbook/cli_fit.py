"""``ratiodesk isochron`` and ``ratiodesk wmean``: fits from a CSV file on the command line.

The commands read a CSV with a header line, check every cell (a bad cell is reported by the
line number the user sees in the file and the column name), convert the uncertainties to 1σ
absolute, call :mod:`reduction.regression` / :mod:`reduction.ages`, and print a table or one
JSON object. Errors are raised as :class:`~reduction.errors.InputError`; ``reduction.workbook.cli``
turns them into one line and exit status 1.
"""
from __future__ import annotations

import argparse
import csv
import json
import math
import sys
from typing import Any, Dict, List, Optional, Sequence, Tuple

import numpy as np

from ..ages import isochron_age
from ..constants import list_reference_sets, reference_set
from ..errors import InputError
from ..regression import TREATMENTS, IsochronFit, fit_isochron, mswd_notes, mswd_position, weighted_mean
from ..systems import SYSTEMS, get_system

__all__ = ["add_arguments_isochron", "add_arguments_wmean", "read_columns", "run_isochron", "run_wmean"]

_LEVEL_HELP = ("uncertainty level of the sigma columns in the file: 1 (default) or 2; the results are "
               "always reported at 1 sigma")
_REL_HELP = ("the sigma columns are relative uncertainties in PERCENT of the value (e.g. 0.05 means 0.05 %%), "
             "at the level given by --sigma; default: absolute, in the units of the value")


# --------------------------------------------------------------------------------------------
# CSV reading
# --------------------------------------------------------------------------------------------
def read_columns(path: str, required: Sequence[str], optional: Sequence[str] = ()
                 ) -> Tuple[Dict[str, np.ndarray], List[int]]:
    """Read numeric columns from a CSV file with a header line.

    Blank lines and lines starting with ``#`` are skipped; column names are matched without
    regard to case or surrounding spaces. Returns the columns (float arrays) and the file line
    number of each data row. Any bad cell raises :class:`InputError` naming the line and column.
    """
    header: Optional[List[str]] = None
    header_line = 0
    rows: List[Tuple[int, List[str]]] = []
    line = 0
    try:
        with open(path, encoding="utf-8-sig", newline="") as fh:
            reader = csv.reader(fh)
            for cells in reader:
                line = reader.line_num
                if not cells or all(not c.strip() for c in cells) or cells[0].lstrip().startswith("#"):
                    continue
                if header is None:
                    header = [c.strip().lower() for c in cells]
                    header_line = line
                    continue
                rows.append((line, cells))
    except UnicodeDecodeError:
        raise InputError(str(path), "is not a UTF-8 text CSV (save it as CSV, UTF-8)") from None
    except csv.Error as exc:
        raise InputError(str(path), f"is not a readable CSV (near line {line + 1}: {exc})") from None
    if header is None:
        raise InputError(str(path), "the file is empty (expected a header line with " + ", ".join(required) + ")")
    index: Dict[str, int] = {}
    for i, name in enumerate(header):
        if name in index and name in list(required) + list(optional):
            raise InputError(str(path), f"line {header_line}: column {name!r} appears twice in the header")
        index.setdefault(name, i)
    missing = [c for c in required if c not in index]
    if missing:
        raise InputError(str(path), f"line {header_line}: missing column {', '.join(missing)} "
                                    f"(the header has: {', '.join(header)}; needed: {', '.join(required)})")
    if not rows:
        raise InputError(str(path), "no data rows after the header")
    out: Dict[str, np.ndarray] = {}
    for name in list(required) + [c for c in optional if c in index]:
        col = index[name]
        vals = np.empty(len(rows))
        for k, (line, cells) in enumerate(rows):
            text = cells[col].strip() if col < len(cells) else ""
            where = f"line {line}, column {name}"
            if not text:
                raise InputError(where, "empty cell (a number is needed)")
            try:
                v = float(text)
            except ValueError:
                raise InputError(where, f"{text!r} is not a number") from None
            if not math.isfinite(v):
                raise InputError(where, f"must be a finite number, got {text!r}")
            vals[k] = v
        out[name] = vals
    return out, [line for line, _ in rows]


def _to_1s_abs(values: np.ndarray, sigma: np.ndarray, lines: List[int], column: str, level: int,
               relative: bool) -> np.ndarray:
    """Convert a sigma column to 1σ absolute; reject σ <= 0 naming the line."""
    for k, s in enumerate(sigma):
        if s <= 0:
            raise InputError(f"line {lines[k]}, column {column}", f"uncertainty must be > 0, got {float(s)!r}")
    with np.errstate(over="ignore", under="ignore"):
        out = np.abs(values) * (sigma / 100.0) if relative else sigma.copy()
    for k, s in enumerate(out):
        if values[k] == 0 and relative:
            raise InputError(f"line {lines[k]}, column {column}",
                             "a relative uncertainty of a value of 0 is 0: give it as an absolute uncertainty")
        if not (0 < s < math.inf):
            raise InputError(f"line {lines[k]}, column {column}",
                             f"{float(sigma[k]):g} % of {float(values[k]):g} is beyond double precision as an absolute "
                             "uncertainty: give it as an absolute uncertainty")
    return out / level


def _check_rho(rho: np.ndarray, lines: List[int]) -> None:
    for k, r in enumerate(rho):
        if not -1 < r < 1:
            raise InputError(f"line {lines[k]}, column rho", f"error correlation must lie strictly between -1 and 1, "
                                                             f"got {float(r)!r}")


# --------------------------------------------------------------------------------------------
# isochron
# --------------------------------------------------------------------------------------------
def add_arguments_isochron(parser: argparse.ArgumentParser) -> None:
    """Options of ``ratiodesk isochron``."""
    parser.description = (
        "Fit an isochron (York et al. 2004 regression) to a CSV file whose header names the columns "
        "x, sx, y, sy and optionally rho (error correlation, default 0). With --system the age and initial "
        "ratio follow. All reported uncertainties are 1 sigma; the *_se figures are never multiplied by "
        "sqrt(MSWD) (the scaled and 95 % figures are reported separately).")
    parser.add_argument("file", metavar="FILE.csv", help="CSV with header x, sx, y, sy[, rho]")
    parser.add_argument("--sigma", type=int, choices=(1, 2), default=1, help=_LEVEL_HELP)
    parser.add_argument("--relative", action="store_true", help=_REL_HELP)
    parser.add_argument("--system", choices=sorted(SYSTEMS), help="isotope system: adds the age and initial ratio")
    parser.add_argument("--treatment", choices=TREATMENTS, default="analytical",
                        help="scatter treatment: analytical (default; analytical errors only), expanded (errors "
                             "times sqrt(MSWD) when MSWD > 1), equal-weights (ordinary least squares), "
                             "excess-variance (maximum-likelihood added scatter on y)")
    parser.add_argument("--anchor", nargs=2, type=float, metavar=("VALUE", "SIGMA"),
                        help="force the line through the intercept VALUE +/- SIGMA (absolute, at the --sigma level)")
    parser.add_argument("--x-scale-sigma-rel", type=float, default=0.0, metavar="PERCENT",
                        help="systematic uncertainty common to all x, in PERCENT of x at the --sigma level (e.g. "
                             "0.2 means 0.2 %%), such as the mixed spike's parent/daughter (Sm/Nd) calibration; "
                             "with --system it is added to the age error as age_se_ma_total (default 0)")
    parser.add_argument("--reference-set", choices=list_reference_sets(), default=None,
                        help="decay constants and reservoirs to use (default: " + list_reference_sets()[0] + ")")
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of a table")


def _fit_from_args(args: argparse.Namespace) -> Tuple[IsochronFit, IsochronFit, Dict[str, np.ndarray]]:
    cols, lines = read_columns(args.file, ("x", "sx", "y", "sy"), ("rho",))
    x, y = cols["x"], cols["y"]
    sx = _to_1s_abs(x, cols["sx"], lines, "sx", args.sigma, args.relative)
    sy = _to_1s_abs(y, cols["sy"], lines, "sy", args.sigma, args.relative)
    rho = cols.get("rho", np.zeros_like(x))
    _check_rho(rho, lines)
    if len(x) < 2:
        raise InputError(args.file, f"a line needs at least 2 data rows, got {len(x)}")
    anchor = None
    if args.anchor is not None:
        value, sigma = args.anchor
        if not (math.isfinite(value) and math.isfinite(sigma)) or sigma <= 0:
            raise InputError("--anchor", f"needs a finite VALUE and SIGMA > 0, got {value!r} {sigma!r}")
        anchor = (value, sigma / args.sigma)
    fit = fit_isochron(x, sx, y, sy, rho, treatment=args.treatment, anchor=anchor)
    base = fit
    if args.treatment == "expanded":
        base = fit_isochron(x, sx, y, sy, rho, treatment="analytical", anchor=anchor)
    return fit, base, {"x": x, "sx": sx, "y": y, "sy": sy, "rho": rho}


def isochron_result(args: argparse.Namespace) -> Dict[str, Any]:
    """The JSON object of ``ratiodesk isochron`` (also used for the table).

    Besides the fit and age figures it carries ``mswd_limits_95`` (the χ² 5–95 % range of the MSWD,
    cf. Wendt & Carl 1991), ``mswd_position`` (:func:`mswd_position`) and ``notes``
    (:func:`mswd_notes`, a list of sentences, empty when there is nothing to say).
    """
    fit, base, _ = _fit_from_args(args)
    out: Dict[str, Any] = {
        "n": fit.n, "dof": fit.dof, "treatment": fit.treatment, "uncertainty_level": "1 sigma",
        "slope": fit.slope, "slope_se": base.slope_sigma_1s,
        "intercept": fit.intercept, "intercept_se": base.intercept_sigma_1s,
        "cov_slope_intercept": base.cov_slope_intercept, "rho_slope_intercept": fit.rho_slope_intercept,
        "mswd": fit.mswd, "p_value": fit.p_value,
        "mswd_limits_95": list(fit.mswd_limits_95) if fit.mswd_limits_95 else None,
        "slope_se_95_expanded": fit.slope_sigma_95_expanded,
        "intercept_se_95_expanded": fit.intercept_sigma_95_expanded, "t95": fit.t95,
        "mswd_position": mswd_position(fit), "notes": mswd_notes(fit),
    }
    if fit.treatment == "expanded":
        out.update(slope_se_scaled=fit.slope_sigma_1s, intercept_se_scaled=fit.intercept_sigma_1s,
                   sigma_scale=fit.sigma_scale)
    if fit.treatment == "excess-variance":
        out.update(excess_sigma_y=fit.excess_sigma_y_1s, excess_sigma_y_se=fit.excess_sigma_y_sigma_1s)
    if fit.anchor is not None:
        out["anchor"] = list(fit.anchor)
    if args.system:
        ref = reference_set(args.reference_set)
        xs = getattr(args, "x_scale_sigma_rel", 0.0) or 0.0
        if not (math.isfinite(xs) and xs >= 0):
            raise InputError("--x-scale-sigma-rel", f"must be a finite percentage >= 0, got {xs!r}")
        age = isochron_age(base, args.system, ref, x_scale_sigma_rel=xs / 100.0 / args.sigma)
        sysobj = get_system(args.system)
        out.update(
            system=sysobj.key, x_ratio=sysobj.parent_ratio, y_ratio=sysobj.daughter_ratio,
            age_ma=age.age_ma, age_se_ma=age.age_sigma_1s_ma, age_se_ma_with_lambda=age.age_sigma_1s_ma_with_lambda,
            age_se_95_expanded_ma=age.age_sigma_95_expanded_ma,
            initial=age.initial, initial_se=age.initial_sigma_1s,
            initial_se_95_expanded=age.initial_sigma_95_expanded,
            decay_constant=age.decay_constant, decay_constant_se=age.decay_constant_sigma_1s,
            decay_constant_source=age.decay_constant_source, reference_set=age.reference_set,
            x_scale_sigma_rel=age.x_scale_sigma_rel, age_se_ma_total=age.age_sigma_1s_ma_total)
        if fit.treatment == "expanded":
            out["age_se_ma_scaled"] = isochron_age(fit, args.system, ref).age_sigma_1s_ma
    return out


def _g(v: Optional[float], digits: int = 6) -> str:
    if v is None:
        return "-"
    return f"{v:.{digits}g}"


def _isochron_table(r: Dict[str, Any]) -> str:
    lines = [f"Isochron fit (York et al. 2004), treatment: {r['treatment']}; n = {r['n']}, dof = {r['dof']}"]
    lines.append(f"  {'quantity':<28}{'value':>16}{'1 sigma':>14}{'95 % (t*sqrt(MSWD))':>22}")

    def row(name: str, val: Optional[float], se: Optional[float], e95: Optional[float] = None, d: int = 10) -> None:
        lines.append(f"  {name:<28}{_g(val, d):>16}{_g(se, 4):>14}{_g(e95, 4):>22}")

    row("slope", r["slope"], r["slope_se"], r["slope_se_95_expanded"])
    row("intercept", r["intercept"], r["intercept_se"], r["intercept_se_95_expanded"])
    if "slope_se_scaled" in r:
        row("slope (sigma x sqrt(MSWD))", r["slope"], r["slope_se_scaled"])
        row("intercept (x sqrt(MSWD))", r["intercept"], r["intercept_se_scaled"])
    if "excess_sigma_y" in r:
        row("excess scatter on y", r["excess_sigma_y"], r["excess_sigma_y_se"], None, 4)
    if r["mswd"] is None:
        lines.append("  MSWD: none (two points define the line exactly)")
    else:
        lo, hi = r["mswd_limits_95"]
        lines.append(f"  MSWD = {r['mswd']:.4g}  p(chi2) = {r['p_value']:.3g}  "
                     f"MSWD range (chi-square 5-95 %; upper = 95 % rejection limit, cf. Wendt & Carl 1991): "
                     f"{lo:.3g} - {hi:.3g} ({r['mswd_position']})")
    for note in r.get("notes", ()):
        lines.append(f"  note: {note}")
    if "age_ma" in r:
        lines.append(f"  system {r['system']}: x = {r['x_ratio']}, y = {r['y_ratio']}; decay constant "
                     f"{r['decay_constant']:.6g} +/- {r['decay_constant_se']:.3g} /a "
                     f"(1 sigma; {r['decay_constant_source']})")
        row("age (Ma), slope error only", r["age_ma"], r["age_se_ma"], r["age_se_95_expanded_ma"], 6)
        row("age (Ma), with lambda error", r["age_ma"], r["age_se_ma_with_lambda"], None, 6)
        if r.get("x_scale_sigma_rel"):
            row(f"age (Ma), + x-scale {100 * r['x_scale_sigma_rel']:.3g} %", r["age_ma"], r["age_se_ma_total"], None, 6)
        row("initial " + r["y_ratio"], r["initial"], r["initial_se"], r["initial_se_95_expanded"], 8)
    lines.append("  1 sigma figures are analytical, not multiplied by sqrt(MSWD), unless the row says so.")
    return "\n".join(lines)


def run_isochron(args: argparse.Namespace) -> int:
    """Run ``ratiodesk isochron``."""
    r = isochron_result(args)
    if args.json:
        print(json.dumps(r, indent=None, allow_nan=False))
    else:
        print(_isochron_table(r))
    return 0


# --------------------------------------------------------------------------------------------
# weighted mean
# --------------------------------------------------------------------------------------------
def add_arguments_wmean(parser: argparse.ArgumentParser) -> None:
    """Options of ``ratiodesk wmean``."""
    parser.description = ("Inverse-variance weighted mean of a CSV file whose header names the columns value "
                          "and sigma. Reported uncertainties are 1 sigma.")
    parser.add_argument("file", metavar="FILE.csv", help="CSV with header value, sigma")
    parser.add_argument("--sigma", type=int, choices=(1, 2), default=1, help=_LEVEL_HELP)
    parser.add_argument("--relative", action="store_true", help=_REL_HELP)
    parser.add_argument("--external", action="store_true",
                        help="also estimate an external scatter (maximum likelihood) and include it in the error")
    parser.add_argument("--outlier-k", type=float, default=None, metavar="K",
                        help="flag outliers by an iterative leave-one-out test at K standard deviations "
                             "(flagged values stay in the mean)")
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of a table")


def wmean_result(args: argparse.Namespace) -> Dict[str, Any]:
    """The JSON object of ``ratiodesk wmean``."""
    if args.outlier_k is not None and not (math.isfinite(args.outlier_k) and args.outlier_k > 0):
        raise InputError("--outlier-k", f"must be a finite number > 0, got {args.outlier_k!r}")
    cols, lines = read_columns(args.file, ("value", "sigma"))
    s = _to_1s_abs(cols["value"], cols["sigma"], lines, "sigma", args.sigma, args.relative)
    wm = weighted_mean(cols["value"], s, external_scatter=args.external, outlier_k=args.outlier_k)
    return {"n": wm.n, "dof": wm.dof, "uncertainty_level": "1 sigma", "mean": wm.mean, "mean_se": wm.mean_sigma_1s,
            "mswd": wm.mswd, "p_value": wm.p_value, "external_sigma": wm.external_sigma_1s,
            "external_sigma_se": wm.external_sigma_sigma_1s,
            "outlier_lines": [ln for ln, f in zip(lines, wm.outliers) if f], "outlier_rule": wm.rule}


def run_wmean(args: argparse.Namespace) -> int:
    """Run ``ratiodesk wmean``."""
    r = wmean_result(args)
    if args.json:
        print(json.dumps(r, allow_nan=False))
        return 0
    out = [f"Weighted mean of {r['n']} values (1 sigma)",
           f"  mean = {r['mean']:.10g} +/- {r['mean_se']:.4g} (1 sigma"
           + (", including the external scatter)" if args.external else ", analytical)")]
    if r["mswd"] is not None:
        out.append(f"  MSWD = {r['mswd']:.4g}  p(chi2) = {r['p_value']:.3g}  dof = {r['dof']}")
    if args.external:
        out.append(f"  external scatter = {r['external_sigma']:.4g} +/- {_g(r['external_sigma_se'], 3)} (1 sigma)")
    if args.outlier_k is not None:
        flagged = ", ".join(str(n) for n in r["outlier_lines"]) or "none"
        out.append(f"  outliers flagged (file lines): {flagged}")
        out.append(f"  rule: {r['outlier_rule']}")
    print("\n".join(out))
    return 0


if __name__ == "__main__":   # pragma: no cover - use `ratiodesk` / `python -m reduction`
    sys.exit("run this through `ratiodesk isochron|wmean` or `python -m reduction`")
