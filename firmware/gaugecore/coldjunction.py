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
"""

from gaugecore.thermocouple import emf_mv, temperature_c


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
