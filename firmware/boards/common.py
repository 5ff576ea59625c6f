"""What every board builds, from its pin map and board.json.

A board file (pico.py, pico_w.py, esp32.py) holds only its PINS dict and a
`build(config, clock=None)` that imports `machine` and calls `build` here.
The result is a dict:

  channels  one dict per channel: "tc" (read_uv), "cj" (read_c), "heater"
            (set_ma, read_ma, read_v, off, set_polarity), "relays" (two Relay)
  clock     ticks_ms, ticks_diff, sleep_ms, sleep_us (MicroPython's `time`)
  display   drivers.display.Display, or None (none configured or none answers)
  led       the status LED pin
  notes     list of boot messages (e.g. "display: none at 0x3c")

Chips, addresses and circuit values are those of hardware/README.md:
ADS1220 on SPI (mode 1), AIN0-AIN1 channel 1 and AIN2-AIN3 channel 2, or an
ADS1115 at 0x48 for the budget option; ADS1115 at 0x49 reads the heater
sense (AIN0, AIN2; R_s = 1.00 ohm, +/-0.256 V) and the heater voltage
(AIN1, AIN3: a difference amplifier of gain 0.5, read at +/-4.096 V);
MCP4725 at 0x60 (channel 1) and 0x61 (channel 2) through a 12.1 k / 1.00 k
divider, or filtered PWM; TMP117 at 0x4A, or the ADS1220's internal sensor;
SSD1306 at 0x3C. The I2C bus is scanned first: a chip that does not answer
stops the boot with its name (the display only leaves a note).
"""

from drivers import ads1115
from drivers import ads1220
from drivers.ads1115 import ADS1115
from drivers.heater_source import HeaterSource
from drivers.relay import Relay

DEFAULTS = {
    "adc": "ads1220",  # or "ads1115"
    "cj": "tmp117",  # or "adc": the ADS1220's internal sensor
    "dac": "mcp4725",  # or "pwm"
    "channels": 2,
    "display": True,
    "relay_active_high": True,
    "adc_rate_sps": 20,
    "v_divider": 2.0,  # heater voltage = 2 x AIN1: the read-back amplifier's gain is 0.5
    "dead_time_us": 200,
    "bridge_enable": False,
    "i2c_hz": 400000,
    "spi_hz": 1000000,
    "pwm_hz": 100000,
}
CHOICES = {"adc": ("ads1220", "ads1115"), "cj": ("tmp117", "adc"), "dac": ("mcp4725", "pwm")}

_TC_MUX_1220 = (ads1220.MUX_AIN0_AIN1, ads1220.MUX_AIN2_AIN3)
_TC_MUX_1115 = (ads1115.MUX_AIN0_AIN1, ads1115.MUX_AIN2_AIN3)
_SENSE_MUX = (ads1115.MUX_AIN0_GND, ads1115.MUX_AIN2_GND)
_VOLT_MUX = (ads1115.MUX_AIN1_GND, ads1115.MUX_AIN3_GND)
ADDR_TC_1115 = 0x48
ADDR_SENSE = 0x49
ADDR_DAC = (0x60, 0x61)
ADDR_TMP117 = 0x4A  # ADD0 tied to SDA
ADDR_DISPLAY = 0x3C
# DAC full scale (VREF = VDD = 3.3 V) at the sink: Rbot / (Rtop + Rbot) = 1.00 k / 13.1 k
SET_FULL_SCALE_V = 3.3 * 1.00 / (12.1 + 1.00)
VOLT_FSR_V = 4.096  # read-back amplifier output 0..2.75 V


def settings(config):
    """board.json's hardware keys with defaults filled in; ValueError names a bad one."""
    out = {}
    for key in DEFAULTS:
        out[key] = config.get(key, DEFAULTS[key])
    for key in CHOICES:
        if out[key] not in CHOICES[key]:
            raise ValueError("board.json: %s must be one of %s, not %r"
                             % (key, ", ".join(CHOICES[key]), out[key]))
    n = out["channels"]
    if not isinstance(n, int) or isinstance(n, bool) or not 1 <= n <= 2:
        raise ValueError("board.json: channels must be 1 or 2, not %r" % (n,))
    if out["cj"] == "adc" and out["adc"] != "ads1220":
        raise ValueError("board.json: cj 'adc' needs adc 'ads1220' (the ADS1115 has no sensor)")
    return out


class SystemClock:
    """The core's clock on CPython (MicroPython's `time` module is used as it is)."""

    def __init__(self):
        import time

        self._time = time

    def ticks_ms(self):
        return int(self._time.monotonic() * 1000)

    def ticks_us(self):
        return int(self._time.monotonic() * 1000000)

    def ticks_diff(self, a, b):
        return a - b

    def sleep_ms(self, ms):
        self._time.sleep(ms * 0.001)

    def sleep_us(self, us):
        self._time.sleep(us * 1e-6)


def system_clock():
    """MicroPython's `time` (ticks_ms, ticks_diff, sleep_ms, sleep_us) or SystemClock."""
    import time

    if hasattr(time, "ticks_ms"):
        return time
    return SystemClock()


def expected(s):
    """{address: chip name} the settings need on the I2C bus."""
    out = {ADDR_SENSE: "ADS1115 heater read-back"}
    if s["adc"] == "ads1115":
        out[ADDR_TC_1115] = "ADS1115 thermocouple ADC"
    if s["cj"] == "tmp117":
        out[ADDR_TMP117] = "TMP117 cold junction"
    if s["dac"] == "mcp4725":
        for k in range(s["channels"]):
            out[ADDR_DAC[k]] = "MCP4725 heater %d" % (k + 1)
    return out


def check_bus(i2c, chips, notes):
    """OSError naming the first chip that does not answer; notes list what else answers."""
    found = i2c.scan()
    for addr in sorted(chips):
        if addr not in found:
            raise OSError("i2c: no answer at 0x%02x (%s)" % (addr, chips[addr]))
    extra = [a for a in found if a not in chips and a != ADDR_DISPLAY]
    if extra:
        notes.append("i2c: unexpected devices at %s" % ", ".join("0x%02x" % a for a in extra))


def build(config, pins, machine, clock=None):
    """Make the buses and drivers of one board (see the module docstring)."""
    s = settings(config)
    if clock is None:
        clock = system_clock()
    Pin = machine.Pin
    notes = []
    i2c = machine.I2C(pins["i2c"], scl=Pin(pins["scl"]), sda=Pin(pins["sda"]), freq=s["i2c_hz"])
    n = s["channels"]
    if s["dac"] == "mcp4725":  # heaters off first, even if the boot stops below
        from drivers.mcp4725 import MCP4725

        found = i2c.scan()
        for k in range(n):
            if ADDR_DAC[k] in found:
                MCP4725(i2c, ADDR_DAC[k]).off()
    check_bus(i2c, expected(s), notes)

    # thermocouple inputs
    adc = None
    if s["adc"] == "ads1220":
        from drivers.ads1220 import ADS1220
        from drivers.tc_input import TcInput

        spi = machine.SPI(pins["spi"], baudrate=s["spi_hz"], polarity=0, phase=1,
                          sck=Pin(pins["sck"]), mosi=Pin(pins["mosi"]), miso=Pin(pins["miso"]))
        cs = Pin(pins["cs"], Pin.OUT, value=1)
        drdy = Pin(pins["drdy"], Pin.IN)
        adc = ADS1220(spi, cs, drdy=drdy, rate_sps=s["adc_rate_sps"],
                      reject_50_60=s["adc_rate_sps"] == 20, sleep_ms=clock.sleep_ms)
        adc.verify()
        tcs = [TcInput(adc, _TC_MUX_1220[k]) for k in range(n)]
    else:
        from drivers.tc_input import Ads1115Input

        tc_adc = ADS1115(i2c, ADDR_TC_1115, sleep_ms=clock.sleep_ms)
        tcs = [Ads1115Input(tc_adc, _TC_MUX_1115[k]) for k in range(n)]

    # cold junction: one sensor at the connector block serves both channels
    if s["cj"] == "tmp117":
        from drivers.cj_sensor import Tmp117Junction
        from drivers.tmp117 import TMP117

        cj = Tmp117Junction(TMP117(i2c, ADDR_TMP117))
    else:
        from drivers.cj_sensor import AdcJunction

        cj = AdcJunction(adc)

    # heater sources
    sense = ADS1115(i2c, ADDR_SENSE, sleep_ms=clock.sleep_ms)
    channels = []
    for k in range(n):
        if s["dac"] == "mcp4725":
            dac = MCP4725(i2c, ADDR_DAC[k], vref_v=3.3)
            if dac.power_on_code()[0] != 0:
                dac.save_power_on(0)  # the sink must start with no current
                notes.append("heater %d: DAC power-on code set to 0" % (k + 1))
        else:
            from drivers.pwm_dac import PwmDac

            pwm = machine.PWM(Pin(pins["pwm"][k]))  # older ports take no keywords here
            pwm.freq(s["pwm_hz"])
            dac = PwmDac(pwm, vref_v=3.3)  # sets duty 0 first
        pol = Pin(pins["polarity"][k], Pin.OUT, value=1)
        en = Pin(pins["enable"][k], Pin.OUT, value=0) if s["bridge_enable"] else None
        heater = HeaterSource(dac, sense, _SENSE_MUX[k], _VOLT_MUX[k], polarity_pin=pol,
                              enable_pin=en, set_full_scale_v=SET_FULL_SCALE_V,
                              v_divider=s["v_divider"], volt_fsr_v=VOLT_FSR_V,
                              dead_time_us=s["dead_time_us"], sleep_us=clock.sleep_us)
        hi = s["relay_active_high"]
        relays = [Relay(Pin(p, Pin.OUT, value=0 if hi else 1), hi, "ch%d-relay%d" % (k + 1, j + 1))
                  for j, p in enumerate(pins["relays"][k])]
        channels.append({"tc": tcs[k], "cj": cj, "heater": heater, "relays": relays})

    display = None
    if s["display"]:
        from drivers.display import Display
        from drivers.ssd1306 import SSD1306

        try:
            display = Display(SSD1306(i2c, 128, 64, ADDR_DISPLAY), config.get("unit", "TORR"))
        except OSError:
            notes.append("display: none at 0x%02x" % ADDR_DISPLAY)
    led = Pin(pins["led"], Pin.OUT, value=0)
    return {"channels": channels, "clock": clock, "display": display, "led": led, "notes": notes,
            "i2c": i2c}
