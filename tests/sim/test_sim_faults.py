"""Faults injected at a chosen time change what the devices return from that
time on, as modelled in tcgauge.sim.faults / electronics, and not before.

Every fault is scheduled from a Scenario (or Bench.inject) at T_F = 60 s,
on a Wren demo tube (invented) at the Larkspur bell jar's base pressure
(invented), heated at 165 mA from t = 0 so the filament has settled.
"""

import pytest

from tcgauge.sim import faults
from tcgauge.sim.bench import Bench
from tcgauge.sim.chamber import LARKSPUR, Scenario

T_F = 60.0


def bench_with(name, channel=0, clear_at_s=None, **params):
    sc = Scenario("fault-test", pressure_pa=LARKSPUR.base_pressure_pa).hold(600.0)
    sc.fault(T_F, name, channel=channel, clear_at_s=clear_at_s, **params)
    b = Bench(scenario=sc, seed=11)
    for ch in b.channels:
        ch.heater.set_ma(165.0)
    return b


def goto(b, t_s):
    b.clock.sleep_us(int(round(t_s * 1e6)) - b.clock.ticks_us())


def before_and_at(b, read, settle_s=0.0):
    """`read()` ending 9 ms before T_F, and `read()` started settle_s after T_F."""
    goto(b, T_F - 0.02)
    before = read()
    goto(b, T_F + settle_s)
    return before, read()


# the heater current needs a few settling time constants (0.3 ms) to follow a fault
HEATER_SETTLE_S = 0.005


def test_fault_names():
    assert sorted(faults.FAULTS) == sorted([
        "heater-open", "heater-short", "tc-open", "tc-short", "adc-stuck", "adc-saturated",
        "adc-fail", "cj-fail", "cj-absurd", "intermittent", "supply-sag"])


def test_heater_open_stops_the_current_and_the_filament_cools():
    b = bench_with("heater-open")
    h = b.channels[0].heater
    before, after = before_and_at(b, h.read_ma, HEATER_SETTLE_S)
    assert before == pytest.approx(165.38, abs=0.05)  # 165 mA plus the invented DAC errors
    assert abs(after) < 0.01
    assert h.read_v() == pytest.approx(h.compliance_v(), abs=0.002)  # open terminals sit at compliance
    assert b.channels[0].true_filament_c() > 200.0  # still hot just after the break
    goto(b, T_F + 200.0)
    ch = b.channels[0]
    assert ch.true_filament_c() == pytest.approx(22.0, abs=0.1)
    assert abs(ch.tc.read_uv()) < 10.0  # no heating, no pickup: offset and noise only
    assert b.channels[1].true_filament_c() > 250.0  # the other channel is unaffected


def test_heater_short_source_reaches_current_but_the_filament_gets_almost_none():
    b = bench_with("heater-short", ohm=0.05)
    ch = b.channels[0]
    v_before, v_after = before_and_at(b, ch.heater.read_v, HEATER_SETTLE_S)
    r_h = ch.tube.heater_resistance_ohm()
    assert v_before == pytest.approx(0.165 * r_h, rel=0.005)
    r_par = 0.05 * r_h / (0.05 + r_h)
    assert v_after == pytest.approx(0.16538 * r_par, abs=0.001)  # read_v noise 0.2 mV (invented)
    assert ch.heater.read_ma() == pytest.approx(165.38, abs=0.05)  # the source sees nothing wrong
    assert ch.true_current_ma() == pytest.approx(165.3 * 0.05 / (0.05 + r_h), rel=0.01)
    goto(b, T_F + 200.0)
    # (5.3 mA)^2 heating leaves the filament a fraction of a kelvin above the wall
    assert ch.true_filament_c() < 23.0
    # what is left at the ADC: the small EMF plus the pickup of the filament's
    # share of the current, fraction * I_f * R_h (the pickup model of tcgauge.sim.tube)
    uv = ch.tc.read_uv()
    pickup_uv = ch.profile.pickup_fraction * ch.true_current_ma() * 1e-3 * r_h * 1e6
    assert uv == pytest.approx(ch.true_emf_mv() * 1e3 + pickup_uv + ch.tc.offset_uv, abs=2.0)
    assert uv < 300.0


def test_tc_open_rails_to_full_scale():
    b = bench_with("tc-open")
    adc = b.channels[0].tc
    before, after = before_and_at(b, adc.read_uv)
    assert 15000.0 < before < 18000.0  # EMF ~11.4 mV plus ~5 mV pickup
    assert after == (2 ** 23 - 1) * adc.lsb_uv  # +full-scale code
    assert adc.last_code == 2 ** 23 - 1


def test_tc_short_reads_zero_whatever_the_heating():
    b = bench_with("tc-short")
    adc = b.channels[0].tc
    before, after = before_and_at(b, adc.read_uv)
    assert before > 15000.0
    assert after == pytest.approx(adc.offset_uv, abs=5 * adc.noise_uv)
    b.channels[0].heater.off()
    b.clock.sleep(5.0)
    assert adc.read_uv() == pytest.approx(adc.offset_uv, abs=5 * adc.noise_uv)


def test_adc_stuck_repeats_its_last_code():
    b = bench_with("adc-stuck")
    adc = b.channels[0].tc
    before, after = before_and_at(b, adc.read_uv)
    assert after == before
    b.channels[0].heater.off()  # the input changes by millivolts...
    b.clock.sleep(100.0)
    assert adc.read_uv() == before  # ...the code does not
    assert b.channels[0].true_emf_mv() < 0.5


def test_adc_saturated_returns_full_scale():
    b = bench_with("adc-saturated")
    adc = b.channels[0].tc
    before, after = before_and_at(b, adc.read_uv)
    assert before < 18000.0
    assert after == (2 ** 23 - 1) * adc.lsb_uv


def test_adc_fail_raises_oserror_from_then_on():
    b = bench_with("adc-fail")
    adc = b.channels[0].tc
    goto(b, T_F - 0.02)
    assert adc.read_uv() > 15000.0
    goto(b, T_F)
    with pytest.raises(OSError, match=r"^adc: no response$"):
        adc.read_uv()
    assert b.channels[1].tc.read_uv() > 15000.0  # other channel fine


def test_cj_fail_raises_oserror():
    b = bench_with("cj-fail")
    cj = b.channels[0].cj
    goto(b, T_F - 0.001)
    assert cj.read_c() == pytest.approx(22.3, abs=0.1)  # 22 C ambient + the invented 0.3 C offset
    goto(b, T_F)
    with pytest.raises(OSError, match=r"^cold junction: sensor not responding$"):
        cj.read_c()


def test_cj_absurd_value():
    b = bench_with("cj-absurd", value_c=-273.0)
    before, after = before_and_at(b, b.channels[0].cj.read_c)
    assert before == pytest.approx(22.3, abs=0.1)
    assert after == -273.0


def test_intermittent_contact_drops_out_at_random_from_then_on():
    b = bench_with("intermittent", probability=0.4)
    adc = b.channels[0].tc
    rail = (2 ** 23 - 1) * adc.lsb_uv
    goto(b, T_F - 3.0)
    before = [adc.read_uv() for _ in range(200)]  # 2.2 s of conversions, all before T_F
    assert b.time_s < T_F
    assert rail not in before
    goto(b, T_F)
    after = [adc.read_uv() for _ in range(400)]
    drops = sum(1 for x in after if x == rail)
    # binomial(400, 0.4): mean 160, sd 9.8; +/- 5 sd
    assert 111 <= drops <= 209
    good = [x for x in after if x != rail]
    assert all(15000.0 < x < 18000.0 for x in good)


def test_supply_sag_limits_the_current_to_compliance():
    b = bench_with("supply-sag", supply_v=1.7)
    h = b.channels[0].heater
    before, after = before_and_at(b, h.read_ma, HEATER_SETTLE_S)
    assert before == pytest.approx(165.38, abs=0.05)
    # compliance 1.7 - 1.5 = 0.2 V over heater + sense + leads (Ohm's law)
    r_total = h.load_ohm() + h.sense_true_ohm() + h.lead_ohm
    assert after == pytest.approx(0.2 / r_total * 1e3 * h.sense_true_ohm() / h.sense_ohm, abs=0.05)
    assert after < 60.0


def test_faults_clear_at_their_time():
    b = bench_with("tc-open", clear_at_s=T_F + 1.0)
    adc = b.channels[0].tc
    goto(b, T_F + 0.5)
    assert adc.read_uv() == (2 ** 23 - 1) * adc.lsb_uv
    goto(b, T_F + 1.0)
    assert 15000.0 < adc.read_uv() < 18000.0
    assert b.channels[0].active_faults == {}

    b = bench_with("supply-sag", supply_v=1.7, clear_at_s=T_F + 1.0)
    h = b.channels[0].heater
    goto(b, T_F + 0.5)
    assert h.read_ma() < 60.0
    goto(b, T_F + 1.0 + HEATER_SETTLE_S)
    assert h.read_ma() == pytest.approx(165.38, abs=0.05)
    assert h.supply_v == 12.0


def test_bench_inject_now_and_later_and_clear():
    b = Bench(scenario=Scenario(pressure_pa=0.02), seed=3)
    ch = b.channels[1]
    ch.heater.set_ma(165.0)
    b.clock.sleep(5.0)
    b.inject("heater-open", channel=1)  # now
    b.clock.sleep(HEATER_SETTLE_S)
    assert abs(ch.heater.read_ma()) < 0.01
    assert ch.active_faults == {"heater-open": {}}
    b.clear("heater-open", channel=1)
    b.clock.sleep(HEATER_SETTLE_S)
    assert ch.heater.read_ma() == pytest.approx(165.38, abs=0.05)
    b.inject("cj-absurd", channel=1, at_s=10.0, value_c=150.0)
    assert ch.cj.read_c() != 150.0
    b.clock.sleep(5.0)
    assert ch.cj.read_c() == 150.0
    with pytest.raises(ValueError, match=r"^bench: cannot schedule tc-open at 1.000000 s, the clock is at 10.0"):
        b.inject("tc-open", channel=1, at_s=1.0)
    with pytest.raises(ValueError, match=r"^unknown fault 'gremlin'"):
        b.inject("gremlin", channel=0)
