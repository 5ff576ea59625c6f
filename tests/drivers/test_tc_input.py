"""Thermocouple input and the ADS1220 internal sensor as the core's interfaces.

Sources: SBAS501 8.3.10 (burn-out current sources, 10 uA: an open input goes
to positive full scale), Table 16 (code formula), 8.3.13 (temperature sensor).
"""

import os
import sys

import pytest

sys.path.insert(0, os.path.dirname(__file__))
import fake_chips as fc  # noqa: E402

from drivers import ads1220  # noqa: E402
from drivers.ads1220 import ADS1220  # noqa: E402
from drivers.cj_sensor import AdcJunction  # noqa: E402
from drivers.tc_input import TcInput  # noqa: E402


def make():
    clock = fc.FakeClock()
    chip = fc.FakeADS1220(clock)
    spi = fc.FakeSPI()
    cs = fc.FakePin("CS", 1)
    spi.attach(cs, chip)
    adc = ADS1220(spi, cs, drdy=fc.DrdyPin(chip), sleep_ms=clock.sleep_ms)
    return adc, chip


def test_two_channels_read_their_pairs():
    adc, chip = make()
    chip.vin[ads1220.MUX_AIN0_AIN1] = 0.0115  # invented: Wren demo tube at high vacuum
    chip.vin[ads1220.MUX_AIN2_AIN3] = 0.0042  # invented
    ch1 = TcInput(adc, ads1220.MUX_AIN0_AIN1, open_check_every=0)
    ch2 = TcInput(adc, ads1220.MUX_AIN2_AIN3, open_check_every=0)
    lsb = 2 * 2.048 / 32 / 2 ** 24 * 1e6  # Table 16
    assert ch1.read_uv() == pytest.approx(11500.0, abs=lsb)
    assert ch2.read_uv() == pytest.approx(4200.0, abs=lsb)
    assert ch1.read_uv() == pytest.approx(11500.0, abs=lsb)


def test_open_check_and_recovery():
    adc, chip = make()
    chip.vin[0] = 0.008
    tc = TcInput(adc, ads1220.MUX_AIN0_AIN1, open_check_every=3)
    starts0 = chip.log.count("START")
    assert tc.read_uv() == pytest.approx(8000.0, abs=0.01)
    # that read ran a check conversion with BCS on, then a normal one with BCS off
    assert chip.log.count("START") - starts0 == 2
    assert chip.conversions[-2][1] & 0x01 and not chip.conversions[-1][1] & 0x01
    assert chip.regs[1] & 0x01 == 0
    chip.open_mux.add(0)  # the thermocouple breaks
    # not checked yet: an open input without the sources floats (0 V in the fake)
    assert tc.read_uv() == 0.0 and not tc.open
    assert tc.read_uv() == 0.0 and not tc.open
    v = tc.read_uv()  # the 4th read runs the check
    assert tc.open
    assert v == pytest.approx(64000.0, rel=1e-6)  # +FS = 2.048 V / 32 (Table 16)
    assert tc.read_uv() == v  # stays at the rail until a check passes
    chip.open_mux.clear()
    assert tc.read_uv() == v  # no check on this read yet
    assert tc.read_uv() == pytest.approx(8000.0, abs=0.01)
    assert not tc.open


def test_burnout_shift_when_closed_does_not_flag_open():
    adc, chip = make()
    chip.vin[0] = 0.015
    tc = TcInput(adc, 0, open_check_every=1)
    assert not tc.check_open()  # 15 mV + 10 uA * 2010 ohm = 35 mV < 64 mV
    assert tc.read_uv() == pytest.approx(15000.0, abs=0.01)


def test_adc_junction():
    adc, chip = make()
    chip.temp_c = 24.5
    cj = AdcJunction(adc)
    assert cj.read_c() == 24.5  # 24.5 / 0.03125 = 784 exactly (8.3.13)


def test_open_check_every_validation():
    adc, chip = make()
    with pytest.raises(ValueError) as e:
        TcInput(adc, 0, open_check_every=-1)
    assert str(e.value) == "open_check_every must be >= 0 (0: never)"


def test_ads1115_budget_input():
    from drivers import ads1115
    from drivers.ads1115 import ADS1115
    from drivers.tc_input import Ads1115Input

    clock = fc.FakeClock()
    chip = fc.FakeADS1115(clock)
    bus = fc.FakeI2C()
    bus.attach(0x48, chip)
    adc = ADS1115(bus, 0x48, sleep_ms=clock.sleep_ms)
    tc = Ads1115Input(adc, ads1115.MUX_AIN2_AIN3)
    chip.ain[2], chip.ain[3] = 0.0123, 0.0010
    # SBAS444 Table 3: 7.8125 uV per code at +/-0.256 V: 11.3 mV -> 1446.4 -> 1446 codes
    assert tc.read_uv() == 1446 * 7.8125
    assert chip.starts[-1] >> 12 & 7 == 0b011  # MUX 011: AIN2 - AIN3
    with pytest.raises(ValueError):
        Ads1115Input(adc, 0, fsr_v=0.1)
