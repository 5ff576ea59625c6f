"""Fit the simulator's tube model to a measured N2 table of one tube.

The model is the lumped heat balance of tcgauge.sim.tube (docs/physics.md s. 2)
on a base profile (default `wren-demo`) whose four lumped loss terms are
scaled; the fit finds the four scales by least squares in EMF:

    G_solid          solid conduction (heater ends, thermocouple legs), W/K
    eps A            radiating emissivity x area, m^2
    alpha_N2 A       N2 accommodation x area for free-molecular conduction
                     (Knudsen 1911; Kennard 1938), m^2
    S_cont           continuum shape factor 2 pi L / ln(r2/r1), m
                     (G_cont = S_cont lambda; joined to the free-molecular
                     term by Sherman's 1/G = 1/G_fm + 1/G_cont, Sherman 1963)

What an N2 table can and cannot pin down, and what is therefore fixed:
- alpha_N2 and A enter only as their product (every N2 term has alpha A p),
  so A is fitted and alpha_N2 is fixed to the gas's value (Gas.alpha, Trott
  et al. 2011); its spread is carried into the derived band instead.
- Emissivity and radiating area enter only as eps A.
- Heater power I^2 R(T1) against the sum of the losses: scaling R by k is
  exactly the same as scaling every loss by 1/k, so R stays the profile's
  and the fitted losses are effective values relative to it.
- G_solid and eps A are separated only by the T1^4 curvature of radiation
  as the filament cools along the table: their sum at the high-vacuum
  filament temperature is pinned tightly, the split weakly (correlation
  near -1; see `Fit.correlation`). The covariance carries this honestly
  into the derived band, since another gas heats the filament over the same
  temperature range.
- S_cont is pinned only as far as the N2 table reaches the continuum end.

Parameters are fitted as natural logarithms of the scales (positive by
construction) with scipy.optimize.least_squares; the covariance is
s^2 (J^T J)^-1 with s^2 = sum r^2 / (n - m), the usual estimate for
unweighted least squares (Press et al., Numerical Recipes, 3rd ed.,
ch. 15.4-15.5).
"""

import copy
import logging

import numpy as np

from tcgauge.errors import TcgaugeError
from tcgauge.sim.gas import get_gas
from tcgauge.sim.profile import load_profile
from tcgauge.sim.tube import T0_K, steady_state

log = logging.getLogger(__name__)

PARAMS = ("solid_conductance_w_k", "emissivity_area_m2", "alpha_area_m2", "continuum_shape_m")
DEFAULT_WALL_C = 22.0  # the profiles' set-up wall temperature (tcgauge.sim.profile)


class FitError(TcgaugeError):
    """The tube model cannot be fitted to the table (one line, names the cause)."""


def base_values(profile, alpha_n2):
    """The four lumped loss values of `profile` (in PARAMS order), alpha_N2 given."""
    return np.array([profile.solid_conductance_w_k,
                     profile.heater_emissivity * profile.heater_area_m2,
                     alpha_n2 * profile.heater_area_m2,
                     profile.continuum_shape_m])


def scaled_profile(base, scales):
    """A copy of `base` with the lumped losses scaled (PARAMS order).

    Sets the lumped attributes tcgauge.sim.tube reads: solid_conductance_w_k,
    heater_area_m2 (gas and radiation), heater_emissivity (so that eps A is
    scaled by scales[1] whatever the area) and continuum_shape_m.
    """
    s = [float(x) for x in scales]
    prof = copy.copy(base)
    prof.solid_conductance_w_k = base.solid_conductance_w_k * s[0]
    prof.heater_area_m2 = base.heater_area_m2 * s[2]
    prof.heater_emissivity = base.heater_emissivity * s[1] / s[2]
    prof.continuum_shape_m = base.continuum_shape_m * s[3]
    return prof


def with_alpha(gas, alpha):
    """A copy of the `Gas` `gas` with accommodation coefficient `alpha`."""
    g = copy.copy(get_gas(gas))
    g.alpha = float(alpha)
    return g


class Fit:
    """Result of `fit_n2_table`: fitted scales, covariance, residuals, and the model."""

    def __init__(self, table, base, t_wall_c, log_scales, cov, residuals_mv, nfev):
        self.table = table
        self.base = base
        self.t_wall_c = t_wall_c
        self.current_a = table.heater_ma * 1e-3
        self.gas_n2 = get_gas("N2")
        self.log_scales = np.asarray(log_scales, dtype=float)
        self.cov = np.asarray(cov, dtype=float)
        self.residuals_mv = np.asarray(residuals_mv, dtype=float)
        self.nfev = nfev
        self.rms_mv = float(np.sqrt(np.mean(self.residuals_mv ** 2)))
        self.worst = int(np.argmax(np.abs(self.residuals_mv)))
        self.max_abs_mv = float(abs(self.residuals_mv[self.worst]))
        self.base_values = base_values(base, self.gas_n2.alpha)
        self.values = self.base_values * np.exp(self.log_scales)
        sd = np.sqrt(np.diag(self.cov))
        self.rel_std = sd  # std of log scale = relative std of the value
        self.correlation = self.cov / np.outer(sd, sd) if np.all(sd > 0) else self.cov * np.nan
        self.emf_range_mv = table.emf_range_mv

    def profile(self, log_scales=None):
        """The fitted (or, with `log_scales`, a perturbed) effective profile."""
        x = self.log_scales if log_scales is None else log_scales
        return scaled_profile(self.base, np.exp(x))

    def model(self, gas, pressure_pa, log_scales=None):
        """tcgauge.sim.tube.SteadyState of the fitted tube in `gas` (name or Gas)."""
        return steady_state(self.profile(log_scales), gas, np.asarray(pressure_pa, dtype=float),
                            self.current_a, t_wall_c=self.t_wall_c, t_ref_c=self.table.ref_c)

    def emf_mv(self, gas, pressure_pa, log_scales=None):
        """Model EMF (mV, at the table's ref_c) of the fitted tube in `gas`."""
        return self.model(gas, pressure_pa, log_scales).emf_mv

    def gas_shares(self, gas, pressure_pa):
        """G_fm / (G_fm + G_cont) per pressure: 0 free-molecular, 1 continuum-limited."""
        g = get_gas(gas)
        prof = self.profile()
        p = np.asarray(pressure_pa, dtype=float)
        t1 = self.model(g, p).filament_c + T0_K
        t2 = self.t_wall_c + T0_K
        g_fm = g.alpha * prof.heater_area_m2 * p * g.free_molecular_coeff(t2, t1)
        g_c = prof.continuum_shape_m * g.mean_conductivity_w_mk(t2, t1)
        return g_fm / (g_fm + g_c)

    def summary(self):
        """Lines describing the fit."""
        names = ("G_solid", "eps*A", "alpha_N2*A", "S_cont")
        units = ("W/K", "m^2", "m^2", "m")
        lines = ["fit of the %s tube model to the N2 table (%d points, wall %.4g C, %d model runs):"
                 % (self.base.name, len(self.table.points), self.t_wall_c, self.nfev)]
        for k in range(4):
            lines.append("  %-11s %.5g %s  (x%.4f of the profile, +/- %.2g %%)"
                         % (names[k], self.values[k], units[k], np.exp(self.log_scales[k]),
                            100.0 * self.rel_std[k]))
        lines.append("  alpha_N2 fixed at %.3g (only alpha_N2*A is identifiable); "
                     "correlation G_solid/eps*A %.4f" % (self.gas_n2.alpha, self.correlation[0, 1]))
        lines.append("  residuals: rms %.3g mV, worst %.3g mV at %.4g Pa"
                     % (self.rms_mv, self.max_abs_mv, self.table.points[self.worst][1]))
        return lines

    def describe(self):
        """One line of the fitted values, for a table's `source` field."""
        return ("G_solid %.5g W/K, eps*A %.5g m^2, alpha_N2*A %.5g m^2 (alpha_N2 %.3g fixed), "
                "S_cont %.5g m; rms residual %.3g mV"
                % (self.values[0], self.values[1], self.values[2], self.gas_n2.alpha,
                   self.values[3], self.rms_mv))


def fit_n2_table(table, profile="wren-demo", t_wall_c=DEFAULT_WALL_C):
    """Fit the tube model to the N2 `Table` -> `Fit`. Raises FitError.

    The table's heater current and reference temperature are used; the wall
    temperature is not in the table and defaults to 22 C.
    """
    from scipy.optimize import least_squares

    if table.gas != "N2":
        raise FitError("the base table must be an N2 table, this one is for %s" % table.gas)
    try:
        base = load_profile(profile)
    except (ValueError, OSError) as exc:
        raise FitError(str(exc))
    if base.junction_type != table.tc_type:
        raise FitError("profile %s has a type %s junction but the table is for type %s"
                       % (base.name, base.junction_type, table.tc_type))
    p = np.array([pt[1] for pt in table.points])
    e = np.array([pt[0] for pt in table.points])
    m = len(PARAMS)
    if len(p) <= m + 1:
        raise FitError("the table has %d points; the fit needs more than %d" % (len(p), m + 1))
    cur = table.heater_ma * 1e-3

    def residuals(x):
        prof = scaled_profile(base, np.exp(x))
        return steady_state(prof, "N2", p, cur, t_wall_c=t_wall_c, t_ref_c=table.ref_c).emf_mv - e

    try:
        res = least_squares(residuals, np.zeros(m), diff_step=1e-4, bounds=(-5.0, 5.0))
    except (ArithmeticError, ValueError) as exc:
        raise FitError("the %s tube model does not converge on this table: %s" % (base.name, exc))
    jac = res.jac
    dof = len(p) - m
    s2 = float(np.sum(res.fun ** 2)) / dof
    try:
        cov = s2 * np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        raise FitError("the fit is singular: the table does not determine the tube's losses")
    fit = Fit(table, base, t_wall_c, res.x, cov, res.fun, res.nfev)
    log.info("fit: %s", fit.describe())
    return fit
