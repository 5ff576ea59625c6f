"""Thermocouple input: one ADS1220 input pair as the core's `read_uv()`.

Open-thermocouple check (SBAS501 8.3.10, burn-out current sources): every
`open_check_every` reads, one extra conversion runs with the 10 uA sources
on. A closed loop of a few ohms (plus the input series resistors) shifts it
by 10 uA * R; an open input is driven to positive full scale. While the last
check saw full scale, `read_uv()` returns the positive full scale (`rail_uv`),
which the core's fault monitor reports as tc-open; the next check that is not
saturated returns to normal readings. The sources are switched off before
any normal reading, so they add nothing to the EMF. An ADC fault (no DRDY,
bus error) raises OSError, as the core expects.

`Ads1115Input` is the budget alternative (ADS1115 at +/-0.256 V, 7.8 uV per
code, SBAS444 Table 3): it has no burn-out sources, so an open thermocouple
is only seen if the circuit biases the open input to a rail.
"""


class TcInput:
    """Channel `mux` (an ads1220.MUX_* pair) of `adc` in microvolts at the input."""

    def __init__(self, adc, mux, open_check_every=10, offset_uv=0.0):
        if open_check_every < 0:
            raise ValueError("open_check_every must be >= 0 (0: never)")
        self.adc = adc
        self.mux = mux
        self.open_check_every = open_check_every
        self.offset_uv = offset_uv
        self.rail_uv = (2 ** 23 - 1) * adc.uv_per_code  # positive full scale
        self.open = False
        self._count = 0

    def check_open(self):
        """One conversion with the burn-out sources on; True if the input is open."""
        adc = self.adc
        adc.set_mux(self.mux)
        adc.set_burnout(True)
        try:
            code = adc.read_code()
        finally:
            adc.set_burnout(False)
        self.open = adc.saturated(code) and code > 0
        return self.open

    def read_uv(self):
        """Input EMF in microvolts (the full scale while the input is open)."""
        n = self.open_check_every
        if n:
            if self._count == 0:
                self.check_open()
            self._count += 1
            if self._count >= n:
                self._count = 0
        uv = self.adc.read_uv(self.mux)
        if self.open:
            return self.rail_uv
        if self.offset_uv:
            return uv - self.offset_uv
        return uv


class Ads1115Input:
    """Input pair `mux` (an ads1115.MUX_* code) of an ADS1115 at +/-0.256 V, in microvolts."""

    def __init__(self, adc, mux, fsr_v=0.256, offset_uv=0.0):
        adc.pga_bits(fsr_v)  # ValueError now rather than on the first read
        self.adc = adc
        self.mux = mux
        self.fsr_v = fsr_v
        self.offset_uv = offset_uv

    def read_uv(self):
        """Input EMF in microvolts."""
        return self.adc.read_v(self.mux, self.fsr_v) * 1e6 - self.offset_uv
