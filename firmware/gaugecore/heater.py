"""Constant-current regulator for the gauge tube's heater filament.

What is regulated
-----------------
The loop regulates the *sensed* current: `driver.read_ma()`, the voltage
across the driver's sense resistor divided by that resistor's nominal value.
It commands the current source with `driver.set_ma()` once per control tick
(`update(now_ms)`), so the sensed value it reads is the answer to the command
of the previous tick.

The sense resistor and the source must agree on what is measured. A drift of
the sense resistor itself (temperature coefficient, self-heating, ageing)
changes the sensed value and the true current by the same ratio in opposite
directions: the loop holds the sensed current on target and so moves the true
current by -drift. No feedback on the same sensor can see that error. The
design choice is therefore:

- a precision low-TC sense resistor (a few ppm/K, sized for little
  self-heating) so that its drift stays well inside the 500 ppm budget;
- the loop removes everything *else*: the source's own gain and offset drift,
  its finite output resistance against the filament's changing resistance,
  the supply's sag, and asymmetry between the two polarities.
  tests/core/test_heater.py proves both halves (drift of the source removed,
  sense-resistor drift passed through one to one).

Control law
-----------
Positional PI with reference feed-forward, designed in ticks (the plant is a
static gain with one tick of delay, so the gains are per tick)::

    e  = r_prev - |i_sensed|        (r_prev: the reference in force when the
                                      sensed current was commanded)
    I += ki * e                     (one integrator per polarity)
    u  = r + kp * e + I,  clamped to r (1 -/+ authority), at most cmd_limit_ma

The clamp (`authority`, default +/-10 % of the reference) bounds what the
loop may correct: the source's own errors are a fraction of a per cent, so a
larger correction means a fault.

Anti-windup is *conditional integration* (clamping), in two forms described
by Astrom & Hagglund, "Advanced PID Control" (ISA, 2006), ch. 3 on integrator
windup (section details from memory): the integrator does not integrate an
error larger than the authority (a fault, not drift), and while the error
pushes the command beyond its clamp it moves only as far as the clamp, never
past it. While the heater voltage sits at `compliance_v` (when given),
command and integrator are frozen altogether. Back-calculation was not
chosen: it needs a tracking time constant, which a plant that answers within
one tick does not call for. With the integrator held, the current returns to
target without a windup overshoot when the source recovers (a supply back
from a sag).

Why kp is small: with one tick of delay and a static plant, the closed loop's
poles are the roots of z^2 + (k kp + k ki - 1) z - k kp = 0 (k: the source's
gain); kp > 0 adds a negative real pole (an alternating mode), so kp stays at
0.1 and ki at 0.5 (dominant pole ~0.57 per tick, monotone step response).

Soft start and set-point changes: the reference `r` slews toward the target at
`ramp_ma_per_s` (default: max_ma in 2 s). A cold filament has a different
resistance, so a source with finite output resistance delivers a little more
current until the filament warms; slewing keeps the integrator ahead of that
and the sensed current below target * 1.01.

States: "off" (driver.off()), "starting" (ramp not finished or current more
than `short_frac` short of target), "regulating", "compliance" (the source
cannot reach the reference: current more than `short_frac` short AND the
loop out of means -- command at its clamp, error beyond the authority, or the
heater voltage at `compliance_v` -- for longer than `compliance_ms`, default
500 ms). The fault monitor reads "compliance" as heater-open.

`settled` is True once the sensed current has stayed within `settle_ppm`
(default 500 ppm) of the target for `settle_ms` (default 500 ms) with the
ramp finished.

update() allocates nothing but the floats the arithmetic makes: 7 boxed
floats (112 bytes) a tick while regulating, besides what the driver's reads
make (gc.mem_alloc() under the MicroPython WebAssembly build). The clamp
bounds and the authority and short-fall thresholds depend only on the
reference, so they are computed when the reference moves (during a ramp) and
reused while it holds; gains, authority and cmd_limit_ma are fixed at
construction.

Time: `now_ms` differences are taken plainly (no ticks wrap handling); the
caller passes a monotonic millisecond count.
"""

OFF = "off"
STARTING = "starting"
REGULATING = "regulating"
COMPLIANCE = "compliance"

STATES = (OFF, STARTING, REGULATING, COMPLIANCE)


class HeaterRegulator:
    """Closed-loop constant current on `driver.read_ma()`.

    driver: object with set_ma(ma), read_ma(), off(), and optionally read_v()
    and set_polarity(sign). target_ma must lie in min_ma..max_ma (the tube
    profile's allowed heater range). kp, ki: PI gains per tick (dimensionless).
    """

    def __init__(
        self,
        driver,
        target_ma,
        min_ma,
        max_ma,
        kp=0.1,
        ki=0.5,
        authority=0.1,
        ramp_ma_per_s=None,
        cmd_limit_ma=None,
        compliance_v=None,
        compliance_ms=500,
        short_frac=0.02,
        settle_ppm=500.0,
        settle_ms=500,
    ):
        if not (min_ma > 0.0 and max_ma >= min_ma):
            raise ValueError(
                "heater range %r..%r mA is invalid (need 0 < min_ma <= max_ma)" % (min_ma, max_ma)
            )
        if not (0.0 <= kp < 1.0 and 0.0 < ki < 1.0):
            raise ValueError("heater loop gains kp=%r ki=%r outside 0<=kp<1, 0<ki<1" % (kp, ki))
        if not 0.0 < authority < 1.0:
            raise ValueError("heater loop authority %r outside 0..1" % (authority,))
        if ramp_ma_per_s is None:
            ramp_ma_per_s = max_ma / 2.0
        if cmd_limit_ma is None:
            cmd_limit_ma = (1.0 + authority) * max_ma
        if not ramp_ma_per_s > 0.0:
            raise ValueError("heater ramp must be > 0 mA/s, not %r" % (ramp_ma_per_s,))
        if not cmd_limit_ma >= max_ma:
            raise ValueError(
                "heater command limit %r mA is below the range maximum %r mA"
                % (cmd_limit_ma, max_ma)
            )
        self._driver = driver
        self._read_v = getattr(driver, "read_v", None)
        self.min_ma = float(min_ma)
        self.max_ma = float(max_ma)
        self.kp = float(kp)
        self.ki = float(ki)
        self.authority = float(authority)
        self._hi_k = 1.0 + self.authority
        self._lo_k = 1.0 - self.authority
        self.ramp_ma_per_s = float(ramp_ma_per_s)
        self.cmd_limit_ma = float(cmd_limit_ma)
        self.compliance_v = compliance_v
        self.compliance_ms = compliance_ms
        self.short_frac = float(short_frac)
        self._short_k = 1.0 - self.short_frac
        self.settle_ppm = float(settle_ppm)
        self.settle_ms = settle_ms
        self.target_ma = 0.0
        self.set_target(target_ma)
        self.current_ma = 0.0
        self.voltage_v = None
        self.command_ma = 0.0
        self.reference_ma = 0.0
        self.state = OFF
        self.settled = False
        self.polarity = 1
        self._ref_prev = 0.0
        self._i_pos = 0.0  # integrator for polarity +1
        self._i_neg = 0.0  # integrator for polarity -1
        self._last_ms = None
        self._comp_since = None
        self._settle_since = None
        # bounds cached for one reference value (see _bounds, _thresholds)
        self._b_ref = None
        self._u_hi = self._u_lo = 0.0
        self._t_ref = None
        self._big = self._nbig = self._short_ma = 0.0

    def _bounds(self, r):
        # command clamp for reference r: r (1 -/+ authority), at most cmd_limit_ma
        u_hi = r * self._hi_k
        if u_hi > self.cmd_limit_ma:
            u_hi = self.cmd_limit_ma
        self._u_hi = u_hi
        self._u_lo = r * self._lo_k
        self._b_ref = r

    def _thresholds(self, ref_then):
        # error beyond the authority, and the short-fall level, for ref_then
        big = self.authority * ref_then
        self._big = big
        self._nbig = -big
        self._short_ma = ref_then * self._short_k
        self._t_ref = ref_then

    def set_target(self, ma):
        """New target current in mA, bounded by min_ma..max_ma (ValueError outside)."""
        if not (self.min_ma <= ma <= self.max_ma):  # also rejects NaN
            raise ValueError(
                "heater target %r mA is outside this tube's range %.1f..%.1f mA"
                % (ma, self.min_ma, self.max_ma)
            )
        self.target_ma = float(ma)
        self._settle_band_ma = self.settle_ppm * 1e-6 * self.target_ma
        self._near_band_ma = self.short_frac * self.target_ma
        self.settled = False
        self._settle_since = None

    def start(self, target_ma=None):
        """Switch the heater on with a soft start from 0 mA to the target."""
        if target_ma is not None:
            self.set_target(target_ma)
        self._i_pos = 0.0
        self._i_neg = 0.0
        self.reference_ma = 0.0
        self._ref_prev = 0.0
        self.command_ma = 0.0
        self._last_ms = None
        self._comp_since = None
        self._settle_since = None
        self.settled = False
        self.state = STARTING
        self._driver.set_ma(0.0)

    def stop(self):
        """Switch the heater off (driver.off())."""
        self._driver.off()
        self.state = OFF
        self.settled = False
        self.command_ma = 0.0
        self.reference_ma = 0.0
        self._ref_prev = 0.0

    def set_polarity(self, sign):
        """Reverse the drive (+1 or -1); the loop keeps regulating the magnitude.

        Each polarity has its own integrator, so a source whose two directions
        differ does not make the loop hunt at every reversal.
        """
        if sign != 1 and sign != -1:
            raise ValueError("heater polarity must be +1 or -1, not %r" % (sign,))
        self._driver.set_polarity(sign)
        self.polarity = sign
        if self.state != OFF:
            r = self.reference_ma
            u = r + (self._i_pos if sign > 0 else self._i_neg)
            if r != self._b_ref:
                self._bounds(r)
            if u > self._u_hi:
                u = self._u_hi
            elif u < self._u_lo:
                u = self._u_lo
            self.command_ma = u
            self._ref_prev = self.reference_ma
            self._driver.set_ma(u)

    def update(self, now_ms):
        """One control tick: read the sensed current, correct the command."""
        if self.state == OFF:
            return
        i_ma = self._driver.read_ma()
        if i_ma < 0.0:
            i_ma = -i_ma
        self.current_ma = i_ma
        if self._read_v is not None:
            self.voltage_v = self._read_v()
        last_ms = self._last_ms
        self._last_ms = now_ms

        ref_then = self._ref_prev
        e = ref_then - i_ma
        # slew the reference toward the target
        r = self.reference_ma
        tgt = self.target_ma
        if r != tgt:
            dt_ms = 0 if last_ms is None else now_ms - last_ms
            if dt_ms < 0:
                dt_ms = 0
            step = self.ramp_ma_per_s * dt_ms * 0.001
            if r < tgt:
                r = r + step
                if r > tgt:
                    r = tgt
            else:
                r = r - step
                if r < tgt:
                    r = tgt
            self.reference_ma = r

        pos = self.polarity > 0
        integ = self._i_pos if pos else self._i_neg
        if r != self._b_ref:
            self._bounds(r)
        u_hi = self._u_hi
        if ref_then != self._t_ref:
            self._thresholds(ref_then)
        big = self._big
        v = self.voltage_v
        cv = self.compliance_v
        at_v = cv is not None and v is not None and (v >= cv or -v >= cv)  # |v| >= cv
        if at_v and e > 0.0:
            # the source sits at its compliance voltage: more command cannot
            # help; freeze command and integrator (bumpless when it recovers)
            trial = integ
            u = self.command_ma
            if u > u_hi:
                u = u_hi
        else:
            # conditional integration: no integration on an error larger than
            # the loop's authority (that is a fault, not drift); otherwise the
            # integrator moves only as far as the clamp, never beyond it
            if self._nbig <= e <= big:
                trial = integ + self.ki * e
            else:
                trial = integ
            pe = self.kp * e
            u = r + pe + trial
            if u > u_hi:
                if e > 0.0:
                    lim = u_hi - r - pe
                    trial = integ if integ > lim else lim
                u = u_hi
            elif u < self._u_lo:
                if e < 0.0:
                    lim = self._u_lo - r - pe
                    trial = integ if integ < lim else lim
                u = self._u_lo
        if pos:
            self._i_pos = trial
        else:
            self._i_neg = trial
        self.command_ma = u
        self._driver.set_ma(u)
        self._ref_prev = r

        # compliance: the source cannot reach what it was asked for (short
        # of the reference and out of means)
        if i_ma < self._short_ma and (at_v or (r > 0.0 and u >= u_hi) or e > big):
            if self._comp_since is None:
                self._comp_since = now_ms
            if now_ms - self._comp_since >= self.compliance_ms:
                self.state = COMPLIANCE
        else:
            self._comp_since = None
            if self.state == COMPLIANCE:
                self.state = STARTING
        dev = i_ma - tgt
        if dev < 0.0:
            dev = -dev
        if r == tgt:
            if self.state == STARTING and dev <= self._near_band_ma:
                self.state = REGULATING
            # settled: within settle_ppm of the target for settle_ms
            if dev <= self._settle_band_ma:
                if self._settle_since is None:
                    self._settle_since = now_ms
                self.settled = now_ms - self._settle_since >= self.settle_ms
                return
        self._settle_since = None
        self.settled = False
