"""Vacuum zero: set the heater current at base pressure.

At a pressure well below the gauge's range the EMF depends only on the tube
(radiation and conduction to the posts). Zeroing adjusts the heater current
until the EMF equals the tube's nominal high-vacuum EMF, so that the table
made for that EMF applies again (domain notes section 7). On the way it
records a heating transient and identifies the heat-balance parameters that
gaugecore.response needs (C_e, G_e, L0; see response.identify).

Phases, fed by `on_sample(now_ms, emf_mv, power_w)` once per sample (the
channel drives it; nothing sleeps). Windows are `window_ms` long.
  check   heater regulating; over one window the EMF must not rise by more
          than rise_limit_frac_s * E per second (pressure still falling),
          and the nominal EMF must be reachable: I sqrt(E_nom / E) within
          min_ma..max_ma (EMF ~ power ~ I^2); else refuse
  cool    heater off until the EMF is below `cool_frac` of its start
  heat    heater on; the transient is recorded until the EMF moves less
          than settle_frac * E over one window; C_e, G_e, a2 are fitted
  adjust  each window: equilibrium E_eq = E_0 + dE / (1 - exp(-W / tau))
          with the fitted tau (first-order step response; no need to wait
          for the filament); new current
          I (E_nom / E_eq)^(1/b), b = 2 first, then the secant exponent in
          log I / log E; done when E_eq and E are both within tol_frac of
          E_nom; refuse when the current needed leaves min_ma..max_ma
Refusals leave `reason` (our own words) and the heater running at the
current it had before the zero. The `ZeroResult` is for the caller to store.
"""

import math

from gaugecore import response

RUNNING = "running"
DONE = "done"
REFUSED = "refused"

CHECK = "check"
COOL = "cool"
HEAT = "heat"
ADJUST = "adjust"


class ZeroResult:
    """Outcome of a vacuum zero: what the caller saves and re-applies."""

    def __init__(self, heater_ma, emf_mv, c_e_j_per_mv, g_e_w_per_mv, a2_w_per_mv2=0.0, tau_s=0.0,
                 time_ms=0):
        self.heater_ma = float(heater_ma)
        self.emf_mv = float(emf_mv)
        self.c_e_j_per_mv = float(c_e_j_per_mv)
        self.g_e_w_per_mv = float(g_e_w_per_mv)
        self.a2_w_per_mv2 = float(a2_w_per_mv2)
        self.tau_s = float(tau_s)  # small-signal time constant at zero
        self.time_ms = int(time_ms)

    def to_dict(self):
        """Plain dict (JSON-ready) for storing the result."""
        return {
            "heater_ma": self.heater_ma,
            "emf_mv": self.emf_mv,
            "c_e_j_per_mv": self.c_e_j_per_mv,
            "g_e_w_per_mv": self.g_e_w_per_mv,
            "a2_w_per_mv2": self.a2_w_per_mv2,
            "tau_s": self.tau_s,
            "time_ms": self.time_ms,
        }

    @staticmethod
    def from_dict(d):
        """Inverse of `to_dict` (ValueError on a missing or bad field)."""
        try:
            r = ZeroResult(
                d["heater_ma"],
                d["emf_mv"],
                d["c_e_j_per_mv"],
                d["g_e_w_per_mv"],
                d.get("a2_w_per_mv2", 0.0),
                d.get("tau_s", 0.0),
                d.get("time_ms", 0),
            )
        except (KeyError, TypeError, ValueError):
            raise ValueError("zero record lacks a field or has a wrong type")
        if r.heater_ma <= 0.0 or r.c_e_j_per_mv <= 0.0 or r.g_e_w_per_mv <= 0.0:
            raise ValueError("zero record has a non-positive value")
        return r


class VacuumZero:
    """The zeroing procedure for one channel, driven sample by sample.

    regulator: gaugecore.heater.HeaterRegulator (start, stop, set_target,
    target_ma, state). target_emf_mv: the nominal high-vacuum EMF, referred
    to the table's reference temperature.
    """

    def __init__(
        self,
        regulator,
        target_emf_mv,
        min_ma,
        max_ma,
        tol_frac=2e-4,
        window_ms=4000,
        settle_frac=1e-4,
        rise_limit_frac_s=1.5e-4,
        cool_frac=0.1,
        phase_timeout_ms=240000,
        max_steps=10,
    ):
        if not target_emf_mv > 0.0:
            raise ValueError("nominal zero EMF must be > 0 mV")
        if not 0.0 < min_ma < max_ma:
            raise ValueError("heater current range must satisfy 0 < min_ma < max_ma")
        if window_ms <= 0 or not 0.0 < tol_frac < 0.1:
            raise ValueError("zero window must be > 0 ms and tolerance within 0..0.1")
        self.regulator = regulator
        self.target_emf_mv = float(target_emf_mv)
        self.min_ma = float(min_ma)
        self.max_ma = float(max_ma)
        self.tol_frac = tol_frac
        self.window_ms = window_ms
        self.settle_frac = settle_frac
        self.rise_limit_frac_s = rise_limit_frac_s
        self.cool_frac = cool_frac
        self.phase_timeout_ms = phase_timeout_ms
        self.max_steps = max_steps
        self._fit = None
        self.state = None
        self.phase = None
        self.reason = None
        self.result = None
        self.steps = 0
        self.params = None  # (C_e, G_e, a2) once identified

    def start(self, now_ms):
        """Begin the procedure (the heater should be on and regulating)."""
        self.state = RUNNING
        self.reason = None
        self.result = None
        self.steps = 0
        self.params = None
        self._fit = None
        self._start_ma = self.regulator.target_ma
        self._prev = None  # (current_ma, emf_eq_mv) before the last step
        self._enter(CHECK, now_ms)

    def _enter(self, phase, now_ms):
        self.phase = phase
        self._phase_ms = now_ms
        self._ref_ms = None
        self._ref_e = 0.0
        self._start_e = None

    def _refuse(self, reason):
        self.state = REFUSED
        self.reason = reason
        reg = self.regulator
        if reg.state == "off":
            reg.start(self._start_ma)
        elif reg.target_ma != self._start_ma:
            reg.set_target(self._start_ma)
        return False

    def _window(self, now_ms, emf_mv):
        """Rate (mV/s) over the window just completed, or None mid-window."""
        if self._ref_ms is None:
            self._ref_ms = now_ms
            self._ref_e = emf_mv
            return None
        dt = now_ms - self._ref_ms
        if dt < self.window_ms:
            return None
        rate = (emf_mv - self._ref_e) * 1000.0 / dt
        self._win_e0 = self._ref_e
        self._win_ms = dt
        self._ref_ms = now_ms
        self._ref_e = emf_mv
        return rate

    def on_sample(self, now_ms, emf_mv, power_w, emf_wall_mv=None):
        """Feed one sample; True while the procedure is still running.

        emf_mv: referred to the table's reference (compared with the target);
        emf_wall_mv: as measured against the cold junction at ambient (for
        the heat balance); defaults to emf_mv.
        """
        if emf_wall_mv is None:
            emf_wall_mv = emf_mv
        if self.state != RUNNING:
            return False
        if now_ms - self._phase_ms > self.phase_timeout_ms:
            if self.phase == HEAT or self.phase == ADJUST:
                return self._refuse("EMF still rising, not steady: pressure not yet at base")
            if self.phase == COOL:
                return self._refuse("filament did not cool with the heater off")
            return self._refuse("heater does not regulate: cannot zero")
        reg = self.regulator
        self._p_last = power_w
        if self.phase == CHECK:
            if reg.state != "regulating":
                return True
            rate = self._window(now_ms, emf_mv)
            if rate is None:
                return True
            if rate > self.rise_limit_frac_s * emf_mv:
                return self._refuse("EMF still rising (%.4f mV/s): pressure not yet at base" % rate)
            if emf_mv <= 0.0:
                return self._refuse("no EMF at vacuum zero: check the thermocouple")
            need = reg.target_ma * math.sqrt(self.target_emf_mv / emf_mv)
            refusal = self._out_of_range(need)
            if refusal is not None:
                return self._refuse(refusal)
            self._enter(COOL, now_ms)
            self._start_e = emf_mv
            self._start_wall_e = emf_wall_mv
            reg.stop()
            return True
        if self.phase == COOL:
            if emf_wall_mv < self.cool_frac * self._start_wall_e:
                self._enter(HEAT, now_ms)
                self._fit = response.TransientFit(self.cool_frac * self._start_wall_e)
                reg.start()
            return True
        if self.phase == HEAT:
            if reg.state != "regulating":
                return True  # soft start: its changing power is not sampled finely enough
            self._fit.add(now_ms, emf_wall_mv, power_w)
            rate = self._window(now_ms, emf_mv)
            if rate is None:
                return True
            if rate * self.window_ms * 0.001 > self.settle_frac * emf_mv:
                return True
            try:
                self.params = self._fit.solve()
            except ValueError as exc:
                return self._refuse("response not identified: %s" % exc.args[0])
            self._enter(ADJUST, now_ms)
            self._ref_ms = now_ms
            self._ref_e = emf_mv
            return True
        # ADJUST
        rate = self._window(now_ms, emf_mv)
        if rate is None:
            return True
        # first order: a window of W after a step moves the EMF by
        # (E_eq - E_0)(1 - exp(-W / tau)), whatever is left of the step
        tau_s = self._tau_s(power_w, emf_wall_mv)
        e_eq = self._win_e0 + (emf_mv - self._win_e0) / (1.0 - math.exp(-self._win_ms * 0.001 / tau_s))
        return self._adjust(now_ms, emf_mv, e_eq)

    def _tau_s(self, power_w, emf_wall_mv):
        """Small-signal tau = C_e / (dLoss/dE) at this point, loss = G E + a2 E^2."""
        c_e, g_e, a2 = self.params
        slope = g_e + 2.0 * a2 * emf_wall_mv
        if emf_wall_mv > 0.0 and power_w > 0.0:
            slope = power_w / emf_wall_mv + a2 * emf_wall_mv  # G from P = G E + a2 E^2
        self._tau = c_e / slope if slope > 0.0 else c_e / g_e
        return self._tau

    def _out_of_range(self, need_ma):
        if need_ma > self.max_ma:
            return "nominal EMF needs %.1f mA, above the %.1f mA limit: pressure not at base" % (
                need_ma,
                self.max_ma,
            )
        if need_ma < self.min_ma:
            return "nominal EMF needs %.1f mA, below the %.1f mA limit: check the tube profile" % (
                need_ma,
                self.min_ma,
            )
        return None

    def _adjust(self, now_ms, emf_mv, e_eq):
        reg = self.regulator
        i_ma = reg.target_ma
        target = self.target_emf_mv
        tol = self.tol_frac * target
        if abs(e_eq - target) <= tol and abs(emf_mv - target) <= tol:
            c_e, g_e, a2 = self.params
            self.result = ZeroResult(i_ma, emf_mv, c_e, g_e, a2, self._tau, now_ms)
            self.state = DONE
            return False
        if abs(e_eq - target) <= tol:
            return True  # on its way: wait for the filament
        if self.steps >= self.max_steps:
            return self._refuse("zero did not converge in %d steps" % self.max_steps)
        exponent = 2.0  # EMF ~ heater power ~ I^2 at constant resistance
        prev = self._prev
        if prev is not None and prev[0] != i_ma and prev[1] > 0.0 and e_eq > 0.0:
            b = math.log(e_eq / prev[1]) / math.log(i_ma / prev[0])
            if 0.5 < b < 4.0:
                exponent = b
        new_ma = i_ma * (target / e_eq) ** (1.0 / exponent)
        refusal = self._out_of_range(new_ma)
        if refusal is not None:
            return self._refuse(refusal)
        self._prev = (i_ma, e_eq)
        reg.set_target(new_ma)
        self.steps += 1
        return True
