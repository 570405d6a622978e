"""The cell adapter: cells → arrays → engine → cells. No math, and no ``uno`` import.

Every public function here is named after a method of the table in ``functions.py`` and takes the
arguments exactly as LibreOffice delivers them (ranges as tuples of tuples of float / str, an
omitted optional argument as ``None``); it returns what a cell can show: a Python float, a str,
or a tuple of tuples of those.

Cells never lie:
* text and empty cells in a numeric range are never read as zero. Rows that are empty in *every*
  range of a function are skipped (so a range may be larger than the data); a row empty in only
  some ranges is an error naming the row.
* bad input becomes a readable message in the cell, starting with :data:`MARKER`, naming the
  argument and the row (``"⚠ must be > 0, got 0.0 (row 3 of sy)"``); rows count from the top of
  the range the user selected.
* a message arriving as an input (another RatioDesk cell's message) is passed on with the argument
  it came through: ``"⚠ from sy: ..."``, leading the user to the first cause.
* an undefined result says why.
* no call does unbounded work: every argument that sizes work or output (points, cycles, values,
  runs, ratios, spike isotopes, table cells, any range's cells) is checked against its bound in
  ``functions.py`` (``MAX_*``) before the engine is called, with a message naming the argument
  (``"⚠ points must be a whole number from 3 to 10000, got 1e+09"``); the caches below hold at most
  :data:`CACHE_MAX_CELLS` input cells each.

The engine is imported lazily, on the first call that needs it (:func:`_load_engine`), so a
LibreOffice without numpy shows a readable message in every cell instead of Err:504, and any
failure to import the engine becomes a logged cell message, never a traceback. numpy is taken from
LibreOffice's own Python when it has one; only when ``import numpy`` fails does a bundled build
(``python3 build.py oxt --target PLATFORM-cpXY``) put its ``pythonpath/ratiodesk_vendor/`` on
``sys.path`` and retry, after checking that it was built for this Python and platform (else the
message names the .oxt that is). Which numpy was loaded (version, path) goes to the log
:data:`LOG_PATH`; RD.DIAGNOSTICS shows it in the sheet. Inside LibreOffice the engine is shipped
as the package ``ratiodesk_engine`` (a copy of ``reduction``; see macros/package.py); outside it,
``reduction`` is used.
"""
from __future__ import annotations

import importlib
import os
import platform
import re
import sys
import tempfile
import time
import traceback
from collections import OrderedDict
from pathlib import Path
from typing import Any, Callable, Dict, Iterable, List, Optional, Sequence, Tuple

if __package__:
    from . import functions as _table
    from . import targets as _targets
else:  # imported as a top-level module (tests put macros/ on sys.path)
    import functions as _table
    import targets as _targets

MARKER = _table.MESSAGE_MARKER
MAX_RANGE_CELLS = _table.MAX_RANGE_CELLS
MAX_ISOCHRON_POINTS = _table.MAX_ISOCHRON_POINTS
MAX_VALUES = _table.MAX_VALUES
MAX_ELLIPSE_POINTS = _table.MAX_ELLIPSE_POINTS
MAX_NAMED_RATIOS = _table.MAX_NAMED_RATIOS
MAX_SPIKE_ISOTOPES = _table.MAX_SPIKE_ISOTOPES
MAX_TABLE_CELLS = _table.MAX_TABLE_CELLS
#: Input cells one result cache may hold (about 80 bytes each as LibreOffice delivers them: ~80 MB).
CACHE_MAX_CELLS = 1_000_000
YEARS_PER_MA = 1.0e6
ENGINE_PACKAGES = ("ratiodesk_engine", "reduction")


def _log_path() -> Path:
    env = os.environ.get("RATIODESK_LOG")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "ratiodesk" / "calc-addin.log"


LOG_PATH = _log_path()


def log(text: str) -> None:
    """Append a time-stamped line to the log file (falling back to the temp directory)."""
    line = f"{time.strftime('%Y-%m-%d %H:%M:%S')} {text}\n"
    global LOG_PATH
    for path in (LOG_PATH, Path(tempfile.gettempdir()) / "ratiodesk-calc-addin.log"):
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            with open(path, "a", encoding="utf-8") as fh:
                fh.write(line)
            LOG_PATH = path
            return
        except OSError:
            continue


def _read_build() -> Dict[str, Any]:
    """What macros/package.py wrote into ``_build.py`` (the .oxt), or the same for a source checkout.

    A source checkout (macros/ on sys.path, ``reduction`` importable) counts as the system build;
    its target list is read from the lock file beside this module.
    """
    info: Dict[str, Any] = {"VERSION": None, "TARGET": _targets.SYSTEM, "PYTHON": None, "PLATFORM": None,
                            "NUMPY": None, "VENDOR": None, "TARGETS": ()}
    try:
        if __package__:
            from . import _build  # written by macros/package.py into the .oxt
            info.update({k: getattr(_build, k) for k in info if hasattr(_build, k)})
    except Exception as exc:  # a damaged install: say so in the log, keep going with the defaults
        log(f"_build.py unreadable: {exc!r}")
    here = Path(__file__).resolve().parent
    if info["VERSION"] is None:
        try:
            init = (here.parent / "reduction" / "__init__.py").read_text(encoding="utf-8")
            m = re.search(r'^__version__\s*=\s*"([^"]+)"', init, re.M)
            info["VERSION"] = m.group(1) if m else "unknown"
        except OSError:
            info["VERSION"] = "unknown"
    if not info["TARGETS"]:
        try:
            import json
            lock = json.loads((here / "numpy-wheels.lock").read_text(encoding="utf-8"))
            info["TARGETS"] = tuple(lock.get("targets", ()))
        except (OSError, ValueError):
            pass
    return info


BUILD = _read_build()
VERSION = str(BUILD["VERSION"])


class CellMessage(Exception):
    """A readable problem to show in the cell (without the marker; it is added on display)."""


# --------------------------------------------------------------------------------------------
# the engine, imported lazily
# --------------------------------------------------------------------------------------------
_engine_modules: Dict[str, Any] = {}
_engine_state: Dict[str, Any] = {"package": None, "failure": None, "numpy": None, "numpy_source": None,
                                 "numpy_problem": None, "module_failures": {}}


def engine(module: str) -> Any:
    """The engine submodule ``module`` (e.g. ``"regression"``), importing the engine on first use.

    Raises :class:`_EngineMissing` (a readable message, already logged) when it cannot be imported.
    """
    mod = _engine_modules.get(module)
    if mod is not None:
        return mod
    pkg = _engine_state["package"] or _load_engine()
    failed = _engine_state["module_failures"].get(module)
    if failed:
        raise _EngineMissing(failed)
    try:
        mod = importlib.import_module(f"{pkg}.{module}")
    except Exception as exc:
        msg = _engine_failed(exc, f"{pkg}.{module}")
        _engine_state["module_failures"][module] = msg
        raise _EngineMissing(msg) from None
    _engine_modules[module] = mod
    return mod


class _EngineMissing(Exception):
    """The engine (or numpy) cannot be imported; the text is the cell message."""


def _python_words() -> str:
    return f"Python {platform.python_version()}"


def _distribution_python() -> bool:
    """True for a Linux distribution's own Python (its packages come from the package manager)."""
    return sys.platform.startswith("linux") and os.path.realpath(sys.prefix) in ("/usr", "/usr/local")


def _apt_hint() -> str:
    return ("install it with: sudo apt-get install python3-numpy (Debian, Ubuntu; elsewhere your "
            "distribution's python3-numpy package), then restart LibreOffice")


def _oxt_for_here(python: Optional[str] = None, plat: Optional[str] = None) -> Optional[str]:
    """File name of the bundled build for this (or the given) Python ``"311"`` and platform, or None."""
    target = _targets.target_name(plat or _targets.running_platform(), python or _targets.running_python())
    return _targets.oxt_name(VERSION, target) if target in BUILD["TARGETS"] else None


def _install_oxt_words() -> str:
    oxt = _oxt_for_here()
    if oxt:
        return f"install {oxt}, which brings its own numpy (Tools > Extension Manager), then restart LibreOffice"
    return (f"no RatioDesk package brings numpy for {_python_words()} on "
            f"{_targets.platform_label(_targets.running_platform())}: numpy must be installed into LibreOffice's "
            "Python")


def needs_numpy_text() -> str:
    """The cell message of a build without numpy inside when LibreOffice's Python has no numpy."""
    head = f"RatioDesk needs numpy, which LibreOffice's Python ({_python_words()}) does not have: "
    if _distribution_python():
        oxt = _oxt_for_here()
        tail = _apt_hint() + (f"; or install {oxt}, which brings its own numpy" if oxt else "")
    else:
        tail = _install_oxt_words()
    return MARKER + head + tail


def target_mismatch_text(python: Optional[str] = None, plat: Optional[str] = None) -> Optional[str]:
    """None when this bundled build fits the running (or the given) Python and platform, else the cell message.

    ``python`` as in a wheel tag (``"310"``), ``plat`` a :mod:`targets` platform key.
    """
    if not BUILD["VENDOR"]:
        return None
    have = python or _targets.running_python()
    want_py, want_plat = str(BUILD["PYTHON"]), str(BUILD["PLATFORM"])
    have_py, have_plat = _targets.python_label(have), plat or _targets.running_platform()
    if (want_py, want_plat) == (have_py, have_plat):
        return None
    runs = f"Python {have_py}" + ("" if have_plat == want_plat else f" on {_targets.platform_label(have_plat)}")
    oxt = _oxt_for_here(have, have_plat)
    if oxt:
        fix = f"install {oxt} (Tools > Extension Manager), then restart LibreOffice"
    elif _distribution_python():
        fix = f"no RatioDesk package brings numpy for it; numpy is missing too: {_apt_hint()}"
    else:
        fix = "no RatioDesk package brings numpy for it: numpy must be installed into LibreOffice's Python"
    return (MARKER + f"this package is built for Python {want_py} on {_targets.platform_label(want_plat)}; "
            f"this LibreOffice runs {runs} \u2014 {fix}")


def _vendor_dir() -> Optional[Path]:
    """``pythonpath/ratiodesk_vendor`` of a bundled build (None for the system build)."""
    if not BUILD["VENDOR"]:
        return None
    return Path(__file__).resolve().parent.parent / str(BUILD["VENDOR"])


def _forget_numpy() -> None:
    for name in [m for m in sys.modules if m == "numpy" or m.startswith("numpy.")]:
        del sys.modules[name]


def _import_numpy() -> Any:
    """numpy: LibreOffice's own when its Python has one, else the bundled copy; _EngineMissing when neither."""
    try:
        import numpy
        if not isinstance(getattr(numpy, "__version__", None), str) or not getattr(numpy, "__file__", None):
            # e.g. a stray folder named numpy somewhere on sys.path, imported as an empty namespace package
            raise ImportError(f"the 'numpy' found at {list(getattr(numpy, '__path__', []))} is not a numpy "
                              "installation (no __version__)")
    except Exception as first:  # ImportError, or a broken installation raising anything else
        log(f"import numpy failed in {sys.executable or '(embedded)'} ({_python_words()}, prefix {sys.prefix}): "
            f"{first!r}")
        vendor = _vendor_dir()
        if vendor is None:
            raise _EngineMissing(needs_numpy_text()) from None
        mismatch = target_mismatch_text()
        if mismatch:
            log(f"bundled numpy not used: {mismatch[len(MARKER):]}")
            raise _EngineMissing(mismatch) from None
        if not (vendor / "numpy" / "__init__.py").exists():
            msg = (MARKER + f"the numpy bundled with RatioDesk is missing from {vendor}: reinstall "
                   f"{_targets.oxt_name(VERSION, str(BUILD['TARGET']))}; details in {LOG_PATH}")
            log(msg[len(MARKER):])
            raise _EngineMissing(msg) from None
        _forget_numpy()
        sys.path.insert(0, str(vendor))
        try:
            import numpy
        except Exception as exc:
            log(f"bundled numpy failed to load from {vendor}:\n{traceback.format_exc()}")
            _forget_numpy()
            sys.path.remove(str(vendor))
            raise _EngineMissing(
                MARKER + f"the numpy {BUILD['NUMPY']} bundled with RatioDesk failed to load ({type(exc).__name__}: "
                f"{exc}); reinstall {_targets.oxt_name(VERSION, str(BUILD['TARGET']))}; details in {LOG_PATH}"
            ) from None
    # where it came from, by its location: a later import finds the bundled copy already on sys.path
    vendor = _vendor_dir()
    here = str(Path(str(numpy.__file__)).resolve())
    bundled = vendor is not None and here.startswith(str(vendor.resolve()) + os.sep)
    source = "bundled with RatioDesk" if bundled else "LibreOffice's Python"
    _engine_state["numpy"], _engine_state["numpy_source"] = numpy, source
    log(f"numpy {getattr(numpy, '__version__', '?')} loaded from {getattr(numpy, '__file__', '?')} ({source}; "
        f"{_python_words()}, RatioDesk {VERSION}, build {BUILD['TARGET']})")
    return numpy


def _engine_failed(exc: BaseException, what: str) -> str:
    """Log why the engine did not import; return the cell message."""
    log(f"RatioDesk engine ({what}) failed to import in {_python_words()}:\n{traceback.format_exc()}")
    return (MARKER + f"RatioDesk's engine could not be loaded in LibreOffice's {_python_words()} "
            f"({type(exc).__name__}: {exc}); details in {LOG_PATH}")


def _load_engine() -> str:
    """Import numpy and the engine package once; return the package name or raise _EngineMissing."""
    if _engine_state["failure"]:
        raise _EngineMissing(_engine_state["failure"])
    try:
        _import_numpy()
    except _EngineMissing as exc:
        _engine_state["failure"] = _engine_state["numpy_problem"] = str(exc)
        raise
    for name in ENGINE_PACKAGES:
        try:
            importlib.import_module(name)
        except ModuleNotFoundError as exc:
            if exc.name == name:
                continue
            _engine_state["failure"] = _engine_failed(exc, name)
            raise _EngineMissing(_engine_state["failure"]) from None
        except Exception as exc:  # SyntaxError on an old Python, a failing module-level statement, ...
            _engine_state["failure"] = _engine_failed(exc, name)
            raise _EngineMissing(_engine_state["failure"]) from None
        _engine_state["package"] = name
        return name
    msg = MARKER + "RatioDesk engine not found (reinstall the extension); see the log " + str(LOG_PATH)
    log(f"engine package not found among {ENGINE_PACKAGES}; sys.path={sys.path}")
    _engine_state["failure"] = msg
    raise _EngineMissing(msg)


#: What every cell shows when numpy is missing and this build brings none (kept for callers and tests;
#: the bundled builds' messages come from :func:`target_mismatch_text`).
NEEDS_NUMPY = needs_numpy_text()


# --------------------------------------------------------------------------------------------
# the guard every cell function runs in
# --------------------------------------------------------------------------------------------
def _message(text: str, array: bool) -> Any:
    text = text if text.startswith(MARKER) else MARKER + text
    return ((text,),) if array else text


def cell_function(array: bool = False, rename: Optional[Dict[str, str]] = None) -> Callable:
    """Decorate an adapter: turn every problem into a readable cell message.

    ``rename`` maps engine argument names to the cell argument names the user sees.
    """
    names = rename or {}

    def wrap(fn: Callable) -> Callable:
        def run(*args: Any) -> Any:
            try:
                return fn(*args)
            except CellMessage as exc:
                return _message(str(exc), array)
            except _EngineMissing as exc:
                return _message(str(exc), array)
            except Exception as exc:  # the engine's own errors and anything unexpected
                try:
                    return _message(_engine_error_text(exc, names, fn.__name__), array)
                except Exception as again:  # never a second exception out of a cell
                    return _message(f"internal error in {fn.__name__} ({type(exc).__name__}: {exc}; then "
                                    f"{type(again).__name__}); details in {LOG_PATH}", array)

        run.__name__ = fn.__name__
        run.__doc__ = fn.__doc__
        run.__wrapped__ = fn  # type: ignore[attr-defined]
        return run

    return wrap


def _engine_error_text(exc: Exception, names: Dict[str, str], where: str) -> str:
    """The cell message of an exception out of an adapter (never imports the engine itself)."""
    errors = _engine_modules.get("errors")
    if errors is None and _engine_state["package"]:
        try:
            errors = engine("errors")
        except Exception:
            errors = None
    if errors is None:
        log(f"unexpected error in {where} (engine not loaded):\n{traceback.format_exc()}")
        return f"internal error in {where} ({type(exc).__name__}: {exc}); details in {LOG_PATH}"
    if isinstance(exc, errors.InputError):
        arg = names.get(exc.argument, exc.argument)
        rowmap = getattr(exc, "rowmap", None)
        if exc.row is not None:
            row = rowmap[exc.row - 1] if rowmap and exc.row - 1 < len(rowmap) else exc.row
            return f"{exc.problem} (row {row} of {arg})"
        return f"{arg}: {exc.problem}"
    if isinstance(exc, errors.UndefinedResultError):
        return f"undefined: {exc}"
    if isinstance(exc, errors.ConvergenceError):
        return f"did not converge: {exc}"
    if isinstance(exc, errors.RatioDeskError):
        return str(exc)
    log(f"unexpected error in {where}:\n{traceback.format_exc()}")
    return f"internal error in {where} ({type(exc).__name__}: {exc}); details in {LOG_PATH}"


# --------------------------------------------------------------------------------------------
# cells -> Python values
# --------------------------------------------------------------------------------------------
def _cells(name: str, grid: Any) -> List[Any]:
    """Flatten one column or one row of cells (or a single value) into a list."""
    if isinstance(grid, tuple):
        rows = len(grid)
        cols = len(grid[0]) if rows else 0
        if cols != 1 and rows != 1:
            raise CellMessage(f"{name} must be one column or one row, got {rows} rows x {cols} columns")
        if rows * cols > MAX_RANGE_CELLS:
            raise CellMessage(f"{name} is a range of {rows * cols} cells; at most {MAX_RANGE_CELLS} cells (one "
                              "whole column of a standard sheet)")
        return [r[0] for r in grid] if cols == 1 else list(grid[0])
    return [grid]


def _passed_on(name: str, value: str) -> CellMessage:
    return CellMessage(MARKER + "from " + name + ": " + value[len(MARKER):])


_FLOAT_ONLY = {float}


def _is_empty(v: Any) -> bool:
    return v is None or v == ""


def columns(named: Sequence[Tuple[str, Any]], optional: Iterable[str] = (),
            limit: Optional[Tuple[int, str]] = None) -> Tuple[Dict[str, Any], List[int]]:
    """Read parallel numeric columns; return ``({name: list of float or None}, kept_rows)``.

    ``named`` is ``[(argument name, grid), ...]``; an ``optional`` argument may be ``None``
    (omitted) or entirely empty, and is then returned as ``None``. Rows empty in every given
    range are skipped; ``kept_rows`` lists the 1-based range rows that were kept. ``limit``,
    ``(most, noun)``, bounds the kept rows (e.g. ``(1000, "points")``).
    """
    opt = set(optional)
    lists: Dict[str, List[Any]] = {}
    first = None
    for name, grid in named:
        if grid is None:
            if name in opt:
                continue
            raise CellMessage(f"{name} is required")
        cells = _cells(name, grid)
        if name in opt and all(_is_empty(v) for v in cells):
            continue
        if first is None:
            first = (name, len(cells))
        elif len(cells) != first[1]:
            raise CellMessage(f"{name} has {len(cells)} cells but {first[0]} has {first[1]}")
        lists[name] = cells
    if first is None:
        return {name: None for name, _ in named}, []
    n = first[1]
    if all(set(map(type, c)) == _FLOAT_ONLY for c in lists.values()):  # the common case, at C speed
        _within(first[0], n, limit)
        out_fast: Dict[str, Any] = {name: None for name, _ in named}
        out_fast.update(lists)
        return out_fast, list(range(1, n + 1))
    kept = [i for i in range(n) if not all(_is_empty(c[i]) for c in lists.values())]
    if not kept:
        raise CellMessage(f"{first[0]} has no values (all {n} rows are empty)")
    _within(first[0], len(kept), limit)
    out: Dict[str, Any] = {name: None for name, _ in named}
    for name, cells in lists.items():
        vals = []
        for i in kept:
            v = cells[i]
            if isinstance(v, float):
                vals.append(v)
            elif isinstance(v, str) and v.startswith(MARKER):
                raise _passed_on(name, v)
            elif _is_empty(v):
                raise CellMessage(f"row {i + 1} of {name} is empty")
            elif isinstance(v, (int, bool)):
                vals.append(float(v))
            else:
                raise CellMessage(f"row {i + 1} of {name} is text {v!r}, not a number")
        out[name] = vals
    return out, [i + 1 for i in kept]


def _within(name: str, count: int, limit: Optional[Tuple[int, str]]) -> None:
    """Refuse more than ``limit = (most, noun)`` rows with values in the argument ``name``.

    Raises
    ------
    CellMessage
        ``"x has 1001 points; at most 1000 points in one call ..."``.
    """
    if limit is not None and count > limit[0]:
        raise CellMessage(f"{name} has {count} {limit[1]}; at most {limit[0]} {limit[1]} in one call (a bound that "
                          "keeps every cell fast)")


def whole(name: str, v: Any, default: float, low: int, high: int, zero_is_default: bool = False) -> int:
    """A count argument: a whole number from ``low`` to ``high``.

    Parameters
    ----------
    name : str
        The argument's name, for the message.
    v : Any
        The argument as delivered.
    default : float
        The value when the argument is omitted.
    low, high : int
        The bounds, both allowed.
    zero_is_default : bool
        Read 0 as omitted (a reference to one empty cell arrives as 0.0).

    Returns
    -------
    int
        The count.

    Raises
    ------
    CellMessage
        Not a number, not whole, or outside ``low``..``high``.
    """
    n = number(name, v, default)
    if zero_is_default and n == 0.0:
        n = default
    if not (low <= n <= high and n == int(n)):
        raise CellMessage(f"{name} must be a whole number from {low} to {high}, got {n:g}")
    return int(n)


def table_range(name: str, grid: Any) -> Any:
    """A table argument of the RD.WORKBOOK.* functions, unchanged, once its size is within the bound.

    Parameters
    ----------
    name : str
        The argument's name, for the message.
    grid : Any
        The range as delivered (rows of cells).

    Returns
    -------
    Any
        ``grid`` itself.

    Raises
    ------
    CellMessage
        More than :data:`MAX_TABLE_CELLS` cells (rows x columns).
    """
    if isinstance(grid, tuple) and grid:
        rows, cols = len(grid), len(grid[0])
        if rows * cols > MAX_TABLE_CELLS:
            raise CellMessage(f"{name} is a range of {rows} x {cols} = {rows * cols} cells; at most "
                              f"{MAX_TABLE_CELLS} cells per table (the template's largest table has 2057)")
    return grid


def _one(name: str, grid: Tuple[Tuple[Any, ...], ...]) -> Any:
    if len(grid) == 1 and len(grid[0]) == 1:
        return grid[0][0]
    cells = _cells(name, grid)
    if len(cells) != 1:
        raise CellMessage(f"{name} must be a single cell, got {len(cells)} cells")
    return cells[0]


def number(name: str, v: Any, default: Optional[float] = None) -> float:
    """One number from a cell or typed value; ``default`` when omitted or empty (else required)."""
    if type(v) is tuple:
        v = _one(name, v)
    if type(v) is float:
        return v
    if _is_empty(v):
        if default is None:
            raise CellMessage(f"{name} is required")
        return default
    if isinstance(v, str):
        if v.startswith(MARKER):
            raise _passed_on(name, v)
        raise CellMessage(f"{name} is text {v!r}, not a number")
    if isinstance(v, (int, bool)):
        return float(v)
    raise CellMessage(f"{name} is not a number: {v!r}")


def text(name: str, v: Any, default: Optional[str] = None) -> str:
    """One text value (trimmed, lower case); ``default`` when omitted or empty (else required)."""
    if type(v) is tuple:
        v = _one(name, v)
    if type(v) is str and v and v[0] != MARKER[0]:
        return v.strip().lower()
    if _is_empty(v) or (not isinstance(v, str) and v == 0.0):
        # a reference to one empty cell arrives as 0.0 (LibreOffice 7.4): no text option is a number
        if default is None:
            # LibreOffice passes a typed 0 the same way: name both, never claim the cell is empty
            raise CellMessage(f"{name} is required: its cell is empty or holds 0 (type the text it asks for)")
        return default
    if isinstance(v, str):
        if v.startswith(MARKER):
            raise _passed_on(name, v)
        return v.strip().lower()
    raise CellMessage(f"{name} must be text, got the number {v!r}")


def flag(name: str, v: Any, default: bool = False) -> bool:
    """A TRUE/FALSE cell (TRUE arrives as 1.0); also accepts the words true/false, yes/no."""
    if type(v) is tuple:
        v = _one(name, v)
    if _is_empty(v):
        return default
    if isinstance(v, (float, int, bool)):
        return bool(v)
    if isinstance(v, str):
        if v.startswith(MARKER):
            raise _passed_on(name, v)
        w = v.strip().lower()
        if w in ("true", "yes", "1"):
            return True
        if w in ("false", "no", "0"):
            return False
    raise CellMessage(f"{name} must be TRUE or FALSE, got {v!r}")


# --------------------------------------------------------------------------------------------
# Python values -> cells
# --------------------------------------------------------------------------------------------
def cell(v: Any, why_undefined: str = "undefined") -> Any:
    """A value a cell can show: plain float, or the reason when the engine says None."""
    if v is None:
        return MARKER + why_undefined
    if isinstance(v, str):
        return v
    return float(v)


def row(*values: Any) -> Tuple[Tuple[Any, ...]]:
    return (tuple(values),)


def call(fn: Callable, rowmap: Optional[List[int]], *args: Any, **kwargs: Any) -> Any:
    """Call the engine; attach the range-row map to an InputError so the message names the range row."""
    try:
        return fn(*args, **kwargs)
    except Exception as exc:
        if rowmap is not None and getattr(exc, "row", None) is not None:
            exc.rowmap = rowmap  # type: ignore[attr-defined]
        raise


def input_cells(*args: Any) -> int:
    """Cells in the arguments as delivered.

    Parameters
    ----------
    *args : Any
        Arguments as LibreOffice delivers them.

    Returns
    -------
    int
        A range counts rows x columns, any other value 1.
    """
    n = 0
    for a in args:
        n += len(a) * len(a[0]) if type(a) is tuple and a and type(a[0]) is tuple else 1
    return n


class _Cache:
    """Results by inputs, so accessor cells reading the same fit reuse it (first in, first out).

    The keys are the inputs as delivered, so the cache also bounds the input cells it holds
    (``max_cells``): the oldest entries go first, and inputs larger than a quarter of it are not kept.
    """

    def __init__(self, size: int = 256, max_cells: int = CACHE_MAX_CELLS) -> None:
        self.size = size
        self.max_cells = max_cells
        self.cells = 0
        self.data: OrderedDict[Any, Any] = OrderedDict()
        self.sizes: Dict[Any, int] = {}

    def hit(self, key: Any) -> Any:
        """The cached result (or raise the cached error); KeyError when absent."""
        ok, value = self.data[key]
        if ok:
            return value
        raise value

    def get(self, key: Any, make: Callable[[], Any], cells: int = 1) -> Any:
        """The cached result of ``key`` or ``make()`` (``cells``: input cells the key holds)."""
        try:
            hit = self.data[key]
        except KeyError:
            try:
                hit = (True, make())
            except Exception as exc:  # a failing fit fails every accessor the same way, once
                hit = (False, exc)
            if cells <= self.max_cells // 4:
                self.data[key] = hit
                self.sizes[key] = cells
                self.cells += cells
                while self.data and (len(self.data) > self.size or self.cells > self.max_cells):
                    old, _ = self.data.popitem(last=False)
                    self.cells -= self.sizes.pop(old, 0)
        if hit[0]:
            return hit[1]
        raise hit[1]

    def clear(self) -> None:
        """Forget every entry."""
        self.data.clear()
        self.sizes.clear()
        self.cells = 0


FIT_CACHE = _Cache()


# --------------------------------------------------------------------------------------------
# meta
# --------------------------------------------------------------------------------------------
def rdVersion() -> str:
    """RatioDesk version (no engine import: this works even without numpy)."""
    return VERSION


def rdEcho(value: Any = None) -> Any:
    """The argument unchanged (the bridge's speed floor)."""
    if value is None:
        return MARKER + "value is required"
    if isinstance(value, tuple):
        return value[0][0] if value and value[0] else ""
    return value


def _built_for() -> str:
    if not BUILD["VENDOR"]:
        return "any platform; uses the numpy of LibreOffice's Python"
    return (f"Python {BUILD['PYTHON']} on {_targets.platform_label(str(BUILD['PLATFORM']))}, with numpy "
            f"{BUILD['NUMPY']} inside (used only when LibreOffice's Python has none)")


def diagnostics() -> Tuple[Tuple[str, str], ...]:
    """(label, value) rows describing this Python, its numpy, the engine and this build.

    Tries to load the engine (as the first real cell would), but never raises: a missing numpy or
    engine is reported in its row, and the last row says what to do (``ok`` when nothing).
    """
    rows: List[Tuple[str, str]] = []

    def add(label: str, value: Callable[[], Any]) -> None:
        try:
            v = value()
            rows.append((label, "" if v is None else str(v)))
        except Exception as exc:  # a diagnostics row never breaks the others
            rows.append((label, MARKER + f"unknown ({type(exc).__name__}: {exc})"))

    problem: Optional[str] = None
    try:
        _load_engine()
    except _EngineMissing as exc:
        problem = str(exc)
    except Exception as exc:  # pragma: no cover - _load_engine turns everything into _EngineMissing
        problem = MARKER + f"{type(exc).__name__}: {exc}"
    np_mod = _engine_state["numpy"]
    add("ratiodesk", lambda: VERSION)
    add("build_target", lambda: BUILD["TARGET"])
    add("built_for", _built_for)
    add("python", platform.python_version)
    add("python_executable", lambda: sys.executable or "(none: Python embedded in LibreOffice)")
    add("python_prefix", lambda: sys.prefix)
    add("platform", lambda: f"{_targets.running_platform()} ({platform.platform()})")
    if np_mod is not None:
        add("numpy", lambda: np_mod.__version__)
        add("numpy_path", lambda: os.path.dirname(np_mod.__file__))
        add("numpy_source", lambda: _engine_state["numpy_source"])
    else:
        add("numpy", lambda: MARKER + "not loaded: " + (_engine_state["numpy_problem"] or problem or "")[len(MARKER):])
        add("numpy_path", lambda: "")
        add("numpy_source", lambda: "")
    add("engine", lambda: (VERSION + f" ({_engine_state['package']})") if _engine_state["package"] else problem)
    add("oxt_for_this_python", lambda: _oxt_for_here() or "none: no RatioDesk package brings numpy for it")
    add("log", lambda: str(LOG_PATH))
    add("status", lambda: problem or "ok")
    return tuple(rows)


@cell_function(array=True)
def rdDiagnostics() -> Any:
    """What RatioDesk runs on (works without numpy): label and value rows."""
    return diagnostics()


# --------------------------------------------------------------------------------------------
# isochron
# --------------------------------------------------------------------------------------------
_FIT_NAMES = ("x", "sx", "y", "sy", "rho")


def fit(x: Any, sx: Any, y: Any, sy: Any, rho: Any, treatment: Any, anchor: Any = None,
        anchorSigma: Any = None) -> Any:
    """The engine's isochron fit of the cells (cached by the cells themselves: tuples are hashable)."""
    raw = (x, sx, y, sy, rho, treatment, anchor, anchorSigma)
    try:
        return FIT_CACHE.hit(raw)
    except KeyError:
        pass
    except TypeError:  # an unhashable argument: no caching
        raw = None
    cols, kept = columns(list(zip(_FIT_NAMES, (x, sx, y, sy, rho))), optional=("rho",),
                         limit=(MAX_ISOCHRON_POINTS, "points"))
    tr = text("treatment", treatment, "analytical")
    anc = None
    if anchor is not None or anchorSigma is not None:
        anc = (number("anchor", anchor), number("anchorSigma", anchorSigma))
    reg = engine("regression")
    make = lambda: call(reg.fit_isochron, kept, cols["x"], cols["sx"], cols["y"], cols["sy"],  # noqa: E731
                        cols["rho"], treatment=tr, anchor=anc)
    return make() if raw is None else FIT_CACHE.get(raw, make, input_cells(*raw))


_N2 = "undefined for 2 points (no degrees of freedom)"

#: (label, how to read it off an IsochronFit, why it may be undefined) — the rows of RD.ISOCHRON.
FIT_BLOCK: Tuple[Tuple[str, Callable[[Any], Any], str], ...] = (
    ("slope", lambda f: f.slope, ""),
    ("slope_1s", lambda f: f.slope_sigma_1s, ""),
    ("intercept", lambda f: f.intercept, ""),
    ("intercept_1s", lambda f: f.intercept_sigma_1s, ""),
    ("rho", lambda f: f.rho_slope_intercept, ""),
    ("mswd", lambda f: f.mswd, _N2),
    ("p", lambda f: f.p_value, _N2),
    ("mswd_low_95", lambda f: f.mswd_limits_95[0] if f.mswd_limits_95 else None, _N2),
    ("mswd_high_95", lambda f: f.mswd_limits_95[1] if f.mswd_limits_95 else None, _N2),
    ("n", lambda f: f.n, ""),
    ("dof", lambda f: f.dof, ""),
    ("slope_95", lambda f: f.slope_sigma_95_expanded, _N2),
    ("intercept_95", lambda f: f.intercept_sigma_95_expanded, _N2),
    ("excess_sy_1s", lambda f: f.excess_sigma_y_1s, ""),
    ("sigma_scale", lambda f: f.sigma_scale, ""),
    ("treatment", lambda f: f.treatment, ""),
)
_FIT_FIELDS = {label: (get, why) for label, get, why in FIT_BLOCK}


@cell_function(array=True)
def rdIsochronBlock(x: Any, sx: Any, y: Any, sy: Any, rho: Any = None, treatment: Any = None,
                    anchor: Any = None, anchorSigma: Any = None) -> Any:
    f = fit(x, sx, y, sy, rho, treatment, anchor, anchorSigma)
    return tuple((label, cell(get(f), why or "undefined")) for label, get, why in FIT_BLOCK)


@cell_function(array=True)
def rdIsochronSlope(x: Any, sx: Any, y: Any, sy: Any, rho: Any = None, treatment: Any = None,
                    anchor: Any = None, anchorSigma: Any = None) -> Any:
    f = fit(x, sx, y, sy, rho, treatment, anchor, anchorSigma)
    return row(cell(f.slope), cell(f.slope_sigma_1s))


@cell_function(array=True)
def rdIsochronIntercept(x: Any, sx: Any, y: Any, sy: Any, rho: Any = None, treatment: Any = None,
                    anchor: Any = None, anchorSigma: Any = None) -> Any:
    f = fit(x, sx, y, sy, rho, treatment, anchor, anchorSigma)
    return row(cell(f.intercept), cell(f.intercept_sigma_1s))


@cell_function()
def rdIsochronMswd(x: Any, sx: Any, y: Any, sy: Any, rho: Any = None, treatment: Any = None, anchor: Any = None,
                   anchorSigma: Any = None) -> Any:
    return cell(fit(x, sx, y, sy, rho, treatment, anchor, anchorSigma).mswd, "MSWD is " + _N2)


@cell_function()
def rdIsochronValue(quantity: Any, x: Any, sx: Any, y: Any, sy: Any, rho: Any = None, treatment: Any = None,
                    anchor: Any = None, anchorSigma: Any = None) -> Any:
    q = text("quantity", quantity)
    if q not in _FIT_FIELDS:
        raise CellMessage(f"quantity {q!r} is not one of {', '.join(_FIT_FIELDS)}")
    get, why = _FIT_FIELDS[q]
    return cell(get(fit(x, sx, y, sy, rho, treatment, anchor, anchorSigma)), f"{q} is {why or 'undefined'}")


# --------------------------------------------------------------------------------------------
# ages
# --------------------------------------------------------------------------------------------
_DEFAULT_REF: List[Any] = []


def reference(refset: Any) -> Any:
    """The engine's reference set named in the cell (default set when empty)."""
    if refset is None and _DEFAULT_REF:
        return _DEFAULT_REF[0]
    name = text("refset", refset, "")
    ref = engine("constants").reference_set(name or None)
    if refset is None:
        _DEFAULT_REF.append(ref)
    return ref


@cell_function(array=True)
def rdAgeIsochron(x: Any, sx: Any, y: Any, sy: Any, system: Any, rho: Any = None, treatment: Any = None,
                  refset: Any = None, anchor: Any = None, anchorSigma: Any = None) -> Any:
    f = fit(x, sx, y, sy, rho, treatment, anchor, anchorSigma)
    return _age_row(engine("ages").isochron_age(f, text("system", system), reference(refset)))


def _age_row(a: Any) -> Any:
    return row(cell(a.age_ma), cell(a.age_sigma_1s_ma), cell(a.age_sigma_1s_ma_with_lambda), cell(a.initial),
               cell(a.initial_sigma_1s))


def point(name: str, grid: Any) -> List[float]:
    """x, sx, y, sy, rho of one point from one row (or column) of 4 or 5 cells (rho empty: 0)."""
    cells_ = _cells(name, grid)
    if len(cells_) not in (4, 5):
        raise CellMessage(f"{name} must be 4 or 5 cells (x, sx, y, sy, rho), got {len(cells_)}")
    out = [number(f"{part} of {name}", v) for part, v in zip(("x", "sx", "y", "sy"), cells_)]
    out.append(number(f"rho of {name}", cells_[4], 0.0) if len(cells_) == 5 else 0.0)
    return out


@cell_function(array=True)
def rdAgeTwoPoint(point1: Any, point2: Any, system: Any, refset: Any = None) -> Any:
    x1, sx1, y1, sy1, r1 = point("point1", point1)
    x2, sx2, y2, sy2, r2 = point("point2", point2)
    return _age_row(engine("ages").two_point_age(x1, sx1, y1, sy1, x2, sx2, y2, sy2, text("system", system),
                                                 reference(refset), rho1=r1, rho2=r2))


@cell_function(array=True, rename={"daughter_ratio": "daughter", "daughter_sigma_1s": "daughterSigma",
                                   "parent_ratio": "parent", "parent_sigma_1s": "parentSigma", "t_ma": "tMa"})
def rdAgeModel(daughter: Any, daughterSigma: Any, parent: Any, parentSigma: Any, system: Any, reservoir: Any = None,
               rho: Any = None, refset: Any = None) -> Any:
    m = engine("ages").model_age(number("daughter", daughter), number("daughterSigma", daughterSigma),
                                 number("parent", parent), number("parentSigma", parentSigma), text("system", system),
                                 text("reservoir", reservoir, "chur"), reference(refset), number("rho", rho, 0.0))
    check = "ok" if not m.flags else MARKER + "; ".join(m.flags)
    return row(cell(m.age_ma), cell(m.age_sigma_1s_ma), check)


@cell_function(rename={"daughter_ratio": "daughter", "parent_ratio": "parent", "t_ma": "tMa"})
def rdInitialRatio(daughter: Any, parent: Any, tMa: Any, system: Any, refset: Any = None) -> Any:
    return cell(engine("ages").initial_ratio(number("daughter", daughter), number("parent", parent),
                                             number("tMa", tMa), text("system", system), reference(refset)))


@cell_function(array=True, rename={"daughter_ratio": "daughter", "daughter_sigma_1s": "daughterSigma",
                                   "parent_ratio": "parent", "parent_sigma_1s": "parentSigma", "t_ma": "tMa"})
def rdEpsilon(daughter: Any, daughterSigma: Any, parent: Any, tMa: Any, system: Any, parentSigma: Any = None,
              rho: Any = None, refset: Any = None, withReference: Any = None) -> Any:
    e = engine("ages").epsilon(number("daughter", daughter), number("daughterSigma", daughterSigma),
                               number("parent", parent), number("tMa", tMa), text("system", system),
                               reference(refset), number("parentSigma", parentSigma, 0.0), number("rho", rho, 0.0),
                               include_reference=flag("withReference", withReference))
    return row(cell(e.value), cell(e.sigma_1s))


@cell_function()
def rdAgeSlope(slope: Any, system: Any, refset: Any = None) -> Any:
    b = number("slope", slope)
    ages = engine("ages")
    key = engine("systems").get_system(text("system", system)).decay_key
    years = ages.age_from_slope(b, reference(refset).decay_constant(key).value)
    return cell(years / YEARS_PER_MA)  # unit conversion only: the engine's slope front returns years


# --------------------------------------------------------------------------------------------
# weighted mean
# --------------------------------------------------------------------------------------------
@cell_function(array=True, rename={"sigma_1s": "sigma"})
def rdMeanWeighted(values: Any, sigma: Any, external: Any = None) -> Any:
    cols, kept = columns([("values", values), ("sigma", sigma)], limit=(MAX_VALUES, "values"))
    m = call(engine("regression").weighted_mean, kept, cols["values"], cols["sigma"],
             external_scatter=flag("external", external))
    return row(cell(m.mean), cell(m.mean_sigma_1s), cell(m.mswd, "MSWD is undefined for 1 value"),
               cell(m.p_value, "p is undefined for 1 value"))


# --------------------------------------------------------------------------------------------
# error ellipse
# --------------------------------------------------------------------------------------------
@cell_function(array=True, rename={"n_points": "points"})
def rdEllipse(x: Any, sx: Any, y: Any, sy: Any, rho: Any = None, points: Any = None, confidence: Any = None) -> Any:
    n = whole("points", points, 48.0, 3, MAX_ELLIPSE_POINTS)
    xs, ys = engine("regression").ellipse_points(number("x", x), number("sx", sx), number("y", y), number("sy", sy),
                                                 number("rho", rho, 0.0), n_points=n,
                                                 confidence=number("confidence", confidence, 0.95))
    return tuple((float(a), float(b)) for a, b in zip(xs.tolist(), ys.tolist()))


@cell_function(array=True, rename={"n_points": "points"})
def rdDeviationEllipse(x: Any, sx: Any, y: Any, sy: Any, rho: Any, slope: Any, intercept: Any, points: Any = None,
                       confidence: Any = None) -> Any:
    n = whole("points", points, 48.0, 3, MAX_ELLIPSE_POINTS)
    xs, ds = engine("regression").deviation_points(number("x", x), number("sx", sx), number("y", y),
                                                   number("sy", sy), number("rho", rho, 0.0), number("slope", slope),
                                                   number("intercept", intercept), n_points=n,
                                                   confidence=number("confidence", confidence, 0.95))
    return tuple((float(a), float(b)) for a, b in zip(xs.tolist(), ds.tolist()))


# --------------------------------------------------------------------------------------------
# shared readers for part-2 inputs
# --------------------------------------------------------------------------------------------
def names_values(names_arg: str, names: Any, values_arg: str, values: Any,
                 sigmas_arg: Optional[str] = None, sigmas: Any = None) -> Tuple[Dict[str, float], Optional[Dict]]:
    """Named ratios from a range of names and a parallel range of values (and optional sigmas)."""
    labels = _cells(names_arg, names)
    if len(labels) != len(_cells(values_arg, values)):
        raise CellMessage(f"{names_arg} has {len(labels)} cells but {values_arg} has "
                          f"{len(_cells(values_arg, values))}")
    nums, kept = columns([(values_arg, values)] + ([(sigmas_arg, sigmas)] if sigmas_arg else []),
                         optional=(sigmas_arg,) if sigmas_arg else ())
    keep = [i - 1 for i in kept]
    _within(names_arg, len(keep), (MAX_NAMED_RATIOS, "ratios"))
    out: Dict[str, float] = {}
    first_row: Dict[str, int] = {}
    sig: Optional[Dict[str, float]] = {} if sigmas_arg and nums.get(sigmas_arg) is not None else None
    for j, i in enumerate(keep):
        label = labels[i]
        if isinstance(label, str) and label.startswith(MARKER):
            raise _passed_on(names_arg, label)
        if not isinstance(label, str) or not label.strip():
            raise CellMessage(f"row {i + 1} of {names_arg} must be a ratio name such as 143Nd/144Nd")
        name = label.strip()
        if name in first_row:
            raise CellMessage(f"row {i + 1} of {names_arg} repeats {name!r} (first on row {first_row[name]}): "
                              "give each ratio once")
        first_row[name] = i + 1
        out[name] = nums[values_arg][j]
        if sig is not None:
            sig[name] = nums[sigmas_arg][j]
    return out, sig


_ISOTOPE = re.compile(r"^\s*(\d+)([A-Z][a-z]?)\s*$")
SPIKE_CACHE = _Cache(64)


def spike(name: str, grid: Any) -> Any:
    """A spike record from a 3-row block: isotope names; abundances; spike isotope, umol/g, 1 sigma."""
    try:
        return SPIKE_CACHE.hit(grid)
    except KeyError:
        pass
    except TypeError:
        raise CellMessage(f"{name} must be a range of 3 rows") from None
    if not isinstance(grid, tuple) or len(grid) != 3:
        raise CellMessage(f"{name} must be 3 rows: isotope names; abundances; spike isotope, umol/g, 1 sigma")
    isotopes, abundances = [], []
    for j, (iso, ab) in enumerate(zip(grid[0], grid[1])):
        if _is_empty(iso) and _is_empty(ab):
            continue
        if len(isotopes) == MAX_SPIKE_ISOTOPES:
            raise CellMessage(f"column {j + 1} of {name}: more than {MAX_SPIKE_ISOTOPES} isotope columns (one "
                              "column per isotope of the element)")
        if not isinstance(iso, str) or not _ISOTOPE.match(iso):
            raise CellMessage(f"column {j + 1} of {name}, row 1: {iso!r} is not an isotope name such as 150Nd")
        isotopes.append(iso.strip())
        abundances.append(number(f"abundance of {iso.strip()} in {name}", ab))
    third = list(grid[2]) + ["", "", ""]
    spike_iso = text(f"spike isotope (row 3, column 1 of {name})", third[0])
    m = _ISOTOPE.match(third[0]) if isinstance(third[0], str) else None
    if not m:
        raise CellMessage(f"row 3, column 1 of {name} must name the spike isotope, e.g. 150Nd")
    conc = number(f"concentration (row 3, column 2 of {name})", third[1])
    conc_s = number(f"1 sigma (row 3, column 3 of {name})", third[2], 0.0)
    del spike_iso
    return SPIKE_CACHE.get(grid, lambda: engine("dilution").make_spike(
        m.group(2), isotopes, abundances, third[0].strip(), conc, conc_s, label=name), input_cells(grid))


# --------------------------------------------------------------------------------------------
# cycles, interference, mass bias
# --------------------------------------------------------------------------------------------
@cell_function(array=True, rename={"values": "cycles", "reject_k": "rejectK", "min_kept": "minKept"})
def rdCycles(cycles: Any, rejectK: Any = None, minKept: Any = None) -> Any:
    cols, kept = columns([("cycles", cycles)], limit=(MAX_VALUES, "cycles"))
    if isinstance(rejectK, str) and rejectK.strip().lower() == "none":
        k: Optional[float] = None
    else:
        k = number("rejectK", rejectK, 3.5) or 3.5  # an empty cell arrives as 0: the default (robust rule)
    n_min = whole("minKept", minKept, 3.0, 2, MAX_VALUES, zero_is_default=True)  # empty cell: 0 -> the default
    st = call(engine("cycles").cycle_stats, kept, cols["cycles"], reject_k=k, min_kept=n_min)
    return row(cell(st.mean), cell(st.sem_1s), cell(st.sd_1s), cell(st.n_kept), cell(st.n_rejected))


@cell_function(array=True, rename={"monitor_isotope": "monitorIsotope", "bias_factor": "biasFactor",
                                   "true_ratio": "trueRatio"})
def rdInterferenceStrip(total: Any, monitor: Any, interferent: Any, monitorIsotope: Any, biasFactor: Any = None,
                        law: Any = None, trueRatio: Any = None) -> Any:
    tr = None if trueRatio is None or trueRatio == 0.0 else number("trueRatio", trueRatio)
    st = engine("interference").strip_isobar(
        number("total", total), number("monitor", monitor), _isotope_text("interferent", interferent),
        _isotope_text("monitorIsotope", monitorIsotope), bias_factor=number("biasFactor", biasFactor, 0.0),
        law=text("law", law, "exponential"), true_ratio=tr)
    return row(cell(st.corrected), cell(st.correction), cell(st.correction_rel))


def _isotope_text(name: str, v: Any) -> str:
    """Isotope and ratio names keep their case (144Sm, 146Nd/144Nd)."""
    if type(v) is tuple:
        v = _one(name, v)
    if isinstance(v, str) and v.startswith(MARKER):
        raise _passed_on(name, v)
    if not isinstance(v, str) or not v.strip():
        raise CellMessage(f"{name} is required: a name such as 144Sm or 146Nd/144Nd")
    return v.strip()


def _optional_number(name: str, v: Any) -> Optional[float]:
    """None when omitted or pointing at an empty cell (0.0), else the number."""
    return None if v is None or v == "" or (type(v) is float and v == 0.0) else number(name, v)


@cell_function(rename={"measured_norm": "measuredNorm", "norm_ratio": "normRatio", "true_norm": "trueNorm",
                       "ratio": "normRatio"})
def rdMassbiasFactor(measuredNorm: Any, normRatio: Any, law: Any = None, trueNorm: Any = None) -> Any:
    return cell(engine("massbias").bias_factor_from(
        number("measuredNorm", measuredNorm), _isotope_text("normRatio", normRatio),
        true_norm=_optional_number("trueNorm", trueNorm), law=text("law", law, "exponential")))


@cell_function()
def rdMassbiasCorrect(measured: Any, ratio: Any, factor: Any, law: Any = None) -> Any:
    return cell(engine("massbias").correct_named(number("measured", measured), _isotope_text("ratio", ratio),
                                                 number("factor", factor), text("law", law, "exponential")))


@cell_function(rename={"measured_norm": "measuredNorm", "norm_ratio": "normRatio", "true_norm": "trueNorm"})
def rdMassbiasNormalise(measured: Any, ratio: Any, measuredNorm: Any, normRatio: Any, law: Any = None,
                        trueNorm: Any = None) -> Any:
    return cell(engine("massbias").normalise(
        number("measured", measured), _isotope_text("ratio", ratio), number("measuredNorm", measuredNorm),
        _isotope_text("normRatio", normRatio), true_norm=_optional_number("trueNorm", trueNorm),
        law=text("law", law, "exponential")))


# --------------------------------------------------------------------------------------------
# isotope dilution, blank, standards
# --------------------------------------------------------------------------------------------
_DIL = {"mix_ratio": "mixRatio", "sample_mass_g": "sampleMass", "spike_mass_g": "spikeMass",
        "bias_factor": "biasFactor", "norm_ratio": "normRatio", "measured": "values"}


@cell_function(rename=_DIL)
def rdDilutionConc(mixRatio: Any, ratio: Any, sampleMass: Any, spikeMass: Any, spike_: Any, biasFactor: Any = None,
                   law: Any = None) -> Any:
    return cell(engine("dilution").id_concentration(
        number("mixRatio", mixRatio), _isotope_text("ratio", ratio), number("sampleMass", sampleMass),
        number("spikeMass", spikeMass), spike("spike", spike_), bias_factor=number("biasFactor", biasFactor, 0.0),
        law=text("law", law, "exponential")))


@cell_function(array=True, rename=_DIL)
def rdDilutionBlock(names: Any, values: Any, spike_: Any, sampleMass: Any, spikeMass: Any, normRatio: Any = None,
                    biasFactor: Any = None, law: Any = None) -> Any:
    measured, _ = names_values("names", names, "values", values)
    norm = None if normRatio is None or normRatio == 0.0 or normRatio == "" else _isotope_text("normRatio", normRatio)
    d = engine("dilution").isotope_dilution(
        measured, spike("spike", spike_), number("sampleMass", sampleMass), number("spikeMass", spikeMass),
        norm_ratio=norm, bias_factor=_optional_number("biasFactor", biasFactor), law=text("law", law, "exponential"))
    rows = [("conc_ug_g", cell(d.conc_ug_g)), ("conc_umol_g", cell(d.conc_umol_g)),
            ("ref_umol_g", cell(d.ref_umol_g)), ("bias_factor", cell(d.bias_factor)),
            ("magnification", cell(d.magnification)), ("magnification_min", cell(d.magnification_min)),
            ("poor_mix", "yes" if bool(d.poor_mix) else "no"), ("iterations", cell(d.iterations))]
    rows += [(name, cell(v)) for name, v in d.sample_ratios.items()]
    return tuple(rows)


@cell_function(array=True, rename={"total_umol": "totalUmol", "total_ratio": "totalRatio", "blank_umol": "blankUmol",
                                   "blank_ratio": "blankRatio", "total_sigma_1s": "totalSigma",
                                   "blank_sigma_1s": "blankSigma", "total_ratio_sigma_1s": "totalRatioSigma",
                                   "blank_ratio_sigma_1s": "blankRatioSigma"})
def rdBlankCorrect(totalUmol: Any, totalRatio: Any, blankUmol: Any, blankRatio: Any, totalSigma: Any = None,
                   blankSigma: Any = None, totalRatioSigma: Any = None, blankRatioSigma: Any = None) -> Any:
    b = engine("blank").blank_correct(
        number("totalUmol", totalUmol), number("totalRatio", totalRatio), number("blankUmol", blankUmol),
        number("blankRatio", blankRatio), total_sigma_1s=number("totalSigma", totalSigma, 0.0),
        blank_sigma_1s=number("blankSigma", blankSigma, 0.0),
        total_ratio_sigma_1s=number("totalRatioSigma", totalRatioSigma, 0.0),
        blank_ratio_sigma_1s=number("blankRatioSigma", blankRatioSigma, 0.0))
    return row(cell(b.amount_umol), cell(b.amount_sigma_1s), cell(b.ratio), cell(b.ratio_sigma_1s),
               cell(b.rho_amount_ratio), cell(b.blank_share))


@cell_function(rename={"blank_ng": "blankNg", "reference_isotope": "isotope"})
def rdBlankUmol(blankNg: Any, element: Any, isotope: Any) -> Any:
    return cell(engine("blank").blank_umol(number("blankNg", blankNg), _isotope_text("element", element),
                                           _isotope_text("isotope", isotope)))


STANDARD_CACHE = _Cache(64)


def standard(runs: Any, accepted: Any, material: Any, ratio: Any, acceptedSigma: Any) -> Any:
    """The engine's session factor from the runs (cached by the cells)."""
    raw = (runs, accepted, material, ratio, acceptedSigma)
    try:
        return STANDARD_CACHE.hit(raw)
    except KeyError:
        pass
    cols, kept = columns([("runs", runs)], limit=(MAX_VALUES, "runs"))
    acc = _optional_number("accepted", accepted)
    mat = None if material is None or material == 0.0 or material == "" else _isotope_text("material", material)
    rat = None if ratio is None or ratio == 0.0 or ratio == "" else _isotope_text("ratio", ratio)
    acc_s = _optional_number("acceptedSigma", acceptedSigma)
    std = engine("standards")
    return STANDARD_CACHE.get(raw, lambda: call(std.standard_factor, kept, cols["runs"], acc, material=mat, ratio=rat,
                                                accepted_sigma_1s=acc_s), input_cells(*raw))


_STD = {"measured": "runs", "accepted_sigma_1s": "acceptedSigma", "sigma_1s": "sigma", "values": "value"}


@cell_function(array=True, rename=_STD)
def rdStandardFactor(runs: Any, accepted: Any = None, material: Any = None, ratio: Any = None,
                     acceptedSigma: Any = None) -> Any:
    f = standard(runs, accepted, material, ratio, acceptedSigma)
    return row(cell(f.factor), cell(f.factor_sigma_1s_random), cell(f.factor_sigma_1s_systematic), cell(f.n),
               cell(f.mean), cell(f.reproducibility_rel_1s))


@cell_function(array=True, rename=_STD)
def rdStandardApply(value: Any, sigma: Any, runs: Any, accepted: Any = None, material: Any = None, ratio: Any = None,
                    acceptedSigma: Any = None, reproducibility: Any = None) -> Any:
    f = standard(runs, accepted, material, ratio, acceptedSigma)
    v, s_r, s_s = engine("standards").apply_standard(number("value", value), number("sigma", sigma), f,
                                                     add_reproducibility=flag("reproducibility", reproducibility,
                                                                              True))
    return row(cell(v), cell(s_r), cell(s_s))


# --------------------------------------------------------------------------------------------
# one spiked analysis with propagated sigma and rho
# --------------------------------------------------------------------------------------------
_ANALYSIS_NAMES = {"parent_mix": "parentValues", "daughter_mix": "daughterValues", "sample_mass_g": "sampleMass",
                   "spike_mass_g": "spikeMass", "parent_spike": "parentSpike", "daughter_spike": "daughterSpike",
                   "parent_norm_ratio": "parentNorm", "parent_bias_factor": "parentBias",
                   "parent_blank_ng": "parentBlankNg", "daughter_blank_ng": "daughterBlankNg",
                   "parent_mix_sigma_1s": "parentSigmas", "daughter_mix_sigma_1s": "daughterSigmas"}


@cell_function(array=True, rename=_ANALYSIS_NAMES)
def rdAnalysisBlock(system: Any, parentNames: Any, parentValues: Any, daughterNames: Any, daughterValues: Any,
                    sampleMass: Any, spikeMass: Any, parentSpike: Any, daughterSpike: Any, parentSigmas: Any = None,
                    daughterSigmas: Any = None, parentNorm: Any = None, parentBias: Any = None,
                    parentBlankNg: Any = None, daughterBlankNg: Any = None) -> Any:
    r = analysis(system, parentNames, parentValues, daughterNames, daughterValues, sampleMass, spikeMass,
                 parentSpike, daughterSpike, parentSigmas, daughterSigmas, parentNorm, parentBias, parentBlankNg,
                 daughterBlankNg)
    rows = [(r.parent_ratio_name, cell(r.parent_ratio)), ("1s", cell(r.parent_ratio_sigma_1s)),
            (r.daughter_ratio_name, cell(r.daughter_ratio)), ("1s", cell(r.daughter_ratio_sigma_1s)),
            ("rho", cell(r.rho)), ("parent_ug_g", cell(r.parent_conc_ug_g)),
            ("parent_ug_g_1s", cell(r.parent_conc_sigma_1s)), ("daughter_ug_g", cell(r.daughter_conc_ug_g)),
            ("daughter_ug_g_1s", cell(r.daughter_conc_sigma_1s)), ("rho_random", cell(r.rho_random))]
    for kind, parts in (("random", r.sigma_1s_random), ("systematic", r.sigma_1s_systematic)):
        rows += [(f"{name} 1s {kind}", cell(v)) for name, v in parts.items()]
    rows.append(("poor_mix", ", ".join(r.poor_mix) if r.poor_mix else "no"))
    return tuple(rows)


@cell_function(array=True, rename=_ANALYSIS_NAMES)
def rdAnalysisRow(*args: Any) -> Any:
    r = analysis(*args)
    return row(cell(r.parent_ratio), cell(r.parent_ratio_sigma_1s), cell(r.daughter_ratio),
               cell(r.daughter_ratio_sigma_1s), cell(r.rho))


ANALYSIS_CACHE = _Cache(512)


def analysis(system: Any, parentNames: Any, parentValues: Any, daughterNames: Any, daughterValues: Any,
             sampleMass: Any, spikeMass: Any, parentSpike: Any, daughterSpike: Any, parentSigmas: Any = None,
             daughterSigmas: Any = None, parentNorm: Any = None, parentBias: Any = None,
             parentBlankNg: Any = None, daughterBlankNg: Any = None) -> Any:
    """The engine's reduction of one spiked analysis (cached by the cells, shared by block and row)."""
    raw = (system, parentNames, parentValues, daughterNames, daughterValues, sampleMass, spikeMass, parentSpike,
           daughterSpike, parentSigmas, daughterSigmas, parentNorm, parentBias, parentBlankNg, daughterBlankNg)
    try:
        return ANALYSIS_CACHE.hit(raw)
    except KeyError:
        pass
    pm, ps = names_values("parentNames", parentNames, "parentValues", parentValues, "parentSigmas",
                          parentSigmas if isinstance(parentSigmas, tuple) else None)
    dm, ds = names_values("daughterNames", daughterNames, "daughterValues", daughterValues, "daughterSigmas",
                          daughterSigmas if isinstance(daughterSigmas, tuple) else None)
    norm = None if parentNorm is None or parentNorm == 0.0 or parentNorm == "" else _isotope_text("parentNorm",
                                                                                                  parentNorm)
    args = (text("system", system), pm, dm, number("sampleMass", sampleMass), number("spikeMass", spikeMass),
            spike("parentSpike", parentSpike), spike("daughterSpike", daughterSpike))
    kw = dict(parent_mix_sigma_1s=ps, daughter_mix_sigma_1s=ds, parent_norm_ratio=norm,
              parent_bias_factor=_optional_number("parentBias", parentBias),
              parent_blank_ng=number("parentBlankNg", parentBlankNg, 0.0),
              daughter_blank_ng=number("daughterBlankNg", daughterBlankNg, 0.0))
    return ANALYSIS_CACHE.get(raw, lambda: engine("chain").reduce_spiked_analysis(*args, **kw), input_cells(*raw))


# --------------------------------------------------------------------------------------------
# the template workbook: the cells go to the engine as they arrive (it reads the tables itself)
# --------------------------------------------------------------------------------------------
@cell_function()
def rdWorkbookAnalysis(quantity: Any, analysis: Any, samples: Any, measured: Any, spikes: Any, standards: Any,
                       refValues: Any, runs: Any = None) -> Any:
    a = _one("analysis", analysis) if type(analysis) is tuple else analysis
    if isinstance(a, str) and a.startswith(MARKER):
        raise _passed_on("analysis", a)
    tables = [table_range(n, t) for n, t in (("samples", samples), ("measured", measured), ("spikes", spikes),
                                              ("standards", standards), ("refValues", refValues))]
    run_block = table_range("runs", runs) if type(runs) is tuple else None
    return cell(engine("workbook").analysis_value(text("quantity", quantity), "" if a is None else a, *tables,
                                                  runs=run_block))


@cell_function(array=True)
def rdWorkbookCycleRuns(cycles: Any, refValues: Any) -> Any:
    return engine("workbook").cycle_runs(table_range("cycles", cycles), table_range("refValues", refValues))


@cell_function(array=True)
def rdWorkbookCycleKept(cycles: Any, refValues: Any) -> Any:
    return engine("workbook").cycle_kept(table_range("cycles", cycles), table_range("refValues", refValues))


@cell_function()
def rdWorkbookStandard(quantity: Any, session: Any, material: Any, ratio: Any, measured: Any, standards: Any,
                       refValues: Any) -> Any:
    vals = [_one(n, v) if type(v) is tuple else v for n, v in
            (("session", session), ("material", material), ("ratio", ratio), ("measured", measured))]
    for n, v in zip(("session", "material", "ratio", "measured"), vals):
        if isinstance(v, str) and v.startswith(MARKER):
            raise _passed_on(n, v)
    ses, mat, rat, meas = ("" if v is None else v for v in vals)
    return cell(engine("workbook").standard_value(text("quantity", quantity), ses, mat, rat, meas,
                                                  table_range("standards", standards),
                                                  table_range("refValues", refValues)))


def _name_cell(name: str, v: Any) -> str:
    """A cell holding a name (an isochron group): text trimmed, a number as %g, empty as ''."""
    if type(v) is tuple:
        v = _one(name, v)
    if isinstance(v, str) and v.startswith(MARKER):
        raise _passed_on(name, v)
    if _is_empty(v):
        return ""
    return f"{v:g}" if isinstance(v, float) else str(v).strip()


@cell_function()
def rdWorkbookGroup(quantity: Any, group: Any, treatment: Any, samples: Any, results: Any, refValues: Any) -> Any:
    return cell(engine("workbook").group_value(text("quantity", quantity), _name_cell("group", group),
                                               text("treatment", treatment, ""), table_range("samples", samples),
                                               table_range("results", results), table_range("refValues", refValues)))


@cell_function(array=True)
def rdWorkbookGroupPoints(group: Any, samples: Any, results: Any) -> Any:
    return engine("workbook").group_points(_name_cell("group", group), table_range("samples", samples),
                                           table_range("results", results))


@cell_function(array=True)
def rdWorkbookGroupOutlines(kind: Any, group: Any, groups: Any, samples: Any, results: Any, refValues: Any) -> Any:
    return engine("workbook").group_outlines(text("kind", kind), _name_cell("group", group),
                                             table_range("groups", groups), table_range("samples", samples),
                                             table_range("results", results), table_range("refValues", refValues))


@cell_function()
def rdWorkbookGroupsUnlisted(groups: Any, samples: Any) -> Any:
    return cell(engine("workbook").unlisted_groups(table_range("groups", groups), table_range("samples", samples)))


@cell_function()
def rdWorkbookRunRatios(element: Any, spikeIsotope: Any = None) -> Any:
    return cell(engine("workbook").run_ratios(text("element", element), text("spikeIsotope", spikeIsotope, "")))


@cell_function()
def rdWorkbookIsochron(quantity: Any, system: Any, treatment: Any, selection: Any, results: Any,
                       refValues: Any) -> Any:
    return cell(engine("workbook").isochron_value(text("quantity", quantity), _isotope_text("system", system),
                                                  text("treatment", treatment, ""),
                                                  table_range("selection", selection),
                                                  table_range("results", results),
                                                  table_range("refValues", refValues)))
