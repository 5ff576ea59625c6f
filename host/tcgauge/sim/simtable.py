"""Gas tables computed from the simulator's steady state.

A table made this way agrees with the simulated tube by construction, so a
controller test that reads the simulator through it measures the
controller's own error. Simulated data of an invented tube, not a measurement.

Each table carries its wall temperature and, per point, the wall
coefficient of the filament's rise k = d ln(T1 - T_wall) / d T_wall at fixed
pressure and heater current (`rise_slope_per_k`), by central difference of
the model's steady state over +/- SLOPE_STEP_K: what the channel's rise
referral (gaugecore.coldjunction.RiseReferral) needs.
"""

import numpy as np

from gaugecore.table import Table
from tcgauge.sim.profile import load_profile
from tcgauge.sim.tube import steady_state


SLOPE_STEP_K = 0.5


def rise_slope_per_k(profile, gas, pressure_pa, current_a, t_wall_c, step_k=SLOPE_STEP_K):
    """d ln(T1 - T_wall) / d T_wall (1/K) at fixed pressure and current, per pressure.

    profile: a name or a TubeProfile (a fitted one, tcgauge.tubefit, works too).
    Central difference of steady_state at t_wall_c +/- step_k (error O(step_k^2)).
    """
    p = np.asarray(pressure_pa, dtype=float)
    up = steady_state(profile, gas, p, current_a, t_wall_c=t_wall_c + step_k)
    dn = steady_state(profile, gas, p, current_a, t_wall_c=t_wall_c - step_k)
    rise_up = up.filament_c - (t_wall_c + step_k)
    rise_dn = dn.filament_c - (t_wall_c - step_k)
    return (np.log(rise_up) - np.log(rise_dn)) / (2.0 * step_k)


def make_table(profile="wren-demo", gas="N2", points=32, p_min_pa=0.05, p_max_pa=500.0,
               current_a=None, t_wall_c=22.0, ref_c=0.0, wall_model=True):
    """A gaugecore `Table` computed with tcgauge.sim.tube.steady_state.

    wall_model: store the wall temperature and the rise slopes (else a
    table as version 1 of the file format has it: neither)."""
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
              "log-spaced %.6g-%.6g Pa%s; written by tcgauge.sim.simtable"
              % (prof.name, "invented" if prof.source.startswith("invented") else "see profile source",
                 gas, cur * 1e3, t_wall_c, ref_c, points, p_min_pa, p_max_pa,
                 "; rise slopes d ln(dT)/dT_wall from the model at wall +/- %.6g K" % SLOPE_STEP_K
                 if wall_model else ""))
    pts = [(float(e), float(x)) for e, x in zip(s.emf_mv, p)]
    if not wall_model:
        return Table(pts, gas, prof.name, cur * 1e3, ref_c, prof.junction_type, source=source)
    k = [float(x) for x in rise_slope_per_k(prof, gas, p, cur, t_wall_c)]
    return Table(pts, gas, prof.name, cur * 1e3, ref_c, prof.junction_type, source=source,
                 wall_c=t_wall_c, rise_slope_per_k=k)
