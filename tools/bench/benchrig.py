"""Shared set-up of the controller benchmarks: simulated bench, table, limits, driving.

The table is made from the simulator's steady state for the same profile and
gas (tcgauge.sim.simtable), so table and tube agree and what a benchmark
measures is the controller. The chamber is the invented "Larkspur bell jar"
(tcgauge.sim.chamber.LARKSPUR); heater limits are invented demo values.
"""

import json
import os
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
if os.path.join(ROOT, "firmware") not in sys.path:
    sys.path.insert(0, os.path.join(ROOT, "firmware"))

from gaugecore.channel import Channel  # noqa: E402
from gaugecore.controller import Controller  # noqa: E402
from tcgauge.sim import chamber  # noqa: E402
from tcgauge.sim.bench import Bench  # noqa: E402
from tcgauge.sim.simtable import make_table  # noqa: E402
from tcgauge.sim.tube import steady_state  # noqa: E402

TORR = 101325.0 / 760.0  # NIST SP 811 B.8
BASE_PA = chamber.LARKSPUR.base_pressure_pa
TABLE = make_table("wren-demo", "N2", 64, 0.05, 500.0)


def limits():
    """Invented heater range of the demo tube; zero target = steady EMF at base."""
    e_base = float(steady_state("wren-demo", "N2", BASE_PA, 0.165, 22.0, 0.0).emf_mv)
    return {"nominal_ma": 165.0, "min_ma": 120.0, "max_ma": 200.0, "zero_emf_mv": e_base}


def channels(bench, table=TABLE, **kw):
    return [Channel(i, c.tc, c.cj, c.heater, c.relays, table, limits(), **kw)
            for i, c in enumerate(bench.channels)]


def drive(bench, chans, until_ms, on_reading=None, at=None):
    """Step the channels at each due time until until_ms; `at` = {time_ms: fn}."""
    ctl = Controller(chans, bench.clock, on_reading=on_reading)
    clock = bench.clock
    pending = sorted((at or {}).items())
    while clock.ticks_ms() < until_ms:
        now = clock.ticks_ms()
        while pending and pending[0][0] <= now:
            pending.pop(0)[1]()
        ctl.step(now)
        nxt = min(c.next_ms for c in chans)
        if pending and pending[0][0] < nxt:
            nxt = pending[0][0]
        if nxt > clock.ticks_ms():
            clock.sleep_ms(nxt - clock.ticks_ms())


def zero_results(seed=0):
    """Vacuum zero of both channels at base: list of ZeroResult."""
    bench = Bench("wren-demo", scenario=chamber.static(BASE_PA), seed=seed)
    chans = channels(bench)
    zs = []
    drive(bench, chans, 600000, at={120000: lambda: zs.extend(c.start_zero(120000) for c in chans)})
    for z in zs:
        if z.state != "done":
            raise RuntimeError("vacuum zero failed: %s" % z.reason)
    return [z.result for z in zs]


def std(xs):
    m = sum(xs) / len(xs)
    return (sum((x - m) ** 2 for x in xs) / len(xs)) ** 0.5


def emit(doc):
    """Print the benchmark's JSON document (one line) and return it."""
    print(json.dumps(doc, sort_keys=True))
    return doc
