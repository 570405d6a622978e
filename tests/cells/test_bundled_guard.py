"""Messages of the engine import guard for every kind of LibreOffice (issue 11), and RD.DIAGNOSTICS.

The build is described by ``cells.BUILD`` (what macros/package.py writes into ``_build.py``); the
LibreOffice side by the Python version and platform the functions are given, so every operating
system's message is checked on this machine. The real import paths run in
tests/packaging/test_package_targets.py.
"""
import cells
import functions
import pytest
import targets

MARK = functions.MESSAGE_MARKER
V = cells.VERSION
ALL = tuple(targets.target_name(p.key, py) for p in targets.PLATFORMS for py in targets.PYTHONS)


@pytest.fixture
def bundled(monkeypatch):
    def make(target, supported=ALL):
        plat, py = targets.parse_target(target)
        for k, v in {"TARGET": target, "PYTHON": targets.python_label(py), "PLATFORM": plat.key, "NUMPY": "2.2.6",
                     "VENDOR": "ratiodesk_vendor", "TARGETS": supported}.items():
            monkeypatch.setitem(cells.BUILD, k, v)
    return make


def test_wrong_python_version_names_the_oxt_built_for_this_libreoffice(bundled):
    bundled("win_amd64-cp311")
    assert cells.target_mismatch_text("310", "win_amd64") == (
        f"{MARK}this package is built for Python 3.11 on 64-bit Windows; this LibreOffice runs Python 3.10 \u2014 "
        f"install ratiodesk-{V}-win_amd64-cp310.oxt (Tools > Extension Manager), then restart LibreOffice")


def test_wrong_platform_is_named_too(bundled):
    bundled("linux_x86_64-cp311")
    msg = cells.target_mismatch_text("311", "macos_arm64")
    assert "built for Python 3.11 on 64-bit Linux (x86_64); this LibreOffice runs Python 3.11 on macOS on Apple " \
           "silicon (arm64)" in msg
    assert f"install ratiodesk-{V}-macos_arm64-cp311.oxt" in msg


def test_the_matching_build_has_no_mismatch(bundled):
    bundled("macos_x86_64-cp39")
    assert cells.target_mismatch_text("39", "macos_x86_64") is None


def test_a_python_no_build_exists_for_says_so(bundled, monkeypatch):
    bundled("win_amd64-cp313")
    monkeypatch.setattr(cells, "_distribution_python", lambda: False)
    msg = cells.target_mismatch_text("314", "win_amd64")
    assert "this LibreOffice runs Python 3.14" in msg and "no RatioDesk package brings numpy for it" in msg
    assert "apt-get" not in msg and ".oxt" not in msg


def test_unsupported_targets_of_the_lock_are_not_offered(bundled):
    bundled("win_amd64-cp311", supported=("win_amd64-cp311",))
    msg = cells.target_mismatch_text("38", "win_amd64")
    assert "win_amd64-cp38" not in msg and "no RatioDesk package brings numpy for it" in msg


def _system_build_text(monkeypatch, platform, python, distribution):
    """The message of the system build (every target known) on a given platform and Python."""
    monkeypatch.setitem(cells.BUILD, "TARGETS", ALL)
    monkeypatch.setattr(cells, "_distribution_python", lambda: distribution)
    monkeypatch.setattr(cells._targets, "running_platform", lambda: platform)
    monkeypatch.setattr(cells._targets, "running_python", lambda: python)
    return cells.needs_numpy_text()


def test_system_build_on_windows_or_macos_names_the_bundled_build(monkeypatch):
    msg = _system_build_text(monkeypatch, "win_amd64", "38", distribution=False)
    assert msg.startswith(MARK + "RatioDesk needs numpy, which LibreOffice's Python (Python ")
    assert f"install ratiodesk-{V}-win_amd64-cp38.oxt, which brings its own numpy" in msg
    assert "apt-get" not in msg and "scipy" not in msg


def test_system_build_on_a_linux_distribution_python_gives_the_apt_hint(monkeypatch):
    msg = _system_build_text(monkeypatch, "linux_x86_64", "311", distribution=True)
    assert "sudo apt-get install python3-numpy" in msg and "scipy" not in msg
    assert f"or install ratiodesk-{V}-linux_x86_64-cp311.oxt" in msg


def test_linux_on_arm_gets_no_oxt_and_no_apt_when_not_a_distribution_python(monkeypatch):
    monkeypatch.setattr(cells, "_distribution_python", lambda: False)
    monkeypatch.setattr(cells._targets, "running_platform", lambda: "linux_aarch64_64bit")
    msg = cells.needs_numpy_text()
    assert "no RatioDesk package brings numpy" in msg and "linux_aarch64_64bit" in msg and "apt-get" not in msg


def test_an_unexpected_error_is_a_message_even_when_the_engine_cannot_load(monkeypatch):
    # before issue 11 the error text imported the engine again inside the except: a second exception
    monkeypatch.setitem(cells._engine_state, "package", None)
    monkeypatch.setattr(cells, "_engine_modules", {})

    def boom(*a, **k):
        raise AssertionError("the error text must not load the engine")

    monkeypatch.setattr(cells, "_load_engine", boom)
    text = cells._engine_error_text(RuntimeError("odd"), {}, "rdSomething")
    assert text.startswith("internal error in rdSomething (RuntimeError: odd)")

    @cells.cell_function()
    def rdBroken():
        raise RuntimeError("odd")

    monkeypatch.setattr(cells, "_engine_error_text", boom)  # even the error text failing gives a message
    got = rdBroken()
    assert got.startswith(MARK + "internal error in rdBroken (RuntimeError: odd; then AssertionError)")


def test_diagnostics_rows_in_this_python():
    rows = cells.rdDiagnostics()
    labels = [r[0] for r in rows]
    assert labels == ["ratiodesk", "build_target", "built_for", "python", "python_executable", "python_prefix",
                      "platform", "numpy", "numpy_path", "numpy_source", "engine", "oxt_for_this_python", "log",
                      "status"]
    assert all(len(r) == 2 and all(isinstance(v, str) for v in r) for r in rows)
    d = dict(rows)
    import numpy
    assert d["numpy"] == numpy.__version__ and d["status"] == "ok"
    assert "14 x 2 cells" in functions.BY_METHOD["rdDiagnostics"].description and len(rows) == 14
    assert d["log"] == str(cells.LOG_PATH)
