"""Setpoints (gaugecore.setpoint): hysteresis, delay, fail-safe, event ring.

Pressures are in pascals; 13.3 Pa is 0.1 Torr (NIST SP 811, B.8:
1 Torr = 101325/760 Pa). The thresholds themselves are invented demo values
for the Larkspur bell jar.
"""

import pytest

from gaugecore import units
from gaugecore.setpoint import Setpoint


class Relay:
    """Relay fake that records every set() call."""

    def __init__(self):
        self.calls = []

    def set(self, on):
        self.calls.append(on)

    @property
    def on(self):
        return self.calls[-1]


def feed(sp, samples, t0=0, dt=100, state="ok", fault=None):
    t = t0
    for p in samples:
        sp.update(p, state, t, fault)
        t += dt
    return t


def test_starts_de_energised():
    r = Relay()
    sp = Setpoint(r, 13.3, 20.0)
    assert r.calls == [False] and not sp.energised and sp.events == []


def test_below_with_hysteresis_and_no_delay():
    r = Relay()
    sp = Setpoint(r, 13.3, 20.0, direction="below")
    assert units.to_pa(0.1, "TORR") == pytest.approx(13.3322, abs=1e-4)  # NIST SP 811
    feed(sp, [30.0, 14.0, 13.3])  # 13.3 is not below 13.3
    assert not sp.energised
    sp.update(13.2, "ok", 300)
    assert sp.energised and r.on
    feed(sp, [15.0, 19.9, 20.0], t0=400)  # inside the band: holds
    assert sp.energised
    sp.update(20.1, "ok", 700)
    assert not sp.energised
    assert sp.events == [
        (300, True, "below 1.33e+01 Pa for 0 ms"),
        (700, False, "above 2.00e+01 Pa for 0 ms"),
    ]


def test_above_direction_mirrors():
    r = Relay()
    sp = Setpoint(r, 50.0, 40.0, direction="above", delay_ms=0, name="SP2")
    feed(sp, [10.0, 50.1, 45.0, 39.9])
    assert sp.events == [
        (100, True, "above 5.00e+01 Pa for 0 ms"),
        (300, False, "below 4.00e+01 Pa for 0 ms"),
    ]


def test_delay_on_both_transitions_and_restart_on_interruption():
    r = Relay()
    sp = Setpoint(r, 13.3, 20.0, delay_ms=2000)
    # below from t=0; at 1500 one reading above on_pa restarts the wait
    feed(sp, [10.0] * 15)  # t = 0..1400
    sp.update(14.0, "ok", 1500)
    feed(sp, [10.0] * 25, t0=1600)  # condition from 1600: energise at 3600
    assert sp.events == [(3600, True, "below 1.33e+01 Pa for 2000 ms")]
    # de-energising on the other threshold honours the delay too
    feed(sp, [25.0] * 21, t0=5000)  # above off_pa from 5000: release at 7000
    assert sp.events[-1] == (7000, False, "above 2.00e+01 Pa for 2000 ms")
    assert r.calls == [False, True, False]


def test_fail_safe_is_immediate_and_names_the_fault():
    r = Relay()
    sp = Setpoint(r, 13.3, 20.0, delay_ms=2000)
    feed(sp, [1.0] * 21)  # energised at 2000
    assert sp.energised
    sp.update(None, "fault", 2100, "heater-open")
    assert not sp.energised  # at once, no delay
    assert sp.events[-1] == (2100, False, "fail-safe: heater-open")
    # back to good readings: the full delay starts again
    feed(sp, [1.0] * 20, t0=2200)  # 2200..4100
    assert not sp.energised
    sp.update(1.0, "ok", 4200)
    assert sp.events[-1] == (4200, True, "below 1.33e+01 Pa for 2000 ms")


@pytest.mark.parametrize(
    "pressure, state, fault, cause",
    [
        (None, "invalid", None, "fail-safe: invalid"),
        (None, "fault", "stale", "fail-safe: stale"),
        (None, "fault", None, "fail-safe: fault"),
        (None, "ok", None, "fail-safe: no pressure"),
        (float("nan"), "ok", None, "fail-safe: no pressure"),
        (float("inf"), "ok", None, "fail-safe: no pressure"),
        (1.0, "weird", None, "fail-safe: weird"),
    ],
)
def test_every_unusable_reading_fails_safe(pressure, state, fault, cause):
    r = Relay()
    sp = Setpoint(r, 13.3, 20.0)
    sp.update(1.0, "ok", 0)
    assert sp.energised
    sp.update(pressure, state, 100, fault)
    assert not sp.energised and r.on is False
    assert sp.events[-1] == (100, False, cause)


def test_fail_safe_while_de_energised_records_nothing():
    r = Relay()
    sp = Setpoint(r, 13.3, 20.0)
    sp.update(None, "fault", 0, "tc-open")
    assert sp.events == [] and r.calls == [False]


def test_under_and_over_use_the_table_bound():
    # 'under' carries the table's lowest pressure: the true one is lower
    r = Relay()
    sp = Setpoint(r, 13.3, 20.0)
    sp.update(0.1, "under", 0)
    assert sp.energised
    sp.update(1330.0, "over", 100)
    assert not sp.energised
    assert [e[2] for e in sp.events] == ["below 1.33e+01 Pa for 0 ms", "above 2.00e+01 Pa for 0 ms"]


def test_event_ring_keeps_the_last_32():
    r = Relay()
    sp = Setpoint(r, 13.3, 20.0)
    t = 0
    for k in range(40):  # 80 changes
        sp.update(1.0, "ok", t)
        sp.update(100.0, "ok", t + 50)
        t += 100
    ev = sp.events
    assert len(ev) == 32
    assert ev[0] == (2400, True, "below 1.33e+01 Pa for 0 ms")  # changes 49..80
    assert ev[-1] == (3950, False, "above 2.00e+01 Pa for 0 ms")
    assert len(r.calls) == 81


def test_configure_validates_with_our_messages_and_changes_nothing_on_error():
    r = Relay()
    sp = Setpoint(r, 13.3, 20.0, name="SP1")
    cases = [
        ((20.0, 13.3, "below"), "SP1: off_pa (1.33e+01 Pa) must be above on_pa (2.00e+01 Pa) for a 'below' setpoint"),
        ((13.3, 20.0, "above"), "SP1: off_pa (2.00e+01 Pa) must be below on_pa (1.33e+01 Pa) for an 'above' setpoint"),
        ((13.3, 13.3, "below"), "SP1: off_pa (1.33e+01 Pa) must be above on_pa (1.33e+01 Pa) for a 'below' setpoint"),
        ((13.3, 20.0, "sideways"), "SP1: direction must be 'below' or 'above', not 'sideways'"),
        ((0.0, 20.0, "below"), "SP1: on_pa must be a pressure > 0 Pa, not 0.0"),
        ((13.3, float("nan"), "below"), "SP1: off_pa must be a pressure > 0 Pa, not nan"),
        ((13.3, "20", "below"), "SP1: off_pa must be a pressure > 0 Pa, not '20'"),
    ]
    for args, msg in cases:
        with pytest.raises(ValueError) as e:
            sp.configure(*args)
        assert str(e.value) == msg
    with pytest.raises(ValueError) as e:
        sp.configure(13.3, 20.0, "below", -5)
    assert str(e.value) == "SP1: delay_ms must be an integer 0..3600000, not -5"
    with pytest.raises(ValueError) as e:
        sp.configure(13.3, 20.0, "below", 100, p_min_pa=0.1, p_max_pa=15.0)
    assert str(e.value) == "SP1: thresholds 1.33e+01..2.00e+01 Pa lie outside the table's range 1.00e-01..1.50e+01 Pa"
    with pytest.raises(ValueError) as e:
        Setpoint(r, 13.3, 20.0, n_events=0)
    assert str(e.value) == "SP1: n_events must be an integer >= 1, not 0"
    assert (sp.on_pa, sp.off_pa, sp.direction, sp.delay_ms) == (13.3, 20.0, "below", 0)
    sp.configure(5.0, 8.0, "below", 500, p_min_pa=0.1, p_max_pa=1000.0)
    assert (sp.on_pa, sp.off_pa, sp.delay_ms) == (5.0, 8.0, 500)
