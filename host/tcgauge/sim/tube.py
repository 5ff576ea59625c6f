"""Lumped heat balance of a thermocouple gauge tube (docs/physics.md s. 2).

    C_th dT1/dt = I^2 R_h(T1) - G_gas(p) dT - eps sigma A (T1^4 - T2^4) - G_solid dT - G_conv dT

T1 filament (and junction), T2 wall (follows ambient), dT = T1 - T2.

- Gas conduction: free-molecular G_fm = alpha Lambda0 A p, Lambda0 from
  Knudsen, Ann. Phys. 34, 593 (1911) and Kennard, Kinetic Theory of Gases
  (1938), with the root at the wall temperature T2 (the arriving gas) and cv
  averaged over [T2, T1] (see tcgauge.sim.gas); continuum
  G_cont = 2 pi L lambda / ln(r2/r1) with lambda averaged over [T2, T1]
  (Kirchhoff transform); joined by 1/G = 1/G_fm + 1/G_cont (Sherman 1963,
  reviewed by Springer, Adv. Heat Transfer 7 (1971)).
- Radiation: grey filament of emissivity eps in a much larger enclosure.
- Solid: heater ends (12 k A / L, see tcgauge.sim.profile) and thermocouple legs.
- Natural convection (off by default): the horizontal concentric-cylinder
  correlation of Raithby & Hollands (Adv. Heat Transfer 11, 1975; volume
  from memory), as given in Incropera, Fundamentals
  of Heat and Mass Transfer, s. 9.8: k_eff/k = 0.386 (Pr/(0.861+Pr))^(1/4)
  Ra_c*^(1/4), k_eff = k below the onset; the excess over still-gas
  conduction is added to G_gas. Ra_c* scales with p^2 (ideal gas). Pr from
  Eucken's relation 4 gamma / (9 gamma - 5) (Chapman & Cowling, The
  Mathematical Theory of Non-Uniform Gases). A single-cylinder correlation
  (Churchill & Chu 1975) was not used: extrapolated far below its range
  (Ra >= 1e-5) it adds a spurious Ra^(1/6) term at gauge pressures.
- Heater resistance with a linear TCR; EMF from gaugecore's ITS-90 functions.

The balance terms use only arithmetic operators, so one function serves the
per-step path (plain floats, no numpy: `Tube.advance`) and the vectorised
`steady_state` (numpy arrays).
"""

import math

from gaugecore import thermocouple

from tcgauge.sim.gas import get_gas
from tcgauge.sim.profile import load_profile

SIGMA_W_M2K4 = 5.670374419e-8  # Stefan-Boltzmann constant, exact in the 2019 SI (CODATA 2018)
G_M_S2 = 9.80665  # standard gravity (CGPM 1901)
T0_K = 273.15


def _gas_parts(prof, gas, p_pa, t1_k, t2_k):
    """(G_gas, dG_gas/dT1) in W/K and W/K^2, Sherman interpolation."""
    k_fm = gas.alpha * prof.heater_area_m2 * p_pa
    g_fm = k_fm * gas.free_molecular_coeff(t2_k, t1_k)
    dg_fm = k_fm * gas.free_molecular_coeff_dhot(t2_k, t1_k)
    g_cont = prof.continuum_shape_m * gas.mean_conductivity_w_mk(t2_k, t1_k)
    dg_cont = prof.continuum_shape_m * gas.mean_conductivity_dhot(t2_k, t1_k)
    s = g_fm + g_cont
    return g_fm * g_cont / s, (g_cont * g_cont * dg_fm + g_fm * g_fm * dg_cont) / (s * s)


def _rayleigh(prof, gas, p_pa, t1_k, t2_k):
    """(Ra_c*, Pr, lambda) of the annulus at the mean temperature (T1 + T2)/2.

    Ra_c* = ln(r2/r1)^4 g beta dT / (nu kappa (D1^-3/5 + D2^-3/5)^5), ideal gas
    (beta = 1/T, rho = p M / (R T)), so Ra_c* scales with p^2; nu kappa =
    Pr lambda^2 / (rho cp)^2 with Pr from Eucken's relation.
    """
    t_f = 0.5 * (t1_k + t2_k)
    lam = gas.conductivity_w_mk(t_f)
    cv = gas.cv_over_r(t_f)
    gamma = (cv + 1.0) / cv
    pr = 4.0 * gamma / (9.0 * gamma - 5.0)
    rho_cp = p_pa * (cv + 1.0) / t_f  # rho * cp = (p M / (R T)) ((cv/R + 1) R / M)
    ra = (G_M_S2 * abs(t1_k - t2_k) * rho_cp * rho_cp / (t_f * pr * lam * lam)
          * prof.convection_geometry_m3)
    return ra, pr, lam


def _convection_w_k(prof, gas, p_pa, t1_k, t2_k):
    """Natural-convection excess conductance (W/K), Raithby & Hollands 1975.

    k_eff / k = max(1, 0.386 (Pr / (0.861 + Pr))^(1/4) Ra_c*^(1/4)); the excess
    (k_eff/k - 1) times the continuum conductance, zero below the onset.
    """
    ra, pr, lam = _rayleigh(prof, gas, p_pa, t1_k, t2_k)
    x = 0.386 * (pr / (0.861 + pr)) ** 0.25 * ra ** 0.25 - 1.0
    return prof.continuum_shape_m * lam * 0.5 * (x + abs(x))


def _terms(prof, gas, p_pa, i_a, t1_k, t2_k, convection):
    """(heater_w, gas_w, radiation_w, solid_w, convection_w, k).

    k = -d(net power)/dT1, analytic; the convection term's own temperature
    dependence is left out of k (it only shapes the approach, not the root).
    """
    dt = t1_k - t2_k
    i2 = i_a * i_a
    heater = i2 * prof.heater_resistance_ohm(t1_k - T0_K)
    g, dg = _gas_parts(prof, gas, p_pa, t1_k, t2_k)
    era = prof.heater_emissivity * SIGMA_W_M2K4 * prof.heater_area_m2
    t1_3 = t1_k * t1_k * t1_k
    rad = era * (t1_3 * t1_k - t2_k ** 4)
    solid = prof.solid_conductance_w_k * dt
    if convection:
        gc = _convection_w_k(prof, gas, p_pa, t1_k, t2_k)
    else:
        gc = 0.0 * dt
    k = (g + dg * dt + gc + prof.solid_conductance_w_k + 4.0 * era * t1_3
         - i2 * prof.resistance_ref_ohm * prof.heater_tcr_per_k)
    return heater, g * dt, rad, solid, gc * dt, k


def _net_w(prof, gas, p_pa, i_a, t1_k, t2_k, convection):
    h, g, r, s, c, _ = _terms(prof, gas, p_pa, i_a, t1_k, t2_k, convection)
    return h - g - r - s - c


def _use_convection(prof, convection):
    return prof.natural_convection if convection is None else bool(convection)


def _start_k(prof, i_a, t2_k):
    """A starting filament temperature above the root (losses linearised at the wall)."""
    k = (prof.solid_conductance_w_k
         + 4.0 * prof.heater_emissivity * SIGMA_W_M2K4 * prof.heater_area_m2 * t2_k ** 3
         - i_a * i_a * prof.resistance_ref_ohm * prof.heater_tcr_per_k)
    return t2_k + i_a * i_a * prof.heater_resistance_ohm(t2_k - T0_K) / k


def _solve_scalar_k(prof, gas, p_pa, i_a, t2_k, convection):
    """Steady filament temperature (K) in plain floats, Newton on the balance."""
    t1 = _start_k(prof, i_a, t2_k)
    for _ in range(100):
        h, g, r, s, c, k = _terms(prof, gas, p_pa, i_a, t1, t2_k, convection)
        step = (h - g - r - s - c) / k
        t1 = t1 + step
        if abs(step) <= 1e-13 * t1:
            return t1
    raise ArithmeticError("steady state did not converge")


def gas_conductance_w_k(profile, gas, pressure_pa, filament_c, wall_c):
    """G_gas (W/K) of the tube's gas between filament and wall (float or array)."""
    return _gas_parts(load_profile(profile), get_gas(gas), pressure_pa,
                      filament_c + T0_K, wall_c + T0_K)[0]


def rayleigh_number(profile, gas, pressure_pa, filament_c, wall_c):
    """Raithby-Hollands annulus Rayleigh number Ra_c* at the mean temperature."""
    return _rayleigh(load_profile(profile), get_gas(gas), pressure_pa, filament_c + T0_K, wall_c + T0_K)[0]


def convection_conductance_w_k(profile, gas, pressure_pa, filament_c, wall_c):
    """Natural-convection excess conductance (W/K), Raithby & Hollands 1975."""
    return _convection_w_k(load_profile(profile), get_gas(gas), pressure_pa,
                           filament_c + T0_K, wall_c + T0_K)


class Tube:
    """One simulated tube: filament temperature state and its heat balance."""

    MAX_SUBSTEPS = 16

    def __init__(self, profile, gas, t_wall_c=22.0, convection=None):
        self.profile = load_profile(profile)
        self.gas = get_gas(gas)
        self.convection = _use_convection(self.profile, convection)
        self.t_wall_c = float(t_wall_c)
        self.filament_c = float(t_wall_c)

    def set_gas(self, gas):
        """Fill the tube with another gas (a name or a `Gas`)."""
        self.gas = get_gas(gas)

    def heater_resistance_ohm(self):
        """Heater resistance at the present filament temperature."""
        return self.profile.heater_resistance_ohm(self.filament_c)

    def advance(self, dt_s, current_a, pressure_pa, t_wall_c):
        """Integrate the heat balance over dt_s at constant current, pressure and wall.

        Each substep is the exact exponential step of the balance linearised
        at its start, T1 += (f/k)(1 - exp(-k h / C)): stable for any dt; a
        step of infinite length lands on the linearised root, so repeated
        steps converge on the true steady state. Substeps are at most half a
        time constant (at most MAX_SUBSTEPS of them). Plain floats only.
        """
        if dt_s < 0.0:
            raise ValueError("advance: dt_s must be >= 0, got %r" % (dt_s,))
        self.t_wall_c = t_wall_c
        if dt_s == 0.0:
            return self.filament_c
        prof, gas, conv = self.profile, self.gas, self.convection
        c_th = prof.heat_capacity_j_k
        t2 = t_wall_c + T0_K
        t1 = self.filament_c + T0_K
        left = dt_s
        n = 0
        while left > 0.0:
            h, g, r, s, c, k = _terms(prof, gas, pressure_pa, current_a, t1, t2, conv)
            f = h - g - r - s - c
            n += 1
            step = 0.5 * c_th / k
            if step >= left or n >= self.MAX_SUBSTEPS:
                step = left
            left -= step
            t1 = t1 + f / k * (1.0 - math.exp(-k * step / c_th))
        self.filament_c = t1 - T0_K
        return self.filament_c

    def tau_s(self, pressure_pa, current_a, t_wall_c):
        """Time constant C_th / k of small excursions about the steady state for these conditions.

        k = -d(net power)/dT1 at the steady filament temperature.
        """
        t2 = t_wall_c + T0_K
        t1 = _solve_scalar_k(self.profile, self.gas, pressure_pa, current_a, t2, self.convection)
        k = _terms(self.profile, self.gas, pressure_pa, current_a, t1, t2, self.convection)[5]
        return self.profile.heat_capacity_j_k / k

    def emf_mv(self, t_ref_c):
        """Thermocouple EMF (mV) with the reference junction at t_ref_c; no pickup."""
        tc = self.profile.junction_type
        return thermocouple.emf_mv(tc, self.filament_c) - thermocouple.emf_mv(tc, t_ref_c)

    def pickup_mv(self, current_a):
        """Signed heater pickup on the junction: fraction * I * R_h, in mV."""
        return self.profile.pickup_fraction * current_a * self.heater_resistance_ohm() * 1000.0


class SteadyState:
    """Arrays of one `steady_state` call (all broadcast to one shape)."""

    def __init__(self, **arrays):
        self.__dict__.update(arrays)

    def __repr__(self):
        return "SteadyState(%s)" % ", ".join(sorted(self.__dict__))


def steady_state(profile, gas, pressure_pa, current_a, t_wall_c=22.0, t_ref_c=0.0, convection=None):
    """Steady filament state over numpy arrays (pressure, current, wall, reference broadcast).

    Newton iterations on the balance, all points at once, with the exact
    derivative of the net power taken by central difference (h = 1e-3 K);
    stops when every step is below 1e-12 of the filament temperature.
    Returns a `SteadyState` with filament_c, emf_mv, power_w, gas_w,
    radiation_w, solid_w, convection_w, resistance_ohm, tau_s, and the
    broadcast inputs pressure_pa, current_a, t_wall_c, t_ref_c.
    """
    import numpy as np

    prof = load_profile(profile)
    gas = get_gas(gas)
    conv = _use_convection(prof, convection)
    p, i_a, tw, tr = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in
                                           (pressure_pa, current_a, t_wall_c, t_ref_c)))
    if np.any(p < 0.0) or not np.all(np.isfinite(p)):
        raise ValueError("steady_state: pressures must be finite and >= 0")
    t2 = tw + T0_K
    t1 = _start_k(prof, i_a, t2)
    h = 1e-3
    for _ in range(100):
        f = _net_w(prof, gas, p, i_a, t1, t2, conv)
        df = (_net_w(prof, gas, p, i_a, t1 + h, t2, conv) - _net_w(prof, gas, p, i_a, t1 - h, t2, conv)) / (2 * h)
        step = -f / df
        t1 = t1 + step
        if np.all(np.abs(step) <= 1e-12 * t1):
            break
    else:
        raise ArithmeticError("steady_state did not converge")
    heater, gas_w, rad, solid, conv_w, _ = _terms(prof, gas, p, i_a, t1, t2, conv)
    filament_c = t1 - T0_K
    tc = prof.junction_type
    emf = np.array([thermocouple.emf_mv(tc, a) - thermocouple.emf_mv(tc, b)
                    for a, b in zip(filament_c.ravel(), tr.ravel())]).reshape(filament_c.shape)
    tau = -prof.heat_capacity_j_k / df
    return SteadyState(filament_c=filament_c, emf_mv=emf, power_w=heater, gas_w=gas_w,
                       radiation_w=rad, solid_w=solid, convection_w=conv_w,
                       resistance_ohm=prof.heater_resistance_ohm(filament_c), tau_s=tau,
                       pressure_pa=p, current_a=i_a, t_wall_c=tw, t_ref_c=tr)
