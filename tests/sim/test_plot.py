"""The family-of-curves plot: the file, and the physics of the curves it draws.

Ordering checks follow kinetic theory and Fourier conduction (docs/physics.md
ss. 2-3): in the linear range the gas that carries more heat per pascal
(alpha (gamma+1)/((gamma-1) sqrt(M))) cools the filament more; near
atmosphere the one with the larger continuum conductivity (CoolProp) does.
"""

import struct

import numpy as np
import pytest
from CoolProp.CoolProp import PropsSI

from tcgauge.sim.plot import family_data, plot_family

FLUIDS = {"N2": "Nitrogen", "He": "Helium", "Ar": "Argon", "H2": "Hydrogen"}


def _png_size(path):
    # PNG spec (ISO/IEC 15948): 8-byte signature, then the IHDR chunk with width, height (big-endian)
    with open(path, "rb") as f:
        head = f.read(24)
    assert head[:8] == b"\x89PNG\r\n\x1a\n" and head[12:16] == b"IHDR"
    return struct.unpack(">II", head[16:24])


@pytest.fixture(scope="module")
def plotted(tmp_path_factory):
    path = str(tmp_path_factory.mktemp("plot") / "family.png")
    p = np.concatenate([np.logspace(-4, 5, 61), [10.0]])
    p.sort()
    return plot_family(path, pressures_pa=p)


def test_png_is_written_with_the_expected_size(plotted):
    assert _png_size(plotted["path"]) == (1200, 780) == plotted["size_px"]


def test_all_gases_are_drawn(plotted):
    assert sorted(plotted["emf_mv"]) == sorted(["N2", "air", "He", "Ar", "H2", "CO2", "H2O"])
    assert plotted["profile"] == "wren-demo"
    for emf in plotted["emf_mv"].values():
        assert emf.shape == plotted["pressure_pa"].shape
        assert np.all(np.diff(emf) < 0)  # EMF falls as pressure rises


def test_curve_order_at_10_pa_follows_kinetic_theory(plotted):
    # linear range: H2 carries most heat per pascal, Ar least -> EMF H2 < N2 < Ar
    k = int(np.flatnonzero(plotted["pressure_pa"] == 10.0)[0])
    e = {g: plotted["emf_mv"][g][k] for g in plotted["emf_mv"]}
    assert e["H2"] < e["N2"] < e["Ar"]
    assert e["N2"] - e["H2"] > 0.3 and e["Ar"] - e["N2"] > 0.3  # visibly apart (mV)


def test_curve_order_at_atmosphere_follows_coolprop_conductivity(plotted):
    # continuum: the larger lambda (CoolProp, 101325 Pa, 300 K) the lower the EMF
    lam = {g: PropsSI("L", "T", 300.0, "P", 101325.0, f) for g, f in FLUIDS.items()}
    by_lambda = sorted(lam, key=lam.get, reverse=True)
    assert by_lambda == ["H2", "He", "N2", "Ar"]
    emf_atm = [plotted["emf_mv"][g][-1] for g in by_lambda]
    assert emf_atm == sorted(emf_atm)


def test_curves_meet_at_high_vacuum(plotted):
    # no gas, no gas conduction: every curve starts from the same zero-pressure EMF
    first = [emf[0] for emf in plotted["emf_mv"].values()]
    assert max(first) - min(first) < 0.005 * max(first)


def test_family_data_checks_gas_names():
    with pytest.raises(ValueError, match=r"^unknown gas 'Ne' \(known: N2, air, He, Ar, H2, CO2, H2O\)$"):
        family_data(gases=["N2", "Ne"])
