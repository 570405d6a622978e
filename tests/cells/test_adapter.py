"""Adapter behaviour beyond single cases: missing numpy, the fit cache, message travel."""
import subprocess
import sys
from pathlib import Path

import cells
from cases import FIT, MARK, RHO, as_delivered, col

MACROS = Path(cells.__file__).resolve().parent


def test_without_numpy_every_function_says_how_to_install(tmp_path):
    log = tmp_path / "addin.log"
    code = ("import sys; sys.modules['numpy'] = None; sys.modules['scipy'] = None; sys.path.insert(0, sys.argv[1]);"
            "import cells; g = ((1.0,), (2.0,), (3.0,)); s = ((0.1,),) * 3;"
            "print(repr(cells.rdIsochronMswd(g, s, g, s)));"
            "print(repr(cells.rdIsochronBlock(g, s, g, s)));"
            "print(repr(cells.rdVersion()))")
    env = {"RATIODESK_LOG": str(log)}
    out = subprocess.run([sys.executable, "-c", code, str(MACROS)], capture_output=True, text=True, env=env,
                         cwd=MACROS.parent)
    assert out.returncode == 0, out.stderr
    lines = out.stdout.strip().splitlines()
    assert lines[0] == repr(cells.NEEDS_NUMPY)
    assert "numpy" in lines[0] and "scipy" not in lines[0]      # the engine needs numpy only
    assert lines[1] == repr(((cells.NEEDS_NUMPY,),))
    assert lines[2] == repr(cells.VERSION)
    assert "import numpy failed" in log.read_text()


def test_accessors_reuse_one_fit(monkeypatch):
    reg = cells.engine("regression")
    calls = []
    real = reg.fit_isochron

    def counting(*a, **k):
        calls.append(1)
        return real(*a, **k)

    monkeypatch.setattr(reg, "fit_isochron", counting)
    cells.FIT_CACHE.clear()
    args = FIT + (col(RHO),)
    for m in ("rdIsochronBlock", "rdIsochronSlope", "rdIsochronIntercept", "rdIsochronMswd"):
        getattr(cells, m)(*as_delivered(m, args))
    cells.rdIsochronValue(*as_delivered("rdIsochronValue", (cells_literal("p"),) + args))
    assert len(calls) == 1
    cells.rdIsochronMswd(*as_delivered("rdIsochronMswd", FIT))  # different inputs (no rho): a new fit
    assert len(calls) == 2


def cells_literal(v):
    from cases import L
    return L(v)


def test_message_travels_through_a_chain():
    first = cells.rdMeanWeighted(((1.0,), (2.0,)), ((0.1,), (0.0,)))[0][0]
    assert first.startswith(MARK) and "row 2 of sigma" in first
    second = cells.rdIsochronMswd(((first,), (0.2,), (0.3,)), ((0.01,),) * 3, ((1.0,), (2.0,), (3.0,)), ((0.1,),) * 3)
    assert second == MARK + "from x: " + first[len(MARK):]


def test_results_are_plain_python_types():
    out = cells.rdIsochronBlock(*as_delivered("rdIsochronBlock", FIT))
    assert isinstance(out, tuple) and all(isinstance(r, tuple) for r in out)
    assert all(type(v) in (float, str) for r in out for v in r)
