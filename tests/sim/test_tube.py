"""The tube's heat balance against kinetic theory, Fourier conduction and CoolProp.

Sources named beside each check: Knudsen, Ann. Phys. 34, 593 (1911) and
Kennard, Kinetic Theory of Gases (1938) for free-molecular conduction; the
coaxial-cylinder Fourier solution (Incropera, Fundamentals of Heat and Mass
Transfer) for the continuum; Churchill & Chu, Int. J. Heat Mass Transfer 18,
1049 (1975) for natural convection; CoolProp (PyPI) for gas properties; the
`thermocouples` package (PyPI, NIST ITS-90) for the EMF.
"""

import math
import time

import numpy as np
import pytest
import thermocouples
from CoolProp.CoolProp import PropsSI

from tcgauge.sim import tube as tube_mod
from tcgauge.sim.gas import get_gas
from tcgauge.sim.profile import TubeProfile, load_profile
from tcgauge.sim.tube import (Tube, convection_conductance_w_k, gas_conductance_w_k,
                              rayleigh_number, steady_state)

R = 8.314462618  # CODATA 2018
SIGMA = 5.670374419e-8  # CODATA 2018
FLUIDS = {"N2": "Nitrogen", "air": "Air", "He": "Helium", "Ar": "Argon",
          "H2": "Hydrogen", "CO2": "CarbonDioxide", "H2O": "Water"}
PROF = load_profile("wren-demo")
I_A = 0.165


def _cv_mean_coolprop(fluid, t_cold_k, t_hot_k):
    """Mean ideal-gas cv/R over [t_cold, t_hot] from CoolProp's Cp0molar (trapezoid rule)."""
    t = np.linspace(t_cold_k, t_hot_k, 201)
    cv = np.array([PropsSI("Cp0molar", "T", x, "P", 1000.0, fluid) for x in t]) / R - 1.0
    return float(np.sum((cv[1:] + cv[:-1]) * 0.5 * np.diff(t)) / (t_hot_k - t_cold_k))


def _knudsen_coeff(fluid, t_wall_k, t_fil_k):
    """alpha-free Knudsen Lambda0 (Knudsen 1911; Kennard 1938) from CoolProp's M and gamma.

    gamma from cv averaged between wall and filament, (gamma+1)/(gamma-1) = 1 + 2 cv/R;
    the root at the wall temperature (the arriving gas).
    """
    cv = _cv_mean_coolprop(fluid, t_wall_k, t_fil_k)
    gamma = (cv + 1.0) / cv
    return (gamma + 1) / (gamma - 1) * math.sqrt(R / (8 * math.pi * PropsSI("M", fluid) * t_wall_k))


@pytest.mark.parametrize("name", ["N2", "He", "Ar", "H2", "CO2"])
def test_free_molecular_slope_is_knudsens(name):
    # Knudsen 1911 / Kennard 1938: dG/dp = alpha Lambda0 A as p -> 0
    fil_c, wall_c = 300.0, 22.0
    g1 = gas_conductance_w_k(PROF, name, 1e-4, fil_c, wall_c)
    g2 = gas_conductance_w_k(PROF, name, 2e-4, fil_c, wall_c)
    ref = get_gas(name).alpha * PROF.heater_area_m2 * _knudsen_coeff(FLUIDS[name], wall_c + 273.15, fil_c + 273.15)
    assert (g2 - g1) / 1e-4 == pytest.approx(ref, rel=2e-3)
    assert PROF.heater_area_m2 == pytest.approx(2 * math.pi * PROF.heater_radius_m * PROF.heater_length_m, rel=1e-15)


@pytest.mark.parametrize("name", ["N2", "air", "He", "Ar", "H2", "CO2"])
def test_continuum_limit_is_coaxial_fourier_conduction(name):
    # Fourier, coaxial cylinders: G = 2 pi lambda L / ln(r2/r1) (Incropera ch. 3).
    # The model and this test take lambda as its mean over [T_wall, T_filament]
    # (Kirchhoff transform), CoolProp at 101325 Pa, trapezoid rule.
    fil_c, wall_c = 60.0, 22.0
    t = np.linspace(wall_c + 273.15, fil_c + 273.15, 101)
    lam = np.array([PropsSI("L", "T", x, "P", 101325.0, FLUIDS[name]) for x in t])
    lam_mean = float(np.sum((lam[1:] + lam[:-1]) * 0.5 * np.diff(t)) / (t[-1] - t[0]))
    ref = 2 * math.pi * lam_mean * PROF.heater_length_m / math.log(PROF.envelope_radius_m / PROF.heater_radius_m)
    assert gas_conductance_w_k(PROF, name, 1e12, fil_c, wall_c) == pytest.approx(ref, rel=5e-3)
    # ... which for 38 K is within 0.1 % of lambda at the mean film temperature (CoolProp)
    lam_film = PropsSI("L", "T", 0.5 * (fil_c + wall_c) + 273.15, "P", 101325.0, FLUIDS[name])
    assert lam_mean == pytest.approx(lam_film, rel=1e-3)


def test_transition_is_shermans_harmonic_sum():
    # Sherman 1963 (Springer, Adv. Heat Transfer 7, 1971): 1/G = 1/G_fm + 1/G_cont
    fil_c, wall_c, p = 100.0, 22.0, 50.0
    gas = get_gas("N2")
    g_fm = gas.alpha * gas.free_molecular_coeff(295.15, 373.15) * PROF.heater_area_m2 * p
    g_c = PROF.continuum_shape_m * gas.mean_conductivity_w_mk(295.15, 373.15)
    assert gas_conductance_w_k(PROF, "N2", p, fil_c, wall_c) == pytest.approx(1 / (1 / g_fm + 1 / g_c), rel=1e-14)


PRESSURES = np.logspace(-4, 5, 37)


@pytest.mark.parametrize("name", sorted(FLUIDS))
def test_energy_balance_closes_in_steady_state(name):
    # First law: heater power = sum of the losses, to 1e-9 of the power
    for conv in (False, True):
        s = steady_state(PROF, name, PRESSURES, I_A, t_wall_c=22.0, convection=conv)
        losses = s.gas_w + s.radiation_w + s.solid_w + s.convection_w
        assert np.max(np.abs(s.power_w - losses) / s.power_w) < 1e-9
        # terms are the textbook expressions at the solved temperature
        t1, t2 = s.filament_c + 273.15, 22.0 + 273.15
        assert np.allclose(s.radiation_w, PROF.heater_emissivity * SIGMA * PROF.heater_area_m2 * (t1 ** 4 - t2 ** 4), rtol=1e-12)
        assert np.allclose(s.power_w, I_A ** 2 * s.resistance_ohm, rtol=1e-12)
        if not conv:
            assert np.all(s.convection_w == 0.0)


def test_steady_state_broadcasts_and_matches_pointwise_solves():
    p = np.array([0.01, 1.0, 100.0, 1e4])
    cur = np.array([[0.12], [0.165], [0.2]])
    s = steady_state(PROF, "Ar", p, cur, t_wall_c=30.0, t_ref_c=25.0)
    assert s.filament_c.shape == (3, 4) and s.emf_mv.shape == (3, 4)
    for j in range(3):
        for k in range(4):
            one = steady_state(PROF, "Ar", float(p[k]), float(cur[j, 0]), t_wall_c=30.0, t_ref_c=25.0)
            assert float(one.filament_c) == pytest.approx(s.filament_c[j, k], rel=1e-12)
            t = Tube(PROF, "Ar", t_wall_c=30.0)
            t1 = tube_mod._solve_scalar_k(PROF, get_gas("Ar"), float(p[k]), float(cur[j, 0]), 303.15, False)
            assert t1 - 273.15 == pytest.approx(s.filament_c[j, k], rel=1e-11)
            assert t.tau_s(float(p[k]), float(cur[j, 0]), 30.0) == pytest.approx(s.tau_s[j, k], rel=1e-6)
    # more current, hotter; more pressure, cooler
    assert np.all(np.diff(s.filament_c, axis=0) > 0) and np.all(np.diff(s.filament_c, axis=1) < 0)


def test_steady_state_emf_is_its90_type_k():
    # thermocouples (PyPI) implements NIST ITS-90 type K; law of intermediate temperatures
    s = steady_state(PROF, "N2", np.array([1e-3, 10.0, 1e5]), I_A, t_wall_c=22.0, t_ref_c=22.0)
    k = thermocouples.get_thermocouple("K")
    for t, e in zip(s.filament_c, s.emf_mv):
        assert e == pytest.approx(k.temp_to_volt(t) * 1e3 - k.temp_to_volt(22.0) * 1e3, abs=1e-6)


def test_steady_state_rejects_negative_pressure():
    with pytest.raises(ValueError, match=r"^steady_state: pressures must be finite and >= 0$"):
        steady_state(PROF, "N2", np.array([1.0, -1.0]), I_A)


@pytest.mark.parametrize("p", [1e-3, 10.0, 1e5])
def test_advance_reaches_the_steady_state(p):
    # exact exponential steps: after ~60 time constants within 1e-6 K of the solver
    tube = Tube(PROF, "N2", t_wall_c=22.0)
    target = float(steady_state(PROF, "N2", p, I_A, 22.0).filament_c)
    tau = tube.tau_s(p, I_A, 22.0)
    for _ in range(int(60 * tau / 0.5)):
        tube.advance(0.5, I_A, p, 22.0)
    assert abs(tube.filament_c - target) < 1e-6
    assert type(tube.filament_c) is float  # plain floats in the per-step path, no numpy


def test_advance_is_stable_for_huge_steps():
    tube = Tube(PROF, "H2", t_wall_c=22.0)
    target = float(steady_state(PROF, "H2", 1e-3, I_A, 22.0).filament_c)
    temps = [tube.advance(1e6, I_A, 1e-3, 22.0) for _ in range(20)]
    # the first call ends with a Newton step from below: it may overshoot a hair, never diverge
    assert all(abs(t - target) < 0.01 for t in temps)
    assert temps[-1] == pytest.approx(target, abs=1e-6)
    # heater off: back to the wall
    for _ in range(3):
        tube.advance(1e6, 0.0, 1e-3, 22.0)
    assert tube.filament_c == pytest.approx(22.0, abs=1e-6)


@pytest.mark.parametrize("p", [1e-3, 10.0, 1000.0])
def test_small_excursions_decay_with_tau(p):
    # linear ODE C dx/dt = -k x: x(t) = x0 exp(-t / tau)
    tube = Tube(PROF, "N2", t_wall_c=22.0)
    target = float(steady_state(PROF, "N2", p, I_A, 22.0).filament_c)
    tau = tube.tau_s(p, I_A, 22.0)
    tube.filament_c = target + 0.01
    for _ in range(100):
        tube.advance(tau / 100, I_A, p, 22.0)
    assert (tube.filament_c - target) / 0.01 == pytest.approx(math.exp(-1.0), rel=1e-3)


def test_analytic_stiffness_matches_the_numerical_derivative():
    gas = get_gas("CO2")
    for p in (0.0, 1e-2, 10.0, 1e3, 1e5):
        t1 = 420.0
        k = tube_mod._terms(PROF, gas, p, I_A, t1, 295.15, False)[5]
        num = (tube_mod._net_w(PROF, gas, p, I_A, t1 - 1e-3, 295.15, False)
               - tube_mod._net_w(PROF, gas, p, I_A, t1 + 1e-3, 295.15, False)) / 2e-3
        assert k == pytest.approx(num, rel=1e-7)


def test_advance_rejects_negative_dt():
    with pytest.raises(ValueError, match=r"^advance: dt_s must be >= 0, got -1\.0$"):
        Tube(PROF, "N2").advance(-1.0, I_A, 1.0, 22.0)


def test_advance_is_cheap():
    # the whole simulator must run >= 1000x real time; one advance per read at
    # ~20 reads/s/channel leaves 50 us; demand a tenth of that (median of 3 runs)
    tube = Tube(PROF, "N2")
    runs = []
    for _ in range(3):
        t0 = time.perf_counter()
        for _ in range(5000):
            tube.advance(0.05, I_A, 10.0, 22.0)
        runs.append((time.perf_counter() - t0) / 5000)
    assert sorted(runs)[1] < 5e-6 * 4  # 20 us allowance for a loaded shared machine


def test_heater_resistance_follows_its_tcr():
    # R = rho L / (pi r^2) (1 + TCR (t - t_ref)), Ohm's law geometry
    r_ref = PROF.heater_resistivity_ohm_m * PROF.heater_length_m / (math.pi * PROF.heater_radius_m ** 2)
    tube = Tube(PROF, "N2", t_wall_c=20.0)
    assert tube.heater_resistance_ohm() == pytest.approx(r_ref, rel=1e-14)
    tube.filament_c = 320.0
    assert tube.heater_resistance_ohm() == pytest.approx(r_ref * (1 + PROF.heater_tcr_per_k * 300.0), rel=1e-14)


def test_pickup_follows_the_sign_of_the_current():
    tube = Tube(PROF, "N2", t_wall_c=22.0)
    tube.advance(100.0, I_A, 1e-3, 22.0)
    v_mv = I_A * tube.heater_resistance_ohm() * 1000.0
    assert tube.pickup_mv(I_A) == pytest.approx(0.02 * v_mv, rel=1e-14)
    assert tube.pickup_mv(-I_A) == pytest.approx(-0.02 * v_mv, rel=1e-14)
    assert tube.pickup_mv(0.0) == 0.0


def test_tube_emf_uses_the_reference_junction():
    # thermocouples (PyPI, NIST ITS-90 type K): E = E(T1) - E(T_ref)
    tube = Tube(PROF, "N2", t_wall_c=22.0)
    tube.filament_c = 250.0
    k = thermocouples.get_thermocouple("K")
    for ref in (0.0, 22.0, 35.0):
        want = (k.temp_to_volt(250.0) - k.temp_to_volt(ref)) * 1e3
        assert tube.emf_mv(ref) == pytest.approx(want, abs=1e-6)


def test_set_gas_changes_the_steady_state():
    tube = Tube(PROF, "N2", t_wall_c=22.0)
    tube.set_gas("He")
    assert tube.gas.name == "He"
    for _ in range(40):
        tube.advance(1e3, I_A, 10.0, 22.0)
    assert tube.filament_c == pytest.approx(float(steady_state(PROF, "He", 10.0, I_A).filament_c), abs=1e-6)
    with pytest.raises(ValueError, match="^unknown gas 'Ne'"):
        tube.set_gas("Ne")


def test_relative_sensitivities_follow_kinetic_theory():
    # docs/physics.md s. 3: in the linear range the sensitivity scales as alpha (gamma+1)/((gamma-1) sqrt(M));
    # gamma from CoolProp's cv averaged between wall and the high-vacuum filament temperature
    p = np.array([1e-3, 2e-3])
    base = steady_state(PROF, "N2", p, I_A, 22.0)
    t_fil_k = float(base.filament_c[0]) + 273.15

    def factor(name):
        fluid = FLUIDS[name]
        cv = _cv_mean_coolprop(fluid, 295.15, t_fil_k)
        gamma = (cv + 1) / cv
        return get_gas(name).alpha * (gamma + 1) / ((gamma - 1) * math.sqrt(PropsSI("M", fluid)))

    slope_n2 = -np.diff(base.emf_mv)[0]
    for name in ("He", "Ar", "H2", "CO2"):
        s = steady_state(PROF, name, p, I_A, 22.0)
        assert -np.diff(s.emf_mv)[0] / slope_n2 == pytest.approx(factor(name) / factor("N2"), rel=0.01), name


def _big_tube():
    """An invented thick-wire, wide-envelope variant of the demo tube, where convection starts."""
    data = dict(PROF.data, name="thick-test", heater_radius_m=1e-3, envelope_radius_m=0.02)
    return TubeProfile(data)


def test_convection_is_off_by_default_and_follows_raithby_hollands():
    assert PROF.natural_convection is False
    # Rayleigh number of an ideal gas: rho ~ p, so Ra ~ p^2
    ra1 = rayleigh_number(PROF, "N2", 5e4, 40.0, 22.0)
    assert rayleigh_number(PROF, "N2", 1e5, 40.0, 22.0) == pytest.approx(4 * ra1, rel=1e-14)
    # Raithby & Hollands 1975 (Incropera s. 9.8): Ra_c* = ln(Do/Di)^4 Ra_L / (L^3 (Di^-3/5 + Do^-3/5)^5),
    # Ra_L = g beta dT L^3 / (nu kappa), L = (Do - Di)/2, beta = 1/T; CoolProp's rho, cp, mu,
    # lambda at the mean temperature; within 8 % (the model takes mu from Eucken's Prandtl number)
    big = _big_tube()
    t_f, p = 0.5 * (60.0 + 22.0) + 273.15, 101325.0
    rho, cp = PropsSI("D", "T", t_f, "P", p, "Nitrogen"), PropsSI("C", "T", t_f, "P", p, "Nitrogen")
    mu, lam = PropsSI("V", "T", t_f, "P", p, "Nitrogen"), PropsSI("L", "T", t_f, "P", p, "Nitrogen")
    di, do = 2 * big.heater_radius_m, 2 * big.envelope_radius_m
    gap = (do - di) / 2
    ra_l = 9.80665 / t_f * 38.0 * gap ** 3 / ((mu / rho) * (lam / (rho * cp)))
    ra_ref = math.log(do / di) ** 4 * ra_l / (gap ** 3 * (di ** -0.6 + do ** -0.6) ** 5)
    ra = rayleigh_number(big, "N2", p, 60.0, 22.0)
    assert 1e2 < ra < 1e7  # inside the correlation's range
    assert ra == pytest.approx(ra_ref, rel=0.08)
    gam = get_gas("N2").gamma_at(t_f)
    pr = 4 * gam / (9 * gam - 5)  # Eucken
    k_ratio = 0.386 * (pr / (0.861 + pr)) ** 0.25 * ra ** 0.25
    assert k_ratio > 1.2
    want = big.continuum_shape_m * get_gas("N2").conductivity_w_mk(t_f) * (k_ratio - 1)
    assert convection_conductance_w_k(big, "N2", p, 60.0, 22.0) == pytest.approx(want, rel=1e-12)
    # below the onset (k_eff/k < 1) nothing is added: low pressure, or the demo's thin wire even at
    # atmosphere (docs/physics.md s. 2: negligible below about 10 Torr in a centimetre envelope)
    assert convection_conductance_w_k(big, "N2", 1333.0, 60.0, 22.0) == 0.0
    assert convection_conductance_w_k(PROF, "N2", p, 60.0, 22.0) == 0.0
    on = steady_state(big, "N2", np.array([100.0, 101325.0]), 6.0, convection=True)
    off = steady_state(big, "N2", np.array([100.0, 101325.0]), 6.0)
    assert on.filament_c[0] == off.filament_c[0]
    assert on.convection_w[1] > 0.1 * on.gas_w[1] and on.filament_c[1] < off.filament_c[1]
