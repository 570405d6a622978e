"""The committed type library and every generated file agree with the function table."""
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
import zipfile
from pathlib import Path

import functions
import package
import pytest

GEN = Path(package.GENERATED)
OOR = "{http://openoffice.org/2001/registry}"
IDL_KEYWORDS = {"any", "attribute", "boolean", "byte", "char", "const", "constants", "double", "enum", "exception",
                "float", "in", "inout", "interface", "long", "module", "out", "raises", "sequence", "service",
                "short", "string", "struct", "type", "typedef", "unsigned", "void", "hyper", "oneway", "property"}


def test_committed_idl_matches_the_table():
    assert (GEN / "ratiodesk.idl").read_text(encoding="utf-8") == package.idl_text(), \
        "run `.venv/bin/python macros/package.py --update-generated` and commit macros/generated/"


@pytest.mark.skipif(not package.sdk_available(), reason="LibreOffice SDK (unoidl-write) not installed")
def test_committed_rdb_is_the_compiled_idl(tmp_path):
    out = tmp_path / "x.rdb"
    package.compile_idl(package.idl_text(), out)
    assert out.read_bytes() == (GEN / "ratiodesk.rdb").read_bytes()


def test_committed_rdb_names_every_method():
    data = (GEN / "ratiodesk.rdb").read_bytes()
    for f in functions.FUNCTIONS:
        assert f.method.encode() in data
        for a in f.args:
            assert a.name.encode() in data


def test_names_are_valid_and_unique():
    methods = [f.method for f in functions.FUNCTIONS]
    displays = [f.display.upper() for f in functions.FUNCTIONS]
    assert len(set(methods)) == len(methods) and len(set(displays)) == len(displays)
    for f in functions.FUNCTIONS:
        assert re.fullmatch(r"rd[A-Z][A-Za-z0-9]*", f.method), f.method
        assert re.fullmatch(r"RD(\.[A-Z][A-Z0-9]*)+", f.display), f.display  # no hyphen (Calc refuses it)
        names = [a.name for a in f.args]
        assert len(set(names)) == len(names)
        for a in f.args:
            # unoidl-write refuses underscores in parameter names: camelCase ("anchorSigma")
            assert re.fullmatch(r"[a-z][A-Za-z0-9]*", a.name) and a.name not in IDL_KEYWORDS, a.name
            assert a.kind in functions.IDL_TYPES and a.description
        # Calc allows optional arguments only after the required ones
        kinds = [a.optional for a in f.args]
        assert kinds == sorted(kinds), f"{f.display}: a required argument follows an optional one"
        assert f.returns in ("value", "array") and f.description and f.engine


def test_stored_names_never_change():
    # Saved workbooks hold these: renaming one breaks them (functions.py module docstring).
    assert functions.SERVICE_NAME == "org.ratiodesk.CalcFunctions"
    assert functions.INTERFACE_NAME == "org.ratiodesk.XCalcFunctions"
    for m in ("rdVersion", "rdEcho", "rdIsochronBlock", "rdIsochronSlope", "rdIsochronIntercept", "rdIsochronMswd",
              "rdIsochronValue", "rdAgeIsochron", "rdAgeSlope", "rdMeanWeighted", "rdAgeTwoPoint", "rdAgeModel",
              "rdInitialRatio", "rdEpsilon", "rdEllipse", "rdCycles", "rdInterferenceStrip", "rdMassbiasFactor",
              "rdMassbiasCorrect", "rdMassbiasNormalise", "rdDilutionConc", "rdDilutionBlock", "rdBlankCorrect",
              "rdBlankUmol", "rdStandardFactor", "rdStandardApply", "rdAnalysisBlock", "rdAnalysisRow",
              "rdWorkbookAnalysis",
              "rdWorkbookIsochron"):
        assert m in functions.BY_METHOD


def test_xcu_matches_the_table():
    root = ET.fromstring(package.xcu_text())
    service = root.find("node").find("node")
    assert service.get(OOR + "name") == functions.SERVICE_NAME
    nodes = {n.get(OOR + "name"): n for n in service.find("node")}
    assert list(nodes) == [f.method for f in functions.FUNCTIONS]
    for f in functions.FUNCTIONS:
        props = {p.get(OOR + "name"): p.find("value").text for p in nodes[f.method].findall("prop")}
        assert props == {"DisplayName": f.display, "Description": f.description, "Category": functions.CATEGORY}
        params = nodes[f.method].find("node")
        assert [p.get(OOR + "name") for p in params] == [a.name for a in f.args]


def test_oxt_contents(tmp_path):
    oxt = package.build(tmp_path)
    assert oxt.name == f"ratiodesk-{package.version()}.oxt"
    with zipfile.ZipFile(oxt) as zf:
        names = set(zf.namelist())
        manifest = zf.read("META-INF/manifest.xml").decode()
        desc = zf.read("description.xml").decode()
        comps = zf.read("ratiodesk.components").decode()
    listed = re.findall(r'manifest:full-path="([^"]+)"', manifest)
    assert all(n in names for n in listed)
    assert {"ratiodesk.rdb", "ratiodesk.components", "CalcAddIns.xcu"} <= set(listed)
    assert f'<version value="{package.version()}"/>' in desc and "license-text" in desc and "LICENSE.txt" in names
    assert functions.IMPLEMENTATION_NAME in comps and 'uri="addin.py"' in comps
    for need in ("addin.py", "pythonpath/ratiodesk_calc/cells.py", "pythonpath/ratiodesk_calc/functions.py",
                 "pythonpath/ratiodesk_engine/__init__.py", "pythonpath/ratiodesk_engine/regression.py",
                 "pythonpath/ratiodesk_engine/data/sets.json"):
        assert need in names
    assert not any(n.startswith("pythonpath/reduction/") for n in names)


def test_shipped_engine_imports_under_its_own_name(tmp_path):
    oxt = package.build(tmp_path / "d")
    with zipfile.ZipFile(oxt) as zf:
        zf.extractall(tmp_path / "x")
    code = ("import sys; sys.path.insert(0, sys.argv[1]); import ratiodesk_engine.regression as r, ratiodesk_engine;"
            "assert 'reduction' not in sys.modules; print(ratiodesk_engine.__version__)")
    out = subprocess.run([sys.executable, "-c", code, str(tmp_path / "x" / "pythonpath")], capture_output=True,
                         text=True, cwd=tmp_path)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == package.version()


def test_menu_commands_component_is_registered_when_present(tmp_path, monkeypatch):
    (tmp_path / "commands.py").write_text('import uno\nIMPLEMENTATION_NAME = "org.ratiodesk.Commands.Impl"\n'
                                          'SERVICE_NAME = "org.ratiodesk.Commands"\n', encoding="utf-8")
    (tmp_path / "Addons.xcu").write_text("<x/>", encoding="utf-8")
    monkeypatch.setattr(package, "HERE", tmp_path)
    comps = package.components()
    assert comps[1] == ("commands.py", "org.ratiodesk.Commands.Impl", ("org.ratiodesk.Commands",))
    root = ET.fromstring(package.components_text())
    uris = [c.get("uri") for c in root]
    assert uris == ["addin.py", "commands.py"]
    assert "Addons.xcu" in package.manifest_text(["CalcAddIns.xcu", "Addons.xcu", "ratiodesk.rdb"])


def test_menu_commands_without_constants_is_an_error(tmp_path, monkeypatch):
    (tmp_path / "commands.py").write_text("X = 1\n", encoding="utf-8")
    monkeypatch.setattr(package, "HERE", tmp_path)
    with pytest.raises(SystemExit, match="IMPLEMENTATION_NAME"):
        package.components()


def test_builds_without_the_sdk_from_the_committed_type_library(tmp_path, monkeypatch):
    monkeypatch.setattr(package, "UNOIDL_WRITE", tmp_path / "no-unoidl-write")
    oxt = package.build(tmp_path)
    with zipfile.ZipFile(oxt) as zf:
        assert zf.read("ratiodesk.rdb") == (GEN / "ratiodesk.rdb").read_bytes()
    monkeypatch.setattr(package, "idl_text", lambda: "// a table that changed\n")
    with pytest.raises(SystemExit, match="update-generated"):
        package.build(tmp_path / "again")
