"""Microchip MCP4725: 12-bit DAC on I2C (address 0x60 + A0 pin, A2 A1 = 00).

Datasheet DS22039 (section and table numbers from memory: check them
against the current revision). Output (4.1): VOUT = VREF * Dn / 4096 with
VREF = VDD. Commands (6.1, Figure 6-1):

  fast mode   2 bytes  [0 0 PD1 PD0 D11 D10 D9 D8] [D7 .. D0]
  write DAC   3 bytes  [0 1 0 x x PD1 PD0 x] [D11 .. D4] [D3 D2 D1 D0 x x x x]
  read        5 bytes  [RDY/BSY POR x x x PD1 PD0 x] [D11..D4] [D3..D0 xxxx]
                       [x PD1 PD0 x D11..D8] [D7..D0]   (EEPROM)

Power-down bits PD1 PD0 (Table 5-2): 00 normal, 01 1 kohm to ground,
10 100 kohm, 11 500 kohm. `write(code)` uses the fast mode; nothing is
allocated after the constructor.
"""

from gaugecore.compat import const

_CMD_WRITE_DAC = const(0x40)
_PD_1K = const(1)  # PD1 PD0 = 01: output 1 kohm to ground
STEPS = const(4096)
CODE_MAX = const(4095)


class MCP4725:
    """One MCP4725 on an existing I2C bus; vref_v is its VDD."""

    def __init__(self, i2c, address=0x60, vref_v=3.3):
        self.i2c = i2c
        self.address = address
        self.vref_v = vref_v
        self.code = 0
        self.powered_down = False
        self._buf = bytearray(3)
        self._fast = memoryview(self._buf)[:2]
        self._rd = bytearray(5)

    def write(self, code, power_down=0):
        """Fast-mode write of a 12-bit code (ValueError outside 0..4095)."""
        if code < 0 or code > CODE_MAX:
            raise ValueError("MCP4725 code must be 0..4095")
        b = self._fast
        b[0] = ((power_down & 3) << 4) | (code >> 8)
        b[1] = code & 0xFF
        self.i2c.writeto(self.address, b)
        self.code = code
        self.powered_down = power_down != 0

    def code_for_fraction(self, fraction):
        """Nearest code for VOUT = fraction * VREF, clamped to 0..4095."""
        code = int(fraction * STEPS + 0.5)
        if code < 0:
            return 0
        if code > CODE_MAX:
            return CODE_MAX
        return code

    def set_fraction(self, fraction):
        """VOUT = fraction * VREF (nearest code); the code written."""
        code = self.code_for_fraction(fraction)
        self.write(code)
        return code

    def set_v(self, volts):
        """VOUT in volts (nearest code); the code written."""
        return self.set_fraction(volts / self.vref_v)

    def output_v(self):
        """The output the last written code gives: VREF * code / 4096."""
        if self.powered_down:
            return 0.0
        return self.vref_v * self.code / STEPS

    def off(self):
        """Code 0 and power-down with 1 kohm to ground (PD = 01)."""
        self.write(0, _PD_1K)

    def read(self):
        """(ready, dac code, power-down bits) read back from the chip."""
        r = self._rd
        self.i2c.readfrom_into(self.address, r)
        return (bool(r[0] & 0x80), (r[1] << 4) | (r[2] >> 4), (r[0] >> 1) & 3)

    def power_on_code(self):
        """(code, power-down bits) stored in the EEPROM: what the chip starts with."""
        r = self._rd
        self.i2c.readfrom_into(self.address, r)
        return (((r[3] & 0x0F) << 8) | r[4], (r[3] >> 5) & 3)

    def save_power_on(self, code):
        """Write DAC register and EEPROM (command 011): the code the chip starts with.

        The EEPROM wears (DS22039 Table 1-1: 1 million writes): call it once, when
        power_on_code() differs, not per sample."""
        if code < 0 or code > CODE_MAX:
            raise ValueError("MCP4725 code must be 0..4095")
        b = self._buf
        b[0] = _CMD_WRITE_DAC | 0x20  # C2 C1 C0 = 011
        b[1] = code >> 4
        b[2] = (code & 0x0F) << 4
        self.i2c.writeto(self.address, b)
        self.code = code
        self.powered_down = False
