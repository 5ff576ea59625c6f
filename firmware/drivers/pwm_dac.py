"""Filtered PWM as a DAC: the mean of a PWM output is duty * VDD.

A two-pole RC filter after the pin leaves the mean, duty * V_high, plus a
ripple the filter's corner sets (first-order RC attenuates the fundamental
by about f_c / f_pwm per pole; common practice, no published source for the
exact figure). The setting resolution is that of the duty register: 16 bits
through MicroPython's `PWM.duty_u16` (0..65535 = 0..100 %).

`PwmDac(pwm)` takes an object with `duty_u16(value)`: a machine.PWM on the
board, a recorder in tests. It offers the same methods the heater source uses
on the MCP4725: `set_fraction`, `set_v`, `output_v`, `off`.
"""

from gaugecore.compat import const

STEPS = const(65535)  # duty_u16 full scale: 65535 is 100 %


class PwmDac:
    """A PWM pin behind an RC filter; vref_v is the pin's high level."""

    def __init__(self, pwm, vref_v=3.3):
        self.pwm = pwm
        self.vref_v = vref_v
        self.code = 0
        self.pwm.duty_u16(0)

    def write(self, code):
        """Duty register value 0..65535 (ValueError outside)."""
        if code < 0 or code > STEPS:
            raise ValueError("PWM duty must be 0..65535")
        self.pwm.duty_u16(code)
        self.code = code

    def code_for_fraction(self, fraction):
        """Nearest duty for a mean of fraction * vref_v, clamped to 0..65535."""
        code = int(fraction * STEPS + 0.5)
        if code < 0:
            return 0
        if code > STEPS:
            return STEPS
        return code

    def set_fraction(self, fraction):
        """Mean output fraction * vref_v (nearest duty); the duty written."""
        code = self.code_for_fraction(fraction)
        self.write(code)
        return code

    def set_v(self, volts):
        """Mean output in volts; the duty written."""
        return self.set_fraction(volts / self.vref_v)

    def output_v(self):
        """The filtered mean the last duty gives: vref_v * duty / 65535."""
        return self.vref_v * self.code / STEPS

    def off(self):
        """Duty 0: output low."""
        self.write(0)
