"""Controller: stepping channels, the asyncio loop's fixed period, tick wrap."""

import asyncio
import os
import sys

import pytest

from gaugecore.channel import Channel
from gaugecore.controller import Controller

sys.path.insert(0, os.path.dirname(__file__))
import fake_gauge as fg  # noqa: E402


class Counter:
    """A stand-in channel that costs `load_ms` of clock time per step."""

    def __init__(self, clock, load_ms=0, every=1):
        self.clock = clock
        self.load_ms = load_ms
        self.every = every
        self.calls = []

    def step(self, now_ms):
        self.calls.append(now_ms)
        self.clock.sleep_ms(self.load_ms)
        return len(self.calls) % self.every == 0


def sim_sleeper(clock):
    async def sleep_ms(ms):
        clock.sleep_ms(ms)
        await asyncio.sleep(0)

    return sleep_ms


def test_step_runs_every_channel_and_reports_readings():
    clock = fg.Clock()
    a, b = Counter(clock, every=1), Counter(clock, every=2)
    got = []
    ctl = Controller([a, b], clock, on_reading=got.append)
    assert ctl.step(0) == 1 and got == [a]
    assert ctl.step(10) == 2 and got == [a, a, b]
    assert a.calls == [0, 10] and b.calls == [0, 10]


@pytest.mark.parametrize("load_ms", [0, 3, 9])
def test_period_holds_under_load(load_ms):
    clock = fg.Clock()
    ch = Counter(clock, load_ms=load_ms)
    ctl = Controller([ch], clock, sleep_ms=sim_sleeper(clock))
    asyncio.run(ctl.run(period_ms=10, cycles=500))
    starts = ch.calls
    assert len(starts) == 500
    assert all(b - a == 10 for a, b in zip(starts, starts[1:]))  # no drift, no jitter
    assert ctl.period_min_ms == ctl.period_max_ms == 10
    assert ctl.overruns == 0 and ctl.late_max_ms == 0


def test_overrun_restarts_the_grid_and_is_counted():
    clock = fg.Clock()
    ch = Counter(clock, load_ms=15)
    ctl = Controller([ch], clock, sleep_ms=sim_sleeper(clock))
    asyncio.run(ctl.run(period_ms=10, cycles=20))
    assert ctl.overruns == 19
    assert ctl.period_min_ms == ctl.period_max_ms == 15  # as fast as it can, no backlog burst


def test_stop_ends_the_loop():
    clock = fg.Clock()
    ch = Counter(clock)
    ctl = Controller([ch], clock, sleep_ms=sim_sleeper(clock))

    async def main():
        task = asyncio.ensure_future(ctl.run(period_ms=10))
        while len(ch.calls) < 7:
            await asyncio.sleep(0)
        ctl.stop()
        await task

    asyncio.run(main())
    assert len(ch.calls) == 7 and ctl.running is False


class WrappingClock:
    """MicroPython-like ticks: wrap at 2**30 ms, ticks_diff takes the short way round."""

    PERIOD = 1 << 30

    def __init__(self, start):
        self.t = start

    def ticks_ms(self):
        return self.t % self.PERIOD

    def ticks_diff(self, a, b):
        d = (a - b) % self.PERIOD
        return d - self.PERIOD if d >= self.PERIOD // 2 else d

    def sleep_ms(self, n):
        self.t += n


def test_monotonic_time_across_tick_wrap():
    clock = WrappingClock((1 << 30) - 25)
    ch = Counter(clock)
    ctl = Controller([ch], clock, sleep_ms=sim_sleeper(clock))
    asyncio.run(ctl.run(period_ms=10, cycles=6))
    assert ch.calls == [0, 10, 20, 30, 40, 50]  # straight through the wrap at 25 ms


def test_two_fake_channels_run_end_to_end():
    clock = fg.Clock()
    rigs = [fg.Rig(pressure_pa=p, clock=clock, noise_uv=0.2, seed=k) for k, p in enumerate((0.5, 5.0))]
    chans = [Channel(k, r.tc, r.cj, r.heater, r.relays, fg.make_table(), fg.limits())
             for k, r in enumerate(rigs)]
    ctl = Controller(chans, clock, sleep_ms=sim_sleeper(clock))
    asyncio.run(ctl.run(period_ms=5, cycles=24000))  # 120 s
    for ch, p in zip(chans, (0.5, 5.0)):
        assert ch.state == "ok"
        assert ch.pressure_pa == pytest.approx(p, rel=0.02)
        assert ch.seq == pytest.approx(1200, abs=1)


def test_validation_messages():
    with pytest.raises(ValueError) as exc:
        Controller([], fg.Clock())
    assert str(exc.value) == "controller needs at least one channel"
    ctl = Controller([Counter(fg.Clock())], fg.Clock())
    with pytest.raises(ValueError) as exc:
        asyncio.run(ctl.run(period_ms=0))
    assert str(exc.value) == "controller period must be > 0 ms"
