"""Design calculations, BOM consistency and the shipped decks.

Each calculation stated in hardware/README.md ("Design calculations") is
recomputed here from the values in hardware/bom.csv and the netlist, checked
against ngspice where a simulation can measure it, and looked up in the
README so the document cannot drift from the design.
"""

import csv
import math
import os
import re
import subprocess

import pytest

from spicerun import (
    SINK_CORE, SPICE_DIR, dac_code, dac_volts, netlist_params, run, set_ma_from_code, wrapper,
)
from support import ROOT, require_tool

P = netlist_params()
BOM = os.path.join(ROOT, "hardware", "bom.csv")
README = os.path.join(ROOT, "hardware", "README.md")

# level-1 model parameters of the sink MOSFET and the op-amp headroom
# (hardware/spice/models: mosfets.lib nmos_ll, opamp_rr.lib vsat)
KP, VTO, VSAT = 8.0, 1.6, 0.02


def _bom():
    with open(BOM) as f:
        return list(csv.DictReader(f))


def _refdes_count(refdes):
    n = 0
    for part in refdes.split(";"):
        m = re.match(r"([A-Z]+)(\d+)-([A-Z]+)(\d+)$", part)
        if m:
            assert m.group(1) == m.group(3), refdes
            n += int(m.group(4)) - int(m.group(2)) + 1
        else:
            assert re.match(r"[A-Z]+\d+$", part), refdes
            n += 1
    return n


def _readme():
    with open(README, encoding="utf-8") as f:
        return f.read()


def _row(function_word):
    rows = [r for r in _bom() if function_word in r["function"]]
    assert len(rows) == 1, function_word
    return rows[0]


def _ohms(text):
    m = re.match(r"([0-9.]+)\s*(k|M)?(ohm|Ω)", text)
    return float(m.group(1)) * {"k": 1e3, "M": 1e6, None: 1.0}[m.group(2)]


def _farads(text):
    m = re.match(r"([0-9.]+)\s*(p|n|u)F", text)
    return float(m.group(1)) * {"p": 1e-12, "n": 1e-9, "u": 1e-6}[m.group(2)]


def test_bom_quantities_match_designators():
    rows = _bom()
    assert len(rows) > 30
    seen = set()
    for r in rows:
        assert int(r["qty"]) == _refdes_count(r["refdes"]), r["refdes"]
        for col in ("part", "value", "tolerance_tc", "package", "function"):
            assert r[col].strip(), (r["refdes"], col)
        assert r["refdes"] not in seen
        seen.add(r["refdes"])


def test_bom_values_are_the_netlist_values():
    assert _ohms(_row("heater current sense")["value"]) == P["rs"]
    assert "0.1 %" in _row("heater current sense")["tolerance_tc"]
    # 5 ppm/K: the regulator's +/-500 ppm budget over a 20 K room swing (tools/bench/regulation.py)
    assert _row("heater current sense")["tolerance_tc"].startswith("0.1 %; 5 ppm/K")
    assert _ohms(_row("DAC divider top")["value"]) == P["rtop"]
    assert _ohms(_row("DAC divider bottom")["value"]) == P["rbot"]
    assert _farads(_row("set-node filter")["value"]) == P["cset"]
    assert _ohms(_row("feedback resistor")["value"]) == P["ri"]
    assert _farads(_row("loop compensation")["value"]) == P["cc"]
    assert _ohms(_row("gate resistor")["value"]) == P["rg"]
    assert _ohms(_row("drain snubber resistor")["value"]) == P["rsn"]
    assert _farads(_row("drain snubber capacitor")["value"]) == P["csn"]
    assert _ohms(_row("difference amplifier input")["value"]) == P["rdiff1"]
    assert _ohms(_row("difference amplifier gain")["value"]) == P["rdiff2"]


def test_bom_bus_addresses_are_the_shared_choices():
    # the reference hardware shared with the driver engineer (board files)
    assert "0x60" in _row("heater current set voltage")["value"]
    assert "0x61" in _row("heater current set voltage")["value"]
    assert _row("read-back: AIN0")["value"] == "I2C 0x49"
    assert _row("cold-junction sensor")["value"] == "I2C 0x4A"
    assert "0x3C" in _row("OLED")["value"]
    assert "mode 1" in _row("thermocouple ADC: SPI")["function"]


def test_sense_resistor_power(tmp_path):
    # P = I^2 R (Joule's law) at the DAC's full scale, 200 mA and 165 mA
    i_fs = set_ma_from_code(4096, P) * 1e-3
    assert i_fs * i_fs * P["rs"] == pytest.approx(0.0635, abs=0.0001)
    assert 0.2 ** 2 * P["rs"] == pytest.approx(0.040)
    assert 0.165 ** 2 * P["rs"] == pytest.approx(0.0272, abs=0.0001)
    text = _readme()
    for s in ("63.5 mW", "40.0 mW", "27.2 mW"):
        assert s in text


def test_mosfet_dissipation_worst_case(tmp_path):
    # 5.5 V, 0.5 ohm, code 4095, stiff supply: P = (V - I (Rh + Rs)) I
    i_a = set_ma_from_code(4095, P) * 1e-3
    p_hand = (5.5 - i_a * (0.5 + P["rs"])) * i_a
    assert p_hand == pytest.approx(1.29, abs=0.005)
    lines = [
        "alterparam rsup=0", "alterparam rh=0.5", "alterparam vsup=5.5", "reset",
        "alter vdac dc=%r" % dac_volts(4095), "op",
        "let pq = i(vih)*(v(d)-v(s))", "print pq",
    ]
    out = run(wrapper(SINK_CORE, "Vdac dac 0 1.0", lines), tmp_path, expect=("pq",))
    # the diff amp's 17 uA from the drain is the only difference
    assert out["pq"] == pytest.approx(p_hand, rel=0.001)
    assert "**1.29 W**" in _readme()


def _compliance_v(v_sup, i_a, rsup=0.1):
    # heater voltage available: supply - I Rsup - I Rs - V_DS,min, where the
    # gate reaches the amplifier's rail minus VSAT and the square-law triode
    # R_on = 1 / (KP (V_GS - V_th)) at that drive (textbook level-1 model)
    v_rail = v_sup - i_a * rsup
    v_gs = v_rail - VSAT - i_a * P["rs"]
    r_on = 1.0 / (KP * (v_gs - VTO))
    return v_rail - i_a * P["rs"] - i_a * r_on


def test_compliance_at_low_supply(tmp_path):
    v_comp = _compliance_v(4.5, 0.2)
    assert v_comp == pytest.approx(4.27, abs=0.005)
    assert "**4.27 V**" in _readme()
    r_max = v_comp / 0.2
    assert r_max == pytest.approx(21.4, abs=0.1)
    # ngspice: regulating at 90 % of the limit, out of compliance at 120 %
    code = dac_code(200.0, P)
    lines = []
    for k, rh in enumerate((0.9 * r_max, 1.2 * r_max)):
        lines += [
            "alterparam rh=%r" % rh, "alterparam vsup=4.5", "reset",
            "alter vdac dc=%r" % dac_volts(code), "op",
            "let ih_%d = i(vih)" % k, "let gop_%d = v(gop)" % k, "let vp_%d = v(vp)" % k,
            "print ih_%d gop_%d vp_%d" % (k, k, k),
        ]
    out = run(wrapper(SINK_CORE, "Vdac dac 0 1.0", lines), tmp_path, expect=("ih_0", "ih_1"))
    assert 1000.0 * out["ih_0"] == pytest.approx(200.0, rel=0.005)
    # beyond compliance: more than the firmware's short_frac (2 %) short and
    # the drive at its rail: the regulator's "compliance" condition
    assert 1000.0 * out["ih_1"] < 0.98 * 200.0
    assert out["gop_1"] > out["vp_1"] - 0.03


def test_adc_resolution_at_gain_32():
    # ADS1220: FSR = +/-Vref/gain = +/-2.048/32 V (SBAS501 8.3.2, Table 8-2);
    # 24-bit two's complement codes -> LSB = 2 FSR / 2^24
    fsr = 2.048 / 32
    assert fsr == pytest.approx(0.064)
    lsb = 2 * fsr / 2 ** 24
    assert lsb == pytest.approx(7.63e-9, rel=1e-3)
    assert 0.5e-3 / lsb == pytest.approx(65536, rel=1e-3)
    assert 15e-3 / fsr == pytest.approx(0.234, abs=0.001)
    # budget ADS1115 at +/-0.256 V, 16 bits: 0.256 / 2^15 (SBAS444, from memory)
    assert 0.256 / 2 ** 15 == pytest.approx(7.8125e-6)
    text = _readme()
    assert "**7.63 nV**" in text and "7.8125 µV" in text


def test_filter_corners_stated_in_readme():
    # RC low-pass corner 1 / (2 pi R C) (textbook first-order filter)
    f_dm = 1 / (2 * math.pi * 2 * 1e3 * 100e-9)
    f_cm = 1 / (2 * math.pi * 1e3 * 10e-9)
    assert round(f_dm) == 796 and round(f_cm / 100) / 10 == 15.9
    text = _readme()
    assert "796 Hz" in text and "15.9 kHz" in text
    tau = P["rtop"] * P["rbot"] / (P["rtop"] + P["rbot"]) * P["cset"]
    assert "9.2 µs" in text and tau == pytest.approx(9.2e-6, abs=0.05e-6)


def _deck(name, tmp_path):
    exe = require_tool("ngspice")
    proc = subprocess.run([exe, "-b", os.path.join(SPICE_DIR, name)], cwd=str(tmp_path),
                          capture_output=True, text=True, timeout=60)
    text = proc.stdout + proc.stderr
    assert "Error" not in text and "aborted" not in text, text[-1500:]
    return {m.group(1): float(m.group(2))
            for m in re.finditer(r"^([a-z_]+) = ([-+0-9.eE]+)\s*$", text, re.M)}


def test_shipped_dc_deck(tmp_path):
    out = _deck("sink_dc.cir", tmp_path)
    # code 2694: 3.3 x 2694 / 4096 / 13.1 A = 165.68 mA (MCP4725 equation, divider)
    assert out["set_ma"] == pytest.approx(165.684, abs=0.002)
    assert out["heater_ma"] == pytest.approx(out["set_ma"], rel=0.0005)
    assert out["heater_read_v"] == pytest.approx(1.5 * out["heater_ma"] * 1e-3, abs=0.002)


def test_shipped_hbridge_deck(tmp_path):
    out = _deck("hbridge_dc.cir", tmp_path)
    assert out["fwd_ma"] > 0 > out["rev_ma"]
    assert abs(out["rev_ma"]) == pytest.approx(out["fwd_ma"], rel=0.001)


def test_shipped_step_and_loop_gain_decks(tmp_path):
    assert 0.0 <= _deck("sink_step.cir", tmp_path)["overshoot_pct"] < 5.0
    out = _deck("sink_loopgain.cir", tmp_path)
    assert out["phase_margin_deg"] > 45.0
    assert 20e3 < out["f_cross"] < 500e3
