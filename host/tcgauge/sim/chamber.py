"""Vacuum chambers and time-composable scenarios: the true pressure, gas and
ambient temperature the simulated tubes see, as functions of time.

Pump-down follows the pumping equation of a chamber of volume V pumped at
constant speed S with a gas load Q (leaks plus outgassing):

    V dp/dt = -S p + Q,   p(t) = Q/S + (p0 - Q/S) exp(-S t / V)

(the textbook lumped form, e.g. O'Hanlon, A User's Guide to Vacuum
Technology, chapter on pumping speed and pump-down; Roth, Vacuum
Technology, ch. 4. Cited from memory.) Base pressure Q/S, time constant V/S.
A rotary pump's speed falls toward its ultimate pressure; the constant-S
form is the simplest model that still has the right shape and a closed form.

Venting is modelled as conductance-limited inflow, V dp/dt = C (p_atm - p),
p(t) = p_atm - (p_atm - p0) exp(-C t / V): a simple invented model (a real
vent valve chokes first), good enough for a gauge's over-range transient.

A `Scenario` is a chain of pressure segments (pump-down, hold, step, vent,
logarithmic ramp), plus gas changes, ambient-temperature ramps and fault
events at chosen times. `SCENARIOS` names the built-in ones for the CLI.
"""

import bisect
import math

from tcgauge.sim import faults

ATM_PA = 101325.0  # standard atmosphere, exact (NIST SP 811, B.8)


class Chamber:
    """A lumped vacuum chamber: volume, pump speed, gas load, vent conductance."""

    def __init__(self, name, volume_l, pump_speed_l_s, gas_load_pa_l_s, vent_conductance_l_s):
        for key, value in (("volume_l", volume_l), ("pump_speed_l_s", pump_speed_l_s),
                           ("vent_conductance_l_s", vent_conductance_l_s)):
            if not value > 0.0:
                raise ValueError("chamber %s must be > 0, got %r" % (key, value))
        if not gas_load_pa_l_s >= 0.0:
            raise ValueError("chamber gas_load_pa_l_s must be >= 0, got %r" % (gas_load_pa_l_s,))
        self.name = name
        self.volume_l = float(volume_l)
        self.pump_speed_l_s = float(pump_speed_l_s)
        self.gas_load_pa_l_s = float(gas_load_pa_l_s)
        self.vent_conductance_l_s = float(vent_conductance_l_s)

    def __repr__(self):
        return "Chamber(%r)" % self.name

    @property
    def base_pressure_pa(self):
        """Ultimate pressure Q/S."""
        return self.gas_load_pa_l_s / self.pump_speed_l_s

    @property
    def time_constant_s(self):
        """Pump-down time constant V/S."""
        return self.volume_l / self.pump_speed_l_s

    def pumpdown_pa(self, t_s, p0_pa=ATM_PA):
        """Closed-form pump-down pressure t_s after starting at p0_pa."""
        pb = self.base_pressure_pa
        return pb + (p0_pa - pb) * math.exp(-t_s / self.time_constant_s)

    def pumpdown_time_s(self, p_pa, p0_pa=ATM_PA):
        """Time to pump from p0_pa down to p_pa (> base pressure)."""
        pb = self.base_pressure_pa
        if not p_pa > pb:
            raise ValueError("chamber %s never reaches %g Pa (base %g Pa)" % (self.name, p_pa, pb))
        return self.time_constant_s * math.log((p0_pa - pb) / (p_pa - pb))

    def vent_pa(self, t_s, p0_pa, to_pa=ATM_PA):
        """Pressure t_s after opening the vent at p0_pa."""
        return to_pa - (to_pa - p0_pa) * math.exp(-t_s * self.vent_conductance_l_s / self.volume_l)


# The invented demo chamber: a 12 L glass bell jar on a small two-stage rotary
# pump (1.5 L/s at the jar after the foreline), gas load 0.03 Pa L/s, so base
# 0.02 Pa (0.15 mTorr) and V/S = 8 s; a vent needle valve of 0.5 L/s.
# All numbers invented for the demo.
LARKSPUR = Chamber("Larkspur bell jar", volume_l=12.0, pump_speed_l_s=1.5,
                   gas_load_pa_l_s=0.03, vent_conductance_l_s=0.5)


# ---------------------------------------------------------------- segments


class PumpDown:
    """Pump the chamber down for duration_s from wherever the pressure is."""

    def __init__(self, duration_s, chamber=LARKSPUR):
        self.duration_s = float(duration_s)
        self.chamber = chamber

    def pressure_pa(self, dt_s, p_start_pa):
        return self.chamber.pumpdown_pa(dt_s, p_start_pa)


class Hold:
    """Hold a pressure (or the present one, pressure_pa=None) for duration_s.

    A hold with a pressure is a step: the pressure jumps at the segment start."""

    def __init__(self, duration_s, pressure_pa=None):
        if pressure_pa is not None and not pressure_pa > 0.0:
            raise ValueError("scenario pressure must be > 0 Pa, got %r" % (pressure_pa,))
        self.duration_s = float(duration_s)
        self.pressure = pressure_pa

    def pressure_pa(self, dt_s, p_start_pa):
        return p_start_pa if self.pressure is None else self.pressure


class Vent:
    """Open the vent valve for duration_s (toward to_pa, default atmosphere)."""

    def __init__(self, duration_s, chamber=LARKSPUR, to_pa=ATM_PA):
        self.duration_s = float(duration_s)
        self.chamber = chamber
        self.to_pa = float(to_pa)

    def pressure_pa(self, dt_s, p_start_pa):
        return self.chamber.vent_pa(dt_s, p_start_pa, self.to_pa)


class LogRamp:
    """Move the pressure from the present value to to_pa, linear in log p."""

    def __init__(self, duration_s, to_pa):
        if not to_pa > 0.0:
            raise ValueError("scenario pressure must be > 0 Pa, got %r" % (to_pa,))
        if not duration_s > 0.0:
            raise ValueError("scenario log ramp needs a duration > 0 s")
        self.duration_s = float(duration_s)
        self.to_pa = float(to_pa)

    def pressure_pa(self, dt_s, p_start_pa):
        f = dt_s / self.duration_s
        return p_start_pa * (self.to_pa / p_start_pa) ** f


class FaultEvent:
    """Fault `name` on `channel` from at_s (until clear_at_s, if given)."""

    def __init__(self, at_s, name, channel=0, clear_at_s=None, **params):
        faults.check_params(name, params)
        if not at_s >= 0.0:
            raise ValueError("fault time must be >= 0 s, got %r" % (at_s,))
        if clear_at_s is not None and not clear_at_s > at_s:
            raise ValueError("fault %s: clear_at_s must be after at_s" % name)
        self.at_s = float(at_s)
        self.name = name
        self.channel = int(channel)
        self.clear_at_s = None if clear_at_s is None else float(clear_at_s)
        self.params = params

    def __repr__(self):
        return "FaultEvent(%r, %r, channel=%d)" % (self.at_s, self.name, self.channel)


# ---------------------------------------------------------------- scenario


class Scenario:
    """True conditions over time: pressure segments, gas, ambient, faults.

    Before the first segment and after the last, the pressure holds (at the
    initial value, resp. the last segment's end value). Methods that add
    parts return the scenario, so they chain.
    """

    def __init__(self, name="custom", pressure_pa=ATM_PA, gas="N2", ambient_c=22.0):
        if not pressure_pa > 0.0:
            raise ValueError("scenario pressure must be > 0 Pa, got %r" % (pressure_pa,))
        self.name = name
        self.initial_pressure_pa = float(pressure_pa)
        self.segments = []
        self._starts_s = []
        self._p_starts = []
        self._end_s = 0.0
        self._end_pa = float(pressure_pa)
        self.gas_events = [(0.0, gas)]  # (t_s, gas name), sorted
        self.ambient_points = [(0.0, float(ambient_c))]  # (t_s, deg C), piecewise linear
        self.fault_events = []

    def __repr__(self):
        return "Scenario(%r, %.1f s)" % (self.name, self.duration_s)

    # --- building
    def then(self, segment):
        """Append a pressure segment (PumpDown, Hold, Vent, LogRamp or alike)."""
        if not segment.duration_s >= 0.0:
            raise ValueError("scenario segment duration must be >= 0 s")
        self.segments.append(segment)
        self._starts_s.append(self._end_s)
        self._p_starts.append(self._end_pa)
        self._end_pa = segment.pressure_pa(segment.duration_s, self._end_pa)
        self._end_s += segment.duration_s
        return self

    def pumpdown(self, duration_s, chamber=LARKSPUR):
        return self.then(PumpDown(duration_s, chamber))

    def hold(self, duration_s, pressure_pa=None):
        return self.then(Hold(duration_s, pressure_pa))

    def step(self, pressure_pa, hold_s):
        """Jump to pressure_pa and hold it for hold_s."""
        return self.then(Hold(hold_s, pressure_pa))

    def vent(self, duration_s, chamber=LARKSPUR, to_pa=ATM_PA):
        return self.then(Vent(duration_s, chamber, to_pa))

    def log_ramp(self, duration_s, to_pa):
        return self.then(LogRamp(duration_s, to_pa))

    def set_gas(self, at_s, gas):
        """From at_s on, the chamber holds `gas` (a name of tcgauge.sim.gas.GASES)."""
        if at_s < self.gas_events[-1][0]:
            raise ValueError("scenario gas changes must be added in time order")
        self.gas_events.append((float(at_s), gas))
        return self

    def ambient_ramp(self, at_s, duration_s, to_c):
        """Ramp the ambient temperature linearly to to_c over duration_s from at_s."""
        if at_s < self.ambient_points[-1][0]:
            raise ValueError("scenario ambient ramps must be added in time order")
        if not duration_s > 0.0:
            raise ValueError("scenario ambient ramp needs a duration > 0 s")
        self.ambient_points.append((float(at_s), self.ambient_c(at_s)))
        self.ambient_points.append((float(at_s + duration_s), float(to_c)))
        return self

    def fault(self, at_s, name, channel=0, clear_at_s=None, **params):
        """Inject fault `name` on `channel` at at_s (cleared at clear_at_s, if given)."""
        self.fault_events.append(FaultEvent(at_s, name, channel, clear_at_s, **params))
        return self

    # --- evaluating
    @property
    def duration_s(self):
        """End of the last pressure segment (s)."""
        return self._end_s

    def pressure_pa(self, t_s):
        """True pressure at t_s (Pa)."""
        if t_s >= self._end_s:
            return self._end_pa
        i = bisect.bisect_right(self._starts_s, t_s) - 1
        if i < 0:
            return self.initial_pressure_pa
        return self.segments[i].pressure_pa(t_s - self._starts_s[i], self._p_starts[i])

    def gas(self, t_s):
        """Name of the gas in the chamber at t_s."""
        gas = self.gas_events[0][1]
        for t_e, name in self.gas_events:
            if t_e > t_s:
                break
            gas = name
        return gas

    def ambient_c(self, t_s):
        """Ambient (wall and connector) temperature at t_s, deg C."""
        pts = self.ambient_points
        if len(pts) == 1 or t_s <= pts[0][0]:
            return pts[0][1]
        for (t0, c0), (t1, c1) in zip(pts, pts[1:]):
            if t_s < t1:
                return c0 + (c1 - c0) * (t_s - t0) / (t1 - t0) if t1 > t0 else c1
        return pts[-1][1]

    def ambient_breakpoints_s(self):
        """Times where the ambient temperature's slope changes."""
        return [t for t, _ in self.ambient_points]


class SetChamber(Scenario):
    """A chamber whose pressure is set while the simulation runs, as a person at the
    valves sets it during a calibration: `set_pressure(p_pa, at_s)` steps the
    pressure at at_s (not before the last setting) and it holds from there.

    Readers on the device's thread see the settings as one tuple, replaced
    whole by each call, so no lock is needed. Pressure segments (`then`) are
    not used; gas changes, ambient ramps and faults work as in `Scenario`.
    """

    def __init__(self, name="calibration", pressure_pa=LARKSPUR.base_pressure_pa, gas="N2",
                 ambient_c=22.0):
        Scenario.__init__(self, name, pressure_pa, gas, ambient_c)
        self._sets = ((0.0, float(pressure_pa)),)

    def then(self, segment):
        raise ValueError("a SetChamber takes set_pressure(), not segments")

    @property
    def duration_s(self):
        """Open-ended: the last setting holds until the run stops (inf)."""
        return float("inf")

    def set_pressure(self, pressure_pa, at_s):
        """From at_s on the pressure is pressure_pa (Pa)."""
        if not pressure_pa > 0.0:
            raise ValueError("scenario pressure must be > 0 Pa, got %r" % (pressure_pa,))
        if at_s < self._sets[-1][0]:
            raise ValueError("set_pressure at %.6g s is before the last setting at %.6g s"
                             % (at_s, self._sets[-1][0]))
        self._sets = self._sets + ((float(at_s), float(pressure_pa)),)

    def pressure_pa(self, t_s):
        sets = self._sets
        for i in range(len(sets) - 1, -1, -1):
            if sets[i][0] <= t_s:
                return sets[i][1]
        return sets[0][1]


def static(pressure_pa=ATM_PA, gas="N2", ambient_c=22.0, name="static"):
    """A chamber that stays at one pressure, gas and temperature."""
    return Scenario(name, pressure_pa, gas, ambient_c)


# ---------------------------------------------------------------- registry


def _pumpdown():
    # from atmosphere to base in the Larkspur bell jar, then hold at base
    return Scenario("pumpdown").hold(5.0).pumpdown(295.0)


def _steps():
    # a staircase through the gauge's range, one decade per 60 s (N2)
    s = Scenario("steps", pressure_pa=0.01)
    for p in (0.01, 0.1, 1.0, 10.0, 100.0, 1000.0):
        s.step(p, 60.0)
    return s


def _vent():
    # at base pressure, then the vent valve opens at 30 s
    return Scenario("vent", pressure_pa=LARKSPUR.base_pressure_pa).hold(30.0).vent(90.0)


def _gas_change():
    # 10 Pa held while the gas changes: N2, then He at 60 s, Ar at 120 s
    s = Scenario("gas-change", pressure_pa=10.0).hold(180.0)
    return s.set_gas(60.0, "He").set_gas(120.0, "Ar")


def _ambient_ramp():
    # 1 Pa held; the room warms from 22 to 32 C between 60 s and 660 s
    return Scenario("ambient-ramp", pressure_pa=1.0).hold(720.0).ambient_ramp(60.0, 600.0, 32.0)


def _calibration():
    # the Larkspur bell jar at base pressure; the pressure is then set step by step
    # (SetChamber.set_pressure), as `tcgauge calibrate` does on the simulator
    return SetChamber("calibration")


SCENARIOS = {
    "calibration": _calibration,
    "pumpdown": _pumpdown,
    "steps": _steps,
    "vent": _vent,
    "gas-change": _gas_change,
    "ambient-ramp": _ambient_ramp,
}


def get_scenario(name):
    """A new built-in Scenario by name; a Scenario passes through."""
    if isinstance(name, Scenario):
        return name
    try:
        return SCENARIOS[name]()
    except (KeyError, TypeError):
        raise ValueError("unknown scenario %r (known: %s)" % (name, ", ".join(sorted(SCENARIOS))))
