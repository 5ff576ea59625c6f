"""tcgauge info: identity and firmware version, against the virtual device and a scripted port."""

from gaugecore.version import VERSION

from tcgauge import cmd_info
from tcgauge.cli import main


class ScriptedPort:
    """A port that answers exact program messages with exact replies, in order;
    a message out of script fails the test, and `unused` lists what was never asked."""

    def __init__(self, pairs):
        self.pairs = list(pairs)
        self.out = b""
        self.closed = False

    @property
    def unused(self):
        return self.pairs

    def write(self, data):
        text = data.decode("ascii").rstrip("\n")
        assert self.pairs, "unexpected message %r" % text
        want, reply = self.pairs.pop(0)
        assert text == want
        self.out += (reply + "\n").encode("ascii")
        return len(data)

    @property
    def in_waiting(self):
        return len(self.out)

    def read(self, n):
        data, self.out = self.out[:n], self.out[n:]
        return data

    def close(self):
        self.closed = True


def _script(firmware, heap='40000;0,"No error"'):
    # *IDN? fields per IEEE 488.2 10.14; each client query carries ;:SYST:ERR? (tcgauge.client)
    return [
        ("*IDN?;:SYST:ERR?", 'tcgauge,TCGAUGE-2CH,WREN-0042,%s;0,"No error"' % firmware),
        ("SYST:VERS?;:SYST:ERR?", '1999.0;0,"No error"'),
        ("DIAG:MEM:FREE?;:SYST:ERR?", heap),
    ]


def test_info_on_the_virtual_device(capsys):
    status = main(["info", "--port", "sim://?seed=7"])
    out, err = capsys.readouterr()
    assert status == 0
    assert out.splitlines() == [
        "port      sim://?seed=7",
        "maker     tcgauge",
        "model     TCGAUGE-2CH",
        "serial    SIM0007",
        "firmware  %s" % VERSION,
        "scpi      1999.0",  # SCPI-1999 Vol. 1 21.21
        "heap      not known (the interpreter cannot tell)",  # the virtual device runs under CPython
        "host      %s" % VERSION,
    ]
    assert err == ""


def test_info_matching_version_from_a_scripted_port(capsys, monkeypatch):
    port = ScriptedPort(_script(VERSION))
    monkeypatch.setattr(cmd_info, "open_port", lambda name: port)
    assert main(["info", "--port", "COM9"]) == 0
    out, err = capsys.readouterr()
    assert "serial    WREN-0042\nfirmware  %s\n" % VERSION in out
    assert "heap      40000 bytes free\n" in out
    assert err == ""
    assert port.unused == [] and port.closed


def test_info_warns_when_the_board_is_short_of_heap(capsys, monkeypatch):
    from tcgauge.identity import LOW_HEAP_BYTES

    # the largest upload: 16384 bytes of file text + 128 points x 168 bytes of table
    assert LOW_HEAP_BYTES == 16384 + 128 * 168
    port = ScriptedPort(_script(VERSION, heap='%d;0,"No error"' % (LOW_HEAP_BYTES - 1)))
    monkeypatch.setattr(cmd_info, "open_port", lambda name: port)
    assert main(["info", "--port", "COM9"]) == 0
    out, err = capsys.readouterr()
    assert "heap      37887 bytes free\n" in out
    assert err == ("tcgauge: warning: the board has only 37887 bytes of heap free (37888 wanted): a table "
                   "upload may run out of memory; use a frozen firmware build (firmware/manifest.py) or a "
                   "board with more RAM\n")
    assert port.unused == [] and port.closed


def test_info_on_firmware_without_the_memory_query(capsys, monkeypatch):
    # SCPI-1999 Vol. 1 21.8.9: an unknown header is error -113
    port = ScriptedPort(_script(VERSION, heap=';-113,"Undefined header"') + [(":SYST:ERR?", '0,"No error"')])
    monkeypatch.setattr(cmd_info, "open_port", lambda name: port)
    assert main(["info", "--port", "COM9"]) == 0
    out, err = capsys.readouterr()
    assert "heap      not reported (firmware without DIAG:MEM:FREE?)\n" in out
    assert err == ""
    assert port.unused == [] and port.closed


def test_info_warns_on_a_version_mismatch_but_exits_0(capsys, monkeypatch):
    port = ScriptedPort(_script("0.0.9"))
    monkeypatch.setattr(cmd_info, "open_port", lambda name: port)
    assert main(["info", "--port", "COM9"]) == 0
    out, err = capsys.readouterr()
    assert "firmware  0.0.9  (MISMATCH: host is %s)\n" % VERSION in out
    assert err == ("tcgauge: warning: firmware version 0.0.9 differs from this host's %s: deploy the "
                   "matching firmware (tcgauge deploy) or install the matching host package\n" % VERSION)
    assert port.unused == [] and port.closed


def test_info_without_an_answer_is_an_error(capsys, monkeypatch):
    port = ScriptedPort([])
    port.write = lambda data: len(data)  # takes the bytes, never answers
    monkeypatch.setattr(cmd_info, "open_port", lambda name: port)
    assert main(["info", "--port", "COM9", "--timeout", "0.2"]) == 2
    assert capsys.readouterr().err == ("tcgauge: error: COM9: no reply within 0.2 s (is the tcgauge firmware "
                                       "running? after `tcgauge deploy`, reset the board)\n")
    assert port.closed


def test_info_on_a_port_that_cannot_open(capsys):
    assert main(["info", "--port", "/nonexistent/tty"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("tcgauge: error: cannot open /nonexistent/tty: ")


def test_version_warning_is_none_when_equal():
    from tcgauge.identity import version_warning

    assert version_warning({"firmware": VERSION, "host": VERSION}) is None
