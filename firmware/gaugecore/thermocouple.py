"""ITS-90 thermocouple reference functions for types E, J, K, N and T.

Source of every coefficient: NIST Monograph 175 (Burns et al., 1993),
"Temperature-Electromotive Force Reference Functions and Tables for the
Letter-Designated Thermocouple Types Based on the ITS-90", as published in
the NIST ITS-90 Thermocouple Database (file allcoeff.tab); the same
functions are IEC 60584-1. Coefficients are copied digit for digit, in the
published order (constant term first); trailing zero terms are left out.

E is in mV with the reference junction at 0 C, t in deg C (ITS-90).
Forward: E = sum c_i t^i, plus a0 exp(a1 (t - a2)^2) for type K above 0 C.
Inverse: the published approximate inverse polynomial is the first guess,
refined by safeguarded Newton steps on the forward function, so that
emf_mv(tc, temperature_c(tc, e)) == e to rounding (the published inverse
alone is only good to a few hundredths of a degree).
"""

import math

# ---------------------------------------------------------------------------
# Forward reference functions, E(t) in mV: (c0, c1, ..., cn).
# NIST Monograph 175 / NIST ITS-90 database, "reference function on ITS-90".

# Type E, -270 C to 0 C
_E_EMF_LO = (
    0.000000000000e00,
    0.586655087080e-01,
    0.454109771240e-04,
    -0.779980486860e-06,
    -0.258001608430e-07,
    -0.594525830570e-09,
    -0.932140586670e-11,
    -0.102876055340e-12,
    -0.803701236210e-15,
    -0.439794973910e-17,
    -0.164147763550e-19,
    -0.396736195160e-22,
    -0.558273287210e-25,
    -0.346578420130e-28,
)
# Type E, 0 C to 1000 C
_E_EMF_HI = (
    0.000000000000e00,
    0.586655087100e-01,
    0.450322755820e-04,
    0.289084072120e-07,
    -0.330568966520e-09,
    0.650244032700e-12,
    -0.191974955040e-15,
    -0.125366004970e-17,
    0.214892175690e-20,
    -0.143880417820e-23,
    0.359608994810e-27,
)

# Type J, -210 C to 760 C
_J_EMF_LO = (
    0.000000000000e00,
    0.503811878150e-01,
    0.304758369300e-04,
    -0.856810657200e-07,
    0.132281952950e-09,
    -0.170529583370e-12,
    0.209480906970e-15,
    -0.125383953360e-18,
    0.156317256970e-22,
)
# Type J, 760 C to 1200 C
_J_EMF_HI = (
    0.296456256810e03,
    -0.149761277860e01,
    0.317871039240e-02,
    -0.318476867010e-05,
    0.157208190040e-08,
    -0.306913690560e-12,
)

# Type K, -270 C to 0 C
_K_EMF_LO = (
    0.000000000000e00,
    0.394501280250e-01,
    0.236223735980e-04,
    -0.328589067840e-06,
    -0.499048287770e-08,
    -0.675090591730e-10,
    -0.574103274280e-12,
    -0.310888728940e-14,
    -0.104516093650e-16,
    -0.198892668780e-19,
    -0.163226974860e-22,
)
# Type K, 0 C to 1372 C (plus the exponential term below)
_K_EMF_HI = (
    -0.176004136860e-01,
    0.389212049750e-01,
    0.185587700320e-04,
    -0.994575928740e-07,
    0.318409457190e-09,
    -0.560728448890e-12,
    0.560750590590e-15,
    -0.320207200030e-18,
    0.971511471520e-22,
    -0.121047212750e-25,
)
# Type K exponential term above 0 C: a0 exp(a1 (t - a2)^2), a0 in mV.
_K_A0 = 0.118597600000e00
_K_A1 = -0.118343200000e-03
_K_A2 = 0.126968600000e03

# Type N, -270 C to 0 C
_N_EMF_LO = (
    0.000000000000e00,
    0.261591059620e-01,
    0.109574842280e-04,
    -0.938411115540e-07,
    -0.464120397590e-10,
    -0.263033577160e-11,
    -0.226534380030e-13,
    -0.760893007910e-16,
    -0.934196678350e-19,
)
# Type N, 0 C to 1300 C
_N_EMF_HI = (
    0.000000000000e00,
    0.259293946010e-01,
    0.157101418800e-04,
    0.438256272370e-07,
    -0.252611697940e-09,
    0.643118193390e-12,
    -0.100634715190e-14,
    0.997453389920e-18,
    -0.608632456070e-21,
    0.208492293390e-24,
    -0.306821961510e-28,
)

# Type T, -270 C to 0 C
_T_EMF_LO = (
    0.000000000000e00,
    0.387481063640e-01,
    0.441944343470e-04,
    0.118443231050e-06,
    0.200329735540e-07,
    0.901380195590e-09,
    0.226511565930e-10,
    0.360711542050e-12,
    0.384939398830e-14,
    0.282135219250e-16,
    0.142515947790e-18,
    0.487686622860e-21,
    0.107955392700e-23,
    0.139450270620e-26,
    0.797951539270e-30,
)
# Type T, 0 C to 400 C
_T_EMF_HI = (
    0.000000000000e00,
    0.387481063640e-01,
    0.332922278800e-04,
    0.206182434040e-06,
    -0.218822568460e-08,
    0.109968809280e-10,
    -0.308157587720e-13,
    0.454791352900e-16,
    -0.275129016730e-19,
)

# ---------------------------------------------------------------------------
# Approximate inverse functions, t(E) in deg C with E in mV: (d0, d1, ..., dn).
# NIST Monograph 175 / NIST ITS-90 database, "Inverse coefficients".
# Published error of each (deg C) is given beside it.

# Type E, -8.825 to 0 mV (-200 to 0 C), error -0.01 to 0.03
_E_INV_1 = (
    0.0000000e00,
    1.6977288e01,
    -4.3514970e-01,
    -1.5859697e-01,
    -9.2502871e-02,
    -2.6084314e-02,
    -4.1360199e-03,
    -3.4034030e-04,
    -1.1564890e-05,
)
# Type E, 0 to 76.373 mV (0 to 1000 C), error -0.02 to 0.02
_E_INV_2 = (
    0.0000000e00,
    1.7057035e01,
    -2.3301759e-01,
    6.5435585e-03,
    -7.3562749e-05,
    -1.7896001e-06,
    8.4036165e-08,
    -1.3735879e-09,
    1.0629823e-11,
    -3.2447087e-14,
)

# Type J, -8.095 to 0 mV (-210 to 0 C), error -0.05 to 0.03
_J_INV_1 = (
    0.0000000e00,
    1.9528268e01,
    -1.2286185e00,
    -1.0752178e00,
    -5.9086933e-01,
    -1.7256713e-01,
    -2.8131513e-02,
    -2.3963370e-03,
    -8.3823321e-05,
)
# Type J, 0 to 42.919 mV (0 to 760 C), error -0.04 to 0.04
_J_INV_2 = (
    0.000000e00,
    1.978425e01,
    -2.001204e-01,
    1.036969e-02,
    -2.549687e-04,
    3.585153e-06,
    -5.344285e-08,
    5.099890e-10,
)
# Type J, 42.919 to 69.553 mV (760 to 1200 C), error -0.04 to 0.03
_J_INV_3 = (
    -3.11358187e03,
    3.00543684e02,
    -9.94773230e00,
    1.70276630e-01,
    -1.43033468e-03,
    4.73886084e-06,
)

# Type K, -5.891 to 0 mV (-200 to 0 C), error -0.02 to 0.04
_K_INV_1 = (
    0.0000000e00,
    2.5173462e01,
    -1.1662878e00,
    -1.0833638e00,
    -8.9773540e-01,
    -3.7342377e-01,
    -8.6632643e-02,
    -1.0450598e-02,
    -5.1920577e-04,
)
# Type K, 0 to 20.644 mV (0 to 500 C), error -0.05 to 0.04
_K_INV_2 = (
    0.000000e00,
    2.508355e01,
    7.860106e-02,
    -2.503131e-01,
    8.315270e-02,
    -1.228034e-02,
    9.804036e-04,
    -4.413030e-05,
    1.057734e-06,
    -1.052755e-08,
)
# Type K, 20.644 to 54.886 mV (500 to 1372 C), error -0.05 to 0.06
_K_INV_3 = (
    -1.318058e02,
    4.830222e01,
    -1.646031e00,
    5.464731e-02,
    -9.650715e-04,
    8.802193e-06,
    -3.110810e-08,
)

# Type N, -3.990 to 0 mV (-200 to 0 C), error -0.02 to 0.03
_N_INV_1 = (
    0.0000000e00,
    3.8436847e01,
    1.1010485e00,
    5.2229312e00,
    7.2060525e00,
    5.8488586e00,
    2.7754916e00,
    7.7075166e-01,
    1.1582665e-01,
    7.3138868e-03,
)
# Type N, 0 to 20.613 mV (0 to 600 C), error -0.02 to 0.03
_N_INV_2 = (
    0.00000e00,
    3.86896e01,
    -1.08267e00,
    4.70205e-02,
    -2.12169e-06,
    -1.17272e-04,
    5.39280e-06,
    -7.98156e-08,
)
# Type N, 20.613 to 47.513 mV (600 to 1300 C), error -0.04 to 0.02
_N_INV_3 = (
    1.972485e01,
    3.300943e01,
    -3.915159e-01,
    9.855391e-03,
    -1.274371e-04,
    7.767022e-07,
)

# Type T, -5.603 to 0 mV (-200 to 0 C), error -0.02 to 0.04
_T_INV_1 = (
    0.0000000e00,
    2.5949192e01,
    -2.1316967e-01,
    7.9018692e-01,
    4.2527777e-01,
    1.3304473e-01,
    2.0241446e-02,
    1.2668171e-03,
)
# Type T, 0 to 20.872 mV (0 to 400 C), error -0.03 to 0.03
_T_INV_2 = (
    0.000000e00,
    2.592800e01,
    -7.602961e-01,
    4.637791e-02,
    -2.165394e-03,
    6.048144e-05,
    -7.293422e-07,
)

# ---------------------------------------------------------------------------
# One record per type:
#   (letter, t_min, t_max,
#    forward segments ((t_upper, coefficients, has_exponential), ...),
#    lowest temperature the inverse polynomials cover,
#    inverse segments ((e_upper_mv, coefficients), ...))
# A forward segment serves t <= t_upper (the published ranges share their
# end points; the lower range owns the shared point). An inverse segment
# serves e <= e_upper; the last one serves the rest of the range.

_REC_E = (
    "E", -270.0, 1000.0,
    ((0.0, _E_EMF_LO, False), (1000.0, _E_EMF_HI, False)),
    -200.0,
    ((0.0, _E_INV_1), (76.373, _E_INV_2)),
)
_REC_J = (
    "J", -210.0, 1200.0,
    ((760.0, _J_EMF_LO, False), (1200.0, _J_EMF_HI, False)),
    -210.0,
    ((0.0, _J_INV_1), (42.919, _J_INV_2), (69.553, _J_INV_3)),
)
_REC_K = (
    "K", -270.0, 1372.0,
    ((0.0, _K_EMF_LO, False), (1372.0, _K_EMF_HI, True)),
    -200.0,
    ((0.0, _K_INV_1), (20.644, _K_INV_2), (54.886, _K_INV_3)),
)
_REC_N = (
    "N", -270.0, 1300.0,
    ((0.0, _N_EMF_LO, False), (1300.0, _N_EMF_HI, False)),
    -200.0,
    ((0.0, _N_INV_1), (20.613, _N_INV_2), (47.513, _N_INV_3)),
)
_REC_T = (
    "T", -270.0, 400.0,
    ((0.0, _T_EMF_LO, False), (400.0, _T_EMF_HI, False)),
    -200.0,
    ((0.0, _T_INV_1), (20.872, _T_INV_2)),
)

TYPES = ("E", "J", "K", "N", "T")

# Both cases are keys, so a lookup allocates no new string.
_RECORDS = {}
for _rec in (_REC_E, _REC_J, _REC_K, _REC_N, _REC_T):
    _RECORDS[_rec[0]] = _rec
    _RECORDS[_rec[0].lower()] = _rec


def _epsilon():
    """Machine epsilon: 2.2e-16 with double floats, 1.2e-7 on boards whose
    MicroPython uses single precision (there type K carries up to 0.2 uV and
    3 mK: tests/core/test_single_precision.py)."""
    eps = 1.0
    while 1.0 + eps * 0.5 > 1.0:
        eps *= 0.5
    return eps


_EPS = _epsilon()
# Newton stops once a step is below this (deg C); the error left after such
# a step is of order (S'/S) * step^2, far below 1e-9 C with double floats.
_STEP_TOL_C = max(1e-5, 1e4 * _EPS)
# Bisection stops when the bracket is this narrow (deg C).
_BRACKET_TOL_C = max(1e-10, 1e4 * _EPS)
# The search bracket reaches this far past the ends of the range (deg C), so
# that a Newton step may land on an end (the answer is clamped to the range).
_BRACKET_MARGIN_C = max(1e-6, 1e4 * _EPS)
# EMFs this close outside the range (mV) are rounding and are accepted.
_EMF_SLACK_MV = max(1e-9, 1e3 * _EPS)
# Enough for bisection over the whole range even where Newton fails.
_MAX_ITER = 200


def _horner(c, x):
    """c0 + c1 x + ... + cn x^n by Horner's rule (no allocation)."""
    i = len(c) - 1
    y = c[i]
    while i > 0:
        i -= 1
        y = y * x + c[i]
    return y


def _horner_deriv(c, x):
    """d/dx of c0 + c1 x + ... + cn x^n by Horner's rule."""
    i = len(c) - 1
    y = i * c[i]
    while i > 1:
        i -= 1
        y = y * x + i * c[i]
    return y


def _record(tc_type):
    try:
        return _RECORDS[tc_type]
    except (KeyError, TypeError):
        raise ValueError(
            "unknown thermocouple type %r (known: %s)" % (tc_type, ", ".join(TYPES))
        )


def _not_a_number(rec, what, value):
    return ValueError("type %s: %s must be a number, not %r" % (rec[0], what, value))


def _check_t(rec, t_c):
    try:
        inside = rec[1] <= t_c <= rec[2]
    except TypeError:
        raise _not_a_number(rec, "temperature", t_c)
    if not inside:
        raise ValueError(
            "type %s: %.12g C is outside %g..%g C" % (rec[0], t_c, rec[1], rec[2])
        )


def _emf(rec, t):
    """Forward function, no range check: E(t) in mV."""
    for seg in rec[3]:
        if t <= seg[0]:
            break
    e = _horner(seg[1], t)
    if seg[2]:
        d = t - _K_A2
        e += _K_A0 * math.exp(_K_A1 * d * d)
    return e


def _demf(rec, t):
    """Derivative of the forward function, no range check: dE/dt in mV/K."""
    for seg in rec[3]:
        if t <= seg[0]:
            break
    s = _horner_deriv(seg[1], t)
    if seg[2]:
        d = t - _K_A2
        s += _K_A0 * math.exp(_K_A1 * d * d) * 2.0 * _K_A1 * d
    return s


# E at each end of each range (mV), and at the lowest temperature the
# inverse polynomials cover; computed once from the reference functions.
_EMF_LIMITS = {}
for _rec in (_REC_E, _REC_J, _REC_K, _REC_N, _REC_T):
    _EMF_LIMITS[_rec[0]] = (_emf(_rec, _rec[1]), _emf(_rec, _rec[2]), _emf(_rec, _rec[4]))
del _rec


def range_c(tc_type):
    """(t_min, t_max) in deg C over which the type's reference function is defined."""
    rec = _record(tc_type)
    return (rec[1], rec[2])


def emf_range_mv(tc_type):
    """(E(t_min), E(t_max)) in mV, reference junction at 0 C."""
    lim = _EMF_LIMITS[_record(tc_type)[0]]
    return (lim[0], lim[1])


def emf_mv(tc_type, t_c):
    """ITS-90 reference EMF in mV at t_c deg C, reference junction at 0 C."""
    rec = _record(tc_type)
    _check_t(rec, t_c)
    return _emf(rec, t_c)


def seebeck_uv_per_k(tc_type, t_c):
    """Seebeck coefficient dE/dt in uV/K at t_c deg C (analytic derivative)."""
    rec = _record(tc_type)
    _check_t(rec, t_c)
    return 1000.0 * _demf(rec, t_c)


def _clamp(rec, t):
    if t < rec[1]:
        return rec[1]
    if t > rec[2]:
        return rec[2]
    return t


def _invert(rec, lim, e):
    """Solve E(t) = e: safeguarded Newton from the published inverse."""
    lo = rec[1] - _BRACKET_MARGIN_C
    hi = rec[2] + _BRACKET_MARGIN_C
    if e < lim[2]:
        # Below the inverse polynomials: bracket [t_min, t_inv_min] and a
        # straight-line first guess between its ends.
        hi = rec[4]
        span = lim[2] - lim[0]
        if span > 0.0:
            t = rec[1] + (hi - rec[1]) * (e - lim[0]) / span
        else:  # the inverse starts at t_min (type J): e sits at the very bottom
            t = rec[1]
    else:
        for seg in rec[5]:
            if e <= seg[0]:
                break
        t = _horner(seg[1], e)
        if t < lo:
            t = lo
        elif t > hi:
            t = hi
    n = 0
    while n < _MAX_ITER:
        n += 1
        f = _emf(rec, t) - e
        if f == 0.0:
            return t
        if f < 0.0:
            lo = t
        else:
            hi = t
        s = _demf(rec, t)
        if s > 0.0:
            step = f / s
            if abs(step) < _STEP_TOL_C:
                return t - step
            t_new = t - step
            if lo < t_new < hi:
                t = t_new
                continue
        # Newton would leave the bracket (or the slope is not positive): bisect.
        if hi - lo < _BRACKET_TOL_C:
            break
        t = 0.5 * (lo + hi)
    # Bracket collapsed (only at a join where the published pieces step by
    # less than 1e-7 mV): return the nearer end.
    if abs(_emf(rec, lo) - e) <= abs(_emf(rec, hi) - e):
        return lo
    return hi


def temperature_c(tc_type, emf_mv):
    """Temperature in deg C whose ITS-90 reference EMF (at 0 C) is emf_mv.

    First guess from the published inverse polynomial, then Newton steps on
    the forward function inside a bracket that shrinks with every
    evaluation; a step that would leave the bracket is replaced by
    bisection (this carries the cryogenic end, below the inverse
    polynomials' range, where the Seebeck coefficient goes towards zero).
    """
    rec = _record(tc_type)
    lim = _EMF_LIMITS[rec[0]]
    e = emf_mv
    try:
        inside = lim[0] - _EMF_SLACK_MV <= e <= lim[1] + _EMF_SLACK_MV
    except TypeError:
        raise _not_a_number(rec, "EMF", e)
    if not inside:
        raise ValueError(
            "type %s: %.12g mV is outside %.4f..%.4f mV" % (rec[0], e, lim[0], lim[1])
        )
    return _clamp(rec, _invert(rec, lim, e))
