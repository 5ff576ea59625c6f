"""Gas tables computed from the simulator's steady state.

A table made this way agrees with the simulated tube by construction, so a
controller test that reads the simulator through it measures the
controller's own error. Simulated data of an invented tube, not a measurement.
"""

import numpy as np

from gaugecore.table import Table
from tcgauge.sim.profile import load_profile
from tcgauge.sim.tube import steady_state


def make_table(profile="wren-demo", gas="N2", points=32, p_min_pa=0.05, p_max_pa=500.0,
               current_a=None, t_wall_c=22.0, ref_c=0.0):
    """A gaugecore `Table` computed with tcgauge.sim.tube.steady_state."""
    if not 4 <= points <= 128:
        raise ValueError("points must be 4..128, got %d" % points)
    if not 0.0 < p_min_pa < p_max_pa:
        raise ValueError("need 0 < p_min_pa < p_max_pa, got %g and %g" % (p_min_pa, p_max_pa))
    prof = load_profile(profile)
    cur = prof.nominal_current_a if current_a is None else current_a
    p = np.logspace(np.log10(p_min_pa), np.log10(p_max_pa), points)
    s = steady_state(prof, gas, p, cur, t_wall_c=t_wall_c, t_ref_c=ref_c)
    source = ("simulated, not measured: tcgauge.sim.tube.steady_state for the %s tube profile "
              "(%s), gas %s, heater %.6g mA, wall %.6g C, EMF referred to %.6g C, %d points "
              "log-spaced %.6g-%.6g Pa; written by tcgauge.sim.simtable"
              % (prof.name, "invented" if prof.source.startswith("invented") else "see profile source",
                 gas, cur * 1e3, t_wall_c, ref_c, points, p_min_pa, p_max_pa))
    pts = [(float(e), float(x)) for e, x in zip(s.emf_mv, p)]
    return Table(pts, gas, prof.name, cur * 1e3, ref_c, prof.junction_type, source=source)
