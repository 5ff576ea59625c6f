"""tcgauge.transfer and `tcgauge table push/pull/list` on the virtual device through sim://.

The device is the real firmware core on the simulator (tcgauge.sim.device), reached
through pyserial's sim:// handler, the host Link and Client. Tables are the demo
table of the invented Wren tube with invented changes. Sources: CRC-32/ISO-HDLC as
zlib.crc32 computes it (Greg Cook's Catalogue of parametrised CRC algorithms), and
the store's power-loss rules (gaugecore/store.py, tested in tests/core/test_store.py).
"""

import os
import time
import types
import zlib

import pytest
import serial

from support import ROOT

from gaugecore import tablefile
from gaugecore.table import Table
from tcgauge import transfer
from tcgauge.client import Client
from tcgauge.link import Link
from tcgauge.transfer import TransferError

DEMO = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")


def demo_bytes():
    with open(DEMO, "rb") as f:
        return f.read()


def scaled(scale, tc_type="K"):
    """The demo table with pressures times `scale` (invented: a 'recalibrated' tube)."""
    t = tablefile.loads(demo_bytes())
    return Table([(e, p * scale) for e, p in t.points], t.gas, t.profile, t.heater_ma, t.ref_c,
                 tc_type, source="invented for the transfer tests", invalid_margin=t.invalid_margin,
                 noise_mv=t.noise_mv)


def raw_file(points):
    """A table file with a good CRC whose points no Table accepts (tablefile's own writer)."""
    t = tablefile.loads(demo_bytes())
    fake = types.SimpleNamespace(gas=t.gas, profile=t.profile, tc_type="K", heater_ma=t.heater_ma,
                                 ref_c=t.ref_c, invalid_margin=t.invalid_margin, noise_mv=t.noise_mv,
                                 source="invented, invalid on purpose", points=points)
    body = tablefile._body(fake)
    return (body + '"crc32": "0x%08x"}\n' % zlib.crc32(body.encode())).encode()


def file_crc(data):
    return zlib.crc32(data[:data.rfind(b'"crc32": "')])


def open_gauge(query, clear=True):
    port = serial.serial_for_url("sim://?" + query, timeout=0.05)
    client = Client(Link(port, timeout_s=2.0), channels=1)
    return port, (client.open() if clear else client)


@pytest.fixture
def gauge(tmp_path):
    port, client = open_gauge("scenario=calibration&channels=1&speed=20&seed=3&root=%s" % tmp_path)
    yield types.SimpleNamespace(port=port, client=client, root=tmp_path, dev=port.device)
    port.close()


def settle_at(g, pressure_pa, sim_s):
    bench = g.dev.bench
    bench.scenarios[0].set_pressure(pressure_pa, bench.time_s)
    wait_sim(g, sim_s)


def wait_sim(g, sim_s):
    end = g.dev.bench.time_s + sim_s
    while g.dev.bench.time_s < end:
        time.sleep(0.01)
        g.client.link.poll()


def ok_records(link, n, timeout_s=10.0):
    out = []
    deadline = time.monotonic() + timeout_s
    while len(out) < n and time.monotonic() < deadline:
        try:
            rec = link.next_record(0.5)
        except Exception:
            continue
        if rec.state == "ok":
            out.append(rec)
    assert len(out) == n
    return out


def store_files(root):
    out = {}
    for sub in ("tables", "store"):
        for name in sorted(os.listdir(os.path.join(str(root), sub))):
            if not name.startswith("config"):
                with open(os.path.join(str(root), sub, name), "rb") as f:
                    out[sub + "/" + name] = f.read()
    return out


# ---------------------------------------------------------------- push while streaming
def test_push_while_streaming_changes_the_conversion(gauge):
    c = gauge.client
    settle_at(gauge, 10.0, 60.0)  # the Wren tube settles in well under a minute at 10 Pa
    c.set_stream(True)
    link = c.link
    link.records.clear()
    before = ok_records(link, 20)
    p_old = sum(r.pressure_pa for r in before) / len(before)
    assert p_old == pytest.approx(10.0, rel=0.02)  # the demo table was made from this tube
    n0 = link.stats.records
    new = tablefile.dumps(scaled(1.5)).encode()
    seen = []
    res = transfer.push(c, new, channel=1, name="wren_x15", progress=lambda a, b: seen.append((a, b)))
    assert link.stats.records > n0  # records kept coming during the push
    assert res.name == "wren_x15" and res.channel == 1 and res.retries == 0
    assert res.crc32 == file_crc(new) and res.nbytes == len(new)
    assert seen[-1] == (len(new), len(new)) and len(seen) == res.chunks
    link.records.clear()
    after = ok_records(link, 20)
    p_new = sum(r.pressure_pa for r in after) / len(after)
    # same EMF, pressures x1.5: the PCHIP in log10 p shifts by log10 1.5 exactly
    assert p_new / p_old == pytest.approx(1.5, rel=0.01)
    assert c.table(1) == "wren_x15"
    assert c.active_crc(1) == "0x%08x" % file_crc(new)
    assert link.stats.corrupt == 0 and link.stats.gaps == 0
    assert c.error_count() == 0


# ---------------------------------------------------------------- refusals
def refused_cases():
    return [
        ("validation", lambda: raw_file([[12.0, 0.05], [11.0, 0.1], [11.5, 1.0], [2.0, 100.0]]),
         "device refused table cal: table refused: point 2: EMF must fall strictly as pressure r"),
        ("200 points", lambda: raw_file([[12.0 - 0.05 * i, 0.02 * 1.05 ** i] for i in range(200)]),
         "device refused table cal: table refused: a table holds at most 128 points, got 200"),
        ("type J", lambda: tablefile.dumps(scaled(1.0, "J")).encode(),
         "device refused table cal: table refused: thermocouple type J, the channel is type K"),
    ]


def test_refused_pushes_leave_the_active_table(gauge):
    c = gauge.client
    c.set_stream(True)
    crc0 = c.active_crc(1)
    assert crc0 == "0x%08x" % file_crc(demo_bytes())
    files0 = store_files(gauge.root)
    for label, make, message in refused_cases():
        with pytest.raises(TransferError) as exc:
            transfer.push(c, make(), channel=1, name="cal", verify_locally=False)
        assert str(exc.value) == message, label
        assert c.active_crc(1) == crc0 and c.table(1) == "demo_n2", label
        assert store_files(gauge.root) == files0, label
        assert c.upload_next() == -1
    # checked on the host first by default: the same table never reaches the device
    with pytest.raises(TransferError) as exc:
        transfer.push(c, refused_cases()[1][1](), channel=1, name="cal")
    assert str(exc.value) == "not a valid table file: a table holds at most 128 points, got 200"
    assert c.tables() == ["demo_n2"]
    assert c.error_count() == 0


def test_corrupted_chunk_is_resent_once_then_refused(gauge):
    c = gauge.client
    c.set_stream(True)
    crc0 = c.active_crc(1)
    new = tablefile.dumps(scaled(1.2)).encode()
    hits = []

    def flip_every_time(i, line):
        if i == 2:
            hits.append(i)
            return line[:30] + ("B" if line[30] != "B" else "C") + line[31:]
        return line

    with pytest.raises(TransferError) as exc:
        transfer.push(c, new, channel=1, name="cal", mangle=flip_every_time)
    assert str(exc.value).startswith("chunk 2 refused twice: chunk 2: crc16 is 0x")
    assert hits == [2, 2]
    assert c.active_crc(1) == crc0 and c.tables() == ["demo_n2"] and c.upload_next() == -1

    def flip_once(i, line):
        if i == 3 and not hits[2:]:
            hits.append(i)
            return line[:30] + ("B" if line[30] != "B" else "C") + line[31:]
        return line

    res = transfer.push(c, new, channel=1, name="cal", mangle=flip_once)
    assert res.retries == 1 and res.crc32 == file_crc(new)
    assert c.active_crc(1) == "0x%08x" % file_crc(new)
    assert c.error_count() == 0


# ---------------------------------------------------------------- pull and list
def test_pull_gives_back_the_exact_bytes_and_list_shows_the_channels(gauge):
    c = gauge.client
    assert transfer.pull(c, "demo_n2").encode() == demo_bytes()
    new = tablefile.dumps(scaled(0.9)).encode()
    transfer.push(c, new, name="spare")  # catalogue only
    assert transfer.pull(c, "spare").encode() == new
    lst = transfer.listing(c)
    assert lst.tables == [("demo_n2", file_crc(demo_bytes())), ("spare", file_crc(new))]
    assert lst.channels == [(1, "demo_n2", file_crc(demo_bytes()))]
    assert lst.lines()[1] == "  demo_n2                  crc32 0x%08x  channel 1" % file_crc(demo_bytes())
    with pytest.raises(Exception) as exc:
        transfer.pull(c, "nothere")
    assert "no table named nothere on the device" in str(exc.value)


def test_cli_push_pull_list(tmp_path, capsys):
    from tcgauge.cli import main

    root = tmp_path / "dev"
    root.mkdir()
    path = tmp_path / "Wren Cal.json"
    tablefile.save(str(path), scaled(1.1))
    data = path.read_bytes()
    url = "sim://?scenario=calibration&channels=1&speed=5&root=%s" % root
    assert main(["table", "push", str(path), "--port", url, "--channel", "1"]) == 0
    out = capsys.readouterr().out.splitlines()
    nchunks = -(-len(data) // 162)
    assert out[-1] == ("pushed %s as wren_cal to channel 1: %d bytes in %d chunks, crc32 0x%08x verified"
                       % (path, len(data), nchunks, file_crc(data)))
    assert out[0].startswith("sent ") and out[-2] == "sent %d of %d bytes" % (len(data), len(data))
    assert main(["table", "list", "--port", url]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[-1] == "  1  wren_cal                 crc32 0x%08x" % file_crc(data)
    dest = tmp_path / "back.json"
    assert main(["table", "pull", "wren_cal", "--port", url, "-o", str(dest)]) == 0
    assert dest.read_bytes() == data
    assert main(["table", "pull", "wren_cal", "--port", url, "-o", str(dest)]) == 2
    assert capsys.readouterr().err.strip().endswith("back.json exists; use --force to overwrite")


# ---------------------------------------------------------------- interrupted pushes
def test_rebuilt_device_comes_up_with_a_valid_table_after_interrupted_pushes(tmp_path, monkeypatch):
    old = demo_bytes()
    new = tablefile.dumps(scaled(1.3)).encode()
    query = "scenario=calibration&channels=1&speed=20&seed=5&root=%s" % tmp_path
    # 1. the host goes away in the middle of the chunks: nothing was installed
    port, c = open_gauge(query)
    c.upload_begin("cut", 1, len(new), "0x%08x" % zlib.crc32(new))
    lines = transfer._chunks(new)
    for line in lines[:2]:
        c.link.query(line + ";:SYST:ERR?")
    port.close()
    port, c = open_gauge(query)
    assert c.active_crc(1) == "0x%08x" % file_crc(old) and c.tables() == ["demo_n2"]
    assert c.upload_next() == -1
    assert not [n for n in os.listdir(str(tmp_path / "tables")) if n != "demo_n2.json"]
    # 2. power fails inside the install, after ch1.json became ch1.prev.json and before
    #    ch1.tmp became ch1.json (store.py step 5): the rename never happens
    real_rename = os.rename
    active = os.path.join(str(tmp_path), "store", "ch1.json")

    def cut_power(a, b):
        if b == active and a.endswith("ch1.tmp"):
            raise OSError("power lost (simulated)")
        real_rename(a, b)

    monkeypatch.setattr(os, "rename", cut_power)
    with pytest.raises(TransferError) as exc:
        transfer.push(c, new, channel=1, name="late")
    assert str(exc.value) == "device refused table late: power lost (simulated)"
    port.close()
    monkeypatch.setattr(os, "rename", real_rename)
    assert not os.path.exists(active)
    assert os.path.exists(os.path.join(str(tmp_path), "store", "ch1.tmp"))
    # the device starts again from the same root: the verified new table is finished off
    port, c = open_gauge(query, clear=False)  # keep the boot notes in the error queue
    try:
        notes = [c.link.query(":SYST:ERR?") for _ in range(3)]
        assert '-200,"Execution error;table ch1: install was interrupted; finished it"' in notes, notes
        assert c.active_crc(1) == "0x%08x" % file_crc(new)
        with open(active, "rb") as f:
            assert f.read() == new
        with open(os.path.join(str(tmp_path), "store", "ch1.prev.json"), "rb") as f:
            assert f.read() == old
        assert c.pressure(1).state in ("ok", "invalid", "under", "over")  # running (maybe still warming), not a fault
    finally:
        port.close()
