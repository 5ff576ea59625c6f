"""Per-channel EMF sampling with heater-pickup cancellation.

With DC drive a junction welded to the heater picks up part of the heater's
IR drop: the measured EMF is E_th + s * f * I * R_h, where s = +1/-1 is the
current's polarity. The thermal EMF E_th depends on I^2 and so is the same at
both polarities; averaging one reading at +I and one at -I cancels the pickup:

    (E_th + f I R_h + E_th - f I R_h) / 2 = E_th

Modes:
- "reverse" (default): read, reverse the current, wait `settle_ms` for the
  current source to settle, read again; `pairs` reversals per sample. The
  polarity left at the end of a sample is where the next sample starts, so
  each sample costs one settle time per reversal.
- "off-window": switch the heater off for `settle_ms`, read, switch it back
  on. The filament cools far slower than the window, the pickup is zero.
- "dc": one plain reading (no cancellation; for AC-driven or isolated tubes).

The machine never sleeps: `step(now_ms)` does what is due and returns True
when a new averaged sample is complete. Its result is in the attributes
`emf_uv`, `cj_c`, `adc_ok`, `cj_ok`, `time_ms`, `seq`. `average_n` > 1 adds
a moving average over that many samples (buffer made once here). Samples
start on a fixed grid of `period_ms`; when calls come so late that whole
periods were missed, the grid restarts at the late start (no burst).

Off windows lower the mean heater power by the blanked fraction of the
period (window plus conversion time), which lowers the EMF: a table used
with that mode must be made in it, or the current raised to match.
"""

from gaugecore.compat import const

REVERSE = "reverse"
OFF_WINDOW = "off-window"
DC = "dc"
MODES = (REVERSE, OFF_WINDOW, DC)

_WAIT = const(0)  # waiting for the start of the next sample period
_SETTLE = const(1)  # waiting for the current source (or the heater off) to settle


class Sampler:
    """Sampling state machine for one channel.

    tc: `read_uv()`; cj: `read_c()`; heater: `set_polarity(sign)` (mode
    "reverse") and `blank(on)` (mode "off-window"); may be None in mode "dc".
    """

    def __init__(
        self,
        tc,
        cj,
        heater=None,
        period_ms=100,
        settle_ms=10,
        pairs=1,
        mode=REVERSE,
        average_n=1,
        reads=1,
    ):
        if mode not in MODES:
            raise ValueError("sampling mode must be one of %s, not %r" % (", ".join(MODES), mode))
        if heater is None and mode != DC:
            raise ValueError("sampling mode %r needs a heater port" % (mode,))
        if int(pairs) < 1 or int(reads) < 1 or int(average_n) < 1:
            raise ValueError("pairs, reads and average_n must each be at least 1")
        n_reads = 2 * int(pairs) if mode == REVERSE else 1
        if int(period_ms) <= 0 or int(settle_ms) < 0:
            raise ValueError("sample period must be > 0 ms and settle time >= 0 ms")
        if n_reads * int(settle_ms) >= int(period_ms):
            raise ValueError(
                "sample period %d ms is too short for %d settle windows of %d ms"
                % (period_ms, n_reads, settle_ms)
            )
        self.tc = tc
        self.cj = cj
        self.heater = heater
        self.mode = mode
        self.period_ms = int(period_ms)
        self.settle_ms = int(settle_ms)
        self.reads = int(reads)
        self._n_reads = n_reads
        self._avg = [0.0] * int(average_n)
        self._avg_n = int(average_n)
        self._avg_fill = 0
        self._avg_pos = 0
        self._phase = _WAIT
        self.due_ms = None  # next action time (read it as next_ms)
        self._period_ms_due = None  # start of the next sample period
        self._sign = 1
        self._acc_uv = 0.0
        self._count = 0
        self._ok = True
        self.blanking = False  # heater switched off for a read window
        self.emf_uv = 0.0
        self.raw_uv = 0.0  # last sample before the moving average
        self.cj_c = None
        self.adc_ok = True
        self.cj_ok = True
        self.time_ms = 0
        self.seq = 0

    def start(self, now_ms):
        """Begin sampling at `now_ms` (first sample period starts now)."""
        self.due_ms = now_ms
        self._period_ms_due = now_ms
        self._phase = _WAIT

    @property
    def next_ms(self):
        """When `step` next has something to do (None before `start`)."""
        return self.due_ms

    def reset_average(self):
        """Forget the moving-average history (after a zero or a gap)."""
        self._avg_fill = 0
        self._avg_pos = 0

    def step(self, now_ms):
        """Do whatever is due at `now_ms`; True when a new sample is complete."""
        # one call per phase: the reads and the averaging are inlined (a call
        # costs more than the rest of a phase under MicroPython), attributes
        # read once into locals, and no range object for the usual single read
        due = self.due_ms
        if due is None:
            self.start(now_ms)
            due = now_ms
        if now_ms - due < 0:
            return False
        if self._phase == _WAIT:
            if now_ms - self._period_ms_due >= self.period_ms:
                self._period_ms_due = now_ms  # periods were missed: restart the grid here
            self._acc_uv = 0.0
            self._count = 0
            self._ok = True
            try:
                self.cj_c = self.cj.read_c()
                self.cj_ok = True
            except OSError:
                self.cj_c = None
                self.cj_ok = False
            if self.mode == OFF_WINDOW:
                self.heater.blank(True)
                self.blanking = True
                self._phase = _SETTLE
                self.due_ms = now_ms + self.settle_ms
                return False
        # _SETTLE ends when its due time is reached: read now
        tc = self.tc
        reads = self.reads
        if reads == 1:
            try:
                self._acc_uv += tc.read_uv()
            except OSError:
                self._ok = False
        else:
            for _ in range(reads):
                try:
                    self._acc_uv += tc.read_uv()
                except OSError:
                    self._ok = False
        count = self._count + 1
        self._count = count
        if self.blanking:
            self.heater.blank(False)
            self.blanking = False
        n_reads = self._n_reads
        if count < n_reads:
            sign = -self._sign
            self._sign = sign
            self.heater.set_polarity(sign)
            self._phase = _SETTLE
            self.due_ms = now_ms + self.settle_ms
            return False
        # sample complete
        ok = self._ok
        self.adc_ok = ok
        if ok:
            value = self._acc_uv / (n_reads * reads)
            self.raw_uv = value
            n = self._avg_n
            if n == 1:
                self.emf_uv = value
            else:
                self._avg[self._avg_pos] = value
                self._avg_pos = (self._avg_pos + 1) % n
                if self._avg_fill < n:
                    self._avg_fill += 1
                total = 0.0
                for i in range(self._avg_fill):
                    total += self._avg[i]
                self.emf_uv = total / self._avg_fill
        self.time_ms = now_ms
        self.seq += 1
        # next period on the fixed grid
        due = self._period_ms_due + self.period_ms
        self._period_ms_due = due
        self.due_ms = due
        self._phase = _WAIT
        return True
