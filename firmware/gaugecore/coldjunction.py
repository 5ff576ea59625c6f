"""Cold-junction compensation by the law of intermediate temperatures.

A thermocouple whose hot junction is at T1 and whose reference (cold)
junction is at T_cj gives E_meas = E(T1) - E(T_cj), where E is the ITS-90
reference function with its reference junction at 0 C, as tabulated in NIST
Monograph 175 and IEC 60584-1 (law of intermediate temperatures). Hence

    E(T1) = E_meas + E(T_cj)                      (refer to 0 C, then invert)
    E_ref(T1) = E_meas + E(T_cj) - E(t_ref)       (refer to t_ref instead)

The second form is what a gauge-tube table needs when its EMFs were
recorded with the reference junction at some t_ref other than 0 C.
All EMFs in mV, temperatures in deg C.

Rise referral (`RiseReferral`, the channel's default). A gauge tube does
not measure the filament's temperature but its rise dT = T1 - T_wall above
the envelope, which the gas conduction sets. Assumption: the cold junction
(the couple's legs meet copper at the tube pins) sits at the wall
temperature, so the junction sensor's t_cj stands for T_wall. The filament
is then T1 = E^-1(E_meas + E(t_cj)) and the rise dT = T1 - t_cj.

The rise itself depends on the wall at fixed pressure (radiation ~ T^4,
Knudsen conduction ~ T_wall^-1/2, conductivities with temperature, heater
resistance). With the table's per-point coefficient
k(p) = d ln(dT) / d T_wall at fixed pressure, taken at the table's wall
temperature t_w (gaugecore.table, `rise_slope_per_k`):

    ln dT(p, t_cj) = ln dT(p, t_w) + k(p) (t_cj - t_w) + O((t_cj - t_w)^2 dk/dT_wall)
    dT_ref = dT(p, t_w) = dT exp(-k (t_cj - t_w))                    (1)

(the exponential is the exact inverse of the first-order model in ln dT;
1 - k (t_cj - t_w) is its linearisation). k depends on the unknown p; it
is looked up by table EMF, first at the uncorrected rise, then once more
at the corrected one (a fixed-point step; k changes slowly with p). The
table's EMF for that rise, at its wall and its reference temperature, is

    E_table = E(t_w + dT_ref) - E(ref_c)                             (2)

and Table.convert(E_table) gives the pressure. Without slopes (k = 0) this
is plain wall referral; with t_cj = t_w it is the law of intermediate
temperatures. The remaining error is the curvature term of (1): on the
simulated demo tube a 10 K change leaves about 0.15 %/K at 1 mTorr and
less above (tools/bench/ambient.py).
"""

import math

from gaugecore.thermocouple import emf_mv, seebeck_uv_per_k, temperature_c

# Wall temperature assumed for a table that does not state one (table file
# version 1): the project's set-up temperature (tcgauge.tubefit.DEFAULT_WALL_C).
ASSUMED_WALL_C = 22.0
_NAN = float("nan")
# Per sample, E^-1 and E are followed linearly about an anchor and evaluated
# afresh when the argument leaves it: +/-0.02 mV (~0.5 K) for E^-1 and +/-0.5 K
# for E. The curvature of E (|dS/dT| <= 0.21 uV/K^2 for types E, J, K, N, T
# over -50..800 C) leaves under 0.03 uV there, against ~0.2 uV of converter noise.
INV_ANCHOR_MV = 0.02
FWD_ANCHOR_C = 0.5
_INV_LO = -INV_ANCHOR_MV  # negated once here, not per sample (a float each time)
_FWD_LO = -FWD_ANCHOR_C
_exp = math.exp


def hot_junction_c(tc_type, emf_meas_mv, t_cj_c):
    """Hot-junction temperature in deg C from the EMF measured against a
    reference junction at t_cj_c: T1 = E^-1(E_meas + E(T_cj)) (law of
    intermediate temperatures)."""
    return temperature_c(tc_type, emf_meas_mv + emf_mv(tc_type, t_cj_c))


def refer_emf_mv(tc_type, emf_meas_mv, t_cj_c, t_ref_c):
    """EMF in mV the same hot junction would give with its reference junction
    at t_ref_c instead of t_cj_c: E_meas + E(T_cj) - E(t_ref) (law of
    intermediate temperatures)."""
    return emf_meas_mv + emf_mv(tc_type, t_cj_c) - emf_mv(tc_type, t_ref_c)


class ColdJunction:
    """Per-channel compensation to a fixed reference temperature t_ref_c.

    E(t_ref) is computed once here, so the per-sample `refer` costs one
    evaluation of the reference function (at the measured junction
    temperature) and allocates nothing of its own.
    """

    def __init__(self, tc_type, t_ref_c):
        # emf_mv validates the type and the temperature (ValueError).
        self.emf_ref_mv = emf_mv(tc_type, t_ref_c)
        self.tc_type = tc_type
        self.t_ref_c = t_ref_c

    def refer(self, emf_meas_mv, t_cj_c):
        """EMF in mV referred from a junction at t_cj_c to t_ref_c (law of
        intermediate temperatures: E_meas + E(T_cj) - E(t_ref))."""
        return emf_meas_mv + emf_mv(self.tc_type, t_cj_c) - self.emf_ref_mv

    def hot_junction_c(self, emf_meas_mv, t_cj_c):
        """Hot-junction temperature in deg C: E^-1(E_meas + E(T_cj))."""
        return temperature_c(self.tc_type, emf_meas_mv + emf_mv(self.tc_type, t_cj_c))


class RiseReferral:
    """Rise referral of a channel's EMF to a table (see the module docstring).

    table: gaugecore.table.Table; its wall_c (else `wall_c`, else
    ASSUMED_WALL_C) and its rise slopes (if any). `note` says which fallback
    was taken, or is None when the table carries the whole model.
    """

    def __init__(self, table, wall_c=None):
        self.tc_type = table.tc_type
        self.table = table
        self.note = None
        if wall_c is None:
            wall_c = table.wall_c
        if wall_c is None:
            wall_c = ASSUMED_WALL_C
            self.note = ("table states no wall temperature: plain wall referral to %.6g C assumed"
                         % ASSUMED_WALL_C)
        elif table.rise_slope_per_k is None:
            self.note = ("table has no rise slopes: plain wall referral to its %.6g C wall" % wall_c)
        self.wall_c = float(wall_c)
        self.slopes = table.rise_slope_per_k is not None
        self.emf_ref_mv = emf_mv(self.tc_type, table.ref_c)
        # E(t_w) - E(ref_c): measured EMF + this ~ table EMF (first k look-up)
        self._e_wall_mv = emf_mv(self.tc_type, self.wall_c) - self.emf_ref_mv
        self.rise_c = 0.0  # last rise above the junction, before and after the wall correction
        self.rise_ref_c = 0.0
        self._inv_e = None  # anchor of E^-1: EMF, temperature, K per mV
        self._inv_t = 0.0
        self._inv_g = 0.0
        self._fwd_t = None  # anchor of E: temperature, EMF, mV per K
        self._fwd_e = 0.0
        self._fwd_s = 0.0
        # the rise-slope segment last found (Table.rise_segment): EMF ends,
        # slope at the low end, slope and EMF differences (an empty interval
        # until the first search)
        self._seg_lo = 0.0
        self._seg_hi = 0.0
        self._seg_k = 0.0
        self._seg_dk = 0.0
        self._seg_dx = 1.0

    def _temperature_c(self, e):
        """E^-1(e), linear about the anchor (INV_ANCHOR_MV); `refer` inlines it."""
        e0 = self._inv_e
        if e0 is not None and _INV_LO <= e - e0 <= INV_ANCHOR_MV:
            return self._inv_t + (e - e0) * self._inv_g
        t = temperature_c(self.tc_type, e)
        self._inv_g = 1000.0 / seebeck_uv_per_k(self.tc_type, t)
        self._inv_e = e
        self._inv_t = t
        return t

    def _emf_mv(self, t):
        """E(t), linear about the anchor (FWD_ANCHOR_C); `refer` inlines it."""
        t0 = self._fwd_t
        if t0 is not None and _FWD_LO <= t - t0 <= FWD_ANCHOR_C:
            return self._fwd_e + (t - t0) * self._fwd_s
        e = emf_mv(self.tc_type, t)
        self._fwd_s = 0.001 * seebeck_uv_per_k(self.tc_type, t)
        self._fwd_t = t
        self._fwd_e = e
        return e

    def _slope_at(self, e):
        """table.rise_slope_at(e), remembering the segment e falls strictly inside.

        Table.rise_segment's search and Table.rise_slope_at's arithmetic (the
        table's EMFs rise strictly, so a segment found once holds every EMF
        strictly between its ends): `refer` evaluates a remembered segment
        inline and calls this only when the EMF has left it.
        """
        lo, x, k = self.table.rise_segment(e)
        if lo < 0:
            return k[0]
        hi = lo + 1
        if hi == len(x):
            return k[lo]
        xl = x[lo]
        kl = k[lo]
        dk = k[hi] - kl
        dx = x[hi] - xl
        self._seg_lo = xl
        self._seg_hi = x[hi]
        self._seg_k = kl
        self._seg_dk = dk
        self._seg_dx = dx
        return kl + dk * (e - xl) / dx

    def refer(self, emf_meas_mv, t_cj_c, e_cj_mv=None):
        """Table EMF (mV) for an EMF measured against a junction at t_cj_c.

        e_cj_mv: E(t_cj) if the caller has it (saves one evaluation). An EMF
        or temperature outside the thermocouple's range (an open couple on the
        converter's rail, before the fault monitor has judged it) gives NaN,
        which Table.convert reads as invalid.
        """
        # per sample: the anchors of E^-1 and E (_temperature_c, _emf_mv) and
        # the slope segment (_slope_at) are inlined, the same operations in
        # the same order; a call costs more than the arithmetic under MicroPython
        try:
            if e_cj_mv is None:
                e_cj_mv = emf_mv(self.tc_type, t_cj_c)
            e = emf_meas_mv + e_cj_mv
            e0 = self._inv_e
            if e0 is None:
                t = self._temperature_c(e)
            else:
                de = e - e0  # once: the test and the line share it
                if _INV_LO <= de <= INV_ANCHOR_MV:
                    t = self._inv_t + de * self._inv_g
                else:
                    t = self._temperature_c(e)
            rise = t - t_cj_c
            rise_ref = rise
            wall = self.wall_c
            if self.slopes:
                # (-k) * d == k * (-d) exactly; wall - t_cj == -(t_cj - wall)
                # but for the sign of a zero, which exp(+-0) = 1 makes moot
                nd = wall - t_cj_c
                e = emf_meas_mv + self._e_wall_mv
                xl = self._seg_lo
                if xl < e < self._seg_hi:
                    k = self._seg_k + self._seg_dk * (e - xl) / self._seg_dx
                else:
                    k = self._slope_at(e)
                rise_ref = rise * _exp(k * nd)
                t = wall + rise_ref
                t0 = self._fwd_t
                if t0 is None:
                    e = self._emf_mv(t)
                else:
                    de = t - t0
                    if _FWD_LO <= de <= FWD_ANCHOR_C:
                        e = self._fwd_e + de * self._fwd_s
                    else:
                        e = self._emf_mv(t)
                e = e - self.emf_ref_mv
                xl = self._seg_lo
                if xl < e < self._seg_hi:
                    k = self._seg_k + self._seg_dk * (e - xl) / self._seg_dx
                else:
                    k = self._slope_at(e)
                rise_ref = rise * _exp(k * nd)
            self.rise_c = rise
            self.rise_ref_c = rise_ref
            t = wall + rise_ref
            t0 = self._fwd_t
            if t0 is None:
                e = self._emf_mv(t)
            else:
                de = t - t0
                if _FWD_LO <= de <= FWD_ANCHOR_C:
                    e = self._fwd_e + de * self._fwd_s
                else:
                    e = self._emf_mv(t)
            return e - self.emf_ref_mv
        except ValueError:
            return _NAN
