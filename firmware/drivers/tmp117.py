"""TI TMP117: +/-0.1 C digital temperature sensor on I2C (0x48-0x4B by ADD0).

Datasheet SNOS758 (section and table numbers from memory: check them
against the current revision). Registers (7.6, Table 7-3), 16 bits, MSB first:

  0x00 Temp_Result      two's complement, 7.8125 m C per LSB (7.3.1);
                        reads 0x8000 (-256 C) until the first conversion ends
  0x01 Configuration    HIGH_Alert[15] LOW_Alert[14] Data_Ready[13]
                        EEPROM_Busy[12] MOD[11:10] CONV[9:7] AVG[6:5]
                        T/nA[4] POL[3] DR/Alert[2] Soft_Reset[1]
  0x0F Device_ID        DID[11:0] = 0x117, revision in [15:12]

The constructor checks the device ID (OSError if another chip answers) and
sets continuous conversion with 8 averages (AVG = 01), the reset default;
`temperature()` reads the last result and allocates nothing.
"""

from gaugecore.compat import const

_REG_TEMP = const(0x00)
_REG_CONFIG = const(0x01)
_REG_OFFSET = const(0x07)
_REG_DEVICE_ID = const(0x0F)

DEVICE_ID = const(0x0117)
_NO_RESULT = const(0x8000)  # power-up value of Temp_Result (7.6.1.1)
_SOFT_RESET = const(0x0002)  # Configuration bit 1
_AVG_SHIFT = const(5)
_CONV_SHIFT = const(7)
_LSB_C = 0.0078125  # 7.8125 m C
_AVERAGES = (1, 8, 32, 64)  # AVG[1:0] = index


class TMP117:
    """One TMP117 on an existing I2C bus."""

    def __init__(self, i2c, address=0x48, averages=8, conv_bits=4):
        if averages not in _AVERAGES:
            raise ValueError("TMP117 averages must be 1, 8, 32 or 64")
        if conv_bits < 0 or conv_bits > 7:
            raise ValueError("TMP117 CONV must be 0..7")
        self.i2c = i2c
        self.address = address
        self._buf = bytearray(2)
        did = self._read(_REG_DEVICE_ID)
        if did & 0x0FFF != DEVICE_ID:
            raise OSError("TMP117 at 0x%02x: device ID 0x%04x, expected 0x0117" % (address, did))
        # MOD = 00 continuous, CONV and AVG as asked
        self._write(_REG_CONFIG, (conv_bits << _CONV_SHIFT) | (_AVERAGES.index(averages) << _AVG_SHIFT))

    def _read(self, reg):
        b = self._buf
        self.i2c.readfrom_mem_into(self.address, reg, b)
        return (b[0] << 8) | b[1]

    def _write(self, reg, value):
        b = self._buf
        b[0] = (value >> 8) & 0xFF
        b[1] = value & 0xFF
        self.i2c.writeto_mem(self.address, reg, b)

    def config(self):
        """The Configuration register (int)."""
        return self._read(_REG_CONFIG)

    def device_id(self):
        """The Device_ID register (int)."""
        return self._read(_REG_DEVICE_ID)

    def reset(self):
        """Soft reset (Configuration bit 1): registers return to their defaults."""
        self._write(_REG_CONFIG, _SOFT_RESET)

    def temperature(self):
        """Last result in deg C; OSError before the first conversion has ended."""
        raw = self._read(_REG_TEMP)
        if raw == _NO_RESULT:
            raise OSError("TMP117 at 0x%02x: no conversion result yet" % self.address)
        if raw & 0x8000:
            raw -= 0x10000
        return raw * _LSB_C

    def set_offset(self, offset_c):
        """Temp_Offset register (0x07, same format): added to every result by the chip."""
        code = int(round(offset_c / _LSB_C))
        if code < -32768 or code > 32767:
            raise ValueError("TMP117 offset must be within -256..+256 C")
        self._write(_REG_OFFSET, code & 0xFFFF)
