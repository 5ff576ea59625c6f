"""Dynamics of the heater current loop: setpoint step and AC loop gain.

Stability criteria (the project's own, stated in hardware/README.md):
- step 150 -> 165 mA: overshoot < 5 % of the step, and the error
  e(t) = i(t) - i_final crosses zero at most once more after its first
  crossing (crossings counted with hysteresis: e must pass from beyond
  -band to beyond +band or back, band = the 0.1 % settling band, so that
  numerical noise inside the band is not counted);
- settling time to 0.1 % of the step (15 uA), measured from the DAC edge;
- phase margin > 45 deg from an AC loop-gain analysis (Middlebrook voltage
  injection at Vbrk; T = -V(s)/V(sfb)), at every load/supply corner.
"""

import math
import os

import pytest

from spicerun import SINK_CORE, alter_lines, loop_gain, netlist_params, read_wrdata, run, wrapper

P = netlist_params()
T_STEP_S = 100e-6
I0_MA, I1_MA = 150.0, 165.0


def _v_dac(ma):
    # Vdac = I * R_s * (Rtop + Rbot) / Rbot (divider formula; nominal parts)
    return ma * 1e-3 * P["rs"] * (P["rtop"] + P["rbot"]) / P["rbot"]


def _step_source():
    return "Vdac dac 0 PWL(0 %r %r %r %r %r)" % (
        _v_dac(I0_MA), T_STEP_S, _v_dac(I0_MA), T_STEP_S + 100e-9, _v_dac(I1_MA))


def _run_steps(tmp_path, cases, t_stop_s=300e-6):
    """cases: list of {param: value}; returns one (t, i_heater) per case."""
    lines = []
    for k, alters in enumerate(alter_lines(cases)):
        lines += alters
        lines += [
            "reset",
            "tran 20n %r 0 20n" % t_stop_s,
            "wrdata step_%d.txt i(vih)" % k,
        ]
    run(wrapper(SINK_CORE, _step_source(), lines), tmp_path)
    out = []
    for k in range(len(cases)):
        t, i = read_wrdata(os.path.join(str(tmp_path), "step_%d.txt" % k))
        out.append((t, i))
    return out


def step_figures(t, i):
    """(overshoot fraction, extra zero crossings, settling time s) of one step."""
    before = [x for tt, x in zip(t, i) if T_STEP_S - 20e-6 <= tt < T_STEP_S]
    after = [x for tt, x in zip(t, i) if tt >= t[-1] - 50e-6]
    i0 = sum(before) / len(before)
    i1 = sum(after) / len(after)
    step = i1 - i0
    post = [(tt, x) for tt, x in zip(t, i) if tt >= T_STEP_S]
    overshoot = (max(x for _, x in post) - i1) / step
    band = 0.001 * abs(step)
    # crossings of the error through the band, with hysteresis
    side, crossings = -1, 0  # the error starts negative (below the new value)
    for _, x in post:
        e = x - i1
        if side < 0 and e > band:
            side, crossings = 1, crossings + 1
        elif side > 0 and e < -band:
            side, crossings = -1, crossings + 1
    # the first crossing is the response reaching the new value; with no
    # overshoot beyond the band there is none, and nothing extra either
    extra = max(0, crossings - 1)
    last_out = T_STEP_S
    for tt, x in post:
        if abs(x - i1) > band:
            last_out = tt
    return overshoot, extra, last_out - T_STEP_S, i0, i1


CORNERS = [
    {"cset": 1e-12, "rh": 0.5, "vsup": 5.5},
    {"cset": 1e-12, "rh": 3.0, "vsup": 4.5},
    {"cset": 1e-12, "rh": 0.5, "vsup": 5.0, "lcable": 5e-6},
    {"cset": 1e-12, "rh": 1.5, "vsup": 5.0, "lcable": 0.0},
]


def test_step_no_overshoot_no_ringing_fast_settling(tmp_path):
    # loop alone (set-node filter negligible): the op-amp sees a 100 ns edge
    for params, (t, i) in zip(CORNERS, _run_steps(tmp_path, CORNERS)):
        overshoot, extra, t_settle, i0, i1 = step_figures(t, i)
        assert i0 == pytest.approx(I0_MA * 1e-3, rel=0.001), params
        assert i1 == pytest.approx(I1_MA * 1e-3, rel=0.001), params
        assert overshoot < 0.05, params
        assert extra <= 1, params
        # measured about 9.5 us with the reference parts; 20 us is the
        # design limit (the firmware ticks at 100 ms, so anything below a
        # millisecond is invisible to it)
        assert t_settle < 20e-6, (params, t_settle)


def test_step_figures_detect_ringing():
    # the figure-of-merit code itself must catch an underdamped response:
    # a synthetic 2nd-order step with zeta = 0.2 (overshoot
    # exp(-pi zeta / sqrt(1 - zeta^2)) = 52.7 %, textbook 2nd-order formula)
    zeta, wn = 0.2, 2 * math.pi * 100e3
    wd = wn * math.sqrt(1 - zeta * zeta)
    t = [k * 20e-9 for k in range(15000)]
    i = []
    for tt in t:
        if tt < T_STEP_S:
            i.append(0.150)
        else:
            x = tt - T_STEP_S
            y = 1 - math.exp(-zeta * wn * x) * (
                math.cos(wd * x) + zeta / math.sqrt(1 - zeta * zeta) * math.sin(wd * x))
            i.append(0.150 + 0.015 * y)
    overshoot, extra, t_settle, _, _ = step_figures(t, i)
    expected = math.exp(-math.pi * zeta / math.sqrt(1 - zeta ** 2))
    assert overshoot == pytest.approx(expected, rel=0.01)
    assert extra >= 3
    assert t_settle > 50e-6


def test_board_step_follows_the_set_node_filter(tmp_path):
    # with the board's set-node filter (Cset = 10 nF behind Rtop || Rbot
    # = 923.7 ohm) the current follows a tau1 = 9.24 us lag in series with the
    # loop's own tau2 ~ 1/(2 pi f_c) = 1.9 us; two cascaded first-order lags
    # settle to 0.1 % at about tau1 ln(1000 tau1 / (tau1 - tau2)) = 65.8 us
    # (worked from the two-pole step response, dominated by tau1)
    (t, i), = _run_steps(tmp_path, [{"rh": 1.5, "vsup": 5.0}])
    overshoot, extra, t_settle, _, _ = step_figures(t, i)
    r_par = P["rtop"] * P["rbot"] / (P["rtop"] + P["rbot"])
    tau1 = r_par * P["cset"]
    assert tau1 == pytest.approx(9.237e-6, rel=1e-3)
    tau2 = 1.0 / (2 * math.pi * 86e3)
    expected = tau1 * math.log(1000 * tau1 / (tau1 - tau2))
    assert t_settle == pytest.approx(expected, rel=0.1)
    assert overshoot < 0.005
    assert extra == 0


def _loop_gain(tmp_path, cases):
    return loop_gain(tmp_path, cases, SINK_CORE, "Vdac dac 0 %r" % _v_dac(165.0))


def _follower_gain(i_a):
    # source follower gain gm Rs / (1 + gm Rs), square-law gm = sqrt(2 KP I)
    # (textbook MOSFET small-signal model; KP from models/mosfets.lib)
    gm = math.sqrt(2 * 8.0 * i_a)
    return gm * P["rs"] / (1 + gm * P["rs"])


def test_phase_margin_above_45_deg_at_every_corner(tmp_path):
    cases = [
        {"rh": rh, "vsup": vs, "lcable": lc}
        for rh in (0.5, 3.0) for vs in (4.5, 5.5) for lc in (0.0, 1e-6, 5e-6)
    ]
    # op-amp open-loop gain at 10 Hz: A0 / (1 + j f / f_p1), f_p1 = GBW / A0
    a10 = 1e6 / complex(1.0, 10.0 / 1.0)
    # the controller at 10 Hz: the op-amp in parallel with the Ri-Cc
    # integrator, |1 / (1/A + j w Ri Cc)| (worked from the schematic)
    ctrl = abs(1.0 / (1.0 / a10 + 1j * 2 * math.pi * 10.0 * P["ri"] * P["cc"]))
    expected_t10 = ctrl * _follower_gain(0.165)
    for params, (t10, crossings) in zip(cases, _loop_gain(tmp_path, cases)):
        assert t10 == pytest.approx(expected_t10, rel=0.05), params
        # exactly one crossover (no resonance lifting |T| above 1 again)
        assert len(crossings) == 1, (params, crossings)
        fc, pm = crossings[0]
        assert pm > 45.0, (params, pm)
        # crossover near the integrator's gm Rs / (1 + gm Rs) / (2 pi Ri Cc)
        f_int = _follower_gain(0.165) / (2 * math.pi * P["ri"] * P["cc"])
        assert fc == pytest.approx(f_int, rel=0.2)


def test_loop_gain_check_catches_the_missing_snubber(tmp_path):
    # without the drain snubber a 5 uH lead pair resonates with the drain and
    # lifts |T| above 1 a second time near 0.8 MHz: the check must see it
    (_, crossings), = _loop_gain(tmp_path, [{"lcable": 5e-6, "csn": 1e-15}])
    assert len(crossings) >= 2
    assert any(pm < 45.0 for _, pm in crossings[1:])


def test_phase_margin_catches_a_bad_compensation(tmp_path):
    # a 100x slower gate (10 kohm gate resistor) and no compensation
    # capacitor put the gate pole under the crossover: margin below 45 deg
    (_, crossings), = _loop_gain(tmp_path, [{"rg": 10e3, "cc": 1e-15}])
    assert crossings and crossings[0][1] < 45.0
