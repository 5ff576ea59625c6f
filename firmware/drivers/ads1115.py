"""TI ADS1115: 16-bit delta-sigma ADC on I2C (address 0x48-0x4B by ADDR pin).

Datasheet SBAS444 (section and table numbers from memory: check them
against the current revision). Address pointer (9.6.1): 0 conversion,
1 config. Config register (9.6.3, Table 8):

  OS[15] (write 1: start a single shot; read 0: converting)  MUX[14:12]
  PGA[11:9]  MODE[8] (1 single shot)  DR[7:5]  COMP_MODE[4]  COMP_POL[3]
  COMP_LAT[2]  COMP_QUE[1:0] (11: comparator off)

Conversion register (9.6.2): 16-bit two's complement, 1 LSB = FSR / 2^15
(Table 3: 7.8125 uV at +/-0.256 V ... 187.5 uV at +/-6.144 V). Registers are
sent MSB first. `read_v(mux, fsr_v)` runs one single shot and returns volts;
the read path allocates nothing.
"""

from gaugecore.compat import const

_REG_CONVERSION = const(0x00)
_REG_CONFIG = const(0x01)

# MUX[2:0] (config bits 14:12)
MUX_AIN0_AIN1 = const(0)
MUX_AIN0_AIN3 = const(1)
MUX_AIN1_AIN3 = const(2)
MUX_AIN2_AIN3 = const(3)
MUX_AIN0_GND = const(4)
MUX_AIN1_GND = const(5)
MUX_AIN2_GND = const(6)
MUX_AIN3_GND = const(7)

_FSR_V = (6.144, 4.096, 2.048, 1.024, 0.512, 0.256)  # PGA[2:0] = index (110, 111 are 0.256 too)
_RATES = (8, 16, 32, 64, 128, 250, 475, 860)  # DR[2:0] = index, SPS

_OS = const(0x8000)
_MODE_SINGLE = const(0x0100)
_COMP_OFF = const(0x0003)


class ADS1115:
    """One ADS1115 on an existing I2C bus.

    sleep_ms: callable(ms) used while a conversion runs (default time.sleep_ms).
    """

    def __init__(self, i2c, address=0x48, rate_sps=860, sleep_ms=None, timeout_ms=50):
        if rate_sps not in _RATES:
            raise ValueError("ADS1115 rate must be one of 8, 16, 32, 64, 128, 250, 475, 860 SPS")
        self.i2c = i2c
        self.address = address
        self.rate_sps = rate_sps
        self._dr = _RATES.index(rate_sps) << 5
        # one conversion lasts 1 / DR (9.4.2); poll OS after that
        self.conversion_ms = 1000 // rate_sps + 1
        self.timeout_ms = timeout_ms
        if sleep_ms is None:
            import time

            sleep_ms = getattr(time, "sleep_ms", None) or (lambda ms: time.sleep(ms * 0.001))
        self._sleep_ms = sleep_ms
        self._buf = bytearray(2)
        self.read_config()  # OSError here if nothing answers at the address

    def _write(self, reg, value):
        b = self._buf
        b[0] = (value >> 8) & 0xFF
        b[1] = value & 0xFF
        self.i2c.writeto_mem(self.address, reg, b)

    def _read(self, reg):
        b = self._buf
        self.i2c.readfrom_mem_into(self.address, reg, b)
        return (b[0] << 8) | b[1]

    def read_config(self):
        """The config register (int)."""
        return self._read(_REG_CONFIG)

    @staticmethod
    def pga_bits(fsr_v):
        """PGA[2:0] for full scale +/-fsr_v volts (ValueError if not offered)."""
        for i in range(len(_FSR_V)):
            if _FSR_V[i] == fsr_v:  # exact: no float arithmetic, nothing allocated
                return i
        raise ValueError("ADS1115 full scale must be one of 6.144, 4.096, 2.048, 1.024, 0.512, 0.256 V")

    def start(self, mux, fsr_v):
        """Start one single-shot conversion of input `mux` (MUX_*) at +/-fsr_v."""
        pga = self.pga_bits(fsr_v)
        self._write(_REG_CONFIG, _OS | ((mux & 7) << 12) | (pga << 9) | _MODE_SINGLE | self._dr | _COMP_OFF)

    def read_code(self, mux, fsr_v):
        """One single shot: the signed 16-bit conversion result."""
        self.start(mux, fsr_v)
        self._sleep_ms(self.conversion_ms)
        waited = self.conversion_ms
        while not (self._read(_REG_CONFIG) & _OS):  # OS reads 0 while converting
            if waited >= self.timeout_ms:
                raise OSError("ADS1115 at 0x%02x: conversion not done after %d ms" % (self.address, waited))
            self._sleep_ms(1)
            waited += 1
        code = self._read(_REG_CONVERSION)
        if code & 0x8000:
            code -= 0x10000
        return code

    def read_v(self, mux, fsr_v=2.048):
        """Input `mux` in volts: code * FSR / 2^15."""
        return self.read_code(mux, fsr_v) * fsr_v / 32768.0
