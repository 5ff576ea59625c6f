"""A 'measured' N2 table for the derivation tests: a modified Wren tube, simulated, with noise.

The tube differs from the `wren-demo` base profile the fit starts from: a
shorter heater (less resistance, area and continuum shape factor), brighter
emissivity and thicker thermocouple legs (more solid conduction), so the fit
has real work to do. All values invented for the tests. Noise: Gaussian,
2 uV standard deviation, fixed seed (invented, a plausible EMF front end).
"""

import numpy as np

from gaugecore.table import Table
from tcgauge.sim.profile import TubeProfile, load_profile
from tcgauge.sim.tube import steady_state

NOISE_MV = 0.002
N2_RANGE_PA = (0.02, 1000.0)
N2_POINTS = 40
CURRENT_A = 0.165


def modified_profile():
    """The 'true' tube of the tests (invented): wren-demo with changed losses and geometry."""
    data = dict(load_profile("wren-demo").data)
    data.update(name="wren-mod", heater_emissivity=0.22, tc_leg_radius_m=1.45e-5,
                heater_length_m=0.040)
    return TubeProfile(data)


def n2_table(noise_mv=NOISE_MV, seed=1, bumps=()):
    """The simulated N2 table of the modified tube, with noise and optional (index, mV) bumps."""
    p = np.logspace(np.log10(N2_RANGE_PA[0]), np.log10(N2_RANGE_PA[1]), N2_POINTS)
    e = steady_state(modified_profile(), "N2", p, CURRENT_A).emf_mv
    e = e + np.random.default_rng(seed).normal(0.0, noise_mv, p.size)
    for k, de in bumps:
        e[k] += de
    return Table(list(zip(e.tolist(), p.tolist())), "N2", "wren-demo", CURRENT_A * 1e3, 0.0, "K",
                 source="simulated for the tests, not measured: modified wren-demo tube (invented)")
