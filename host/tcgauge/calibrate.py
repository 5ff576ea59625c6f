"""Calibration of a gauge channel by direct comparison with a reference gauge.

Structure after ISO 3567:2011 (vacuum gauges, calibration by direct
comparison with a reference gauge: traceable reference, stated gas, base
pressure and its drift, port non-uniformity) and ISO 27893:2011 (evaluation
of the uncertainties of such calibrations, per the GUM, ISO/IEC Guide 98-3).
Library pieces, no CLI and no link: the guided command passes callables.

1. Stability (`stable_at`, `first_stable`, `first_stable_pair`): a reading
   is taken only when the device EMF and the reference have both settled:
   over the last `window_s` seconds the least-squares drift |slope| *
   window_s is at most `ratio` times the residual noise of those readings
   (plus an absolute and a relative floor).
2. Collection (`collect_point`): read_emf(), reference.read_pa(), wait(s)
   and a progress callback; returns a `CalPoint` (the readings of the
   stable window).
3. Fit (`fit_table`): pairs (EMF referred to the table's reference
   temperature, reference pressure) -> a monotone gaugecore `Table`;
   points closer than `merge_rel` in pressure are merged, points that break
   the strict EMF fall are rejected with a reason (the fewest possible: the
   longest strictly falling run is kept); leave-one-out residuals of the
   PCHIP measure the interpolation error.
4. Budget (`point_budget`, `evaluate`): per point and over the range, the
   components below, combined in quadrature (GUM 5.1.2, uncorrelated
   inputs, sensitivity 1 after conversion to Pa) and expanded with k = 2.
   `Calibration.u_rel_at(p)` gives the expanded relative uncertainty
   between points (the larger of the two neighbours').

Budget components (standard uncertainties, in Pa):
- reference: u_rel * p (certificate, k=1)
- reference drift: drift_rel * p / sqrt(3) (rectangular, GUM 4.3.7)
- reference resolution: res / sqrt(12) (rectangular of full width res,
  GUM F.2.2.1)
- reference repeatability: s / sqrt(n) of its readings (type A, GUM 4.2)
- port non-uniformity: 0.3 % of p below 100 Pa, 0.1 % at and above
  (ISO 3567:2011)
- base pressure drift: base_drift_pa / sqrt(3) (rectangular)
- device EMF repeatability: |dp/dE| s_E / sqrt(n) (type A, through the new
  table's slope)
- device EMF resolution: |dp/dE| res_E / sqrt(12)
- fit / interpolation: |leave-one-out residual| * p (an end point takes its
  neighbour's). Leaving a point out doubles the local spacing, so this
  overstates the error between the points of the full table: conservative.
  It also contains the point's own scatter (counted again: conservative).
- reproducibility: reproducibility_rel * p, the relative standard deviation
  of repeated calibrations of the same tube in the same gas (after venting and
  a new zero; `reproducibility_from` computes it from their tables, type A,
  GUM 4.2.2). Without it the budget holds for this run only, and `evaluate`
  says so in a note: a thermocouple tube's calibration moves with every zero,
  contamination and handling (docs/physics.md s. 6).
Correction factor CF = p_cal / p_ind (ISO 27893) where a previous table
gave an indication p_ind for the same EMF.

Details of ISO 27893 beyond its structure are from memory (docs/physics.md s. 6).
"""

import math

from gaugecore import states
from gaugecore.table import Table, TableError
from tcgauge.errors import TcgaugeError
from tcgauge.refgauge import (  # noqa: F401  (re-exported for callers)
    ReferenceGauge,
    ReferenceGaugeError,
    SerialReference,
    SimReference,
    TypedReference,
)

K_COVERAGE = 2.0  # ISO 27893 / GUM 6.2: expanded uncertainty U = k u_c, k = 2
PORT_SPLIT_PA = 100.0  # ISO 3567:2011 port non-uniformity
PORT_U_REL_LOW = 0.003  # below 100 Pa
PORT_U_REL_HIGH = 0.001  # at and above 100 Pa
SQRT3 = math.sqrt(3.0)
SQRT12 = math.sqrt(12.0)


class CalibrationError(TcgaugeError):
    """A calibration step cannot go on; the message says why."""


# ------------------------------------------------------------------ stability

def window_fit(times_s, values, end, window_s):
    """Least squares over the readings in (t_end - window_s, t_end].

    Returns (n, slope per s, residual sd, mean), or None when the series
    does not yet cover the whole window (no reading at or before its start)
    or fewer than 3 readings fall in it.
    """
    t_end = times_s[end]
    start = t_end - window_s
    if times_s[0] > start:
        return None
    i = end
    while i > 0 and times_s[i - 1] > start:
        i -= 1
    n = end - i + 1
    if n < 3:
        return None
    ts = times_s[i:end + 1]
    vs = values[i:end + 1]
    tm = sum(ts) / n
    vm = sum(vs) / n
    sxx = sum((t - tm) ** 2 for t in ts)
    sxy = sum((t - tm) * (v - vm) for t, v in zip(ts, vs))
    slope = sxy / sxx
    ss = sum((v - vm - slope * (t - tm)) ** 2 for t, v in zip(ts, vs))
    return n, slope, math.sqrt(ss / (n - 2)), vm


def stable_at(times_s, values, end, window_s, ratio=2.0, floor=0.0, floor_rel=0.0, min_points=5):
    """True if the readings up to index `end` are stable over the window:
    |slope| * window_s <= ratio * sd + floor + floor_rel * |mean|, with at
    least min_points readings in the window."""
    fit = window_fit(times_s, values, end, window_s)
    if fit is None or fit[0] < min_points:
        return False
    n, slope, sd, mean = fit
    return abs(slope) * window_s <= ratio * sd + floor + floor_rel * abs(mean)


def first_stable(times_s, values, window_s, **kwargs):
    """Index of the first reading at which the series is stable, or None."""
    for end in range(len(values)):
        if stable_at(times_s, values, end, window_s, **kwargs):
            return end
    return None


def first_stable_pair(times_s, emf_mv, ref_pa, window_s, emf_kw=None, ref_kw=None):
    """First index at which the EMF and the reference series are both stable, or None."""
    for end in range(len(times_s)):
        if (stable_at(times_s, emf_mv, end, window_s, **(emf_kw or {}))
                and stable_at(times_s, ref_pa, end, window_s, **(ref_kw or {}))):
            return end
    return None


# ------------------------------------------------------------------ points

def _mean_sd(xs):
    n = len(xs)
    m = sum(xs) / n
    if n < 2:
        return m, None
    return m, math.sqrt(sum((x - m) ** 2 for x in xs) / (n - 1))


class CalPoint:
    """One calibration point: device EMF (mV, referred to the table's
    reference temperature) and reference pressure (Pa) readings taken together."""

    def __init__(self, emf_readings_mv, ref_readings_pa, time_s=None):
        if not emf_readings_mv or not ref_readings_pa:
            raise CalibrationError("a calibration point needs EMF and reference readings")
        self.emf_readings_mv = [float(x) for x in emf_readings_mv]
        self.ref_readings_pa = [float(x) for x in ref_readings_pa]
        self.emf_mv, self.emf_sd_mv = _mean_sd(self.emf_readings_mv)
        self.p_ref_pa, self.ref_sd_pa = _mean_sd(self.ref_readings_pa)
        self.time_s = time_s

    @classmethod
    def of(cls, item):
        """A CalPoint from a CalPoint or an (emf_mv, p_pa) pair."""
        if isinstance(item, CalPoint):
            return item
        emf, p = item
        return cls([emf], [p])

    def __repr__(self):
        return "CalPoint(%.6g mV, %.6g Pa, n=%d)" % (self.emf_mv, self.p_ref_pa, len(self.emf_readings_mv))


def collect_point(read_emf, reference, wait, progress=None, interval_s=1.0, window_s=20.0,
                  timeout_s=900.0, ratio=2.0, emf_floor_mv=0.0005, ref_floor_rel=0.0005,
                  min_points=5, now=None):
    """Read until EMF and reference are both stable; return the `CalPoint` of the window.

    read_emf() -> EMF mV referred to the table's reference temperature;
    reference.read_pa() -> Pa; wait(seconds); progress(dict) after each
    reading (keys t_s, emf_mv, p_ref_pa, emf_stable, ref_stable); now() ->
    seconds (default: the sum of the waits). CalibrationError after timeout_s.
    """
    times, emfs, refs = [], [], []
    t0 = now() if now is not None else 0.0
    t = t0
    while True:
        emfs.append(float(read_emf()))
        refs.append(float(reference.read_pa()))
        times.append(t - t0)
        end = len(times) - 1
        e_ok = stable_at(times, emfs, end, window_s, ratio, emf_floor_mv, 0.0, min_points)
        r_ok = stable_at(times, refs, end, window_s, ratio, 0.0, ref_floor_rel, min_points)
        if progress is not None:
            progress({"t_s": times[end], "emf_mv": emfs[end], "p_ref_pa": refs[end],
                      "emf_stable": e_ok, "ref_stable": r_ok})
        if e_ok and r_ok:
            start = times[end] - window_s
            i = end
            while i > 0 and times[i - 1] > start:
                i -= 1
            return CalPoint(emfs[i:], refs[i:], time_s=times[end])
        if times[end] >= timeout_s:
            raise CalibrationError(
                "no stable reading after %g s (EMF %s, reference %s)"
                % (times[end], "stable" if e_ok else "drifting", "stable" if r_ok else "drifting"))
        wait(interval_s)
        t = now() if now is not None else t + interval_s


# ------------------------------------------------------------------ fit

def _merge(points, merge_rel):
    """Group points (sorted by pressure) within merge_rel of the group's first."""
    groups = []
    for pt in points:
        if groups and pt.p_ref_pa <= groups[-1][0].p_ref_pa * (1.0 + merge_rel):
            groups[-1].append(pt)
        else:
            groups.append([pt])
    out, notes = [], []
    for g in groups:
        if len(g) == 1:
            out.append(g[0])
            continue
        emf = [x for pt in g for x in pt.emf_readings_mv]
        ref = [x for pt in g for x in pt.ref_readings_pa]
        out.append(CalPoint(emf, ref, g[-1].time_s))
        notes.append("merged %d points at %s Pa (within %g %%)"
                     % (len(g), ", ".join("%.4g" % pt.p_ref_pa for pt in g), merge_rel * 100.0))
    return out, notes


def _longest_falling(points):
    """Indices of the longest run with pressure rising and EMF strictly falling."""
    n = len(points)
    best = [1] * n
    back = [-1] * n
    for j in range(n):
        for i in range(j):
            if points[i].emf_mv > points[j].emf_mv and best[i] + 1 > best[j]:
                best[j] = best[i] + 1
                back[j] = i
    j = max(range(n), key=lambda k: (best[k], -k))
    keep = []
    while j >= 0:
        keep.append(j)
        j = back[j]
    return keep[::-1]


class FitResult:
    """The fitted table with its points, rejections, merges and leave-one-out residuals.

    loo_rel[k]: p_loo / p_ref - 1 for point k, where p_loo is what the table
    built without point k reads at its EMF; None for the two end points."""

    def __init__(self, table, points, rejected, merged, loo_rel):
        self.table = table
        self.points = points
        self.rejected = rejected
        self.merged = merged
        self.loo_rel = loo_rel


def _table(points, meta):
    return Table([(pt.emf_mv, pt.p_ref_pa) for pt in points], meta["gas"], meta["profile"],
                 meta["heater_ma"], meta["ref_c"], meta["tc_type"], meta.get("source", ""),
                 meta.get("invalid_margin", 0.15), meta.get("noise_mv", 0.05),
                 wall_c=meta.get("wall_c"))


def fit_table(pairs, gas, profile, heater_ma, ref_c, tc_type, source="", merge_rel=0.02, **table_kw):
    """Calibration pairs (CalPoints or (emf_mv, p_pa)) -> FitResult with a monotone Table.

    table_kw: invalid_margin, noise_mv, and wall_c, the tube's wall (pins)
    temperature during the calibration: give it, and the channel refers its
    readings to that wall. A calibration has no tube model, so its table
    carries no rise slopes: the channel applies plain wall referral (no
    correction of the rise for the wall's effect on the heat balance).
    """
    pts = sorted((CalPoint.of(p) for p in pairs), key=lambda pt: pt.p_ref_pa)
    for pt in pts:
        if not (math.isfinite(pt.p_ref_pa) and pt.p_ref_pa > 0.0 and math.isfinite(pt.emf_mv)):
            raise CalibrationError("bad calibration pair %r" % (pt,))
    pts, merged = _merge(pts, merge_rel)
    keep = _longest_falling(pts) if pts else []
    rejected = []
    kept = [pts[k] for k in keep]
    for k, pt in enumerate(pts):
        if k in keep:
            continue
        below = [pts[i] for i in keep if i < k]
        above = [pts[i] for i in keep if i > k]
        if below and not pt.emf_mv < below[-1].emf_mv:
            why = ("EMF %.6g mV at %.4g Pa does not fall below %.6g mV at %.4g Pa"
                   % (pt.emf_mv, pt.p_ref_pa, below[-1].emf_mv, below[-1].p_ref_pa))
        else:
            why = ("EMF %.6g mV at %.4g Pa is not above %.6g mV at %.4g Pa"
                   % (pt.emf_mv, pt.p_ref_pa, above[0].emf_mv, above[0].p_ref_pa))
        rejected.append((pt, "not monotone: " + why))
    meta = dict(table_kw, gas=gas, profile=profile, heater_ma=heater_ma, ref_c=ref_c,
                tc_type=tc_type, source=source)
    if len(kept) < 4:
        raise CalibrationError("only %d usable calibration points; a table needs at least 4" % len(kept))
    try:
        table = _table(kept, meta)
    except TableError as exc:
        raise CalibrationError("fitted table is invalid: %s" % exc)
    loo = [None] * len(kept)
    if len(kept) >= 5:
        for k in range(1, len(kept) - 1):
            sub = _table(kept[:k] + kept[k + 1:], meta)
            p, state = sub.convert(kept[k].emf_mv)
            loo[k] = p / kept[k].p_ref_pa - 1.0
    return FitResult(table, kept, rejected, merged, loo)


def dp_de_pa_per_mv(table, emf_mv, h_mv=1e-4):
    """Slope dp/dE (Pa per mV, negative) of the table at emf_mv, by finite difference."""
    lo, hi = table.emf_range_mv
    a = max(lo, emf_mv - h_mv)
    b = min(hi, emf_mv + h_mv)
    return (table.convert(b)[0] - table.convert(a)[0]) / (b - a)


# ------------------------------------------------------------------ budget

def port_u_rel(p_pa):
    """Relative standard uncertainty from port non-uniformity (ISO 3567:2011)."""
    return PORT_U_REL_LOW if p_pa < PORT_SPLIT_PA else PORT_U_REL_HIGH


class Budget:
    """Uncertainty budget of one point: rows (name, type, u_pa), u_c_pa, k, U_pa."""

    def __init__(self, p_pa, rows, k=K_COVERAGE):
        self.p_pa = p_pa
        self.rows = rows
        self.u_c_pa = math.sqrt(sum(u * u for _, _, u in rows))
        self.k = k
        self.U_pa = k * self.u_c_pa

    @property
    def U_rel(self):
        return self.U_pa / self.p_pa

    def component(self, name):
        for n, _, u in self.rows:
            if n == name:
                return u
        raise KeyError(name)

    def __repr__(self):
        return "Budget(%.4g Pa: u_c %.3g Pa, U %.3g Pa, k=%g)" % (self.p_pa, self.u_c_pa, self.U_pa, self.k)


# Component names, in report order.
C_REF = "reference (certificate, k=1)"
C_DRIFT = "reference drift (rectangular)"
C_RES = "reference resolution (rectangular)"
C_REP = "reference repeatability (type A)"
C_PORT = "port non-uniformity (ISO 3567)"
C_BASE = "base pressure drift (rectangular)"
C_EMF = "device EMF repeatability (type A)"
C_EMF_RES = "device EMF resolution (rectangular)"
C_FIT = "fit / interpolation (leave-one-out)"
C_REPRO = "reproducibility (repeated calibrations)"
COMPONENTS = (C_REF, C_DRIFT, C_RES, C_REP, C_PORT, C_BASE, C_EMF, C_EMF_RES, C_FIT, C_REPRO)
NO_REPRO_NOTE = ("no reproducibility term: this budget holds for this run only; repeat the calibration "
                 "after venting and a new zero and give the spread (tcgauge calibrate --earlier)")


def _sd_of_mean(xs):
    n = len(xs)
    if n < 2:
        return 0.0  # one reading: no type A estimate (the fit residual still counts)
    return _mean_sd(xs)[1] / math.sqrt(n)


def reproducibility_from(tables, emfs_mv):
    """Relative standard deviation of repeated calibrations: at each EMF of `emfs_mv` (this
    run's points) the experimental standard deviation of the pressures the tables give
    (GUM 4.2.2, n - 1), over their mean; the largest over the points every table covers.

    tables: two or more Tables of the same tube, gas and heater current, this run's among
    them. CalibrationError when fewer than two, or no point lies inside all of them."""
    if len(tables) < 2:
        raise CalibrationError("reproducibility needs two or more calibrations, %d given" % len(tables))
    worst = None
    for e in emfs_mv:
        ps = []
        for t in tables:
            p, state = t.convert(e)
            if state != states.OK:
                break
            ps.append(p)
        else:
            mean, sd = _mean_sd(ps)
            rel = sd / mean
            worst = rel if worst is None else max(worst, rel)
    if worst is None:
        raise CalibrationError("no calibration point lies inside every earlier table")
    return worst


def check_reproducibility(rel):
    """CalibrationError unless rel is None or a relative standard deviation in 0..1."""
    if rel is not None and not 0.0 <= rel < 1.0:
        raise CalibrationError("reproducibility must be a relative standard deviation in 0..1, not %r" % (rel,))


def point_budget(p_pa, reference, ref_readings_pa, emf_readings_mv, dp_de, fit_rel,
                 base_drift_pa=0.0, emf_resolution_mv=0.0, k=K_COVERAGE, reproducibility_rel=0.0):
    """The uncertainty budget at one calibration point (module docstring)."""
    slope = abs(dp_de)
    rows = [
        (C_REF, "B", reference.u_rel * p_pa),
        (C_DRIFT, "B", reference.drift_rel * p_pa / SQRT3),
        (C_RES, "B", reference.resolution_at(p_pa) / SQRT12),
        (C_REP, "A", _sd_of_mean(ref_readings_pa)),
        (C_PORT, "B", port_u_rel(p_pa) * p_pa),
        (C_BASE, "B", base_drift_pa / SQRT3),
        (C_EMF, "A", slope * _sd_of_mean(emf_readings_mv)),
        (C_EMF_RES, "B", slope * emf_resolution_mv / SQRT12),
        (C_FIT, "B", abs(fit_rel) * p_pa),
        (C_REPRO, "A", reproducibility_rel * p_pa),
    ]
    return Budget(p_pa, rows, k)


class Calibration:
    """Result of `evaluate`: fit, per-point budgets, CFs, notes and the conditions."""

    def __init__(self, fit, reference, budgets, p_ind, cf, notes, base_pa, base_drift_pa):
        self.fit = fit
        self.table = fit.table
        self.reference = reference
        self.budgets = budgets
        self.p_ind_pa = p_ind
        self.cf = cf
        self.notes = notes
        self.base_pa = base_pa
        self.base_drift_pa = base_drift_pa

    def u_rel_at(self, p_pa):
        """Expanded relative uncertainty at p_pa inside the calibrated range:
        the larger of the two neighbouring points' U_rel."""
        ps = [b.p_pa for b in self.budgets]
        if not ps[0] <= p_pa <= ps[-1]:
            raise CalibrationError("%.4g Pa is outside the calibrated range %.4g..%.4g Pa"
                                   % (p_pa, ps[0], ps[-1]))
        for i in range(len(ps) - 1):
            if ps[i] <= p_pa <= ps[i + 1]:
                return max(self.budgets[i].U_rel, self.budgets[i + 1].U_rel)
        return self.budgets[-1].U_rel

    def per_decade(self):
        """[(decade lower bound Pa, largest U_rel of its points, number of points)]."""
        out = {}
        for b in self.budgets:
            d = math.floor(math.log10(b.p_pa) + 1e-12)
            u, n = out.get(d, (0.0, 0))
            out[d] = (max(u, b.U_rel), n + 1)
        return [(10.0 ** d, out[d][0], out[d][1]) for d in sorted(out)]


def evaluate(fit, reference, base_pa=0.0, base_drift_pa=0.0, emf_resolution_mv=0.0,
             previous=None, k=K_COVERAGE, reproducibility_rel=None):
    """Budgets of every fitted point, CFs against `previous` (a Table) if given.

    reproducibility_rel: relative standard deviation of repeated calibrations
    (`reproducibility_from`); None leaves the term at zero with a note."""
    check_reproducibility(reproducibility_rel)
    pts = fit.points
    n = len(pts)
    budgets, p_ind, cf, notes = [], [], [], []
    for i, pt in enumerate(pts):
        r = fit.loo_rel[i]
        if r is None:  # end point: the neighbour's interpolation error
            j = 1 if i == 0 else n - 2
            r = fit.loo_rel[j] if fit.loo_rel[j] is not None else 0.0
        slope = dp_de_pa_per_mv(fit.table, pt.emf_mv)
        budgets.append(point_budget(pt.p_ref_pa, reference, pt.ref_readings_pa, pt.emf_readings_mv,
                                    slope, r, base_drift_pa, emf_resolution_mv, k, reproducibility_rel or 0.0))
        if previous is not None:
            p_old, state = previous.convert(pt.emf_mv)
            if state == states.OK:
                p_ind.append(p_old)
                cf.append(pt.p_ref_pa / p_old)
            else:
                p_ind.append(None)
                cf.append(None)
    if reproducibility_rel is None:
        notes.append(NO_REPRO_NOTE)
    # Common practice, no published source: keep the base pressure a decade below the
    # lowest calibration pressure, or its residual gas biases the lowest points.
    if base_pa > 0.1 * pts[0].p_ref_pa:
        notes.append("base pressure %.3g Pa is above a tenth of the lowest calibration pressure "
                     "%.3g Pa" % (base_pa, pts[0].p_ref_pa))
    return Calibration(fit, reference, budgets, p_ind, cf, notes, base_pa, base_drift_pa)
