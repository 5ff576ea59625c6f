"""Fit the gas-property polynomials of tcgauge.sim.gas to CoolProp.

Prints the coefficient lines that host/tcgauge/sim/gas.py records, so the
runtime needs no CoolProp. Fit: least squares, cubic in x = T / 300 K, 91
points over 250-700 K (water 290-700 K, where it is a vapour at 1 kPa).
Conductivity at 101325 Pa (water at 1 kPa); ideal-gas molar heat capacity
cv0/R = Cp0molar/R - 1. Source: CoolProp (PyPI), PropsSI.

Run: .venv/bin/python tools/tables/fit_gas_coeffs.py
"""

import CoolProp
import numpy as np
from CoolProp.CoolProp import PropsSI

R_J_MOLK = 8.314462618
FLUIDS = {"N2": "Nitrogen", "air": "Air", "He": "Helium", "Ar": "Argon",
          "H2": "Hydrogen", "CO2": "CarbonDioxide", "H2O": "Water"}


def fit(name):
    """(M, conductivity coeffs, cv/R coeffs, max rel. errors) for one gas."""
    fluid = FLUIDS[name]
    t_lo = 290.0 if name == "H2O" else 250.0
    p_lam = 1000.0 if name == "H2O" else 101325.0
    t_k = np.linspace(t_lo, 700.0, 91)
    lam = np.array([PropsSI("L", "T", t, "P", p_lam, fluid) for t in t_k])
    cv = np.array([PropsSI("Cp0molar", "T", t, "P", 1000.0, fluid) for t in t_k]) / R_J_MOLK - 1.0
    x = t_k / 300.0
    c_lam = np.polyfit(x, lam, 3)
    c_cv = np.polyfit(x, cv, 3)
    err_lam = float(np.max(np.abs(np.polyval(c_lam, x) / lam - 1.0)))
    err_cv = float(np.max(np.abs(np.polyval(c_cv, x) / cv - 1.0)))
    return PropsSI("M", fluid), c_lam[::-1], c_cv[::-1], err_lam, err_cv


def main():
    print("# CoolProp %s" % CoolProp.__version__)
    for name in FLUIDS:
        m, c_lam, c_cv, e_lam, e_cv = fit(name)
        print("%-4s M=%.9g" % (name, m))
        print("  lambda: (%s)  # max rel. err %.1e" % (", ".join("%.6g" % c for c in c_lam), e_lam))
        print("  cv/R:   (%s)  # max rel. err %.1e" % (", ".join("%.6g" % c for c in c_cv), e_cv))


if __name__ == "__main__":
    main()
