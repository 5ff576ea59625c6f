"""The 2.5 V heater-rail option (hardware/spice/sink_lowrail_core.cir).

Tubes whose thermocouple touches the filament put the thermocouple at the
filament's potential. The ADS1220's PGA needs both inputs inside
AVSS + 0.2 V + |V_IN| (G - 1)/2 .. AVDD - 0.2 V - |V_IN| (G - 1)/2
(ADS1220 datasheet SBAS501, section 8.3.2.1 "PGA Common-Mode Voltage
Requirements"; the form of the bound from memory, check it against the
data sheet before relying on the last 50 mV). These tests check that the
option keeps the current accurate and the loop stable, and that it moves a
welded junction into that window while the 5 V rail cannot.
"""

import pytest

from spicerun import (
    LOWRAIL_CORE, SINK_CORE, alter_lines, dac_code, dac_volts, loop_gain, netlist_params, run,
    wrapper,
)

P = netlist_params()
AVDD_V = 3.3  # ADS1220 analog supply on the reference board
GAIN = 32
V_IN_MAX = 0.015  # largest thermocouple EMF of the gauge range, 15 mV (domain notes)


def pga_window():
    """(low, high) absolute input limits of the ADS1220 PGA at gain 32, 15 mV."""
    half = V_IN_MAX * (GAIN - 1) / 2.0
    return 0.2 + half, AVDD_V - 0.2 - half


def _op(core, tmp_path, corners):
    cases = [{"rh": rh, "vsup": vs} for rh, vs, _ in corners]
    lines = []
    for k, (alters, (_, _, ma)) in enumerate(zip(alter_lines(cases), corners)):
        lines += alters + [
            "reset",
            "alter vdac dc=%r" % dac_volts(dac_code(ma, P)),
            "op",
            "let ih_%d = i(vih)" % k,
            "let top_%d = v(vh)" % k,
            "let bot_%d = v(d)" % k,
            "print ih_%d top_%d bot_%d" % (k, k, k),
        ]
    out = run(wrapper(core, "Vdac dac 0 1.0", lines), tmp_path)
    return [(out["ih_%d" % k], out["top_%d" % k], out["bot_%d" % k]) for k in range(len(corners))]


CORNERS = [(rh, vs, ma) for rh in (0.5, 1.5, 3.0) for vs in (4.5, 5.5) for ma in (100.0, 200.0)]


def test_pga_window_numbers():
    lo, hi = pga_window()
    assert lo == pytest.approx(0.4325)
    assert hi == pytest.approx(2.8675)


def test_low_rail_current_within_half_percent(tmp_path):
    for (rh, vs, ma), (ih, _, _) in zip(CORNERS, _op(LOWRAIL_CORE, tmp_path, CORNERS)):
        assert 1000.0 * ih == pytest.approx(ma, rel=0.005), (rh, vs, ma)


def test_welded_junction_inside_pga_window_only_on_low_rail(tmp_path):
    # a junction welded at the filament's middle sits at (top + bottom) / 2;
    # the filament's ends bound where else along it a junction could be
    lo, hi = pga_window()
    for (rh, vs, ma), (_, top, bot) in zip(CORNERS, _op(LOWRAIL_CORE, tmp_path, CORNERS)):
        assert lo < bot < top < hi, (rh, vs, ma, bot, top)
    for (rh, vs, ma), (_, top, bot) in zip(CORNERS, _op(SINK_CORE, tmp_path, CORNERS)):
        assert (top + bot) / 2.0 > hi, (rh, vs, ma)


def test_low_rail_loop_is_stable(tmp_path):
    cases = [{"rh": rh, "vsup": vs, "lcable": 5e-6} for rh in (0.5, 3.0) for vs in (4.5, 5.5)]
    v_dac = dac_volts(dac_code(165.0, P))
    results = loop_gain(tmp_path, cases, LOWRAIL_CORE, "Vdac dac 0 %r" % v_dac)
    for params, (_, crossings) in zip(cases, results):
        assert len(crossings) == 1, (params, crossings)
        assert crossings[0][1] > 45.0, (params, crossings)
