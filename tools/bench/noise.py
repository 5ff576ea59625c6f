"""Benchmark: noise of the reading at 1 mTorr against the limit set by the ADC.

Limit: one sample averages two conversions (+I and -I), so its EMF noise is
sigma_adc / sqrt(2); through the tube's slope the reading's noise is
sigma(ln p) = sigma_E / |dE/d ln p|, dE/d ln p from the simulator's steady
state at 1 mTorr (central difference), sigma_adc from the simulated
converter's noise model at its data rate and gain. Baseline in the same run:
the same reading without the cold-junction low-pass (cj_filter_ms=0), where
the junction sensor's noise adds to the ADC's.
Goal: measured std within 1.5x of the limit.
Usage: python tools/bench/noise.py
"""

import math
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchrig as rig  # noqa: E402

from tcgauge.sim import chamber  # noqa: E402
from tcgauge.sim.bench import Bench  # noqa: E402
from tcgauge.sim.electronics import adc_noise_uv  # noqa: E402
from tcgauge.sim.tube import steady_state  # noqa: E402

P_PA = 1e-3 * rig.TORR


def measure(**kw):
    bench = Bench("wren-demo", scenario=chamber.static(P_PA), seed=0, channels=1)
    (ch,) = rig.channels(bench, **kw)
    lnp = []
    rig.drive(bench, [ch], 240000,
              lambda c: lnp.append(math.log(c.pressure_pa)) if c.time_ms >= 180000 else None)
    adc = bench.channels[0].tc
    return rig.std(lnp), len(lnp), adc.data_rate_sps, adc.gain


def main():
    std_lnp, n, rate, gain = measure()
    std_raw_cj, _, _, _ = measure(cj_filter_ms=0)
    e = steady_state("wren-demo", "N2", [P_PA / 1.01, P_PA * 1.01], 0.165, 22.0, 0.0).emf_mv
    de_dlnp_mv = float(e[1] - e[0]) / math.log(1.01 * 1.01)
    sigma_mv = adc_noise_uv(rate, gain) / math.sqrt(2.0) * 1e-3
    limit = sigma_mv / abs(de_dlnp_mv)
    return rig.emit({
        "benchmark": "noise",
        "pressure_torr": 1e-3,
        "samples": n,
        "adc_noise_uv": adc_noise_uv(rate, gain),
        "de_dlnp_mv": de_dlnp_mv,
        "limit_std_lnp": limit,
        "measured_std_lnp": std_lnp,
        "ratio": std_lnp / limit,
        "baseline_without_cj_filter_std_lnp": std_raw_cj,
        "goal": "measured std of ln p <= 1.5 x limit",
        "goal_met": std_lnp <= 1.5 * limit,
    })


if __name__ == "__main__":
    main()
