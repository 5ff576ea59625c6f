"""Pressure units against their exact definitions.

Source: NIST SP 811 (2008), Appendix B.8: 1 torr = 133.3224 Pa (101325/760
exactly), 1 millibar = 100 Pa; 1 atm = 101325 Pa exactly.
"""

import math

import pytest

from gaugecore import units


def test_torr_is_exactly_one_760th_of_an_atmosphere():
    # NIST SP 811 B.8: standard atmosphere 101 325 Pa = 760 Torr
    assert units.to_pa(760.0, "TORR") == pytest.approx(101325.0, rel=1e-15)
    assert units.PA_PER_TORR == pytest.approx(133.322368421, rel=1e-11)


def test_mbar_and_micron():
    # NIST SP 811 B.8: 1 mbar = 100 Pa; 1 micron (millitorr) = 1e-3 Torr
    assert units.to_pa(1.0, "MBAR") == 100.0
    assert units.to_pa(1000.0, "MICRON") == pytest.approx(units.PA_PER_TORR, rel=1e-15)
    assert units.from_pa(units.PA_PER_TORR, "micron") == pytest.approx(1000.0, rel=1e-15)


@pytest.mark.parametrize("unit", ["PA", "TORR", "MBAR", "MICRON"])
def test_round_trip(unit):
    for p in (1e-4, 0.133, 1.0, 101325.0):
        assert math.isclose(units.to_pa(units.from_pa(p, unit), unit), p, rel_tol=1e-15)


def test_unknown_unit_names_the_choices():
    with pytest.raises(ValueError, match="unknown pressure unit 'psi' .*PA, TORR, MBAR or MICRON"):
        units.to_pa(1.0, "psi")
