"""The device facade (gaugecore.device) on a Bench-driven controller, through the dispatcher.

No threads: the test steps the controller and the service itself on the
simulated clock, so every reply is exact and every run is the same.
Values of the demo tube and chamber are invented (the 'Wren' tube
`wren-demo`, the 'Larkspur bell jar').
"""

import os

import pytest

from gaugecore import commands as C
from gaugecore import units
from gaugecore.service import Service
from tcgauge.sim import chamber
from tcgauge.sim.device import VirtualDevice


class Port:
    """A byte-stream port for the service: bytes given in, everything written kept."""

    def __init__(self):
        self.inbox = b""
        self.out = b""

    def read_available(self):
        data, self.inbox = self.inbox, b""
        return data

    def write(self, data):
        self.out += bytes(data)
        return len(data)


class Rig:
    """A VirtualDevice's device, stepped by hand."""

    def __init__(self, scenario=None, root=None, gas="N2", faults=()):
        if scenario is None:
            scenario = chamber.static(pressure_pa=10.0)
        self.vd = VirtualDevice(scenario=scenario, root=root, gas=gas, seed=3, faults=faults)
        self.dev = self.vd.device
        self.port = Port()
        self.svc = Service(self.port, self.dev)

    def run_s(self, seconds):
        ctl = self.vd.controller
        clock = self.vd.bench.clock
        end = clock.time_s + seconds
        while clock.time_s < end:
            clock.sleep_ms(5)
            ctl.step(ctl.now_ms())
            self.svc.poll()

    def ask(self, line):
        """Send one line; the reply text (no newline) or None when there is none."""
        self.port.out = b""
        self.port.inbox = (line + "\n").encode()
        self.svc.poll()
        if not self.port.out:
            return None
        text = self.port.out.decode()
        assert text.endswith("\n") and text.count("\n") == 1, text
        return text[:-1]

    def errors(self):
        out = []
        while True:
            e = self.ask("SYST:ERR?")
            if e == '0,"No error"':
                return out
            out.append(e)

    def close(self):
        self.vd.close()


@pytest.fixture
def rig(tmp_path):
    r = Rig(root=str(tmp_path))
    r.run_s(1.0)
    yield r
    r.close()


def test_every_facade_method_is_bound(rig):
    assert rig.svc.dispatcher.unbound() == []


# A valid argument for each argument kind; the table must accept each one.
def _arg(spec, rig):
    kind = spec[0]
    if kind == C.A_FLOAT:
        unit = spec[1]
        return {"MA": "150", "HZ": "5", "S": "0.5"}[unit]
    if kind == C.A_PRESSURE:
        return "1.5 PA"
    if kind == C.A_INT:
        return str(spec[1])
    if kind == C.A_BOOL:
        return "OFF"
    if kind == C.A_ENUM:
        return spec[1][0]
    if kind == C.A_STRING:
        return '"demo_n2"'
    if kind == C.A_CHANNEL:
        return "1"
    if kind == C.A_CHANLIST:
        return "(@1,2)"
    raise AssertionError(kind)


# An upload is a sequence (BEGin with the file's length and CRC-32, DATA chunks in order,
# END?), so its forms cannot take sample arguments one by one: tests/core/test_scpi_table.py
# and tests/host/test_transfer.py send them in order, with exact replies and refusals.
UPLOAD = ("TABLe:UPLoad:BEGin", "TABLe:UPLoad:DATA", "TABLe:UPLoad:END")


def test_every_command_form_is_answered_without_error(rig):
    seen = 0
    for rec in C.COMMANDS:
        header = rec[C.HEADER].replace("[", "").replace("]", "").replace("#", "1")
        if rec[C.HEADER] == "*RST" or rec[C.HEADER] in UPLOAD:
            continue  # *RST: checked on its own below; uploads: see UPLOAD
        if C.is_setting(rec) and rec[C.HEADER] != "CALibrate:ZERO":  # zero: its own test
            args = ",".join(_arg(s, rig) for s in rec[C.ARGS])
            assert rig.ask(header + (" " + args if args else "")) is None
            assert rig.errors() == [], header
            seen += 1
        if C.is_query(rec):
            args = ",".join(_arg(s, rig) for s in rec[C.QARGS])
            reply = rig.ask(header + "?" + (" " + args if args else ""))
            assert reply, header
            assert rig.errors() == [], header
            seen += 1
    skipped = sum(len(C.forms(rec)) for rec in C.COMMANDS if rec[C.HEADER] in UPLOAD)
    assert seen == sum(len(C.forms(rec)) for rec in C.COMMANDS) - 2 - skipped  # and *RST, CAL:ZERO


def test_exact_replies(rig):
    r = rig
    assert r.ask("*IDN?") == "tcgauge,TCGAUGE-2CH,SIM0003,0.1.0"
    assert r.ask("*TST?") == "0"
    assert r.ask("TABL:CAT?") == '"demo_n2"'
    assert r.ask("CONF:TABL?") == '"demo_n2","demo_n2"'
    assert r.ask("CONF:UNIT?") == "PA"
    assert r.ask("CONF:RATE?") == "1.000000E+01"
    assert r.ask("CONF:HEAT? (@1)") == "1.650000E+02"  # the demo table's heater current (invented)
    assert r.ask("CONF:FAST?") == "0,0"
    assert r.ask("STR?") == "0"
    assert r.ask("STAT:FAUL?") == "NONE,NONE"
    assert r.ask("CAL:ZERO?") == "NAN,NAN"  # never zeroed
    # setpoint defaults: on 1 Pa, off 2 Pa, below, no delay, disabled (invented demo values)
    assert r.ask("SETP1:SOUR?;ONL?;OFFL?;DIR?;DEL?;ENAB?;REL?") == \
        "1;1.000000E+00;2.000000E+00;BEL;0.000000E+00;0;0"
    assert r.ask("SETP2:SOUR?") == "2"
    assert r.ask("CONF:UNIT TORR;UNIT?") == "TORR"
    # 1 Torr = 101325/760 Pa exactly (NIST SP 811, B.8)
    assert r.ask("SETP1:ONL?") == "%.6E" % (1.0 / units.PA_PER_TORR)
    assert r.ask("CONF:RATE 20;RATE?") == "2.000000E+01"
    assert r.ask("CONF:RATE 3;RATE?") == "%.6E" % (1000.0 / 333)  # whole-ms period: 333 ms
    assert r.errors() == []


def test_measurement_reads_the_chamber(rig):
    r = rig
    r.run_s(60.0)
    fields = r.ask("MEAS?").split(",")
    assert len(fields) == 8
    for k in (0, 4):
        assert fields[k + 1:k + 4] == ["PA", "OK", "NONE"]
        # the demo table is the simulator's own steady state (tcgauge.sim.simtable), so a
        # settled tube reads the chamber's 10 Pa up to the electronics' errors; 5 % is our
        # own tolerance (invented, covers noise and the 60 s settling)
        assert float(fields[k]) == pytest.approx(10.0, rel=0.05)
    emf = [float(x) for x in r.ask("MEAS:EMF?").split(",")]
    cj = [float(x) for x in r.ask("MEAS:JUNC?").split(",")]
    heat = [float(x) for x in r.ask("MEAS:HEAT?").split(",")]
    bench = r.vd.bench
    for i in range(2):
        assert emf[i] == pytest.approx(bench.channels[i].true_emf_mv(), abs=0.02)
        assert cj[i] == pytest.approx(22.0, abs=1.0)  # the static chamber's 22 C room (invented)
        assert heat[i] == pytest.approx(165.0, abs=0.5)
    r.ask("CONF:UNIT MICRON")
    # 10 Pa = 75.006 micron (1 micron = 1e-3 Torr, NIST SP 811 B.8)
    p_micron = float(r.ask("MEAS? (@1)").split(",")[0])
    assert p_micron == pytest.approx(10.0 / units.PA_PER_MICRON, rel=0.05)
    assert r.ask("MEAS? (@1)").split(",")[1:] == ["MICRON", "OK", "NONE"]


def test_range_and_conflict_errors_have_exact_text(rig):
    r = rig
    assert r.ask("CONF:HEAT 240,(@1)") is None
    assert r.errors() == ['-222,"Data out of range;240.0 mA not in this tube\'s 100.0..220.0 mA"']
    assert r.ask("CONF:TABL 'nosuch',(@1)") is None
    assert r.errors() == ['-224,"Illegal parameter value;no table named nosuch on the device"']
    # levels may be set one by one while disabled, but an enabled setpoint must be consistent
    assert r.ask("SETP1:ONL 5 PA;OFFL 3 PA;ENAB ON") is None
    assert r.errors() == ['-221,"Settings conflict;SP1: off level must be above the on level for BELow"']
    assert r.ask("SETP1:ENAB?") == "0"
    assert r.ask("SETP1:OFFL 2000 PA") is None
    assert r.ask("SETP1:ENAB ON") is None
    assert r.errors() == ['-221,"Settings conflict;SP1: levels outside the table\'s 0.02..1e+03 Pa"']
    assert r.ask("SETP1:OFFL 8 PA;ENAB ON;ENAB?") == "1"
    assert r.ask("SETP1:ONL 9 PA") is None  # would break the enabled setpoint: refused
    assert r.errors() == ['-221,"Settings conflict;SP1: off level must be above the on level for BELow"']
    assert r.ask("SETP1:ONL?") == "5.000000E+00"


def test_setpoint_switches_its_relay_and_disable_releases_it(rig):
    r = rig
    relay = r.vd.bench.channels[0].relays[0]  # setpoint 1 drives channel 1's first relay
    r.ask("SETP1:DIR ABOV;ONL 5 PA;OFFL 3 PA;ENAB ON")
    assert r.errors() == []
    r.run_s(30.0)  # the chamber holds 10 Pa: above the 5 Pa on level
    assert r.ask("SETP1:REL?") == "1"
    assert relay.state is True
    r.ask("SETP1:ENAB OFF")
    assert r.ask("SETP1:REL?") == "0"
    assert relay.state is False
    assert r.dev.sp_events(1)[-1][1:] == (False, "fail-safe: disabled")


def test_faulted_channel_gives_no_number_and_clears(tmp_path):
    # channel 2's thermocouple opens at 20 s and its heater burns out at 40 s (invented scenario)
    r = Rig(root=str(tmp_path), faults=("tc-open@20:2",))
    r.vd.bench.inject("heater-open", 1, at_s=40.0, clear_at_s=50.0)
    try:
        r.run_s(20.5)  # tc-open is seen within 2 samples (gaugecore.faults table)
        assert r.ask("MEAS? (@2)") == "NAN,PA,FAULT,TC-OPEN"
        assert r.ask("MEAS:EMF? (@2);:MEAS:JUNC? (@2);:MEAS:HEAT? (@2)") == "NAN;NAN;NAN"
        assert r.ask("STAT:FAUL?") == "NONE,TC-OPEN"
        assert r.ask("MEAS? (@1)").split(",")[2] == "OK"
        r.run_s(34.5)  # heater-open has come and gone on the bench; the fault latches
        assert r.ask("MEAS? (@2)") == "NAN,PA,FAULT,HEATER-OPEN"
        assert r.ask("*TST?") == str(16 | 64)  # channel 2: thermocouple and heater bits
        errs = r.errors()
        assert '-200,"Execution error;self-test ch2 heater: heater-open"' in errs
        r.vd.bench.clear("tc-open", 1)
        assert r.ask("STAT:CLE (@2)") is None
        r.run_s(10.0)
        assert r.ask("STAT:FAUL? (@2)") == "NONE"
        assert r.ask("MEAS? (@2)").split(",")[2] in ("OK", "OVER", "UNDER")
    finally:
        r.close()


def test_self_test_sees_a_dead_cold_junction_and_a_bad_table(tmp_path):
    r = Rig(root=str(tmp_path), faults=("cj-fail@5:1",))
    try:
        r.run_s(6.0)
        assert r.ask("*TST?") == "4"  # channel 1 cold junction
        assert r.errors() == [
            '-200,"Execution error;self-test ch1 cj: cold junction: sensor not responding"']
        path = os.path.join(str(tmp_path), "tables", "demo_n2.json")
        with open(path, "rb") as f:
            data = bytearray(f.read())
        data[200] ^= 1  # one flipped bit: the CRC-32 catches it
        with open(path, "wb") as f:
            f.write(bytes(data))
        assert r.ask("*TST?") == "5"
    finally:
        r.close()


def test_configuration_survives_a_rebuild(tmp_path):
    root = str(tmp_path)
    r = Rig(root=root, gas="Ar")
    try:
        assert r.ask("TABL:CAT?") == '"demo_ar","demo_n2"'
        assert r.ask("CONF:TABL?") == '"demo_ar","demo_ar"'
        r.ask("CONF:TABL 'demo_n2',(@2)")
        r.ask("CONF:UNIT MBAR;RATE 5;HEAT 150,(@1);FAST ON,(@2)")
        r.ask("SETP2:SOUR 1;ONL 0.03 MBAR;OFFL 0.05 MBAR;DEL 2.5;ENAB ON")
        assert r.errors() == []
        assert r.vd.device.channels[1].table.gas == "N2"
    finally:
        r.close()
    r = Rig(root=root, gas="Ar")  # the same files: a power cycle
    try:
        assert r.errors() == []
        assert r.ask("CONF:TABL?") == '"demo_ar","demo_n2"'
        assert r.vd.device.channels[1].table.gas == "N2"
        assert r.ask("CONF:UNIT?;RATE?") == "MBAR;5.000000E+00"
        assert r.ask("CONF:HEAT?;FAST?") == "1.500000E+02,1.650000E+02;0,1"
        assert r.ask("SETP2:SOUR?;ONL?;OFFL?;DEL?;ENAB?") == \
            "1;3.000000E-02;5.000000E-02;2.500000E+00;1"
        assert r.ask("STR ON;STR?") == "1"
        r.ask("*RST")
        assert r.ask("STR?;:CONF:UNIT?;RATE?;HEAT? (@1);TABL?") == \
            '0;PA;1.000000E+01;1.650000E+02;"demo_ar","demo_ar"'
    finally:
        r.close()
    r = Rig(root=root, gas="Ar")
    try:
        assert r.ask("CONF:UNIT?;TABL?;:SETP2:ENAB?;:STR?") == 'PA;"demo_ar","demo_ar";0;0'
    finally:
        r.close()


def test_damaged_config_falls_back_and_says_so(tmp_path):
    root = str(tmp_path)
    r = Rig(root=root)
    r.ask("CONF:UNIT TORR")
    r.ask("CONF:UNIT MBAR")  # a second save: config.prev.json holds TORR
    r.close()
    path = os.path.join(root, "store", "config.json")
    with open(path, "rb") as f:
        data = f.read()
    with open(path, "wb") as f:
        f.write(data.replace(b"MBAR", b"MBAX"))
    r = Rig(root=root)
    try:
        assert r.ask("CONF:UNIT?") == "TORR"
        assert r.errors() == ['-200,"Execution error;config: active file corrupt, using previous"']
    finally:
        r.close()


def test_vacuum_zero_is_stored_and_applied_after_a_rebuild(tmp_path):
    root = str(tmp_path)
    # the Larkspur bell jar at its base pressure (invented demo chamber)
    base = chamber.static(pressure_pa=chamber.LARKSPUR.base_pressure_pa)
    r = Rig(scenario=base, root=root)
    try:
        r.run_s(120.0)  # high-vacuum time constant ~12 s: settled
        assert r.ask("CAL:ZERO (@1)") is None
        r.run_s(0.5)
        assert r.ask("MEAS? (@1)") == "NAN,PA,INVALID,NONE"  # zeroing: no number
        assert r.ask("CAL:ZERO (@1)") is None
        assert r.errors() == ['-221,"Settings conflict;channel 1: a zero is already running"']
        for _ in range(60):
            r.run_s(10.0)
            if not r.dev.zero_running(1):
                break
        assert not r.dev.zero_running(1)
        assert r.errors() == []
        z = r.dev.config["zero"][0]
        target = r.dev.limits[0]["zero_emf_mv"]
        # the zero's tolerance (gaugecore.zero: tol_frac 2e-4 of the nominal EMF)
        assert abs(float(r.ask("CAL:ZERO? (@1)"))) <= 2e-4 * target
        heater = float(r.ask("CONF:HEAT? (@1)"))
        assert heater == pytest.approx(z["heater_ma"], rel=1e-6)  # NR3: 7 digits
        assert r.ask("CAL:ZERO? (@2)") == "NAN"
    finally:
        r.close()
    r = Rig(scenario=base, root=root)
    try:
        assert r.ask("CONF:HEAT? (@1)") == "%.6E" % z["heater_ma"]
        assert r.dev.channels[0].zero_result.c_e_j_per_mv == z["c_e_j_per_mv"]
    finally:
        r.close()
