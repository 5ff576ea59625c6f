"""Pressure units with their exact definitions.

1 Torr = 101325/760 Pa exactly, 1 mbar = 100 Pa exactly, 1 micron (of
mercury, the vacuum trade's name for the millitorr) = 1e-3 Torr.
Source: NIST SP 811 (2008), Appendix B.8 ("torr", "millibar") and the
SI Brochure, 9th ed. (2019), Table 8 (the bar, 1 bar = 1e5 Pa).
"""

PA_PER_TORR = 101325.0 / 760.0
PA_PER_MBAR = 100.0
PA_PER_MICRON = PA_PER_TORR / 1000.0

# Unit name -> pascals per unit. Names are what the protocol and the files use.
PA_PER_UNIT = {
    "PA": 1.0,
    "TORR": PA_PER_TORR,
    "MBAR": PA_PER_MBAR,
    "MICRON": PA_PER_MICRON,
}

# How a unit is printed for a person.
SYMBOL = {"PA": "Pa", "TORR": "Torr", "MBAR": "mbar", "MICRON": "micron"}


def _factor(unit):
    try:
        return PA_PER_UNIT[unit.upper()]
    except (KeyError, AttributeError):
        raise ValueError("unknown pressure unit %r (use PA, TORR, MBAR or MICRON)" % (unit,))


def to_pa(value, unit):
    """Pressure `value` in `unit` -> pascals."""
    return value * _factor(unit)


def from_pa(pressure_pa, unit):
    """Pressure in pascals -> the same pressure in `unit`."""
    return pressure_pa / _factor(unit)
