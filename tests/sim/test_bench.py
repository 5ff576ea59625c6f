"""The assembled Bench: a pump-down trace, quasi-static agreement with the
tube's steady state, pickup cancellation by current reversal, gas and
ambient changes, the clock, independence of channels, determinism.

The Wren tube and the Larkspur bell jar are invented demo data.
"""

import math

import numpy as np
import pytest

from tcgauge.sim.bench import Bench
from tcgauge.sim.chamber import ATM_PA, LARKSPUR, Scenario
from tcgauge.sim.tube import steady_state

PA_PER_TORR = 101325.0 / 760.0  # NIST SP 811, B.8


def reversed_read_uv(b, ch, settle_ms=2):
    """Mean of one read at each heater polarity: cancels the pickup (docs/physics.md s. 7)."""
    ch.heater.set_polarity(1)
    b.clock.sleep_ms(settle_ms)
    a = ch.tc.read_uv()
    ch.heater.set_polarity(-1)
    b.clock.sleep_ms(settle_ms)
    c = ch.tc.read_uv()
    ch.heater.set_polarity(1)
    return 0.5 * (a + c), a, c


def pumpdown_trace(seed=0, period_s=0.5, until_s=300.0):
    b = Bench(scenario="pumpdown", seed=seed, channels=1)
    ch = b.channels[0]
    ch.heater.set_ma(165.0)  # fixed current, no controller
    t, p, e = [], [], []
    while b.time_s < until_s:
        uv, _, _ = reversed_read_uv(b, ch)
        t.append(b.time_s)
        p.append(b.true_pressure_pa(0))
        e.append(uv * 1e-3)
        b.clock.sleep(period_s - 0.026)
    return b, np.array(t), np.array(p), np.array(e)


@pytest.fixture(scope="module")
def trace():
    return pumpdown_trace()


def emf_at(p, e, p_target):
    i = int(np.argmin(np.abs(np.log(p / p_target))))
    assert abs(math.log10(p[i] / p_target)) < 0.05  # the trace samples this pressure closely
    return e[i]


def test_true_pressure_follows_the_closed_form_pumpdown(trace):
    # p(t) = Q/S + (p0 - Q/S) exp(-S t / V), O'Hanlon, A User's Guide to Vacuum
    # Technology, pump-down chapter (from memory); "pumpdown" holds 5 s first
    _, t, p, _ = trace
    for ti, pi in zip(t[::40], p[::40]):
        expect = ATM_PA if ti < 5.0 else LARKSPUR.pumpdown_pa(ti - 5.0)
        assert pi == pytest.approx(expect, rel=1e-9)


def test_pumpdown_emf_trace_has_the_thermocouple_gauge_shape(trace):
    b, t, p, e = trace
    e_hv = e[-1]
    # flat near atmosphere: gas conduction is saturated (continuum), docs/physics.md s. 1-2
    flat = emf_at(p, e, 1e4) - emf_at(p, e, 9e4)
    assert 0.0 <= flat < 0.002 * e_hv
    # steep from 1 Torr to 10 mTorr: the free-molecular (linear-in-p) range
    steep_per_decade = (emf_at(p, e, 0.01 * PA_PER_TORR) - emf_at(p, e, PA_PER_TORR)) / 2.0
    assert steep_per_decade > 0.2 * e_hv
    assert steep_per_decade > 100 * flat
    # flattening toward the high-vacuum EMF: radiation and solid conduction dominate
    tail_per_decade = (emf_at(p, e, 0.025) - emf_at(p, e, 0.1)) / math.log10(0.1 / 0.025)
    assert 0.0 < tail_per_decade < 0.5 * steep_per_decade
    # monotone (within noise) as the pressure falls
    assert np.all(np.diff(e) > -0.002)
    # the end of the trace is the tube's high-vacuum EMF seen through the ADC's
    # modelled gain error and offset (electronics.py) ...
    ch = b.channels[0]
    adc = ch.tc
    drift = 1 + adc.vref_tc_ppm_k * 1e-6 * (22.0 - 25.0)
    assert e_hv == pytest.approx((ch.true_emf_mv() * (1 + adc.gain_error) + adc.offset_uv * 1e-3) / drift,
                                 abs=0.003)
    # ... and that is the steady state, less a little: each polarity reversal
    # takes the current through zero for ~1 ms (settling 0.3 ms), about 0.2 %
    # less mean heating at two reversals per 0.5 s
    ss = steady_state(b.profile, "N2", LARKSPUR.base_pressure_pa, abs(ch.true_current_ma()) * 1e-3,
                      t_wall_c=22.0, t_ref_c=22.0)
    assert 0.0 < float(ss.emf_mv) - ch.true_emf_mv() < 0.004 * float(ss.emf_mv)


def test_pumpdown_emf_lags_the_steady_state_curve(trace):
    # a first-order lag of a rising signal stays below it (tube time constant of seconds)
    b, t, p, e = trace
    ch = b.channels[0]
    ss = steady_state(b.profile, "N2", p, abs(ch.true_current_ma()) * 1e-3, t_wall_c=22.0, t_ref_c=22.0)
    late = t > 8.0  # after the heater's own warm-up at atmosphere
    assert np.all(e[late] <= ss.emf_mv[late] * 1.002 + 0.003)
    # and the lag is largest in the steep range, where the EMF moves fastest
    i = int(np.argmin(np.abs(np.log(p / 1.33))))
    assert ss.emf_mv[i] - e[i] > 1.0


def test_held_pressures_settle_on_the_tube_steady_state():
    sc = Scenario("steps", pressure_pa=0.05).step(0.05, 300.0).step(1.0, 100.0).step(100.0, 100.0)
    b = Bench(scenario=sc, seed=4, channels=1, adc=dict(noise_uv=0.0))
    ch = b.channels[0]
    ch.heater.set_ma(165.0)
    for end_s, p in ((300.0, 0.05), (400.0, 1.0), (500.0, 100.0)):
        b.clock.sleep(end_s - 0.1 - b.time_s)
        i_a = abs(ch.true_current_ma()) * 1e-3
        ss = steady_state(b.profile, "N2", p, i_a, t_wall_c=22.0, t_ref_c=22.0)
        assert ch.true_emf_mv() == pytest.approx(float(ss.emf_mv), rel=1e-4)
        assert ch.true_filament_c() == pytest.approx(float(ss.filament_c), rel=1e-4)


def test_current_reversal_cancels_the_pickup():
    b = Bench(scenario=Scenario(pressure_pa=1.0), seed=5, channels=1, adc=dict(noise_uv=0.0))
    ch = b.channels[0]
    ch.heater.set_ma(165.0)
    b.clock.sleep(60.0)
    mean, pos, neg = reversed_read_uv(b, ch)
    adc = ch.tc
    drift = 1 + adc.vref_tc_ppm_k * 1e-6 * (22.0 - 25.0)
    emf_uv = ch.true_emf_mv() * 1e3
    # pickup = fraction * I * R_h (tcgauge.sim.tube), sign following the current
    pickup_uv = ch.profile.pickup_fraction * abs(ch.true_current_ma()) * 1e-3 * ch.tube.heater_resistance_ohm() * 1e6
    assert pos - neg == pytest.approx(2 * pickup_uv * (1 + adc.gain_error) / drift, abs=2 * adc.lsb_uv + 0.5)
    assert mean == pytest.approx((emf_uv * (1 + adc.gain_error) + adc.offset_uv) / drift, abs=0.5)


def test_gas_change_moves_the_reading_to_the_new_gas_curve():
    sc = Scenario(pressure_pa=10.0).hold(200.0).set_gas(100.0, "Ar")
    b = Bench(scenario=sc, seed=6, channels=1)
    ch = b.channels[0]
    ch.heater.set_ma(165.0)
    b.clock.sleep(99.0)
    assert b.true_gas(0) == "N2"
    i_a = abs(ch.true_current_ma()) * 1e-3
    n2 = float(steady_state(b.profile, "N2", 10.0, i_a, 22.0, 22.0).emf_mv)
    ar = float(steady_state(b.profile, "Ar", 10.0, i_a, 22.0, 22.0).emf_mv)
    assert ch.true_emf_mv() == pytest.approx(n2, rel=1e-3)
    b.clock.sleep(100.0)
    assert b.true_gas(0) == "Ar"
    assert ch.true_emf_mv() == pytest.approx(ar, rel=1e-3)
    # argon conducts less heat (relative sensitivity ~0.62 of N2, docs/physics.md s. 3): hotter, larger EMF
    assert ar - n2 > 0.5


def test_ambient_ramp_moves_wall_and_connector_and_the_cold_junction_lags():
    b = Bench(scenario="ambient-ramp", seed=7, channels=1, cj=dict(noise_c=0.0, offset_c=0.0, resolution_c=0.0))
    ch = b.channels[0]
    b.clock.sleep(360.0)  # halfway up the 22 -> 32 C ramp (60 s .. 660 s)
    amb = b.scenarios[0].ambient_c(360.0)
    assert amb == pytest.approx(27.0, rel=1e-12)
    # a first-order lag tau behind a ramp of rate r settles r * tau behind it
    # (any control text, e.g. Ogata, Modern Control Engineering, ch. 5)
    rate, tau = 10.0 / 600.0, ch.cj.tau_s
    assert ch.cj.read_c() == pytest.approx(amb - rate * tau, abs=0.01)
    # the unheated filament follows the wall with the tube's own time constant
    tau_tube = ch.tube.tau_s(1.0, 0.0, amb)
    assert ch.true_filament_c() == pytest.approx(amb - rate * tau_tube, abs=0.02)
    assert tau_tube > 1.0


def test_clock_is_simulated_and_physics_is_lazy():
    b = Bench(seed=1, channels=1)
    ch = b.channels[0]
    ch.heater.set_ma(165.0)
    assert b.clock.ticks_ms() == 0
    b.clock.sleep_ms(1500)
    assert b.clock.ticks_ms() == 1500 and b.clock.ticks_us() == 1500000
    assert ch._t_us == 0  # nothing computed while sleeping
    ch.tc.read_uv()
    assert b.clock.ticks_us() == 1500000 + ch.tc.conversion_us
    assert ch._t_us == b.clock.ticks_us()
    assert b.time_s == pytest.approx(1.511111, abs=1e-6)


def test_two_channels_each_with_its_own_source():
    b = Bench(scenario=Scenario(pressure_pa=0.02), seed=2)
    assert len(b.channels) == 2
    a, c = b.channels
    assert a.heater is not c.heater and len(a.relays) == 2 and len(c.relays) == 2
    a.heater.set_ma(165.0)
    b.clock.sleep(30.0)
    assert a.true_filament_c() > 250.0
    assert c.true_filament_c() == pytest.approx(22.0, abs=1e-9)
    a.relays[0].set(True)
    assert a.relays[0].history == [(30000000, True)] and c.relays[0].history == []


def run_trace(seed):
    b = Bench(scenario="pumpdown", seed=seed)
    out = []
    for ch in b.channels:
        ch.heater.set_ma(150.0)
    for _ in range(200):
        for ch in b.channels:
            out.append((ch.tc.read_uv(), ch.heater.read_ma(), ch.heater.read_v(), ch.cj.read_c()))
        b.clock.sleep_ms(100)
    return out


def test_same_seed_same_trace_different_seed_different_trace():
    a, b, c = run_trace(42), run_trace(42), run_trace(43)
    assert a == b
    assert a != c
    assert sum(1 for x, y in zip(a, c) if x[0] != y[0]) > 190  # the noise differs almost everywhere


def test_bench_rejects_bad_arguments():
    with pytest.raises(ValueError, match=r"^bench: channels must be an integer >= 1, not 0$"):
        Bench(channels=0)
    with pytest.raises(ValueError, match=r"^bench: scenario fault tc-open names channel 3 of 2$"):
        Bench(scenario=Scenario().fault(1.0, "tc-open", channel=3))
    with pytest.raises(ValueError, match=r"^bench: 1 scenarios for 2 channels$"):
        Bench(scenario=["pumpdown"])
    with pytest.raises(ValueError, match=r"^unknown gas 'Xe'"):
        Bench(scenario=Scenario().hold(10.0).set_gas(5.0, "Xe"))


def test_accumulating_short_catch_ups_does_not_change_the_physics():
    # min_step_s only batches the tube's steps; the heating (integral of I^2 dt)
    # is carried over exactly, so the trace matches stepping on every access
    def run(min_step_s):
        b = Bench(scenario="pumpdown", seed=9, channels=1, min_step_s=min_step_s)
        ch = b.channels[0]
        ch.heater.set_ma(165.0)
        out = []
        for _ in range(600):  # 60 s at 10 samples/s, through the steep range
            uv, _, _ = reversed_read_uv(b, ch)
            ch.heater.read_ma()
            out.append(ch.true_filament_c())
            b.clock.sleep_ms(74)
        return np.array(out)
    batched, every = run(0.002), run(0.0)
    assert np.max(np.abs(batched - every)) < 0.003  # kelvin (measured 0.9 mK), filament at 40-60 C
