"""Small fakes of gauge hardware for the controller's core tests.

A lumped tube whose heat balance has a closed-form steady state, a resistor
heater driver with polarity, a thermocouple input with heater pickup, a
cold-junction sensor, relays and a clock. All numbers are invented demo
values (physically plausible for a small filament tube), not a real tube.

Tube model (domain notes section 2, lumped heat balance; radiation kept as
a quadratic term in the excess temperature x = T1 - T2):

    C dx/dt = I^2 R - (G0 + g_gas p) x - k2 x^2,    E = S x

Steady state: k2 x^2 + (G0 + g_gas p) x - I^2 R = 0, solved in closed form.
"""

import math
import random

from gaugecore.table import Table

C_J_K = 1.8e-3  # invented: heat capacity of filament and bead
G0_W_K = 1.2e-4  # invented: solid conduction plus linearised radiation
K2_W_K2 = 1.5e-7  # invented: radiation curvature
GGAS_W_K_PA = 1.6e-5  # invented: free-molecular gas conduction per pascal (N2-like)
S_MV_K = 0.041  # Seebeck coefficient of type K near 300 C, ~41 uV/K (domain notes section 4)
R_OHM = 1.5  # invented heater resistance
NOMINAL_MA = 165.0


class Clock:
    """Integer milliseconds; sleep_ms advances."""

    def __init__(self, t_ms=0):
        self.t_ms = t_ms

    def ticks_ms(self):
        return self.t_ms

    def ticks_diff(self, a, b):
        return a - b

    def sleep_ms(self, n):
        self.t_ms += int(n)


class Tube:
    """The lumped tube; `advance_to(t_ms, current_a)` integrates (RK4, 5 ms steps)."""

    def __init__(self, clock, pressure_pa=0.0, x_k=0.0, substep_ms=5):
        self.clock = clock
        self.pressure_pa = pressure_pa
        self.x_k = x_k
        self._t_ms = clock.ticks_ms()
        self.substep_ms = substep_ms
        self.heater = None

    def _dxdt(self, x, p_w):
        g = G0_W_K + GGAS_W_K_PA * self.pressure_pa
        return (p_w - g * x - K2_W_K2 * x * x) / C_J_K

    def sync(self):
        t = self.clock.ticks_ms()
        i_a = self.heater.true_a() if self.heater is not None else 0.0
        p_w = i_a * i_a * R_OHM
        while self._t_ms < t:
            h_ms = min(self.substep_ms, t - self._t_ms)
            h = h_ms * 0.001
            x = self.x_k
            k1 = self._dxdt(x, p_w)
            k2 = self._dxdt(x + 0.5 * h * k1, p_w)
            k3 = self._dxdt(x + 0.5 * h * k2, p_w)
            k4 = self._dxdt(x + h * k3, p_w)
            self.x_k = x + h * (k1 + 2 * k2 + 2 * k3 + k4) / 6.0
            self._t_ms += h_ms

    def emf_mv(self):
        self.sync()
        return S_MV_K * self.x_k


def steady_emf_mv(pressure_pa, current_ma=NOMINAL_MA):
    """Closed-form steady EMF (against the wall) of the fake tube."""
    p_w = (current_ma * 1e-3) ** 2 * R_OHM
    g = G0_W_K + GGAS_W_K_PA * pressure_pa
    x = (-g + math.sqrt(g * g + 4.0 * K2_W_K2 * p_w)) / (2.0 * K2_W_K2)
    return S_MV_K * x


def steady_tau_s(pressure_pa, current_ma=NOMINAL_MA):
    """Small-signal time constant C / (G + 2 k2 x) at the steady state."""
    x = steady_emf_mv(pressure_pa, current_ma) / S_MV_K
    return C_J_K / (G0_W_K + GGAS_W_K_PA * pressure_pa + 2.0 * K2_W_K2 * x)


def make_table(current_ma=NOMINAL_MA, ref_c=22.0, gas="N2", decades=(-3.0, 3.0)):
    """A Table of the fake tube's steady state, EMFs against a 22 C wall and
    reference (so the fake cold junction at 22 C refers them unchanged)."""
    points = []
    lo, hi = decades
    for k in range(41):
        p = 10.0 ** (lo + (hi - lo) * k / 40.0)
        points.append((steady_emf_mv(p, current_ma), p))
    return Table(points, gas, "fake-lumped", current_ma, ref_c, "K", source="invented demo tube")


class Heater:
    """Ideal current source into R_OHM with polarity; faults by flags."""

    def __init__(self, clock, tube):
        self.clock = clock
        self.tube = tube
        tube.heater = self
        self.cmd_ma = 0.0
        self.enabled = False
        self.polarity = 1
        self.open = False
        self.short = False
        self.calls = []

    def true_a(self):
        if not self.enabled or self.open or self.short:
            return 0.0
        return self.polarity * self.cmd_ma * 1e-3

    def set_ma(self, ma):
        self.tube.sync()
        self.cmd_ma = ma
        self.enabled = True

    def off(self):
        self.tube.sync()
        self.enabled = False
        self.cmd_ma = 0.0

    def set_polarity(self, sign):
        self.tube.sync()
        self.polarity = sign
        self.calls.append(("polarity", self.clock.ticks_ms(), sign))

    def read_ma(self):
        if not self.enabled or self.open:
            return 0.0
        return self.polarity * self.cmd_ma

    def read_v(self):
        if not self.enabled:
            return 0.0
        if self.open:
            return self.polarity * 10.0  # at compliance
        r = 0.01 if self.short else R_OHM
        return self.polarity * self.cmd_ma * 1e-3 * r


class Thermocouple:
    """read_uv: tube EMF + pickup (fraction of the heater's IR drop, signed) + noise."""

    def __init__(self, tube, heater, pickup_fraction=0.02, noise_uv=0.0, seed=1):
        self.tube = tube
        self.heater = heater
        self.pickup_fraction = pickup_fraction
        self.noise_uv = noise_uv
        self.rng = random.Random(seed)
        self.fail = False
        self.open = False
        self.reads = []

    def read_uv(self):
        if self.fail:
            raise OSError("fake adc: no response")
        if self.open:
            return 78125.0  # +full scale of a +/-78 mV range
        e_uv = self.tube.emf_mv() * 1000.0
        pick = self.pickup_fraction * self.heater.true_a() * R_OHM * 1e6
        v = e_uv + pick + (self.rng.gauss(0.0, self.noise_uv) if self.noise_uv else 0.0)
        self.reads.append((self.tube.clock.ticks_ms(), self.heater.polarity, v, e_uv))
        return v


class ColdJunctionSensor:
    def __init__(self, t_c=22.0):
        self.t_c = t_c
        self.fail = False

    def read_c(self):
        if self.fail:
            raise OSError("fake cj: no response")
        return self.t_c


class Relay:
    def __init__(self):
        self.on = None
        self.history = []

    def set(self, on):
        self.on = on
        self.history.append(on)


def limits(zero_emf_mv=None):
    """Profile limits for the fake tube (invented)."""
    if zero_emf_mv is None:
        zero_emf_mv = steady_emf_mv(0.0)
    return {"nominal_ma": NOMINAL_MA, "min_ma": 120.0, "max_ma": 200.0, "zero_emf_mv": zero_emf_mv}


class Rig:
    """One fake channel's hardware on a clock."""

    def __init__(self, pressure_pa=1.0, x_k=None, pickup_fraction=0.02, noise_uv=0.0, clock=None, seed=1):
        self.clock = clock or Clock()
        if x_k is None:
            x_k = steady_emf_mv(pressure_pa) / S_MV_K
        self.tube = Tube(self.clock, pressure_pa, x_k)
        self.heater = Heater(self.clock, self.tube)
        self.tc = Thermocouple(self.tube, self.heater, pickup_fraction, noise_uv, seed)
        self.cj = ColdJunctionSensor()
        self.relays = [Relay(), Relay()]


def run_until(clock, step, t_end_ms, on_step=None):
    """Call step(now) at every due millisecond (1 ms grid) until t_end_ms."""
    while clock.ticks_ms() < t_end_ms:
        now = clock.ticks_ms()
        step(now)
        if on_step is not None:
            on_step(now)
        clock.sleep_ms(1)
