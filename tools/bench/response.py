"""Benchmark: step response of the fast estimate versus the plain reading.

Simulated Wren tube (invented) in N2 after a vacuum zero: pressure steps
100 -> 10 mTorr and 10 -> 100 mTorr, 150 s each. Channel 0 reads plain
(baseline), channel 1 with the fast-response estimate. Figures: time until
the reading stays within 10 % of the final (true) pressure, and the
steady-state noise (std of ln p over the last 50 s of each hold).
Goal: the estimate at least 4x sooner, with noise within 2x of the plain reading.
Usage: python tools/bench/response.py
"""

import math
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchrig as rig  # noqa: E402

from tcgauge.sim import chamber  # noqa: E402
from tcgauge.sim.bench import Bench  # noqa: E402

HOLD_MS = 150000


def main():
    zero = rig.zero_results()
    sc = chamber.Scenario("steps", pressure_pa=0.1 * rig.TORR).hold(HOLD_MS / 1000.0)
    sc.step(0.01 * rig.TORR, HOLD_MS / 1000.0).step(0.1 * rig.TORR, HOLD_MS / 1000.0)
    bench = Bench("wren-demo", scenario=sc, seed=0)
    chans = rig.channels(bench)
    for c, z in zip(chans, zero):
        c.apply_zero(z)
    chans[1].set_fast(True)
    rec = ([], [])
    rig.drive(bench, chans, 3 * HOLD_MS, lambda c: rec[c.index].append((c.time_ms, c.pressure_pa)))

    def t_within(r, t0, p_final):
        last = t0
        for t, p in r:
            if t0 <= t < t0 + HOLD_MS and abs(p / p_final - 1.0) > 0.10:
                last = t
        return (last - t0) / 1000.0

    def noise(r, t0):
        return rig.std([math.log(p) for t, p in r if t0 - 50000 <= t < t0])

    steps = []
    for t0, p0, p1 in ((HOLD_MS, 100, 10), (2 * HOLD_MS, 10, 100)):
        plain = t_within(rec[0], t0, p1 * 1e-3 * rig.TORR)
        fast = t_within(rec[1], t0, p1 * 1e-3 * rig.TORR)
        steps.append({"step_mtorr": [p0, p1], "plain_s": plain, "fast_s": fast,
                      "speedup": plain / fast if fast > 0 else None})
    noises = []
    for t_end in (HOLD_MS, 2 * HOLD_MS, 3 * HOLD_MS):
        a, b = noise(rec[0], t_end), noise(rec[1], t_end)
        noises.append({"hold_end_s": t_end / 1000.0, "plain_std_lnp": a, "fast_std_lnp": b,
                       "ratio": b / a})
    met = all(s["speedup"] is not None and s["speedup"] >= 4.0 for s in steps) and all(
        n["ratio"] <= 2.0 for n in noises)
    return rig.emit({
        "benchmark": "response",
        "baseline": "plain reading (channel 0), same run",
        "zero_tau_s": [z.tau_s for z in zero],
        "steps": steps,
        "noise": noises,
        "goal": "fast within 10 % >= 4x sooner than plain; fast noise <= 2x plain",
        "goal_met": met,
    })


if __name__ == "__main__":
    main()
