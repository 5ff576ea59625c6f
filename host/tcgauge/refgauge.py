"""Reference gauges for calibration by direct comparison (ISO 3567:2011).

Every reference is an object with

    name            what the report calls it
    u_rel           relative standard uncertainty (k=1) from its certificate
    resolution_pa   display step in Pa (plus resolution_rel * p, for instruments
                    with a fixed number of digits); see `resolution_at(p_pa)`
    drift_rel       relative half-width of its drift since its certificate
                    (taken as rectangular in the budget)
    traceability    the certificate statement, typed by the user
    read_pa()       one reading in pascals (float), or ReferenceGaugeError

Implementations: `TypedReference` (a person reads the reference and types
the value; the input function is injected), `SerialReference` (a second
instrument answering a line-based query over pyserial), `SimReference` (a
simulated reference with a stated uncertainty and a seeded error, reading
the simulator's true pressure). Nothing here knows the gauge link.
"""

import logging
import math
import random
import re

from gaugecore.units import PA_PER_UNIT
from tcgauge.errors import TcgaugeError

log = logging.getLogger(__name__)

_NUMBER = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


class ReferenceGaugeError(TcgaugeError):
    """The reference gave no usable reading; the message says why."""


def _unit_factor(unit):
    try:
        return PA_PER_UNIT[unit.upper()]
    except (KeyError, AttributeError):
        raise ReferenceGaugeError("unknown pressure unit %r (use PA, TORR, MBAR or MICRON)" % (unit,))


def _positive_pa(value, who):
    if not (isinstance(value, float) and math.isfinite(value) and value > 0.0):
        raise ReferenceGaugeError("%s: reading %r is not a positive finite pressure" % (who, value))
    return value


def parse_first_number(text):
    """The first decimal number in a reply line ('P=1.23E-01 Torr' -> 0.123)."""
    m = _NUMBER.search(text)
    if m is None:
        raise ReferenceGaugeError("reply %r holds no number" % (text,))
    return float(m.group(0))


class ReferenceGauge:
    """Base of the reference adapters: stated properties and `read_pa()`."""

    def __init__(self, name, u_rel, resolution_pa=0.0, drift_rel=0.0, traceability="",
                 resolution_rel=0.0):
        for key, value in (("u_rel", u_rel), ("resolution_pa", resolution_pa),
                           ("drift_rel", drift_rel), ("resolution_rel", resolution_rel)):
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value >= 0.0):
                raise ReferenceGaugeError("reference %s must be a finite number >= 0, got %r"
                                          % (key, value))
        self.name = name
        self.u_rel = float(u_rel)
        self.resolution_pa = float(resolution_pa)
        self.resolution_rel = float(resolution_rel)
        self.drift_rel = float(drift_rel)
        self.traceability = traceability

    def resolution_at(self, p_pa):
        """Display step (Pa) at pressure p_pa."""
        return self.resolution_pa + self.resolution_rel * p_pa

    def read_pa(self):
        raise NotImplementedError

    def __repr__(self):
        return "<%s %r u_rel=%g>" % (type(self).__name__, self.name, self.u_rel)


class TypedReference(ReferenceGauge):
    """A reference read by a person, who types each value.

    input_fn(prompt) -> str (default: builtin input). unit: the unit the
    person types in. A line that is not a positive number is asked again,
    up to `attempts` times in all.
    """

    def __init__(self, name, u_rel, unit="TORR", input_fn=input, attempts=3, **kwargs):
        ReferenceGauge.__init__(self, name, u_rel, **kwargs)
        self.unit = unit
        self._factor = _unit_factor(unit)
        self.input_fn = input_fn
        self.attempts = attempts

    def read_pa(self):
        prompt = "%s reading (%s): " % (self.name, self.unit.lower())
        for _ in range(self.attempts):
            text = self.input_fn(prompt)
            try:
                value = float(text.strip())
            except (ValueError, AttributeError):
                log.warning("not a number: %r", text)
                continue
            if math.isfinite(value) and value > 0.0:
                return value * self._factor
            log.warning("not a positive pressure: %r", text)
        raise ReferenceGaugeError("%s: no valid reading in %d attempts" % (self.name, self.attempts))


class SerialReference(ReferenceGauge):
    """A second instrument on a serial line, queried one line at a time.

    port: a pyserial URL or device name (opened with serial.serial_for_url at
    `baudrate`, read timeout `timeout_s`), or an object with write() and
    read_until(expected). query: the text sent for each reading (str or
    bytes, with its line end). parser(line str) -> float in `unit`
    (default: the first number in the line). eol: the reply's line end.
    """

    def __init__(self, name, u_rel, port, query="P?\r\n", parser=parse_first_number, unit="PA",
                 eol=b"\n", baudrate=9600, timeout_s=2.0, **kwargs):
        ReferenceGauge.__init__(self, name, u_rel, **kwargs)
        self.query = query.encode("ascii") if isinstance(query, str) else bytes(query)
        self.parser = parser
        self.unit = unit
        self._factor = _unit_factor(unit)
        self.eol = eol
        self.timeout_s = timeout_s
        if isinstance(port, str):
            import serial

            port = serial.serial_for_url(port, baudrate=baudrate, timeout=timeout_s)
        self.port = port

    def read_pa(self):
        if hasattr(self.port, "reset_input_buffer"):
            self.port.reset_input_buffer()
        self.port.write(self.query)
        line = self.port.read_until(self.eol)
        if not line.endswith(self.eol):
            raise ReferenceGaugeError("%s: no reply to %r within %g s (got %r)"
                                      % (self.name, self.query, self.timeout_s, line))
        text = line.decode("ascii", "replace").strip()
        try:
            value = float(self.parser(text))
        except ReferenceGaugeError as exc:
            raise ReferenceGaugeError("%s: %s" % (self.name, exc))
        except (ValueError, TypeError):
            raise ReferenceGaugeError("%s: reply %r holds no number" % (self.name, text))
        return _positive_pa(value * self._factor, self.name)

    def close(self):
        if hasattr(self.port, "close"):
            self.port.close()


class SimReference(ReferenceGauge):
    """A simulated reference gauge reading a true pressure.

    true_pa(): the true pressure now (e.g. Bench.true_pressure_pa). The
    reference carries a systematic relative error drawn once from a normal
    distribution of standard deviation u_rel (seeded: `error_rel`), as a
    real, calibrated reference does within its stated uncertainty, plus
    reading noise noise_rel (relative, normal) and rounding to resolution.
    """

    def __init__(self, true_pa, name="simulated reference", u_rel=0.01, seed=0, noise_rel=0.001,
                 **kwargs):
        ReferenceGauge.__init__(self, name, u_rel, **kwargs)
        self.true_pa = true_pa
        self.noise_rel = float(noise_rel)
        self._rng = random.Random("tcgauge-simref:%r" % (seed,))
        self.error_rel = self._rng.gauss(0.0, self.u_rel)

    def read_pa(self):
        p = self.true_pa() * (1.0 + self.error_rel) * (1.0 + self._rng.gauss(0.0, self.noise_rel))
        res = self.resolution_at(p)
        if res > 0.0:
            p = round(p / res) * res
        return _positive_pa(float(p), self.name)
