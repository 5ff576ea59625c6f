"""Write a gaugecore table file from the simulator's steady-state solver.

For one tube profile and gas: EMF at log-spaced pressures over the tube's
range, at the profile's nominal heater current (or --current-ma) and a wall
temperature, EMFs referred to --ref-c. The table's `source` field records
how it was made. Simulated data of an invented tube, not a measurement.

Usage:
    python tools/tables/make_sim_table.py OUT [--profile wren-demo] [--gas N2]
        [--points 32] [--p-min-pa 0.05] [--p-max-pa 500] [--current-ma MA]
        [--wall-c 22] [--ref-c 0] [--force]

An existing OUT is kept unless --force; firmware/tables/demo_n2.json is
never written (the shipped demo table is switched by hand).
"""

import argparse
import os
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
PROTECTED = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")

from gaugecore.tablefile import save  # noqa: E402
from tcgauge.sim.simtable import make_table  # noqa: E402


def main_parser():
    ap = argparse.ArgumentParser(description="Write a table file from the tube simulator.")
    ap.add_argument("out", help="path of the table file to write")
    ap.add_argument("--profile", default="wren-demo")
    ap.add_argument("--gas", default="N2")
    ap.add_argument("--points", type=int, default=32)
    ap.add_argument("--p-min-pa", type=float, default=0.05)
    ap.add_argument("--p-max-pa", type=float, default=500.0)
    ap.add_argument("--current-ma", type=float, default=None)
    ap.add_argument("--wall-c", type=float, default=22.0)
    ap.add_argument("--ref-c", type=float, default=0.0)
    ap.add_argument("--force", action="store_true", help="replace an existing file")
    return ap


def main(argv=None):
    """Entry point; returns the exit code."""
    args = main_parser().parse_args(argv)
    out = os.path.abspath(args.out)
    if out == PROTECTED:
        print("error: %s is the shipped demo table; write elsewhere" % args.out, file=sys.stderr)
        return 2
    if os.path.exists(out) and not args.force:
        print("error: %s exists (use --force to replace it)" % args.out, file=sys.stderr)
        return 2
    try:
        table = make_table(args.profile, args.gas, args.points, args.p_min_pa, args.p_max_pa,
                           None if args.current_ma is None else args.current_ma / 1e3,
                           args.wall_c, args.ref_c)
        save(out, table)
    except (ValueError, OSError) as exc:
        print("error: %s" % exc, file=sys.stderr)
        return 1
    print(table.describe())
    return 0


if __name__ == "__main__":
    sys.exit(main())
