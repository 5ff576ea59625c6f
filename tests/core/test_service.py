"""gaugecore.service: protocol and stream over a byte stream, bounded, never blocking.

The device is the real facade on a Bench (not started: the test steps it),
the port a fake whose write() takes as many bytes as the test allows.
"""

import os
import random
import subprocess
import sys
import tracemalloc

import pytest

from hypothesis import given, settings, strategies as st

from support import ROOT, require_tool

from gaugecore import record
from gaugecore.service import Service
from tcgauge.sim import chamber
from tcgauge.sim.device import VirtualDevice


class SlowPort:
    """write() takes at most `budget` bytes per call (None: all); reads what the test queued."""

    def __init__(self, budget=None):
        self.inbox = bytearray()
        self.out = bytearray()
        self.budget = budget
        self.calls = 0

    def read_available(self):
        data = bytes(self.inbox)
        self.inbox.clear()
        return data

    def write(self, data):
        self.calls += 1
        k = len(data) if self.budget is None else min(self.budget, len(data))
        self.out += bytes(data[:k])
        return k


class NonePort(SlowPort):
    """MicroPython's UART.write may return None: all bytes taken."""

    def write(self, data):
        self.out += bytes(data)
        return None


def make(port, tmp_path, **kw):
    vd = VirtualDevice(scenario=chamber.static(pressure_pa=5.0), root=str(tmp_path), seed=2)
    svc = Service(port, vd.device, **kw)
    return vd, svc


def run(vd, svc, seconds):
    ctl = vd.controller
    clock = vd.bench.clock
    end = clock.time_s + seconds
    while clock.time_s < end:
        clock.sleep_ms(5)
        ctl.step(ctl.now_ms())
        svc.poll()


def lines(port):
    text = bytes(port.out).decode()
    assert text == "" or text.endswith("\n")
    return text.split("\n")[:-1]


def test_stream_records_are_contiguous_and_decode(tmp_path):
    port = SlowPort()
    vd, svc = make(port, tmp_path)
    try:
        port.inbox += b"CONF:RATE 20;:STR ON\n"
        run(vd, svc, 2.0)
        recs = [record.decode(x) for x in lines(port)]
        # 20 Hz on 2 channels for 2 s: 80 records, give or take the first sample's start
        assert 78 <= len(recs) <= 82
        assert [r.seq for r in recs] == list(range(len(recs)))
        assert sorted(set(r.ch for r in recs)) == [1, 2]
        ch1 = [r.t_ms for r in recs if r.ch == 1]
        steps = [b - a for a, b in zip(ch1, ch1[1:])]
        # samples start on a 50 ms grid; each ends after its conversions, a few ms later
        assert all(40 <= s <= 60 for s in steps), steps
        assert (ch1[-1] - ch1[0]) / (len(ch1) - 1) == pytest.approx(50.0, abs=0.5)
        assert svc.dropped == 0 and svc.records == len(recs)
    finally:
        vd.close()


def test_fault_names_in_records_decode(tmp_path):
    # stream records carry the fault names of gaugecore.faults as they are ("tc-open")
    port = SlowPort()
    vd, svc = make(port, tmp_path)
    vd.bench.inject("tc-open", 0, at_s=1.0)
    try:
        port.inbox += b"STR ON\n"
        run(vd, svc, 1.5)
        recs = [record.decode(x) for x in lines(port)]
        last = [r for r in recs if r.ch == 1][-1]
        assert (last.state, last.fault, last.pressure_pa, last.emf_mv) == ("fault", "tc-open", None, None)
    finally:
        vd.close()


def test_slow_link_drops_whole_records_and_counts_them(tmp_path):
    port = SlowPort(budget=0)
    vd, svc = make(port, tmp_path, records_queue=8)
    try:
        port.inbox += b"CONF:RATE 50;:STR ON\n"
        svc.poll()
        run(vd, svc, 1.0)  # the link takes nothing: 8 records wait, the rest are dropped
        assert svc.pending() == (0, 8)
        # 8 queued, 1 taken out to be written (0 bytes of it went), the rest dropped
        assert svc.dropped == svc.seq - 9 and svc.dropped > 60
        port.budget = 7  # then a trickle: 7 bytes per call
        port.inbox += b"*IDN?\n"
        run(vd, svc, 0.2)
        got = lines(port)
        # the line already started goes out whole first; then the reply jumps the queue
        assert record.decode(got[0]).seq == 0
        assert got[1] == "tcgauge,TCGAUGE-2CH,SIM0002,0.1.0"
        recs = [record.decode(x) for x in [got[0]] + got[2:]]  # every line whole: all decode
        assert [r.seq for r in recs[:9]] == list(range(9))
        assert recs[9].seq - recs[8].seq - 1 == record.gap(recs[8].seq, recs[9].seq) > 0
    finally:
        vd.close()


def test_none_from_write_means_everything_went(tmp_path):
    port = NonePort()
    vd, svc = make(port, tmp_path)
    try:
        port.inbox += b"*IDN?;*TST?\n"
        svc.poll()
        assert lines(port) == ["tcgauge,TCGAUGE-2CH,SIM0002,0.1.0;0"]
        assert svc.bytes_out == len(port.out)
    finally:
        vd.close()


def test_stream_off_discards_unsent_records(tmp_path):
    port = SlowPort(budget=0)
    vd, svc = make(port, tmp_path)
    try:
        port.inbox += b"STR ON\n"
        run(vd, svc, 1.0)
        assert svc.pending()[1] > 0
        port.inbox += b"STR OFF\n"
        svc.poll()
        assert svc.pending() == (0, 0)
    finally:
        vd.close()


def test_boot_notes_go_to_the_error_queue(tmp_path):
    port = SlowPort()
    vd = VirtualDevice(scenario=chamber.static(pressure_pa=5.0), root=str(tmp_path), seed=2)
    vd.device.notes.append("config: test note")
    try:
        svc = Service(port, vd.device)
        assert svc.dispatcher.errors() == [(-200, "Execution error;config: test note")]
    finally:
        vd.close()


_CHUNKS = st.lists(st.binary(min_size=0, max_size=300), min_size=1, max_size=30)


@settings(max_examples=60, deadline=None)
@given(chunks=_CHUNKS, seed=st.integers(0, 2**16))
def test_fuzz_random_bytes_never_raise_and_memory_stays_bounded(tmp_path_factory, chunks, seed):
    # the dispatcher's property (every line answered or queued as an error, never a crash)
    # must hold through the service, with the stream on and a link of random speed
    port = SlowPort()
    vd, svc = make(port, tmp_path_factory.mktemp("fz"))
    rng = random.Random(seed)
    try:
        port.inbox += b"STR ON\n"
        for chunk in chunks:
            if rng.random() < 0.3:
                chunk = chunk + b"\n"
            port.inbox += chunk
            port.budget = rng.choice((0, 1, 13, None))
            svc.poll()
            vd.bench.clock.sleep_ms(20)
            vd.controller.step(vd.controller.now_ms())
            d = svc.dispatcher
            assert len(d.errors()) <= 16
            assert len(d.framer._buf) <= d.framer.max_len + 1
            replies, recs = svc.pending()
            assert replies <= 16 and recs <= 64
    finally:
        vd.close()


def test_a_flood_of_garbage_leaves_memory_flat(tmp_path):
    port = SlowPort(budget=0)  # nothing leaves: queues must stay bounded by themselves
    vd, svc = make(port, tmp_path)
    rng = random.Random(5)
    try:
        garbage = bytes(rng.getrandbits(8) for _ in range(4096))
        queries = b"*IDN?\n" * 200
        for _ in range(20):  # warm up: queues fill
            port.inbox += garbage + queries
            svc.poll()
        tracemalloc.start()
        before = tracemalloc.get_traced_memory()[0]
        for _ in range(200):  # 200 x 5 kB in
            port.inbox += garbage + queries
            svc.poll()
        grown = tracemalloc.get_traced_memory()[0] - before
        tracemalloc.stop()
        assert grown < 64 * 1024  # bounded: far below the 1 MB that went in
        assert svc.pending()[0] == 16 and svc.replies_dropped > 0
        assert svc.bytes_in == 220 * (4096 + 1200)
    finally:
        vd.close()


# The same session under both interpreters: fake hardware (invented values), the real
# assembly, device, store and service; ROOT and TABLES are filled in per interpreter.
_SESSION = r'''
import os
from gaugecore.assembly import build
from gaugecore.catalogue import Catalogue
from gaugecore.store import Store
from gaugecore.service import Service

class Clock:
    def __init__(self): self.t = 0
    def ticks_ms(self): return self.t
    def ticks_diff(self, a, b): return a - b

class Tc:
    def __init__(self, hw): self.hw = hw; self.n = 0
    def read_uv(self):
        self.n += 1
        return 6000.0 + 30.0 * self.hw.sign + (self.n % 7) * 0.25

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
    def __init__(self): self.on = False
    def set(self, on): self.on = on

class Hw:
    def __init__(self):
        self.heater = Heater(); self.sign = 1
        self.tc = Tc(self.heater); self.cj = Cj(); self.relays = [Relay(), Relay()]

class Port:
    def __init__(self): self.inbox = b""; self.out = b""
    def read_available(self):
        d = self.inbox; self.inbox = b""; return d
    def write(self, d):
        k = 40 if len(d) > 40 else len(d)
        self.out += bytes(d[:k]); return k

root = ROOT
try:
    os.mkdir(root + "/store")
except OSError:
    pass
clock = Clock()
hws = [Hw(), Hw()]
lim = {"nominal_ma": 165.0, "min_ma": 100.0, "max_ma": 220.0, "zero_emf_mv": 12.3}
dev = build(hws, clock, Catalogue(TABLES), Store(root + "/store"), [lim, lim], serial="UPY1")
port = Port()
svc = Service(port, dev)
def step(n):
    for _ in range(n):
        clock.t += 5
        dev.controller.step(dev.controller.now_ms())
        svc.poll()
step(200)
for line in ("*IDN?", "MEAS?", "MEAS:EMF?;JUNC?;HEAT?", "CONF:UNIT TORR;UNIT?", "CONF:RATE 20;RATE?",
             "SETP1:ONL 1;OFFL 2;ENAB ON;ENAB?", "SYST:ERR?", "\x01\x02garbage", "SYST:ERR?",
             "STR ON", "*TST?"):
    port.inbox = line.encode() + b"\n"
    step(20)
step(100)
port.inbox = b"STR OFF\n"
step(40)
print(port.out.decode())
print(svc.records, svc.dropped, svc.seq)
'''


@pytest.mark.upy
def test_service_session_is_identical_under_micropython(tmp_path):
    require_tool("node")
    tools = os.path.join(ROOT, "tools", "upy")
    if tools not in sys.path:
        sys.path.insert(0, tools)
    import upyrun

    cpy_code = _SESSION.replace("ROOT", repr(str(tmp_path))).replace(
        "TABLES", repr(os.path.join(ROOT, "firmware", "tables")))
    cpy = subprocess.run([sys.executable, "-c", cpy_code], capture_output=True, text=True,
                         timeout=60, cwd=ROOT)
    assert cpy.returncode == 0, cpy.stderr
    upy_code = _SESSION.replace("ROOT", '"/data"').replace("TABLES", '"/firmware/tables"')
    upy = upyrun.run(upy_code, files={"keep.txt": ""}, timeout_s=60)
    assert upy == cpy.stdout
    lines_out = cpy.stdout.split("\n")
    assert lines_out[0] == "tcgauge,TCGAUGE-2CH,UPY1,0.1.0"
    assert lines_out[7] == '-101,"Invalid character;byte 0x01"'
    recs = [record.decode(x) for x in lines_out if x.startswith("!")]
    assert [r.seq for r in recs] == list(range(len(recs))) and len(recs) >= 20


def test_assembly_takes_a_board_dict_of_parts(tmp_path):
    # a board module hands its parts over as dicts; per-channel default tables; default rate
    import shutil

    from gaugecore.assembly import build
    from gaugecore.catalogue import Catalogue
    from gaugecore.store import Store
    from tcgauge.sim.bench import Bench

    tables = tmp_path / "tables"
    tables.mkdir()
    shutil.copy(os.path.join(ROOT, "firmware", "tables", "demo_n2.json"), str(tables / "demo_n2.json"))
    shutil.copy(os.path.join(ROOT, "firmware", "tables", "demo_n2.json"), str(tables / "other.json"))
    bench = Bench("wren-demo", seed=1, channels=2)
    parts = [{"tc": c.tc, "cj": c.cj, "heater": c.heater, "relays": c.relays} for c in bench.channels]
    lim = {"nominal_ma": 165.0, "min_ma": 100.0, "max_ma": 220.0, "zero_emf_mv": 12.3}  # invented
    dev = build(parts, bench.clock, Catalogue(str(tables)), Store(str(tmp_path / "store")),
                [lim, dict(lim)], default_table=["other", "demo_n2"], rate_hz=2.0)
    assert dev.rate_hz() == 2.0
    assert dev.table(1) == "other" and dev.table(2) == "demo_n2"
    assert dev.n_setpoints() == 4  # every relay of every channel
    assert dev.notes == []
    with pytest.raises(ValueError) as exc:
        build(parts, bench.clock, Catalogue(str(tables)), Store(str(tmp_path / "s2")), [lim],
              default_table="other")
    assert str(exc.value) == "build: 1 limits for 2 channels"
