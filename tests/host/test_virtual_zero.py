"""The virtual device's stored vacuum zero (tcgauge.sim.device: zeroed=True, zero_results).

The zero is the real procedure (gaugecore.zero) run on a simulated bench of
the same seed at the invented Larkspur bell jar's base pressure; its result
reaches the device through the stored configuration, as a finished zero's
would. Checks: the identified time constant against the simulated tube's own
small-signal tau (C_th / k, tcgauge.sim.tube.Tube.tau_s), the zero EMF
against its target, and that the result is applied and kept like any
stored setting.
"""

import pytest

from gaugecore.zero import ZeroResult
from tcgauge.sim import chamber
from tcgauge.sim.device import VirtualDevice, zero_results


def test_zero_results_identify_the_simulated_tube():
    results = zero_results(seed=1)
    dev = VirtualDevice(seed=1)  # not zeroed: gives the limits and the simulated tubes
    try:
        assert dev.device.config["zero"] == [None, None]
        for i, r in enumerate(results):
            lim = dev.device.limits[i]
            assert lim["min_ma"] <= r["heater_ma"] <= lim["max_ma"]
            assert r["emf_mv"] == pytest.approx(lim["zero_emf_mv"], rel=2e-4)  # VacuumZero tol_frac
            tau = dev.bench.channels[i].tube.tau_s(chamber.LARKSPUR.base_pressure_pa,
                                                   r["heater_ma"] * 1e-3, 22.0)
            assert r["tau_s"] == pytest.approx(tau, rel=0.15)
            ZeroResult.from_dict(r)  # a valid stored record
    finally:
        dev.close()


def test_zeroed_device_boots_with_the_stored_zero(tmp_path):
    root = str(tmp_path / "dev")
    results = zero_results(seed=1)
    dev = VirtualDevice(seed=1, zeroed=True, root=root)
    try:
        d = dev.device
        assert d.config["zero"] == results and d.notes == []
        for n in (1, 2):
            ch = d.channels[n - 1]
            assert ch.zero_result.c_e_j_per_mv == results[n - 1]["c_e_j_per_mv"]
            assert ch.response.c_e_j_per_mv == results[n - 1]["c_e_j_per_mv"]
            assert d.heater_target_ma(n) == results[n - 1]["heater_ma"]
            assert d.zero_mv(n) == pytest.approx(results[n - 1]["emf_mv"] - d.limits[n - 1]["zero_emf_mv"])
        d.set_fast(1, True)
    finally:
        dev.close()
    # the same root again: the stored configuration is the device's own now
    again = VirtualDevice(seed=1, zeroed=True, root=root)
    try:
        assert again.device.fast(1) is True and again.device.fast(2) is False
        assert again.device.config["zero"] == results
    finally:
        again.close()
