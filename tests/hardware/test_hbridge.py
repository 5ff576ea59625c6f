"""The sink with H-bridge current reversal (hardware/spice/hbridge_core.cir).

Requirement (the project's own): the two polarities give the same current
magnitude within 0.1 %, so that averaging the EMF over both polarities
cancels the heater's IR pickup without changing the filament's power
(domain notes, section 7: DC pickup follows the current's sign).
The two current paths are mismatched on purpose (forward arms with half the
transconductance, reverse arms with a 0.6 V higher threshold): the magnitude
is set by the sink below the bridge, not by the arms.
"""

import os

import pytest

from spicerun import (
    HBRIDGE_CORE, alter_lines, dac_code, dac_volts, loop_gain, netlist_params, read_wrdata, run,
    wrapper,
)

P = netlist_params()
MISMATCH = {"kp_fwd": 2.0, "vto_rev": -1.8}


def _both_polarities(tmp_path, corners):
    cases = []
    for rh, vs, ma in corners:
        for pol in (1, -1):
            c = {"rh": rh, "vsup": vs, "pol": pol}
            c.update(MISMATCH)
            cases.append((c, ma))
    lines = []
    for k, (alters, (_, ma)) in enumerate(zip(alter_lines([c for c, _ in cases]), cases)):
        lines += alters + [
            "reset",
            "alter vdac dc=%r" % dac_volts(dac_code(ma, P)),
            "op",
            "let ih_%d = i(vih)" % k,
            "let vd_%d = v(d)" % k,
            "print ih_%d vd_%d" % (k, k),
        ]
    out = run(wrapper(HBRIDGE_CORE, "Vdac dac 0 1.0", lines), tmp_path)
    return [(out["ih_%d" % (2 * j)], out["ih_%d" % (2 * j + 1)],
             out["vd_%d" % (2 * j)], out["vd_%d" % (2 * j + 1)]) for j in range(len(corners))]


CORNERS = [(rh, vs, ma) for rh in (0.5, 1.5, 3.0) for vs in (4.5, 5.5) for ma in (100.0, 200.0)]


def test_same_magnitude_in_both_polarities(tmp_path):
    results = _both_polarities(tmp_path, CORNERS)
    for (rh, vs, ma), (i_fwd, i_rev, vd_fwd, vd_rev) in zip(CORNERS, results):
        # the ammeter is in series with the heater, a -> b: the sign flips
        assert i_fwd > 0.0 > i_rev, (rh, vs, ma)
        assert abs(abs(i_rev) / i_fwd - 1.0) < 0.001, (rh, vs, ma, i_fwd, i_rev)
        # and the magnitude is the setpoint (same +/-0.5 % as without bridge)
        assert 1000.0 * i_fwd == pytest.approx(ma, rel=0.005)
        # the mismatch is real: the two paths leave the drain at different
        # voltages (the sink absorbs the difference)
        assert abs(vd_fwd - vd_rev) > 0.005, (rh, vs, ma)


def test_bridge_leaves_compliance_at_low_supply(tmp_path):
    # 4.5 V, 3 ohm, 200 mA: the drain keeps > 3 V of headroom above the sense
    # resistor. Worked: 4.5 V - 0.1 ohm x 0.2 A (supply) - 2 arms x 0.2 A x
    # 1/(kp (|Vgs| - |vto|)) - 3 ohm x 0.2 A = about 3.8 V at the drain
    (i_fwd, i_rev, vd_fwd, vd_rev), = _both_polarities(tmp_path, [(3.0, 4.5, 200.0)])
    r_arm_fwd = 1.0 / (2.0 * (4.4 - 1.2))  # kp_fwd = 2 A/V^2 (the mismatch)
    r_arm_rev = 1.0 / (4.0 * (4.4 - 1.8))  # vto_rev = -1.8 V
    for vd, r_arm in ((vd_fwd, r_arm_fwd), (vd_rev, r_arm_rev)):
        expected = 4.5 - 0.1 * 0.2 - 2 * 0.2 * r_arm - 3.0 * 0.2
        assert vd == pytest.approx(expected, abs=0.03)
        assert vd - 0.2 > 3.0


def test_bridge_loop_is_stable_in_both_polarities(tmp_path):
    cases = []
    for pol in (1, -1):
        for rh, vs in ((0.5, 5.5), (3.0, 4.5)):
            c = {"rh": rh, "vsup": vs, "pol": pol, "lcable": 5e-6}
            c.update(MISMATCH)
            cases.append(c)
    v_dac = dac_volts(dac_code(165.0, P))
    results = loop_gain(tmp_path, cases, HBRIDGE_CORE, "Vdac dac 0 %r" % v_dac)
    for params, (_, crossings) in zip(cases, results):
        assert len(crossings) == 1, (params, crossings)
        assert crossings[0][1] > 45.0, (params, crossings)


def test_polarity_flip_without_dead_time_has_no_shoot_through(tmp_path):
    # worst case, no firmware dead time: the gates flip at full current
    # (50 ns edge). Every path from the 5 V rail to ground runs through the
    # sink, so the current cannot run away; the heater current reverses and
    # settles to the same magnitude.
    lines = alter_lines([dict(MISMATCH, tflip=100e-6)])[0] + [
        "reset",
        "tran 10n 300u 0 10n",
        "wrdata flip.txt i(vih) v(s)",
    ]
    v_dac = dac_volts(dac_code(165.0, P))
    run(wrapper(HBRIDGE_CORE, "Vdac dac 0 %r" % v_dac, lines), tmp_path)
    t, ih, vs = read_wrdata(os.path.join(str(tmp_path), "flip.txt"))
    before = [x for tt, x in zip(t, ih) if 80e-6 <= tt < 100e-6]
    after = [x for tt, x in zip(t, ih) if tt >= 250e-6]
    i_before = sum(before) / len(before)
    i_after = sum(after) / len(after)
    assert i_after == pytest.approx(-i_before, rel=0.001)
    # no shoot-through: a short from the rail through two half-on arms would
    # be limited only by the arms' on-resistance (amperes). What happens is
    # a brief bump of the sink current (the drain jumps by ~0.2 V and couples
    # through the gate-drain capacitance): under 1.5 x for under 2 us
    # (measured 1.34 x for 0.5 us); the firmware's dead time (current to
    # zero, flip, ramp back) avoids even that
    i_reg = abs(i_before)
    assert max(vs) / P["rs"] < 1.5 * i_reg
    assert max(abs(x) for x in ih) < 1.5 * i_reg
    high = [tt for tt, x in zip(t, vs) if x / P["rs"] > 1.1 * i_reg]
    assert high and max(high) - min(high) < 2e-6
    assert min(high) >= 100e-6  # only at the flip
