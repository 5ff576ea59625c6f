"""Heater current source of one channel: DAC set point, ADS1115 read-back, H-bridge.

The circuit (hardware/README.md): a low-side current sink (op-amp, N-MOSFET,
sense resistor R_s) holds V(R_s) equal to its set voltage, which a DAC makes
through a divider: DAC full scale (VREF) -> `set_full_scale_v` at the sink
(default 0.250 V, 0..250 mA at R_s = 1.00 ohm; the reference board's
12.1 k / 1.00 k divider gives 0.2519 V, boards/common.py passes that). So

  set:     fraction = I * R_s / set_full_scale_v   -> DAC code (nearest)
  sense:   I = V(R_s) / R_s                        (ADS1115 single-ended, +/-0.256 V)
  heater:  V = V(AIN) * v_divider                  (the board: gain-0.5 amplifier, so 2;
                                                    +/-4.096 V)

Every factor is computed once in the constructor: the read path costs one
ADS1115 conversion and one float.

Both read-backs carry the sign of the bridge polarity, as the core's
interfaces ask (read_ma signed, read_v signed with the current).

Polarity: an H-bridge between +5 V and the sink's drain reverses the current
through the tube heater, driven by one GPIO. `set_polarity(sign)` makes the
dead time in firmware: sink off (DAC 0) and, if the bridge has an enable
pin, both sides off; wait `dead_time_us`; new polarity; wait again; sides on
and the previous set point back. No bridge leg ever conducts together with
the opposite one.
"""


class HeaterSource:
    """dac: code_for_fraction/write/off (MCP4725 or PwmDac); adc: ADS1115 (read_code(mux, fsr_v))."""

    def __init__(self, dac, adc, sense_mux, volt_mux, polarity_pin=None, enable_pin=None,
                 sense_ohm=1.00, set_full_scale_v=0.250, v_divider=2.0, max_ma=250.0,
                 dead_time_us=200, sense_fsr_v=0.256, volt_fsr_v=4.096, sleep_us=None):
        if sense_ohm <= 0 or set_full_scale_v <= 0 or v_divider <= 0:
            raise ValueError("sense resistor, set full scale and divider must be > 0")
        self.dac = dac
        self.adc = adc
        self.sense_mux = sense_mux
        self.volt_mux = volt_mux
        self.polarity_pin = polarity_pin
        self.enable_pin = enable_pin
        self.sense_ohm = sense_ohm
        self.set_full_scale_v = set_full_scale_v
        self.v_divider = v_divider
        self.max_ma = max_ma
        self.dead_time_us = dead_time_us
        self.sense_fsr_v = sense_fsr_v
        self.volt_fsr_v = volt_fsr_v
        if sleep_us is None:
            import time

            sleep_us = getattr(time, "sleep_us", None) or (lambda us: time.sleep(us * 1e-6))
        self._sleep_us = sleep_us
        adc.pga_bits(sense_fsr_v)  # ValueError now, not on the first read
        adc.pga_bits(volt_fsr_v)
        # factors made once: each float operation on the read path is an allocation
        self._fraction_per_ma = 0.001 * sense_ohm / set_full_scale_v
        self._ma_per_code = sense_fsr_v / 32768.0 * 1000.0 / sense_ohm  # SBAS444 Table 3 LSB
        self._v_per_code = volt_fsr_v / 32768.0 * v_divider
        self.polarity = 1
        self.command_ma = 0.0
        self.code = 0
        self.off()
        if polarity_pin is not None:
            polarity_pin.value(1)
        if enable_pin is not None:
            enable_pin.value(1)

    def _clamp(self, ma):
        if ma < 0.0:
            return 0.0
        if ma > self.max_ma:
            return self.max_ma
        return ma

    def code_for_ma(self, ma):
        """DAC code that commands `ma` (clamped to 0..max_ma)."""
        return self.dac.code_for_fraction(self._clamp(ma) * self._fraction_per_ma)

    def set_ma(self, ma):
        """Command a heater current of `ma` milliamperes (magnitude; polarity is separate)."""
        code = self.code_for_ma(ma)
        self.dac.write(code)
        self.code = code
        self.command_ma = self._clamp(ma)

    def off(self):
        """Sink off: DAC to 0 (its own off state)."""
        self.command_ma = 0.0
        self.code = 0
        self.dac.off()

    def read_ma(self):
        """Sensed current in mA, signed with the polarity: V(R_s) / R_s."""
        code = self.adc.read_code(self.sense_mux, self.sense_fsr_v)
        if self.polarity < 0:
            code = -code
        return code * self._ma_per_code

    def read_v(self):
        """Volts across the heater, signed with the polarity."""
        code = self.adc.read_code(self.volt_mux, self.volt_fsr_v)
        if self.polarity < 0:
            code = -code
        return code * self._v_per_code

    def set_polarity(self, sign):
        """Reverse the bridge with a dead time; +1 or -1."""
        if sign != 1 and sign != -1:
            raise ValueError("heater polarity must be +1 or -1, not %r" % (sign,))
        if sign == self.polarity:
            return
        if self.polarity_pin is None:
            raise OSError("heater source has no polarity pin (DC drive only)")
        ma = self.command_ma
        self.dac.off()  # sink off: no current through either leg
        if self.enable_pin is not None:
            self.enable_pin.value(0)  # both bridge sides off
        self._sleep_us(self.dead_time_us)
        self.polarity_pin.value(1 if sign > 0 else 0)
        self.polarity = sign
        self._sleep_us(self.dead_time_us)
        if self.enable_pin is not None:
            self.enable_pin.value(1)
        if ma > 0.0:
            self.set_ma(ma)
