"""Benchmark: the per-sample pipeline under MicroPython (WebAssembly) versus one table lookup.

Runs in the real MicroPython interpreter (tools/upy/upyrun.py) on fake
drivers that cost almost nothing, one channel with a setpoint and the fast
estimate on, the simulator-made N2 table. Timed per sample:
- table: one bare Table.convert (the baseline, same run);
- chain: the conversion chain once the averaged EMF is there
  (faults, cold junction, fast estimate, table, setpoint: Channel._on_sample);
- sample: the whole per-sample pipeline, the sampler's two phases with their
  reads and reversal included (Channel.step at each due time, heater ticks off);
- sample_with_heater: the same with the heater loop's ticks (every 20 ms).
Goal: the whole per-sample pipeline within 3x the table lookup.
Usage: python tools/bench/loop.py
"""

import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
sys.path.insert(0, os.path.join(os.path.dirname(HERE), "upy"))
import benchrig as rig  # noqa: E402
import upyrun  # noqa: E402

from gaugecore import tablefile  # noqa: E402

CODE = '''
import time, json
from gaugecore import tablefile
from gaugecore.channel import Channel
from gaugecore.setpoint import Setpoint
ticks_us = time.ticks_us
diff = time.ticks_diff
N = 4000


class Fake:
    def __init__(self):
        self.t = 0
        self.pol = 1
        self.ma = 0.0

    def read_uv(self):
        self.t += 1
        return 7000.0 + 0.3 * ((self.t * 7919) % 13)

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


tab = tablefile.load("/data/table.json")
LIM = {"nominal_ma": 165.0, "min_ma": 120.0, "max_ma": 200.0, "zero_emf_mv": 12.3}


def make(heater):
    f = Fake()
    rel = [Relay(), Relay()]
    ch = Channel(0, f, f, f, rel, tab, LIM)
    ch.add_setpoint(Setpoint(rel[0], 2.0, 5.0, "below", 1000, "SP1"))
    ch.response.configure(0.0569, 0.000104)
    ch.set_fast(True)
    now = 0
    for i in range(300):
        ch.step(now)
        now += 10
    if not heater:
        ch.heater_tick_ms = 1 << 29
        ch._heater_due = now + (1 << 29)
    return ch, now


def per_sample(ch, now):
    s0 = ch.sampler.seq
    a = ticks_us()
    while ch.sampler.seq - s0 < N:
        ch.step(now)
        now = ch.next_ms
    return diff(ticks_us(), a) / N


emf = 7.0
conv = tab.convert
a = ticks_us()
for i in range(N):
    conv(emf)
t_table = diff(ticks_us(), a) / N
ch, now = make(False)
a = ticks_us()
for i in range(N):
    ch._on_sample(now)
t_chain = diff(ticks_us(), a) / N
ch, now = make(False)
t_sample = per_sample(ch, now)
ch, now = make(True)
t_heat = per_sample(ch, now)
print(json.dumps({"table_us": t_table, "chain_us": t_chain, "sample_us": t_sample,
                  "sample_with_heater_us": t_heat, "state": ch.state}))
'''


def main():
    text = tablefile.dumps(rig.TABLE)
    runs = [upyrun.run_json(CODE, files={"table.json": text}, timeout_s=300) for _ in range(3)]
    best = {k: min(r[k] for r in runs) for k in ("table_us", "chain_us", "sample_us",
                                                   "sample_with_heater_us")}
    ratio = best["sample_us"] / best["table_us"]
    return rig.emit({
        "benchmark": "loop",
        "interpreter": "MicroPython (WebAssembly, Node), best of 3 runs",
        "baseline_table_lookup_us": best["table_us"],
        "chain_us": best["chain_us"],
        "sample_us": best["sample_us"],
        "sample_with_heater_us": best["sample_with_heater_us"],
        "chain_ratio": best["chain_us"] / best["table_us"],
        "sample_ratio": ratio,
        "sample_with_heater_ratio": best["sample_with_heater_us"] / best["table_us"],
        "state": runs[-1]["state"],
        "goal": "whole per-sample pipeline (sample_us) <= 3 x one table lookup",
        "goal_met": ratio <= 3.0,
    })


if __name__ == "__main__":
    main()
