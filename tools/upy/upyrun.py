"""Run Python code under the real MicroPython interpreter, from CPython.

A thin wrapper around run.mjs (Node + the WebAssembly build of MicroPython
from npm). Each call starts one interpreter (about 0.3 s), so batch many
inputs into one run. Standard library only.

    import upyrun
    upyrun.run("import sys; print(sys.implementation.name)")   # 'micropython\\n'
    upyrun.run_json("import json; print(json.dumps([1, 2]))")  # [1, 2]

The firmware tree is importable in the run (it is copied to /firmware);
`files` are placed under /data for batch inputs too large for source code.
"""

import json
import os
import shutil
import subprocess
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
FIRMWARE = os.path.join(ROOT, "firmware")
RUNNER = os.path.join(HERE, "run.mjs")
PACKAGE = os.path.join(HERE, "node_modules", "@micropython", "micropython-webassembly-pyscript")


class UpyError(RuntimeError):
    """Base of this module's errors."""


class RunnerMissing(UpyError):
    """Node or the runner's npm package is not installed."""


class MicroPythonError(UpyError):
    """The code raised under MicroPython; `traceback` holds MicroPython's text."""

    def __init__(self, traceback, stdout=""):
        UpyError.__init__(self, "code raised under MicroPython:\n" + traceback)
        self.traceback = traceback
        self.stdout = stdout

    @property
    def last_line(self):
        """The exception line of the traceback, e.g. "ValueError: bad unit"."""
        lines = [s for s in self.traceback.splitlines() if s.strip()]
        return lines[-1] if lines else ""


def node_path():
    """Path of the node executable, or raise RunnerMissing."""
    path = shutil.which("node")
    if path is None:
        raise RunnerMissing("node is not on PATH; run tools/setup.sh (needs Node 20 or newer)")
    if not os.path.isdir(PACKAGE):
        raise RunnerMissing(
            "MicroPython npm package missing (%s); run tools/setup.sh" % os.path.relpath(PACKAGE, ROOT)
        )
    return path


def command(heap_bytes=None, firmware_dir=None, data_dir=None):
    """The argv that runs code from stdin under MicroPython."""
    argv = [node_path(), RUNNER, "--firmware", firmware_dir or FIRMWARE]
    if data_dir is not None:
        argv += ["--data", data_dir]
    if heap_bytes is not None:
        argv += ["--heap", str(int(heap_bytes))]
    return argv


def _write_files(folder, files):
    for name, content in files.items():
        target = os.path.join(folder, name)
        parent = os.path.dirname(target)
        if not os.path.isdir(parent):
            os.makedirs(parent)
        mode = "wb" if isinstance(content, bytes) else "w"
        with open(target, mode) as f:
            f.write(content)


def run(code, timeout_s=120, heap_bytes=None, firmware_dir=None, files=None):
    """Run `code` under MicroPython and return its stdout.

    heap_bytes: initial heap (the build grows it on demand, so it is not a
    cap; measure memory with gc.mem_alloc()). firmware_dir: tree to copy to
    /firmware instead of the repository's firmware/. files: {relative name:
    str or bytes} placed under /data. Raises MicroPythonError when the code
    raises, TimeoutError after timeout_s, RunnerMissing without node.
    """
    tmp = None
    try:
        data_dir = None
        if files:
            tmp = tempfile.mkdtemp(prefix="upyrun-")
            _write_files(tmp, files)
            data_dir = tmp
        argv = command(heap_bytes, firmware_dir, data_dir)
        try:
            proc = subprocess.run(
                argv,
                input=code.encode("utf-8"),
                stdout=subprocess.PIPE,
                stderr=subprocess.PIPE,
                timeout=timeout_s,
            )
        except subprocess.TimeoutExpired:
            raise TimeoutError("MicroPython run took longer than %s s" % timeout_s)
    finally:
        if tmp is not None:
            shutil.rmtree(tmp, ignore_errors=True)
    out = proc.stdout.decode("utf-8", "replace")
    err = proc.stderr.decode("utf-8", "replace")
    if proc.returncode == 0:
        return out
    if proc.returncode == 1 and "Traceback (most recent call last)" in err:
        raise MicroPythonError(err, out)
    raise UpyError("run.mjs exited with status %d:\n%s" % (proc.returncode, err))


def run_json(code, **kwargs):
    """Run `code` (which prints one JSON document as its last line); return it parsed."""
    out = run(code, **kwargs)
    lines = [s for s in out.splitlines() if s.strip()]
    if not lines:
        raise UpyError("MicroPython run printed nothing; expected a JSON document last")
    try:
        return json.loads(lines[-1])
    except ValueError as e:
        raise UpyError("last line is not JSON (%s): %r" % (e, lines[-1][:200]))
