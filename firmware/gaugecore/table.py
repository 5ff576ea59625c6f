"""Gas tables: thermocouple EMF -> pressure for one tube profile in one gas.

A `Table` holds points (EMF mV, pressure Pa) listed by rising pressure, with
the EMF strictly falling, plus the conditions they hold for: gas, tube
profile, heater current, thermocouple type and the reference-junction
temperature the EMFs are stated at. Optionally (table file version 2) the
wall temperature the table was made at, `wall_c`, and per point the wall
coefficient of the filament's rise, `rise_slope_per_k` = d ln(dT)/d T_wall
at fixed pressure (1/K): what gaugecore.coldjunction.RiseReferral needs to
carry a reading taken at another wall temperature to the table's.

Conversion interpolates log10(pressure) as a function of EMF with a
monotone piecewise cubic Hermite curve (PCHIP): F. N. Fritsch and
R. E. Carlson, "Monotone piecewise cubic interpolation", SIAM J. Numer.
Anal. 17, 238 (1980). The slopes at the points are the weighted harmonic
mean of the neighbouring secants (Fritsch & Butland 1984, as in
scipy.interpolate.PchipInterpolator), with the non-centred three-point
formula at the two ends, limited so the curve stays monotone. The curve
therefore never overshoots: every pressure lies between the two
neighbouring table points. Slopes and polynomial coefficients are
computed once, at construction; `convert` does a binary search and one
Horner evaluation and allocates nothing but its result.

Point indices in messages count from 0, in the order the points are given.
"""

import math

from gaugecore import states
from gaugecore.compat import const

try:
    from gaugecore.thermocouple import TYPES as TC_TYPES
except ImportError:  # thermocouple module not built into this image
    TC_TYPES = ("E", "J", "K", "N", "T")

# Gases a table may be stated for (the gases of the project's domain notes, section 3).
GASES = ("N2", "air", "He", "Ar", "H2", "CO2", "H2O")

MIN_POINTS = const(4)
# Memory bound. Per point the table keeps 7 distinct floats (the given EMF and
# pressure, log10 p, the knot slope and 3 cubic coefficients) in 7 lists and a
# 2-tuple; on a 32-bit MicroPython port each float is a boxed heap object in a
# 16-byte GC block and each list slot 4 bytes, so about 7*16 + 7*4 + 16 = 156
# bytes a point. A table with the wall model adds one float (the rise slope)
# held in a tuple (point order) and a list (EMF order): 16 + 2*4 = 24 bytes,
# 180 bytes a point. 128 points are then about 23 kB, plus a few kB while the
# JSON file is parsed: about an eighth of the ~190 kB heap (from memory) of an
# RP2040-class board, room for two channels' tables. Measured under the
# MicroPython 1.27 WASM build (gc.mem_alloc after an await and gc.collect, as
# tests/upy/test_controller_upy.py does; a collect inside one synchronous
# stretch frees nothing in that build and once read 78 kB a table): 168 bytes
# a point with the wall model, and two channels with two 128-point tables,
# their setpoints and the controller hold 53 kB (the test bounds it by 64 kB).
MAX_POINTS = const(128)
# |d ln(dT)/d T_wall| above this is not a tube's heat balance (10 % of the
# rise per kelvin of wall; the demo tube's is below 0.2 %/K): a wrong column.
MAX_RISE_SLOPE_PER_K = 0.1

DEFAULT_INVALID_MARGIN = 0.15  # EMF above the top point by 15 % of it is impossible
DEFAULT_NOISE_MV = 0.05  # EMF below -0.05 mV is a reversed or mis-wired couple


class TableError(ValueError):
    """A table breaks one of the rules; the message names the point and the rule."""


def _finite(x):
    # True for finite floats; False for inf and nan (inf - inf and nan - nan are nan).
    return x - x == 0.0


def _number(value):
    """value as a float, or None if it is not an int or float (bool is not a number)."""
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value) + 0.0  # + 0.0 turns -0.0 into 0.0: one zero, one file form
    return None


def _show(value):
    # How a given value is shown in a message: numbers '%.6g', others repr.
    x = _number(value)
    if x is None:
        return repr(value)
    return "%.6g" % x


def _pchip_slopes(x, y):
    """Slopes dy/dx at each point for a monotone cubic Hermite curve (see module docstring)."""
    n = len(x)
    h = [x[k + 1] - x[k] for k in range(n - 1)]
    m = [(y[k + 1] - y[k]) / h[k] for k in range(n - 1)]
    d = [0.0] * n
    for k in range(1, n - 1):
        m0 = m[k - 1]
        m1 = m[k]
        if m0 == 0.0 or m1 == 0.0 or (m0 > 0.0) != (m1 > 0.0):
            d[k] = 0.0
        else:
            w1 = 2.0 * h[k] + h[k - 1]
            w2 = h[k] + 2.0 * h[k - 1]
            d[k] = 1.0 / ((w1 / m0 + w2 / m1) / (w1 + w2))
    d[0] = _end_slope(h[0], h[1], m[0], m[1])
    d[n - 1] = _end_slope(h[n - 2], h[n - 3], m[n - 2], m[n - 3])
    return d


def _sign(v):
    if v > 0.0:
        return 1
    if v < 0.0:
        return -1
    return 0


def _end_slope(h0, h1, m0, m1):
    # Non-centred three-point estimate, kept to the sign of the end secant
    # and to at most 3 times it when the secants change sign.
    d = ((2.0 * h0 + h1) * m0 - h0 * m1) / (h0 + h1)
    if _sign(d) != _sign(m0):
        return 0.0
    if _sign(m0) != _sign(m1) and abs(d) > 3.0 * abs(m0):
        return 3.0 * m0
    return d


class Table:
    """EMF -> pressure table for one gas and tube profile.

    points: sequence of (emf_mv, pressure_pa) pairs by rising pressure, EMF
    strictly falling. invalid_margin: an EMF above the top (high-vacuum) point
    by more than this fraction of it is impossible for the tube. noise_mv: an
    EMF below -noise_mv is impossible too (open, reversed or mis-wired couple).
    wall_c: wall temperature (C) the table was made at, or None (not known).
    rise_slope_per_k: None, or one d ln(dT)/d T_wall (1/K) per point, in the
    points' order; it needs wall_c. Raises TableError naming the rule broken.
    file_crc32: the CRC-32 of the file the table was read from (gaugecore.tablefile
    sets it), None for a table made in memory. It names the table: a board
    with single-precision floats cannot write the file's numbers back as they
    were, so re-writing the table would not give the file's CRC.
    """

    def __init__(self, points, gas, profile, heater_ma, ref_c, tc_type, source="",
                 invalid_margin=DEFAULT_INVALID_MARGIN, noise_mv=DEFAULT_NOISE_MV,
                 wall_c=None, rise_slope_per_k=None):
        if gas not in GASES:
            raise TableError("unknown gas %s (known: %s)" % (_show(gas), ", ".join(GASES)))
        if not isinstance(profile, str) or not profile:
            raise TableError("profile must be a non-empty string, got %s" % _show(profile))
        x = _number(heater_ma)
        if x is None or not _finite(x) or x <= 0.0:
            raise TableError("heater current must be a positive finite number, got %s mA"
                             % _show(heater_ma))
        self.heater_ma = x
        x = _number(ref_c)
        if x is None or not _finite(x):
            raise TableError("reference temperature must be a finite number, got %s C"
                             % _show(ref_c))
        self.ref_c = x
        if tc_type not in TC_TYPES:
            raise TableError("unknown thermocouple type %s (known: %s)"
                             % (_show(tc_type), ", ".join(TC_TYPES)))
        if not isinstance(source, str):
            raise TableError("source must be a string, got %s" % _show(source))
        x = _number(invalid_margin)
        if x is None or not _finite(x) or x <= 0.0:
            raise TableError("invalid margin must be a positive finite fraction, got %s"
                             % _show(invalid_margin))
        self.invalid_margin = x
        x = _number(noise_mv)
        if x is None or not _finite(x) or x < 0.0:
            raise TableError("noise must be a non-negative finite number, got %s mV"
                             % _show(noise_mv))
        self.noise_mv = x
        self.gas = gas
        self.profile = profile
        self.tc_type = tc_type
        self.source = source
        self.file_crc32 = None
        self.points = self._check_points(points)
        n = len(self.points)
        if wall_c is None:
            self.wall_c = None
        else:
            x = _number(wall_c)
            if x is None or not _finite(x) or x < -50.0 or x > 150.0:
                raise TableError("wall temperature must be a finite number within -50..150 C, got %s C"
                                 % _show(wall_c))
            self.wall_c = x
        self.rise_slope_per_k = self._check_slopes(rise_slope_per_k, n, self.wall_c)

        # Interpolation runs on EMF ascending: the points reversed.
        xs = [self.points[n - 1 - k][0] for k in range(n)]
        ps = [self.points[n - 1 - k][1] for k in range(n)]
        ys = [math.log10(p) for p in ps]
        d = _pchip_slopes(xs, ys)
        c1 = []
        c2 = []
        c3 = []
        for k in range(n - 1):
            h = xs[k + 1] - xs[k]
            delta = (ys[k + 1] - ys[k]) / h
            c1.append(d[k])
            c2.append((3.0 * delta - 2.0 * d[k] - d[k + 1]) / h)
            c3.append((d[k] + d[k + 1] - 2.0 * delta) / (h * h))
        self._x = xs
        self._y = ys
        self._c1 = c1
        self._c2 = c2
        self._c3 = c3
        self._p = ps
        self._slopes = d
        k = self.rise_slope_per_k
        self._k = None if k is None else [k[n - 1 - i] for i in range(n)]
        self.p_min_pa = ps[n - 1]
        self.p_max_pa = ps[0]
        self.emf_range_mv = (xs[0], xs[n - 1])
        # Above this EMF, or below -noise_mv, no real tube can produce the reading.
        self.emf_invalid_above_mv = xs[n - 1] * (1.0 + self.invalid_margin)

    @staticmethod
    def _check_points(points):
        try:
            n = len(points)
        except TypeError:
            raise TableError("points must be a list of (EMF mV, pressure Pa) pairs")
        if n < MIN_POINTS:
            raise TableError("a table needs at least %d points, got %d" % (MIN_POINTS, n))
        if n > MAX_POINTS:
            raise TableError("a table holds at most %d points, got %d" % (MAX_POINTS, n))
        out = []
        for i in range(n):
            pt = points[i]
            if not isinstance(pt, (list, tuple)) or len(pt) != 2:
                raise TableError("point %d: expected a pair (EMF mV, pressure Pa), got %s"
                                 % (i, _show(pt)))
            emf = _number(pt[0])
            if emf is None or not _finite(emf):
                raise TableError("point %d: EMF must be a finite number, got %s"
                                 % (i, _show(pt[0])))
            p = _number(pt[1])
            if p is None or not _finite(p) or p <= 0.0:
                raise TableError("point %d: pressure must be a positive finite number, got %s"
                                 % (i, _show(pt[1])))
            if out:
                emf0, p0 = out[-1]
                if not p > p0:
                    raise TableError(
                        "point %d: pressure must rise strictly from point to point "
                        "(%.6g Pa is not above %.6g Pa)" % (i, p, p0))
                if not emf < emf0:
                    raise TableError(
                        "point %d: EMF must fall strictly as pressure rises "
                        "(%.6g mV at %.6g Pa is not below %.6g mV at %.6g Pa)"
                        % (i, emf, p, emf0, p0))
            out.append((emf, p))
        return tuple(out)

    @staticmethod
    def _check_slopes(slopes, n, wall_c):
        if slopes is None:
            return None
        if wall_c is None:
            raise TableError("rise slopes need the wall temperature they were taken at")
        try:
            m = len(slopes)
        except TypeError:
            raise TableError("rise slopes must be a list of numbers, one per point")
        if m != n:
            raise TableError("rise slopes: %d values for %d points" % (m, n))
        out = []
        for i in range(m):
            k = _number(slopes[i])
            if k is None or not _finite(k) or k > MAX_RISE_SLOPE_PER_K or k < -MAX_RISE_SLOPE_PER_K:
                raise TableError("point %d: rise slope must be a finite number within +/-%.6g per K, "
                                 "got %s" % (i, MAX_RISE_SLOPE_PER_K, _show(slopes[i])))
            out.append(k)
        return tuple(out)

    def rise_segment(self, emf_mv):
        """Rise-slope segment of a table EMF: (lo, x, k), x[lo] <= emf_mv < x[lo + 1],
        with x the EMFs and k the rise slopes in ascending EMF order; lo is -1 at or
        below the first point, len(x) - 1 at or above the last (also for NaN).
        The table must have rise slopes."""
        x = self._x
        hi = len(x) - 1
        if not emf_mv < x[hi]:  # also NaN
            return hi, x, self._k
        if not emf_mv > x[0]:
            return -1, x, self._k
        lo = 0
        while hi - lo > 1:
            mid = (lo + hi) >> 1
            if x[mid] <= emf_mv:
                lo = mid
            else:
                hi = mid
        return lo, x, self._k

    def rise_slope_at(self, emf_mv):
        """d ln(dT)/d T_wall (1/K) at a table EMF: linear between the points,
        the end value beyond them; 0.0 when the table has no rise slopes."""
        if self._k is None:
            return 0.0
        lo, x, k = self.rise_segment(emf_mv)
        if lo < 0:
            return k[0]
        hi = lo + 1
        if hi == len(x):
            return k[lo]
        return k[lo] + (k[hi] - k[lo]) * (emf_mv - x[lo]) / (x[hi] - x[lo])

    def convert(self, emf_mv):
        """EMF in mV (referred to the table's ref_c) -> (pressure_pa, state).

        ok: inside the table; under: EMF above the top point, returns
        (p_min_pa, UNDER); over: EMF below the lowest point, returns
        (p_max_pa, OVER); invalid (None): NaN, an EMF above the top point by
        more than the margin, or below -noise_mv.
        """
        x = self._x
        hi = len(x) - 1
        top = x[hi]
        if not (emf_mv <= self.emf_invalid_above_mv) or emf_mv < -self.noise_mv:
            return (None, states.INVALID)  # also NaN: every comparison with it is False
        if emf_mv >= top:
            if emf_mv > top:
                return (self.p_min_pa, states.UNDER)
            return (self.p_min_pa, states.OK)
        if emf_mv < x[0]:
            return (self.p_max_pa, states.OVER)
        lo = 0
        while hi - lo > 1:
            mid = (lo + hi) >> 1
            if x[mid] <= emf_mv:
                lo = mid
            else:
                hi = mid
        dx = emf_mv - x[lo]
        if dx == 0.0:
            return (self._p[lo], states.OK)  # on a point: its own pressure, exactly
        y = self._y[lo] + dx * (self._c1[lo] + dx * (self._c2[lo] + dx * self._c3[lo]))
        # Rounding must not carry y past the segment's ends (y falls with EMF).
        if y > self._y[lo]:
            y = self._y[lo]
        elif y < self._y[lo + 1]:
            y = self._y[lo + 1]
        return (10.0 ** y, states.OK)

    def segments(self):
        """(emf_mv, log10_pa, pressure_pa, c1, c2, c3): the EMF-ascending knots, their
        log10 pressures and pressures, and the per-segment cubic coefficients (y =
        log10_pa[k] + dx*(c1[k] + dx*(c2[k] + dx*c3[k])), dx = emf - emf_mv[k]), for
        bulk converters that must match `convert`."""
        return (self._x, self._y, self._p, self._c1, self._c2, self._c3)

    def describe(self):
        """One-line summary of the table."""
        return ("%s table for %s (type %s, %.6g mA, ref %.6g C): %d points, "
                "%.4g..%.4g Pa, EMF %.4g..%.4g mV"
                % (self.gas, self.profile, self.tc_type, self.heater_ma, self.ref_c,
                   len(self.points), self.p_min_pa, self.p_max_pa,
                   self.emf_range_mv[0], self.emf_range_mv[1]))

    def _key(self):
        return (self.points, self.gas, self.profile, self.heater_ma, self.ref_c,
                self.tc_type, self.source, self.invalid_margin, self.noise_mv,
                self.wall_c, self.rise_slope_per_k)

    def __eq__(self, other):
        return isinstance(other, Table) and self._key() == other._key()

    def __ne__(self, other):
        return not self.__eq__(other)

    def __repr__(self):
        return "<Table %s>" % self.describe()

