"""Relay output: de-energised is the safe state (common practice, no published source)."""

import os
import sys

sys.path.insert(0, os.path.dirname(__file__))
import fake_chips as fc  # noqa: E402

from drivers.relay import Relay  # noqa: E402


def test_active_high():
    pin = fc.FakePin("R1", 1)
    r = Relay(pin)
    assert pin.value() == 0 and r.on is False  # released at construction
    r.set(True)
    assert pin.value() == 1 and r.value() is True
    r.set(True)
    r.set(0)
    assert pin.value() == 0 and r.switches == 2
    assert [v for _, v in pin.history] == [0, 1, 1, 0]


def test_active_low():
    pin = fc.FakePin("R2", 0)
    r = Relay(pin, active_high=False)
    assert pin.value() == 1  # released: driver input high
    r.set(True)
    assert pin.value() == 0
    r.set(False)
    assert pin.value() == 1 and r.on is False
