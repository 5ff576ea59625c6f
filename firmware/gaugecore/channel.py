"""One gauge channel: heater loop, sampling, conversion, faults, setpoints.

Pipeline, once per sample (`step(now_ms)` is called often and does what is
due; it never sleeps):

  heater tick    regulator.update, then FaultMonitor.check_heater; a fault
                 that demands it switches the heater off
  sampler        +I / -I readings averaged (gaugecore.sampler): pickup gone
  faults         check_adc, check_cj, check_emf, check_fresh
  compensation   ColdJunction.refer(emf_mv, t_cj_c): EMF referred to the
                 table's reference temperature (Table.ref_c); t_cj_c is the
                 junction sensor low-passed (cj_filter_ms, default 5 s)
  fast response  optional FastResponse (gaugecore.response) on that EMF
  conversion     Table.convert(emf_mv) -> (pressure_pa, state)
  setpoints      each Setpoint.update(pressure_pa, state, now_ms)

The latest reading is in the attributes `pressure_pa`, `state`, `fault`,
`emf_mv` (measured, pickup cancelled), `emf_ref_mv` (referred), `cj_c`,
`heater_ma`, `time_ms`, `seq`. A faulted channel has state "fault", the
fault's name in `fault` and `pressure_pa` None, never a number. During a
vacuum zero the state is "invalid" (the heater is switched off on purpose).

profile_limits: dict with "nominal_ma", "min_ma", "max_ma" (the tube's safe
heater range) and "zero_emf_mv" (nominal high-vacuum EMF).

Compensation modes. Default (table_wall_c None): the law of intermediate
temperatures to the table's ref_c, as the domain notes state it. That
treats the filament's absolute temperature as the measure of pressure. When
the junction sensor sits at the tube (its pins follow the wall) and the
table was made at a known wall temperature, `table_wall_c` selects the
wall-referred form: hot junction t1 = E^-1(E_meas + E(t_cj)), excess
t1 - t_cj carried to the table's wall: E(table_wall_c + t1 - t_cj) - E(ref_c).
On the simulated tube (tools/bench/ambient.py) the default form moves the
10 mTorr reading by -2.3 %/K of ambient, the wall-referred one by +1.2 %/K,
the uncompensated EMF by +1.1 %/K: what remains is the tube's own heat
balance (radiation and gas conduction depend on the wall temperature),
which no junction compensation removes.
"""

from gaugecore import states
from gaugecore.sampler import Sampler, REVERSE, OFF_WINDOW

HEATER_TICK_MS = 20
# The junction (tube pins / connector) changes temperature over minutes; its
# sensor's noise (hundredths of a degree, ~40 uV/K on type K) would otherwise
# dominate the EMF noise, so the compensation uses it low-passed.
CJ_FILTER_MS = 5000
CJ_ANCHOR_C = 0.05  # re-evaluate the reference function when t_cj moves this far


def _coldjunction(table):
    """The cold-junction compensator for a table's thermocouple and reference."""
    try:
        from gaugecore.coldjunction import ColdJunction
    except ImportError:  # image without the module: the same law, inline
        return _Referral(table.tc_type, table.ref_c)
    return ColdJunction(table.tc_type, table.ref_c)


class _Referral:
    """Law of intermediate temperatures: E(t, t_ref) = E_meas + E(t_cj) - E(t_ref)."""

    def __init__(self, tc_type, t_ref_c):
        from gaugecore import thermocouple

        self._tc = thermocouple
        self.tc_type = tc_type
        self._e_ref_mv = thermocouple.emf_mv(tc_type, t_ref_c)

    def refer(self, emf_meas_mv, t_cj_c):
        return emf_meas_mv + self._tc.emf_mv(self.tc_type, t_cj_c) - self._e_ref_mv


class HeaterPort:
    """What the sampler sees of the heater: polarity and off windows.

    Wraps the driver given to the regulator so that an off window can put
    back exactly the last command.
    """

    def __init__(self, driver):
        self._driver = driver
        self.last_ma = 0.0
        self.regulator = None
        self.blanked = False

    # driver interface, passed to the regulator
    def set_ma(self, ma):
        self.last_ma = ma
        if not self.blanked:
            self._driver.set_ma(ma)

    def read_ma(self):
        return self._driver.read_ma()

    def read_v(self):
        return self._driver.read_v()

    def off(self):
        self.last_ma = 0.0
        self._driver.off()

    def set_polarity(self, sign):
        self._driver.set_polarity(sign)

    # sampler interface
    def polarity(self, sign):
        self.regulator.set_polarity(sign)

    def blank(self, on):
        """Heater off for a read window (True), back to the last command (False)."""
        if on:
            self.blanked = True
            self._driver.off()  # off, not set_ma(0): a source's offset would still flow
        else:
            self.blanked = False
            if self.regulator.state != "off":
                self._driver.set_ma(self.last_ma)


class _SamplerHeater:
    """Adapter: sampler's set_polarity -> regulator.set_polarity."""

    def __init__(self, port):
        self._port = port

    def set_polarity(self, sign):
        self._port.polarity(sign)

    def blank(self, on):
        self._port.blank(on)


class Channel:
    """A gauge channel (see the module docstring for the pipeline)."""

    def __init__(
        self,
        index,
        tc,
        cj,
        heater_driver,
        relays,
        table,
        profile_limits,
        heater_ma=None,
        sample_period_ms=100,
        settle_ms=5,
        pairs=1,
        mode=REVERSE,
        average_n=1,
        fast=False,
        response=None,
        regulator=None,
        monitor=None,
        coldjunction=None,
        heater_tick_ms=HEATER_TICK_MS,
        cj_filter_ms=CJ_FILTER_MS,
        table_wall_c=None,
    ):
        for key in ("nominal_ma", "min_ma", "max_ma", "zero_emf_mv"):
            if key not in profile_limits:
                raise ValueError("profile limits lack %r" % key)
        self.index = index
        self.limits = profile_limits
        self.port = HeaterPort(heater_driver)
        if heater_ma is None:
            heater_ma = profile_limits["nominal_ma"]
        if regulator is None:
            from gaugecore.heater import HeaterRegulator

            regulator = HeaterRegulator(
                self.port, heater_ma, profile_limits["min_ma"], profile_limits["max_ma"]
            )
        self.regulator = regulator
        self.port.regulator = regulator
        if monitor is None:
            from gaugecore.faults import FaultMonitor

            monitor = FaultMonitor()
        self.monitor = monitor
        self.table = table
        if coldjunction is None:
            coldjunction = _coldjunction(table)
        self.coldjunction = coldjunction
        if response is None:
            from gaugecore.response import FastResponse

            response = FastResponse()
        self.response = response
        self.fast = bool(fast)
        # reverse mode: the sampler reverses through the regulator directly
        # (fewer calls per sample); off windows need the port's blanking too
        self.sampler = Sampler(
            tc,
            cj,
            regulator if mode == REVERSE else _SamplerHeater(self.port),
            period_ms=sample_period_ms,
            settle_ms=settle_ms,
            pairs=pairs,
            mode=mode,
            average_n=average_n,
        )
        self.relays = relays
        self.setpoints = []
        self.heater_tick_ms = heater_tick_ms
        if cj_filter_ms < 0:
            raise ValueError("cold-junction filter time must be >= 0 ms")
        self.cj_filter_ms = cj_filter_ms
        self.table_wall_c = table_wall_c
        self._cj_f = None  # filtered junction temperature
        self._cj_t0 = None  # anchor of the linearised E(t_cj)
        self._cj_e0 = 0.0
        self._cj_s = 0.0
        self.zero = None
        self.zero_result = None
        self._heater_due = None
        self._fault_stopped = False
        self._started = False
        self.pressure_pa = None
        self.state = states.INVALID
        self.fault = None
        self.emf_mv = 0.0
        self.emf_ref_mv = 0.0
        self.emf_use_mv = 0.0
        self.cj_c = None
        self.heater_ma = 0.0
        self.power_w = 0.0
        self.time_ms = 0
        self.seq = 0
        for r in relays:
            r.set(False)

    # ------------------------------------------------------------ configuration
    def add_setpoint(self, setpoint):
        """Attach a gaugecore.setpoint.Setpoint (it drives its own relay)."""
        self.setpoints.append(setpoint)

    def set_fast(self, on):
        """Switch the fast-response estimate on or off (history restarts)."""
        self.fast = bool(on)
        self.response.reset()

    def set_table(self, table):
        """Select another table (gas); it must be for the same thermocouple type."""
        if table.tc_type != self.table.tc_type:
            raise ValueError("table is for type %s, this channel is type %s" % (table.tc_type, self.table.tc_type))
        self.table = table
        self.coldjunction = _coldjunction(table)
        self._cj_t0 = None

    def apply_zero(self, result):
        """Use a stored ZeroResult: heater current and response parameters."""
        self.regulator.set_target(result.heater_ma)
        self.response.configure(
            result.c_e_j_per_mv,
            result.a2_w_per_mv2,
            self.response.filter_ms,
            self.response.max_gain,
            self.response.hold_ms,
            self.response.hold_band_mv,
        )
        self.response.reset()
        self.zero_result = result

    def start_zero(self, now_ms, **options):
        """Begin a vacuum zero (gaugecore.zero.VacuumZero); readings go invalid."""
        from gaugecore.zero import VacuumZero

        lim = self.limits
        z = VacuumZero(self.regulator, lim["zero_emf_mv"], lim["min_ma"], lim["max_ma"], **options)
        z.start(now_ms)
        self.zero = z
        return z

    def clear_faults(self):
        """Clear latched faults (FaultMonitor.clear) and restart a stopped heater."""
        self.monitor.clear()
        if self._fault_stopped and not self.monitor.heater_must_stop:
            self._fault_stopped = False
            self.regulator.start()

    # ------------------------------------------------------------ running
    def start(self, now_ms):
        """Heater on (soft start) and sampling from now."""
        self.regulator.start()
        self.sampler.start(now_ms)
        self._heater_due = now_ms
        self._started = True

    @property
    def next_ms(self):
        """Earliest time something is due (heater tick or sampler)."""
        a = self._heater_due
        b = self.sampler.next_ms
        if a is None:
            return b
        if b is None or a - b < 0:
            return a
        return b

    def step(self, now_ms):
        """Do whatever is due; True when a new reading was made."""
        if not self._started:
            self.start(now_ms)
        mon = self.monitor
        reg = self.regulator
        if now_ms - self._heater_due >= 0:
            self._heater_due += self.heater_tick_ms
            if now_ms - self._heater_due >= 0:
                self._heater_due = now_ms + self.heater_tick_ms
            if not self.port.blanked:
                reg.update(now_ms)
                v = reg.voltage_v
                if v is not None and v < 0.0:
                    v = -v  # read_v() is signed with the current; R = |V| / |I|
                mon.check_heater(reg.current_ma, reg.target_ma, v, reg.state, now_ms)
            if mon.heater_must_stop:
                if reg.state != "off":
                    reg.stop()
                    self._fault_stopped = True
            elif self._fault_stopped:
                self._fault_stopped = False
                reg.start()
        new = self.sampler.step(now_ms)
        if new:
            self._on_sample(now_ms)  # check_emf in there marks the data fresh
        else:
            mon.check_fresh(now_ms)
        if mon.active is not None and (self.state != states.FAULT or self.fault != mon.active):
            self._set_fault(now_ms)
            self._update_setpoints(now_ms)
        return new

    def _set_fault(self, now_ms):
        self.state = states.FAULT
        self.fault = self.monitor.active
        self.pressure_pa = None

    def _update_setpoints(self, now_ms):
        for sp in self.setpoints:
            sp.update(self.pressure_pa, self.state, now_ms, self.fault)

    def _on_sample(self, now_ms):
        s = self.sampler
        mon = self.monitor
        reg = self.regulator
        heater_on = reg.state != "off"
        mon.check_adc(s.adc_ok, now_ms, s.raw_uv if s.adc_ok else None)
        t_raw = s.cj_c
        mon.check_cj(t_raw, now_ms)  # the monitor judges the raw sensor
        emf_mv = s.emf_uv * 0.001
        if s.adc_ok:
            mon.check_emf(emf_mv, heater_on, now_ms)
        self.emf_mv = emf_mv
        if t_raw is None:
            self.cj_c = None
        else:
            f = self._cj_f
            tf = self.cj_filter_ms
            if f is None or tf <= 0:
                f = t_raw
            else:
                dt = self.sampler.period_ms
                f += (dt / (tf + dt)) * (t_raw - f)
            self._cj_f = f
            self.cj_c = f
        self.heater_ma = reg.current_ma if heater_on else 0.0
        v = reg.voltage_v
        self.power_w = self.heater_ma * abs(v) * 0.001 if v is not None else 0.0
        self.time_ms = now_ms
        self.seq += 1
        if mon.active is not None:
            self._set_fault(now_ms)
            self._update_setpoints(now_ms)
            return
        self.fault = None
        t_cj = self.cj_c
        if t_cj is None:
            self.state = states.INVALID
            self.pressure_pa = None
            self._update_setpoints(now_ms)
            return
        # ColdJunction.refer(emf, t) = emf + E(t) - E(t_ref): E(t) - E(t_ref) is
        # evaluated exactly at an anchor and followed linearly within
        # CJ_ANCHOR_C of it (the curvature of E leaves < 1e-4 uV there)
        t0 = self._cj_t0
        if t0 is None or t_cj - t0 > CJ_ANCHOR_C or t0 - t_cj > CJ_ANCHOR_C:
            cjc = self.coldjunction
            t0 = t_cj
            self._cj_e0 = cjc.refer(0.0, t0)
            self._cj_s = (cjc.refer(0.0, t0 + CJ_ANCHOR_C) - cjc.refer(0.0, t0 - CJ_ANCHOR_C)) / (
                2.0 * CJ_ANCHOR_C
            )
            self._cj_t0 = t0
        if self.table_wall_c is None:
            emf_ref = emf_mv + self._cj_e0 + self._cj_s * (t_cj - t0)
        else:
            # wall-referred: the junction sensor sits at the tube's pins, at the
            # wall temperature; the filament's excess over the wall is what the
            # pressure sets, so carry that excess to the table's wall
            cjc = self.coldjunction
            t1 = cjc.hot_junction_c(emf_mv, t_cj)
            emf_ref = cjc.refer(0.0, self.table_wall_c + (t1 - t_cj))
        self.emf_ref_mv = emf_ref
        z = self.zero
        if z is not None:
            if z.on_sample(now_ms, emf_ref, self.power_w, emf_mv):
                self.state = states.INVALID
                self.pressure_pa = None
                self._update_setpoints(now_ms)
                return
            self.zero = None
            if z.result is not None:
                self.apply_zero(z.result)
            elif reg.state == "off":
                reg.start()
            self.sampler.reset_average()
        if self.fast:
            # the heat balance works on the EMF against the wall (cold junction)
            eq = self.response.update(emf_mv, self.power_w, now_ms)
            emf_use = emf_ref + (eq - emf_mv)
        else:
            emf_use = emf_ref
        self.emf_use_mv = emf_use
        self.pressure_pa, self.state = self.table.convert(emf_use)
        self._update_setpoints(now_ms)

    def reading(self):
        """(pressure_pa, state, emf_mv, cj_c, heater_ma, time_ms); allocates a tuple."""
        if self.state == states.FAULT:
            return (None, self.state, self.emf_mv, self.cj_c, self.heater_ma, self.time_ms)
        return (self.pressure_pa, self.state, self.emf_mv, self.cj_c, self.heater_ma, self.time_ms)
