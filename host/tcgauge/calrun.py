"""The guided calibration of one channel over the protocol (`tcgauge calibrate`).

Steps (`run`), after ISO 3567:2011 (direct comparison with a reference gauge):

a. base pressure: the reference is read at base pressure, the device's
   vacuum zero runs (`CALibrate:ZERO`) and is waited for; a refusal ends the
   run with the device's reason; the reference is read at base again (the
   difference is the base-pressure drift of the budget);
b. for each pressure: the chamber is set (`Chamber.set`: a person asked
   "set the chamber to about X Pa (Y Torr), press Enter", or the simulator's
   SetChamber stepped), then pairs of device EMF and reference pressure are
   collected until both are stable (tcgauge.calibrate.collect_point), with a
   progress callback;
c. the pairs are fitted to a table (calibrate.fit_table) with the heater
   current the zero left, the channel's profile, thermocouple type and
   reference temperature;
d. the uncertainty is evaluated (calibrate.evaluate), with correction
   factors against the table the channel used before;
e. the table file and the report are written (calreport.write_report);
f. optionally the table is pushed and the channel switched to it
   (tcgauge.transfer.push).

EMF: `MEASure:EMF?` returns the measured thermocouple EMF (pickup cancelled,
not referred) and `MEASure:JUNCtion?` the channel's low-passed junction
temperature; `DeviceEmf` refers the EMF exactly as the channel will for the
new table (gaugecore.coldjunction.RiseReferral without rise slopes: plain
wall referral to the wall temperature the table states, which is the
junction temperature when the points begin; the law of intermediate
temperatures to ref_c in an image without rise referral), so the fitted
table and the channel agree.

Time: `Clock` gives now() and wait(s). On hardware that is the wall clock;
on an in-process virtual device (`sim_hooks`) it is the simulated clock, so
a run at high simulation speed takes seconds.
"""

import logging
import time
import types

from gaugecore import tablefile, units
from tcgauge import calibrate as cal
from tcgauge.errors import TcgaugeError

log = logging.getLogger(__name__)

ZERO_TIMEOUT_S = 1200.0  # a vacuum zero of the Wren tube takes a few minutes (simulated)
ZERO_POLL_S = 2.0
ZERO_RETRY_S = 15.0  # a zero refused because the EMF still rises is tried again after this
EMF_RESOLUTION_MV = 1e-5  # NR3 replies: 7 significant digits of a 1..15 mV EMF


class Clock:
    """now() -> s and wait(s); default: the wall clock."""

    def __init__(self, now=time.monotonic, sleep=time.sleep):
        self.now = now
        self.wait = sleep


def table_referral(table):
    """refer(emf_meas_mv, t_cj_c) -> the EMF a channel converts with `table`.

    `table` needs tc_type, ref_c, wall_c and rise_slope_per_k (a Table, or
    a stand-in for a table still to be made). The channel's own code:
    gaugecore.coldjunction.RiseReferral, or the law of intermediate
    temperatures (ColdJunction) in an image without it.
    """
    try:
        from gaugecore.coldjunction import RiseReferral
    except ImportError:
        RiseReferral = None
    if RiseReferral is not None:
        return RiseReferral(table).refer
    from gaugecore.coldjunction import ColdJunction

    return ColdJunction(table.tc_type, table.ref_c).refer


def new_table_referral(tc_type, ref_c, wall_c):
    """The referral of a calibrated table (no tube model, so no rise slopes) made at wall_c."""
    return table_referral(types.SimpleNamespace(tc_type=tc_type, ref_c=ref_c, wall_c=wall_c,
                                                rise_slope_per_k=None))


class DeviceEmf:
    """read() -> the channel's EMF referred by `refer` (module docstring)."""

    def __init__(self, client, ch, refer):
        self.client = client
        self.ch = ch
        self._refer = refer

    def __call__(self):
        from tcgauge.transfer import call

        # one line, so both come from the same sample (and one round trip)
        e_text, t_text = call(self.client, "MEAS:EMF? (@%d);JUNC? (@%d)" % (self.ch, self.ch), 2)
        emf = None if e_text.strip() == "NAN" else float(e_text)
        t_cj = None if t_text.strip() == "NAN" else float(t_text)
        if emf is None or t_cj is None:
            raise cal.CalibrationError("channel %d gives no EMF (fault %s)"
                                       % (self.ch, self.client.fault(self.ch) or "none"))
        value = self._refer(emf, t_cj)
        if value != value:
            raise cal.CalibrationError("channel %d: EMF %.6g mV at %.3g C cannot be referred"
                                       % (self.ch, emf, t_cj))
        return value


class Chamber:
    """Sets the chamber pressure: asks a person through ask(prompt)."""

    def __init__(self, ask=input, unit="TORR"):
        self.ask = ask
        self.unit = unit

    def set(self, pressure_pa):
        self.ask("set the chamber to about %.3g Pa (%.3g %s), press Enter: "
                 % (pressure_pa, units.from_pa(pressure_pa, self.unit), self.unit.lower()))


class SimChamber:
    """Steps an in-process virtual device's SetChamber scenario (tcgauge.sim.chamber)."""

    def __init__(self, device, ch):
        sc = device.bench.scenarios[ch - 1]
        if not hasattr(sc, "set_pressure"):
            raise TcgaugeError("the simulator's scenario %r cannot be set: open sim://?scenario=calibration"
                               % sc.name)
        self.device = device
        self.scenario = sc

    def set(self, pressure_pa):
        self.scenario.set_pressure(pressure_pa, self.device.bench.time_s)


def sim_device(port):
    """The in-process VirtualDevice behind a sim:// port, or None."""
    dev = getattr(port, "device", None)
    return dev if dev is not None and hasattr(dev, "bench") else None


def sim_clock(device, link=None, poll_s=0.002):
    """Clock on the simulated time of `device`; waiting drains the link's input."""

    def now():
        return device.bench.time_s

    def wait(seconds):
        end = device.bench.time_s + seconds
        while device.bench.time_s < end:
            time.sleep(poll_s)
            if link is not None and getattr(link.port, "in_waiting", 0):
                link.poll()  # only then: Link.poll waits a read timeout on a quiet port

    return Clock(now, wait)


def _reason(message):
    head, sep, tail = message.partition(";")
    return tail if sep else head


def run_zero(client, ch, clock, timeout_s=ZERO_TIMEOUT_S, progress=None):
    """Start the vacuum zero of channel ch and wait for it -> zero offset in mV.

    The readings are invalid while it runs; it is over when three polls in a
    row are not. A refusal arrives in the error queue and is raised as
    CalibrationError with the device's reason, except a refusal because the
    EMF is still rising (the tube warming up, or the chamber not yet at
    base): that one is waited out, as a practitioner would, and the zero
    started again every ZERO_RETRY_S until timeout_s.
    """
    from tcgauge.client import DeviceError

    t0 = clock.now()
    while True:
        try:
            client.zero(ch)
            done = 0
            while done < 3:
                clock.wait(ZERO_POLL_S)
                state = client.pressure(ch).state
                done = done + 1 if state != "invalid" else 0
                if progress is not None:
                    progress({"step": "zero", "t_s": clock.now() - t0, "state": state})
                if clock.now() - t0 > timeout_s:
                    raise cal.CalibrationError("vacuum zero did not finish within %g s" % timeout_s)
            return client.zero_mv(ch)
        except DeviceError as exc:
            reason = _reason(exc.message)
            if "still rising" not in reason or clock.now() - t0 > timeout_s:
                raise cal.CalibrationError("vacuum zero refused: %s" % reason)
        if progress is not None:
            progress({"step": "zero", "t_s": clock.now() - t0, "state": "waiting",
                      "text": "waiting for the tube to settle at base: %s" % reason})
        clock.wait(ZERO_RETRY_S)


def read_base(reference, clock, n=5, interval_s=1.0):
    """Mean of n reference readings at base pressure (Pa)."""
    xs = []
    for _ in range(n):
        xs.append(reference.read_pa())
        clock.wait(interval_s)
    return sum(xs) / len(xs)


def previous_table(client, ch):
    """The Table channel ch converts with now (pulled from the device), or None."""
    from tcgauge import transfer

    try:
        return tablefile.loads(transfer.pull(client, client.table(ch)))
    except TcgaugeError as exc:
        log.warning("previous table not available: %s", exc)
        return None


def run(client, ch, gas, points_pa, reference, chamber, clock, folder, traceability, settle_s=0.0,
        progress=None, push=False, name=None, zero=True, collect_kw=None, info=None,
        reproducibility_rel=None, earlier=None):
    """The guided calibration (module docstring) -> namespace with cal, paths, zero_mv, push.

    points_pa: pressures to calibrate at, in the order they are set.
    collect_kw: keyword arguments for calibrate.collect_point (interval_s,
    window_s, timeout_s, floors). progress(dict) gets every step's news.
    reproducibility_rel: stated relative standard deviation of repeated
    calibrations; earlier: instead, Tables of earlier calibrations of this tube
    in this gas, from which with this run's table it is computed
    (calibrate.reproducibility_from). Neither: the budget says it lacks the term.
    """
    if reproducibility_rel is not None and earlier:
        raise cal.CalibrationError("give the reproducibility or the earlier calibrations, not both")
    cal.check_reproducibility(reproducibility_rel)  # before the run, not after it
    for t in earlier or ():
        if t.gas != gas:
            raise cal.CalibrationError("an earlier calibration is for %s, this one for %s" % (t.gas, gas))
    if not traceability:
        raise cal.CalibrationError("the report needs the reference's traceability statement")
    if len(points_pa) < 4:
        raise cal.CalibrationError("a table needs at least 4 calibration points, %d given" % len(points_pa))
    say = progress or (lambda d: None)
    old = previous_table(client, ch)
    if old is None:
        raise cal.CalibrationError("channel %d: its present table cannot be read" % ch)
    say({"step": "base", "text": "reading the reference at base pressure"})
    base_pa = read_base(reference, clock)
    zero_mv = None
    if zero:
        say({"step": "zero", "text": "vacuum zero running"})
        zero_mv = run_zero(client, ch, clock, progress=say)
    base2_pa = read_base(reference, clock)
    heater_ma = client.heater_target_ma(ch)
    t_cj = client.junction_c(ch)
    if t_cj is None:
        raise cal.CalibrationError("channel %d gives no junction temperature (fault %s)"
                                   % (ch, client.fault(ch) or "none"))
    wall_c = round(t_cj, 2)  # the wall (pins) temperature the new table is made at
    read_emf = DeviceEmf(client, ch, new_table_referral(old.tc_type, old.ref_c, wall_c))
    pts = []
    for k, p in enumerate(points_pa):
        say({"step": "set", "point": k, "of": len(points_pa), "p_set_pa": p})
        chamber.set(p)
        if settle_s > 0.0:
            clock.wait(settle_s)

        def point_progress(d, k=k, p=p):
            d = dict(d, step="point", point=k, of=len(points_pa), p_set_pa=p)
            say(d)

        pt = cal.collect_point(read_emf, reference, clock.wait, point_progress, now=clock.now,
                               **(collect_kw or {}))
        say({"step": "taken", "point": k, "of": len(points_pa), "p_ref_pa": pt.p_ref_pa,
             "emf_mv": pt.emf_mv, "n": len(pt.emf_readings_mv)})
        pts.append(pt)
    source = ("calibrated by direct comparison with %s (tcgauge calibrate), channel %d, heater %.6g mA"
              % (reference.name, ch, heater_ma))
    fit = cal.fit_table(pts, gas, old.profile, heater_ma, old.ref_c, old.tc_type, source,
                        invalid_margin=old.invalid_margin, noise_mv=old.noise_mv, wall_c=wall_c)
    if getattr(fit.table, "wall_c", wall_c) != wall_c:
        raise cal.CalibrationError("the fitted table lost its wall temperature %.2f C" % wall_c)
    repro_note = None
    if earlier:
        reproducibility_rel = cal.reproducibility_from([fit.table] + list(earlier), [p.emf_mv for p in fit.points])
        repro_note = ("reproducibility %.3g %% (relative standard deviation of %d calibrations: this one and "
                      "%d earlier)" % (100.0 * reproducibility_rel, len(earlier) + 1, len(earlier)))
    elif reproducibility_rel is not None:
        repro_note = "reproducibility %.3g %% as stated by the operator" % (100.0 * reproducibility_rel)
    result = cal.evaluate(fit, reference, base_pa=base_pa, base_drift_pa=abs(base2_pa - base_pa),
                          emf_resolution_mv=EMF_RESOLUTION_MV,
                          previous=old if old.gas == gas else None, reproducibility_rel=reproducibility_rel)
    if repro_note:
        result.notes.append(repro_note)
    from tcgauge.calreport import write_report

    report_info = dict(info or {}, traceability=traceability, gas=gas, tube=old.profile)
    paths = write_report(result, folder, report_info)
    pushed = None
    if push:
        from tcgauge import transfer

        pushed = transfer.push(client, paths["table"], channel=ch,
                               name=name or transfer.device_name("cal_%s" % gas))
    return types.SimpleNamespace(cal=result, paths=paths, zero_mv=zero_mv, push=pushed,
                                 base_pa=base_pa, heater_ma=heater_ma, wall_c=wall_c)
