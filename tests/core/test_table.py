"""gaugecore.table: validation, PCHIP conversion and reading states.

Outside reference for the interpolation: scipy.interpolate.PchipInterpolator
(PyPI `scipy`), which implements the monotone piecewise cubic Hermite scheme
of F. N. Fritsch and R. E. Carlson, SIAM J. Numer. Anal. 17, 238 (1980),
with the Fritsch-Butland weighted-harmonic-mean slopes and the three-point
end conditions, the scheme the core states it uses.
"""

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.interpolate import PchipInterpolator

from gaugecore import states
from gaugecore.table import GASES, MAX_POINTS, TC_TYPES, Table, TableError

# Invented demo points (not a real tube), by rising pressure.
DEMO_POINTS = [(12.0, 0.05), (11.5, 0.1), (10.0, 0.5), (7.0, 2.0), (3.0, 10.0),
               (1.5, 50.0), (0.9, 200.0), (0.8, 400.0)]


def make(points=DEMO_POINTS, **kw):
    args = dict(gas="N2", profile="wren-demo", heater_ma=165.0, ref_c=0.0, tc_type="K",
                source="invented demo data")
    args.update(kw)
    return Table(points, **args)


@st.composite
def tables(draw, min_n=4, max_n=40):
    """Random valid tables: EMF strictly falling, pressure strictly rising."""
    n = draw(st.integers(min_n, max_n))
    e = draw(st.floats(5.0, 20.0))
    lp = draw(st.floats(-4.0, 1.0))
    pts = []
    for _ in range(n):
        pts.append((e, 10.0 ** lp))
        e -= draw(st.floats(0.005, 1.5)) * (e / 20.0 + 0.01)
        lp += draw(st.floats(0.02, 0.6))
    return make(pts)


def scipy_reference(table):
    xs = [p[0] for p in reversed(table.points)]
    ys = [math.log10(p[1]) for p in reversed(table.points)]
    return PchipInterpolator(xs, ys)


# --- validation: each rule, exact message -------------------------------------------------

@pytest.mark.parametrize("points, message", [
    (DEMO_POINTS[:3], "a table needs at least 4 points, got 3"),
    ([(100.0 - k, 1.0 + k) for k in range(MAX_POINTS + 1)],
     "a table holds at most 128 points, got 129"),
    ([(4.0, 0.5), (4.21, 1.2), (4.18, 0.9), (1.0, 2.0)],
     "point 1: EMF must fall strictly as pressure rises "
     "(4.21 mV at 1.2 Pa is not below 4 mV at 0.5 Pa)"),
    ([(5.0, 0.5), (4.18, 0.9), (4.18, 1.2), (1.0, 2.0)],
     "point 2: EMF must fall strictly as pressure rises "
     "(4.18 mV at 1.2 Pa is not below 4.18 mV at 0.9 Pa)"),
    ([(5.0, 0.5), (4.21, 1.2), (4.18, 0.9), (1.0, 2.0)],
     "point 2: pressure must rise strictly from point to point (0.9 Pa is not above 1.2 Pa)"),
    ([(5.0, 0.5), (4.0, 0.5), (3.0, 0.9), (1.0, 2.0)],
     "point 1: pressure must rise strictly from point to point (0.5 Pa is not above 0.5 Pa)"),
    ([(5.0, 0.0), (4.0, 0.5), (3.0, 0.9), (1.0, 2.0)],
     "point 0: pressure must be a positive finite number, got 0"),
    ([(5.0, 0.1), (4.0, -0.5), (3.0, 0.9), (1.0, 2.0)],
     "point 1: pressure must be a positive finite number, got -0.5"),
    ([(5.0, 0.1), (4.0, 0.5), (3.0, float("inf")), (1.0, 2.0)],
     "point 2: pressure must be a positive finite number, got inf"),
    ([(5.0, 0.1), (4.0, 0.5), (3.0, float("nan")), (1.0, 2.0)],
     "point 2: pressure must be a positive finite number, got nan"),
    ([(5.0, 0.1), (4.0, 0.5), (3.0, "0.9"), (1.0, 2.0)],
     "point 2: pressure must be a positive finite number, got '0.9'"),
    ([(5.0, 0.1), (float("nan"), 0.5), (3.0, 0.9), (1.0, 2.0)],
     "point 1: EMF must be a finite number, got nan"),
    ([(float("-inf"), 0.1), (4.0, 0.5), (3.0, 0.9), (1.0, 2.0)],
     "point 0: EMF must be a finite number, got -inf"),
    ([(5.0, 0.1), (True, 0.5), (3.0, 0.9), (1.0, 2.0)],
     "point 1: EMF must be a finite number, got True"),
    ([(5.0, 0.1), (4.0, 0.5, 9.0), (3.0, 0.9), (1.0, 2.0)],
     "point 1: expected a pair (EMF mV, pressure Pa), got (4.0, 0.5, 9.0)"),
    (None, "points must be a list of (EMF mV, pressure Pa) pairs"),
])
def test_point_rules_have_exact_messages(points, message):
    with pytest.raises(TableError) as err:
        make(points)
    assert str(err.value) == message
    assert isinstance(err.value, ValueError)


@pytest.mark.parametrize("kw, message", [
    ({"gas": "Xe"}, "unknown gas 'Xe' (known: N2, air, He, Ar, H2, CO2, H2O)"),
    ({"gas": "n2"}, "unknown gas 'n2' (known: N2, air, He, Ar, H2, CO2, H2O)"),
    ({"tc_type": "S"}, "unknown thermocouple type 'S' (known: E, J, K, N, T)"),
    ({"profile": ""}, "profile must be a non-empty string, got ''"),
    ({"heater_ma": 0}, "heater current must be a positive finite number, got 0 mA"),
    ({"heater_ma": float("nan")}, "heater current must be a positive finite number, got nan mA"),
    ({"ref_c": float("inf")}, "reference temperature must be a finite number, got inf C"),
    ({"ref_c": None}, "reference temperature must be a finite number, got None C"),
    ({"source": 3}, "source must be a string, got 3"),
    ({"invalid_margin": 0.0}, "invalid margin must be a positive finite fraction, got 0"),
    ({"noise_mv": -0.01}, "noise must be a non-negative finite number, got -0.01 mV"),
])
def test_metadata_rules_have_exact_messages(kw, message):
    with pytest.raises(TableError) as err:
        make(**kw)
    assert str(err.value) == message


def test_bounds_on_point_count():
    assert MAX_POINTS >= 64
    full = make([(1000.0 - k, 1.0 + k) for k in range(MAX_POINTS)])
    assert len(full.points) == MAX_POINTS
    assert len(make(DEMO_POINTS[:4]).points) == 4


def test_known_types_match_the_thermocouple_module():
    # The literal fallback must list the ITS-90 types the core implements.
    try:
        from gaugecore.thermocouple import TYPES
    except ImportError:
        TYPES = ("E", "J", "K", "N", "T")
    assert tuple(TC_TYPES) == tuple(TYPES) == ("E", "J", "K", "N", "T")
    assert GASES == ("N2", "air", "He", "Ar", "H2", "CO2", "H2O")


def test_metadata_and_summary():
    t = make()
    assert (t.gas, t.profile, t.heater_ma, t.ref_c, t.tc_type) == ("N2", "wren-demo", 165.0, 0.0, "K")
    assert t.p_min_pa == 0.05 and t.p_max_pa == 400.0
    assert t.emf_range_mv == (0.8, 12.0)
    assert t.emf_invalid_above_mv == pytest.approx(12.0 * 1.15, rel=1e-15)
    assert t.describe() == ("N2 table for wren-demo (type K, 165 mA, ref 0 C): 8 points, "
                            "0.05..400 Pa, EMF 0.8..12 mV")
    assert t == make() and t != make(gas="air")
    assert str(make(ref_c=-0.0).ref_c) == "0.0"  # one zero, so one file form


# --- interpolation against the outside reference -------------------------------------------

def test_matches_scipy_pchip_on_the_demo_points():
    t = make()
    ref = scipy_reference(t)
    lo, hi = t.emf_range_mv
    for k in range(2001):
        e = lo + (hi - lo) * k / 2000.0
        p, state = t.convert(e)
        assert state == states.OK
        assert p == pytest.approx(10.0 ** float(ref(e)), rel=1e-12)


def test_slopes_match_scipy_derivative_at_the_knots():
    t = make()
    ref = scipy_reference(t).derivative()
    xs = t.segments()[0]
    for x, d in zip(xs, t._slopes):
        assert d == pytest.approx(float(ref(x)), rel=1e-12)


@settings(max_examples=60, deadline=None)
@given(tables(), st.lists(st.floats(0.0, 1.0), min_size=1, max_size=20))
def test_matches_scipy_pchip_on_random_tables(t, fractions):
    ref = scipy_reference(t)
    lo, hi = t.emf_range_mv
    for f in fractions:
        e = min(hi, lo + (hi - lo) * f)  # lo + (hi - lo) * 1.0 can round one ulp above hi
        p, state = t.convert(e)
        assert state == states.OK
        assert p == pytest.approx(10.0 ** float(ref(e)), rel=1e-12)


def test_points_convert_to_their_own_pressure():
    t = make()
    for e, p in DEMO_POINTS:
        assert t.convert(e) == (p, states.OK)


@settings(max_examples=60, deadline=None)
@given(tables(), st.lists(st.floats(0.0, 1.0), min_size=2, max_size=30))
def test_monotone_in_emf(t, fractions):
    lo, hi = t.emf_range_mv
    emfs = sorted(lo + (hi - lo) * f for f in fractions)
    ps = [t.convert(e)[0] for e in emfs]
    for a, b in zip(ps, ps[1:]):
        assert b <= a  # higher EMF, lower (or equal) pressure


@settings(max_examples=60, deadline=None)
@given(tables(), st.data())
def test_never_overshoots_between_neighbouring_points(t, data):
    pts = t.points
    i = data.draw(st.integers(0, len(pts) - 2))
    (e_lo_p, p_lo), (e_hi_p, p_hi) = pts[i], pts[i + 1]  # EMF falls as pressure rises
    e = data.draw(st.floats(e_hi_p, e_lo_p))
    p, state = t.convert(e)
    assert state == states.OK
    assert p_lo <= p <= p_hi


# --- states at and beyond the ends --------------------------------------------------------

def test_states_at_and_beyond_each_end():
    t = make()
    assert t.convert(12.0) == (0.05, states.OK)  # on the top point
    assert t.convert(0.8) == (400.0, states.OK)  # on the bottom point
    assert t.convert(12.0001) == (0.05, states.UNDER)
    assert t.convert(12.0 * 1.15) == (0.05, states.UNDER)  # just inside the margin
    assert t.convert(12.0 * 1.15 + 1e-9) == (None, states.INVALID)
    assert t.convert(50.0) == (None, states.INVALID)
    assert t.convert(float("inf")) == (None, states.INVALID)
    assert t.convert(0.7999) == (400.0, states.OVER)
    assert t.convert(0.0) == (400.0, states.OVER)
    assert t.convert(-0.05) == (400.0, states.OVER)  # within the noise band
    assert t.convert(-0.0500001) == (None, states.INVALID)
    assert t.convert(-3.0) == (None, states.INVALID)  # reversed couple
    assert t.convert(float("-inf")) == (None, states.INVALID)


def test_nan_is_invalid_never_a_number():
    p, state = make().convert(float("nan"))
    assert p is None and state == states.INVALID


def test_margins_are_stored_in_the_table():
    t = make(invalid_margin=0.5, noise_mv=0.2)
    assert t.convert(17.9) == (0.05, states.UNDER)
    assert t.convert(18.1) == (None, states.INVALID)
    assert t.convert(-0.19) == (400.0, states.OVER)
    assert t.convert(-0.21) == (None, states.INVALID)
    strict = make(noise_mv=0.0)
    assert strict.convert(0.0) == (400.0, states.OVER)
    assert strict.convert(-1e-12) == (None, states.INVALID)
