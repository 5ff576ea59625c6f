"""Fake buses and chips for the driver tests: each models the chip's registers
and conversion formulas as its datasheet states them, independently of the
driver (the drivers are never imported here).

- FakeClock: milliseconds and microseconds, moved only by sleep_ms/sleep_us.
- FakePin: records every level written; `value()` reads it.
- FakeSPI: routes a transfer to the device whose CS pin is low.
- FakeI2C: routes by 7-bit address; OSError(19) (ENODEV) for an absent one,
  as MicroPython's machine.I2C does.
- FakeADS1220 (SBAS501), FakeADS1115 (SBAS444), FakeMCP4725 (DS22039),
  FakeTMP117 (SNOS758), FakeSSD1306 (Solomon Systech SSD1306 rev 1.1).
"""


class FakeClock:
    def __init__(self):
        self.us = 0

    def ticks_ms(self):
        return self.us // 1000

    def ticks_us(self):
        return self.us

    def ticks_diff(self, a, b):
        return a - b

    def sleep_ms(self, ms):
        self.us += int(ms * 1000)

    def sleep_us(self, us):
        self.us += int(us)


class FakePin:
    """machine.Pin look-alike: `pin(v)`, `pin.value(v)`, `pin.value()`; `history` of writes."""

    def __init__(self, name="", value=0, clock=None):
        self.name = name
        self._v = value
        self.clock = clock
        self.history = []  # (time_us, level)

    def value(self, v=None):
        if v is None:
            return self._v
        self._v = 1 if v else 0
        self.history.append((self.clock.us if self.clock else 0, self._v))
        return None

    def __call__(self, v=None):
        return self.value(v)

    on = lambda self: self.value(1)  # noqa: E731
    off = lambda self: self.value(0)  # noqa: E731


class FakeSPI:
    """An SPI bus: devices are (cs_pin, chip) with chip.transfer(bytes) -> bytes."""

    def __init__(self):
        self.devices = []
        self.transfers = 0

    def attach(self, cs, chip):
        self.devices.append((cs, chip))

    def _selected(self):
        sel = [chip for cs, chip in self.devices if cs.value() == 0]
        if len(sel) != 1:
            raise AssertionError("SPI transfer with %d devices selected" % len(sel))
        return sel[0]

    def write(self, buf):
        self.transfers += 1
        self._selected().transfer(bytes(buf))

    def write_readinto(self, tx, rx):
        self.transfers += 1
        out = self._selected().transfer(bytes(tx))
        for i in range(len(rx)):
            rx[i] = out[i]


class FakeI2C:
    """An I2C bus of chips with the mem/plain calls of machine.I2C."""

    def __init__(self):
        self.chips = {}

    def attach(self, address, chip):
        self.chips[address] = chip

    def _chip(self, addr):
        if addr not in self.chips:
            raise OSError(19)  # ENODEV: no ACK
        return self.chips[addr]

    def scan(self):
        return sorted(self.chips)

    def writeto_mem(self, addr, reg, buf):
        self._chip(addr).write_reg(reg, bytes(buf))

    def readfrom_mem_into(self, addr, reg, buf):
        data = self._chip(addr).read_reg(reg, len(buf))
        for i in range(len(buf)):
            buf[i] = data[i]

    def writeto(self, addr, buf):
        self._chip(addr).write(bytes(buf))
        return len(buf)

    def writevto(self, addr, vector):
        self._chip(addr).write(b"".join(bytes(v) for v in vector))

    def readfrom_into(self, addr, buf):
        data = self._chip(addr).read(len(buf))
        for i in range(len(buf)):
            buf[i] = data[i]


def _twos(value, bits):
    return value & ((1 << bits) - 1)


class FakeADS1220:
    """ADS1220 per SBAS501.

    vin: {mux code: volts} for the differential inputs (8.6.1.1 Table 19 codes);
    open_mux: set of mux codes whose thermocouple is open; r_loop_ohm: resistance
    the 10 uA burn-out sources see when closed; temp_c: die temperature.
    """

    GAINS = (1, 2, 4, 8, 16, 32, 64, 128)  # 8.6.1.1 reg 0 GAIN[2:0]
    RATES = (20, 45, 90, 175, 330, 600, 1000)  # 8.6.1.2 reg 1 DR[2:0], normal mode
    IBURN_A = 10e-6  # 8.3.10: burn-out current sources, 10 uA

    def __init__(self, clock, vref_v=2.048, noise_uv_rms=0.0, seed=1):
        self.clock = clock
        self.vref_v = vref_v
        # input noise: uniform, +/- sqrt(3) * rms, from a 32-bit xorshift so the
        # sequence is the same under CPython and MicroPython
        self.noise_uv_rms = noise_uv_rms
        self._rng = seed & 0xFFFFFFFF or 1
        self.regs = bytearray(4)  # reset values 00h (8.6.1)
        self.vin = {}
        self.open_mux = set()
        self.r_loop_ohm = 2010.0
        self.temp_c = 25.0
        self.data = 0
        self.ready_us = None
        self.drdy = FakePin("DRDY", 1)
        self.log = []  # decoded commands
        self.conversions = []  # (reg0, reg1, reg2) at each START

    # register fields
    def mux(self):
        return self.regs[0] >> 4

    def gain(self):
        return self.GAINS[(self.regs[0] >> 1) & 7]

    def rate_sps(self):
        return self.RATES[self.regs[1] >> 5]

    def transfer(self, tx):
        rx = bytearray(len(tx))
        c = tx[0]
        if c & 0xFE == 0x06:  # RESET 0000 011x
            self.log.append("RESET")
            self.regs = bytearray(4)
        elif c & 0xFE == 0x08:  # START/SYNC 0000 100x
            self.log.append("START")
            self._start()
        elif c & 0xFE == 0x02:  # POWERDOWN 0000 001x
            self.log.append("POWERDOWN")
        elif c & 0xF0 == 0x10:  # RDATA 0001 xxxx: 24 bits MSB first follow
            self.log.append("RDATA")
            d = _twos(self.data, 24)
            rx[1:4] = bytes(((d >> 16) & 0xFF, (d >> 8) & 0xFF, d & 0xFF))
            self.drdy.value(1)
        elif c & 0xF0 == 0x20:  # RREG 0010 rrnn
            rr, nn = (c >> 2) & 3, c & 3
            self.log.append("RREG %d %d" % (rr, nn + 1))
            for i in range(nn + 1):
                rx[1 + i] = self.regs[rr + i]
        elif c & 0xF0 == 0x40:  # WREG 0100 rrnn
            rr, nn = (c >> 2) & 3, c & 3
            if len(tx) != nn + 2:
                raise AssertionError("WREG of %d registers with %d data bytes" % (nn + 1, len(tx) - 1))
            self.log.append("WREG %d %d" % (rr, nn + 1))
            for i in range(nn + 1):
                self.regs[rr + i] = tx[1 + i]
        else:
            raise AssertionError("ADS1220 fake: unknown command 0x%02x" % c)
        return bytes(rx)

    def _noise_v(self):
        if not self.noise_uv_rms:
            return 0.0
        x = self._rng
        x ^= (x << 13) & 0xFFFFFFFF
        x ^= x >> 17
        x ^= (x << 5) & 0xFFFFFFFF
        self._rng = x
        return (x / 4294967295.0 * 2.0 - 1.0) * 1.7320508 * self.noise_uv_rms * 1e-6

    def input_v(self):
        mux = self.mux()
        v = self.vin.get(mux, 0.0)
        if callable(v):
            v = v()
        if self.regs[1] & 0x01:  # BCS: sources into AINp, sink from AINn (8.3.10)
            if mux in self.open_mux:
                return 10.0  # open input driven to the rail
            v += self.IBURN_A * self.r_loop_ohm
        elif mux in self.open_mux:
            v = 0.0
        return v + self._noise_v()

    def _start(self):
        self.conversions.append(bytes(self.regs[:3]))
        if self.regs[1] & 0x02:  # TS: temperature sensor mode (8.3.13)
            t14 = int(round(self.temp_c / 0.03125))  # 14-bit, 0.03125 C per LSB
            code = _twos(t14, 14) << 10  # left-justified in the 24-bit result
            if code & 0x800000:
                code -= 1 << 24
        else:
            # Table 16: 1 LSB = (2 Vref / gain) / 2^24; full scale clips at 7FFFFFh / 800000h
            code = int(round(self.input_v() * self.gain() / self.vref_v * (1 << 23)))
            code = max(-(1 << 23), min((1 << 23) - 1, code))
        self.data = code
        self.ready_us = self.clock.us + int(1e6 / self.rate_sps())  # one data period (from memory)
        self.drdy.value(1)

    def poll(self):
        """DRDY goes low when the conversion time has passed."""
        if self.ready_us is not None and self.clock.us >= self.ready_us:
            self.ready_us = None
            self.drdy.value(0)


class DrdyPin:
    """DRDY as the driver sees it: reading it lets the fake finish a conversion."""

    def __init__(self, chip):
        self.chip = chip

    def value(self, v=None):
        self.chip.poll()
        return self.chip.drdy.value()


class FakeADS1115:
    """ADS1115 per SBAS444. ain: list of 4 volts (or callables) against GND."""

    FSR = (6.144, 4.096, 2.048, 1.024, 0.512, 0.256, 0.256, 0.256)  # Table 8 PGA[2:0]
    RATES = (8, 16, 32, 64, 128, 250, 475, 860)  # Table 8 DR[2:0]
    # Table 8 MUX[2:0] -> (AINP, AINN); None is GND
    PAIRS = ((0, 1), (0, 3), (1, 3), (2, 3), (0, None), (1, None), (2, None), (3, None))

    def __init__(self, clock):
        self.clock = clock
        self.config = 0x8583  # reset value (9.6.3)
        self.conversion = 0
        self.ain = [0.0, 0.0, 0.0, 0.0]
        self.done_us = None
        self.starts = []  # config words that started a conversion

    def _v(self, i):
        if i is None:
            return 0.0
        v = self.ain[i]
        return v() if callable(v) else v

    def write_reg(self, reg, data):
        if reg == 1:
            word = (data[0] << 8) | data[1]
            self.config = word & 0x7FFF
            if word & 0x8000:  # OS = 1: start a single conversion (9.6.3)
                self.starts.append(word)
                p, n = self.PAIRS[(word >> 12) & 7]
                fsr = self.FSR[(word >> 9) & 7]
                # 9.3.3 / Table 3: code = Vin / FSR * 2^15, clipped to 8000h..7FFFh
                code = int(round((self._v(p) - self._v(n)) / fsr * 32768))
                self.conversion = max(-32768, min(32767, code))
                self.done_us = self.clock.us + int(1e6 / self.RATES[(word >> 5) & 7])
        elif reg in (2, 3):
            pass
        else:
            raise AssertionError("ADS1115 fake: write to register %d" % reg)

    def read_reg(self, reg, n):
        if reg == 0:
            w = _twos(self.conversion, 16)
        elif reg == 1:
            busy = self.done_us is not None and self.clock.us < self.done_us
            w = self.config | (0 if busy else 0x8000)  # OS reads 0 while converting
        else:
            raise AssertionError("ADS1115 fake: read of register %d" % reg)
        return bytes(((w >> 8) & 0xFF, w & 0xFF))[:n]


class FakeMCP4725:
    """MCP4725 per DS22039; vdd_v is VREF."""

    def __init__(self, vdd_v=3.3, eeprom_code=2048):
        # eeprom_code: what the chip was left holding; 2048 is invented for the tests
        # (a non-zero code, so the firmware's "power-on code to 0" step shows)
        self.vdd_v = vdd_v
        self.code = eeprom_code  # loads the EEPROM at power-on (5.4)
        self.pd = 0
        self.eeprom_code = eeprom_code
        self.eeprom_pd = 0
        self.eeprom_writes = 0
        self.writes = []

    def vout(self):
        # 4.1: VOUT = VREF * Dn / 4096; powered down: output loaded to ground (5.5)
        return 0.0 if self.pd else self.vdd_v * self.code / 4096.0

    def write(self, data):
        self.writes.append(data)
        if len(data) == 2:  # fast mode: C2 C1 = 00 (6.1.1, Figure 6-1)
            if data[0] & 0xC0:
                raise AssertionError("fast-mode write with C2 C1 != 00")
            self.pd = (data[0] >> 4) & 3
            self.code = ((data[0] & 0x0F) << 8) | data[1]
        elif len(data) == 3:  # C2 C1 C0 = 010 DAC, 011 DAC and EEPROM (Figure 6-2)
            cmd = data[0] >> 5
            if cmd not in (2, 3):
                raise AssertionError("MCP4725 fake: command %d" % cmd)
            self.pd = (data[0] >> 1) & 3
            self.code = (data[1] << 4) | (data[2] >> 4)
            if cmd == 3:
                self.eeprom_code, self.eeprom_pd = self.code, self.pd
                self.eeprom_writes += 1
        else:
            raise AssertionError("MCP4725 fake: %d-byte write" % len(data))

    def read(self, n):
        # Figure 6-3: status, DAC register (2 bytes), EEPROM (2 bytes)
        out = bytes((
            0x80 | (self.pd << 1),  # RDY/BSY = 1 (ready), POR = 0
            self.code >> 4,
            (self.code & 0x0F) << 4,
            (self.eeprom_pd << 5) | (self.eeprom_code >> 8),
            self.eeprom_code & 0xFF,
        ))
        return out[:n]


class FakeTMP117:
    """TMP117 per SNOS758: registers 0x00 temp, 0x01 config, 0x07 offset, 0x0F ID."""

    def __init__(self, temp_c=25.0, device_id=0x0117):
        self.temp_c = temp_c
        self.converted = True
        self.regs = {0x01: 0x0220, 0x07: 0x0000, 0x0F: device_id}  # reset values, Table 7-3
        self.writes = []

    def read_reg(self, reg, n):
        if reg == 0x00:
            if not self.converted:
                w = 0x8000  # -256 C: power-up value of Temp_Result (7.6.1.1)
            else:
                off = self.regs[0x07] - (0x10000 if self.regs[0x07] & 0x8000 else 0)
                w = _twos(int(round(self.temp_c / 0.0078125)) + off, 16)  # 7.8125 m C/LSB
        else:
            w = self.regs[reg]
        return bytes(((w >> 8) & 0xFF, w & 0xFF))[:n]

    def write_reg(self, reg, data):
        w = (data[0] << 8) | data[1]
        self.writes.append((reg, w))
        if reg == 0x01 and w & 0x0002:  # Soft_Reset (7.6.1.2)
            self.regs[0x01] = 0x0220
            return
        self.regs[reg] = w


class FakeSSD1306:
    """SSD1306 per the Solomon Systech datasheet: commands, horizontal addressing, GDDRAM."""

    ARGS = {0x81: 1, 0x20: 1, 0x21: 2, 0x22: 2, 0xA8: 1, 0xD3: 1, 0xD5: 1, 0xD9: 1,
            0xDA: 1, 0xDB: 1, 0x8D: 1}  # Table 9-1: commands with argument bytes

    def __init__(self):
        self.ram = [bytearray(128) for _ in range(8)]  # 8 pages x 128 columns
        self.on = False
        self.settings = {}
        self.commands = []
        self._pending = None
        self.col = (0, 127)
        self.page = (0, 7)
        self.cur = [0, 0]
        self.data_writes = 0

    def write(self, data):
        ctrl = data[0]
        if ctrl == 0x00:  # Co = 0, D/C# = 0: command bytes follow (8.1.5.2)
            for b in data[1:]:
                self._command(b)
        elif ctrl == 0x40:  # Co = 0, D/C# = 1: display data follows
            self.data_writes += 1
            for b in data[1:]:
                self._data(b)
        else:
            raise AssertionError("SSD1306 fake: control byte 0x%02x" % ctrl)

    def _command(self, b):
        if self._pending is not None:
            op, args, need = self._pending
            args.append(b)
            if len(args) == need:
                self._pending = None
                self._apply(op, args)
            return
        self.commands.append(b)
        if b in self.ARGS:
            self._pending = (b, [], self.ARGS[b])
        elif b in (0xAE, 0xAF):
            self.on = b == 0xAF
        else:
            self.settings[b & 0xF0 if 0x40 <= b <= 0x7F else b] = b

    def _apply(self, op, args):
        self.settings[op] = tuple(args)
        if op == 0x21:
            self.col = (args[0], args[1])
            self.cur[1] = args[0]
        elif op == 0x22:
            self.page = (args[0], args[1])
            self.cur[0] = args[0]

    def _data(self, b):
        # 10.1.3 horizontal addressing: column pointer ++, wrap to the next page
        page, col = self.cur
        self.ram[page][col] = b
        col += 1
        if col > self.col[1]:
            col = self.col[0]
            page = page + 1 if page < self.page[1] else self.page[0]
        self.cur = [page, col]

    def pixel(self, x, y):
        return (self.ram[y // 8][x] >> (y % 8)) & 1
