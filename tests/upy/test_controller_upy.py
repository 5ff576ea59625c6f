"""The controller under the real MicroPython (WebAssembly) against CPython.

1. Replay: the CPython simulator runs two channels while every driver call
   is recorded (method, arguments, return value or exception). MicroPython
   rebuilds the same controller on replay objects fed from that trace and
   must produce the same readings and states (floats within 1e-9 relative)
   and issue the same commands to the hardware.
2. Heap: gc.mem_alloc() after gc.collect() does not grow over 1e4 samples,
   and the controller's own data (two channels, two tables) stays under
   64 KB after start-up.
"""

import json
import os

import pytest

from gaugecore import tablefile
from gaugecore.controller import Controller
from gaugecore.table import MAX_POINTS
from tcgauge.sim import chamber
from tcgauge.sim.bench import Bench
from tcgauge.sim.simtable import make_table

pytestmark = pytest.mark.upy

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

# Built the same way under both interpreters.
BUILD = '''
from gaugecore.channel import Channel
from gaugecore.setpoint import Setpoint
from gaugecore.zero import ZeroResult

LIMITS = {"nominal_ma": 165.0, "min_ma": 120.0, "max_ma": 200.0, "zero_emf_mv": 12.3}
ZERO = {"heater_ma": 165.3, "emf_mv": 12.32, "c_e_j_per_mv": 0.0569,
        "g_e_w_per_mv": 0.00239, "a2_w_per_mv2": 0.000104, "tau_s": 11.9}


def build(hw, tables):
    chans = []
    for i in range(2):
        tc, cj, heater, relays = hw[i]
        ch = Channel(i, tc, cj, heater, relays, tables[i], LIMITS)
        ch.add_setpoint(Setpoint(relays[0], 2.0, 5.0, "below", 1000, "SP1"))
        chans.append(ch)
    chans[1].apply_zero(ZeroResult.from_dict(ZERO))
    chans[1].set_fast(True)
    return chans


def reading(ch):
    return [ch.index, ch.seq, ch.pressure_pa, ch.state, ch.fault, ch.emf_mv, ch.cj_c,
            ch.heater_ma, ch.time_ms]
'''


class Recorder:
    """Wraps a driver object; logs (method, args, result or ['E', message])."""

    def __init__(self, target, log, methods):
        self._target = target
        self._log = log
        for m in methods:
            setattr(self, m, self._wrap(m))

    def _wrap(self, name):
        fn = getattr(self._target, name)

        def call(*args):
            try:
                r = fn(*args)
            except OSError as exc:
                self._log.append([name, list(args), ["E", str(exc)]])
                raise
            self._log.append([name, list(args), r])
            return r

        return call


HW_METHODS = (
    ("tc", ("read_uv",)),
    ("cj", ("read_c",)),
    ("heater", ("set_ma", "read_ma", "read_v", "off", "set_polarity")),
)


def record_run(t_end_ms=40000):
    """Run the simulator with recorders; return (trace, nows, readings, table texts)."""
    sc = chamber.Scenario("upy", pressure_pa=10.0).hold(15).step(1.0, 60)
    sc.fault(25.0, "adc-fail", channel=0, clear_at_s=27.0)
    bench = Bench("wren-demo", scenario=sc, seed=0)
    texts = [tablefile.dumps(make_table("wren-demo", "N2", 48, 0.05, 500.0)),
             tablefile.dumps(tablefile.load(os.path.join(ROOT, "firmware", "tables", "demo_n2.json")))]
    tables = [tablefile.loads(t) for t in texts]
    trace = {}
    hw = []
    for i, sim in enumerate(bench.channels):
        objs = []
        for name, methods in HW_METHODS:
            key = "%d.%s" % (i, name)
            trace[key] = []
            objs.append(Recorder(getattr(sim, name), trace[key], methods))
        relays = []
        for k, r in enumerate(sim.relays):
            key = "%d.relay%d" % (i, k)
            trace[key] = []
            relays.append(Recorder(r, trace[key], ("set",)))
        objs.append(relays)
        hw.append(objs)
    ns = {}
    exec(BUILD, ns)
    chans = ns["build"](hw, tables)
    readings = []
    ctl = Controller(chans, bench.clock, on_reading=lambda c: readings.append(ns["reading"](c)))
    nows = []
    clock = bench.clock
    while clock.ticks_ms() < t_end_ms:
        now = clock.ticks_ms()
        nows.append(now)
        ctl.step(now)
        nxt = min(c.next_ms for c in chans)
        if nxt > clock.ticks_ms():
            clock.sleep_ms(nxt - clock.ticks_ms())
    return trace, nows, readings, texts


REPLAY = '''
import json, gc
from gaugecore import tablefile
from gaugecore.controller import Controller

with open("/data/trace.json") as f:
    DATA = json.load(f)
TRACE = DATA["trace"]
MISMATCH = []


class Replay:
    def __init__(self, key):
        self.key = key
        self.log = TRACE[key]
        self.i = 0

    def call(self, name, args):
        rec = self.log[self.i]
        self.i += 1
        if rec[0] != name or len(rec[1]) != len(args):
            MISMATCH.append([self.key, self.i, name, rec[0]])
        else:
            for a, b in zip(args, rec[1]):
                if a != b and abs(a - b) > 1e-9 * abs(b):
                    MISMATCH.append([self.key, self.i, name, a, b])
        r = rec[2]
        if isinstance(r, list) and len(r) == 2 and r[0] == "E":
            raise OSError(r[1])
        return r


class Tc(Replay):
    def read_uv(self):
        return self.call("read_uv", ())


class Cj(Replay):
    def read_c(self):
        return self.call("read_c", ())


class Heater(Replay):
    def set_ma(self, ma):
        return self.call("set_ma", (ma,))

    def read_ma(self):
        return self.call("read_ma", ())

    def read_v(self):
        return self.call("read_v", ())

    def off(self):
        return self.call("off", ())

    def set_polarity(self, s):
        return self.call("set_polarity", (s,))


class Relay(Replay):
    def set(self, on):
        return self.call("set", (on,))


hw = []
for i in range(2):
    hw.append((Tc("%d.tc" % i), Cj("%d.cj" % i), Heater("%d.heater" % i),
               [Relay("%d.relay0" % i), Relay("%d.relay1" % i)]))
tables = [tablefile.load("/data/table0.json"), tablefile.load("/data/table1.json")]
chans = build(hw, tables)
out = []


class NoClock:
    def ticks_ms(self):
        return 0


ctl = Controller(chans, NoClock(), on_reading=lambda c: out.append(reading(c)))
for now in DATA["nows"]:
    ctl.step(now)
print(json.dumps({"readings": out, "mismatch": MISMATCH[:20],
                  "used": [[h[0].i, h[1].i, h[2].i] for h in hw]}))
'''


def close(a, b):
    if isinstance(a, float) or isinstance(b, float):
        if a is None or b is None:
            return False
        return a == b or abs(a - b) <= 1e-9 * max(abs(a), abs(b))
    return a == b


def test_replayed_trace_gives_identical_readings(upy):
    trace, nows, readings, texts = record_run()
    states = {r[3] for r in readings}
    assert {"ok", "fault"} <= states  # the trace exercises the fault path (adc-fail at 25 s)
    assert len(readings) == 2 * 400
    files = {"trace.json": json.dumps({"trace": trace, "nows": nows}),
             "table0.json": texts[0], "table1.json": texts[1]}
    got = upy.run_json(BUILD + REPLAY, files=files, timeout_s=300)
    assert got["mismatch"] == []  # the same commands to the hardware, in the same order
    used = got["used"]
    for i in range(2):
        assert used[i] == [len(trace["%d.tc" % i]), len(trace["%d.cj" % i]),
                           len(trace["%d.heater" % i])]
    upy_readings = got["readings"]
    assert len(upy_readings) == len(readings)
    for a, b in zip(readings, upy_readings):
        assert all(close(x, y) for x, y in zip(a, b)), (a, b)


# In this WebAssembly build gc.collect() frees nothing while a synchronous
# stretch of Python runs (the interpreter's C stack is only scanned cleanly
# between awaits), so every measurement follows an `await`: the controller
# runs as it does on the board, through `await ctl.run(...)`.
HEAP = '''
import gc, math, asyncio


async def mem():
    await asyncio.sleep(0)
    gc.collect()
    return gc.mem_alloc()


base = await mem()
from gaugecore import tablefile
from gaugecore.channel import Channel
from gaugecore.controller import Controller
from gaugecore.setpoint import Setpoint
from gaugecore import coldjunction, faults, heater, response, sampler, thermocouple, zero
code = await mem() - base


class Tube:
    """A fake tube for the heap run: EMF from a formula of time, no state growth."""

    def __init__(self, k):
        self.k = k
        self.t = 0
        self.pol = 1
        self.ma = 0.0

    def read_uv(self):
        self.t += 1
        return 7000.0 - 2000.0 * math.sin(self.t * 0.0002 + self.k) + 0.3 * ((self.t * 7919) % 13)

    def read_c(self):
        return 22.0 + 0.01 * ((self.t * 31) % 7)

    def set_ma(self, ma):
        self.ma = ma

    def read_ma(self):
        return self.pol * self.ma

    def read_v(self):
        return self.pol * self.ma * 1.5e-3

    def off(self):
        self.ma = 0.0

    def set_polarity(self, s):
        self.pol = s


class Relay:
    def set(self, on):
        pass


LIMITS = {"nominal_ma": 165.0, "min_ma": 120.0, "max_ma": 200.0, "zero_emf_mv": 12.3}
tables = [tablefile.load("/data/table0.json"), tablefile.load("/data/table1.json")]
chans = []
for i in range(2):
    t = Tube(i)
    relays = [Relay(), Relay()]
    ch = Channel(i, t, t, t, relays, tables[i], LIMITS)
    ch.add_setpoint(Setpoint(relays[0], 2.0, 5.0, "below", 1000, "SP1"))
    ch.response.configure(0.0569, 0.000104)
    chans.append(ch)
chans[1].set_fast(True)


class Clock:
    def __init__(self):
        self.t = 0

    def ticks_ms(self):
        return self.t


clock = Clock()


async def sleep_ms(ms):
    clock.t += ms
    await asyncio.sleep(0)


ctl = Controller(chans, clock, sleep_ms=sleep_ms)
await ctl.run(period_ms=10, cycles=10)  # start-up through the asyncio loop
marks = [0] * 10  # made before the first measurement, so it does not grow
ctrl = [0] * 10
# control: the measurement alone (this build's await leaves 16-32 bytes a time)
for k in range(10):
    ctrl[k] = await mem() - base
start = await mem() - base
for k in range(10):
    for n in range(10000):  # 100 s: 1000 samples per channel
        ctl.step(clock.t)
        clock.t += 10
    marks[k] = await mem() - base
end = marks[-1]
import json
print(json.dumps({"code": code, "start": start, "end": end, "marks": marks, "ctrl": ctrl,
                  "samples": chans[0].seq + chans[1].seq,
                  "states": [chans[0].state, chans[1].state]}))
'''


def test_heap_flat_over_1e4_samples_and_under_64k(upy):
    # the largest tables the format allows (gaugecore.table.MAX_POINTS), wall model included
    texts = [tablefile.dumps(make_table("wren-demo", gas, MAX_POINTS, 0.05, 500.0)) for gas in ("N2", "He")]
    got = upy.run_json(HEAP, files={"table0.json": texts[0], "table1.json": texts[1]}, timeout_s=300)
    assert got["samples"] >= 2 * 10000
    assert got["states"] == ["ok", "ok"]
    data = got["start"] - got["code"]  # two channels, two tables, controller
    assert data < 64 * 1024, got
    # no growth: the heap after 1e4 samples a channel is what it was after the
    # first thousand, but for what the measuring itself leaves (the control)
    # first thousand: a leak of one byte a sample would add 10 kB. The bound
    # allows for this build's own residue of 16 bytes per await (the control
    # run of the measurement alone shows it; it is reclaimed now and then).
    marks, ctrl = got["marks"], got["ctrl"]
    assert ctrl[-1] - ctrl[1] >= 0 and ctrl[-1] - ctrl[1] <= 512, got
    assert max(marks) - min(marks) <= 1024, got
    assert marks[-1] - marks[0] <= 1024, got
