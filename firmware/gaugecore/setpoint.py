"""Pressure setpoints: a relay with hysteresis, delay and fail-safe.

Setpoints are process aids, not safety interlocks. A thermocouple gauge
reads the heat loss of a filament, which depends on the gas, on contamination
and on the tube's calibration; a relay driven from it must never be the only
thing that protects people or equipment. Interlocks that matter belong to
independent, rated hardware designed to local codes and licensed practice.

Behaviour
---------
direction "below": the relay energises when the pressure is below `on_pa`
and de-energises when it is above `off_pa` (off_pa > on_pa: the band between
them is the hysteresis). direction "above" mirrors it (off_pa < on_pa).

Both transitions honour `delay_ms`: the condition must hold on every update
for delay_ms before the output changes; a reading that breaks it restarts the
wait. Fail-safe is immediate: any state other than "ok", "under" or "over"
(that is "invalid", "fault", a stale reading reported as a fault) or a
missing or non-finite pressure de-energises the relay at once, without delay,
and restarts the wait. "under"/"over" readings use the table bound they carry
as the pressure, so keep thresholds inside the table's range (configure()
checks that when the range is given).

Every change of output is recorded with its cause in a ring of the last
`n_events` (time_ms, energised, cause) records. Causes read like
"below 1.33e+01 Pa for 2000 ms", "above 2.00e+01 Pa for 0 ms" or
"fail-safe: heater-open". Cause strings for the two thresholds are built in
configure(), so update() allocates only when the output changes.
"""

BELOW = "below"
ABOVE = "above"

_USABLE = ("ok", "under", "over")
MAX_DELAY_MS = 3600000  # one hour; longer delays are almost surely a typo


class Setpoint:
    """One relay driven by one channel's pressure.

    relay: object with set(on); False is the de-energised, safe state.
    """

    def __init__(
        self,
        relay,
        on_pa,
        off_pa,
        direction=BELOW,
        delay_ms=0,
        name="SP1",
        n_events=32,
        p_min_pa=None,
        p_max_pa=None,
    ):
        if not (isinstance(n_events, int) and n_events >= 1):
            raise ValueError("%s: n_events must be an integer >= 1, not %r" % (name, n_events))
        self._relay = relay
        self.name = name
        self._ring = [None] * n_events
        self._head = 0  # next slot to write
        self._count = 0
        self.energised = False
        self._since_ms = None  # when the pending change's condition began
        self.on_pa = self.off_pa = 0.0
        self.direction = BELOW
        self.delay_ms = 0
        self.configure(on_pa, off_pa, direction, delay_ms, p_min_pa, p_max_pa)
        relay.set(False)

    def configure(self, on_pa, off_pa, direction=BELOW, delay_ms=0, p_min_pa=None, p_max_pa=None):
        """Validate and apply a configuration (ValueError, nothing changed, if bad).

        p_min_pa/p_max_pa: the table's range; when given, both thresholds
        must lie inside it.
        """
        n = self.name
        if direction != BELOW and direction != ABOVE:
            raise ValueError("%s: direction must be 'below' or 'above', not %r" % (n, direction))
        for label, v in (("on_pa", on_pa), ("off_pa", off_pa)):
            if not isinstance(v, (int, float)) or not (0.0 < v < 1e30):  # rejects NaN, inf
                raise ValueError("%s: %s must be a pressure > 0 Pa, not %r" % (n, label, v))
        if direction == BELOW and not off_pa > on_pa:
            raise ValueError(
                "%s: off_pa (%.2e Pa) must be above on_pa (%.2e Pa) for a 'below' setpoint"
                % (n, off_pa, on_pa)
            )
        if direction == ABOVE and not off_pa < on_pa:
            raise ValueError(
                "%s: off_pa (%.2e Pa) must be below on_pa (%.2e Pa) for an 'above' setpoint"
                % (n, off_pa, on_pa)
            )
        if not (isinstance(delay_ms, int) and 0 <= delay_ms <= MAX_DELAY_MS):
            raise ValueError(
                "%s: delay_ms must be an integer 0..%d, not %r" % (n, MAX_DELAY_MS, delay_ms)
            )
        lo = min(on_pa, off_pa)
        hi = max(on_pa, off_pa)
        if (p_min_pa is not None and lo < p_min_pa) or (p_max_pa is not None and hi > p_max_pa):
            raise ValueError(
                "%s: thresholds %.2e..%.2e Pa lie outside the table's range %s..%s Pa"
                % (n, lo, hi, _fmt(p_min_pa), _fmt(p_max_pa))
            )
        other = ABOVE if direction == BELOW else BELOW
        self.on_pa = float(on_pa)
        self.off_pa = float(off_pa)
        self.direction = direction
        self.delay_ms = delay_ms
        self._on_cause = "%s %.2e Pa for %d ms" % (direction, on_pa, delay_ms)
        self._off_cause = "%s %.2e Pa for %d ms" % (other, off_pa, delay_ms)
        self._since_ms = None

    def update(self, pressure_pa, state, now_ms, fault=None):
        """Feed one reading; switch the relay when due. `fault` names the cause of a fault state."""
        p = pressure_pa
        if (state not in _USABLE) or p is None or not (p == p) or p > 1e30 or p < -1e30:
            self._since_ms = None
            if self.energised:
                if fault is not None:
                    why = fault
                elif state in _USABLE:
                    why = "no pressure"
                else:
                    why = state
                self._switch(False, now_ms, "fail-safe: %s" % (why,))
            return
        en = self.energised
        if self.direction == BELOW:
            want = not (p > self.off_pa) if en else p < self.on_pa
        else:
            want = not (p < self.off_pa) if en else p > self.on_pa
        if want == en:  # nothing changes (the usual case)
            if self._since_ms is not None:
                self._since_ms = None
            return
        if self._since_ms is None:
            self._since_ms = now_ms
        if now_ms - self._since_ms >= self.delay_ms:
            self._switch(want, now_ms, self._on_cause if want else self._off_cause)

    def _switch(self, on, now_ms, cause):
        self._relay.set(on)
        self.energised = on
        self._since_ms = None
        self._ring[self._head] = (now_ms, on, cause)
        self._head = (self._head + 1) % len(self._ring)
        if self._count < len(self._ring):
            self._count += 1

    @property
    def events(self):
        """The recorded output changes, oldest first: list of (time_ms, energised, cause)."""
        n = len(self._ring)
        start = (self._head - self._count) % n
        return [self._ring[(start + k) % n] for k in range(self._count)]


def _fmt(p_pa):
    return "-" if p_pa is None else "%.2e" % p_pa
