"""Benchmark table conversion; prints one JSON object.

- scalar: Table.convert under CPython, conversions per second;
- numpy: tcgauge.bulk.convert_array on 1e6 EMFs against bare numpy.interp of
  log10 pressure on the same knots (the baseline), in the same run; the goal is
  bulk >= 0.5x the baseline's speed. Measured on EMFs in random order over the
  table's range (goal) and, for information, on a time-ordered pump-down trace
  (where numpy.interp's search is nearly free and the Horner work dominates);
- micropython: Table.convert under the real MicroPython (WebAssembly) through
  tools/upy/upyrun.py when that runner exists, else null with a note.

Usage: python tools/bench/convert.py [TABLE_FILE]   (default: the demo table)
"""

import json
import os
import sys
import time

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, os.path.join(ROOT, "firmware"))
sys.path.insert(0, ROOT)

from gaugecore import tablefile  # noqa: E402
from tcgauge import bulk  # noqa: E402

N_BULK = 1000000
GOAL_RATIO = 0.5


def _best(fn, repeats=5):
    best = None
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        dt = time.perf_counter() - t0
        best = dt if best is None or dt < best else best
    return best


def scalar_rate(table, n=200000):
    lo, hi = table.emf_range_mv
    emfs = [lo + (hi - lo) * ((k * 0.618034) % 1.0) for k in range(1000)]
    conv = table.convert
    reps = n // len(emfs)

    def run():
        for _ in range(reps):
            for e in emfs:
                conv(e)

    return reps * len(emfs) / _best(run, 3)


def numpy_case(table, emf):
    xs, ys = np.asarray(table.segments()[0]), np.asarray(table.segments()[1])
    t_bulk = _best(lambda: bulk.convert_array(table, emf))
    t_interp = _best(lambda: np.interp(emf, xs, ys))
    t_interp_pow = _best(lambda: 10.0 ** np.interp(emf, xs, ys))
    return {
        "samples": int(emf.size),
        "bulk_s": round(t_bulk, 5),
        "interp_s": round(t_interp, 5),
        "interp_then_pow10_s": round(t_interp_pow, 5),
        "bulk_samples_per_s": round(emf.size / t_bulk),
        "ratio_bulk_vs_interp": round(t_interp / t_bulk, 3),
    }


UPY_CODE = """
import time
from gaugecore import tablefile
t = tablefile.loads(%r)
lo, hi = t.emf_range_mv
emfs = [lo + (hi - lo) * ((k * 0.618034) %% 1.0) for k in range(200)]
conv = t.convert
n = 0
t0 = time.ticks_ms()
while time.ticks_diff(time.ticks_ms(), t0) < 1500:
    for e in emfs:
        conv(e)
    n += len(emfs)
dt = time.ticks_diff(time.ticks_ms(), t0)
print(n * 1000.0 / dt)
"""


def micropython_rate(text):
    runner = os.path.join(ROOT, "tools", "upy", "upyrun.py")
    if not os.path.exists(runner):
        return None, "tools/upy/upyrun.py not present yet: MicroPython figure not measured"
    sys.path.insert(0, os.path.dirname(runner))
    import upyrun

    out = upyrun.run(UPY_CODE % text, timeout_s=60)
    return float(out.strip().splitlines()[-1]), "MicroPython (WebAssembly) via tools/upy/upyrun.py"


def main(argv):
    path = argv[1] if len(argv) > 1 else os.path.join(ROOT, "firmware", "tables", "demo_n2.json")
    with open(path) as f:
        text = f.read()
    table = tablefile.loads(text)
    lo, hi = table.emf_range_mv
    rng = np.random.default_rng(20261201)
    random_emf = rng.uniform(lo, hi, N_BULK)
    # Time-ordered trace: a smooth pump-down from the high-pressure end to the low, with noise.
    trace = lo + (hi - lo) * (1.0 - np.exp(-np.linspace(0.0, 6.0, N_BULK)))
    trace += rng.normal(0.0, 0.002, N_BULK)

    random_case = numpy_case(table, random_emf)
    ordered_case = numpy_case(table, trace)
    upy, upy_note = micropython_rate(text)
    report = {
        "table": os.path.relpath(path, ROOT),
        "scalar_cpython_per_s": round(scalar_rate(table)),
        "numpy_random_order": random_case,
        "numpy_time_ordered": ordered_case,
        "scalar_micropython_per_s": None if upy is None else round(upy),
        "micropython_note": upy_note,
        "baseline": "numpy.interp(emf, knots, log10 p) on the same %d EMFs in random order: "
                    "%.0f samples/s" % (N_BULK, N_BULK / random_case["interp_s"]),
        "goal": "bulk >= %.1fx the baseline's speed (random order)" % GOAL_RATIO,
        "goal_met": random_case["ratio_bulk_vs_interp"] >= GOAL_RATIO,
    }
    print(json.dumps(report, indent=1))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
