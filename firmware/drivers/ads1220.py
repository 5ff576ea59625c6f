"""TI ADS1220: 24-bit delta-sigma ADC on SPI (mode 1: CPOL 0, CPHA 1).

Datasheet SBAS501 (section and table numbers from memory: check them
against the current revision). Commands (8.5.3): RESET 0x06, START/SYNC
0x08, POWERDOWN 0x02, RDATA 0x10, RREG 0x20|rr<<2|nn, WREG 0x40|rr<<2|nn
(rr = first register, nn = count - 1). Four configuration registers (8.6):

  reg 0  MUX[7:4]  GAIN[3:1]  PGA_BYPASS[0]
  reg 1  DR[7:5]   MODE[4:3]  CM[2]  TS[1]  BCS[0]
  reg 2  VREF[7:6] 50/60[5:4] PSW[3] IDAC[2:0]
  reg 3  I1MUX[7:5] I2MUX[4:2] DRDYM[1]

Output code (8.5.2, Table 16): 24-bit two's complement, 1 LSB =
(2 * Vref / gain) / 2^24. Temperature-sensor mode (8.3.13): a 14-bit
left-justified result, 0.03125 C per LSB.

The driver runs single-shot conversions: `read_uv(mux)` writes the mux (only
when it changed), sends START/SYNC, waits for DRDY low and reads the code with
RDATA. The wait blocks for the conversion time (about 50 ms at 20 SPS normal
mode), so budget the sample period for it. The read path allocates no
buffers (`read_code` nothing at all; `read_uv` its one float result).
"""

from gaugecore.compat import const

_CMD_RESET = const(0x06)
_CMD_START = const(0x08)
_CMD_POWERDOWN = const(0x02)
_CMD_RDATA = const(0x10)
_CMD_RREG = const(0x20)
_CMD_WREG = const(0x40)

# reg 0 MUX[3:0] (Table 19): differential pairs and monitors
MUX_AIN0_AIN1 = const(0x0)
MUX_AIN0_AIN2 = const(0x1)
MUX_AIN0_AIN3 = const(0x2)
MUX_AIN1_AIN2 = const(0x3)
MUX_AIN1_AIN3 = const(0x4)
MUX_AIN2_AIN3 = const(0x5)
MUX_AIN1_AIN0 = const(0x6)
MUX_AIN3_AIN2 = const(0x7)
MUX_SHORTED = const(0xE)  # AINp and AINn shorted to (AVDD + AVSS) / 2: offset check

_GAINS = (1, 2, 4, 8, 16, 32, 64, 128)  # reg 0 GAIN[2:0] = index
_RATES = (20, 45, 90, 175, 330, 600, 1000)  # reg 1 DR[2:0] = index, normal mode SPS

_R1_TS = const(0x02)  # reg 1 bit 1: temperature sensor mode
_R1_BCS = const(0x01)  # reg 1 bit 0: 10 uA burn-out current sources on
_R2_5060 = const(0x10)  # reg 2 bits 5:4 = 01: simultaneous 50 and 60 Hz rejection
_FULL = const(0x800000)  # 2^23
_VREF_INTERNAL_V = 2.048  # reg 2 VREF = 00: internal 2.048 V reference


class ADS1220:
    """One ADS1220 on an existing SPI bus; `cs` is an output pin (active low).

    drdy: input pin (low = data ready) or None to wait the nominal conversion
    time. sleep_ms: callable(ms) used while waiting (default time.sleep_ms).
    """

    def __init__(self, spi, cs, drdy=None, gain=32, rate_sps=20, reject_50_60=True,
                 vref_v=_VREF_INTERNAL_V, sleep_ms=None, timeout_ms=200):
        if gain not in _GAINS:
            raise ValueError("ADS1220 gain must be one of 1, 2, 4, 8, 16, 32, 64, 128")
        if rate_sps not in _RATES:
            raise ValueError("ADS1220 rate must be one of 20, 45, 90, 175, 330, 600, 1000 SPS")
        if reject_50_60 and rate_sps != 20:
            raise ValueError("ADS1220 50/60 Hz rejection needs 20 SPS")
        self.spi = spi
        self.cs = cs
        self.drdy = drdy
        self.gain = gain
        self.rate_sps = rate_sps
        self.vref_v = vref_v
        self.uv_per_code = 2.0 * vref_v / gain / (2 * _FULL) * 1e6
        # conversion time of a single shot: a little over one period (8.3.6 Table 11)
        self.conversion_ms = 1000 // rate_sps + 2
        self.timeout_ms = timeout_ms
        if sleep_ms is None:
            import time

            sleep_ms = getattr(time, "sleep_ms", None) or (lambda ms: time.sleep(ms * 0.001))
        self._sleep_ms = sleep_ms
        self._cmd = bytearray(1)
        self._tx = bytearray(5)
        self._rx = bytearray(5)
        self._tx2 = memoryview(self._tx)[:2]  # slices made once: a slice is an object
        self._tx4 = memoryview(self._tx)[:4]
        self._rx4 = memoryview(self._rx)[:4]
        self._regs = bytearray(4)
        self._regs[0] = (MUX_AIN0_AIN1 << 4) | (_GAINS.index(gain) << 1)
        self._regs[1] = _RATES.index(rate_sps) << 5  # normal mode, single shot
        self._regs[2] = _R2_5060 if reject_50_60 else 0  # internal reference
        self._regs[3] = 0  # DRDYM 0: DRDY pin only
        self.cs(1)
        self.reset()

    # -------------------------------------------------------------- bus
    def _command(self, byte):
        self._cmd[0] = byte
        self.cs(0)
        self.spi.write(self._cmd)
        self.cs(1)

    def reset(self):
        """RESET command, then write all four registers."""
        self._command(_CMD_RESET)
        self._sleep_ms(1)  # 50 us + 32 t_CLK after RESET (8.5.3.2)
        self.write_registers()

    def write_registers(self):
        """WREG of registers 0-3 from the cached copy."""
        tx = self._tx
        tx[0] = _CMD_WREG | 3  # rr = 0, nn = 3: four registers
        for i in range(4):
            tx[1 + i] = self._regs[i]
        self.cs(0)
        self.spi.write(tx)
        self.cs(1)

    def _write_reg(self, reg, value):
        self._regs[reg] = value
        tx = self._tx2
        tx[0] = _CMD_WREG | (reg << 2)
        tx[1] = value
        self.cs(0)
        self.spi.write(tx)
        self.cs(1)

    def registers(self):
        """RREG of registers 0-3 as read from the chip (bytes)."""
        self._tx[0] = _CMD_RREG | 3
        for i in range(1, 5):
            self._tx[i] = 0
        self.cs(0)
        self.spi.write_readinto(self._tx, self._rx)
        self.cs(1)
        return bytes(self._rx[1:5])

    def verify(self):
        """Read the registers back; OSError if they differ from what was written."""
        if self.registers() != bytes(self._regs):
            raise OSError("ADS1220: register read-back differs (wiring or SPI mode?)")

    def power_down(self):
        """POWERDOWN command (a START wakes the chip)."""
        self._command(_CMD_POWERDOWN)

    # -------------------------------------------------------------- settings
    def set_mux(self, mux):
        """Select the input pair (MUX_* constant); written only when it changed."""
        r0 = (self._regs[0] & 0x0F) | ((mux & 0x0F) << 4)
        if r0 != self._regs[0]:
            self._write_reg(0, r0)

    def set_burnout(self, on):
        """The 10 uA burn-out current sources (reg 1 BCS) on or off."""
        r1 = (self._regs[1] | _R1_BCS) if on else (self._regs[1] & ~_R1_BCS)
        if r1 != self._regs[1]:
            self._write_reg(1, r1)

    def _set_ts(self, on):
        r1 = (self._regs[1] | _R1_TS) if on else (self._regs[1] & ~_R1_TS)
        if r1 != self._regs[1]:
            self._write_reg(1, r1)

    # -------------------------------------------------------------- conversions
    def _wait_ready(self):
        drdy = self.drdy
        if drdy is None:
            self._sleep_ms(self.conversion_ms)
            return
        waited = 0
        while drdy.value():
            if waited >= self.timeout_ms:
                raise OSError("ADS1220: no data ready after %d ms" % waited)
            self._sleep_ms(1)
            waited += 1

    def read_code(self):
        """Start one conversion, wait for it and return the signed 24-bit code."""
        self._command(_CMD_START)
        self._wait_ready()
        tx = self._tx4
        rx = self._rx4
        tx[0] = _CMD_RDATA
        tx[1] = 0
        tx[2] = 0
        tx[3] = 0
        self.cs(0)
        self.spi.write_readinto(tx, rx)
        self.cs(1)
        code = (rx[1] << 16) | (rx[2] << 8) | rx[3]
        if code & _FULL:
            code -= 2 * _FULL  # two's complement (8.5.2)
        return code

    def read_uv(self, mux):
        """Differential input `mux` in microvolts: code * (2 Vref / gain) / 2^24."""
        self.set_mux(mux)
        return self.read_code() * self.uv_per_code

    def saturated(self, code):
        """True if `code` is at (or within 0.1 % of) either end of the range."""
        return code >= _FULL - (_FULL >> 10) or code <= -_FULL + (_FULL >> 10)

    def temperature_c(self):
        """Internal temperature sensor in deg C (reg 1 TS; 14-bit, 0.03125 C per LSB)."""
        self._set_ts(True)
        try:
            code = self.read_code() >> 10  # 14-bit left-justified in 24 bits (8.3.13)
        finally:
            self._set_ts(False)
        return code * 0.03125
