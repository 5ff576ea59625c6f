"""Vacuum zero on the fake tube: the current found, the response identified, refusals.

Reference: the fake tube's closed-form steady state (tests/core/fake_gauge.py):
the EMF E needs the power P = G0 x + k2 x^2 with x = E / S, so I = sqrt(P / R).
"""

import math
import os
import sys

import pytest

from gaugecore.channel import Channel
from gaugecore.zero import ZeroResult

sys.path.insert(0, os.path.dirname(__file__))
import fake_gauge as fg  # noqa: E402


def current_for_emf_ma(emf_mv, pressure_pa=0.0):
    x = emf_mv / fg.S_MV_K
    p_w = (fg.G0_W_K + fg.GGAS_W_K_PA * pressure_pa) * x + fg.K2_W_K2 * x * x
    return math.sqrt(p_w / fg.R_OHM) * 1e3


def make(pressure_pa=0.0, zero_emf_mv=None, noise_uv=0.2):
    rig = fg.Rig(pressure_pa=pressure_pa, noise_uv=noise_uv)
    table = fg.make_table()
    ch = Channel(0, rig.tc, rig.cj, rig.heater, rig.relays, table, fg.limits(zero_emf_mv))
    return rig, ch


def run(rig, ch, until_ms, stop=None):
    clock = rig.clock
    while clock.ticks_ms() < until_ms:
        ch.step(clock.ticks_ms())
        if stop is not None and stop():
            return
        clock.sleep_ms(max(1, ch.next_ms - clock.ticks_ms()))


def zero(rig, ch, start_ms=90000, limit_ms=600000, **options):
    run(rig, ch, start_ms)
    z = ch.start_zero(rig.clock.ticks_ms(), **options)
    run(rig, ch, limit_ms, stop=lambda: z.state != "running")
    return z


def test_zero_finds_the_current_for_the_nominal_emf():
    target = 11.0  # invented nominal EMF, above the 10.5 mV the tube gives at 165 mA
    rig, ch = make(pressure_pa=0.0, zero_emf_mv=target)
    z = zero(rig, ch)
    assert z.state == "done", z.reason
    want_ma = current_for_emf_ma(target)  # closed form, about 170 mA
    assert z.result.heater_ma == pytest.approx(want_ma, rel=2e-4)
    assert ch.regulator.target_ma == z.result.heater_ma  # applied to the channel
    # the identified heat balance is the fake tube's (P = C/S dE/dt + G0/S E + k2/S^2 E^2)
    assert z.result.c_e_j_per_mv == pytest.approx(fg.C_J_K / fg.S_MV_K, rel=0.02)
    assert z.result.g_e_w_per_mv == pytest.approx(fg.G0_W_K / fg.S_MV_K, rel=0.03)
    assert z.result.a2_w_per_mv2 == pytest.approx(fg.K2_W_K2 / fg.S_MV_K ** 2, rel=0.05)
    x = target / fg.S_MV_K
    tau = fg.C_J_K / (fg.G0_W_K + 2 * fg.K2_W_K2 * x)
    assert z.result.tau_s == pytest.approx(tau, rel=0.03)
    # and the fast response now uses them
    assert ch.response.c_e_j_per_mv == z.result.c_e_j_per_mv
    # readings resume after the zero, with the settled tube at its new EMF
    run(rig, ch, rig.clock.ticks_ms() + 60000)
    assert ch.state in ("ok", "under")
    assert ch.emf_mv == pytest.approx(target, abs=5 * 2e-4 * target)


def test_readings_are_invalid_while_zeroing():
    rig, ch = make(pressure_pa=0.0, zero_emf_mv=11.0)
    run(rig, ch, 90000)
    ch.start_zero(rig.clock.ticks_ms())
    seen = set()
    while rig.clock.ticks_ms() < 110000:
        if ch.step(rig.clock.ticks_ms()):
            seen.add((ch.state, ch.pressure_pa))
        rig.clock.sleep_ms(max(1, ch.next_ms - rig.clock.ticks_ms()))
    assert seen == {("invalid", None)}
    assert ch.regulator.state == "off"  # cooling for the heating transient


def test_refuses_when_the_emf_is_still_rising():
    rig, ch = make(pressure_pa=0.5)  # settled at 0.5 Pa ...
    run(rig, ch, 90000)
    rig.tube.sync()
    rig.tube.pressure_pa = 0.0  # ... the pump takes it down now: the EMF climbs for a minute
    z = ch.start_zero(rig.clock.ticks_ms())
    run(rig, ch, 110000, stop=lambda: z.state != "running")
    assert z.state == "refused"
    assert z.reason.startswith("EMF still rising (")
    assert z.reason.endswith(" mV/s): pressure not yet at base")
    assert ch.regulator.state != "off" and ch.regulator.target_ma == fg.NOMINAL_MA


def test_refuses_when_nominal_needs_more_current_than_allowed():
    # at 20 Pa the EMF is far below nominal: reaching it would need > 200 mA
    rig, ch = make(pressure_pa=20.0, zero_emf_mv=fg.steady_emf_mv(0.0))
    z = zero(rig, ch, start_ms=60000)
    assert z.state == "refused"
    need = fg.NOMINAL_MA * math.sqrt(fg.steady_emf_mv(0.0) / ch.emf_ref_mv)
    assert z.reason == (
        "nominal EMF needs %.1f mA, above the 200.0 mA limit: pressure not at base" % need)
    assert ch.regulator.target_ma == fg.NOMINAL_MA


def test_refuses_when_nominal_needs_less_current_than_allowed():
    rig, ch = make(pressure_pa=0.0, zero_emf_mv=3.0)
    z = zero(rig, ch, start_ms=60000)
    assert z.state == "refused"
    assert z.reason.startswith("nominal EMF needs ")
    assert z.reason.endswith(" mA, below the 120.0 mA limit: check the tube profile")


def test_result_round_trips_and_validates():
    r = ZeroResult(170.2, 11.0, 0.0439, 0.00293, 8.9e-5, 9.4, 123456)
    again = ZeroResult.from_dict(r.to_dict())
    assert again.to_dict() == r.to_dict()
    with pytest.raises(ValueError) as exc:
        ZeroResult.from_dict({"heater_ma": 1.0})
    assert str(exc.value) == "zero record lacks a field or has a wrong type"
    bad = r.to_dict()
    bad["c_e_j_per_mv"] = 0.0
    with pytest.raises(ValueError) as exc:
        ZeroResult.from_dict(bad)
    assert str(exc.value) == "zero record has a non-positive value"


def test_stored_result_is_applied():
    rig, ch = make()
    r = ZeroResult(170.0, 11.0, 0.0439, 0.00293, 8.9e-5, 9.4)
    ch.apply_zero(r)
    assert ch.regulator.target_ma == 170.0
    assert ch.response.c_e_j_per_mv == 0.0439 and ch.response.a2_w_per_mv2 == 8.9e-5
    with pytest.raises(ValueError):
        ch.apply_zero(ZeroResult(250.0, 11.0, 0.0439, 0.00293))  # outside 120..200 mA
