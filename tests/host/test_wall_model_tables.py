"""Derived and calibrated tables carry the wall model the channel's rise referral needs.

Derived (tcgauge.derive): wall temperature and rise slopes d ln(dT)/dT_wall
from the fitted tube model in the target gas. Calibrated (tcgauge.calibrate):
the wall temperature given, no slopes (there is no model), so the channel
applies plain wall referral and says so. Tables and tube are the simulator's
invented Wren demo tube.
"""

import math
import os

import pytest

from gaugecore import tablefile
from gaugecore.coldjunction import RiseReferral
from tcgauge import calibrate, derive
from tcgauge.sim.simtable import make_table, rise_slope_per_k
from tcgauge.sim.tube import steady_state

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
DEMO = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")


def test_demo_table_carries_wall_and_slopes():
    t = tablefile.load(DEMO)
    assert t.wall_c == 22.0 and len(t.rise_slope_per_k) == len(t.points)
    assert RiseReferral(t).note is None  # the whole model: no fallback


def test_derived_table_carries_the_fitted_models_slopes():
    n2 = make_table("wren-demo", "N2", 24, 0.05, 500.0, t_wall_c=25.0)
    der = derive.derive_table(n2, "Ar")
    t = der.table
    assert t.wall_c == 25.0  # taken from the N2 table
    p = [pt[1] for pt in t.points]
    # the N2 table is the simulator's own, so the fit finds the simulated tube
    # and its slopes in argon are the simulator's to the fit's residual
    truth = rise_slope_per_k("wren-demo", "Ar", p, 0.165, 25.0)
    for k, k_true in zip(t.rise_slope_per_k, truth):
        assert k == pytest.approx(float(k_true), abs=2e-5)
    back = tablefile.loads(tablefile.dumps(t))
    assert back == t and '"version": 2,' in tablefile.dumps(t)
    # and the slopes mean what they say: the simulated tube in Ar at a 10 K warmer wall
    s22 = steady_state("wren-demo", "Ar", p[5], 0.165, t_wall_c=25.0)
    s32 = steady_state("wren-demo", "Ar", p[5], 0.165, t_wall_c=35.0)
    ratio = math.log((float(s32.filament_c) - 35.0) / (float(s22.filament_c) - 25.0))
    assert ratio == pytest.approx(10.0 * t.rise_slope_per_k[5], abs=5e-4)


def test_calibrated_table_states_its_wall_and_no_slopes():
    src = make_table("wren-demo", "N2", 12, 0.1, 300.0, wall_model=False)
    pairs = [(e, p) for e, p in src.points]
    fit = calibrate.fit_table(pairs, "N2", "wren-demo", 165.0, 0.0, "K", "invented calibration",
                              wall_c=23.5)
    t = fit.table
    assert t.wall_c == 23.5 and t.rise_slope_per_k is None
    text = tablefile.dumps(t)
    assert tablefile.dumps(tablefile.loads(text)) == text and ' "wall_c": 23.5,\n' in text
    assert RiseReferral(t).note == "table has no rise slopes: plain wall referral to its 23.5 C wall"
    # without a wall temperature: a version-1 table, as before
    t1 = calibrate.fit_table(pairs, "N2", "wren-demo", 165.0, 0.0, "K", "invented").table
    assert t1.wall_c is None and tablefile.dumps(t1).startswith('{"format": "tcgauge-table", "version": 1,')
    assert RiseReferral(t1).note == ("table states no wall temperature: plain wall referral "
                                     "to 22 C assumed")
