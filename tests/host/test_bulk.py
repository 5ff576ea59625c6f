"""tcgauge.bulk: numpy conversion of EMF arrays, element for element equal to the core.

References: the core's scalar Table.convert (tests/core/test_table.py checks
it against scipy's PCHIP, Fritsch & Carlson, SIAM J. Numer. Anal. 17, 238
(1980)); here scipy.interpolate.PchipInterpolator is checked directly too.
"""

import math
import os

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.interpolate import PchipInterpolator

from gaugecore import states, tablefile
from gaugecore.table import Table
from tcgauge import bulk

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
DEMO = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")


@st.composite
def tables(draw):
    n = draw(st.integers(4, 40))
    e = draw(st.floats(5.0, 20.0))
    lp = draw(st.floats(-4.0, 1.0))
    pts = []
    for _ in range(n):
        pts.append((e, 10.0 ** lp))
        e -= draw(st.floats(0.005, 1.5)) * (e / 20.0 + 0.01)
        lp += draw(st.floats(0.02, 0.6))
    return Table(pts, "N2", "wren-demo", 165.0, 0.0, "K",
                 invalid_margin=draw(st.floats(0.01, 0.5)), noise_mv=draw(st.floats(0.0, 0.2)))


def probe_emfs(t, rng, n=400):
    """Random EMFs over and past the table, plus every knot, both ends, margins and NaN."""
    lo, hi = t.emf_range_mv
    knots = [pt[0] for pt in t.points]
    special = [float("nan"), float("inf"), float("-inf"), hi, lo, t.emf_invalid_above_mv,
               np.nextafter(t.emf_invalid_above_mv, np.inf), -t.noise_mv,
               np.nextafter(-t.noise_mv, -np.inf), 0.0, -0.0]
    spread = rng.uniform(-0.5 - t.noise_mv, t.emf_invalid_above_mv * 1.1, n)
    return np.concatenate([spread, knots, special])


def assert_matches_core(t, emfs):
    p, s = bulk.convert_array(t, emfs)
    assert p.shape == emfs.shape and s.shape == emfs.shape and s.dtype == np.uint8
    for k, e in enumerate(emfs.ravel()):
        want_p, want_s = t.convert(float(e))
        assert bulk.STATES[s.ravel()[k]] == want_s, e
        if want_p is None:
            assert math.isnan(p.ravel()[k]), e
        else:
            assert p.ravel()[k] == pytest.approx(want_p, rel=1e-9), e


def test_demo_table_element_for_element():
    t = tablefile.load(DEMO)
    emfs = probe_emfs(t, np.random.default_rng(5), n=5000)
    assert_matches_core(t, emfs)


@settings(max_examples=60, deadline=None)
@given(tables(), st.integers(0, 2**32 - 1))
def test_random_tables_element_for_element(t, seed):
    assert_matches_core(t, probe_emfs(t, np.random.default_rng(seed)))


def test_block_boundaries_and_shapes():
    t = tablefile.load(DEMO)
    rng = np.random.default_rng(7)
    emfs = probe_emfs(t, rng, n=bulk.BLOCK * 2 + 17)  # crosses two block edges
    p, s = bulk.convert_array(t, emfs)
    p2, s2 = bulk.convert_array(t, emfs.reshape(1, -1)[:, ::-1])
    assert np.array_equal(s2[0, ::-1], s)
    assert np.array_equal(p2[0, ::-1], p, equal_nan=True)
    empty_p, empty_s = bulk.convert_array(t, np.array([]))
    assert empty_p.shape == (0,) and empty_s.shape == (0,)
    one_p, one_s = bulk.convert_array(t, 5.0)
    assert one_p.shape == () and float(one_p) == pytest.approx(t.convert(5.0)[0], rel=1e-9)


def test_states_and_codes():
    t = tablefile.load(DEMO)
    lo, hi = t.emf_range_mv
    p, s = bulk.convert_array(t, [hi + 0.01, lo - 0.01, float("nan"), -1.0, 50.0, (lo + hi) / 2])
    assert list(bulk.state_names(s)) == [states.UNDER, states.OVER, states.INVALID,
                                         states.INVALID, states.INVALID, states.OK]
    assert list(s) == [bulk.UNDER, bulk.OVER, bulk.INVALID, bulk.INVALID, bulk.INVALID, bulk.OK]
    assert p[0] == pytest.approx(t.p_min_pa, rel=1e-12)
    assert p[1] == pytest.approx(t.p_max_pa, rel=1e-12)
    assert np.isnan(p[2:5]).all()


def test_against_scipy_pchip_directly():
    t = tablefile.load(DEMO)
    xs = [pt[0] for pt in reversed(t.points)]
    ys = [math.log10(pt[1]) for pt in reversed(t.points)]
    emfs = np.linspace(xs[0], xs[-1], 100001)
    p, s = bulk.convert_array(t, emfs)
    assert (s == bulk.OK).all()
    np.testing.assert_allclose(p, 10.0 ** PchipInterpolator(xs, ys)(emfs), rtol=1e-12, atol=0)
