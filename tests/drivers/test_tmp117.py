"""TMP117 driver against a fake of SNOS758's registers.

Source: TI SNOS758 (TMP117 datasheet; section numbers from memory): 7.3.1 temperature result,
7.8125 m C per LSB, two's complement; Table 7-3 register map and reset
values (Configuration 0220h, Device_ID 0117h); 7.6.1.1 power-up result 8000h.
"""

import os
import sys

import pytest

sys.path.insert(0, os.path.dirname(__file__))
import fake_chips as fc  # noqa: E402

from drivers.tmp117 import TMP117  # noqa: E402
from drivers.cj_sensor import Tmp117Junction  # noqa: E402


def make(address=0x48, **kw):
    chip = fc.FakeTMP117(**kw)
    bus = fc.FakeI2C()
    bus.attach(address, chip)
    return TMP117(bus, address), chip


@pytest.mark.parametrize("t_c, raw", [
    # 7.3.1: raw = t / 7.8125 m C in 16-bit two's complement (worked from the LSB size)
    (25.0, 0x0C80), (0.0078125, 0x0001), (-0.0078125, 0xFFFF), (-40.0, 0xEC00), (150.0, 0x4B00),
])
def test_lsb_and_sign(t_c, raw):
    sensor, chip = make(temp_c=t_c)
    assert chip.read_reg(0, 2) == bytes((raw >> 8, raw & 0xFF))
    assert sensor.temperature() == t_c


def test_resolution_of_a_reading():
    sensor, chip = make(temp_c=23.456)
    # nearest 7.8125 m C step
    assert sensor.temperature() == pytest.approx(23.456, abs=0.0078125 / 2)


def test_config_written_continuous_8_averages():
    sensor, chip = make()
    # Configuration: MOD 00 continuous, CONV 100, AVG 01 (8 averages) = 0220h
    assert chip.writes == [(0x01, 0x0220)]
    assert sensor.config() == 0x0220


def test_wrong_device_id():
    with pytest.raises(OSError) as e:
        make(device_id=0x0190)
    assert str(e.value) == "TMP117 at 0x48: device ID 0x0190, expected 0x0117"


def test_revision_bits_ignored():
    sensor, chip = make(device_id=0x1117)  # DID[11:0] = 117h, revision 1
    assert sensor.device_id() == 0x1117


def test_no_result_yet():
    sensor, chip = make()
    chip.converted = False  # Temp_Result still 8000h after power-up
    with pytest.raises(OSError) as e:
        sensor.temperature()
    assert str(e.value) == "TMP117 at 0x48: no conversion result yet"


def test_offset_register():
    sensor, chip = make(temp_c=20.0)
    sensor.set_offset(-0.5)
    assert chip.regs[0x07] == (-64) & 0xFFFF  # -0.5 C / 7.8125 m C
    assert sensor.temperature() == 19.5


def test_bad_averages():
    chip = fc.FakeTMP117()
    bus = fc.FakeI2C()
    bus.attach(0x4A, chip)
    with pytest.raises(ValueError) as e:
        TMP117(bus, 0x4A, averages=16)
    assert str(e.value) == "TMP117 averages must be 1, 8, 32 or 64"


def test_junction_adapter():
    sensor, chip = make(temp_c=22.5)
    cj = Tmp117Junction(sensor, offset_c=0.25)
    assert cj.read_c() == 22.25
    chip.converted = False
    with pytest.raises(OSError):
        cj.read_c()
