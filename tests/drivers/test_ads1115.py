"""ADS1115 driver against a fake of SBAS444's registers and code formula.

Source: TI SBAS444 (ADS111x datasheet; section numbers from memory): 9.6.1 address pointer,
9.6.3 config register (Table 8), 9.3.3 / Table 3 full scale and LSB size,
9.6.2 conversion register.
"""

import os
import sys

import pytest

sys.path.insert(0, os.path.dirname(__file__))
import fake_chips as fc  # noqa: E402

from drivers import ads1115  # noqa: E402
from drivers.ads1115 import ADS1115  # noqa: E402


def make(address=0x49, **kw):
    clock = fc.FakeClock()
    chip = fc.FakeADS1115(clock)
    bus = fc.FakeI2C()
    bus.attach(address, chip)
    return ADS1115(bus, address, sleep_ms=clock.sleep_ms, **kw), chip, clock


def test_config_word_of_a_single_shot():
    adc, chip, clock = make()
    adc.read_code(ads1115.MUX_AIN0_GND, 0.256)
    w = chip.starts[-1]
    assert w >> 15 == 1  # OS = 1: start a conversion
    assert (w >> 12) & 7 == 0b100  # MUX 100: AINP = AIN0, AINN = GND
    assert (w >> 9) & 7 == 0b101  # PGA 101: +/-0.256 V
    assert (w >> 8) & 1 == 1  # MODE 1: single shot
    assert (w >> 5) & 7 == 0b111  # DR 111: 860 SPS
    assert w & 3 == 0b11  # COMP_QUE 11: comparator off
    assert w == 0xCBE3


@pytest.mark.parametrize("fsr, lsb_uv", [
    # Table 3: full scale and LSB size
    (6.144, 187.5), (4.096, 125.0), (2.048, 62.5), (1.024, 31.25), (0.512, 15.625), (0.256, 7.8125),
])
def test_lsb_sizes_table3(fsr, lsb_uv):
    adc, chip, clock = make()
    chip.ain[1] = lsb_uv * 1e-6 * 1000  # exactly 1000 LSB
    assert adc.read_code(ads1115.MUX_AIN1_GND, fsr) == 1000
    assert adc.read_v(ads1115.MUX_AIN1_GND, fsr) == pytest.approx(lsb_uv * 1e-3, rel=1e-12)


def test_sense_voltage_of_165_ma():
    adc, chip, clock = make()
    chip.ain[0] = 0.165  # 165 mA through 1.00 ohm
    v = adc.read_v(ads1115.MUX_AIN0_GND, 0.256)
    # 0.165 / 7.8125e-6 = 21120 codes exactly (Table 3: 7.8125 uV at +/-0.256 V)
    assert v == 21120 * 7.8125e-6
    assert v == pytest.approx(0.165, abs=7.8125e-6 / 2)


def test_negative_and_clipped_codes():
    adc, chip, clock = make()
    chip.ain[0], chip.ain[1] = 0.0, 0.1
    assert adc.read_code(ads1115.MUX_AIN0_AIN1, 2.048) == -1600  # -0.1 V / 62.5 uV
    chip.ain[0] = 3.0
    # 9.3.3: above +FS the code stays at 7FFFh
    assert adc.read_code(ads1115.MUX_AIN0_GND, 2.048) == 0x7FFF


def test_waits_for_os_bit():
    adc, chip, clock = make(rate_sps=128)
    t0 = clock.us
    adc.read_code(ads1115.MUX_AIN2_GND, 4.096)
    # one conversion lasts 1 / DR = 7.8 ms at 128 SPS (9.4.2)
    assert clock.us - t0 >= 7812
    assert clock.us - t0 <= 9000


def test_conversion_never_done_raises():
    adc, chip, clock = make(timeout_ms=10)
    chip.read_reg = lambda reg, n: b"\x05\x83" if reg == 1 else b"\x00\x00"  # OS stuck at 0
    with pytest.raises(OSError, match=r"^ADS1115 at 0x49: conversion not done after 10 ms$"):
        adc.read_code(ads1115.MUX_AIN0_GND, 0.256)


def test_absent_chip_is_oserror():
    bus = fc.FakeI2C()
    with pytest.raises(OSError):
        ADS1115(bus, 0x48)


def test_bad_settings():
    adc, chip, clock = make()
    with pytest.raises(ValueError) as e:
        adc.read_v(0, 0.3)
    assert str(e.value) == "ADS1115 full scale must be one of 6.144, 4.096, 2.048, 1.024, 0.512, 0.256 V"
    with pytest.raises(ValueError) as e:
        make(rate_sps=100)
    assert str(e.value) == "ADS1115 rate must be one of 8, 16, 32, 64, 128, 250, 475, 860 SPS"
