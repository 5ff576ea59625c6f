"""Setup for the MicroPython tier: puts tools/upy on sys.path for `upyrun`.

The session fixture `upy` is the upyrun module, after checking that node is
on PATH (`support.require_tool` fails, never skips) and that the
npm package is installed; tests call `upy.run(code)` / `upy.run_json(code)`.
"""

import os
import sys

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
TOOLS_UPY = os.path.join(ROOT, "tools", "upy")
if TOOLS_UPY not in sys.path:
    sys.path.insert(0, TOOLS_UPY)

import upyrun  # noqa: E402  (needs the path above)
from support import require_tool  # noqa: E402


@pytest.fixture(scope="session")
def upy():
    """The upyrun module, ready to run code under MicroPython."""
    require_tool("node")
    try:
        upyrun.node_path()
    except upyrun.RunnerMissing as exc:
        pytest.fail(str(exc))
    return upyrun
