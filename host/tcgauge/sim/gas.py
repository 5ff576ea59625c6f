"""Gases the simulated tube can be filled with, and their transport properties.

Each `Gas` carries its molar mass, the ideal-gas heat capacity cv/R(T), the
continuum thermal conductivity lambda(T), and the energy accommodation
coefficient alpha with its spread.

Property fits: cubic polynomials in x = T / 300 K, least squares to CoolProp
8.0.0 (PyPI, `PropsSI`) over 250-700 K (water 290-700 K, where it is a vapour
at 1 kPa); lambda at 101325 Pa (water at 1 kPa), cv from the ideal-gas Cp0molar.
Largest fit error 0.5 % (H2 cv). The fits are made by
tools/tables/fit_gas_coeffs.py; the runtime needs no CoolProp.

Accommodation on air-exposed engineering surfaces: Ar 0.95, N2 0.85, He 0.45
from Trott et al., Rev. Sci. Instrum. 82, 035120 (2011); their spreads, and
air, H2, CO2, H2O, are from memory and uncertain (docs/physics.md s. 3).

Every function here uses only arithmetic operators, so it accepts a float or a
numpy array alike (the tube's per-step path uses plain floats).
"""

import math

R_J_MOLK = 8.314462618  # molar gas constant, exact in the 2019 SI (CODATA 2018)
T_SCALE_K = 300.0


def _poly(c, x):
    """The cubic c0 + c1 x + c2 x^2 + c3 x^3 (Horner; float or array x)."""
    return c[0] + x * (c[1] + x * (c[2] + x * c[3]))


def _poly_mean(c, xa, xb):
    """Mean of the cubic c0 + c1 x + c2 x^2 + c3 x^3 over [xa, xb].

    Exact, written without a 0/0 so it also holds at xa == xb:
    mean(x^n) = sum_{k=0..n} xa^k xb^(n-k) / (n+1).
    """
    return (c[0] + c[1] * (xa + xb) * 0.5 + c[2] * (xa * xa + xa * xb + xb * xb) / 3.0
            + c[3] * (xa + xb) * (xa * xa + xb * xb) * 0.25)


def _poly_mean_dhi(c, xa, xb):
    """d/dxb of `_poly_mean(c, xa, xb)`."""
    return (c[1] * 0.5 + c[2] * (xa + 2.0 * xb) / 3.0
            + c[3] * (xa * xa + 2.0 * xa * xb + 3.0 * xb * xb) * 0.25)


def _cubic(coeffs):
    """Coefficients padded to four (a cubic)."""
    if len(coeffs) > 4:
        raise ValueError("gas property fits are at most cubic, got %d coefficients" % len(coeffs))
    return tuple(coeffs) + (0.0,) * (4 - len(coeffs))


class Gas:
    """One gas: molar mass, heat capacity, conductivity, accommodation."""

    def __init__(self, name, molar_mass_kg_mol, cv_r_coeffs, conductivity_coeffs,
                 alpha, alpha_spread, alpha_source):
        self.name = name
        self.molar_mass_kg_mol = molar_mass_kg_mol
        self._cv = _cubic(cv_r_coeffs)          # cv/R, cubic in T/300 K
        self._lam = _cubic(conductivity_coeffs)  # W/(m K), cubic in T/300 K
        self.alpha = alpha
        self.alpha_spread = alpha_spread
        self.alpha_source = alpha_source
        self.gamma = self.gamma_at(300.0)

    def __repr__(self):
        return "Gas(%r)" % self.name

    def cv_over_r(self, t_k):
        """Ideal-gas molar isochoric heat capacity / R at t_k."""
        return _poly(self._cv, t_k / T_SCALE_K)

    def gamma_at(self, t_k):
        """Heat-capacity ratio cp/cv of the ideal gas at t_k."""
        cv = self.cv_over_r(t_k)
        return (cv + 1.0) / cv

    def conductivity_w_mk(self, t_k):
        """Continuum thermal conductivity lambda(t_k) in W/(m K)."""
        return _poly(self._lam, t_k / T_SCALE_K)

    def mean_conductivity_w_mk(self, t_cold_k, t_hot_k):
        """lambda averaged over [t_cold_k, t_hot_k] (Kirchhoff transform).

        With lambda(T), steady Fourier conduction between two isotherms carries
        exactly (integral of lambda dT) / (geometry), so this mean is what the
        continuum conductance uses (e.g. Incropera, Fundamentals of Heat and
        Mass Transfer, variable-conductivity conduction).
        """
        return _poly_mean(self._lam, t_cold_k / T_SCALE_K, t_hot_k / T_SCALE_K)

    def mean_conductivity_dhot(self, t_cold_k, t_hot_k):
        """d/dt_hot of `mean_conductivity_w_mk`, W/(m K^2)."""
        return _poly_mean_dhi(self._lam, t_cold_k / T_SCALE_K, t_hot_k / T_SCALE_K) / T_SCALE_K

    def free_molecular_coeff_dhot(self, t_k, t_hot_k):
        """d/dt_hot of `free_molecular_coeff(t_k, t_hot_k)`."""
        dcv = _poly_mean_dhi(self._cv, t_k / T_SCALE_K, t_hot_k / T_SCALE_K) / T_SCALE_K
        return 2.0 * dcv * (R_J_MOLK / (8.0 * math.pi * self.molar_mass_kg_mol * t_k)) ** 0.5

    def free_molecular_coeff(self, t_k, t_hot_k=None):
        """Knudsen's Lambda0 in W m^-2 K^-1 Pa^-1 (before alpha), gas arriving at t_k.

        Lambda0 = (gamma+1)/(gamma-1) sqrt(R / (8 pi M T)) [Knudsen, Ann. Phys.
        34, 593 (1911); Kennard, Kinetic Theory of Gases (1938)], with
        (gamma+1)/(gamma-1) = 1 + 2 cv/R. Given t_hot_k, cv is averaged over
        [t_k, t_hot_k], so a molecule carries the internal energy it picks up
        between the two temperatures (reduces to the textbook form for
        constant cv; matters for CO2 and H2O, whose cv rises with T).
        """
        if t_hot_k is None:
            cv = self.cv_over_r(t_k)
        else:
            cv = _poly_mean(self._cv, t_k / T_SCALE_K, t_hot_k / T_SCALE_K)
        return (1.0 + 2.0 * cv) * (R_J_MOLK / (8.0 * math.pi * self.molar_mass_kg_mol * t_k)) ** 0.5


_MONATOMIC = (1.5,)  # cv = 3/2 R exactly for a monatomic ideal gas (kinetic theory)
_TROTT = "Trott et al., Rev. Sci. Instrum. 82, 035120 (2011); spread from memory"
_MEM = "from memory, uncertain"

# Coefficients: tools/tables/fit_gas_coeffs.py against CoolProp 8.0.0 (see module docstring).
GASES = {
    "N2": Gas("N2", 0.02801348,
              (2.62756, -0.272539, 0.159637, -0.0125872),
              (0.000303363, 0.0304047, -0.00542106, 0.000675827),
              0.85, 0.05, _TROTT),
    "air": Gas("air", 0.02896546,
               (2.63397, -0.348637, 0.247755, -0.0334019),
               (0.000250078, 0.0306598, -0.00517092, 0.000639998),
               0.86, 0.05, _MEM + " (close to N2, mostly N2 and O2)"),
    "He": Gas("He", 0.004002602, _MONATOMIC,
              (0.0319636, 0.14299, -0.021626, 0.00261685),
              0.45, 0.10, _TROTT),
    "Ar": Gas("Ar", 0.039948, _MONATOMIC,
              (-2.9382e-05, 0.0213239, -0.00390832, 0.000448136),
              0.95, 0.05, _TROTT),
    "H2": Gas("H2", 0.00201588,
              (1.80297, 1.23414, -0.707507, 0.135349),
              (0.00241843, 0.235732, -0.061962, 0.010359),
              0.30, 0.10, _MEM + " (0.2-0.4)"),
    "CO2": Gas("CO2", 0.0440098,
               (1.21259, 2.98271, -0.813588, 0.0960638),
               (-0.00299119, 0.0152337, 0.00572687, -0.00117582),
               0.90, 0.10, _MEM + " (0.8-1.0)"),
    "H2O": Gas("H2O", 0.018015268,
               (3.13351, -0.432356, 0.401828, -0.0633234),
               (0.00646166, 0.00171276, 0.0116597, -0.00128037),
               0.90, 0.10, _MEM + " (0.8-1.0)"),
}


def get_gas(name):
    """The `Gas` called `name` (a `Gas` passes through unchanged)."""
    if isinstance(name, Gas):
        return name
    try:
        return GASES[name]
    except (KeyError, TypeError):
        raise ValueError("unknown gas %r (known: %s)" % (name, ", ".join(GASES)))
