"""Helpers shared by the test tiers; import as `from support import ...`.

(Each tier may have a conftest.py of its own, so tests never import
`conftest` by name.)
"""

import os
import shutil

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
FIRMWARE = os.path.join(ROOT, "firmware")


def require_tool(name):
    """Path of the executable `name`, or fail the test naming the install step."""
    path = shutil.which(name)
    if path is None:
        pytest.fail("required tool %r is not on PATH; run tools/setup.sh" % name)
    return path
