"""Write firmware/tables/demo_n2.json: the N2 table of the invented "Wren" tube.

INVENTED DEMO DATA, not a measurement of any real tube. The curve is a
plausible closed form for a thermal-conductivity gauge run at constant
heater current: the junction EMF follows the filament's temperature rise,
which is set by the heat lost through solid conduction plus gas conduction,

    emf(p) = E0 / (1 + g(p) / G_SOLID),   g(p) = p / (1 + p / P_TRANS)

with g the gas conductance in units of the free-molecular conductance per
pascal: linear in p at low pressure (free-molecular, Knudsen), saturating
above P_TRANS (continuum), the series form 1/G = 1/G_fm + 1/G_cont of the
domain notes (section 2). The numbers below are invented to give a flat
high-vacuum end near 12 mV, a steep part between about 0.5 and 50 Pa and a
flat end near 0.8 mV at 400 Pa.

A later version may regenerate the file from the physics simulator under
the same name; tests check only the file's validity and rough shape.
Usage: python tools/tables/make_demo_table.py [OUT]
"""

import math
import os
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, os.path.join(ROOT, "firmware"))

from gaugecore.table import Table  # noqa: E402
from gaugecore.tablefile import save  # noqa: E402

E0_MV = 12.3  # invented: EMF at zero pressure
G_SOLID = 2.0  # invented: solid + radiation loss, in Pa-equivalents of gas conduction
P_TRANS_PA = 30.0  # invented: free-molecular to continuum transition
P_LOW_PA = 0.05
P_HIGH_PA = 400.0
N_POINTS = 30

OUT = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")


def emf_mv(pressure_pa):
    """Invented demo curve: EMF (mV, reference junction at 0 C) at pressure_pa in N2."""
    g = pressure_pa / (1.0 + pressure_pa / P_TRANS_PA)
    return E0_MV / (1.0 + g / G_SOLID)


def demo_table():
    """The demo Table: N2, profile wren-demo, 165 mA, type K, EMFs referred to 0 C."""
    points = []
    for k in range(N_POINTS):
        p = P_LOW_PA * (P_HIGH_PA / P_LOW_PA) ** (k / (N_POINTS - 1.0))
        p = float("%.4g" % p)
        points.append((round(emf_mv(p), 4), p))
    return Table(points, gas="N2", profile="wren-demo", heater_ma=165.0, ref_c=0.0,
                 tc_type="K",
                 source="invented demo data: closed-form curve from "
                        "tools/tables/make_demo_table.py, not a measured tube")


def main(argv):
    out = argv[1] if len(argv) > 1 else OUT
    table = demo_table()
    save(out, table)
    print("%s: %s" % (out, table.describe()))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
