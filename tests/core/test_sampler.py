"""Sampler: heater-pickup cancellation, phases, timing, errors (fake hardware)."""

import os
import sys

import pytest

from gaugecore.sampler import Sampler

sys.path.insert(0, os.path.dirname(__file__))
import fake_gauge as fg  # noqa: E402


class Port:
    """The heater port the sampler sees, straight onto the fake driver."""

    def __init__(self, heater, ma=fg.NOMINAL_MA):
        self.heater = heater
        self.ma = ma
        heater.set_ma(ma)

    def set_polarity(self, sign):
        self.heater.set_polarity(sign)

    def blank(self, on):
        if on:
            self.heater.off()
        else:
            self.heater.set_ma(self.ma)


def run(sampler, clock, t_end_ms):
    """Step the sampler at each time it asks for; return the completed samples."""
    out = []
    while clock.ticks_ms() < t_end_ms:
        if sampler.step(clock.ticks_ms()):
            out.append((sampler.time_ms, sampler.emf_uv, sampler.adc_ok, sampler.cj_c))
        nxt = sampler.next_ms
        clock.sleep_ms(max(1, nxt - clock.ticks_ms()))
    return out


def test_reversal_cancels_pickup_exactly():
    # pickup = f I R: 0.02 * 0.165 A * 1.5 ohm = 4.95 mV (domain notes section 7:
    # the offset's sign follows the current; reversing and averaging removes it)
    rig = fg.Rig(pressure_pa=1.0, pickup_fraction=0.02)
    s = Sampler(rig.tc, rig.cj, Port(rig.heater), period_ms=100, settle_ms=5)
    samples = run(s, rig.clock, 3000)
    true_uv = rig.tube.emf_mv() * 1000.0  # steady tube: constant EMF
    assert len(samples) == 30
    for _, emf_uv, ok, _ in samples:
        assert ok
        assert abs(emf_uv - true_uv) < 1e-6


def test_dc_mode_shows_the_pickup():
    rig = fg.Rig(pressure_pa=1.0, pickup_fraction=0.02)
    rig.heater.set_ma(fg.NOMINAL_MA)
    s = Sampler(rig.tc, rig.cj, None, mode="dc")
    samples = run(s, rig.clock, 1000)
    true_uv = rig.tube.emf_mv() * 1000.0
    pickup_uv = 0.02 * 0.165 * fg.R_OHM * 1e6  # f I R, Ohm's law
    assert samples[-1][1] - true_uv == pytest.approx(pickup_uv, rel=1e-9)


def test_off_window_reads_without_current():
    rig = fg.Rig(pressure_pa=1.0, pickup_fraction=0.02)
    s = Sampler(rig.tc, rig.cj, Port(rig.heater), mode="off-window", settle_ms=2)
    samples = run(s, rig.clock, 60000)
    # no current in the window: no pickup; the reading is the tube's EMF then
    assert abs(samples[-1][1] - rig.tc.reads[-1][3]) < 1e-9
    # but 2 ms of 100 off lowers the mean power by 2 %: the EMF settles near
    # the steady EMF at I sqrt(0.98) (P = I^2 R), which the table must allow for
    expect_uv = fg.steady_emf_mv(1.0, fg.NOMINAL_MA * 0.98 ** 0.5) * 1000.0
    assert abs(samples[-1][1] - expect_uv) < 0.002 * expect_uv
    assert rig.heater.enabled  # back on after every window


def test_phases_read_plus_then_minus_after_settling():
    rig = fg.Rig(pressure_pa=1.0)
    s = Sampler(rig.tc, rig.cj, Port(rig.heater), period_ms=100, settle_ms=7)
    run(s, rig.clock, 301)
    reads = rig.tc.reads
    # per sample: one read at the polarity left by the previous sample, a
    # reversal, settle_ms, one read at the other polarity
    assert [(t, pol) for t, pol, _, _ in reads[:6]] == [
        (0, 1), (7, -1), (100, -1), (107, 1), (200, 1), (207, -1)]
    flips = [c for c in rig.heater.calls if c[0] == "polarity"]
    assert flips[:3] == [("polarity", 0, -1), ("polarity", 100, 1), ("polarity", 200, -1)]


def test_pairs_average_more_reversals():
    rig = fg.Rig(pressure_pa=1.0, pickup_fraction=0.02)
    s = Sampler(rig.tc, rig.cj, Port(rig.heater), period_ms=100, settle_ms=5, pairs=3)
    samples = run(s, rig.clock, 1000)
    assert len(rig.tc.reads) == 6 * len(samples)
    assert abs(samples[-1][1] - rig.tube.emf_mv() * 1000.0) < 1e-6


@pytest.mark.parametrize("period_ms,n", [(100, 20), (200, 10), (50, 40)])
def test_sample_rate_is_configurable(period_ms, n):
    rig = fg.Rig(pressure_pa=1.0)
    s = Sampler(rig.tc, rig.cj, Port(rig.heater), period_ms=period_ms, settle_ms=5)
    samples = run(s, rig.clock, 2000)
    assert len(samples) == n
    times = [t for t, _, _, _ in samples]
    assert all(b - a == period_ms for a, b in zip(times, times[1:]))


def test_late_calls_skip_missed_periods_instead_of_bursting():
    rig = fg.Rig(pressure_pa=1.0)
    s = Sampler(rig.tc, rig.cj, Port(rig.heater), period_ms=100, settle_ms=5)
    s.start(0)
    assert not s.step(0)
    assert s.step(5)
    # the loop stalls for 1 s: the next sample starts at once, then the grid resumes
    assert not s.step(1005)
    assert s.step(1010)
    assert s.next_ms == 1105


def test_moving_average():
    rig = fg.Rig(pressure_pa=1.0, pickup_fraction=0.0)
    s = Sampler(rig.tc, rig.cj, Port(rig.heater), average_n=4, settle_ms=5)
    values = iter([1.0, 1.0, 3.0, 3.0, 5.0, 5.0, 7.0, 7.0, 9.0, 9.0])

    class Seq:
        def read_uv(self):
            return next(values)

    s.tc = Seq()
    out = run(s, rig.clock, 500)
    assert [v for _, v, _, _ in out] == [1.0, 2.0, 3.0, 4.0, 6.0]


def test_adc_and_cold_junction_errors_are_flagged():
    rig = fg.Rig(pressure_pa=1.0)
    s = Sampler(rig.tc, rig.cj, Port(rig.heater), settle_ms=5)
    run(s, rig.clock, 200)
    good = s.emf_uv
    rig.tc.fail = True
    rig.cj.fail = True
    out = run(s, rig.clock, 400)
    assert out[-1][2] is False  # adc_ok
    assert s.emf_uv == good  # the last good value stays, flagged
    assert s.cj_c is None and s.cj_ok is False
    rig.tc.fail = False
    rig.cj.fail = False
    out = run(s, rig.clock, 600)
    assert out[-1][2] is True and s.cj_c == 22.0


@pytest.mark.parametrize(
    "kwargs,message",
    [
        ({"mode": "ac"}, "sampling mode must be one of reverse, off-window, dc, not 'ac'"),
        ({"pairs": 0}, "pairs, reads and average_n must each be at least 1"),
        ({"period_ms": 0}, "sample period must be > 0 ms and settle time >= 0 ms"),
        ({"period_ms": 20, "settle_ms": 10},
         "sample period 20 ms is too short for 2 settle windows of 10 ms"),
    ],
)
def test_validation_messages(kwargs, message):
    rig = fg.Rig()
    with pytest.raises(ValueError) as e:
        Sampler(rig.tc, rig.cj, Port(rig.heater), **kwargs)
    assert str(e.value) == message


def test_reverse_mode_needs_a_heater_port():
    rig = fg.Rig()
    with pytest.raises(ValueError) as e:
        Sampler(rig.tc, rig.cj, None)
    assert str(e.value) == "sampling mode 'reverse' needs a heater port"
