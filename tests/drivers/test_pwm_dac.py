"""Filtered-PWM DAC: duty register arithmetic (MicroPython machine.PWM.duty_u16,
0..65535 = 0..100 %, per the MicroPython library reference for machine.PWM)."""

import os
import sys

import pytest

sys.path.insert(0, os.path.dirname(__file__))

from drivers.pwm_dac import PwmDac  # noqa: E402


class DutyRecorder:
    def __init__(self):
        self.duties = []

    def duty_u16(self, value):
        self.duties.append(value)


def test_starts_low_and_sets_duty():
    pwm = DutyRecorder()
    dac = PwmDac(pwm, vref_v=3.3)
    assert pwm.duties == [0]
    assert dac.set_v(1.65) == 32768  # 0.5 * 65535 rounded half up
    # mean of a PWM wave = duty * V_high (worked formula of a rectangular wave's average)
    assert dac.output_v() == pytest.approx(3.3 * 32768 / 65535, rel=1e-12)
    assert dac.set_fraction(1.2) == 65535
    assert dac.set_fraction(-0.5) == 0
    dac.set_fraction(0.25)
    dac.off()
    assert pwm.duties[-2:] == [16384, 0]


def test_duty_range():
    dac = PwmDac(DutyRecorder())
    with pytest.raises(ValueError) as e:
        dac.write(70000)
    assert str(e.value) == "PWM duty must be 0..65535"
