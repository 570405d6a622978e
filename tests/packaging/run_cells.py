"""Call cell adapters of an unpacked RatioDesk extension in a bare Python; print JSON results.

    PYTHON [-I -S] run_cells.py PYTHONPATH CALLS OUT

``PYTHONPATH`` is the extension's ``pythonpath/`` folder (appended to sys.path, as LibreOffice
does); ``CALLS`` a file holding ``repr()`` of ``[(case id, method, args), ...]`` with the arguments
as LibreOffice delivers them; ``OUT`` receives JSON ``{"results": {id: cells}, "diagnostics":
[[label, value], ...], "numpy_before": spec origin or None, "sys_path_vendor": bool}``.
Standard library only, Python 3.8 syntax: it runs in the interpreter under test.
"""
import ast
import importlib.util
import json
import sys


def plain(v: object) -> object:
    """A cell result as JSON-able lists."""
    if isinstance(v, tuple):
        return [plain(x) for x in v]
    return v


def main() -> None:
    pythonpath, calls_file, out_file = sys.argv[1:4]
    spec = importlib.util.find_spec("numpy")
    before = None if spec is None else str(spec.origin or spec.submodule_search_locations)
    sys.path.append(pythonpath)
    from ratiodesk_calc import cells
    with open(calls_file, encoding="utf-8") as fh:
        calls = ast.literal_eval(fh.read())
    results = {}
    for case_id, method, args in calls:
        try:
            results[case_id] = plain(getattr(cells, method)(*args))
        except BaseException as exc:  # a cell function must never raise: record it for the test to fail
            results[case_id] = {"raised": f"{type(exc).__name__}: {exc}"}
    diag = [list(r) for r in cells.rdDiagnostics()]
    out = {"results": results, "diagnostics": diag, "numpy_before": before,
           "sys_path_vendor": any(p.endswith("ratiodesk_vendor") for p in sys.path)}
    with open(out_file, "w", encoding="utf-8") as fh:
        json.dump(out, fh)


if __name__ == "__main__":
    main()
