"""Write firmware/tables/demo_n2.json: the N2 table of the invented "Wren" tube.

Simulated data of an invented tube, not a measurement: the table comes from
the simulator's steady state (tcgauge.sim.simtable.make_table) for the
`wren-demo` profile in N2 at its nominal 165 mA, wall 22 C, EMFs referred
to 0 C, 40 points log-spaced over 0.02..1000 Pa, with the wall temperature
and the per-point rise slopes d ln(dT)/dT_wall the channel's rise referral
uses (table file version 2). So the demo table and the simulated demo tube
agree, and a controller running the demo reads true at any room temperature
to the compensation's residual (tools/bench/ambient.py).

Usage: python tools/tables/make_demo_table.py [OUT]
"""

import os
import sys

from gaugecore.tablefile import save
from tcgauge.sim.simtable import make_table

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
OUT = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")


def demo_table():
    """The demo Table: N2, profile wren-demo, 165 mA, type K, EMFs referred to 0 C."""
    return make_table("wren-demo", "N2", points=40, p_min_pa=0.02, p_max_pa=1000.0,
                      t_wall_c=22.0, ref_c=0.0)


def main(argv):
    out = argv[1] if len(argv) > 1 else OUT
    table = demo_table()
    save(out, table)
    print("%s: %s" % (out, table.describe()))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
