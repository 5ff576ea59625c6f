"""Fast response: identification of the heat balance and the equilibrium estimate.

The reference is the lumped heat balance of the fake tube (tests/core/fake_gauge.py,
domain notes section 2), whose steady state and time constant are closed form.
"""

import math
import os
import random
import sys

import pytest

from gaugecore.response import FastResponse, TransientFit, identify

sys.path.insert(0, os.path.dirname(__file__))
import fake_gauge as fg  # noqa: E402

S = fg.S_MV_K
# the fake tube's balance in EMF units: P = C/S dE/dt + G0/S E + k2/S^2 E^2
C_E = fg.C_J_K / S
G_E = fg.G0_W_K / S
A2 = fg.K2_W_K2 / (S * S)


def heating_transient(ramp_s=1.6, t_end_s=90.0, dt_ms=100):
    """Times, EMFs and powers of the fake tube heated from cold with a current ramp."""
    clock = fg.Clock()
    rig = fg.Rig(pressure_pa=0.0, x_k=0.0, clock=clock)
    t, e, p = [], [], []
    while clock.ticks_ms() <= t_end_s * 1000:
        now = clock.ticks_ms()
        ma = fg.NOMINAL_MA * min(1.0, now / (ramp_s * 1000.0))
        rig.heater.set_ma(ma)
        t.append(now)
        e.append(rig.tube.emf_mv())
        p.append((ma * 1e-3) ** 2 * fg.R_OHM)
        clock.sleep_ms(dt_ms)
    return t, e, p


def test_identify_recovers_the_heat_balance():
    t, e, p = heating_transient()
    # above 2 mV: past the current ramp, whose piecewise power the central
    # difference cannot place exactly; then the errors are of order (dt/tau)^2
    c_e, g_e, a2 = identify(t, e, p, min_emf_mv=2.0)
    assert c_e == pytest.approx(C_E, rel=1e-3)
    assert g_e == pytest.approx(G_E, rel=1e-3)
    assert a2 == pytest.approx(A2, rel=1e-3)


def test_online_fit_equals_batch():
    t, e, p = heating_transient()
    fit = TransientFit(0.1)
    for a, b, c in zip(t, e, p):
        fit.add(a, b, c)
    assert fit.solve() == identify(t, e, p, 0.1)
    assert fit.used == sum(1 for v in e[1:-1] if v >= 0.1)  # every inner sample above 0.1 mV


def test_identify_refuses_a_flat_record():
    with pytest.raises(ValueError) as exc:
        identify([0, 100, 200], [1.0, 1.0, 1.0], [0.04, 0.04, 0.04])
    assert str(exc.value) == "heating transient too short to identify the response"
    with pytest.raises(ValueError) as exc:
        identify([0, 100], [1.0], [0.04, 0.04])
    assert str(exc.value) == "transient sequences differ in length"


def run_step(p_from, p_to, fast, seconds=40.0, noise_uv=0.0, seed=3):
    """Fake tube settled at p_from, pressure jumps to p_to at t=0: (t_s, EMF) of the output."""
    clock = fg.Clock()
    rig = fg.Rig(pressure_pa=p_from, clock=clock, pickup_fraction=0.0, noise_uv=noise_uv, seed=seed)
    rig.heater.set_ma(fg.NOMINAL_MA)
    p_w = (fg.NOMINAL_MA * 1e-3) ** 2 * fg.R_OHM
    for _ in range(50):  # settle the filter at the old pressure
        fast.update(rig.tc.read_uv() * 1e-3, p_w, clock.ticks_ms())
        clock.sleep_ms(100)
    rig.tube.sync()
    rig.tube.pressure_pa = p_to
    t0 = clock.ticks_ms()
    out = []
    while clock.ticks_ms() - t0 <= seconds * 1000:
        now = clock.ticks_ms()
        out.append(((now - t0) * 0.001, fast.update(rig.tc.read_uv() * 1e-3, p_w, now)))
        clock.sleep_ms(100)
    return out


def settle_time_s(trace, final, frac):
    last = 0.0
    for t, v in trace:
        if abs(v - final) > frac * abs(final):
            last = t
    return last


@pytest.mark.parametrize("p_from,p_to", [(13.3, 1.33), (1.33, 13.3)])
def test_estimate_reaches_equilibrium_long_before_the_filament(p_from, p_to):
    final = fg.steady_emf_mv(p_to)  # closed-form steady state
    tau = fg.steady_tau_s(p_to)
    est = run_step(p_from, p_to, FastResponse(C_E, A2, filter_ms=500, hold_ms=0))
    plain = run_step(p_from, p_to, FastResponse(0.0, 0.0, filter_ms=1, hold_ms=0))
    t_fast = settle_time_s(est, final, 0.005)
    t_plain = settle_time_s(plain, final, 0.005)
    # first order: the plain EMF needs tau ln(step / 0.5 %) to come within 0.5 %
    step = abs(fg.steady_emf_mv(p_from) - final) / final
    assert t_plain == pytest.approx(tau * math.log(step / 0.005), rel=0.25)
    # estimate: the equilibrium through a second-order low-pass (two poles at
    # tf = 0.5 s), step response 1 - (1 + t/tf) exp(-t/tf) (standard result
    # for a double real pole, e.g. Ogata, Modern Control Engineering, ch. 5)
    u = 1.0
    while (1.0 + u) * math.exp(-u) > 0.005 / step:
        u += 0.01
    assert t_fast == pytest.approx(0.5 * u, abs=0.5)
    assert t_plain > 4.0 * t_fast
    assert est[-1][1] == pytest.approx(final, rel=1e-4)


def test_steady_input_gives_the_input_exactly():
    f = FastResponse(C_E, A2, filter_ms=500)
    for k in range(200):
        out = f.update(9.5, 0.0408, 100 * k)
    assert out == pytest.approx(9.5, rel=1e-12)


def test_noise_follows_the_filter_formula():
    # white noise sigma at dt: variance of x2 ~ sigma^2 dt / (4 tf) and of
    # tau dx2/dt ~ sigma^2 dt tau^2 / (4 tf^3) (integrals of the second-order
    # low-pass's power response, |H|^2 = 1/(1 + w^2 tf^2)^2); stated in the module
    sigma_mv = 0.001
    rng = random.Random(5)
    e0 = fg.steady_emf_mv(1.33)
    f = FastResponse(C_E, A2, filter_ms=500, hold_ms=0)
    p_w = (fg.NOMINAL_MA * 1e-3) ** 2 * fg.R_OHM
    out = []
    for k in range(6000):
        y = f.update(e0 + rng.gauss(0.0, sigma_mv), p_w, 100 * k)
        if k > 100:
            out.append(y)
    mean = sum(out) / len(out)
    std = math.sqrt(sum((y - mean) ** 2 for y in out) / len(out))
    tau = fg.steady_tau_s(1.33)
    dt, tf = 0.1, 0.5
    predicted = sigma_mv * math.sqrt(dt / (4 * tf) + dt * tau * tau / (4 * tf ** 3))
    assert std == pytest.approx(predicted, rel=0.35)


def test_hold_stage_smooths_steady_noise():
    rng = random.Random(6)
    e0 = fg.steady_emf_mv(1.33)
    p_w = (fg.NOMINAL_MA * 1e-3) ** 2 * fg.R_OHM
    stds = []
    for hold_ms in (0, 2000):
        f = FastResponse(C_E, A2, filter_ms=500, hold_ms=hold_ms, hold_band_mv=0.02)
        out = [f.update(e0 + rng.gauss(0.0, 0.001), p_w, 100 * k) for k in range(3000)][100:]
        m = sum(out) / len(out)
        stds.append(math.sqrt(sum((y - m) ** 2 for y in out) / len(out)))
    assert stds[1] < 0.5 * stds[0]


def test_gain_is_bounded():
    f = FastResponse(C_E, A2, filter_ms=100, max_gain=2.0, hold_ms=0)
    f.update(1.0, 0.04, 0)
    out = f.update(11.0, 0.04, 100)  # a 10x jump in one sample
    assert out <= 2.0 * f._x2 + 1e-12


def test_zero_heat_capacity_passes_the_filtered_input():
    f = FastResponse(0.0, hold_ms=0)
    f.update(5.0, 0.04, 0)
    a = 100 / (500 + 100)
    x1 = 5.0 + a * (6.0 - 5.0)
    x2 = 5.0 + a * (x1 - 5.0)
    assert f.update(6.0, 0.04, 100) == pytest.approx(x2, rel=1e-15)


@pytest.mark.parametrize(
    "args,message",
    [
        ((-1.0,), "heat capacity must be >= 0 J/mV"),
        ((1.0, 0.0, 0), "derivative filter time must be > 0 ms"),
        ((1.0, 0.0, 500, 1.0), "max gain must be > 1"),
        ((1.0, 0.0, 500, 4.0, -1), "hold time and band must be >= 0"),
    ],
)
def test_validation_messages(args, message):
    with pytest.raises(ValueError) as exc:
        FastResponse(*args)
    assert str(exc.value) == message
