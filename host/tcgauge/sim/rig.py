"""Run gaugecore channels on a simulated Bench: the loop tests and benchmarks share.

The board runs `Controller.run()` under asyncio; off-line we step the same
controller at each due time on the Bench's simulated clock, so an hour of
simulated time costs seconds. The heater limits are invented demo values of
the Wren tube; the zero target is the simulator's steady EMF at base.
"""

from gaugecore.channel import Channel
from gaugecore.controller import Controller
from tcgauge.sim import chamber
from tcgauge.sim.tube import steady_state

BASE_PA = chamber.LARKSPUR.base_pressure_pa  # 0.02 Pa, invented demo chamber


def limits():
    """Heater range of the demo tube (invented) and the zero target: the simulator's
    steady EMF at the chamber's base pressure, as the table has it."""
    e_base = float(steady_state("wren-demo", "N2", BASE_PA, 0.165, 22.0, 0.0).emf_mv)
    return {"nominal_ma": 165.0, "min_ma": 120.0, "max_ma": 200.0, "zero_emf_mv": e_base}


def channels(bench, table, **kw):
    """One gaugecore Channel per bench channel, all converting with `table`."""
    return [Channel(i, c.tc, c.cj, c.heater, c.relays, table, limits(), **kw)
            for i, c in enumerate(bench.channels)]


def drive(bench, chans, until_ms, on_reading=None, at=None):
    """Step the channels at each due time until until_ms; `at` = {time_ms: fn} -> the Controller."""
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
    return ctl
