"""A fake `machine` module wired to fake chips: the reference hardware on a bench.

`World(pins)` holds the chips of boards/common.py's address map on one I2C
bus and one SPI bus, plus a lumped circuit after hardware/README.md: each
heater sink holds V(R_s) = DAC VOUT * 1.00 k / (12.1 k + 1.00 k) (an ideal
op-amp sink behind the set divider), the read-back amplifier gives 0.5 x the
heater voltage, the heater (invented 1.5 ohm, the Wren demo tube) sits across
the H-bridge, and the thermocouple EMF is `emf_at_165_mv * (I / 165 mA)^2`
(heating power ~ I^2 at constant resistance; invented demo scale).
`world.module()` is the object to put in sys.modules["machine"]; it runs
under CPython and MicroPython alike.
"""

import fake_chips as fc


class Namespace:
    """Stands in for the module object (MicroPython cannot make module instances)."""


class World:
    def __init__(self, pins, emf_at_165_mv=(5.0, 7.0), temp_c=25.0, with_display=True,
                 dac_eeprom_code=2048, with_tc1115=False):
        self.pins_map = pins
        self.clock = fc.FakeClock()
        self.pins = {}
        self.spi = fc.FakeSPI()
        self.spi_args = None
        self.i2c = fc.FakeI2C()
        self.i2c_args = None
        self.pwms = []
        self.emf_at_165_mv = emf_at_165_mv
        self.r_heater_ohm = 1.5  # invented: Wren demo tube heater
        # 0.15 uV rms input noise: the order of the ADS1220's figure at 20 SPS, gain 32
        # (SBAS501 noise tables, from memory); a real converter never repeats exactly
        self.ads1220 = fc.FakeADS1220(self.clock, noise_uv_rms=0.15)
        self.ads1220.temp_c = temp_c
        self.pins[pins["drdy"]] = fc.DrdyPin(self.ads1220)
        self.spi.attach(self.pin(pins["cs"]), self.ads1220)
        self.sense = fc.FakeADS1115(self.clock)
        self.tc1115 = fc.FakeADS1115(self.clock)
        self.dacs = [fc.FakeMCP4725(3.3, dac_eeprom_code), fc.FakeMCP4725(3.3, dac_eeprom_code)]
        self.tmp117 = fc.FakeTMP117(temp_c)
        self.oled = fc.FakeSSD1306()
        self.i2c.attach(0x49, self.sense)
        self.i2c.attach(0x60, self.dacs[0])
        self.i2c.attach(0x61, self.dacs[1])
        self.i2c.attach(0x4A, self.tmp117)  # ADD0 to SDA (hardware/README.md)
        if with_display:
            self.i2c.attach(0x3C, self.oled)
        for k in (0, 1):
            self.sense.ain[2 * k] = (lambda k=k: abs(self.current_a(k)) * 1.00)
            self.sense.ain[2 * k + 1] = (lambda k=k: abs(self.current_a(k)) * self.r_heater_ohm * 0.5)
        self.ads1220.vin[0x0] = lambda: self.emf_v(0)  # AIN0-AIN1
        self.ads1220.vin[0x5] = lambda: self.emf_v(1)  # AIN2-AIN3
        if with_tc1115:  # the budget option: thermocouples on an ADS1115 at 0x48
            self.i2c.attach(0x48, self.tc1115)
            self.tc1115.ain = [lambda: self.emf_v(0), 0.0, lambda: self.emf_v(1), 0.0]

    def forget(self):
        """Empty every record the fakes keep (pin histories, chip logs), for heap measurements."""
        chips = [self.ads1220, self.ads1220.drdy, self.sense, self.tc1115, self.tmp117, self.oled]
        chips += self.dacs + self.pwms
        for obj in chips + list(self.pins.values()):
            for name in ("history", "log", "conversions", "starts", "writes", "commands", "duties"):
                rec = getattr(obj, name, None)
                if isinstance(rec, list):
                    del rec[: len(rec) - 1 if name == "duties" else len(rec)]  # a PWM reads its last duty

    def pin(self, pid):
        if pid not in self.pins:
            self.pins[pid] = fc.FakePin(str(pid), 0, self.clock)
        return self.pins[pid]

    def current_a(self, k):
        i = self.dacs[k].vout() * (1.00 / (12.1 + 1.00)) / 1.00
        pol = self.pin(self.pins_map["polarity"][k]).value()
        return i if pol else -i

    def emf_v(self, k):
        i = self.current_a(k)
        return self.emf_at_165_mv[k] * 1e-3 * (i / 0.165) ** 2

    def module(self):
        world = self
        m = Namespace()

        class Pin:
            IN = 0
            OUT = 1
            PULL_UP = 2

            def __new__(cls, pid, mode=None, pull=None, value=None):
                p = world.pin(pid)
                if value is not None:
                    p.value(value)
                return p

        def SPI(bus_id, baudrate=1000000, polarity=0, phase=0, sck=None, mosi=None, miso=None):
            world.spi_args = (bus_id, baudrate, polarity, phase)
            return world.spi

        def I2C(bus_id, scl=None, sda=None, freq=400000):
            world.i2c_args = (bus_id, scl, sda, freq)
            return world.i2c

        class PWM:
            def __init__(self, pin, freq=1000, duty_u16=0):
                self.pin, self.hz, self.duties = pin, freq, [duty_u16]
                world.pwms.append(self)

            def freq(self, f=None):
                if f is not None:
                    self.hz = f
                return self.hz

            def duty_u16(self, v=None):
                if v is not None:
                    self.duties.append(v)
                return self.duties[-1]

        m.Pin, m.SPI, m.I2C, m.PWM = Pin, SPI, I2C, PWM
        return m


class HostPort:
    """The host's end of the USB serial, as gaugecore.service sees a port.

    `send(data)` queues bytes for the device; `read_available()` hands them
    over; `write(data)` takes at most `budget` bytes a call (None: all), like
    a link that is sometimes busy; `lines()` returns the complete lines
    received so far (and forgets them)."""

    def __init__(self, budget=None):
        self.inbox = b""
        self.received = b""
        self.budget = budget

    def send(self, data):
        self.inbox += data

    def read_available(self):
        data = self.inbox
        self.inbox = b""
        return data

    def write(self, data):
        k = len(data) if self.budget is None or self.budget > len(data) else self.budget
        self.received += bytes(data[:k])
        return k

    def lines(self):
        text = self.received.decode()
        cut = text.rfind("\n") + 1
        self.received = text[cut:].encode()
        return text[:cut].split("\n")[:-1]
