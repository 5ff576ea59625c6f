"""The device-side parser and dispatcher: exact replies and error-queue contents.

Sources: SCPI-1999 Vol. 1 (6.2 header forms, optional nodes, numeric
suffixes and compound commands; 7.2.1.1 MINimum/MAXimum; 8.3.2 channel
lists; 21.8 error queue, numbers, messages and the -350 overflow rule),
IEEE 488.2-1992 (7.7.5 string data with doubled quotes; 10 common
commands; 11.5.1 standard event status bits: 32 command error, 16
execution error, 8 device-dependent error, 1 operation complete).
Error numbers and messages were checked against a published copy of the
SCPI-1999 ch. 21.8 list; the other section numbers are from memory.
Values returned by the fake facade are invented for the demo.
"""

import os
import sys

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from gaugecore import commands as C
from gaugecore import record, scpi
from gaugecore.commands import ConflictError, RangeError

sys.path.insert(0, os.path.dirname(__file__))
from fake_facade import FakeFacade  # noqa: E402

IDENT = C.ident("WREN-0001", "0.1.0")


@pytest.fixture
def fake():
    return FakeFacade()


@pytest.fixture
def dev(fake):
    return scpi.Dispatcher(fake, IDENT)


def errors(dev):
    return [code for code, _ in dev.errors()]


# ---- common commands ---------------------------------------------------------------------
def test_idn_four_fields(dev):
    assert dev.handle_line("*IDN?") == "tcgauge,TCGAUGE-2CH,WREN-0001,0.1.0"
    assert dev.handle_line(b"*idn?\r\n") == "tcgauge,TCGAUGE-2CH,WREN-0001,0.1.0"


def test_rst_calls_facade_and_keeps_error_queue(dev, fake):
    dev.handle_line("NOPE")
    assert dev.handle_line("*RST") is None
    assert fake.calls == [("reset",)]
    # SCPI-1999 21.8: *RST does not clear the error queue
    assert errors(dev) == [-113]


def test_cls_clears_queue_and_esr(dev):
    dev.handle_line("NOPE")
    assert dev.handle_line("*STB?") == "4"  # error queue not empty
    dev.handle_line("*CLS")
    assert dev.handle_line("*ESR?") == "0"
    assert dev.handle_line("SYST:ERR?") == '0,"No error"'
    assert dev.handle_line("*STB?") == "0"


def test_opc_tst_wai_ese_esr(dev, fake):
    assert dev.handle_line("*OPC?") == "1"
    assert dev.handle_line("*OPC;*ESR?") == "1"  # IEEE 488.2 11.5.1: bit 0 operation complete
    assert dev.handle_line("*ESR?") == "0"  # read clears
    assert dev.handle_line("*TST?") == "0"
    assert dev.handle_line("*WAI") is None
    assert dev.handle_line("*ESE 32;*ESE?") == "32"
    dev.handle_line("MEAS:FOO?")  # command error -> ESR bit 5 (32)
    assert dev.handle_line("*STB?") == "36"  # 4 queue + 32 event summary (ESR & ESE)
    assert dev.handle_line("*ESR?") == "32"
    assert dev.handle_line("*ESE 256") is None
    assert dev.errors()[-1] == (-222, "Data out of range;2.560000E+02 not in 0..255")


def test_esr_class_bits(dev, fake):
    fake.fail["rate_hz"] = OSError("adc bus stuck")
    dev.handle_line("CONF:RATE?")  # execution error -> 16
    dev.handle_line("*RST;" * 1)
    assert dev.handle_line("*ESR?") == "16"
    dev.feed(b"X" * 300 + b"\n")  # -363 device-dependent -> 8
    assert dev.handle_line("*ESR?") == "8"


def test_memory_query_reaches_the_facade(dev):
    assert dev.handle_line("DIAG:MEM:FREE?") == "123456"  # NR1 from the fake facade
    assert dev.handle_line("diagnostic:memory:free?") == "123456"
    assert dev.handle_line("SYST:ERR?") == '0,"No error"'


def test_system_version_and_error_forms(dev):
    assert dev.handle_line("SYST:VERS?") == "1999.0"
    assert dev.handle_line("system:version?") == "1999.0"
    dev.handle_line("BOGUS:CMD")
    dev.handle_line("BOGUS2")
    assert dev.handle_line("SYST:ERR:COUN?") == "2"
    assert dev.handle_line("SYSTem:ERRor:NEXT?") == '-113,"Undefined header;BOGUS:CMD"'
    assert dev.handle_line("syst:err?") == '-113,"Undefined header;BOGUS2"'
    assert dev.handle_line(":SYST:ERR?") == '0,"No error"'


# ---- header forms ----------------------------------------------------------------------------
@pytest.mark.parametrize("line", [
    "MEAS:PRES? (@1)", "MEASURE:PRESSURE? (@1)", "meas:pres? (@1)", "MeAsUrE:PrEs? (@1)",
    "MEAS? (@1)", "measure? (@1)", ":MEAS:PRES? (@1)",
])
def test_pressure_reading_in_all_header_forms(dev, line):
    # 13.332236842105264 Pa = 0.1 Torr (NIST SP 811 B.8: 1 Torr = 101325/760 Pa)
    assert dev.handle_line(line) == "1.000000E-01,TORR,OK,NONE"
    assert dev.errors() == []


@pytest.mark.parametrize("bad", ["MEA:PRES? (@1)", "MEASU:PRES? (@1)", "MEAS:PRESS? (@1)"])
def test_only_short_or_long_form_is_accepted(dev, bad):
    # SCPI-1999 Vol. 1 6.2.1: only the exact short or long form, no other abbreviation
    assert dev.handle_line(bad) is None
    assert errors(dev) == [-113]


def test_readings_for_each_state(dev, fake):
    fake.readings = {1: (1.0, "under", None), 2: (None, "fault", "heater_open")}
    assert dev.handle_line("MEAS? (@1,2)") == "7.500617E-03,TORR,UNDER,NONE,NAN,TORR,FAULT,HEATER_OPEN"
    # a number handed over with a fault is never printed (contract: no number for a faulted channel)
    fake.readings = {1: (5.0, "invalid", None), 2: (5.0, "fault", "tc_open")}
    assert dev.handle_line("MEAS?") == "NAN,TORR,INVALID,NONE,NAN,TORR,FAULT,TC_OPEN"
    fake.readings[1] = (5.0, "weird", None)
    assert dev.handle_line("MEAS? (@1)") is None
    assert dev.errors() == [(-200, "Execution error;unknown state weird")]


def test_channel_lists(dev, fake):
    # SCPI-1999 Vol. 1 8.3.2: (@1), (@1,2), ranges (@1:2), descending (@2:1)
    assert dev.handle_line("MEAS:EMF? (@1)") == "7.250000E+00"
    assert dev.handle_line("MEAS:EMF? (@1,2)") == "7.250000E+00,7.250000E+00"
    assert dev.handle_line("MEAS:EMF? (@1:2)") == "7.250000E+00,7.250000E+00"
    fake.calls.clear()
    dev.handle_line("MEAS:JUNC? (@2:1)")
    assert fake.calls == [("junction_c", 2), ("junction_c", 1)]
    fake.calls.clear()
    assert dev.handle_line("MEAS:HEAT?") == "1.180000E+02,1.180000E+02"  # omitted: all channels
    assert fake.calls == [("heater_ma", 1), ("heater_ma", 2)]
    assert dev.errors() == []


@pytest.mark.parametrize("arg, code, text", [
    ("(@3)", -222, "Data out of range;channel 3 not in 1..2"),
    ("(@0)", -222, "Data out of range;channel 0 not in 1..2"),
    ("(@1:3)", -222, "Data out of range;channel 3 not in 1..2"),
    ("(@a)", -102, "Syntax error;bad channel number"),
    ("(@1:2:3)", -102, "Syntax error;bad channel range"),
    ("1", -104, "Data type error;expected a channel list like (@1,2)"),
    ("(@1", -102, "Syntax error;unbalanced parenthesis"),
])
def test_bad_channel_lists(dev, fake, arg, code, text):
    assert dev.handle_line("MEAS:EMF? " + arg) is None
    assert dev.errors() == [(code, text)]
    assert fake.calls == []


def test_compound_commands_with_relative_paths(dev, fake):
    # SCPI-1999 Vol. 1 6.2.4: after ';' a header continues from the previous path
    assert dev.handle_line("CONF:UNIT PA;RATE 5;UNIT?;RATE?") == "PA;5.000000E+00"
    assert fake.calls == [("set_unit", "PA"), ("set_rate_hz", 5.0), ("rate_hz",)]
    fake.calls.clear()
    assert dev.handle_line("SETP2:ONL 10;OFFL 20;:SETP1:ENAB ON") is None
    assert fake.calls == [("set_sp_on_pa", 2, 10.0), ("set_sp_off_pa", 2, 20.0), ("set_sp_enable", 1, True)]
    fake.calls.clear()
    # a full header after ';' also works (lenient: tried from the root when the relative path fails)
    assert dev.handle_line("MEAS:EMF? (@1);MEAS:JUNC? (@1);*OPC?") == "7.250000E+00;2.350000E+01;1"
    assert dev.handle_line("*IDN?;;*OPC?") == "tcgauge,TCGAUGE-2CH,WREN-0001,0.1.0;1"
    assert dev.errors() == [(-102, "Syntax error;empty command")]


def test_a_failing_unit_does_not_stop_the_others(dev, fake):
    assert dev.handle_line("*OPC?;CONF:RATE 999;CONF:RATE?") == "1;1.000000E+01"
    assert dev.errors() == [(-222, "Data out of range;9.990000E+02 not in 1.000000E-01..5.000000E+01 HZ")]


def test_trailing_semicolon_and_blank_lines(dev):
    assert dev.handle_line("*OPC?;") == "1"
    assert dev.handle_line("") is None
    assert dev.handle_line("   \r\n") is None
    assert dev.errors() == []


# ---- settings and arguments --------------------------------------------------------------------
def test_unit_enum(dev, fake):
    for word in ("torr", "MBAR", "Pa", "micron"):
        dev.handle_line("CONF:UNIT " + word)
    assert [c[1] for c in fake.calls] == ["TORR", "MBAR", "PA", "MICRON"]
    assert dev.handle_line("CONF:UNIT?") == "MICRON"
    dev.handle_line("CONF:UNIT PSI")
    assert dev.errors() == [(-224, "Illegal parameter value;PSI (use PA, TORR, MBAR, MICRON)")]


def test_setpoint_pressures_in_selected_unit_or_with_suffix(dev, fake):
    dev.handle_line("SETP1:ONL 0.1")  # selected unit TORR
    dev.handle_line("SETPOINT2:ONLEVEL 2 MBAR")
    dev.handle_line("SETP:OFFL 40PA")  # suffix 1 by default (SCPI-1999 6.2.5.2)
    assert fake.calls[0] == ("set_sp_on_pa", 1, pytest.approx(13.332236842105264, rel=1e-12))
    assert fake.calls[1] == ("set_sp_on_pa", 2, 200.0)
    assert fake.calls[2] == ("set_sp_off_pa", 1, 40.0)
    fake.sp[2]["on"] = 200.0
    assert dev.handle_line("SETP2:ONL?") == "1.500123E+00"  # 200 Pa in Torr
    dev.handle_line("CONF:UNIT MBAR")
    assert dev.handle_line("SETP2:ONL?") == "2.000000E+00"
    assert dev.errors() == []


@pytest.mark.parametrize("line, code, text", [
    ("SETP1:ONL 1E6 PA", -222, "Data out of range;1.000000E+06 not in 1.000000E-03..1.200000E+05 PA"),
    ("SETP1:ONL 1 PSI", -131, "Invalid suffix;PSI (use PA, TORR, MBAR or MICRON)"),
    ("SETP1:ONL high", -104, "Data type error;expected a number"),
    ("SETP1:ONL", -109, "Missing parameter;1 needed"),
    ("SETP1:ONL 1,2", -108, "Parameter not allowed;2 given, 1 allowed"),
    ("SETP3:ONL 1", -114, "Header suffix out of range;3 not in 1..2"),
    ("SETP0:ONL 1", -114, "Header suffix out of range;0 not in 1..2"),
    ("SETP12345:ONL 1", -114, "Header suffix out of range;12345"),
    ("SETP1:DIR SIDEWAYS", -224, "Illegal parameter value;SIDEWAYS (use BELow, ABOVe)"),
    ("SETP1:ENAB YES", -224, "Illegal parameter value;YES (use ON, OFF, 1 or 0)"),
    ("SETP1:DEL 5 MS", -131, "Invalid suffix;MS (use S)"),
    ("SETP1:DEL -1", -222, "Data out of range;-1.000000E+00 not in 0.000000E+00..6.000000E+02 S"),
    ("SETP1:SOUR 3", -222, "Data out of range;3.000000E+00 not in 1..2"),
    ("SETP1:SOUR 1 V", -131, "Invalid suffix;V (none allowed)"),
    ("SETP1:REL 1", -113, "Undefined header;SETP#:REL has no setting form"),
    ("CONF:HEAT 300,(@1)", -222, "Data out of range;3.000000E+02 not in 1.000000E+00..2.500000E+02 MA"),
    ("CONF:HEAT 100", -109, "Missing parameter;2 needed"),
    ("CONF:HEAT (@1),100", -104, "Data type error;expected a number"),
    ("CONF:TABL wren,(@1)", -104, "Data type error;expected a quoted string"),
    ("CONF:TABL 'wren,(@1)", -102, "Syntax error;unterminated string"),
    ("CONF:TABL '" + "x" * 25 + "',(@1)", -222, "Data out of range;string longer than 24"),
    ("CONF:TABL 'a'x'y',(@1)", -151, "Invalid string data;lone quote inside string"),
    ("CONF:RATE 1E999", -222, "Data out of range;number too large"),
    ("CONF:RATE 1,", -102, "Syntax error;empty parameter"),
    ("*RST?", -113, "Undefined header;*RST has no query form"),
    ("*XYZ", -113, "Undefined header;*XYZ"),
    ("MEAS&:PRES?", -102, "Syntax error;bad header"),
    ("!R,1,2", -102, "Syntax error;bad header"),
    ("MEAS::PRES?", -102, "Syntax error;bad header"),
    ("?", -102, "Syntax error;empty header"),
])
def test_bad_arguments_exact_errors(dev, fake, line, code, text):
    assert dev.handle_line(line) is None
    assert dev.errors() == [(code, text)]
    assert [c for c in fake.calls if c[0] != "unit"] == []


def test_good_argument_forms(dev, fake):
    dev.handle_line("CONF:HEAT 120.5 MA,(@1,2)")
    dev.handle_line("CONF:HEAT MAX,(@1)")  # SCPI-1999 7.2.1.1 MAXimum
    dev.handle_line("CONF:RATE minimum")
    dev.handle_line("CONF:FAST 1,(@2)")
    dev.handle_line("conf:fast off,(@2)")
    dev.handle_line('CONF:TABL "wren-demo ""b""",(@1)')  # IEEE 488.2 7.7.5: doubled quote
    dev.handle_line("SETP1:DIR abov;DIR ABOVE;DIR bel")
    dev.handle_line("SETP2:SOUR 2.0")
    dev.handle_line("SETP1:DEL +1.5e1 s")
    assert fake.calls == [
        ("set_heater_target_ma", 1, 120.5), ("set_heater_target_ma", 2, 120.5),
        ("set_heater_target_ma", 1, 250.0), ("set_rate_hz", 0.1),
        ("set_fast", 2, True), ("set_fast", 2, False), ("set_table", 1, 'wren-demo "b"'),
        ("set_sp_direction", 1, "ABOVE"), ("set_sp_direction", 1, "ABOVE"),
        ("set_sp_direction", 1, "BELOW"), ("set_sp_source", 2, 2), ("set_sp_delay_s", 1, 15.0),
    ]
    assert dev.errors() == []


def test_queries_of_settings(dev, fake):
    assert dev.handle_line("CONF:TABL? (@1,2)") == '"wren-demo","wren-demo"'
    fake.tbl[1] = 'odd "name"'
    assert dev.handle_line("CONF:TABL? (@1)") == '"odd ""name"""'
    assert dev.handle_line("CONF:FAST? (@1)") == "0"
    assert dev.handle_line("CONF:HEAT? (@2)") == "1.200000E+02"
    assert dev.handle_line("SETP1:DIR?") == "BEL"  # SCPI character response: short form
    assert dev.handle_line("SETP1:SOUR?;ENAB?;REL?;DEL?") == "1;0;0;0.000000E+00"
    assert dev.handle_line("CAL:ZERO? (@1)") == "1.200000E-02"
    assert dev.handle_line("STAT:FAUL?") == "NONE,NONE"
    fake.faults[2] = "heater_open"
    assert dev.handle_line("STATUS:FAULT? (@2)") == "HEATER_OPEN"
    assert dev.handle_line("STR?;STR ON;STR:STAT?") == "0;1"
    assert dev.handle_line("TABL:CAT?") == '"wren-demo","wren-demo-ar"'
    assert dev.errors() == []


def test_actions_need_channels(dev, fake):
    dev.handle_line("CAL:ZERO (@2);STAT:CLE (@1:2)")
    assert fake.calls == [("zero", 2), ("clear_fault", 1), ("clear_fault", 2)]
    dev.handle_line("CAL:ZERO")
    assert dev.errors() == [(-109, "Missing parameter;1 needed")]


# ---- facade exceptions ------------------------------------------------------------------------
@pytest.mark.parametrize("exc, entry", [
    (RangeError("heater current above the tube limit"), (-222, "Data out of range;heater current above the tube limit")),
    (ConflictError("off level equals on level"), (-221, "Settings conflict;off level equals on level")),
    (ValueError("no table named x"), (-224, "Illegal parameter value;no table named x")),
    (OSError("heater driver not responding"), (-200, "Execution error;heater driver not responding")),
    (OSError(5), (-200, "Execution error;errno 5")),
    (ZeroDivisionError("float division by zero"), (-200, "Execution error;internal ZeroDivisionError")),
    (KeyError("x"), (-200, "Execution error;internal KeyError")),
])
def test_facade_exceptions_become_queue_entries(dev, fake, exc, entry):
    fake.fail["set_heater_target_ma"] = exc
    assert dev.handle_line("CONF:HEAT 100,(@1);*OPC?") == "1"
    assert dev.errors() == [entry]


def test_missing_facade_method_is_an_execution_error():
    class Partial:
        def unit(self):
            return "PA"

    d = scpi.Dispatcher(Partial(), IDENT)
    assert d.handle_line("MEAS:EMF? (@1)") is None
    assert d.errors() == [(-200, "Execution error;emf_mv not available")]
    assert "emf_mv" in d.unbound() and "set_unit" in d.unbound() and "unit" not in d.unbound()
    assert scpi.Dispatcher(FakeFacade(), IDENT).unbound() == []


# ---- error queue -------------------------------------------------------------------------------
def test_error_queue_overflow_replaces_last_entry(dev):
    # SCPI-1999 Vol. 1 21.8: a full queue's most recent entry becomes -350 "Queue overflow"
    for i in range(20):
        dev.handle_line("BAD%d" % i)
    errs = dev.errors()
    assert len(errs) == C.ERROR_QUEUE_LEN == 16
    assert errs[:15] == [(-113, "Undefined header;BAD%d" % i) for i in range(15)]
    assert errs[15] == (-350, "Queue overflow")
    assert dev.handle_line("SYST:ERR:COUN?") == "16"
    replies = [dev.handle_line("SYST:ERR?") for _ in range(17)]
    assert replies[0] == '-113,"Undefined header;BAD0"'
    assert replies[15] == '-350,"Queue overflow"'
    assert replies[16] == '0,"No error"'


def test_error_detail_is_bounded_and_quotes_doubled(dev):
    dev.handle_line("CONF:TABL? " + '"' + "q" * 40 + '"')
    code, text = dev.errors()[0]
    assert code == -104
    dev.handle_line("*CLS")
    dev.handle_line("A" * 200)
    code, text = dev.errors()[0]
    assert code == -113 and len(text) == len("Undefined header;") + 60


# ---- line framer -------------------------------------------------------------------------------
def test_framer_split_and_merged_chunks():
    f = scpi.LineFramer(max_len=16)
    assert f.feed(b"*ID") == []
    assert f.feed(b"N?\r") == []
    assert f.feed(b"\n*OPC?\nMEAS?\n*R") == [b"*IDN?", b"*OPC?", b"MEAS?"]
    assert f.feed(b"ST\n") == [b"*RST"]
    assert f.feed(bytearray(b"a\nb\n")) == [b"a", b"b"]


def test_framer_drops_overlong_lines_and_queues_363(dev):
    f = scpi.LineFramer(max_len=16, errors=dev)
    assert f.feed(b"x" * 10) == []
    assert f.feed(b"y" * 10) == []  # now 20 > 16: dropped
    assert f.feed(b"z" * 1000) == []
    assert len(f._buf) == 0  # memory bounded while dropping
    assert f.feed(b"tail\n*OPC?\n") == [b"*OPC?"]  # the rest of the long line is dropped too
    assert f.overruns == 1
    assert dev.errors() == [(-363, "Input buffer overrun;line longer than 16")]
    assert f.feed(b"x" * 16 + b"\r\n") == [b"x" * 16]  # exactly max_len is kept


def test_dispatcher_feed_end_to_end(dev):
    out = dev.feed(b"*IDN?\nSYST:VERS?\n" + b"Q" * 400 + b"\nSYST:ERR?\n")
    assert out == ["tcgauge,TCGAUGE-2CH,WREN-0001,0.1.0", "1999.0",
                   '-363,"Input buffer overrun;line longer than 256"']


def test_handle_line_rejects_overlong_and_control_bytes(dev):
    assert dev.handle_line("*OPC?" + " " * 300) is None
    assert dev.handle_line(b"*OPC?\x00") is None
    assert dev.handle_line("*OPC?\x7f") is None
    assert dev.errors() == [(-363, "Input buffer overrun;line longer than 256"),
                            (-101, "Invalid character;byte 0x00"),
                            (-101, "Invalid character;code 127")]


# ---- fuzzing: it never raises, every line is answered or queued, memory stays bounded ---------
_HEADERS = [f for rec in C.COMMANDS for f in C.forms(rec)] + ["MEAS?", "SETP2:ONL", "STR"]
_ARGS = st.one_of(
    st.sampled_from(["", "(@1)", "(@1,2)", "(@1:2)", "(@9)", "ON", "OFF", "1", "0", "MAX", "'wren'",
                     '"x""y"', "1E-3 TORR", "1e9", "-5", "abc", "(@", "'", "1,2,3", "TORR", "NAN"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-10**6, 10**6).map(str),
    st.text(alphabet=st.characters(min_codepoint=32, max_codepoint=126), max_size=20),
)


def _unit_text(header, args):
    return header + (" " + ",".join(args) if args else "")


_LINES = st.one_of(
    st.binary(max_size=300),
    st.lists(st.tuples(st.sampled_from(_HEADERS), st.lists(_ARGS, max_size=3)), min_size=1, max_size=4)
    .map(lambda units_: ";".join(_unit_text(h, a) for h, a in units_)),
    st.builds(lambda s: record.encode(s, 1000 + s, 1, 7.1, 23.0, 1.5, "ok", None), st.integers(0, 10**9 - 1)),
    st.text(alphabet=st.characters(min_codepoint=1, max_codepoint=0x10FFFF), max_size=80),
)


class Exploding(FakeFacade):
    """A facade whose every call may raise something (chosen by the test); counts calls."""

    def __init__(self, chooser):
        FakeFacade.__init__(self)
        self._chooser = chooser
        self.n_calls = 0

    def _log(self, name, *args):
        self.n_calls += 1
        exc = self._chooser()
        if exc is not None:
            raise exc


class Counting(scpi.Dispatcher):
    """Counts every error pushed, including those lost to a full queue."""

    pushed = 0
    overflowed = False  # the last push found the queue full

    def push_error(self, code, detail=None):
        self.pushed += 1
        self.overflowed = len(self.errors()) >= C.ERROR_QUEUE_LEN
        scpi.Dispatcher.push_error(self, code, detail)


_EXCS = st.sampled_from([None, None, ValueError("v"), RangeError("r"), OSError(5), TypeError("t"),
                         MemoryError(), IndexError(), ConflictError("c")])
_INTERNAL_SETTINGS = ("*CLS", "*WAI", "*OPC", "*ESE")  # settings that touch only the dispatcher


def _query_units(line):
    try:
        units_ = scpi.split_top(line, ";")
    except scpi.ScpiError:
        return None
    return units_


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(lines=st.lists(_LINES, min_size=1, max_size=8), data=st.data())
def test_fuzz_never_raises_and_answers_or_queues(lines, data):
    fake = Exploding(lambda: data.draw(_EXCS))
    dev = Counting(fake, IDENT)
    for raw in lines:
        pushed, calls = dev.pushed, fake.n_calls
        reply = dev.handle_line(raw)  # must not raise, whatever arrives
        assert reply is None or (isinstance(reply, str) and "\n" not in reply)
        new_errors = dev.pushed - pushed
        text = raw if isinstance(raw, str) else raw.decode("latin-1")
        units_ = _query_units(text) if text.strip() else []
        printable = isinstance(raw, str) or all(32 <= b <= 126 or b in (9, 10, 13) for b in raw)
        if printable and len(text.rstrip("\r\n")) > dev.max_line:
            # an over-long line is refused whole: no reply, one -363 (SCPI-1999 21.8)
            assert reply is None and new_errors == 1, (raw, reply)
            assert any(code == C.E_INPUT_OVERRUN for code, _ in dev.errors())
        elif units_:
            # every query unit is answered or queues an error
            n_queries = sum(1 for u in units_ if u.strip().split(" ")[0].endswith("?"))
            n_replies = len(scpi.split_top(reply, ";")) if reply is not None else 0
            assert n_replies + new_errors >= n_queries, (raw, reply)
            if reply is None and new_errors == 0:
                # no answer and no error: only settings ran, and each reached its target
                heads = [u.strip().split(" ")[0].upper() for u in units_ if u.strip()]
                assert all(not h.endswith("?") for h in heads), raw
                assert fake.n_calls > calls or all(h in _INTERNAL_SETTINGS for h in heads), raw
        errs = dev.errors()
        assert len(errs) <= C.ERROR_QUEUE_LEN
        if dev.overflowed:
            assert errs[-1] == (-350, "Queue overflow")  # SCPI-1999 21.8
        for code, etext in errs:
            assert code in C.ERRORS and etext.startswith(C.ERRORS[code])
            assert len(etext) <= len(C.ERRORS[code]) + 1 + 60


@settings(max_examples=200, deadline=None)
@given(chunks=st.lists(st.binary(max_size=600), max_size=12))
def test_fuzz_framer_memory_bounded(chunks):
    dev = scpi.Dispatcher(FakeFacade(), IDENT)
    for chunk in chunks:
        replies = dev.feed(chunk)
        assert len(dev.framer._buf) <= dev.max_line + 1
        for r in replies:
            assert isinstance(r, str)
        assert len(dev.errors()) <= C.ERROR_QUEUE_LEN


@settings(max_examples=100, deadline=None)
@given(n=st.integers(17, 200))
def test_fuzz_queue_reports_its_own_overflow(n):
    dev = scpi.Dispatcher(FakeFacade(), IDENT)
    for i in range(n):
        dev.handle_line(b"\x01")
    errs = dev.errors()
    assert len(errs) == 16 and errs[-1] == (-350, "Queue overflow")
    assert errs[0] == (-101, "Invalid character;byte 0x01")


@settings(max_examples=150, deadline=None)
@given(split=st.lists(st.integers(1, 40), max_size=30))
def test_fuzz_framer_any_split_gives_same_lines(split):
    stream = b"*IDN?\r\nCONF:UNIT PA\n" + b"X" * 300 + b"\nMEAS? (@1)\n!R,1,2\n"
    f = scpi.LineFramer(max_len=256)
    got = []
    pos = 0
    for size in split + [len(stream)]:
        got += f.feed(stream[pos:pos + size])
        pos += size
    assert got == [b"*IDN?", b"CONF:UNIT PA", b"MEAS? (@1)", b"!R,1,2"]
    assert f.overruns == 1


# ---- the same replies under the real MicroPython interpreter -------------------------------------
_UPY_RUNNER = r"""
import { loadMicroPython } from "%(mjs)s";
import fs from "fs";
let out = "";
const mp = await loadMicroPython({ stdout: (s) => { out += s + "\n"; }, stderr: (s) => { out += s + "\n"; } });
mp.FS.mkdir("/lib"); mp.FS.mkdir("/lib/gaugecore");
for (const f of fs.readdirSync("%(core)s")) {
  if (f.endsWith(".py")) mp.FS.writeFile("/lib/gaugecore/" + f, fs.readFileSync("%(core)s/" + f));
}
mp.FS.writeFile("/lib/fake_facade.py", fs.readFileSync("%(fake)s"));
try { mp.runPython("import sys\nsys.path.insert(0, '/lib')\n" + fs.readFileSync("%(script)s", "utf8")); }
catch (e) { out += "EXC " + e + "\n"; }
process.stdout.write(out);
"""

_UPY_SCRIPT = r'''
from gaugecore import scpi, record, commands as C
from fake_facade import FakeFacade
f = FakeFacade()
f.readings[2] = (None, "fault", "heater_open")
d = scpi.Dispatcher(f, C.ident("WREN-0001", "0.1.0"))
for l in ["*IDN?", "MEAS?", "MEAS:EMF? (@1:2)", "CONF:UNIT MBAR;UNIT?", "SETP2:ONL 1E-1 TORR;ONL?",
          "CONF:HEAT 300,(@1)", "SETP3:ONL 1", "CONF:TABL 'a''b',(@1);TABL? (@1)", "CONF:RATE 1E999",
          "MEAS:PRES? (@9)", b"\xff\x00", "SETP1:DIR abov;DIR?", "*ESE 60;*ESR?;*STB?", "STR ON;STR?"]:
    print(repr(d.handle_line(l)))
f.fail["set_rate_hz"] = OSError(5)
d.handle_line("CONF:RATE 5")
f.fail["set_rate_hz"] = ZeroDivisionError("x")
d.handle_line("CONF:RATE 5")
print(d.errors())
print(d.feed(b"*OPC?\n" + b"x" * 300 + b"\nSYST:ERR?\n"))
for i in range(20):
    d.handle_line("BAD")
print(d.errors()[-2:])
print(record.encode(41, 123456, 1, 7.25, 23.5, 13.332, "ok", None))
print(record.encode(7, 10, 2, None, 24.0, 5.0, "fault", "heater_open"))
print(record.decode(record.encode(5, 6, 1, -0.0123, -5.25, 0.5, "under", None)).fields())
for bad in ("!R,1,2,1,,,1,ok,*0000", "!R,1,2,1,,,1,ok,*12ab"):
    try:
        record.decode(bad)
    except ValueError as e:
        print("ValueError", e)
'''


@pytest.mark.upy
def test_same_replies_under_micropython(tmp_path, repo_root):
    import subprocess

    from support import require_tool

    node = require_tool("node")
    mjs = os.path.join(repo_root, "tools", "upy", "node_modules", "@micropython",
                       "micropython-webassembly-pyscript", "micropython.mjs")
    if not os.path.exists(mjs):
        pytest.fail("MicroPython WebAssembly build missing: run tools/setup.sh")
    script = tmp_path / "probe.py"
    script.write_text(_UPY_SCRIPT)
    runner = tmp_path / "run.mjs"
    runner.write_text(_UPY_RUNNER % {"mjs": mjs, "core": os.path.join(repo_root, "firmware", "gaugecore"),
                                     "fake": os.path.join(os.path.dirname(__file__), "fake_facade.py"),
                                     "script": str(script)})
    res = subprocess.run([node, str(runner)], capture_output=True, text=True, timeout=60)
    assert res.returncode == 0, res.stderr
    upy = res.stdout
    import contextlib
    import io

    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        exec(compile(_UPY_SCRIPT, "probe", "exec"), {})
    assert "EXC" not in upy and "Traceback" not in upy, upy
    assert upy == buf.getvalue()
    assert "'tcgauge,TCGAUGE-2CH,WREN-0001,0.1.0'" in upy
