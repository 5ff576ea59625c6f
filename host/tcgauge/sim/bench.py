"""The Bench: simulated hardware for the core, assembled from the tube
physics, the electronics, a chamber scenario and injected faults.

    bench = Bench("wren-demo", scenario="pumpdown", seed=0, channels=2)
    ch = bench.channels[0]
    ch.heater.set_ma(165.0); bench.clock.sleep_ms(5000); ch.tc.read_uv()

Each channel has `.tc` (SimAdc), `.cj` (SimColdJunction), `.heater`
(SimCurrentSource) and `.relays` (two SimRelay), the objects of
DEVELOPERS.md "Interfaces the core sees"; `bench.clock` is the clock.

Time: one SimClock (integer microseconds). Sleeping only moves the clock; a
channel's physics catches up lazily whenever one of its devices is read or
commanded (`Channel.sync`). Catching up walks the scheduled events (faults,
gas changes) in time order, and between them steps the physics at two time
scales: the current source's sub-millisecond settling is integrated exactly
(first-order exponential, with the exact mean of I^2 handed to the tube),
the tube's heat balance (time constant of seconds) in steps of at most
`max_step_s` and at least `min_step_s` (shorter catch-ups accumulate the
heating, the tube state then lags the clock by under 2 ms), with the
scenario's pressure and ambient at mid-step.
Everything random comes from generators seeded from (seed, channel,
device): the same seed gives the same trace.
"""

import heapq

from tcgauge.sim import chamber, faults
from tcgauge.sim.clock import SimClock
from tcgauge.sim.electronics import SimAdc, SimColdJunction, SimCurrentSource, SimRelay
from tcgauge.sim.gas import get_gas
from tcgauge.sim.profile import load_profile
from tcgauge.sim.tube import Tube

# Longest tube step (s) while catching up: pressure and ambient are sampled
# once per step, so this bounds how coarsely a fast pump-down is followed.
MAX_STEP_S = 0.05
# Shortest tube step (s): catch-ups shorter than this (a current read of
# 0.1 ms, say) only advance the electronics and accumulate heating; the tube
# then lags the clock by less than this (the Wren tube's time constant runs
# from 0.17 s in H2 at atmosphere to 11 s at high vacuum: tau_s()).
MIN_STEP_S = 0.002


class Channel:
    """One gauge channel: tube, heater source, TC ADC, cold junction, two relays."""

    def __init__(self, clock, index, profile, scenario, seed, adc=None, heater=None, cj=None,
                 max_step_s=MAX_STEP_S, min_step_s=MIN_STEP_S):
        self.clock = clock
        self.index = index
        self.profile = profile
        self.scenario = scenario
        self.max_step_us = int(round(max_step_s * 1e6))
        self.min_step_us = int(round(min_step_s * 1e6))
        self._t_us = clock.ticks_us()  # physics time: electronics are here
        self._pending_us = 0  # the tube lags by this much (< min_step_us)
        self._pending_i2us = 0.0  # integral of I^2 dt over the pending time (A^2 us)
        t_s = self._t_us * 1e-6
        self._gas_name = scenario.gas(t_s)
        self.tube = Tube(profile, get_gas(self._gas_name), t_wall_c=scenario.ambient_c(t_s))
        tag = "tcgauge-sim:%r:ch%d:" % (seed, index)
        self.tc = SimAdc(clock, self._input_uv, rng=tag + "adc", board_c=self._ambient_now,
                         sync=self.sync, **(adc or {}))
        self.heater = SimCurrentSource(clock, self.tube.heater_resistance_ohm, rng=tag + "heater",
                                       ambient_c=self._ambient_now, sync=self.sync, **(heater or {}))
        self.cj = SimColdJunction(clock, scenario.ambient_c, rng=tag + "cj", sync=self.sync, **(cj or {}))
        self.relays = [SimRelay(clock, "ch%d-relay%d" % (index, k)) for k in (1, 2)]
        self.active_faults = {}  # name -> params
        self._events = []  # heap of (t_us, seq, kind, payload)
        self._seq = 0
        for t_e, gas in scenario.gas_events:
            get_gas(gas)  # an unknown gas fails here, not in the middle of a run
            if t_e > t_s:
                self._push(int(round(t_e * 1e6)), "gas", gas)
        for ev in scenario.fault_events:
            if ev.channel == index:
                self.schedule_fault(ev.name, ev.at_s, ev.clear_at_s, **ev.params)

    # --- events
    def _push(self, t_us, kind, payload):
        heapq.heappush(self._events, (t_us, self._seq, kind, payload))
        self._seq += 1

    def schedule_fault(self, name, at_s, clear_at_s=None, **params):
        """Apply fault `name` at at_s (and clear it at clear_at_s, if given)."""
        faults.check_params(name, params)
        at_us = int(round(at_s * 1e6))
        if at_us < self.clock.ticks_us():
            raise ValueError("bench: cannot schedule %s at %.6f s, the clock is at %.6f s"
                             % (name, at_s, self.clock.time_s))
        self._push(at_us, "fault", (name, params))
        if clear_at_s is not None:
            self.schedule_clear(name, clear_at_s)

    def schedule_clear(self, name, at_s):
        """Clear fault `name` at at_s."""
        faults.check_name(name)
        at_us = int(round(at_s * 1e6))
        if at_us < self.clock.ticks_us():
            raise ValueError("bench: cannot clear %s at %.6f s, the clock is at %.6f s"
                             % (name, at_s, self.clock.time_s))
        self._push(at_us, "clear", name)

    def _fire(self, kind, payload):
        if kind == "gas":
            self._flush_tube()
            self._gas_name = payload
            self.tube.set_gas(get_gas(payload))
        elif kind == "fault":
            name, params = payload
            faults.apply(self, name, **params)
            self.active_faults[name] = params
        elif kind == "clear":
            faults.clear(self, payload)
            self.active_faults.pop(payload, None)

    # --- physics
    def sync(self):
        """Advance this channel's physics (and due events) to the clock's time."""
        now = self.clock._t_us
        events = self._events
        while events and events[0][0] <= now:
            t_e, _, kind, payload = heapq.heappop(events)
            self._advance_to(t_e)
            self._fire(kind, payload)
        self._advance_to(now)

    def _advance_to(self, t_us):
        heater = self.heater
        while self._t_us < t_us:
            step_us = t_us - self._t_us
            if step_us > self.max_step_us:
                step_us = self.max_step_us
            i_rms_a = heater.advance(step_us * 1e-6)
            self._pending_us += step_us
            self._pending_i2us += i_rms_a * i_rms_a * step_us
            self._t_us += step_us
            if self._pending_us >= self.min_step_us:
                self._flush_tube()

    def _flush_tube(self):
        """Step the tube over the time accumulated since its last step, with
        the rms heater current of that time."""
        dt_us = self._pending_us
        if dt_us <= 0:
            return
        i_a = (self._pending_i2us / dt_us) ** 0.5
        mid_s = (self._t_us - 0.5 * dt_us) * 1e-6
        sc = self.scenario
        self.tube.advance(dt_us * 1e-6, i_a, sc.pressure_pa(mid_s), sc.ambient_c(mid_s))
        self._pending_us = 0
        self._pending_i2us = 0.0

    def _ambient_now(self):
        return self.scenario.ambient_c(self._t_us * 1e-6)

    def _input_uv(self):
        """True ADC input now: thermocouple EMF (reference junction at the
        connector, at ambient) plus the heater pickup, microvolts."""
        emf_mv = self.tube.emf_mv(self._ambient_now())
        return (emf_mv + self.tube.pickup_mv(self.heater.filament_current_a())) * 1000.0

    # --- truth, for tests and comparisons (never seen by the core)
    @property
    def gas_name(self):
        self.sync()
        return self._gas_name

    def true_emf_mv(self):
        """Thermocouple EMF now without pickup or electronics errors."""
        self.sync()
        return self.tube.emf_mv(self._ambient_now())

    def true_filament_c(self):
        self.sync()
        return self.tube.filament_c

    def true_current_ma(self):
        """True current through the filament, mA (signed)."""
        self.sync()
        return self.heater.filament_current_a() * 1e3


class Bench:
    """Simulated gauge hardware: `channels` channels on one clock, one seed.

    scenario: None (a static chamber at atmosphere in N2, 22 C), a built-in
    name (tcgauge.sim.chamber.SCENARIOS), a Scenario, or a list of those,
    one per channel. adc / heater / cj: keyword overrides for the device
    constructors (electronics.py), the same for every channel.
    """

    def __init__(self, profile="wren-demo", scenario=None, seed=0, channels=2,
                 adc=None, heater=None, cj=None, max_step_s=MAX_STEP_S, min_step_s=MIN_STEP_S):
        if not isinstance(channels, int) or channels < 1:
            raise ValueError("bench: channels must be an integer >= 1, not %r" % (channels,))
        self.profile = load_profile(profile)
        self.seed = seed
        self.clock = SimClock()
        if isinstance(scenario, (list, tuple)):
            if len(scenario) != channels:
                raise ValueError("bench: %d scenarios for %d channels" % (len(scenario), channels))
            scenarios = [self._scenario(s) for s in scenario]
        else:
            one = self._scenario(scenario)
            scenarios = [one] * channels
        for i, sc in enumerate(scenarios):
            for ev in sc.fault_events:
                if not 0 <= ev.channel < channels:
                    raise ValueError("bench: scenario fault %s names channel %d of %d"
                                     % (ev.name, ev.channel, channels))
        self.scenarios = scenarios
        self.channels = [Channel(self.clock, i, self.profile, scenarios[i], seed, adc, heater, cj,
                                 max_step_s, min_step_s)
                         for i in range(channels)]

    @staticmethod
    def _scenario(s):
        if s is None:
            return chamber.static()
        return chamber.get_scenario(s)

    @property
    def time_s(self):
        """Simulated seconds since start."""
        return self.clock.time_s

    def sync(self):
        """Bring every channel's physics up to the clock."""
        for ch in self.channels:
            ch.sync()

    def run_s(self, seconds):
        """Let `seconds` of simulated time pass (devices left as they are)."""
        self.clock.sleep(seconds)
        self.sync()

    def true_pressure_pa(self, i=0):
        """True pressure at channel i's tube now (Pa)."""
        return self.scenarios[i].pressure_pa(self.time_s)

    def true_gas(self, i=0):
        """Name of the gas at channel i's tube now."""
        return self.channels[i].gas_name

    def inject(self, fault, channel=0, at_s=None, clear_at_s=None, **params):
        """Inject `fault` (a name of tcgauge.sim.faults.FAULTS) on `channel` at at_s
        (default: now), cleared at clear_at_s if given."""
        self.channels[channel].schedule_fault(fault, self.time_s if at_s is None else at_s,
                                              clear_at_s, **params)

    def clear(self, fault, channel=0, at_s=None):
        """Clear `fault` on `channel` at at_s (default: now)."""
        self.channels[channel].schedule_clear(fault, self.time_s if at_s is None else at_s)
