"""Scheduler: runs the channels on one clock.

`step(now_ms)` does whatever is due on every channel and never blocks; a
test or a host loop may call it directly. `run(period_ms)` is the board's
loop: asyncio on MicroPython, the same code on CPython. It keeps a fixed
grid of start times (next start = previous due + period, not now + period),
so the time spent in `step` does not stretch the period; a cycle that
overruns its slot starts the grid afresh and is counted in `overruns`.

The clock is `ticks_ms()` (and `ticks_diff(a, b)` where it has one, as
MicroPython's `time` module and the simulator's clock do): the controller
turns its wrapping ticks into a monotonic millisecond count for the core.
Cycle statistics (no allocation per cycle): `cycles`, `overruns`,
`period_min_ms`, `period_max_ms`, `late_max_ms` (latest start after its
due time).
"""

try:
    import asyncio
except ImportError:  # older MicroPython ports
    import uasyncio as asyncio


def _plain_diff(a, b):
    return a - b


async def _asyncio_sleep_ms(ms):
    if hasattr(asyncio, "sleep_ms"):
        await asyncio.sleep_ms(ms)
    else:
        await asyncio.sleep(ms * 0.001)


class Controller:
    """All channels of the instrument on one clock.

    channels: sequence of gaugecore.channel.Channel. clock: `ticks_ms()`.
    sleep_ms: coroutine function(ms) the loop awaits between cycles (default
    asyncio's); the simulator passes one that advances its clock.
    on_reading(channel): optional callback for each new reading.
    """

    def __init__(self, channels, clock, sleep_ms=None, on_reading=None):
        if not channels:
            raise ValueError("controller needs at least one channel")
        self.channels = tuple(channels)
        self.clock = clock
        self._diff = getattr(clock, "ticks_diff", None) or _plain_diff
        self._sleep_ms = sleep_ms or _asyncio_sleep_ms
        self.on_reading = on_reading
        self.running = False
        self._last_ticks = None
        self._mono_ms = 0
        self.cycles = 0
        self.overruns = 0
        self.period_min_ms = None
        self.period_max_ms = None
        self.late_max_ms = 0

    def now_ms(self):
        """Monotonic milliseconds (from the first call) built from the clock's ticks."""
        t = self.clock.ticks_ms()
        if self._last_ticks is not None:
            self._mono_ms += self._diff(t, self._last_ticks)
        self._last_ticks = t
        return self._mono_ms

    def step(self, now_ms):
        """Do whatever is due on each channel at now_ms; number of new readings."""
        n = 0
        cb = self.on_reading
        for ch in self.channels:
            if ch.step(now_ms):
                n += 1
                if cb is not None:
                    cb(ch)
        return n

    def stop(self):
        """Make `run` return after its current cycle."""
        self.running = False

    async def run(self, period_ms=10, cycles=None):
        """Call step() every period_ms on a fixed grid until stop() (or `cycles`)."""
        if period_ms <= 0:
            raise ValueError("controller period must be > 0 ms")
        self.running = True
        due = self.now_ms()
        prev_start = None
        done = 0
        while self.running:
            start = self.now_ms()
            late = start - due
            if late > self.late_max_ms:
                self.late_max_ms = late
            if prev_start is not None:
                p = start - prev_start
                if self.period_min_ms is None or p < self.period_min_ms:
                    self.period_min_ms = p
                if self.period_max_ms is None or p > self.period_max_ms:
                    self.period_max_ms = p
            prev_start = start
            self.step(start)
            self.cycles += 1
            done += 1
            if cycles is not None and done >= cycles:
                break
            due += period_ms
            wait = due - self.now_ms()
            if wait < 0:
                self.overruns += 1
                due = self.now_ms()
                wait = 0
            await self._sleep_ms(wait)
        self.running = False
