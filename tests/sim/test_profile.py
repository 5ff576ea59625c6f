"""Tube profiles: loading, validation, and the demo tube against facts of the trade.

The `wren-demo` tube is invented; its behaviour is checked against what
thermocouple gauge tubes are commonly known to do. EMFs are stated with the
reference junction at the wall (the tube pins at room temperature), as a
tube's output is read.
"""

import json
import math

import numpy as np
import pytest

from tcgauge.sim.profile import PROFILE_DIR, TubeProfile, load_profile, profile_names
from tcgauge.sim.tube import Tube, steady_state

TORR_PA = 101325.0 / 760.0  # NIST SP 811 B.8
WALL_C = 22.0


@pytest.fixture(scope="module")
def prof():
    return load_profile("wren-demo")


def _emf(prof, gas, p, current=None):
    cur = prof.nominal_current_a if current is None else current
    return steady_state(prof, gas, p, cur, t_wall_c=WALL_C, t_ref_c=WALL_C)


def test_demo_profile_is_labelled_invented(prof):
    assert prof.name == "wren-demo" and "wren-demo" in profile_names()
    assert prof.source.startswith("invented")
    assert prof.junction_type == "K"
    assert prof.pickup_fraction == 0.02
    assert prof.natural_convection is False


def test_heater_current_and_resistance(prof):
    # common practice, no published source: ~165 mA into ~1.5 ohm
    assert prof.nominal_current_a == pytest.approx(0.165, rel=1e-12)
    s = _emf(prof, "N2", np.array([1e-3, 1e5]))
    assert np.all(np.abs(s.resistance_ohm - 1.5) < 0.05)


def test_high_vacuum_emf(prof):
    # common practice, no published source: 10-15 mV at high vacuum
    e = float(_emf(prof, "N2", 1e-4).emf_mv)
    assert 10.0 <= e <= 15.0
    assert e == pytest.approx(prof.nominal_vacuum_emf_mv, rel=0.01)


def test_atmosphere_emf_in_air(prof):
    # common practice, no published source: 0.5-1 mV with the tube full of air at atmosphere
    assert 0.5 <= float(_emf(prof, "air", 101325.0).emf_mv) <= 1.0


def test_useful_range_is_about_a_millitorr_to_a_torr(prof):
    # McGraw-Hill Dictionary of Scientific and Technical Terms, 'thermocouple vacuum gage':
    # 1e-3 to 1e-1 mm Hg; common practice, no published source: up to about 1 Torr.
    # Criterion: |dE/dlog10 p| >= 200 uV per decade (20x a 10 uV reading noise) across
    # 1e-3..1 Torr, and under 50 uV per decade two decades beyond either end.
    p = np.logspace(-6, 5.5, 231)
    s = _emf(prof, "N2", p)
    slope_uv = -np.gradient(s.emf_mv, np.log10(p)) * 1e3
    inside = (p >= 1e-3 * TORR_PA) & (p <= 1.0 * TORR_PA)
    assert np.all(slope_uv[inside] >= 200.0)
    assert np.all(slope_uv[p <= 1e-5 * TORR_PA] < 50.0)
    assert np.all(slope_uv[p >= 100.0 * TORR_PA] < 50.0)
    assert np.all(np.diff(s.emf_mv) < 0)  # EMF falls with pressure everywhere


def test_time_constant_is_seconds_and_shorter_at_higher_pressure(prof):
    # docs/physics.md s. 1 (from memory): response is slow, seconds, slower at low pressure
    tube = Tube(prof, "N2", t_wall_c=WALL_C)
    tau_hv = tube.tau_s(1e-3, prof.nominal_current_a, WALL_C)
    tau_100 = tube.tau_s(100.0, prof.nominal_current_a, WALL_C)
    assert 2.0 <= tau_hv <= 20.0
    assert tau_100 < 0.5 * tau_hv


def test_nominal_current_setup_reaches_the_nominal_emf(prof):
    # docs/physics.md s. 7 (from memory): a tube is set up at high vacuum by adjusting the current
    # until the EMF reaches its nominal value; the demo's nominal pair must be consistent
    lo = float(_emf(prof, "N2", 1e-4, 0.95 * prof.nominal_current_a).emf_mv)
    hi = float(_emf(prof, "N2", 1e-4, 1.05 * prof.nominal_current_a).emf_mv)
    assert lo < prof.nominal_vacuum_emf_mv < hi


def test_derived_quantities_are_the_textbook_expressions(prof):
    r1, length = prof.heater_radius_m, prof.heater_length_m
    # coaxial cylinders, Fourier: G = 2 pi L lambda / ln(r2/r1) (Incropera ch. 3)
    assert prof.continuum_shape_m == pytest.approx(2 * math.pi * length / math.log(prof.envelope_radius_m / r1), rel=1e-15)
    # R = rho L / A (Ohm)
    assert prof.resistance_ref_ohm == pytest.approx(prof.heater_resistivity_ohm_m * length / (math.pi * r1 ** 2), rel=1e-15)
    # uniform generation, ends at the post temperature: mean rise P L / (12 k A) (Incropera ch. 3);
    # legs k A / l each
    a = math.pi * r1 ** 2
    legs = sum(k * math.pi * prof.tc_leg_radius_m ** 2 / prof.tc_leg_length_m for k in prof.tc_leg_conductivities_w_mk)
    assert prof.solid_conductance_w_k == pytest.approx(12 * prof.heater_conductivity_w_mk * a / length + legs, rel=1e-15)
    assert prof.heat_capacity_j_k == pytest.approx(prof.heater_heat_capacity_j_m3k * a * length + prof.junction_heat_capacity_j_k, rel=1e-15)


def test_adding_a_profile_is_a_json_file(tmp_path, prof):
    data = dict(prof.data, name="test-finch", source="invented for a test", heater_length_m=0.05)
    path = tmp_path / "test-finch.json"
    path.write_text(json.dumps(data))
    other = load_profile(str(path))
    assert other.name == "test-finch" and other.heater_length_m == 0.05
    assert other.resistance_ref_ohm == pytest.approx(prof.resistance_ref_ohm * 0.05 / prof.heater_length_m, rel=1e-14)
    assert load_profile(other) is other


def test_unknown_profile_names_the_choices():
    known = ", ".join(profile_names())
    with pytest.raises(ValueError, match=r"^unknown tube profile 'nope' \(known: %s\)$" % known):
        load_profile("nope")


def test_profile_validation_messages(prof):
    with pytest.raises(ValueError, match="^tube profile heater_radius_m must be > 0, got -1$"):
        TubeProfile(dict(prof.data, heater_radius_m=-1))
    with pytest.raises(ValueError, match="^tube profile lacks pickup_fraction$"):
        TubeProfile({k: v for k, v in prof.data.items() if k != "pickup_fraction"})
    with pytest.raises(ValueError, match="^tube profile has unknown keys colour$"):
        TubeProfile(dict(prof.data, colour="red"))
    with pytest.raises(ValueError, match="^tube profile envelope_radius_m must exceed heater_radius_m$"):
        TubeProfile(dict(prof.data, envelope_radius_m=1e-5))
    with pytest.raises(ValueError, match="^tube profile natural_convection must be true or false$"):
        TubeProfile(dict(prof.data, natural_convection=0))
    with pytest.raises(ValueError, match="^tube profile heater_emissivity must be <= 1$"):
        TubeProfile(dict(prof.data, heater_emissivity=1.5))


def test_shipped_profiles_all_load():
    for name in profile_names():
        assert load_profile(name).name == name
    assert PROFILE_DIR.endswith("profiles")
