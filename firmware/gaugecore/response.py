"""Fast response: estimate the equilibrium EMF before the filament settles.

Derivation (lumped heat balance, domain notes section 2). Heater power
P = I V, filament excess temperature dT over the wall, heat capacity C,
total loss conductance G(p):

    C dT/dt = P - G dT

The thermocouple EMF against the wall is close to proportional to dT,
E = S dT, so with C_e = C / S (J/mV) and G_e = G / S (W/mV):

    C_e dE/dt = P - G_e E,      equilibrium E_eq = P / G_e

The tube is a first-order lag with tau = C_e / G_e = C_e E_eq / P: long at
low pressure, where G_e is small and E_eq large. Solved for the equilibrium
at every instant:

    E_eq = E + tau dE/dt = E + (C_e E_eq / P) dE/dt
    E_eq = E / (1 - (C_e / P) dE/dt)                          (1)

Radiation bends the loss upward (T^4). With the loss written
G_e E + a2 E^2 (a2 from radiation and the couple's curvature, the same at
every pressure; the gas adds to G_e), the instantaneous balance gives the
present G_e and the balance at rest the equilibrium:

    G_e  = (P - a2 E^2 - C_e dE/dt) / E
    E_eq = 2 P / (G_e + sqrt(G_e^2 + 4 a2 P))                 (2)

(2) is (1) when a2 = 0; it needs no small-step assumption. C_e, G_e(0) and
a2 come from the heating transient at vacuum zero (`identify`).

Noise control: dE/dt of a noisy reading is noisy, and tau multiplies it.
E is passed through two cascaded first-order low-passes x1, x2 of time
constant tf; then dx2/dt = (x1 - x2) / tf with no differencing, and
x2 + tau dx2/dt is the true equilibrium seen through the same second-order
low-pass: the estimate lags the equilibrium by about 2 tf instead of by
several tau. The derivative's noise variance is about
sigma^2 dt tau^2 / (4 tf^3), so tf trades speed for noise. An optional
output stage (`hold_ms`, `hold_band_mv`) smooths the estimate with time
constant hold_ms while it stays within the band of its smoothed value and
passes it unfiltered when it leaves the band (a real change).
"""


# Defaults tuned on the simulated demo tube (tau 6..11 s, EMF noise ~0.2 uV a
# sample): tf = 0.5 s; the hold band a few times the estimate's noise.
FILTER_MS = 500
HOLD_MS = 2000
HOLD_BAND_MV = 0.002


class FastResponse:
    """Equilibrium-EMF estimator for one channel; feed it the EMF against the wall.

    c_e_j_per_mv, a2_w_per_mv2: from `identify` (C_e = 0 switches the estimate
    off: the output is the filtered input). filter_ms: tf. max_gain bounds
    E_eq / E to 1/max_gain..max_gain.
    """

    def __init__(self, c_e_j_per_mv=0.0, a2_w_per_mv2=0.0, filter_ms=FILTER_MS, max_gain=4.0,
                 hold_ms=HOLD_MS, hold_band_mv=HOLD_BAND_MV):
        self.configure(c_e_j_per_mv, a2_w_per_mv2, filter_ms, max_gain, hold_ms, hold_band_mv)
        self.reset()

    def configure(self, c_e_j_per_mv, a2_w_per_mv2=0.0, filter_ms=FILTER_MS, max_gain=4.0,
                  hold_ms=HOLD_MS, hold_band_mv=HOLD_BAND_MV):
        """Set the parameters (ValueError outside their ranges)."""
        if not c_e_j_per_mv >= 0.0:
            raise ValueError("heat capacity must be >= 0 J/mV")
        if not filter_ms > 0:
            raise ValueError("derivative filter time must be > 0 ms")
        if not max_gain > 1.0:
            raise ValueError("max gain must be > 1")
        if not (hold_ms >= 0 and hold_band_mv >= 0.0):
            raise ValueError("hold time and band must be >= 0")
        self.c_e_j_per_mv = float(c_e_j_per_mv)
        self.a2_w_per_mv2 = float(a2_w_per_mv2)
        self.filter_ms = filter_ms
        self.max_gain = float(max_gain)
        self.hold_ms = hold_ms
        self.hold_band_mv = float(hold_band_mv)
        # per-sample constants, exact: 4 a2 (of 4 a2 P), -band, and the
        # filter factors for the last dt (None: compute at the next update)
        self._a2_x4 = 4.0 * self.a2_w_per_mv2
        self._neg_band_mv = -self.hold_band_mv
        self._dt_ms = None
        self._a = 0.0
        self._hold_a = 0.0

    def reset(self):
        """Forget the filter history (the next update starts afresh)."""
        self._x1 = 0.0
        self._x2 = 0.0
        self._y = 0.0
        self._last_ms = None
        self.emf_eq_mv = 0.0
        self.dedt_mv_s = 0.0

    def update(self, emf_mv, power_w, now_ms):
        """Feed one sample (EMF against the wall, heater power); return E_eq in mV."""
        last = self._last_ms
        if last is None:
            self._x1 = emf_mv
            self._x2 = emf_mv
            self._y = emf_mv
            self._last_ms = now_ms
            self.emf_eq_mv = emf_mv
            return emf_mv
        dt_ms = now_ms - last
        self._last_ms = now_ms
        if dt_ms <= 0:
            return self.emf_eq_mv
        tf_ms = self.filter_ms
        if dt_ms != self._dt_ms:
            # the filter factors depend on dt alone (configure clears them):
            # computed once per sample period, not per sample
            self._a = dt_ms / (tf_ms + dt_ms)  # backward-Euler first-order low-pass
            self._hold_a = dt_ms / (self.hold_ms + dt_ms)
            self._dt_ms = dt_ms
        a = self._a
        x1 = self._x1
        x1 += a * (emf_mv - x1)
        self._x1 = x1
        x2 = self._x2
        x2 = x2 + a * (x1 - x2)
        self._x2 = x2
        d = (x1 - x2) * 1000.0 / tf_ms
        self.dedt_mv_s = d
        est = x2
        c_e = self.c_e_j_per_mv
        if c_e > 0.0 and power_w > 0.0 and x2 > 0.0:
            a2 = self.a2_w_per_mv2
            g = (power_w - a2 * x2 * x2 - c_e * d) / x2
            disc = g * g + self._a2_x4 * power_w
            mg = self.max_gain
            hi = x2 * mg
            if g > 0.0 and disc > 0.0:
                est = 2.0 * power_w / (g + disc ** 0.5)
            else:
                est = hi
            if est > hi:
                est = hi
            else:
                lo = x2 / mg  # only where it is compared
                if est < lo:  # noqa: PLR1730  (max() is a call, and differs on NaN)
                    est = lo
        if self.hold_ms > 0:
            y = self._y
            diff = est - y
            if diff > self.hold_band_mv or diff < self._neg_band_mv:
                y = est
            else:
                y += self._hold_a * diff
            self._y = y
            est = y
        self.emf_eq_mv = est
        return est


class TransientFit:
    """Online least squares of a heating transient at vacuum (no sample buffers).

    Feed `add(t_ms, emf_mv, power_w)` with the EMF against the wall (the cold
    junction sits at ambient, so no heating means E = 0 and no loss); `solve()`
    fits the balance

        P = C_e dE/dt + G_e E + a2 E^2

    over the samples with E >= min_emf_mv, dE/dt by central differences
    (each sample is entered when its successor arrives). The changing power
    of the soft start and the curvature of the loss (radiation) make the
    three separable; the loss through zero (no loss without heating) fixes
    the scale of C_e.
    """

    def __init__(self, min_emf_mv=0.0):
        self.min_emf_mv = min_emf_mv
        self._s = [0.0] * 9  # s_dd s_de s_dq s_ee s_eq s_qq s_pd s_pe s_pq
        self.used = 0
        self._n = 0
        self._t0 = self._e0 = 0.0  # sample i-1
        self._t1 = self._e1 = self._p1 = 0.0  # sample i (entered when i+1 arrives)
        self.last_emf_mv = 0.0

    def add(self, t_ms, emf_mv, power_w):
        """One sample of the transient."""
        if self._n >= 2:
            dt_s = (t_ms - self._t0) * 0.001
            e = self._e1
            if dt_s > 0.0 and e >= self.min_emf_mv:
                d = (emf_mv - self._e0) / dt_s
                q = e * e
                p = self._p1
                s = self._s
                s[0] += d * d
                s[1] += d * e
                s[2] += d * q
                s[3] += e * e
                s[4] += e * q
                s[5] += q * q
                s[6] += p * d
                s[7] += p * e
                s[8] += p * q
                self.used += 1
        self._t0 = self._t1
        self._e0 = self._e1
        self._t1 = t_ms
        self._e1 = emf_mv
        self._p1 = power_w
        self._n += 1
        self.last_emf_mv = emf_mv

    def solve(self):
        """(C_e J/mV, G_e W/mV, a2 W/mV^2); ValueError when not determined."""
        if self.used < 10:
            raise ValueError("heating transient too short to identify the response")
        s = self._s
        sol = _solve3((s[0], s[1], s[2], s[6]), (s[1], s[3], s[4], s[7]), (s[2], s[4], s[5], s[8]))
        if sol is None:
            raise ValueError("heating transient does not determine the response")
        c_e, g_e, a2 = sol
        e = self.last_emf_mv
        if not (c_e > 0.0 and g_e > 0.0 and g_e + 2.0 * a2 * e > 0.0):
            raise ValueError("heating transient gave a non-physical response")
        return c_e, g_e, a2


def identify(times_ms, emf_mv, power_w, min_emf_mv=0.0):
    """TransientFit over whole sequences: (C_e, G_e, a2), ValueError if unusable."""
    n = len(emf_mv)
    if len(times_ms) != n or len(power_w) != n:
        raise ValueError("transient sequences differ in length")
    fit = TransientFit(min_emf_mv)
    for i in range(n):
        fit.add(times_ms[i], emf_mv[i], power_w[i])
    return fit.solve()


def _solve3(r0, r1, r2):
    """Solve a 3x3 linear system given as rows (a, b, c, rhs) by Cramer's rule."""
    a0, b0, c0, y0 = r0
    a1, b1, c1, y1 = r1
    a2, b2, c2, y2 = r2
    det = a0 * (b1 * c2 - b2 * c1) - b0 * (a1 * c2 - a2 * c1) + c0 * (a1 * b2 - a2 * b1)
    scale = abs(a0 * b1 * c2) + abs(b0 * c1 * a2) + abs(c0 * a1 * b2)
    if scale == 0.0 or abs(det) < 1e-12 * scale:
        return None
    x = (y0 * (b1 * c2 - b2 * c1) - b0 * (y1 * c2 - y2 * c1) + c0 * (y1 * b2 - y2 * b1)) / det
    y = (a0 * (y1 * c2 - y2 * c1) - y0 * (a1 * c2 - a2 * c1) + c0 * (a1 * y2 - a2 * y1)) / det
    z = (a0 * (b1 * y2 - b2 * y1) - b0 * (a1 * y2 - a2 * y1) + y0 * (a1 * b2 - a2 * b1)) / det
    return x, y, z
