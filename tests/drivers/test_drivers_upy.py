"""The drivers under the real MicroPython interpreter (WebAssembly build, tools/upy).

1. The same scenario on the same fake chips gives bit-identical numbers and
   identical error messages under MicroPython and CPython (floats compared
   by their IEEE 754 bit patterns).
2. The read path allocates no buffers: gc.mem_alloc() per call is 0 for the
   integer paths and at most the boxed floats of the result arithmetic
   (16 bytes each in this build) for the float paths.
3. SSD1306 + display text through MicroPython's own framebuf: the fake panel's
   GDDRAM (Solomon Systech SSD1306 10.1.3 horizontal addressing) ends up equal
   to the driver's buffer, and the text lands in the rows it was drawn in.
"""

import contextlib
import io
import json
import os
import sys

import pytest

from gaugecore import record

pytestmark = pytest.mark.upy

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
sys.path.insert(0, os.path.join(ROOT, "tools", "upy"))
import upyrun  # noqa: E402


@pytest.fixture(scope="module")
def upy(request):
    conftest = request.config.pluginmanager.get_plugin(os.path.join(ROOT, "tests", "conftest.py"))
    conftest.require_tool("node")  # fails, never skips
    return upyrun


def files():
    with open(os.path.join(HERE, "fake_chips.py")) as f:
        return {"fake_chips.py": f.read()}


SCENARIO = r'''
import sys, json, struct, binascii
if "/data" not in sys.path:
    sys.path.append("/data")
import fake_chips as fc
from drivers import ads1115
from drivers.ads1220 import ADS1220
from drivers.ads1115 import ADS1115
from drivers.tmp117 import TMP117
from drivers.mcp4725 import MCP4725
from drivers.heater_source import HeaterSource
from drivers.tc_input import TcInput
from drivers.display import channel_text, sci, wrap

def h(x):
    if isinstance(x, float):
        return binascii.hexlify(struct.pack("<d", x)).decode()
    return x

out = []
def err(f):
    try:
        f()
    except (ValueError, OSError) as e:
        out.append(type(e).__name__ + ": " + str(e.args[0]))

clock = fc.FakeClock()
chip = fc.FakeADS1220(clock)
spi = fc.FakeSPI()
cs = fc.FakePin("CS", 1)
spi.attach(cs, chip)
adc = ADS1220(spi, cs, drdy=fc.DrdyPin(chip), sleep_ms=clock.sleep_ms)
for mv in (10.0, -3.2, 0.5, 15.0, 63.9, 100.0, -0.0123):
    chip.vin[0] = mv * 1e-3
    out.append(h(adc.read_uv(0)))
chip.noise_uv_rms = 0.5
chip.vin[0] = 0.004
for _ in range(3):
    out.append(h(adc.read_uv(0)))
chip.noise_uv_rms = 0.0
for t in (25.0, -25.0, 0.25, 128.0, 23.4):
    chip.temp_c = t
    out.append(h(adc.temperature_c()))
tc = TcInput(adc, 0, open_check_every=2)
chip.vin[0] = 0.0071
out.append(h(tc.read_uv()))
chip.open_mux.add(0)
tc.read_uv()
out.append(h(tc.read_uv()))
err(lambda: ADS1220(spi, cs, gain=3))
err(lambda: ADS1220(spi, cs, rate_sps=45))

bus = fc.FakeI2C()
a15 = fc.FakeADS1115(clock)
dchip = fc.FakeMCP4725(3.3, 0)
tchip = fc.FakeTMP117(21.3)
bus.attach(0x49, a15)
bus.attach(0x60, dchip)
bus.attach(0x48, tchip)
a = ADS1115(bus, 0x49, sleep_ms=clock.sleep_ms)
for v in (0.165, 0.0001, 0.3, -0.05):
    a15.ain[0] = v
    out.append(a.read_code(ads1115.MUX_AIN0_GND, 0.256))
    out.append(h(a.read_v(ads1115.MUX_AIN0_GND, 0.256)))
err(lambda: a.read_v(0, 0.3))
t = TMP117(bus, 0x48)
for c in (21.3, -40.0, 0.0078125, 99.99):
    tchip.temp_c = c
    out.append(h(t.temperature()))
tchip.converted = False
err(t.temperature)
dac = MCP4725(bus, 0x60)
hs = HeaterSource(dac, a, 4, 5, sleep_us=clock.sleep_us)
for ma in (165.0, 12.5, 249.9, 300.0):
    hs.set_ma(ma)
    out.append(dchip.code)
    a15.ain[0] = dchip.vout() * 0.250 / 3.3
    out.append(h(hs.read_ma()))
err(lambda: hs.set_polarity(-1))
err(lambda: dac.write(5000))
for x in (0.023, 2.3, 1000.0, 0.00996, 9.94, -0.5, 0.0, 101325.0, 1.333e-3):
    out.append(sci(x))
out.append(channel_text(1, 3.0664, "ok", None, "TORR"))
out.append(channel_text(2, None, "fault", "heater-open", "TORR"))
out.append(channel_text(1, 0.05, "under", None, "MICRON"))
out.append(wrap("1: FAULT heater-short", 16))
print(json.dumps(out))
'''


def run_cpython(code):
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        exec(compile(code, "<scenario>", "exec"), {"__name__": "scenario"})
    return json.loads(buf.getvalue().strip().splitlines()[-1])


def test_same_numbers_and_messages_on_both_interpreters(upy):
    sys.path.insert(0, HERE)
    cpy = run_cpython(SCENARIO)
    mpy = upy.run_json(SCENARIO, files=files())
    assert len(cpy) == 56
    assert mpy == cpy
    # spot checks of what both agree on (formulas of the datasheets)
    assert "ValueError: ADS1220 gain must be one of 1, 2, 4, 8, 16, 32, 64, 128" in cpy
    assert "OSError: TMP117 at 0x48: no conversion result yet" in cpy
    assert 21120 in cpy  # 0.165 V / 7.8125 uV (SBAS444 Table 3)
    assert 2703 in cpy  # 165 mA -> 0.165 V -> 0.165 / 0.250 * 4096 (DS22039 4.1)


ALLOC = r'''
import gc, json
from drivers.ads1220 import ADS1220
from drivers.ads1115 import ADS1115
from drivers.tmp117 import TMP117
from drivers.mcp4725 import MCP4725
from drivers.relay import Relay
from drivers.heater_source import HeaterSource
from drivers.tc_input import TcInput
from drivers.ssd1306 import SSD1306


class Pin:
    def __init__(self, v=1):
        self.v = v

    def __call__(self, v=None):
        if v is not None:
            self.v = v
        return self.v

    def value(self, v=None):
        if v is not None:
            self.v = v
        return self.v


class Spi:
    def write(self, buf):
        pass

    def write_readinto(self, tx, rx):
        rx[1] = 0x14
        rx[2] = 0
        rx[3] = 0


class I2c:
    def writeto_mem(self, a, r, b):
        pass

    def readfrom_mem_into(self, a, r, b):
        if r == 0x0F:
            b[0] = 0x01
            b[1] = 0x17
        else:
            b[0] = 0x8C
            b[1] = 0x80

    def writeto(self, a, b):
        pass

    def writevto(self, a, v):
        pass

    def readfrom_into(self, a, b):
        for i in range(len(b)):
            b[i] = 0


def sleep(ms):
    pass


adc = ADS1220(Spi(), Pin(), drdy=Pin(0), sleep_ms=sleep)
i2c = I2c()
a15 = ADS1115(i2c, 0x49, sleep_ms=sleep)
tmp = TMP117(i2c)
dac = MCP4725(i2c)
rel = Relay(Pin(0))
hs = HeaterSource(dac, a15, 4, 5, polarity_pin=Pin(), sleep_us=sleep)
hs.set_polarity(-1)
tc = TcInput(adc, 0, open_check_every=0)
tco = TcInput(adc, 0, open_check_every=1)
oled = SSD1306(i2c)


def nop():
    pass


def per_call(f, n=64):
    f()
    gc.collect()
    a = gc.mem_alloc()
    for _ in range(n):
        f()
    return (gc.mem_alloc() - a) // n


base = per_call(nop)
cases = (
    ("ads1220.read_code", lambda: adc.read_code()),
    ("ads1220.read_uv", lambda: adc.read_uv(0)),
    ("ads1115.read_code", lambda: a15.read_code(4, 0.256)),
    ("tmp117.temperature", lambda: tmp.temperature()),
    ("mcp4725.write", lambda: dac.write(2703)),
    ("relay.set", lambda: rel.set(True)),
    ("heater.set_ma", lambda: hs.set_ma(165.0)),
    ("heater.read_ma", lambda: hs.read_ma()),
    ("heater.read_v", lambda: hs.read_v()),
    ("tc.read_uv", lambda: tc.read_uv()),
    ("tc.read_uv+open_check", lambda: tco.read_uv()),
    ("ssd1306.show", lambda: oled.show()),
)
out = {"base": base, "float": per_call(lambda: 1.5 * adc.uv_per_code)}
for name, f in cases:
    out[name] = per_call(f) - base
print(json.dumps(out))
'''


def test_read_path_allocates_no_buffers(upy):
    got = upy.run_json(ALLOC)
    f = got["float"]  # bytes of one boxed float in this build
    assert f == 16
    for name in ("ads1220.read_code", "ads1115.read_code", "mcp4725.write", "relay.set", "ssd1306.show"):
        assert got[name] == 0, (name, got)
    # one float for the result
    for name in ("ads1220.read_uv", "tmp117.temperature", "tc.read_uv", "tc.read_uv+open_check",
                 "heater.read_ma", "heater.read_v"):
        assert got[name] == f, (name, got)
    # the set point: ma * factor, * 4096, + 0.5
    assert got["heater.set_ma"] == 3 * f, got


PANEL = r'''
import sys, json
if "/data" not in sys.path:
    sys.path.append("/data")
import fake_chips as fc
from drivers.ssd1306 import SSD1306
from drivers.display import Display


class Ch:
    def __init__(self, p, s, f=None):
        self.pressure_pa, self.state, self.fault = p, s, f


bus = fc.FakeI2C()
chip = fc.FakeSSD1306()
bus.attach(0x3C, chip)
panel = SSD1306(bus)
d = Display(panel, unit="TORR")
lines = d.update([Ch(3.0664, "ok"), Ch(None, "fault", "tc-open")])
ram = b"".join(bytes(p) for p in chip.ram)
rows = [sum(1 for x in range(128) if chip.ram[page][x]) for page in range(8)]
print(json.dumps({"lines": lines, "same": ram == bytes(panel.buffer), "rows": rows,
                  "fb": panel.fb is not None}))
'''


def test_display_through_micropython_framebuf(upy):
    got = upy.run_json(PANEL, files=files())
    assert got["fb"] is True
    assert got["lines"] == ["1: 2.3e-2 Torr ok", "2: FAULT tc-open"]  # 3.0664 Pa = 0.023 Torr
    assert got["same"] is True  # every byte arrived where the panel's addressing puts it
    rows = got["rows"]
    # pages 0 and 1: channel 1 (two pieces), page 2: channel 2, the rest blank (8x8 font: one page a line)
    assert rows[0] > 0 and rows[1] > 0 and rows[2] > 0
    assert rows[3:] == [0, 0, 0, 0, 0]


def board_files():
    """/data for a board run: the fakes, firmware/board.json and the demo table under board/."""
    data = files()
    with open(os.path.join(HERE, "fake_machine.py")) as f:
        data["fake_machine.py"] = f.read()
    fw = os.path.join(ROOT, "firmware")
    with open(os.path.join(fw, "board.json")) as f:
        data["board/board.json"] = f.read()
    with open(os.path.join(fw, "tables", "demo_n2.json")) as f:
        data["board/tables/demo_n2.json"] = f.read()
    return data


BOARD = r'''
import sys, json
if "/data" not in sys.path:
    sys.path.append("/data")
import fake_machine
from boards import pico
world = fake_machine.World(pico.PINS)
sys.modules["machine"] = world.module()
main = load_main()
port = fake_machine.HostPort(budget=40)
app = main.boot(root=ROOT, clock=world.clock, port=port)


def run(s):
    end = world.clock.us + int(s * 1000000)
    while world.clock.us < end:
        app.step()
        world.clock.sleep_ms(5)


run(6)
port.send(b"*IDN?\nMEAS? (@1,2)\nMEAS:EMF? (@1,2)\nSYST:ERR:COUN?\nCONF:RATE 5\nSYST:ERR?\nSYST:ERR?\n")
run(0.5)
port.send(b"SYST:ERR?\nSTR ON\n")
run(3)
port.send(b"STR OFF\n")
run(0.5)
out = [[c.state, c.pressure_pa, c.emf_mv, c.cj_c, c.heater_ma, c.seq] for c in app.channels]
out.append(port.lines())
out.append([main.rate_max_hz(app.hw["channels"]), app.service.records, app.service.dropped])
out.append(sorted(world.pins[17].history[:3]))
print(json.dumps(out))
'''


def test_whole_board_same_under_micropython(upy, tmp_path):
    """main.py, boards/, drivers/ and the core, booted on the fake board through
    gaugecore.assembly.build and served by gaugecore.service.Service: readings,
    replies, errors and stream records under MicroPython equal CPython's."""
    import importlib.util
    import shutil

    fw = os.path.join(ROOT, "firmware")
    mpy = upy.run_json('ROOT = "/data/board/"\nload_main = lambda: __import__("main")\n' + BOARD, files=board_files())

    (tmp_path / "tables").mkdir()
    shutil.copy(os.path.join(fw, "board.json"), str(tmp_path))
    shutil.copy(os.path.join(fw, "tables", "demo_n2.json"), str(tmp_path / "tables"))

    def load_main():
        spec = importlib.util.spec_from_file_location("tcgauge_board_main_b", os.path.join(fw, "main.py"))
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        return mod

    saved = sys.modules.get("machine")
    sys.path.insert(0, HERE)
    try:
        buf = io.StringIO()
        with contextlib.redirect_stdout(buf):
            exec(compile(BOARD, "<board>", "exec"), {"ROOT": str(tmp_path) + "/", "load_main": load_main})
        cpy = json.loads(buf.getvalue().strip().splitlines()[-1])
    finally:
        if saved is None:
            sys.modules.pop("machine", None)
        else:
            sys.modules["machine"] = saved
    assert mpy == cpy
    assert [c[0] for c in cpy[:2]] == ["ok", "ok"]
    lines = cpy[2]
    assert lines[0] == "tcgauge,TCGAUGE-2CH,0,0.1.0"  # IEEE 488.2 10.14
    assert lines[3] == "2"  # the boot notes in the error queue
    assert lines[4] == '-200,"Execution error;heater 1: DAC power-on code set to 0"'
    assert lines[5] == '-200,"Execution error;heater 2: DAC power-on code set to 0"'
    # SCPI-1999 -222: the board's ADS1220 at 20 SPS cannot sample two channels at 5 Hz
    assert lines[6] == '-222,"Data out of range;5 Hz not in 0.1..3.2 Hz"'
    recs = [record.decode(x) for x in lines[7:]]
    assert len(recs) >= 10 and [r.seq for r in recs] == list(range(len(recs)))
    assert cpy[3] == [3.2, len(recs), 0]


MEMORY = r'''
import sys, json, gc
if "/data" not in sys.path:
    sys.path.append("/data")
import fake_machine
from boards import pico
world = fake_machine.World(pico.PINS)
sys.modules["machine"] = world.module()
main = __import__("main")
port = fake_machine.HostPort()
app = main.boot(root="/data/board/", clock=world.clock, port=port)
for k in range(200):
    app.step()
    world.clock.sleep_ms(5)
port.lines()
port.send(b"*CLS\nDIAG:MEM:FREE?\nSYST:ERR?\n")  # *CLS: the boot notes out of the queue
for k in range(20):
    app.step()
    world.clock.sleep_ms(5)
lines = port.lines()
direct = app.device.memory_free()
free = gc.mem_free()
print(json.dumps([lines, direct, free, free + gc.mem_alloc()]))
'''


def test_board_reports_its_free_heap_under_micropython(upy):
    """DIAG:MEM:FREE? on the booted board is MicroPython's own gc.mem_free()
    after a collection (the interpreter's documented meaning of the number)."""
    lines, direct, free, heap = upy.run_json(MEMORY, files=board_files())
    assert lines[1] == '0,"No error"'
    reported = int(lines[0])  # NR1
    assert 0 < reported < heap
    # the facade's figure is gc.mem_free() itself: nothing is allocated between the two reads
    assert 0 <= direct - free < 256, (direct, free)
