"""Shared test setup.

- firmware/ goes on sys.path so tests import `drivers` and `boards` the way
  the board does (`gaugecore` itself is installed by pyproject.toml).
- `require_tool(name)` fails, never skips, when an external tool is missing:
  a skip would hide a missing install step in CI.
- `--device-port PORT` opts in to the hardware-in-the-loop tests
  (marker `device`); without it they are skipped, since no board exists in CI.
"""

import os
import shutil
import sys

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
FIRMWARE = os.path.join(ROOT, "firmware")
if FIRMWARE not in sys.path:
    sys.path.insert(0, FIRMWARE)


def require_tool(name):
    """Path of the executable `name`, or fail the test naming the install step."""
    path = shutil.which(name)
    if path is None:
        pytest.fail("required tool %r is not on PATH; run tools/setup.sh" % name)
    return path


def pytest_addoption(parser):
    parser.addoption(
        "--device-port",
        default=None,
        help="serial port of a real tcgauge board; enables tests marked 'device'",
    )


def pytest_collection_modifyitems(config, items):
    if config.getoption("--device-port"):
        return
    skip = pytest.mark.skip(reason="needs a real board: pass --device-port PORT")
    for item in items:
        if "device" in item.keywords:
            item.add_marker(skip)


@pytest.fixture
def device_port(request):
    """The serial port given with --device-port."""
    return request.config.getoption("--device-port")


@pytest.fixture(scope="session")
def repo_root():
    """Absolute path of the repository root."""
    return ROOT
