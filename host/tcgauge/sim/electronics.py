"""Simulated front-end electronics: thermocouple ADC, heater current source,
cold-junction sensor and relays.

Each class implements one of the duck-typed interfaces the core sees
(DEVELOPERS.md, "Interfaces the core sees"), so gaugecore cannot tell them
from the board drivers. Every object owns its random generator
(`random.Random`, seeded by the caller): no global random state, identical
seeds give identical readings.

The devices do not hold the physics. They get it through callables:
- `source_uv()` (ADC): the true voltage at the ADC input, microvolts, now;
- `load_ohm()` (current source): the true heater resistance, now;
- `board_c()` / `ambient_c()`: true temperatures, now; `connector_c(t_s)`
  (cold junction): the connector temperature at simulated time t_s;
- `sync()`: bring the physics up to the clock's time (the Bench passes its
  channel's lazy advance; standalone, the default advances only the device).
Numbers marked "invented" are demo values for the simulator, not the
specification of any real part.
"""

import math
import random

INF = float("inf")


def _rng(seed_or_rng):
    """A random.Random from a seed (int or str) or an existing generator."""
    if isinstance(seed_or_rng, random.Random):
        return seed_or_rng
    return random.Random(seed_or_rng)


# ---------------------------------------------------------------- ADC

# Input-referred noise of a 24-bit delta-sigma ADC with PGA, by data rate:
# (amplifier noise uV rms, modulator noise uV rms before the PGA gain).
# Two-stage model: n(gain) = sqrt(n_amp^2 + (n_mod / gain)^2). The shape
# (noise rising roughly as sqrt(data rate), PGA noise dominating at high
# gain) follows the noise tables of typical 24-bit delta-sigma datasheets
# (e.g. the TI ADS1220 datasheet, "Noise Performance" tables); the values are
# from memory / typical, not copied from any datasheet.
ADC_NOISE_TABLE_UV = {
    20: (0.10, 1.6),
    45: (0.15, 2.4),
    90: (0.21, 3.4),
    175: (0.30, 4.8),
    330: (0.42, 6.8),
    600: (0.60, 9.5),
    1000: (0.85, 14.0),
}
ADC_GAINS = (1, 2, 4, 8, 16, 32, 64, 128)


def adc_noise_uv(data_rate_sps, gain):
    """Input-referred rms noise (uV) of the modelled ADC at this rate and gain."""
    try:
        n_amp, n_mod = ADC_NOISE_TABLE_UV[data_rate_sps]
    except KeyError:
        raise ValueError(
            "adc: data rate %r sps is not in the noise table (%s)"
            % (data_rate_sps, ", ".join(str(r) for r in sorted(ADC_NOISE_TABLE_UV)))
        )
    return math.sqrt(n_amp * n_amp + (n_mod / gain) ** 2)


class SimAdc:
    """Thermocouple input: a bipolar delta-sigma ADC with PGA.

    Full scale is +/- Vref/gain; codes run from -2**(bits-1) to 2**(bits-1)-1
    and one code is FS / 2**(bits-1). A reading is the true input (via
    `source_uv`) times (1 + gain_error), plus offset and gaussian noise, scaled
    by the reference's drift (the reading is converted with the nominal Vref,
    the true Vref drifts by `vref_tc_ppm_k` per kelvin of board temperature
    from 25 C), quantised and clipped at full scale, as a real ADC does.
    `read_uv()` takes one conversion time (1 / data rate) of simulated time
    and reports the input as it is at the end of the conversion.

    Fault flags (set by tcgauge.sim.faults): `input_open` (the bias resistors
    of the burnout-detect front end pull the floating input to the positive
    rail: the code clips at +full scale), `input_shorted` (0 uV at the input),
    `dropout_probability` (each conversion sees an open input with this
    probability), `stuck` (the last code forever), `saturated` (+full scale
    code), `no_response` (OSError).
    """

    def __init__(
        self,
        clock,
        source_uv,
        rng=0,
        bits=24,
        gain=32,
        vref_v=2.5,
        data_rate_sps=90,
        noise_uv=None,
        offset_uv=1.5,  # invented
        gain_error=0.0008,  # invented, within a typical +/-0.1 % PGA gain error
        vref_tc_ppm_k=8.0,  # invented, a typical low-drift reference
        board_c=None,
        sync=None,
    ):
        if bits < 8 or bits > 32:
            raise ValueError("adc: bits must be 8..32, not %r" % (bits,))
        self.clock = clock
        self._source_uv = source_uv
        self._rng = _rng(rng)
        self.bits = int(bits)
        self.vref_v = float(vref_v)
        self.offset_uv = float(offset_uv)
        self.gain_error = float(gain_error)
        self.vref_tc_ppm_k = float(vref_tc_ppm_k)
        self._board_c = board_c or (lambda: 25.0)
        self._sync = sync or (lambda: None)
        self._noise_override_uv = noise_uv
        self.gain = 1
        self.data_rate_sps = 20
        self.set_gain(gain)
        self.set_data_rate(data_rate_sps)
        self.last_code = 0
        # fault flags
        self.input_open = False
        self.input_shorted = False
        self.dropout_probability = 0.0
        self.stuck = False
        self.saturated = False
        self.no_response = False
        self.reads = 0

    # --- configuration
    def set_gain(self, gain):
        """Select the PGA gain (1, 2, 4, ..., 128); full scale = Vref/gain."""
        if gain not in ADC_GAINS:
            raise ValueError("adc: gain must be one of 1, 2, 4, 8, 16, 32, 64, 128, not %r" % (gain,))
        self.gain = int(gain)
        self._update()

    def set_data_rate(self, data_rate_sps):
        """Select the data rate; sets conversion time and noise."""
        adc_noise_uv(data_rate_sps, self.gain)  # validates
        self.data_rate_sps = data_rate_sps
        self._update()

    def _update(self):
        self.full_scale_uv = self.vref_v * 1e6 / self.gain
        self.lsb_uv = self.full_scale_uv / (1 << (self.bits - 1))
        self.code_max = (1 << (self.bits - 1)) - 1
        self.code_min = -(1 << (self.bits - 1))
        self.conversion_us = int(round(1e6 / self.data_rate_sps))
        if self._noise_override_uv is not None:
            self.noise_uv = float(self._noise_override_uv)
        else:
            self.noise_uv = adc_noise_uv(self.data_rate_sps, self.gain)

    # --- the interface the core sees
    def read_uv(self):
        """Convert once (takes 1/data-rate of simulated time); microvolts measured."""
        self.clock.sleep_us(self.conversion_us)
        self._sync()  # physics and scheduled faults up to the end of the conversion
        self.reads += 1
        if self.no_response:
            raise OSError("adc: no response")
        return self.code_to_uv(self.read_code())

    def code_to_uv(self, code):
        """Microvolts for an output code (nominal Vref and gain)."""
        return code * self.lsb_uv

    def read_code(self):
        """One output code at the current time (no clock advance)."""
        if self.stuck:
            return self.last_code
        if self.saturated:
            code = self.code_max
        else:
            if self.input_open or (
                self.dropout_probability > 0.0 and self._rng.random() < self.dropout_probability
            ):
                # floating input pulled to the positive rail by the bias
                # resistors: far beyond +full scale
                v_uv = self.vref_v * 1e6
            elif self.input_shorted:
                v_uv = 0.0
            else:
                v_uv = self._source_uv()
            drift = 1.0 + self.vref_tc_ppm_k * 1e-6 * (self._board_c() - 25.0)
            v_uv = (v_uv * (1.0 + self.gain_error) + self.offset_uv + self._rng.gauss(0.0, self.noise_uv)) / drift
            code = int(round(v_uv / self.lsb_uv))
            if code > self.code_max:
                code = self.code_max
            elif code < self.code_min:
                code = self.code_min
        self.last_code = code
        return code


# ---------------------------------------------------------------- current source


class SimCurrentSource:
    """Heater driver: a DAC-set, sense-resistor-regulated current source
    behind an H-bridge.

    Model (stated, invented values):
    - The DAC (`dac_bits` over 0..`span_ma`) sets a voltage V_set = code LSB
      R_nom (1 + dac_gain_error) + dac_offset_ma R_nom. The regulator holds
      the voltage across the sense resistor at V_set, so the true current is
      V_set / R_s, where R_s = R_nom (1 + sense_tolerance)
      (1 + sense_tc_ppm_k 1e-6 (T_s - 25)) and T_s = ambient + self-heating
      (`sense_theta_k_w` I^2 R_s).
    - `read_ma()` measures the voltage across the same sense resistor and
      divides by R_nom: it reads V_set / R_nom, not the true current. The
      known error is true/read = R_nom / R_s (a firmware loop on read_ma()
      removes the DAC errors but not the sense resistor's).
    - Compliance: the source can put at most V_comp = supply_v - headroom_v
      across heater + sense resistor + leads; an open or high-resistance
      heater gets V_comp / R_total and read_v() sits at compliance.
    - First-order settling toward the target with time constant `tau_us`;
      `set_polarity(-1)` flips the sign of the current (and of the pickup).
    Fault flags (tcgauge.sim.faults): `load_open`, `load_short_ohm`
    (resistance of a short across the heater, None when healthy), `supply_v`.
    """

    def __init__(
        self,
        clock,
        load_ohm,
        rng=0,
        ambient_c=None,
        dac_bits=16,
        span_ma=250.0,  # invented
        dac_gain_error=0.002,  # invented
        dac_offset_ma=0.05,  # invented
        sense_ohm=2.0,  # invented nominal
        sense_tolerance=0.0005,  # invented: this unit's resistor is +0.05 % high
        sense_tc_ppm_k=50.0,  # invented, a typical thick-film-ish resistor
        sense_theta_k_w=60.0,  # invented self-heating
        lead_ohm=0.2,  # invented cable and connector resistance
        supply_v=12.0,  # invented
        headroom_v=1.5,  # invented
        tau_us=300.0,  # invented, within 100 us .. 1 ms
        read_noise_ma=0.002,  # invented
        read_v_noise_v=0.0002,  # invented
        read_time_us=100,  # invented readback conversion time
        sync=None,
    ):
        self.clock = clock
        self._load_ohm = load_ohm if callable(load_ohm) else (lambda r=float(load_ohm): r)
        self._rng = _rng(rng)
        self._ambient_c = ambient_c or (lambda: 25.0)
        self.dac_bits = int(dac_bits)
        self.span_ma = float(span_ma)
        self.dac_gain_error = float(dac_gain_error)
        self.dac_offset_ma = float(dac_offset_ma)
        self.sense_ohm = float(sense_ohm)
        self.sense_tolerance = float(sense_tolerance)
        self.sense_tc_ppm_k = float(sense_tc_ppm_k)
        self.sense_theta_k_w = float(sense_theta_k_w)
        self.lead_ohm = float(lead_ohm)
        self.supply_v = float(supply_v)
        self.headroom_v = float(headroom_v)
        self.tau_s = tau_us * 1e-6
        self.read_noise_ma = float(read_noise_ma)
        self.read_v_noise_v = float(read_v_noise_v)
        self.read_time_us = int(read_time_us)
        self.dac_lsb_ma = self.span_ma / ((1 << self.dac_bits) - 1)
        self.dac_code = 0
        self.enabled = False
        self.polarity = 1
        self.current_a = 0.0  # true current through the load, signed
        self.load_open = False
        self.load_short_ohm = None
        if sync is None:
            self._t_us = clock.ticks_us()
            sync = self._self_sync
        self._sync = sync

    def _self_sync(self):
        now = self.clock.ticks_us()
        if now > self._t_us:
            self.advance((now - self._t_us) * 1e-6)
            self._t_us = now

    # --- the interface the core sees
    def set_ma(self, current_ma):
        """Command the heater current magnitude (mA, 0..span) and enable the output."""
        if not current_ma >= 0.0:
            raise ValueError("heater: current must be >= 0 mA, not %r" % (current_ma,))
        if current_ma > self.span_ma:
            raise ValueError("heater: %.3f mA is above the %.1f mA span" % (current_ma, self.span_ma))
        self._sync()
        self.dac_code = int(round(current_ma / self.dac_lsb_ma))
        self.enabled = True

    def off(self):
        """Disable the output (current decays with the settling time constant)."""
        self._sync()
        self.enabled = False
        self.dac_code = 0

    def set_polarity(self, polarity):
        """H-bridge direction: +1 or -1."""
        if polarity not in (1, -1):
            raise ValueError("heater: polarity must be +1 or -1, not %r" % (polarity,))
        self._sync()
        self.polarity = int(polarity)

    def read_ma(self):
        """Sensed current, mA, signed: V(sense resistor) / R_nominal, plus readout noise."""
        self.clock.sleep_us(self.read_time_us)
        self._sync()
        v_sense = self.current_a * self.sense_true_ohm()
        return v_sense / self.sense_ohm * 1e3 + self._rng.gauss(0.0, self.read_noise_ma)

    def read_v(self):
        """Volts across the heater terminals, signed with the current."""
        self.clock.sleep_us(self.read_time_us)
        self._sync()
        r_load = self.load_ohm()
        if r_load == INF:
            v = self.polarity * self.compliance_v() if self.enabled else 0.0
        else:
            v = self.current_a * r_load
        return v + self._rng.gauss(0.0, self.read_v_noise_v)

    # --- model
    def compliance_v(self):
        """Most voltage the source can put across heater + sense resistor + leads."""
        v = self.supply_v - self.headroom_v
        return v if v > 0.0 else 0.0

    def sense_true_ohm(self):
        """True sense resistance at its present temperature."""
        t_s = self._ambient_c() + self.sense_theta_k_w * self.current_a * self.current_a * self.sense_ohm
        return self.sense_ohm * (1.0 + self.sense_tolerance) * (1.0 + self.sense_tc_ppm_k * 1e-6 * (t_s - 25.0))

    def load_ohm(self):
        """Resistance the source drives: the heater, open, or shorted."""
        if self.load_open:
            return INF
        r_h = self._load_ohm()
        if self.load_short_ohm is not None:
            r_s = self.load_short_ohm
            return r_s * r_h / (r_s + r_h)
        return r_h

    def filament_fraction(self):
        """Fraction of the source current that flows through the filament."""
        if self.load_open:
            return 0.0
        if self.load_short_ohm is not None:
            return self.load_short_ohm / (self.load_short_ohm + self._load_ohm())
        return 1.0

    def target_a(self):
        """Current the regulator is driving toward now (signed, compliance-limited)."""
        if not self.enabled:
            return 0.0
        r_load = self.load_ohm()
        if r_load == INF:
            return 0.0
        v_set = (self.dac_code * self.dac_lsb_ma * (1.0 + self.dac_gain_error) + self.dac_offset_ma) * 1e-3 * self.sense_ohm
        r_sense = self.sense_true_ohm()
        i_reg = v_set / r_sense
        i_max = self.compliance_v() / (r_load + r_sense + self.lead_ohm)
        if i_reg > i_max:
            i_reg = i_max
        return self.polarity * i_reg

    def advance(self, dt_s):
        """Settle for dt_s (exact first-order step); return the filament's rms current (A),
        signed with the current at the end of the step."""
        if dt_s <= 0.0:
            return self.filament_current_a()
        a = self.target_a()
        b = self.current_a - a
        if b == 0.0:
            i_rms = abs(a)
        else:
            x = dt_s / self.tau_s
            e = math.exp(-x) if x < 700.0 else 0.0
            self.current_a = a + b * e
            # mean of (a + b exp(-t/tau))^2 over the step, exact
            mean_sq = a * a + 2.0 * a * b * (1.0 - e) / x + b * b * (1.0 - e * e) / (2.0 * x)
            i_rms = math.sqrt(mean_sq) if mean_sq > 0.0 else 0.0
            if abs(b * e) < 1e-12:
                self.current_a = a
        i_rms *= self.filament_fraction()
        return -i_rms if self.current_a < 0.0 else i_rms

    def filament_current_a(self):
        """True current through the filament now (signed)."""
        return self.current_a * self.filament_fraction()


# ---------------------------------------------------------------- cold junction


class SimColdJunction:
    """Cold-junction temperature sensor at the tube connector.

    First-order thermal lag (`tau_s`) behind the connector temperature
    (`connector_c(t_s)`, a function of simulated time, or a constant), a
    fixed accuracy offset, gaussian noise and the sensor's resolution
    (0.0625 C steps, as common 12-to-13-bit digital temperature sensors give:
    common practice, no published source). Fault flags (faults.py):
    `no_response` (OSError), `absurd_c` (a fixed absurd reading, or None).
    """

    def __init__(
        self,
        clock,
        connector_c,
        rng=0,
        offset_c=0.3,  # invented, inside a typical +/-0.5 C sensor accuracy
        noise_c=0.02,  # invented
        resolution_c=0.0625,
        tau_s=20.0,  # invented: sensor on the connector, bonded by a thermal pad
        read_time_us=0,
        sync=None,
    ):
        self.clock = clock
        self._connector_c = connector_c if callable(connector_c) else (lambda t_s, c=float(connector_c): c)
        self._rng = _rng(rng)
        self.offset_c = float(offset_c)
        self.noise_c = float(noise_c)
        self.resolution_c = float(resolution_c)
        self.tau_s = float(tau_s)
        self.read_time_us = int(read_time_us)
        self._sync = sync or (lambda: None)
        self._t_us = clock.ticks_us()
        self.sensor_c = self._connector_c(self._t_us * 1e-6)  # true temperature of the sensing element
        self.no_response = False
        self.absurd_c = None

    def _follow(self):
        """Lag the sensor behind the connector up to now: exact exponential
        steps of at most tau/20, connector temperature at each step's middle."""
        now = self.clock.ticks_us()
        max_us = max(1, int(self.tau_s * 1e6 / 20.0))
        while self._t_us < now:
            step_us = min(now - self._t_us, max_us)
            t_mid_s = (self._t_us + 0.5 * step_us) * 1e-6
            self._t_us += step_us
            k = 1.0 - math.exp(-step_us * 1e-6 / self.tau_s)
            self.sensor_c += (self._connector_c(t_mid_s) - self.sensor_c) * k

    def read_c(self):
        """Measured cold-junction temperature, deg C."""
        if self.read_time_us:
            self.clock.sleep_us(self.read_time_us)
        self._sync()
        self._follow()
        if self.no_response:
            raise OSError("cold junction: sensor not responding")
        if self.absurd_c is not None:
            return self.absurd_c
        t = self.sensor_c + self.offset_c + self._rng.gauss(0.0, self.noise_c)
        if self.resolution_c > 0.0:
            t = round(t / self.resolution_c) * self.resolution_c
        return t


# ---------------------------------------------------------------- relay


class SimRelay:
    """Relay output. `False` is the de-energised, safe state (the start state).

    `.history` records every switching as (t_us, state) in simulated time.
    """

    def __init__(self, clock, name="relay"):
        self.clock = clock
        self.name = name
        self.state = False
        self.history = []

    def set(self, on):
        """Energise (True) or release (False)."""
        on = bool(on)
        if on != self.state:
            self.state = on
            self.history.append((self.clock.ticks_us(), on))
