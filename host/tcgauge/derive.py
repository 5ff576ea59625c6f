"""Tables for other gases, derived from a measured N2 table through the tube model.

Steps (`derive_table`):
1. fit the tube model to the N2 table (tcgauge.tubefit: solid and radiative
   losses, alpha_N2 A, continuum shape factor);
2. run the fitted model in the target gas over a pressure range fitting
   that gas, with the same number of points as the N2 table;
3. band per point, as a lower and upper pressure at the point's EMF, from
   - the accommodation ratio alpha_gas / alpha_N2: the N2 fit pins
     alpha_N2 A, so the target gas's free-molecular term scales with that
     ratio; its relative spread is the root sum of squares of the two
     gases' relative spreads (`Gas.alpha_spread`, docs/physics.md s. 3). The
     model is rerun at alpha_gas (1 -/+ u) and the pressure found at the
     same EMF (a band edge, not a standard uncertainty: the spreads are
     ranges, from memory for most gases);
   - the fit's covariance C (tcgauge.tubefit), propagated linearly:
     u_fit^2 = g^T C g, g_j = -(dE/dx_j) / (dE/d ln p) at fixed EMF
     (Press et al., Numerical Recipes, ch. 15.6, for the linear
     propagation), taken at coverage factor k = 2 (GUM, ISO/IEC Guide 98-3);
   combined in quadrature in ln p;
4. warnings where the derivation is weak (see `WARN_*` and `_warnings`).

Why a whole table and not a factor: in the free-molecular range the ratio
of readings is alpha (gamma+1)/((gamma-1) sqrt(M)) (Knudsen 1911; Kennard
1938), but towards the continuum the gas conductance saturates at
S_cont lambda (Sherman 1963), so the ratio changes with pressure.

The band goes to a sidecar file (tcgauge.band), the table to a normal
table file; the table's `source` field says how it was made.
"""

import logging
import math
import os

import numpy as np

from gaugecore import tablefile, units
from gaugecore.table import GASES as TABLE_GASES
from gaugecore.table import Table, TableError
from tcgauge import band as bandmod
from tcgauge.errors import TcgaugeError
from tcgauge.sim.gas import get_gas
from tcgauge.sim.simtable import rise_slope_per_k
from tcgauge.tubefit import DEFAULT_WALL_C, fit_n2_table, with_alpha

log = logging.getLogger(__name__)

# Warning thresholds (relative band as in `relative_band`): choices of this project (common practice, no published source).
WARN_REL_BAND = 0.30        # relative band half-width above which a point is weak
WARN_CONTINUUM_SHARE = 0.5  # G_fm/(G_fm+G_cont) above which the continuum term dominates
WARN_RMS_MV = 0.010         # rms fit residual (10 uV, a few counts of a good EMF front end)
WARN_POINT_MV = 0.030       # any single fit residual
K_FIT = 2.0                 # coverage factor of the fit's part of the band
_DENSE = 6                  # dense-grid points per table point for the alpha inversion
_H_LOG = 1e-3               # finite-difference step in log scale and log pressure


class DeriveError(TcgaugeError):
    """A derivation cannot be made or written (one line)."""


class Derivation:
    """A derived table with its band, the fit it came from, and warnings."""

    def __init__(self, table, band, fit, warnings, shares):
        self.table = table
        self.band = band
        self.fit = fit
        self.warnings = warnings
        self.continuum_share = shares


def _free_molecular(gas, t_k):
    g = get_gas(gas)
    return g.alpha * g.free_molecular_coeff(t_k)


def default_range_pa(fit, gas):
    """(p_min, p_max) for `gas`: the N2 table's range times the free-molecular ratio.

    (alpha Lambda0)_N2 / (alpha Lambda0)_gas at the wall temperature (Knudsen
    1911): at the low end the gas then takes the heat N2 takes at the N2
    table's low end, so both tables start at the same EMF, and the span in
    decades stays the same. Where the gas's EMF leaves the N2 table's EMF span
    (a high-conductivity gas cools the filament further than N2 ever does)
    `derive_table` warns.
    """
    t2 = fit.t_wall_c + 273.15
    r_fm = _free_molecular("N2", t2) / _free_molecular(gas, t2)
    return fit.table.p_min_pa * r_fm, fit.table.p_max_pa * r_fm


def _invert(e_curve, ln_p, e_at):
    """ln p at EMFs `e_at` on a curve falling in EMF (linear in ln p; ends extrapolated)."""
    x = e_curve[::-1]
    y = ln_p[::-1]
    out = np.interp(e_at, x, y)
    lo = e_at < x[0]
    hi = e_at > x[-1]
    out[lo] = y[0] + (e_at[lo] - x[0]) * (y[1] - y[0]) / (x[1] - x[0])
    out[hi] = y[-1] + (e_at[hi] - x[-1]) * (y[-1] - y[-2]) / (x[-1] - x[-2])
    return out


def alpha_ratio_spread(gas):
    """Relative spread of alpha_gas / alpha_N2 (root sum of squares of the two)."""
    g, n2 = get_gas(gas), get_gas("N2")
    return math.hypot(g.alpha_spread / g.alpha, n2.alpha_spread / n2.alpha)


def band_limits(fit, gas, p_pa, e_mv):
    """(ln-p half-widths down and up, alpha part down/up, fit part) per point; see module docstring."""
    g = get_gas(gas)
    u = alpha_ratio_spread(g)
    pd = np.logspace(math.log10(p_pa[0]) - 0.7, math.log10(p_pa[-1]) + 0.7, _DENSE * len(p_pa))
    ln_pd = np.log(pd)
    ln_p = np.log(p_pa)
    shifted = []
    for f in (1.0 - u, 1.0 + u):
        e_f = fit.emf_mv(with_alpha(g, g.alpha * f), pd)
        shifted.append(_invert(e_f, ln_pd, e_mv) - ln_p)
    a_down = np.maximum(0.0, -np.minimum(shifted[0], shifted[1]))
    a_up = np.maximum(0.0, np.maximum(shifted[0], shifted[1]))
    e_p = fit.emf_mv(g, p_pa * math.exp(_H_LOG))
    e_m = fit.emf_mv(g, p_pa * math.exp(-_H_LOG))
    de_dlnp = (e_p - e_m) / (2.0 * _H_LOG)
    grad = np.empty((len(p_pa), len(fit.log_scales)))
    for j in range(len(fit.log_scales)):
        x = fit.log_scales.copy()
        x[j] += _H_LOG
        grad[:, j] = -((fit.emf_mv(g, p_pa, x) - e_mv) / _H_LOG) / de_dlnp
    u_fit = np.sqrt(np.einsum("ij,jk,ik->i", grad, fit.cov, grad))
    down = np.sqrt(a_down ** 2 + (K_FIT * u_fit) ** 2)
    up = np.sqrt(a_up ** 2 + (K_FIT * u_fit) ** 2)
    return down, up, a_down, a_up, u_fit


def relative_band(p_pa, down, up):
    """Relative band per point: (upper - lower) / (2 p), from the ln-p half-widths."""
    return 0.5 * (np.exp(up) - np.exp(-down))


def _fmt_p(p_pa):
    return "%.3g Pa (%.3g Torr)" % (p_pa, units.from_pa(p_pa, "TORR"))


def spans(p_pa, mask):
    """Runs of True in `mask` as (p_first, p_last) pairs."""
    out = []
    start = None
    for k in range(len(mask)):
        if mask[k] and start is None:
            start = k
        if start is not None and (not mask[k] or k == len(mask) - 1):
            end = k if mask[k] else k - 1
            out.append((float(p_pa[start]), float(p_pa[end])))
            start = None
    return out


def _where(p_pa, mask):
    return ", ".join("%s to %s" % (_fmt_p(a), _fmt_p(b)) if a != b else _fmt_p(a)
                     for a, b in spans(p_pa, mask))


def _warnings(fit, gas, p, e, down, up, shares):
    """Warning strings where the derivation is weak (empty list: none)."""
    out = []
    if fit.rms_mv > WARN_RMS_MV or fit.max_abs_mv > WARN_POINT_MV:
        out.append("fit: residuals are large (rms %.3g mV, worst %.3g mV at %s; limits %.3g and "
                   "%.3g mV): the %s model does not describe this N2 table well, so every derived "
                   "point is suspect" % (fit.rms_mv, fit.max_abs_mv,
                                         _fmt_p(fit.table.points[fit.worst][1]),
                                         WARN_RMS_MV, WARN_POINT_MV, fit.base.name))
    e_lo, e_hi = fit.emf_range_mv
    outside = (e > e_hi) | (e < e_lo)
    if np.any(outside):
        out.append("range: %s: the EMF lies outside the N2 table's %.4g..%.4g mV, the model is "
                   "extrapolated" % (_where(p, outside), e_lo, e_hi))
    wide = relative_band(p, down, up) > WARN_REL_BAND
    if np.any(wide):
        out.append("band: %s: the band's half-width exceeds %.0f %% of the pressure"
                   % (_where(p, wide), 100 * WARN_REL_BAND))
    cont = shares > WARN_CONTINUUM_SHARE
    if np.any(cont):
        out.append("continuum: %s: gas conduction is continuum-limited (G_fm/(G_fm+G_cont) > %.2g); "
                   "the reading rests on the conductivity ratio lambda_%s/lambda_N2 and the fitted "
                   "shape factor, not on accommodation, and the band understates that"
                   % (_where(p, cont), WARN_CONTINUUM_SHARE, get_gas(gas).name))
    return out


def derive_table(n2, gas, profile="wren-demo", p_min_pa=None, p_max_pa=None, points=None,
                 t_wall_c=None, fit=None):
    """Derive the table for `gas` from the N2 `Table` `n2` -> `Derivation`.

    t_wall_c: the wall temperature of the N2 table (default: the one it
    states, else DEFAULT_WALL_C). The derived table states it too and carries
    the fitted model's rise slopes d ln(dT)/dT_wall per point
    (tcgauge.sim.simtable.rise_slope_per_k on the fitted profile in `gas`), so
    the channel's rise referral corrects it for the wall as it does the N2 table.

    The range defaults to `default_range_pa`; `points` to the N2 table's
    count. `fit` reuses a tcgauge.tubefit.Fit of that table. Raises DeriveError
    (or tcgauge.tubefit.FitError).
    """
    if gas not in TABLE_GASES:
        raise DeriveError("unknown gas %r (known: %s)" % (gas, ", ".join(TABLE_GASES)))
    if gas == "N2":
        raise DeriveError("the base table is already for N2: nothing to derive")
    g = get_gas(gas)
    if t_wall_c is None:
        t_wall_c = fit.t_wall_c if fit is not None else (
            n2.wall_c if n2.wall_c is not None else DEFAULT_WALL_C)
    if fit is None:
        fit = fit_n2_table(n2, profile, t_wall_c)
    d_lo, d_hi = default_range_pa(fit, g)
    lo = d_lo if p_min_pa is None else float(p_min_pa)
    hi = d_hi if p_max_pa is None else float(p_max_pa)
    if not 0.0 < lo < hi:
        raise DeriveError("need 0 < p_min < p_max, got %.4g and %.4g Pa" % (lo, hi))
    n = len(n2.points) if points is None else int(points)
    if not 4 <= n <= 128:
        raise DeriveError("points must be 4..128, got %d" % n)
    p = np.logspace(math.log10(lo), math.log10(hi), n)
    try:
        e = fit.emf_mv(g, p)
        slopes = rise_slope_per_k(fit.profile(), g, p, fit.current_a, fit.t_wall_c)
        down, up = band_limits(fit, g, p, e)[:2]
        shares = fit.gas_shares(g, p)
    except (ArithmeticError, ValueError) as exc:
        raise DeriveError("the fitted model fails for %s over %.4g..%.4g Pa: %s" % (gas, lo, hi, exc))
    warnings = _warnings(fit, g, p, e, down, up, shares)
    u = alpha_ratio_spread(g)
    n2_crc = tablefile.parse(tablefile.dumps(n2))[1]
    source = ("derived, not measured: tcgauge.derive from the N2 table crc32 0x%08x (tube %s), "
              "model profile %s, wall %.4g C; fit: %s; %s alpha %.3g +/- %.2g (%s); band: alpha ratio "
              "+/- %.1f %% and fit covariance (k=2), -%.1f..+%.1f %% at most, kept in the "
              "sidecar *.band.json" % (n2_crc, n2.profile, fit.base.name, t_wall_c, fit.describe(),
                                       g.name, g.alpha, g.alpha_spread, g.alpha_source, 100 * u,
                                       100 * float(np.max(1 - np.exp(-down))),
                                       100 * float(np.max(np.expm1(up)))))
    try:
        table = Table([(float(a), float(b)) for a, b in zip(e, p)], gas, n2.profile, n2.heater_ma,
                      n2.ref_c, n2.tc_type, source=source, invalid_margin=n2.invalid_margin,
                      noise_mv=n2.noise_mv, wall_c=fit.t_wall_c,
                      rise_slope_per_k=[float(k) for k in slopes])
        # As the file will hold it (10 digits): the table in memory equals the one read back.
        table = tablefile.loads(tablefile.dumps(table))
    except (TableError, tablefile.TableFileError) as exc:
        raise DeriveError("derived %s table is not valid: %s" % (gas, exc))
    tp = np.array(table.points)
    info = {"base_table_crc32": "0x%08x" % n2_crc, "base_gas": n2.gas, "model_profile": fit.base.name,
            "wall_c": t_wall_c, "fit": dict(zip(("G_solid_w_k", "eps_area_m2", "alpha_n2_area_m2",
                                                 "continuum_shape_m"), map(float, fit.values))),
            "fit_rel_std": [float(x) for x in fit.rel_std], "fit_rms_mv": fit.rms_mv,
            "alpha": g.alpha, "alpha_spread": g.alpha_spread, "alpha_source": g.alpha_source,
            "alpha_n2": fit.gas_n2.alpha, "alpha_n2_spread": fit.gas_n2.alpha_spread,
            "alpha_ratio_rel_spread": u, "k_fit": K_FIT, "warnings": warnings}
    band = bandmod.Band(gas, n2.profile,
                        np.column_stack([tp[:, 0], tp[:, 1], tp[:, 1] * np.exp(-down),
                                         tp[:, 1] * np.exp(up)]),
                        method="alpha ratio +/- spread (model rerun, same EMF) in quadrature with "
                               "the fit covariance at k=2, in ln p", info=info)
    log.info("derived %s; %d warning(s)", table.describe(), len(warnings))
    return Derivation(table, band, fit, warnings, shares)


def write(derivation, path, force=False):
    """Write the derived table to `path` and its band to `band.band_path(path)`.

    Refuses to overwrite either file unless `force`. Returns the band path.
    """
    bpath = bandmod.band_path(path)
    if not force:
        for target in (path, bpath):
            if os.path.exists(target):
                raise DeriveError("%s exists; use --force to overwrite" % target)
    derivation.band.table_crc32 = tablefile.parse(tablefile.dumps(derivation.table))[1]
    try:
        tablefile.save(path, derivation.table)
        bandmod.save(bpath, derivation.band)
    except OSError as exc:
        raise DeriveError("cannot write %s: %s" % (exc.filename or path, exc.strerror or exc))
    return bpath
