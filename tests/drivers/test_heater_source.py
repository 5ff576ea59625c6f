"""Heater source end to end: DAC code for a current, sense read-back, H-bridge.

Circuit values: R_s = 1.00 ohm, DAC full scale (VREF = VDD = 3.3 V) divided
to 0.250 V at the sink (the brief's round figure; hardware/README.md's
12.1 k / 1.00 k divider gives 0.2519 V, tested too), heater voltage read
through a gain-0.5 amplifier.
Formulas: MCP4725 VOUT = VREF * Dn / 4096 (DS22039 4.1); ADS1115 1 LSB =
FSR / 2^15, 7.8125 uV at +/-0.256 V (SBAS444 Table 3); Ohm's law. An ideal
sink holds V(R_s) = V_set (op-amp feedback, worked textbook result).
"""

import os
import sys

import pytest

sys.path.insert(0, os.path.dirname(__file__))
import fake_chips as fc  # noqa: E402

from drivers import ads1115  # noqa: E402
from drivers.ads1115 import ADS1115  # noqa: E402
from drivers.heater_source import HeaterSource  # noqa: E402
from drivers.mcp4725 import MCP4725  # noqa: E402
from gaugecore.heater import HeaterRegulator  # noqa: E402


class Circuit:
    """DAC -> divider -> ideal sink -> R_s; heater R_h across an H-bridge.

    divider_gain_error: relative error of the set divider (the loop must remove it).
    """

    def __init__(self, r_heater_ohm=1.5, divider_gain_error=0.0, v_divider=2.0):
        self.clock = fc.FakeClock()
        self.events = []
        clock, events = self.clock, self.events

        class Dac(fc.FakeMCP4725):
            def write(s, data):
                fc.FakeMCP4725.write(s, data)
                events.append(("dac", s.code, s.pd, clock.us))

        self.dac_chip = Dac(vdd_v=3.3, eeprom_code=0)
        self.adc_chip = fc.FakeADS1115(self.clock)
        self.bus = fc.FakeI2C()
        self.bus.attach(0x60, self.dac_chip)
        self.bus.attach(0x49, self.adc_chip)
        self.k = 0.250 / 3.3 * (1.0 + divider_gain_error)
        self.r_heater_ohm = r_heater_ohm
        self.v_divider = v_divider
        self.adc_chip.ain[0] = lambda: self.current_a() * 1.00  # AIN0: ch1 sense
        self.adc_chip.ain[1] = lambda: self.current_a() * self.r_heater_ohm / self.v_divider  # AIN1

        class Pin(fc.FakePin):
            def value(s, v=None):
                if v is not None:
                    events.append((s.name, 1 if v else 0, clock.us))
                return fc.FakePin.value(s, v)

        self.pol = Pin("pol", 0, clock)
        self.enable = Pin("en", 0, clock)

    def current_a(self):
        if not self.enable.value():
            return 0.0
        return self.dac_chip.vout() * self.k / 1.00  # sink holds V(R_s) = V_set

    def source(self, **kw):
        dac = MCP4725(self.bus, 0x60, vref_v=3.3)
        adc = ADS1115(self.bus, 0x49, sleep_ms=self.clock.sleep_ms)
        return HeaterSource(dac, adc, ads1115.MUX_AIN0_GND, ads1115.MUX_AIN1_GND,
                            polarity_pin=self.pol, enable_pin=self.enable, v_divider=self.v_divider,
                            sleep_us=self.clock.sleep_us, **kw)


def test_165_ma_sets_dac_code_2703():
    c = Circuit()
    hs = c.source()
    hs.set_ma(165.0)
    # 0.165 A * 1.00 ohm / 0.250 V * 4096 = 2703.36 -> code 2703
    assert c.dac_chip.code == 2703
    assert hs.code_for_ma(165.0) == 2703
    assert c.dac_chip.pd == 0
    # the current that code gives: 3.3 * 2703 / 4096 * 0.250 / 3.3 / 1.00 = 164.978 mA
    assert c.current_a() == pytest.approx(2703 / 4096 * 0.250, rel=1e-12)


def test_165_ma_with_the_reference_divider():
    # hardware/README.md: Rtop 12.1 k, Rbot 1.00 k: full scale 3.3 * 1.00 / 13.1 = 0.25191 V
    c = Circuit()
    c.k = 1.00 / 13.1
    hs = c.source(set_full_scale_v=3.3 * 1.00 / 13.1)
    hs.set_ma(165.0)
    # 0.165 V / 0.25191 V * 4096 = 2682.9 -> 2683; that gives 165.01 mA
    assert c.dac_chip.code == 2683
    assert c.current_a() * 1000 == pytest.approx(165.0, abs=0.0615 / 2)


def test_read_ma_from_sense_voltage():
    c = Circuit()
    hs = c.source()
    hs.set_ma(165.0)
    i_true_ma = c.current_a() * 1000
    # ADS1115 at +/-0.256 V: 7.8125 uV / 1.00 ohm = 7.8 uA per code
    assert hs.read_ma() == pytest.approx(i_true_ma, abs=0.0078125 / 2 + 1e-9)
    assert hs.read_ma() == round(i_true_ma / 0.0078125) * 0.0078125
    # heater voltage: 1.5 ohm * I through the gain-0.5 read-back amplifier, read at
    # +/-4.096 V (125 uV LSB, SBAS444 Table 3): one LSB is 2 * 125 uV at the heater
    assert hs.read_v() == pytest.approx(i_true_ma * 1e-3 * 1.5, abs=2 * 125e-6 / 2 + 1e-9)


def test_signed_with_polarity_and_dead_time():
    c = Circuit()
    hs = c.source(dead_time_us=200)
    hs.set_ma(165.0)
    del c.events[:]
    hs.set_polarity(-1)
    names = [(e[0], e[1]) for e in c.events]
    # sink off first, then both bridge sides off, then the new polarity, then on, then the set point back
    assert names == [("dac", 0), ("en", 0), ("pol", 0), ("en", 1), ("dac", 2703)]
    t = [e[-1] for e in c.events]
    assert t[2] - t[1] == 200 and t[3] - t[2] == 200  # dead time on both sides of the switch
    assert c.events[0][2] == 1  # DAC powered down (PD = 01) while switching
    assert hs.read_ma() == pytest.approx(-164.978, abs=0.01)
    assert hs.read_v() < 0
    hs.set_polarity(-1)  # no change, no switching
    assert len(c.events) == 5
    with pytest.raises(ValueError) as e:
        hs.set_polarity(0)
    assert str(e.value) == "heater polarity must be +1 or -1, not 0"


def test_off_and_clamp():
    c = Circuit()
    hs = c.source()
    hs.set_ma(300.0)
    assert c.dac_chip.code == 4095 and hs.command_ma == 250.0  # full scale clamps
    hs.off()
    assert c.current_a() == 0.0 and hs.read_ma() == 0.0
    hs.set_ma(-5.0)
    assert c.dac_chip.code == 0


def test_no_polarity_pin_is_dc_only():
    c = Circuit()
    dac = MCP4725(c.bus, 0x60)
    adc = ADS1115(c.bus, 0x49, sleep_ms=c.clock.sleep_ms)
    hs = HeaterSource(dac, adc, 4, 5, sleep_us=c.clock.sleep_us)
    with pytest.raises(OSError) as e:
        hs.set_polarity(-1)
    assert str(e.value) == "heater source has no polarity pin (DC drive only)"


def test_regulator_removes_a_divider_error():
    # the core's regulator closes the loop on read_ma(): a 2 % set-divider error
    # (invented) is removed to within the 500 ppm heater budget (gaugecore.heater)
    c = Circuit(divider_gain_error=0.02)
    hs = c.source()
    reg = HeaterRegulator(hs, 165.0, 100.0, 200.0)
    reg.start()
    now = 0
    for _ in range(400):  # 8 s of 20 ms ticks
        now += 20
        reg.update(now)
        if reg.polarity == 1 and now == 4000:
            reg.set_polarity(-1)
    assert abs(c.current_a() * 1000 - 165.0) < 165.0 * 500e-6 + 0.05  # +0.05 mA: one DAC step is 0.061 mA
    assert reg.state == "regulating"
