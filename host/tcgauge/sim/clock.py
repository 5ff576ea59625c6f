"""The simulator's clock: integer microseconds of simulated time.

It offers the clock interface the core sees (DEVELOPERS.md, "Interfaces the
core sees"): `ticks_ms()`, `ticks_us()`, `sleep_ms(n)`, `sleep_us(n)`, plus
`ticks_diff`/`ticks_add` with MicroPython's argument order. Simulated ticks
never wrap (MicroPython's do, at 2**30); code that uses `ticks_diff` works
with both. Sleeping only moves the clock: the physics catches up lazily when
a device is next read or commanded (see bench.py).
"""


class SimClock:
    """Simulated time, integer microseconds from 0."""

    def __init__(self, t_us=0):
        self._t_us = int(t_us)

    def ticks_us(self):
        """Simulated microseconds since start."""
        return self._t_us

    def ticks_ms(self):
        """Simulated milliseconds since start (floor)."""
        return self._t_us // 1000

    def ticks_diff(self, end, start):
        """end - start, as MicroPython's time.ticks_diff(end, start)."""
        return end - start

    def ticks_add(self, ticks, delta):
        """ticks + delta, as MicroPython's time.ticks_add."""
        return ticks + delta

    def sleep_us(self, n):
        """Advance simulated time by n microseconds (n >= 0)."""
        n = int(n)
        if n < 0:
            raise ValueError("clock: cannot sleep a negative time (%d us)" % n)
        self._t_us += n

    def sleep_ms(self, n):
        """Advance simulated time by n milliseconds (n >= 0; fractions round to 1 us)."""
        self.sleep_us(int(round(n * 1000)))

    def sleep(self, seconds):
        """Advance simulated time by `seconds` (rounded to 1 us)."""
        self.sleep_us(int(round(seconds * 1e6)))

    @property
    def time_s(self):
        """Simulated seconds since start (float)."""
        return self._t_us * 1e-6
