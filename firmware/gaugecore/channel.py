"""One gauge channel: heater loop, sampling, conversion, faults, setpoints.

Pipeline, once per sample (`step(now_ms)` is called often and does what is
due; it never sleeps):

  heater tick    regulator.update, then FaultMonitor.check_heater; a fault
                 that demands it switches the heater off
  sampler        +I / -I readings averaged (gaugecore.sampler): pickup gone
  faults         check_adc, check_cj, check_emf, check_fresh
  compensation   RiseReferral.refer(emf_mv, t_cj_c): the table's EMF for the
                 filament's rise above the wall, carried to the table's wall
                 and reference temperatures (below); t_cj_c is the
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

Compensation (`compensation`). Default RISE: gaugecore.coldjunction.
RiseReferral. A thermocouple gauge measures the filament's rise above its
envelope, and the cold junction (the tube pins) sits at about the wall
temperature, so t_cj stands for the wall: filament T1 = E^-1(E_meas +
E(t_cj)), rise dT = T1 - t_cj, corrected for the wall's effect on the heat
balance with the table's per-point slope k = d ln(dT)/d T_wall,
dT_ref = dT exp(-k (t_cj - t_wall_table)), then the table's EMF
E(t_wall_table + dT_ref) - E(ref_c) (derivation in gaugecore.coldjunction).
A table without slopes gets plain wall referral to its wall temperature; a
version-1 table without a wall temperature gets plain wall referral to
coldjunction.ASSUMED_WALL_C (22 C); `compensation_note` then says so (the
device puts it in its error queue at boot). `table_wall_c` overrides the
table's wall temperature. ITS90: the law of intermediate temperatures to the
table's ref_c alone, kept for comparison: it adds the junction's own EMF
change to a sensor that measures a rise above the wall, so it moves the
reading the wrong way (tools/bench/ambient.py, 10 mTorr on the simulated
tube: -2.3 %/K, against +1.1 %/K uncompensated and +0.06 %/K with RISE, most
of which is the electronics' own drift: -0.01 %/K with it switched off).
"""

from gaugecore import states
from gaugecore.sampler import Sampler, REVERSE, OFF_WINDOW

HEATER_TICK_MS = 20
# The junction (tube pins / connector) changes temperature over minutes; its
# sensor's noise (hundredths of a degree, ~40 uV/K on type K) would otherwise
# dominate the EMF noise, so the compensation uses it low-passed.
CJ_FILTER_MS = 5000
CJ_ANCHOR_C = 0.05  # re-evaluate the reference function when t_cj moves this far
_CJ_LO = -CJ_ANCHOR_C
RISE = "rise"  # compensation modes (module docstring)
ITS90 = "its90"


def _coldjunction(table):
    """The cold-junction compensator for a table's thermocouple and reference."""
    try:
        from gaugecore.coldjunction import ColdJunction
    except ImportError:  # image without the module: the same law, inline
        return _Referral(table.tc_type, table.ref_c)
    return ColdJunction(table.tc_type, table.ref_c)


def _rise_referral(table, wall_c):
    """(RiseReferral or None, note) for a table."""
    try:
        from gaugecore.coldjunction import RiseReferral
    except ImportError:
        return None, "no rise referral in this image: ITS-90 referral to the table's ref_c"
    r = RiseReferral(table, wall_c)
    return r, r.note


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

    In off-window mode the regulator drives the heater through this port, so
    that an off window can put back exactly the last command; in the other
    modes the regulator drives the driver itself (the port then only passes
    calls through, for code that holds `channel.port`).
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
        compensation=RISE,
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

            # the port is needed only to put the command back after an off
            # window; otherwise the regulator drives the driver itself (two
            # calls less per tick and per reversal, the same driver calls)
            regulator = HeaterRegulator(
                self.port if mode == OFF_WINDOW else heater_driver,
                heater_ma, profile_limits["min_ma"], profile_limits["max_ma"]
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
        if compensation != RISE and compensation != ITS90:
            raise ValueError("compensation must be %r or %r" % (RISE, ITS90))
        self.compensation = compensation
        self.table_wall_c = table_wall_c
        self._set_referral(table)
        self._cj_f = None  # filtered junction temperature
        self._cj_a = 0.0  # its factor dt / (tf + dt), for these dt and tf
        self._cj_dt = None
        self._cj_tf = None
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
        self._set_referral(table)
        self._cj_t0 = None

    def _set_referral(self, table):
        self.referral = None
        self.compensation_note = None
        if self.compensation == RISE:
            self.referral, self.compensation_note = _rise_referral(table, self.table_wall_c)

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
        b = self.sampler.due_ms
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
        h = self._heater_due
        if now_ms - h >= 0:
            reg = self.regulator
            h += self.heater_tick_ms
            if now_ms - h >= 0:
                h = now_ms + self.heater_tick_ms
            self._heater_due = h
            if not self.port.blanked:
                reg.update(now_ms)
                # voltage_v is signed with the current: check_heater takes |V|
                mon.check_heater(reg.current_ma, reg.target_ma, reg.voltage_v, reg.state, now_ms)
            if mon.heater_must_stop:
                if reg.state != "off":
                    reg.stop()
                    self._fault_stopped = True
            elif self._fault_stopped:
                self._fault_stopped = False
                reg.start()
        s = self.sampler
        # the sampler was started with the channel, so its due_ms is never None here
        if now_ms - s.due_ms >= 0 and s.step(now_ms):
            new = True
            self._on_sample(now_ms)  # check_emf in there marks the data fresh
        else:
            new = False
            f = mon.fresh_ms  # check_fresh only acts when unset or overdue
            if f is None or now_ms - f > mon.stale_ms:
                mon.check_fresh(now_ms)
        a = mon.active
        if a is not None and (self.state != states.FAULT or self.fault != a):
            self._set_fault(now_ms)
            self._update_setpoints(now_ms)
        return new

    def _set_fault(self, now_ms):
        self.state = states.FAULT
        self.fault = self.monitor.active
        self.pressure_pa = None

    def _update_setpoints(self, now_ms):
        p = self.pressure_pa
        st = self.state
        f = self.fault
        for sp in self.setpoints:
            sp.update(p, st, now_ms, f)

    def _on_sample(self, now_ms):
        # per sample: attributes read once into locals (a lookup costs about
        # as much as the arithmetic under MicroPython); the operations and
        # their order are those of the plain form
        s = self.sampler
        mon = self.monitor
        reg = self.regulator
        heater_on = reg.state != "off"
        adc_ok = s.adc_ok
        mon.check_adc(adc_ok, now_ms, s.raw_uv if adc_ok else None)
        t_raw = s.cj_c
        mon.check_cj(t_raw, now_ms)  # the monitor judges the raw sensor
        emf_mv = s.emf_uv * 0.001
        if adc_ok:
            mon.check_emf(emf_mv, heater_on, now_ms)
        self.emf_mv = emf_mv
        if t_raw is None:
            t_cj = None
        else:
            t_cj = self._cj_f
            tf = self.cj_filter_ms
            if t_cj is None or tf <= 0:
                t_cj = t_raw
            else:
                dt = s.period_ms
                if dt != self._cj_dt or tf != self._cj_tf:
                    # the filter factor, computed again only when a time changes
                    self._cj_a = dt / (tf + dt)
                    self._cj_dt = dt
                    self._cj_tf = tf
                t_cj += self._cj_a * (t_raw - t_cj)
            self._cj_f = t_cj
        self.cj_c = t_cj
        heater_ma = reg.current_ma if heater_on else 0.0
        self.heater_ma = heater_ma
        v = reg.voltage_v
        power_w = heater_ma * abs(v) * 0.001 if v is not None else 0.0
        self.power_w = power_w
        self.time_ms = now_ms
        self.seq += 1
        if mon.active is not None:
            self._set_fault(now_ms)
            self._update_setpoints(now_ms)
            return
        self.fault = None
        if t_cj is None:
            self.state = states.INVALID
            self.pressure_pa = None
            self._update_setpoints(now_ms)
            return
        # ColdJunction.refer(emf, t) = emf + E(t) - E(t_ref): E(t) - E(t_ref) is
        # evaluated exactly at an anchor and followed linearly within
        # CJ_ANCHOR_C of it (the curvature of E leaves < 1e-4 uV there);
        # t0 - t_cj > A is -(t_cj - t0) > A, i.e. t_cj - t0 < -A, exactly
        t0 = self._cj_t0
        if t0 is not None:
            d = t_cj - t0
        if t0 is None or d > CJ_ANCHOR_C or d < _CJ_LO:
            cjc = self.coldjunction
            t0 = t_cj
            self._cj_e0 = cjc.refer(0.0, t0)
            self._cj_s = (cjc.refer(0.0, t0 + CJ_ANCHOR_C) - cjc.refer(0.0, t0 - CJ_ANCHOR_C)) / (
                2.0 * CJ_ANCHOR_C
            )
            self._cj_t0 = t0
            d = t_cj - t0
        # E(t_cj) - E(ref_c), linear about the anchor
        e_cj_rel = self._cj_e0 + self._cj_s * d
        rr = self.referral
        if rr is None:
            emf_ref = emf_mv + e_cj_rel
        else:
            # rise referral: the junction sensor sits at the tube's pins, at the
            # wall temperature (module docstring)
            emf_ref = rr.refer(emf_mv, t_cj, e_cj_rel + rr.emf_ref_mv)
        self.emf_ref_mv = emf_ref
        z = self.zero
        if z is not None:
            if z.on_sample(now_ms, emf_ref, power_w, emf_mv):
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
            eq = self.response.update(emf_mv, power_w, now_ms)
            emf_use = emf_ref + (eq - emf_mv)
        else:
            emf_use = emf_ref
        self.emf_use_mv = emf_use
        p, st = self.table.convert(emf_use)
        self.pressure_pa = p
        self.state = st
        for sp in self.setpoints:  # _update_setpoints, inline on the usual path
            sp.update(p, st, now_ms, None)

    def reading(self):
        """(pressure_pa, state, emf_mv, cj_c, heater_ma, time_ms); allocates a tuple."""
        if self.state == states.FAULT:
            return (None, self.state, self.emf_mv, self.cj_c, self.heater_ma, self.time_ms)
        return (self.pressure_pa, self.state, self.emf_mv, self.cj_c, self.heater_ma, self.time_ms)
