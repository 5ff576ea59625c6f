"""Fault monitor of one gauge channel: named faults, heater stop, recovery.

The channel feeds it every control tick (the sample rate assumed here is
10 Hz, `sample_ms=100`; all counts below are in samples at that rate, and
every fault is detected within 1 s of its onset at that rate).

======================  ==============================================  =====  ===========================
fault                   detected when                                   stop   recovery
======================  ==============================================  =====  ===========================
heater-short            R = V/I < short_frac * heater_ohm_min, with     yes    latched until clear()
                        I >= 20 % of target, for `persist_n` (2) checks
heater-open             regulator state "compliance" (the regulator     yes    latched until clear()
                        already waited its compliance_ms, 500 ms), or
                        R > open_factor * heater_ohm_max for 2 checks
adc-failure             read raised (ok False) for `persist_n` (2)      no     self-clears after
                        samples, or the same raw value `stuck_n` (8)           `good_n` (5) good samples
                        times in a row (stuck converter; not counted
                        while tc-open holds the input at its rail)
tc-open                 EMF >= emf_rail_mv or > emf_max_mv (far above   no     self-clears after 5 good
                        any physical value) for 2 samples
tc-short                |EMF| < tc_short_mv (0.1 mV) while heater_on,   no     self-clears after 5 good
                        on for `warmup_ms` (2 s: the filament is hot):
                        no heating shows, for `tc_short_n` (5) samples
cj-failure              sensor raised (None), outside cj_min_c..        no     self-clears after 5 good
                        cj_max_c (-40..85 C), or a step faster than
                        cj_rate_c_per_s (2 C/s, at least 0.25 C a step)
stale                   no fresh EMF sample (check_emf) for stale_ms    no     clears on the next fresh
                        (500 ms), seen by check_fresh()                        sample
======================  ==============================================  =====  ===========================

Priority (for `active`) follows the table's order: heater faults first (they
need action), then the converter (it explains the others), then the
thermocouple, the cold junction, staleness. Only heater faults set
`heater_must_stop`: with the thermocouple or cold junction lost the filament
is still driven at its normal current, and keeping it hot lets the reading
return at once when the fault goes away.

Detection times at 10 Hz, from the first bad sample (asserted in
tests/core/test_faults.py, on fakes and on the simulator): heater-short
0.1 s, heater-open 0.5 s (the regulator's compliance_ms; the check itself
adds nothing), adc-failure 0.1 s (raise) / 0.7 s (stuck), tc-open 0.1 s,
tc-short 0.4 s (after the warm-up), cj-failure 0 s, stale 0.5 s. The
channel runs check_heater at its faster heater tick (20 ms), which only
shortens the heater times. `check_adc(ok, now_ms, raw=None)`: pass the raw
code (or the averaged sample) as `raw` to enable stuck detection.
The thresholds' defaults are invented values for the demo Wren tube; a
channel passes its tube profile's values.

The checks allocate nothing beyond the floats of their arithmetic; `faults`
builds its tuple only when the set of active faults changed. Cost: a check
whose verdict is good for a fault at rest (no bad count, not active) returns
without the bookkeeping call, so a healthy channel pays a few comparisons per
check; `active` and `heater_must_stop` are attributes updated when the set of
active faults changes, not computed on each read.
"""

from gaugecore.compat import const

HEATER_SHORT = "heater-short"
HEATER_OPEN = "heater-open"
ADC = "adc-failure"
TC_OPEN = "tc-open"
TC_SHORT = "tc-short"
CJ_SENSOR = "cj-failure"
STALE = "stale"

# In priority order; the index is the fault's bit number.
NAMES = (HEATER_SHORT, HEATER_OPEN, ADC, TC_OPEN, TC_SHORT, CJ_SENSOR, STALE)

_HS = const(0)
_HO = const(1)
_ADC = const(2)
_TO = const(3)
_TS = const(4)
_CJ = const(5)
_ST = const(6)
_N = const(7)

# the same as masks (1 << index)
_B_HS = const(0b0000001)
_B_HO = const(0b0000010)
_B_ADC = const(0b0000100)
_B_TO = const(0b0001000)
_B_TS = const(0b0010000)
_B_CJ = const(0b0100000)
_B_ST = const(0b1000000)
_B_HEATER = const(0b0000011)

_LATCHED = const(0b0000011)  # heater-short, heater-open
_STOP = const(0b0000011)


class FaultMonitor:
    """Per-channel fault detection with a stated recovery rule per fault.

    `active` (highest-priority fault name or None) and `heater_must_stop`
    are plain attributes, kept current by the checks; read them, never set
    them.
    """

    def __init__(
        self,
        heater_ohm_min=0.8,
        heater_ohm_max=3.0,
        emf_max_mv=30.0,
        emf_rail_mv=None,
        tc_short_mv=0.1,
        warmup_ms=2000,
        stale_ms=500,
        cj_min_c=-40.0,
        cj_max_c=85.0,
        cj_rate_c_per_s=2.0,
        short_frac=0.3,
        open_factor=4.0,
        persist_n=2,
        stuck_n=8,
        tc_short_n=5,
        good_n=5,
        sample_ms=100,
    ):
        if not (0.0 < heater_ohm_min < heater_ohm_max):
            raise ValueError(
                "heater resistance range %r..%r ohm is invalid" % (heater_ohm_min, heater_ohm_max)
            )
        if not (emf_max_mv > 0.0 and tc_short_mv >= 0.0 and tc_short_mv < emf_max_mv):
            raise ValueError(
                "thermocouple limits invalid: need 0 <= tc_short_mv %r < emf_max_mv %r"
                % (tc_short_mv, emf_max_mv)
            )
        if not cj_min_c < cj_max_c:
            raise ValueError("cold-junction range %r..%r C is invalid" % (cj_min_c, cj_max_c))
        if persist_n < 1 or stuck_n < 2 or tc_short_n < 1 or good_n < 1:
            raise ValueError("fault counts must be persist_n>=1, stuck_n>=2, others>=1")
        self.short_ohm = short_frac * heater_ohm_min
        self.open_ohm = open_factor * heater_ohm_max
        self.emf_max_mv = emf_max_mv
        self.emf_rail_mv = emf_rail_mv
        self.tc_short_mv = tc_short_mv
        self.warmup_ms = warmup_ms
        self.stale_ms = stale_ms
        self.cj_min_c = cj_min_c
        self.cj_max_c = cj_max_c
        self.cj_rate_c_per_s = cj_rate_c_per_s
        self.persist_n = persist_n
        self.stuck_n = stuck_n
        self.tc_short_n = tc_short_n
        self.good_n = good_n
        self.sample_ms = sample_ms
        self._bad = [0] * _N  # consecutive bad checks per fault
        self._good = [0] * _N  # consecutive good checks per active fault
        self.detected_ms = [None] * _N  # when each active fault was raised
        self._mask = 0  # active faults
        # faults not at rest (bad count > 0 or active): a good check of a
        # fault at rest changes nothing, so the checks skip _verdict for it
        self._busy = 0
        self.active = None
        self.heater_must_stop = False
        self._faults_mask = -1
        self._faults = ()
        self._last_raw = None
        self._same_n = 0
        self._heater_on_since = None
        self._cj_last_c = None
        self._cj_last_ms = None
        self._cj_dt_ms = None  # the step limit of the last check_cj, kept while
        self._cj_rate = None  # dt and the rate stay the same
        self._cj_limit = 0.25
        self._cj_nlimit = -0.25
        self._h_target_ma = None  # target of the last check_heater and 20 % of it
        self._h_min_ma = 0.0
        self.fresh_ms = None  # last fresh sample (or first check_fresh): stale timeout start

    # -- state ------------------------------------------------------------
    @property
    def faults(self):
        """Tuple of the active fault names, highest priority first."""
        if self._faults_mask != self._mask:
            self._faults = tuple(NAMES[i] for i in range(_N) if (self._mask >> i) & 1)
            self._faults_mask = self._mask
        return self._faults

    def is_active(self, name):
        """True if the fault `name` is active."""
        return bool(self._mask & (1 << NAMES.index(name)))

    def clear(self):
        """Clear every fault, latched ones included, and restart the counters."""
        for i in range(_N):
            self._bad[i] = 0
            self._good[i] = 0
            self.detected_ms[i] = None
        self._set_mask(0)
        self._busy = 0
        self._last_raw = None
        self._same_n = 0
        self._cj_last_c = None
        self._cj_last_ms = None

    # -- bookkeeping ----------------------------------------------------------
    def _set_mask(self, m):
        # the only place the active set changes: `active` and
        # `heater_must_stop` follow it
        self._mask = m
        if m:
            i = 0
            while not (m >> i) & 1:
                i += 1
            self.active = NAMES[i]
        else:
            self.active = None
        self.heater_must_stop = bool(m & _STOP)

    def _verdict(self, i, bad, need, now_ms):
        # one check of fault i: count, raise after `need` bad, recover per rule
        bit = 1 << i
        if bad:
            self._good[i] = 0
            n = self._bad[i] + 1
            self._bad[i] = n
            self._busy |= bit
            if n >= need and not self._mask & bit:
                self._set_mask(self._mask | bit)
                self.detected_ms[i] = now_ms
            return
        self._bad[i] = 0
        m = self._mask
        if not m & bit:
            self._busy &= ~bit
        elif not _LATCHED & bit:
            g = self._good[i] + 1
            if g >= (1 if i == _ST else self.good_n):
                self._good[i] = 0
                self.detected_ms[i] = None
                self._set_mask(m & ~bit)
                self._busy &= ~bit
            else:
                self._good[i] = g

    def _rest(self, bits):
        # the bad counts of `bits` were reset: those not active are at rest
        self._busy = (self._busy & ~bits) | (self._mask & bits)

    # -- checks -----------------------------------------------------------
    # Each check skips _verdict when its verdict is good and the fault is at
    # rest (see _busy); the rules are those of _verdict alone.
    def check_heater(self, current_ma, target_ma, voltage_v, regulator_state, now_ms):
        """Heater open/short from the regulator's state and R = V/I."""
        if regulator_state == "off":
            self._bad[_HS] = 0
            self._bad[_HO] = 0
            self._rest(_B_HEATER)
            return
        if current_ma < 0.0:
            current_ma = -current_ma
        # R is judged only with a voltage and at least 20 % of the target current
        if target_ma != self._h_target_ma:
            self._h_target_ma = target_ma
            self._h_min_ma = 0.2 * target_ma
        sense = voltage_v is not None and current_ma > self._h_min_ma
        if sense:
            # |V| in mV (read_v() is signed with the current); v * -1000 is
            # exactly (-v) * 1000 and makes one float instead of two
            mv = voltage_v * 1000.0 if voltage_v >= 0.0 else voltage_v * -1000.0
        if regulator_state == "compliance":
            self._verdict(_HO, True, 1, now_ms)
        else:
            high = sense and mv > self.open_ohm * current_ma
            if high or self._busy & _B_HO:
                self._verdict(_HO, high, self.persist_n, now_ms)
        low = sense and mv < self.short_ohm * current_ma
        if low or self._busy & _B_HS:
            self._verdict(_HS, low, self.persist_n, now_ms)

    def check_emf(self, emf_mv, heater_on, now_ms):
        """Thermocouple open/short from one averaged EMF sample (also marks it fresh)."""
        self.fresh_ms = now_ms
        if self._busy & _B_ST:
            self._verdict(_ST, False, 1, now_ms)
        if emf_mv is None:
            return
        rail = self.emf_rail_mv
        high = emf_mv > self.emf_max_mv or (rail is not None and emf_mv >= rail)
        if high or self._busy & _B_TO:
            self._verdict(_TO, high, self.persist_n, now_ms)
        if not heater_on:
            self._heater_on_since = None
            self._bad[_TS] = 0
            self._rest(_B_TS)
            return
        since = self._heater_on_since
        if since is None:
            self._heater_on_since = since = now_ms
        if now_ms - since < self.warmup_ms:
            return
        t = self.tc_short_mv
        low = emf_mv < t and emf_mv > -t  # |EMF| < tc_short_mv, without abs()'s float
        if low or self._busy & _B_TS:
            self._verdict(_TS, low, self.tc_short_n, now_ms)

    def check_cj(self, t_c, now_ms):
        """Cold-junction sensor: None (read raised), implausible, or jumping."""
        if t_c is None:
            bad = True
        else:
            bad = not (self.cj_min_c <= t_c <= self.cj_max_c)
            last = self._cj_last_c
            if not bad and last is not None:
                dt_ms = now_ms - self._cj_last_ms
                rate = self.cj_rate_c_per_s
                if dt_ms != self._cj_dt_ms or rate != self._cj_rate:
                    limit = rate * dt_ms * 0.001
                    if limit < 0.25:
                        limit = 0.25
                    self._cj_limit = limit
                    self._cj_nlimit = -limit
                    self._cj_dt_ms = dt_ms
                    self._cj_rate = rate
                d = t_c - last  # |d| > limit, with no float beyond d
                bad = d > self._cj_limit or d < self._cj_nlimit
            self._cj_last_c = t_c
            self._cj_last_ms = now_ms
        if bad or self._busy & _B_CJ:
            self._verdict(_CJ, bad, 1, now_ms)

    def check_adc(self, ok, now_ms, raw=None):
        """Converter: ok False when the read raised; raw (optional) for stuck detection."""
        if not ok:
            self._verdict(_ADC, True, self.persist_n, now_ms)
            return
        if raw is not None:
            if self._mask & _B_TO:
                # an open thermocouple rails the input, so the converter reads one
                # code: that is tc-open's signature, not a stuck converter
                self._same_n = 0
            elif raw == self._last_raw:
                self._same_n += 1
            else:
                self._same_n = 1
                self._last_raw = raw
            if self._same_n >= self.stuck_n:
                self._verdict(_ADC, True, 1, now_ms)
                return
        if self._busy & _B_ADC:
            self._verdict(_ADC, False, self.persist_n, now_ms)

    def check_fresh(self, now_ms):
        """Stale data: no fresh sample within stale_ms."""
        if self.fresh_ms is None:
            self.fresh_ms = now_ms  # the timeout runs from the first check
        if now_ms - self.fresh_ms > self.stale_ms:
            self._verdict(_ST, True, 1, now_ms)
