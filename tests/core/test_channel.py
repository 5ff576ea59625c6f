"""Channel pipeline on fake hardware: conversion, compensation, faults, setpoints."""

import math
import os
import sys

import pytest
import thermocouples

from gaugecore import faults, states
from gaugecore.channel import Channel
from gaugecore.setpoint import Setpoint
from gaugecore.table import Table

sys.path.insert(0, os.path.dirname(__file__))
import fake_gauge as fg  # noqa: E402


def make(pressure_pa=1.0, noise_uv=0.2, **kw):
    rig = fg.Rig(pressure_pa=pressure_pa, noise_uv=noise_uv)
    ch = Channel(0, rig.tc, rig.cj, rig.heater, rig.relays, fg.make_table(), fg.limits(), **kw)
    return rig, ch


def run(rig, ch, until_ms, on_reading=None):
    clock = rig.clock
    while clock.ticks_ms() < until_ms:
        if ch.step(clock.ticks_ms()) and on_reading is not None:
            on_reading(ch)
        clock.sleep_ms(max(1, ch.next_ms - clock.ticks_ms()))


@pytest.mark.parametrize("pressure_pa", [0.2, 1.0, 10.0, 50.0])
def test_reading_matches_the_tube(pressure_pa):
    rig, ch = make(pressure_pa)
    run(rig, ch, 120000)  # the heater's 2 s soft start, then the tube recovers (tau ~9 s)
    assert ch.state == states.OK and ch.fault is None
    # table and tube share the closed form; what is left is the table's
    # interpolation between points 0.15 decade apart
    assert ch.pressure_pa == pytest.approx(pressure_pa, rel=0.01)
    assert ch.emf_mv == pytest.approx(fg.steady_emf_mv(pressure_pa), rel=1e-3)
    assert ch.cj_c == 22.0
    assert ch.heater_ma == pytest.approx(fg.NOMINAL_MA, rel=1e-6)
    assert ch.seq == 1200 and ch.time_ms == 119900 + 5  # 10 Hz; second read after 5 ms settle
    p, st_, emf, cj, ma, t = ch.reading()
    assert (p, st_, emf, cj, ma, t) == (ch.pressure_pa, ch.state, ch.emf_mv, ch.cj_c,
                                       ch.heater_ma, ch.time_ms)


def _hot_c(k, volts):
    """Temperature where the package's forward ITS-90 function gives `volts`, by
    bisection (its published inverse polynomial is only good to ~0.05 C)."""
    lo, hi = 0.0, 1000.0
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if k.temp_to_volt(mid) < volts else (lo, mid)
    return 0.5 * (lo + hi)


def test_default_compensation_is_the_rise_above_the_junction():
    # the fake table states no wall temperature (a version-1 table): plain wall
    # referral to the assumed 22 C, and the channel says so
    rig, ch = make(1.0)
    assert ch.compensation == "rise"
    assert ch.compensation_note == ("table states no wall temperature: plain wall referral "
                                    "to 22 C assumed")
    rig.cj.t_c = 30.0
    run(rig, ch, 5000)
    # filament T1 = E^-1(E_meas + E(30 C)), rise T1 - 30 C carried to the 22 C wall:
    # E(22 C + rise) - E(ref 22 C); ITS-90 type K from the PyPI `thermocouples` package
    k = thermocouples.get_thermocouple("K")
    t1 = _hot_c(k, ch.emf_mv * 1e-3 + k.temp_to_volt(30.0))
    expect = (k.temp_to_volt(22.0 + t1 - 30.0) - k.temp_to_volt(22.0)) * 1e3
    assert ch.emf_ref_mv == pytest.approx(expect, abs=1e-6)
    # a table with its wall temperature and slopes: the rise is corrected by exp(-k (t_cj - t_w))
    t = fg.make_table()
    walled = Table(t.points, t.gas, t.profile, t.heater_ma, t.ref_c, t.tc_type, "invented",
                   wall_c=24.0, rise_slope_per_k=(-0.002,) * len(t.points))
    rig2 = fg.Rig(pressure_pa=1.0, noise_uv=0.2)
    rig2.cj.t_c = 30.0
    ch2 = Channel(0, rig2.tc, rig2.cj, rig2.heater, rig2.relays, walled, fg.limits())
    assert ch2.compensation_note is None
    run(rig2, ch2, 5000)
    t1 = _hot_c(k, ch2.emf_mv * 1e-3 + k.temp_to_volt(30.0))
    rise = (t1 - 30.0) * math.exp(0.002 * (30.0 - 24.0))
    expect = (k.temp_to_volt(24.0 + rise) - k.temp_to_volt(22.0)) * 1e3
    assert ch2.emf_ref_mv == pytest.approx(expect, abs=1e-6)
    with pytest.raises(ValueError) as err:
        make(1.0, compensation="absolute")
    assert str(err.value) == "compensation must be 'rise' or 'its90'"


def test_its90_compensation_against_its90():
    rig, ch = make(1.0, compensation="its90")
    assert ch.compensation_note is None
    rig.cj.t_c = 30.0
    run(rig, ch, 5000)
    # law of intermediate temperatures: E(t, 22 C) = E_meas + E(30 C) - E(22 C),
    # reference values from the PyPI `thermocouples` package (NIST ITS-90 type K)
    k = thermocouples.get_thermocouple("K")
    expect = ch.emf_mv + (k.temp_to_volt(30.0) - k.temp_to_volt(22.0)) * 1e3
    assert ch.emf_ref_mv == pytest.approx(expect, abs=1e-6)
    # NIST Monograph 175 table: type K 0.798 mV at 20 C, 1.203 mV at 30 C
    assert (k.temp_to_volt(30.0) - k.temp_to_volt(20.0)) * 1e3 == pytest.approx(1.203 - 0.798, abs=6e-4)


def test_under_and_over_range_carry_the_table_bounds():
    rig = fg.Rig(pressure_pa=500.0, noise_uv=0.2)  # a real converter always has noise
    ch = Channel(0, rig.tc, rig.cj, rig.heater, rig.relays, fg.make_table(decades=(-3.0, 2.0)),
                 fg.limits())
    run(rig, ch, 30000)
    assert ch.state == states.OVER and ch.pressure_pa == ch.table.p_max_pa == 100.0
    rig2 = fg.Rig(pressure_pa=1e-3, noise_uv=0.2)
    ch2 = Channel(0, rig2.tc, rig2.cj, rig2.heater, rig2.relays, fg.make_table(decades=(-1.0, 3.0)),
                  fg.limits())
    run(rig2, ch2, 90000)
    assert ch2.state == states.UNDER and ch2.pressure_pa == ch2.table.p_min_pa


def test_adc_failure_gives_the_named_state_and_no_pressure():
    rig, ch = make(1.0)
    run(rig, ch, 10000)
    rig.tc.fail = True
    t_fail = rig.clock.ticks_ms()
    seen = []
    run(rig, ch, t_fail + 1000, on_reading=lambda c: seen.append((c.time_ms, c.state, c.fault, c.pressure_pa)))
    faulted = [s for s in seen if s[1] == states.FAULT]
    assert faulted and faulted[0][0] - t_fail <= 300
    assert all(s[3] is None for s in faulted)
    assert ch.fault == faults.ADC
    assert ch.reading()[0] is None
    assert ch.regulator.state != "off"  # the ADC fault leaves the filament hot
    rig.tc.fail = False
    run(rig, ch, rig.clock.ticks_ms() + 1000)  # self-clearing after good samples (faults.py)
    assert ch.state == states.OK and ch.fault is None


def test_heater_open_stops_the_heater_and_latches():
    rig, ch = make(1.0)
    run(rig, ch, 10000)
    rig.heater.open = True
    t0 = rig.clock.ticks_ms()
    run(rig, ch, t0 + 1000)
    assert ch.state == states.FAULT and ch.fault == faults.HEATER_OPEN
    assert ch.regulator.state == "off" and not rig.heater.enabled
    rig.heater.open = False
    run(rig, ch, rig.clock.ticks_ms() + 2000)
    assert ch.fault == faults.HEATER_OPEN  # latched until cleared
    ch.clear_faults()
    assert ch.regulator.state == "starting"
    run(rig, ch, rig.clock.ticks_ms() + 3000)
    assert ch.fault is None and ch.state == states.OK


def test_stale_when_no_sample_arrives():
    rig, ch = make(1.0)
    run(rig, ch, 5000)
    real_step = ch.sampler.step
    ch.sampler.step = lambda now: False  # a converter that stops delivering data
    run(rig, ch, 5000 + 700)
    assert ch.state == states.FAULT and ch.fault == faults.STALE and ch.pressure_pa is None
    ch.sampler.step = real_step
    run(rig, ch, rig.clock.ticks_ms() + 300)
    assert ch.state == states.OK  # clears on the next fresh sample (faults.py)


def test_setpoint_follows_pressure_and_fails_safe():
    rig, ch = make(1.0)
    sp = Setpoint(rig.relays[0], on_pa=2.0, off_pa=3.0, direction="below", delay_ms=0, name="SP1")
    ch.add_setpoint(sp)
    assert rig.relays[0].on is False  # channel start: relays de-energised
    run(rig, ch, 30000)
    assert sp.energised and rig.relays[0].on is True
    rig.tc.fail = True
    run(rig, ch, rig.clock.ticks_ms() + 400)
    assert rig.relays[0].on is False
    assert sp.events[-1][2] == "fail-safe: adc-failure"


def test_fast_response_is_switchable_per_channel():
    rig, ch = make(1.0)
    ch.response.configure(fg.C_J_K / fg.S_MV_K, fg.K2_W_K2 / fg.S_MV_K ** 2)
    run(rig, ch, 40000)
    rig.tube.sync()
    rig.tube.pressure_pa = 10.0
    ch.set_fast(True)
    run(rig, ch, rig.clock.ticks_ms() + 4000)
    final = fg.steady_emf_mv(10.0)
    assert abs(ch.emf_use_mv - final) < 0.02 * final  # estimate near the new equilibrium
    assert abs(ch.emf_ref_mv - final) > 0.1 * final  # the filament is still far from it
    ch.set_fast(False)
    run(rig, ch, rig.clock.ticks_ms() + 200)
    assert ch.emf_use_mv == ch.emf_ref_mv


def test_off_window_mode_runs_the_pipeline():
    rig, ch = make(1.0, mode="off-window")
    run(rig, ch, 5000)
    assert ch.state == states.OK and not ch.port.blanked and rig.heater.enabled


def test_configuration_errors():
    rig = fg.Rig()
    lim = fg.limits()
    del lim["max_ma"]
    with pytest.raises(ValueError) as exc:
        Channel(0, rig.tc, rig.cj, rig.heater, rig.relays, fg.make_table(), lim)
    assert str(exc.value) == "profile limits lack 'max_ma'"
    rig, ch = make()
    other = fg.make_table()
    other.tc_type = "E"
    with pytest.raises(ValueError) as exc:
        ch.set_table(other)
    assert str(exc.value) == "table is for type E, this channel is type K"


class _RailedInput:
    """An open thermocouple: the front end's bias pulls the input to a level far above
    any physical EMF, beyond the type-K reference function's range (54.886 mV, NIST
    Monograph 175), so the cold-junction step itself cannot invert it."""

    def read_uv(self):
        return 65000.0


def test_an_emf_beyond_the_reference_function_gives_tc_open_not_an_exception():
    rig, ch = make(1.0)
    run(rig, ch, 20000)
    assert ch.state == states.OK
    ch.tc = _RailedInput()
    ch.sampler.tc = _RailedInput()
    run(rig, ch, 21000)  # must not raise out of step(): the board's loop would stop
    assert (ch.state, ch.fault, ch.pressure_pa) == (states.FAULT, faults.TC_OPEN, None)
