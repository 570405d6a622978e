"""The RatioDesk UNO Calc add-in component: a thin shim over ``ratiodesk_calc.cells``.

Every method named in the table (``ratiodesk_calc.functions.FUNCTIONS``) is bound to the adapter
of the same name in ``cells``; the XAddIn methods answer from the same table. No math here.
Inside the .oxt, ``functions.py`` and ``cells.py`` live in ``pythonpath/ratiodesk_calc/`` and the
engine in ``pythonpath/ratiodesk_engine/`` (see macros/package.py).
"""
from __future__ import annotations

import os
import tempfile
import traceback

import unohelper
from com.sun.star.lang import XLocalizable, XServiceInfo, XServiceName
from com.sun.star.sheet import XAddIn

try:
    from org.ratiodesk import XCalcFunctions  # the interface from ratiodesk.rdb
    from ratiodesk_calc import cells, functions
except Exception:  # LibreOffice logs nothing here: write it down ourselves, then fail as before
    with open(os.path.join(tempfile.gettempdir(), "ratiodesk-calc-addin.log"), "a", encoding="utf-8") as _fh:
        _fh.write("RatioDesk add-in failed to load:\n" + traceback.format_exc())
    raise

_BY_METHOD = functions.BY_METHOD
_BY_DISPLAY = functions.BY_DISPLAY


class RatioDeskAddIn(unohelper.Base, XCalcFunctions, XAddIn, XServiceName, XServiceInfo, XLocalizable):
    def __init__(self, ctx: object) -> None:
        self.ctx = ctx
        self.locale = None

    # XAddIn (the API spells it "Funtion")
    def getProgrammaticFuntionName(self, display: str) -> str:
        f = _BY_DISPLAY.get(display.upper())
        return f.method if f else ""

    def getDisplayFunctionName(self, method: str) -> str:
        f = _BY_METHOD.get(method)
        return f.display if f else ""

    def getFunctionDescription(self, method: str) -> str:
        f = _BY_METHOD.get(method)
        return f.description if f else ""

    def getDisplayArgumentName(self, method: str, index: int) -> str:
        f = _BY_METHOD.get(method)
        return f.args[index].name if f and 0 <= index < len(f.args) else ""

    def getArgumentDescription(self, method: str, index: int) -> str:
        f = _BY_METHOD.get(method)
        return f.args[index].description if f and 0 <= index < len(f.args) else ""

    def getProgrammaticCategoryName(self, method: str) -> str:
        return functions.CATEGORY

    def getDisplayCategoryName(self, method: str) -> str:
        return functions.CATEGORY

    # XLocalizable
    def setLocale(self, locale: object) -> None:
        self.locale = locale

    def getLocale(self) -> object:
        return self.locale

    # XServiceName, XServiceInfo
    def getServiceName(self) -> str:
        return functions.SERVICE_NAME

    def getImplementationName(self) -> str:
        return functions.IMPLEMENTATION_NAME

    def supportsService(self, name: str) -> bool:
        return name in (functions.SERVICE_NAME, functions.ADDIN_SERVICE)

    def getSupportedServiceNames(self) -> tuple:
        return (functions.SERVICE_NAME, functions.ADDIN_SERVICE)


# The dispatch: each table method calls its adapter directly (no extra frame: the bridge's floor).
for _f in functions.FUNCTIONS:
    setattr(RatioDeskAddIn, _f.method, staticmethod(getattr(cells, _f.method)))

g_ImplementationHelper = unohelper.ImplementationHelper()
g_ImplementationHelper.addImplementation(RatioDeskAddIn, functions.IMPLEMENTATION_NAME,
                                         (functions.SERVICE_NAME, functions.ADDIN_SERVICE))
