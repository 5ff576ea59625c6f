"""Benchmark: the controller's per-sample cost under MicroPython (WebAssembly) versus one table lookup.

Runs in the real MicroPython interpreter (tools/upy/upyrun.py) on fake
drivers that cost almost nothing: one channel in reverse mode (two reads and
one reversal per sample) with one setpoint and the fast estimate on, the
simulator-made N2 table. Every figure is the best of 5 repetitions of N
iterations inside one interpreter run, and the best of 3 runs; loop overhead
is included in every figure alike (the baseline too). Every item runs once
before timing starts: the WebAssembly engine optimises the interpreter while
it runs, and an item timed cold (the first one) reads up to 2-3x slow; a board
has no such warm-up, so the warm figures are the ones that carry over. The
build's ticks_us() counts whole milliseconds, hence N iterations per figure
(each timed stretch is 60 ms or more: better than 2 %). What is measured:

- baseline: one bare Table.convert(7.0 mV).
- per-sample chain (THE GOAL: <= 3 x baseline): everything that runs once per
  EMF sample, by Channel.step at each due time with the heater ticks moved
  out of the way: the sampler's two phases (cold-junction read, two EMF
  reads, one current reversal), the fault checks, cold-junction
  compensation, fast estimate, Table.convert and the setpoint.
- stages of that chain, each timed alone on the warmed channel with inputs
  that vary like real samples: sampler, faults (check_adc + check_cj +
  check_emf), compensation (the channel's referral call), fast estimate,
  table, setpoint; "glue" = chain - sum of the stages (Channel.step and
  _on_sample themselves, the junction filter, bookkeeping, and the timing
  loop's own Channel.next_ms reads, about 1 us each, two a sample).
- heater tick: the heater loop (HeaterRegulator.update + check_heater + the
  stop logic) runs at its own 50 Hz (HEATER_TICK_MS 20), independent of the
  sample rate; its cost per tick = (per-sample cost with the ticks - without)
  / ticks per sample. Not part of the per-sample goal.
- heap: bytes allocated per sample (heater ticks out of the way) and per
  heater tick, counted with gc.mem_alloc() while the collector is off (exact,
  unlike the times: the machine's load does not move them).
- controller per second: Channel.step every CONTROL_PERIOD_MS (5 ms,
  gaugecore.assembly) for 10 s at the default rates (10 Hz samples,
  device.DEFAULT_RATE_HZ; 50 Hz heater ticks): microseconds of interpreter
  time per second of operation, idle steps included.

- floor: the same per-sample work written flat in one method (class Floor:
  the same fakes and dispatches, the real Table.convert, FastResponse.update
  and Setpoint.update, bare comparisons for the fault checks, a linear
  cold-junction referral): a lower bound for any controller with these
  stages, so `goal_reachable` says whether the goal can be met at all in
  this interpreter; also without the fast estimate and the setpoint.
  `chain_over_floor` is what the controller's structure and its fuller
  checks (counts, recovery, rise referral) cost on top.

A figure is refused (RuntimeError) if the channel left state "ok" while it was
timed, so no figure can silently measure a fault path.
Usage: python tools/bench/loop.py   (about 25 s; prints one JSON line)
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
import time, json, gc
from gaugecore import tablefile
from gaugecore.channel import Channel
from gaugecore.setpoint import Setpoint
from gaugecore.response import FastResponse
ticks_us = time.ticks_us
diff = time.ticks_diff
N = 2000
REPS = 5
CONTROL_PERIOD_MS = 5
TICKS_PER_SAMPLE = 5  # 100 ms sample period / 20 ms heater tick


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
# inputs that vary like real samples (a repeated raw code would be a stuck converter)
RAWS = [7000.0 + 0.3 * k for k in range(13)]
EMFS = [r * 0.001 for r in RAWS]
CJS = [22.0 + 0.01 * k for k in range(7)]


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


def check(ch, what):
    if ch.state != "ok":
        raise RuntimeError("%s: channel went %s (%s) while timed" % (what, ch.state, ch.fault))


def t_table():
    conv = tab.convert
    a = ticks_us()
    for i in range(5 * N):  # the shortest item: more iterations for the 1 ms tick
        conv(7.0)
    return diff(ticks_us(), a) / (5 * N)


# each timed function takes a rig [channel, now_ms] and leaves now_ms where
# it stopped, so that repetitions continue in time
def per_sample(rig):
    ch, now = rig
    s = ch.sampler
    s0 = s.seq
    a = ticks_us()
    while s.seq - s0 < N:
        ch.step(now)
        now = ch.next_ms
    t = diff(ticks_us(), a) / N
    rig[1] = now
    check(ch, "per-sample chain")
    return t


def t_sampler(rig):
    s = rig[0].sampler
    s0 = s.seq
    a = ticks_us()
    while s.seq - s0 < N:
        s.step(s.next_ms)
    return diff(ticks_us(), a) / N


def t_faults(rig):
    ch, now = rig
    mon = ch.monitor
    a = ticks_us()
    for i in range(N):
        now += 100
        mon.check_adc(True, now, RAWS[i % 13])
        mon.check_cj(CJS[i % 7], now)
        mon.check_emf(EMFS[i % 13], True, now)
    t = diff(ticks_us(), a) / N
    rig[1] = now
    if mon.active is not None:
        raise RuntimeError("faults: %s raised while timed" % mon.active)
    return t


def t_compensation(rig):
    ch = rig[0]
    rr = getattr(ch, "referral", None)
    a = ticks_us()
    if rr is not None:
        e = ch._cj_e0 + rr.emf_ref_mv  # E(t_cj), as the channel passes it
        for i in range(N):
            rr.refer(EMFS[i % 13], CJS[i % 7], e)
    else:  # linear about an anchor: no call at all
        e0 = ch._cj_e0
        s = ch._cj_s
        for i in range(N):
            EMFS[i % 13] + e0 + s * (CJS[i % 7] - 22.0)
    return diff(ticks_us(), a) / N


def t_fast(rig):
    ch, now = rig
    r = ch.response
    a = ticks_us()
    for i in range(N):
        now += 100
        r.update(EMFS[i % 13], 0.03, now)
    rig[1] = now
    return diff(ticks_us(), a) / N


def t_setpoint(rig):
    ch, now = rig
    sp = ch.setpoints[0]
    a = ticks_us()
    for i in range(N):
        now += 100
        sp.update(10.0, "ok", now, None)
    rig[1] = now
    return diff(ticks_us(), a) / N


def per_second(rig):
    ch, now = rig
    a = ticks_us()
    for k in range(2000):  # 10 s at the 5 ms controller period
        ch.step(now)
        now += CONTROL_PERIOD_MS
    t = diff(ticks_us(), a) / 10.0
    rig[1] = now
    check(ch, "controller per second")
    return t


class Floor:
    """The per-sample work with no structure: a floor under any implementation.

    The same fakes, the same two dispatches a sample (read, reverse, settle,
    read), the same real Table.convert, FastResponse.update and
    Setpoint.update; everything else flat in this one method, as cheap as it
    can be written: the fault checks as bare comparisons (no counts, no
    recovery), the junction low-pass, a linear cold-junction referral in
    place of RiseReferral, the reversal as two driver calls. It is not a
    controller (nothing is judged or recorded); it bounds what one can be.
    """

    def __init__(self, fast, setpoint):
        self.f = Fake()
        self.table = tab
        self.use_fast = fast
        self.use_sp = setpoint
        self.resp = FastResponse()
        self.resp.configure(0.0569, 0.000104)
        self.sp = Setpoint(Relay(), 2.0, 5.0, "below", 1000, "SP1")
        self.due = 0
        self.next_ms = 0
        self.phase = 0
        self.sign = 1
        self.cmd_ma = 165.0
        self.acc = 0.0
        self.raw_c = 22.0
        self.cj_c = 22.0
        self.last = None
        self.same = 0
        self.bad = 0
        self.on_since = 0
        self.e0 = 0.88
        self.s = 0.0405
        self.pressure_pa = None
        self.state = None
        self.emf_mv = 0.0
        self.seq = 0

    def step(self, now):
        if now - self.due < 0:
            return False
        f = self.f
        if self.phase == 0:
            self.raw_c = f.read_c()
            self.acc = f.read_uv()
            s = -self.sign
            self.sign = s
            f.set_polarity(s)
            f.set_ma(self.cmd_ma)
            self.phase = 1
            self.due = self.next_ms = now + 5
            return False
        raw = (self.acc + f.read_uv()) * 0.5
        self.phase = 0
        self.due = self.next_ms = now + 95
        bad = 0
        if raw == self.last:
            self.same += 1
            if self.same >= 8:
                bad = 1
        else:
            self.same = 1
            self.last = raw
        emf = raw * 0.001
        if emf > 30.0:
            bad = 1
        if now - self.on_since >= 2000 and emf < 0.1 and emf > -0.1:
            bad = 1
        c = self.raw_c
        cj = self.cj_c
        d = c - cj
        if c < -40.0 or c > 85.0 or d > 0.25 or d < -0.25:
            bad = 1
        self.bad = bad
        cj += 0.0196 * d
        self.cj_c = cj
        emf_ref = emf + self.e0 + self.s * (cj - 22.0)
        if self.use_fast:
            emf_ref += self.resp.update(emf, 0.0408, now) - emf
        p, st = self.table.convert(emf_ref)
        self.pressure_pa = p
        self.state = st
        self.emf_mv = emf
        self.seq += 1
        if self.use_sp:
            self.sp.update(p, st, now, None)
        return True


def t_floor(rig):
    fl = rig[0]
    s0 = fl.seq
    now = rig[1]
    a = ticks_us()
    while fl.seq - s0 < N:
        fl.step(now)
        now = fl.next_ms
    t = diff(ticks_us(), a) / N
    rig[1] = now
    if fl.state != "ok" or fl.bad:
        raise RuntimeError("floor: went %s (bad %d) while timed" % (fl.state, fl.bad))
    return t


# name: (function, channel with heater ticks?)
ITEMS = (
    ("table_us", t_table, None),
    ("chain_us", per_sample, False),
    ("chain_with_heater_us", per_sample, True),
    ("controller_us_per_s", per_second, True),
    ("stage_sampler_us", t_sampler, False),
    ("stage_faults_us", t_faults, False),
    ("stage_compensation_us", t_compensation, False),
    ("stage_fast_estimate_us", t_fast, False),
    ("stage_setpoint_us", t_setpoint, False),
    ("floor_us", t_floor, "floor"),
    ("floor_bare_us", t_floor, "floor-bare"),
)
rigs = {}
for name, fn, heater in ITEMS:
    if heater == "floor":
        rigs[name] = [Floor(True, True), 0]
    elif heater == "floor-bare":
        rigs[name] = [Floor(False, False), 0]
    elif heater is not None:
        rigs[name] = list(make(heater))
# warm-up: the WebAssembly engine optimises the interpreter while it runs,
# so the first passes are slower; then every item in turn, REPS times, best kept
for name, fn, heater in ITEMS:
    fn() if heater is None else fn(rigs[name])
out = {}
for r in range(REPS):
    for name, fn, heater in ITEMS:
        t = fn() if heater is None else fn(rigs[name])
        if name not in out or t < out[name]:
            out[name] = t


def heap_per_sample(heater):
    # bytes allocated per EMF sample (collector off while counting)
    ch, now = make(heater)
    s = ch.sampler
    for k in range(2):
        gc.collect()
        gc.disable()
        s0 = s.seq
        a = gc.mem_alloc()
        while s.seq - s0 < 200:
            ch.step(now)
            now = ch.next_ms
        b = gc.mem_alloc()
        gc.enable()
    check(ch, "heap")
    return (b - a) / 200.0


out["heap_chain_bytes"] = heap_per_sample(False)
out["heap_chain_with_heater_bytes"] = heap_per_sample(True)
print(json.dumps(out))
'''

STAGES = ("sampler", "faults", "compensation", "fast_estimate", "setpoint")
TICKS_PER_SAMPLE = 5  # 100 ms sample period / 20 ms heater tick (gaugecore.channel.HEATER_TICK_MS)


def measure(firmware_dir=None, table_text=None, runs=3):
    """Best-of-runs figures (dict of microseconds) from the MicroPython run."""
    text = table_text if table_text is not None else tablefile.dumps(rig.TABLE)
    got = [upyrun.run_json(CODE, files={"table.json": text}, timeout_s=300,
                           firmware_dir=firmware_dir) for _ in range(runs)]
    return {k: min(r[k] for r in got) for k in got[0]}


def report(best):
    """The benchmark's JSON document from measured figures."""
    table = best["table_us"]
    chain = best["chain_us"]
    stages = {name: best["stage_%s_us" % name] for name in STAGES}
    stages["table"] = table
    stages["glue"] = chain - sum(stages.values())
    tick = (best["chain_with_heater_us"] - chain) / TICKS_PER_SAMPLE
    heap_tick = (best["heap_chain_with_heater_bytes"] - best["heap_chain_bytes"]) / TICKS_PER_SAMPLE
    ratio = chain / table
    return {
        "benchmark": "loop",
        "interpreter": "MicroPython (WebAssembly, Node), best of 5 x 3",
        "baseline_table_lookup_us": table,
        "per_sample_chain_us": chain,
        "per_sample_chain_ratio": ratio,
        "per_sample_chain_stages_us": stages,
        "per_sample_chain_ratio_without_compensation": (chain - stages["compensation"]) / table,
        "heater_tick_us": tick,
        "heater_tick_ratio": tick / table,
        "heater_tick_rate_hz": 50,
        "heap_bytes_per_sample": best["heap_chain_bytes"],
        "heap_bytes_per_heater_tick": heap_tick,
        "controller_us_per_s": best["controller_us_per_s"],
        "controller_cpu_percent": best["controller_us_per_s"] * 1e-4,
        "controller_rates": "10 Hz samples, 50 Hz heater ticks, step every 5 ms, one channel",
        "floor_us": best["floor_us"],
        "floor_ratio": best["floor_us"] / table,
        "floor_without_fast_estimate_and_setpoint_us": best["floor_bare_us"],
        "floor_without_fast_estimate_and_setpoint_ratio": best["floor_bare_us"] / table,
        "chain_over_floor": chain / best["floor_us"],
        "goal": "per-sample chain (per_sample_chain_us) <= 3 x one table lookup; "
                "the heater tick and the per-second figure are reported, not goaled",
        "goal_met": ratio <= 3.0,
        "goal_reachable": best["floor_us"] / table <= 3.0,
    }


def main():
    return rig.emit(report(measure()))


if __name__ == "__main__":
    main()
