"""Shared test setup.

- firmware/ goes on sys.path so tests import `drivers` and `boards` the way
  the board does (`gaugecore` itself is installed by pyproject.toml).
- `support.require_tool(name)` fails, never skips, when an external tool is missing:
  a skip would hide a missing install step in CI.
- Under CI=true hypothesis runs derandomized (the "ci" profile).
- `--device-port PORT` opts in to the hardware-in-the-loop tests
  (marker `device`); without it they are skipped, since no board exists in CI.
"""

import os
import sys

import pytest
from hypothesis import settings

# CI runs the same hypothesis examples every time (a red run must be reproducible);
# developers get fresh random examples, and the failures they find are kept in .hypothesis/.
settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")

from support import FIRMWARE, ROOT, require_tool  # noqa: F401  (re-exported for plugins)

if FIRMWARE not in sys.path:
    sys.path.insert(0, FIRMWARE)


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
