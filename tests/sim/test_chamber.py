"""Chambers and scenarios.

The pump-down is checked against the pumping equation V dp/dt = -S p + Q
(O'Hanlon, A User's Guide to Vacuum Technology, chapter on pump-down; Roth,
Vacuum Technology, ch. 4; both cited from memory), integrated here
independently by classical Runge-Kutta, not by the closed form under test.
The Larkspur bell jar's numbers are invented for the demo.
"""

import math

import pytest

from tcgauge.sim import chamber
from tcgauge.sim.chamber import ATM_PA, LARKSPUR, Chamber, Scenario


def rk4_pumpdown(ch, p0, t_end, n=20000):
    """Integrate V dp/dt = -S p + Q numerically (classical RK4)."""
    def f(p):
        return (-ch.pump_speed_l_s * p + ch.gas_load_pa_l_s) / ch.volume_l
    h = t_end / n
    p = p0
    for _ in range(n):
        k1 = f(p)
        k2 = f(p + 0.5 * h * k1)
        k3 = f(p + 0.5 * h * k2)
        k4 = f(p + h * k3)
        p += h / 6.0 * (k1 + 2 * k2 + 2 * k3 + k4)
    return p


@pytest.mark.parametrize("t_s", [1.0, 8.0, 40.0, 100.0, 200.0])
def test_closed_form_pumpdown_solves_the_pumping_equation(t_s):
    assert LARKSPUR.pumpdown_pa(t_s) == pytest.approx(rk4_pumpdown(LARKSPUR, ATM_PA, t_s), rel=1e-6)


def test_larkspur_base_pressure_and_time_constant():
    # invented demo numbers: V = 12 L, S = 1.5 L/s, Q = 0.03 Pa L/s
    assert LARKSPUR.base_pressure_pa == pytest.approx(0.02, rel=1e-12)  # Q / S
    assert LARKSPUR.time_constant_s == pytest.approx(8.0, rel=1e-12)  # V / S
    assert LARKSPUR.pumpdown_pa(1e6) == pytest.approx(0.02, rel=1e-12)
    # one time constant takes the excess over base to 1/e
    assert LARKSPUR.pumpdown_pa(8.0) - 0.02 == pytest.approx((ATM_PA - 0.02) / math.e, rel=1e-12)


def test_pumpdown_time_is_the_inverse():
    t = LARKSPUR.pumpdown_time_s(1.0)
    assert LARKSPUR.pumpdown_pa(t) == pytest.approx(1.0, rel=1e-12)
    assert t == pytest.approx(8.0 * math.log((ATM_PA - 0.02) / (1.0 - 0.02)), rel=1e-12)
    with pytest.raises(ValueError, match=r"^chamber Larkspur bell jar never reaches 0.01 Pa \(base 0.02 Pa\)$"):
        LARKSPUR.pumpdown_time_s(0.01)


def test_vent_approaches_atmosphere_exponentially():
    # V dp/dt = C (p_atm - p): C/V = 0.5/12 per s
    tau = 12.0 / 0.5
    assert LARKSPUR.vent_pa(tau, 0.02) == pytest.approx(ATM_PA - (ATM_PA - 0.02) / math.e, rel=1e-12)


def test_chamber_rejects_nonsense():
    with pytest.raises(ValueError, match=r"^chamber volume_l must be > 0, got 0$"):
        Chamber("x", 0, 1.0, 0.0, 1.0)


def test_scenario_segments_join_continuously():
    s = Scenario(pressure_pa=ATM_PA).hold(5.0).pumpdown(60.0).hold(10.0).vent(30.0)
    assert s.duration_s == 105.0
    assert s.pressure_pa(-1.0) == ATM_PA
    assert s.pressure_pa(4.999) == ATM_PA
    assert s.pressure_pa(5.0 + 20.0) == pytest.approx(LARKSPUR.pumpdown_pa(20.0), rel=1e-12)
    p65 = LARKSPUR.pumpdown_pa(60.0)
    assert s.pressure_pa(65.0) == pytest.approx(p65, rel=1e-12)
    assert s.pressure_pa(70.0) == pytest.approx(p65, rel=1e-12)  # hold keeps the pressure
    assert s.pressure_pa(75.0 + 12.0) == pytest.approx(LARKSPUR.vent_pa(12.0, p65), rel=1e-12)
    assert s.pressure_pa(1e4) == pytest.approx(LARKSPUR.vent_pa(30.0, p65), rel=1e-12)  # holds after the end


def test_steps_and_log_ramp():
    s = Scenario(pressure_pa=0.1).step(10.0, 5.0).log_ramp(10.0, 1000.0)
    assert s.pressure_pa(0.0) == 10.0
    assert s.pressure_pa(4.9) == 10.0
    assert s.pressure_pa(10.0) == pytest.approx(100.0, rel=1e-12)  # geometric midpoint
    assert s.pressure_pa(15.0) == pytest.approx(1000.0, rel=1e-12)


def test_gas_changes_and_ambient_ramps_over_time():
    s = Scenario(gas="N2", ambient_c=22.0).hold(100.0).set_gas(30.0, "He").set_gas(60.0, "Ar")
    assert [s.gas(t) for t in (0.0, 29.99, 30.0, 59.0, 60.0, 1e3)] == ["N2", "N2", "He", "He", "Ar", "Ar"]
    s.ambient_ramp(10.0, 20.0, 32.0)
    assert s.ambient_c(0.0) == 22.0
    assert s.ambient_c(10.0) == 22.0
    assert s.ambient_c(20.0) == pytest.approx(27.0, rel=1e-12)
    assert s.ambient_c(30.0) == 32.0
    assert s.ambient_c(500.0) == 32.0
    with pytest.raises(ValueError, match=r"^scenario gas changes must be added in time order$"):
        s.set_gas(10.0, "N2")


def test_scenario_fault_events_are_validated():
    s = Scenario().fault(12.0, "tc-open", channel=1, clear_at_s=20.0)
    ev = s.fault_events[0]
    assert (ev.at_s, ev.name, ev.channel, ev.clear_at_s) == (12.0, "tc-open", 1, 20.0)
    with pytest.raises(ValueError, match=r"^unknown fault 'smoke' \(known: adc-fail, adc-saturated"):
        Scenario().fault(1.0, "smoke")
    with pytest.raises(ValueError, match=r"^fault tc-open: unexpected parameters volts$"):
        Scenario().fault(1.0, "tc-open", volts=3)
    with pytest.raises(ValueError, match=r"^fault tc-open: clear_at_s must be after at_s$"):
        Scenario().fault(5.0, "tc-open", clear_at_s=5.0)


def test_builtin_scenarios():
    assert sorted(chamber.SCENARIOS) == ["ambient-ramp", "calibration", "gas-change", "pumpdown", "steps",
                                         "vent"]
    for name in chamber.SCENARIOS:
        s = chamber.get_scenario(name)
        assert s.name == name and s.duration_s > 0.0
    pd = chamber.get_scenario("pumpdown")
    assert pd.pressure_pa(0.0) == ATM_PA
    assert pd.pressure_pa(300.0) == pytest.approx(LARKSPUR.base_pressure_pa, rel=1e-9)
    assert chamber.get_scenario("gas-change").gas(61.0) == "He"
    assert chamber.get_scenario("ambient-ramp").ambient_c(360.0) == pytest.approx(27.0, rel=1e-12)
    assert chamber.get_scenario("vent").pressure_pa(120.0) > 0.9 * ATM_PA
    with pytest.raises(ValueError, match=r"^unknown scenario 'flood' \(known: ambient-ramp, calibration, gas-change, "):
        chamber.get_scenario("flood")
