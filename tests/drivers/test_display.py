"""Display text: the pure formatter and its drawing on a fake panel.

Unit conversions: NIST SP 811 (2008) B.8, 1 Torr = 101325/760 Pa (as
gaugecore.units states); the formatter's rounding is checked on worked values.
"""

import os
import sys

import pytest

sys.path.insert(0, os.path.dirname(__file__))

from drivers.display import Display, channel_text, sci, wrap  # noqa: E402

TORR = 101325.0 / 760.0  # NIST SP 811 B.8


@pytest.mark.parametrize("value, text", [
    (0.023, "2.3e-2"), (2.3, "2.3e+0"), (1000.0, "1.0e+3"), (0.00996, "1.0e-2"),
    (9.94, "9.9e+0"), (0.05, "5.0e-2"), (-0.5, "-5.0e-1"), (0.0, "0.0e+0"), (101325.0, "1.0e+5"),
])
def test_sci(value, text):
    assert sci(value) == text


def test_nan_and_inf():
    assert sci(float("nan")) == "nan"
    assert sci(float("inf")) == "nan"


def test_lines_by_state():
    assert channel_text(1, 0.023 * TORR, "ok", None, "TORR") == "1: 2.3e-2 Torr ok"
    assert channel_text(2, None, "fault", "tc-open", "TORR") == "2: FAULT tc-open"
    # a faulted channel never shows a number, even if one is passed
    assert channel_text(2, 5.0, "fault", "heater-open", "PA") == "2: FAULT heater-open"
    assert channel_text(1, 0.05, "under", None, "PA") == "1: <5.0e-2 Pa under"
    assert channel_text(1, 400.0, "over", None, "MBAR") == "1: >4.0e+0 mbar over"
    assert channel_text(2, None, "invalid", None, "TORR") == "2: ---- invalid"
    # 1 micron = 1e-3 Torr: 0.1 Torr = 100 micron
    assert channel_text(1, 0.1 * TORR, "ok", None, "MICRON") == "1: 1.0e+2 micron ok"


def test_wrap():
    assert wrap("1: 2.3e-2 Torr ok", 16) == ["1: 2.3e-2 Torr", "ok"]
    assert wrap("2: FAULT tc-open", 16) == ["2: FAULT tc-open"]
    assert wrap("1: FAULT heater-short", 16) == ["1: FAULT", "heater-short"]
    assert wrap("x" * 20, 8) == ["xxxxxxxx", "xxxxxxxx", "xxxx"]


class Panel:
    def __init__(self):
        self.ops = []

    def fill(self, c):
        self.ops.append(("fill", c))

    def text(self, s, x, y, c=1):
        self.ops.append(("text", s, x, y))

    def show(self):
        self.ops.append(("show",))


class Ch:
    def __init__(self, index, pressure_pa, state, fault=None):
        self.index, self.pressure_pa, self.state, self.fault = index, pressure_pa, state, fault


def test_display_rows():
    panel = Panel()
    d = Display(panel, unit="TORR")
    drawn = d.update([Ch(0, 0.023 * TORR, "ok"), Ch(1, None, "fault", "tc-open")])  # core indices from 0
    assert drawn == ["1: 2.3e-2 Torr ok", "2: FAULT tc-open"]
    assert panel.ops == [
        ("fill", 0),
        ("text", "1: 2.3e-2 Torr", 0, 0), ("text", "ok", 0, 8),
        ("text", "2: FAULT tc-open", 0, 16),
        ("show",),
    ]
