"""The host client and link: exact command/reply pairs, stream separation, errors.

A pymeasure-style scripted port replays exact (command, reply) pairs and
fails the test if a command differs or a pair is left unused. The
end-to-end test runs every generated client method against the real
dispatcher over an in-memory port, so client and device cannot drift.
Reply values are invented demo values (Wren tube, Larkspur bell jar).
Sources: SCPI-1999 Vol. 1 21.8 (error replies), NIST SP 811 B.8 (Torr).
"""

import importlib.util
import os

import pytest

from gaugecore import commands as C
from gaugecore import record, scpi
from tcgauge.client import Client, DeviceError, ProtocolError, Reading
from tcgauge.errors import TcgaugeError
from tcgauge.link import Link, LinkError, LinkTimeout

_HERE = os.path.dirname(__file__)
_spec = importlib.util.spec_from_file_location("fake_facade", os.path.join(_HERE, "..", "core", "fake_facade.py"))
fake_facade = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fake_facade)

OK = '0,"No error"'


class ScriptedPort:
    """Replays exact command/reply pairs; `verify()` fails if any pair is unused."""

    def __init__(self, pairs):
        self.pairs = list(pairs)
        self.out = b""

    def write(self, data):
        assert self.pairs, "unexpected command %r" % data
        command, reply = self.pairs.pop(0)
        assert data == (command + "\n").encode(), "sent %r, script expects %r" % (data, command)
        self.out += reply.encode() if isinstance(reply, str) else reply
        return len(data)

    @property
    def in_waiting(self):
        return len(self.out)

    def read(self, n):
        data, self.out = self.out[:n], self.out[n:]
        return data

    def verify(self):
        assert not self.pairs, "unused pairs: %r" % self.pairs


class FakeClock:
    def __init__(self):
        self.t = 0.0

    def __call__(self):
        self.t += 0.01
        return self.t


@pytest.fixture
def scripted():
    made = []

    def make(*pairs):
        port = ScriptedPort(pairs)
        made.append(port)
        return Client(Link(port, timeout_s=0.5, clock=FakeClock())), port

    yield make
    for port in made:
        port.verify()


def test_settings_exact_lines(scripted):
    c, _ = scripted(
        ("CONF:UNIT TORR;:SYST:ERR?", OK + "\n"),
        ("CONF:TABL \"wren-demo\",(@1,2);:SYST:ERR?", OK + "\n"),
        ("CONF:HEAT 120.0,(@1);:SYST:ERR?", OK + "\r\n"),
        ("CONF:FAST ON,(@2);:SYST:ERR?", OK + "\n"),
        ("SETP2:ONL 0.5 PA;:SYST:ERR?", OK + "\n"),
        ("SETP1:DIR ABOVE;:SYST:ERR?", OK + "\n"),
        ("SETP1:SOUR 2;:SYST:ERR?", OK + "\n"),
        ("CAL:ZERO (@1);:SYST:ERR?", OK + "\n"),
        ("STR ON;:SYST:ERR?", OK + "\n"),
        ("*CLS;:SYST:ERR?", OK + "\n"),
    )
    assert c.set_unit("torr") is None
    c.set_table([1, 2], "wren-demo")
    c.set_heater_target_ma(1, 120)
    c.set_fast(2, True)
    c.set_sp_on_pa(2, 0.5)
    c.set_sp_direction(1, "above")
    c.set_sp_source(1, 2)
    c.zero(1)
    c.set_stream(True)
    c.open()


def test_queries_exact_lines_and_types(scripted):
    c, _ = scripted(
        ("*IDN?;:SYST:ERR?", "tcgauge,TCGAUGE-2CH,WREN-0001,0.1.0;" + OK + "\n"),
        ("MEAS? (@1);:SYST:ERR?", "1.000000E-01,TORR,OK,NONE;" + OK + "\n"),
        ("MEAS?;:SYST:ERR?", "7.500617E-03,TORR,UNDER,NONE,NAN,TORR,FAULT,HEATER_OPEN;" + OK + "\n"),
        ("SETP2:ONL?;:CONF:UNIT?;:SYST:ERR?", "1.000000E-01;TORR;" + OK + "\n"),
        ("MEAS:EMF? (@1,2);:SYST:ERR?", "7.250000E+00,NAN;" + OK + "\n"),
        ("SETP1:DIR?;:SYST:ERR?", "BEL;" + OK + "\n"),
        ("STAT:FAUL? (@2);:SYST:ERR?", "HEATER_OPEN;" + OK + "\n"),
        ("STAT:FAUL? (@1);:SYST:ERR?", "NONE;" + OK + "\n"),
        ("CONF:TABL? (@1);:SYST:ERR?", '"odd ""name""";' + OK + "\n"),
        ("TABL:CAT?;:SYST:ERR?", '"wren-demo","a;b";' + OK + "\n"),
        ("SETP1:REL?;:SYST:ERR?", "1;" + OK + "\n"),
        ("*TST?;:SYST:ERR?", "0;" + OK + "\n"),
        ("SYST:ERR?", '-113,"Undefined header;X"\n'),
        ("SYST:ERR:COUN?", "0\n"),
    )
    assert c.idn() == ("tcgauge", "TCGAUGE-2CH", "WREN-0001", "0.1.0")
    r = c.pressure(1)
    assert r == Reading(1, 0.1, "TORR", "ok", None)
    # NIST SP 811 B.8: 0.1 Torr = 13.3322... Pa
    assert r.pressure_pa == pytest.approx(13.332236842105264, rel=1e-12)
    under, faulted = c.pressure()
    assert under == Reading(1, 7.500617e-03, "TORR", "under", None)
    assert faulted.pressure is None and faulted.pressure_pa is None
    assert (faulted.state, faulted.fault) == ("fault", "heater_open")
    assert c.sp_on_pa(2) == pytest.approx(13.332236842105264, rel=1e-12)
    assert c.emf_mv([1, 2]) == [7.25, None]
    assert c.sp_direction(1) == "BELOW"
    assert c.fault(2) == "heater_open"
    assert c.fault(1) is None
    assert c.table(1) == 'odd "name"'
    assert c.tables() == ["wren-demo", "a;b"]
    assert c.sp_relay(1) is True
    assert c.self_test() == 0
    assert c.error() == (-113, "Undefined header;X")
    assert c.error_count() == 0


def test_device_error_raises_and_drains_the_queue(scripted):
    c, _ = scripted(
        ("CONF:HEAT 300.0,(@1);:SYST:ERR?", '-222,"Data out of range;3.000000E+02 not in 1..250 MA"\n'),
        (":SYST:ERR?", '-113,"Undefined header;X"\n'),
        (":SYST:ERR?", OK + "\n"),
    )
    with pytest.raises(DeviceError) as info:
        c.set_heater_target_ma(1, 300)
    assert info.value.code == -222
    assert info.value.message == "Data out of range;3.000000E+02 not in 1..250 MA"
    assert info.value.more == ((-113, "Undefined header;X"),)
    assert isinstance(info.value, TcgaugeError)


def test_stream_records_are_set_aside_and_counted(scripted):
    r = [record.encode(s, 100 * s, 1, 7.0, 23.0, 1.5, "ok", None) for s in range(10)]
    bad = r[4][:-1] + ("0" if r[4][-1] != "0" else "1")  # corrupted checksum
    reply = "\n".join([r[0], r[1], r[3]]) + "\n1.000000E-01,TORR,"  # gap: 2 missing
    c, port = scripted(
        ("MEAS? (@1);:SYST:ERR?", reply),
    )
    port.out = b""
    link = c.link
    # the reply arrives split, with records before, inside the wait, and after
    orig_write = port.write

    def write(data):
        n = orig_write(data)
        port.out += ("OK,NONE;" + OK + "\n" + bad + "\n" + r[5] + "\n").encode()
        return n

    port.write = write
    reading = c.pressure(1)
    assert reading == Reading(1, 0.1, "TORR", "ok", None)
    link.poll()
    assert [x.seq for x in link.records] == [0, 1, 3, 5]
    assert link.stats.as_dict() == {"records": 4, "corrupt": 1, "gaps": 2, "missing": 2, "restarts": 0}
    assert link.next_record().seq == 0


def test_restart_is_not_a_gap():
    port = ScriptedPort([])
    link = Link(port, timeout_s=0.1, clock=FakeClock())
    port.out = "".join(record.encode(s, 0, 1, None, None, None, "invalid", None) + "\n"
                       for s in (100, 101, 0, 1)).encode()
    link.poll()
    assert link.stats.as_dict() == {"records": 4, "corrupt": 0, "gaps": 0, "missing": 0, "restarts": 1}


def test_timeout_raises_a_tcgauge_error():
    port = ScriptedPort([("*OPC?;:SYST:ERR?", "")])
    c = Client(Link(port, timeout_s=0.2, clock=FakeClock()))
    with pytest.raises(LinkTimeout, match=r"no reply within 0\.2 s"):
        c.opc()
    assert issubclass(LinkTimeout, LinkError) and issubclass(LinkError, TcgaugeError)
    with pytest.raises(LinkTimeout):
        c.link.next_record()
    port.verify()


def test_malformed_reply_is_a_protocol_error(scripted):
    c, _ = scripted(
        ("MEAS? (@1);:SYST:ERR?", "1.0,TORR,OK;" + OK + "\n"),
        ("*IDN?;:SYST:ERR?", "garbage\n"),
        ("MEAS:EMF? (@1);:SYST:ERR?", 'x;"' + "\n"),
    )
    with pytest.raises(ProtocolError, match="reply has 3 fields"):
        c.pressure(1)
    with pytest.raises(ProtocolError, match="bad error reply"):
        c.idn()
    with pytest.raises(ProtocolError, match="malformed reply"):
        c.emf_mv(1)


def test_stray_replies_are_discarded(scripted):
    c, port = scripted(("*OPC?;:SYST:ERR?", "1;" + OK + "\n"))
    port.out = b"leftover\n"
    assert c.opc() == 1
    assert c.link.stray == 1


def test_client_argument_checks():
    c = Client(Link(ScriptedPort([]), clock=FakeClock()))
    with pytest.raises(TypeError, match="missing channel"):
        c.set_table()
    with pytest.raises(TypeError, match="missing argument"):
        c.set_table(1)
    with pytest.raises(TypeError, match="too many arguments"):
        c.set_unit("PA", "TORR")
    with pytest.raises(ValueError, match="expected an integer"):
        c.set_sp_source(1, 1.5)


def test_scripted_port_fails_when_a_pair_is_left_unused():
    port = ScriptedPort([("*OPC?", "1\n")])
    with pytest.raises(AssertionError, match="unused pairs"):
        port.verify()
    with pytest.raises(AssertionError, match="script expects"):
        port.write(b"*RST\n")


class LoopPort:
    """An in-memory port wired to a real dispatcher."""

    def __init__(self, dev):
        self.dev = dev
        self.out = b""

    def write(self, data):
        for reply in self.dev.feed(data):
            self.out += (reply + "\n").encode()

    def read(self, n):
        data, self.out = self.out[:n], self.out[n:]
        return data


_SAMPLE = {
    C.A_FLOAT: lambda spec: (spec[2] + spec[3]) / 2,
    C.A_PRESSURE: lambda spec: 10.0,
    C.A_INT: lambda spec: spec[1],
    C.A_CHANNEL: lambda spec: 2,
    C.A_BOOL: lambda spec: True,
    C.A_ENUM: lambda spec: spec[1][-1].upper(),
    C.A_STRING: lambda spec: "wren-demo",
}


def test_every_command_end_to_end_against_the_real_dispatcher():
    fake = fake_facade.FakeFacade()
    dev = scpi.Dispatcher(fake, C.ident("WREN-0001", "0.1.0"))
    c = Client(Link(LoopPort(dev), timeout_s=0.1, clock=FakeClock()))
    for rec in C.COMMANDS:
        for query in (False, True):
            name = rec[C.GETTER] if query else rec[C.SETTER]
            if name is None or name in ("_error", "_error_count"):
                continue
            specs = rec[C.QARGS] if query else rec[C.ARGS]
            args = [1] if "#" in rec[C.HEADER] else []
            if C.channel_arg(specs) >= 0:
                args.append([1, 2])
            args += [_SAMPLE[s[0]](s) for s in specs if s[0] != C.A_CHANLIST]
            result = getattr(c, name.lstrip("_"))(*args)  # raises DeviceError on any drift
            if not query:
                assert result is None
    assert dev.errors() == []
    # the values went through: pressures in pascals both ways, whatever the unit
    c.set_unit("MBAR")
    c.set_sp_on_pa(1, 42.0)
    assert fake.sp[1]["on"] == pytest.approx(42.0, rel=1e-12)
    assert c.sp_on_pa(1) == pytest.approx(42.0, rel=1e-6)
    assert c.pressure(1).unit == "MBAR"
    assert c.pressure(1).pressure_pa == pytest.approx(13.332236842105264, rel=1e-6)
    assert fake.tbl == {1: "wren-demo", 2: "wren-demo"}
    assert fake.sp[1]["dir"] == "ABOVE"


def test_link_over_a_real_pyserial_port():
    # pyserial's loop:// URL echoes what is written: records and a reply come back as sent
    import serial

    port = serial.serial_for_url("loop://", timeout=0.01)
    link = Link(port, timeout_s=0.3)
    recs = [record.encode(s, s, 1, 7.0, 23.0, 2.0, "ok", None) for s in (7, 8, 10)]
    port.write(("\n".join(recs) + "\n").encode())
    assert link.query("1;" + OK) == "1;" + OK  # the looped-back line is the reply
    assert [r.seq for r in link.records] == [7, 8, 10]
    assert (link.stats.gaps, link.stats.missing) == (1, 1)
    with pytest.raises(LinkTimeout):
        link.read_reply(timeout_s=0.05)
    port.close()
    with pytest.raises(LinkError, match="cannot write"):
        link.write_line("*IDN?")
