"""Hardware-in-the-loop: a tcgauge board on a serial port (marker `device`).

    pytest tests/device --device-port /dev/ttyACM0      # a real board running the firmware
    tcgauge sim --pty                                   # or the virtual device: prints a pty path,
    pytest tests/device --device-port /dev/pts/N        # which these tests accept the same way

Without --device-port every test here is skipped (tests/conftest.py). The board
must run firmware of this host's version (tcgauge deploy) with a tube, or the
reference dummy load of hardware/, on every channel, so that no fault is
present after clearing; the tests restore every setting they change.
Readings and setpoints are process aids, never a safety interlock: do not run
these tests on a system whose relays drive anything.
"""

import math
import time

import pytest

from gaugecore import commands as C
from gaugecore import states
from gaugecore.version import VERSION

from tcgauge.client import Client
from tcgauge.cmd_info import open_port
from tcgauge.link import Link

pytestmark = pytest.mark.device

STREAM_S = 10.0


@pytest.fixture
def client(device_port):
    port = open_port(device_port)
    link = Link(port, timeout_s=3.0)
    c = Client(link).open()
    c.set_stream(False)
    try:
        yield c
    finally:
        try:
            c.set_stream(False)
        finally:
            port.close()


def test_board_has_heap_to_spare(client):
    # DIAG:MEM:FREE? is MicroPython's gc.mem_free() after a collection; a board
    # that cannot take the largest table upload is reported by `tcgauge info`
    from tcgauge.identity import LOW_HEAP_BYTES

    free = client.memory_free()
    if free == -1:  # only the virtual device (CPython) cannot tell
        assert client.idn()[2].startswith("SIM")
        return
    assert free >= LOW_HEAP_BYTES, "%d bytes free, %d wanted (tools/bench/heap.py)" % (free, LOW_HEAP_BYTES)


def _channels(client):
    return len(client.table())


def test_identity_and_version_match_the_host(client):
    maker, model, serial, firmware = client.idn()  # IEEE 488.2 10.14: four fields
    assert (maker, model) == (C.MAKER, C.MODEL)
    assert serial and "," not in serial
    assert firmware == VERSION
    assert client.version() == "1999.0"  # SCPI-1999 Vol. 1 21.21
    assert client.error() == (0, "No error")


def test_pressure_reading_has_a_state_and_unit(client):
    unit = client.unit()
    assert unit in C.UNITS
    for r in client.pressure():
        assert r.state in states.ALL
        assert r.unit == unit
        if r.state in (states.INVALID, states.FAULT):
            assert r.pressure is None  # DEVELOPERS: invalid and fault carry no number
        else:
            assert r.pressure is not None and math.isfinite(r.pressure) and r.pressure > 0
        if r.state == states.FAULT:
            assert r.fault is not None


def test_stream_has_no_gaps_for_ten_seconds(client):
    link = client.link
    rate_hz = client.rate_hz()
    n_ch = _channels(client)
    client.set_stream(True)
    link.stats.reset()
    link.records.clear()
    t_end = time.monotonic() + STREAM_S
    seqs = []
    while time.monotonic() < t_end:
        rec = link.next_record(timeout_s=max(3.0, 3.0 / rate_hz))
        seqs.append(rec.seq)
        assert 1 <= rec.ch <= n_ch
        assert rec.state in states.ALL
    client.set_stream(False)
    stats = link.stats.as_dict()
    assert stats["gaps"] == 0 and stats["missing"] == 0 and stats["corrupt"] == 0, stats
    assert all(b - a == 1 for a, b in zip(seqs, seqs[1:])), "sequence not consecutive"
    # one record per channel per sample; allow 30 % for start-up and the wall clock
    # of a slowed virtual device (common practice, no published source)
    assert len(seqs) >= 0.7 * rate_hz * n_ch * STREAM_S, (len(seqs), rate_hz, n_ch)


def test_setpoint_configuration_round_trip(client):
    n = 1
    before = (client.sp_source(n), client.sp_on_pa(n), client.sp_off_pa(n), client.sp_direction(n),
              client.sp_delay_s(n), client.sp_enable(n))
    try:
        client.set_sp_enable(n, False)
        client.set_sp_direction(n, "BELOW")
        client.set_sp_off_pa(n, 20.0)
        client.set_sp_on_pa(n, 10.0)
        client.set_sp_delay_s(n, 1.5)
        client.set_sp_source(n, 1)
        assert client.sp_on_pa(n) == pytest.approx(10.0, rel=1e-6)
        assert client.sp_off_pa(n) == pytest.approx(20.0, rel=1e-6)
        assert client.sp_direction(n) == "BELOW"
        assert client.sp_delay_s(n) == pytest.approx(1.5)
        assert client.sp_source(n) == 1
        assert client.sp_enable(n) is False
        assert client.sp_relay(n) is False  # a disabled setpoint holds its relay off
    finally:
        source, on_pa, off_pa, direction, delay_s, enable = before
        client.set_sp_enable(n, False)
        client.set_sp_direction(n, direction)
        if direction == "BELOW":
            client.set_sp_off_pa(n, off_pa)
            client.set_sp_on_pa(n, on_pa)
        else:
            client.set_sp_on_pa(n, on_pa)
            client.set_sp_off_pa(n, off_pa)
        client.set_sp_delay_s(n, delay_s)
        client.set_sp_source(n, source)
        client.set_sp_enable(n, enable)
    assert client.sp_on_pa(n) == pytest.approx(before[1], rel=1e-6)


def test_fault_clearing(client):
    n_ch = _channels(client)
    client.clear_fault(list(range(1, n_ch + 1)))
    time.sleep(1.0)  # let the self-clearing faults see their good samples
    assert client.fault() == [None] * n_ch


def test_tables_on_the_board(client):
    names = client.tables()
    assert names, "no tables on the board"
    for name in client.table():
        assert name in names


def _download(client, name):
    """The bytes of catalogue table `name`, chunk by chunk, each checked by its CRC-16."""
    from gaugecore import record, tablexfer

    data = b""
    for index in range(tablexfer.MAX_CHUNKS):
        reply = client.table_chunk(name, index)
        if not reply or reply == [""]:
            return data
        crc, text = reply
        part = tablexfer.b64decode(text)
        if not part:
            return data
        assert int(crc) == record.crc16(part), "chunk %d: CRC-16 mismatch" % index
        data += part
    raise AssertionError("table %s: no end after %d chunks" % (name, tablexfer.MAX_CHUNKS))


def test_table_push_and_crc_read_back(client):
    """Download the table channel 1 uses, push the same bytes back to the catalogue
    (channel 0: no channel changes), and read its CRC-32 back: the board is left as it was."""
    from gaugecore import record, tablefile, tablexfer
    from gaugecore.crc32 import crc32

    name = client.table(1)
    data = _download(client, name)
    file_crc = tablefile.parse(data)[1]  # the CRC-32 the file carries (tablefile format)
    assert client.table_crc(name) == "0x%08x" % file_crc
    client.upload_begin(name, 0, len(data), "0x%08x" % crc32(data))
    step = tablexfer.UPLOAD_CHUNK
    for index, at in enumerate(range(0, len(data), step)):
        part = data[at:at + step]
        assert client.upload_next() == index
        client.upload_data(index, tablexfer.b64encode(part), record.crc16(part))
    assert client.upload_end() == "0x%08x" % file_crc
    assert client.upload_next() == -1
    assert client.table_crc(name) == "0x%08x" % file_crc
    assert _download(client, name) == data
    # the table channel 1 converts with is named by its file's CRC-32, not by a re-written copy
    # (a single-precision board writes 0.15 back as 0.150000006: tests/core/test_single_precision.py)
    assert client.active_crc(1) == "0x%08x" % file_crc
