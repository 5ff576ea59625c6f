"""Simulated electronics on their own (no tube): ADC, current source, cold
junction, relay, clock.

Checks are against the models' defining formulas (stated in
tcgauge.sim.electronics) and textbook facts: an N-bit bipolar converter with
full scale FS has a code step of FS / 2**(N-1); a first-order system reaches
1 - exp(-t/tau) of a step (any control text, e.g. Ogata, Modern Control
Engineering, ch. 5); Ohm's law for compliance.
"""

import math
import statistics

import pytest

from tcgauge.sim.clock import SimClock
from tcgauge.sim.electronics import (ADC_NOISE_TABLE_UV, SimAdc, SimColdJunction,
                                     SimCurrentSource, SimRelay, adc_noise_uv)


class Source:
    """A settable true input (uV)."""

    def __init__(self, uv=0.0):
        self.uv = uv

    def __call__(self):
        return self.uv


def ideal_adc(clock, src, **kw):
    args = dict(noise_uv=0.0, offset_uv=0.0, gain_error=0.0, vref_tc_ppm_k=0.0)
    args.update(kw)
    return SimAdc(clock, src, rng=1, **args)


# ---------------------------------------------------------------- ADC

@pytest.mark.parametrize("bits,gain", [(24, 1), (24, 32), (24, 128), (16, 1), (12, 8)])
def test_adc_code_step_is_full_scale_over_2_to_bits_minus_1(bits, gain):
    # bipolar N-bit converter: LSB = FS / 2**(N-1), FS = Vref / gain
    adc = ideal_adc(SimClock(), Source(), bits=bits, gain=gain, vref_v=2.5)
    assert adc.full_scale_uv == 2.5e6 / gain
    assert adc.lsb_uv == adc.full_scale_uv / 2 ** (bits - 1)


def test_adc_quantises_to_whole_codes():
    src = Source()
    adc = ideal_adc(SimClock(), src, bits=16, gain=1, vref_v=2.5)
    lsb = 2.5e6 / 2 ** 15  # 76.2939... uV
    src.uv = 1000.0
    assert adc.read_uv() == round(1000.0 / lsb) * lsb  # 13 codes
    assert adc.last_code == 13
    src.uv = 13 * lsb + 0.49 * lsb  # less than half a step: same code
    assert adc.read_uv() == 13 * lsb
    src.uv = 14 * lsb
    assert adc.read_uv() - 13 * lsb == pytest.approx(lsb, rel=1e-12)


def test_adc_saturates_at_full_scale_and_returns_the_clipped_code():
    src = Source()
    adc = ideal_adc(SimClock(), src, bits=24, gain=32)
    fs = adc.full_scale_uv  # 78125 uV
    src.uv = 2.0 * fs
    assert adc.read_uv() == (2 ** 23 - 1) * adc.lsb_uv
    assert adc.last_code == 2 ** 23 - 1
    src.uv = -5.0 * fs
    assert adc.read_uv() == -fs
    assert adc.last_code == -(2 ** 23)


def test_adc_noise_std_matches_configured_value():
    src = Source(5000.0)
    adc = SimAdc(SimClock(), src, rng=7, noise_uv=0.8, offset_uv=0.0, gain_error=0.0, vref_tc_ppm_k=0.0)
    xs = [adc.read_uv() for _ in range(4000)]
    assert statistics.pstdev(xs) == pytest.approx(0.8, rel=0.10)
    assert statistics.fmean(xs) == pytest.approx(5000.0, abs=0.1)


def test_adc_noise_from_the_table_depends_on_data_rate():
    # table values are from memory / typical (see electronics.py)
    n_amp, n_mod = ADC_NOISE_TABLE_UV[330]
    assert adc_noise_uv(330, 32) == pytest.approx(math.hypot(n_amp, n_mod / 32), rel=1e-12)
    assert adc_noise_uv(20, 32) < adc_noise_uv(90, 32) < adc_noise_uv(1000, 32)
    src = Source(0.0)
    adc = SimAdc(SimClock(), src, rng=3, data_rate_sps=1000, offset_uv=0.0, gain_error=0.0)
    xs = [adc.read_uv() for _ in range(3000)]
    assert statistics.pstdev(xs) == pytest.approx(adc_noise_uv(1000, 32), rel=0.10)


def test_adc_conversion_time_advances_the_clock():
    clock = SimClock()
    adc = ideal_adc(clock, Source(), data_rate_sps=90)
    adc.read_uv()
    assert clock.ticks_us() == 11111  # 1 / 90 s, rounded to 1 us
    adc.set_data_rate(20)
    adc.read_uv()
    assert clock.ticks_us() == 11111 + 50000


def test_adc_offset_gain_error_and_reference_drift():
    src = Source(10000.0)
    board = {"c": 45.0}
    adc = SimAdc(SimClock(), src, rng=1, noise_uv=0.0, offset_uv=2.0, gain_error=0.001,
                 vref_tc_ppm_k=10.0, board_c=lambda: board["c"])
    expect = (10000.0 * 1.001 + 2.0) / (1.0 + 10e-6 * 20.0)
    assert adc.read_uv() == pytest.approx(expect, abs=adc.lsb_uv)
    board["c"] = 25.0
    assert adc.read_uv() == pytest.approx(10000.0 * 1.001 + 2.0, abs=adc.lsb_uv)


def test_adc_rejects_bad_settings_with_our_messages():
    with pytest.raises(ValueError, match=r"^adc: gain must be one of 1, 2, 4, 8, 16, 32, 64, 128, not 3$"):
        SimAdc(SimClock(), Source(), gain=3)
    with pytest.raises(ValueError, match=r"^adc: data rate 50 sps is not in the noise table \(20, 45, 90"):
        SimAdc(SimClock(), Source(), data_rate_sps=50)


# ---------------------------------------------------------------- current source

def quiet_source(clock, load, **kw):
    args = dict(rng=2, read_noise_ma=0.0, read_v_noise_v=0.0, dac_gain_error=0.0, dac_offset_ma=0.0,
                sense_tolerance=0.0, sense_tc_ppm_k=0.0, sense_theta_k_w=0.0)
    args.update(kw)
    return SimCurrentSource(clock, load, **args)


def test_compliance_a_1_kohm_heater_cannot_get_165_ma():
    clock = SimClock()
    src = quiet_source(clock, 1000.0)  # supply 12 V, headroom 1.5 V, sense 2 ohm, leads 0.2 ohm
    src.set_ma(165.0)
    clock.sleep_ms(10)
    # Ohm's law at compliance: I = (12 - 1.5) V / (1000 + 2 + 0.2) ohm
    i_ma = 10.5 / 1002.2 * 1e3
    assert src.read_ma() == pytest.approx(i_ma, rel=1e-6)
    assert src.read_ma() < 165.0 * 0.1
    v = src.read_v()
    assert v == pytest.approx(10.5 * 1000.0 / 1002.2, rel=1e-6)  # the compliance voltage less the sense drop
    assert v == pytest.approx(src.compliance_v(), rel=0.003)


def test_supply_sag_lowers_compliance():
    clock = SimClock()
    src = quiet_source(clock, 1000.0, supply_v=6.0)
    src.set_ma(165.0)
    clock.sleep_ms(10)
    assert src.compliance_v() == 4.5
    assert src.read_ma() == pytest.approx(4.5 / 1002.2 * 1e3, rel=1e-6)
    src.supply_v = 1.0  # below the headroom: nothing left
    clock.sleep_ms(10)
    assert src.compliance_v() == 0.0
    assert abs(src.read_ma()) < 1e-9


def test_settling_is_first_order_and_reaches_0p1_percent_within_7_tau():
    clock = SimClock()
    src = quiet_source(clock, 1.5, tau_us=300.0, read_time_us=0)
    src.set_ma(165.0)
    final = round(165.0 / src.dac_lsb_ma) * src.dac_lsb_ma
    clock.sleep_us(900)  # 3 tau: 1 - exp(-3) = 95.02 %
    assert src.read_ma() == pytest.approx(final * (1 - math.exp(-3.0)), rel=1e-9)
    clock.sleep_us(600)  # 5 tau: still 0.67 % short
    assert abs(src.read_ma() - final) / final > 0.001
    clock.sleep_us(600)  # 7 tau: within 0.1 % (exp(-7) = 0.09 %)
    assert abs(src.read_ma() - final) / final < 0.001


def test_sense_resistor_drift_gives_the_modelled_error():
    # model: true current = V_set / R_s(T), read_ma() = V(R_s) / R_nom = V_set / R_nom,
    # so true / read = R_nom / R_s = 1 / ((1 + tol)(1 + tc (T - 25 C)))
    amb = {"c": 45.0}
    clock = SimClock()
    src = quiet_source(clock, 1.5, sense_tolerance=0.0005, sense_tc_ppm_k=50.0,
                       ambient_c=lambda: amb["c"])
    src.set_ma(165.0)
    clock.sleep_ms(10)
    read = src.read_ma()
    true_ma = src.current_a * 1e3
    assert true_ma / read == pytest.approx(1.0 / (1.0005 * (1 + 50e-6 * 20.0)), rel=1e-9)
    assert read == pytest.approx(165.0, abs=src.dac_lsb_ma)  # the firmware would see no error
    amb["c"] = 25.0
    clock.sleep_ms(10)
    read = src.read_ma()  # brings the source up to the clock
    assert src.current_a * 1e3 / read == pytest.approx(1.0 / 1.0005, rel=1e-9)


def test_sense_resistor_self_heating_raises_its_temperature():
    clock = SimClock()
    src = quiet_source(clock, 1.5, sense_tc_ppm_k=50.0, sense_theta_k_w=60.0, ambient_c=lambda: 25.0)
    src.set_ma(165.0)
    clock.sleep_ms(10)
    i = src.current_a
    # T_s = 25 + 60 K/W * I^2 * 2 ohm
    assert src.sense_true_ohm() == pytest.approx(2.0 * (1 + 50e-6 * 60.0 * i * i * 2.0), rel=1e-12)


def test_dac_errors_show_in_read_ma_so_a_loop_can_correct_them():
    clock = SimClock()
    src = quiet_source(clock, 1.5, dac_gain_error=0.002, dac_offset_ma=0.05)
    src.set_ma(100.0)
    clock.sleep_ms(10)
    assert src.read_ma() == pytest.approx(100.0 * 1.002 + 0.05, abs=src.dac_lsb_ma)


def test_polarity_flips_current_and_voltage_and_off_decays():
    clock = SimClock()
    src = quiet_source(clock, 1.5)
    src.set_ma(165.0)
    clock.sleep_ms(10)
    i_pos, v_pos = src.read_ma(), src.read_v()
    src.set_polarity(-1)
    clock.sleep_ms(10)
    assert src.read_ma() == pytest.approx(-i_pos, rel=1e-9)
    assert src.read_v() == pytest.approx(-v_pos, rel=1e-9)
    assert v_pos == pytest.approx(i_pos * 1e-3 * 1.5, rel=1e-9)
    src.off()
    clock.sleep_ms(10)
    assert abs(src.read_ma()) < 1e-9


def test_open_load_gets_no_current_and_read_v_sits_at_compliance():
    clock = SimClock()
    src = quiet_source(clock, 1.5)
    src.load_open = True
    src.set_ma(165.0)
    clock.sleep_ms(10)
    assert abs(src.read_ma()) < 1e-9
    assert src.read_v() == 10.5


def test_heater_rejects_bad_commands_with_our_messages():
    src = SimCurrentSource(SimClock(), 1.5)
    with pytest.raises(ValueError, match=r"^heater: current must be >= 0 mA, not -1.0$"):
        src.set_ma(-1.0)
    with pytest.raises(ValueError, match=r"^heater: 300.000 mA is above the 250.0 mA span$"):
        src.set_ma(300.0)
    with pytest.raises(ValueError, match=r"^heater: polarity must be \+1 or -1, not 0$"):
        src.set_polarity(0)


def test_dac_resolution():
    src = SimCurrentSource(SimClock(), 1.5)
    assert src.dac_lsb_ma == 250.0 / 65535


# ---------------------------------------------------------------- cold junction

def test_cold_junction_lags_the_connector_first_order():
    clock = SimClock()
    conn = {"c": 22.0}
    cj = SimColdJunction(clock, lambda t_s: conn["c"], rng=1, offset_c=0.0, noise_c=0.0, resolution_c=0.0, tau_s=20.0)
    assert cj.read_c() == 22.0
    conn["c"] = 32.0
    clock.sleep(20.0)  # one time constant: 63.2 % of the step
    assert cj.read_c() == pytest.approx(22.0 + 10.0 * (1 - math.exp(-1.0)), rel=1e-12)
    clock.sleep(200.0)
    assert cj.read_c() == pytest.approx(32.0, abs=1e-3)


def test_cold_junction_offset_resolution_and_noise():
    clock = SimClock()
    cj = SimColdJunction(clock, 25.0, rng=5, offset_c=0.3, noise_c=0.0)
    t = cj.read_c()
    assert t == round(25.3 / 0.0625) * 0.0625  # 0.0625 C steps
    noisy = SimColdJunction(clock, 25.0, rng=5, offset_c=0.0, noise_c=0.05, resolution_c=0.0)
    xs = [noisy.read_c() for _ in range(3000)]
    assert statistics.pstdev(xs) == pytest.approx(0.05, rel=0.10)


def test_cold_junction_failure_raises_oserror():
    cj = SimColdJunction(SimClock(), 25.0)
    cj.no_response = True
    with pytest.raises(OSError, match=r"^cold junction: sensor not responding$"):
        cj.read_c()


# ---------------------------------------------------------------- relay and clock

def test_relay_records_each_switching_in_simulated_time():
    clock = SimClock()
    r = SimRelay(clock)
    assert r.state is False
    clock.sleep_ms(5)
    r.set(True)
    r.set(True)  # no change, no record
    clock.sleep_ms(7)
    r.set(0)
    assert r.history == [(5000, True), (12000, False)]
    assert r.state is False


def test_clock_ticks_and_sleep():
    clock = SimClock()
    clock.sleep_us(1500)
    assert (clock.ticks_us(), clock.ticks_ms()) == (1500, 1)
    clock.sleep_ms(2)
    assert clock.ticks_us() == 3500
    assert clock.ticks_diff(clock.ticks_ms(), 1) == 2
    with pytest.raises(ValueError, match=r"^clock: cannot sleep a negative time \(-1 us\)$"):
        clock.sleep_us(-1)
