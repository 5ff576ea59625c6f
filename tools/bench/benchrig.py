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

from tcgauge.sim import chamber, rig  # noqa: E402
from tcgauge.sim.bench import Bench  # noqa: E402
from tcgauge.sim.rig import BASE_PA, drive, limits  # noqa: E402,F401  (used by the benchmarks)
from tcgauge.sim.simtable import make_table  # noqa: E402

TORR = 101325.0 / 760.0  # NIST SP 811 B.8
TABLE = make_table("wren-demo", "N2", 64, 0.05, 500.0)


def channels(bench, table=TABLE, **kw):
    return rig.channels(bench, table, **kw)


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
