"""MCP4725 driver against a fake of DS22039's commands.

Source: Microchip DS22039 (MCP4725 datasheet; section numbers from memory): 4.1 VOUT = VREF * Dn /
4096; 6.1 Figure 6-1 fast mode, Figure 6-2 write DAC / EEPROM, Figure 6-3
read; Table 5-2 power-down bits.
"""

import os
import sys

import pytest

sys.path.insert(0, os.path.dirname(__file__))
import fake_chips as fc  # noqa: E402

from drivers.mcp4725 import MCP4725  # noqa: E402


def make(address=0x60):
    chip = fc.FakeMCP4725(vdd_v=3.3)
    bus = fc.FakeI2C()
    bus.attach(address, chip)
    return MCP4725(bus, address, vref_v=3.3), chip


def test_fast_write_bytes():
    dac, chip = make()
    dac.write(0xABC)
    # Figure 6-1: [0 0 PD1 PD0 D11 D10 D9 D8] [D7..D0]
    assert chip.writes[-1] == bytes((0x0A, 0xBC))
    assert chip.code == 0xABC and chip.pd == 0


@pytest.mark.parametrize("code", [0, 1, 2048, 2703, 4095])
def test_vout_formula(code):
    dac, chip = make()
    dac.write(code)
    # 4.1: VOUT = VREF * Dn / 4096
    assert chip.vout() == pytest.approx(3.3 * code / 4096, rel=1e-12)
    assert dac.output_v() == pytest.approx(chip.vout(), rel=1e-12)


def test_set_v_nearest_code():
    dac, chip = make()
    assert dac.set_v(1.65) == 2048  # half of VREF
    assert dac.set_v(3.3) == 4095  # full scale clamps to the top code
    assert dac.set_v(-0.1) == 0
    assert chip.code == 0


def test_off_is_power_down_1k():
    dac, chip = make()
    dac.write(3000)
    dac.off()
    # Table 5-2: PD1 PD0 = 01, 1 kohm to ground; output is not driven
    assert chip.writes[-1] == bytes((0x10, 0x00))
    assert chip.pd == 1 and chip.vout() == 0.0
    assert dac.output_v() == 0.0
    dac.write(100)
    assert chip.pd == 0


def test_read_back_and_eeprom():
    dac, chip = make(0x61)
    dac.write(0x123)
    assert dac.read() == (True, 0x123, 0)  # Figure 6-3 status, DAC register
    assert dac.power_on_code() == (2048, 0)  # the fake's EEPROM as delivered
    dac.save_power_on(0)
    # Figure 6-2: C2 C1 C0 = 011 (DAC and EEPROM), D11..D4, D3..D0 0000
    assert chip.writes[-1] == bytes((0x60, 0x00, 0x00))
    assert chip.eeprom_code == 0 and chip.eeprom_writes == 1
    assert dac.power_on_code() == (0, 0)


def test_code_range():
    dac, chip = make()
    for bad in (-1, 4096):
        with pytest.raises(ValueError) as e:
            dac.write(bad)
        assert str(e.value) == "MCP4725 code must be 0..4095"
