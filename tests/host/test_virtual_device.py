"""The virtual device in-process through `sim://` and the host Link.

Each test opens its own device and closes it; `no_device_threads` checks
that no device thread is left behind.
"""

import threading
import time

import pytest
import serial

from gaugecore import record
from tcgauge.link import Link  # registers sim://
from tcgauge.client import Client


def device_threads():
    return [t for t in threading.enumerate() if t.name == "tcgauge-virtual-device"]


@pytest.fixture(autouse=True)
def no_device_threads():
    yield
    assert device_threads() == []


def open_sim(query="scenario=pumpdown&speed=5&seed=1", timeout=0.05):
    return serial.serial_for_url("sim://?" + query, timeout=timeout)


class Dropper:
    """A port wrapper that loses bytes on purpose: every `every`-th record line entirely,
    or (mode 'cut') 5 bytes from its middle."""

    def __init__(self, port, every, mode="whole"):
        self.port = port
        self.every = every
        self.mode = mode
        self.lost = 0
        self._n = 0
        self._line = bytearray()
        self._ready = bytearray()

    @property
    def in_waiting(self):
        return self.port.in_waiting

    def write(self, data):
        return self.port.write(data)

    def read(self, n):
        for b in self.port.read(n):
            self._line.append(b)
            if b == 10:
                line = bytes(self._line)
                self._line.clear()
                if line.startswith(b"!"):
                    self._n += 1
                    if self._n % self.every == 0:
                        self.lost += 1
                        if self.mode == "whole":
                            continue
                        mid = len(line) // 2
                        line = line[:mid] + line[mid + 5:]
                self._ready += line
        out = bytes(self._ready)
        self._ready.clear()
        return out


def test_sim_url_opens_a_virtual_device_and_answers():
    port = open_sim()
    try:
        link = Link(port, timeout_s=2.0)
        fields = link.query("*IDN?").split(",")
        assert fields == ["tcgauge", "TCGAUGE-2CH", "SIM0001", "0.1.0"]
        assert port.device.running
        client = Client(link)
        assert client.self_test() == 0
    finally:
        port.close()
    assert not port.is_open


def test_stream_is_contiguous_and_commands_are_answered_while_streaming():
    port = open_sim()
    try:
        link = Link(port, timeout_s=2.0)
        link.write_line("STR ON")
        answers = []
        recs = []
        t_end = time.monotonic() + 1.5
        while time.monotonic() < t_end:
            answers.append(link.query("MEAS:HEAT? (@1)", timeout_s=1.0))
            recs.append(link.next_record(1.0))
        link.write_line("STR OFF")
        time.sleep(0.1)
        link.poll()
        recs += list(link.records)
        assert len(recs) >= 100  # 5x speed, 10 Hz, 2 channels: ~100 records/s
        seqs = [r.seq for r in recs]
        assert link.stats.corrupt == 0 and link.stats.gaps == 0 and link.stats.missing == 0
        assert link.stats.records == len(recs) == seqs[-1] + 1 - seqs[0]
        assert seqs == list(range(seqs[0], seqs[-1] + 1))
        assert len(answers) >= 10
        values = [float(a) for a in answers]  # numbers, never a record line
        # the first query may come before the first heater reading: NAN, "no number yet"
        assert values[0] != values[0] or 0.0 <= values[0] <= 200.0, answers
        assert all(0.0 <= v <= 200.0 for v in values[1:]), answers  # then the heater runs
        assert port.device.service.dropped == 0
    finally:
        port.close()


@pytest.mark.parametrize("mode", ["whole", "cut"])
def test_bytes_lost_on_the_way_show_as_gaps(mode):
    port = open_sim()
    try:
        lossy = Dropper(port, every=25, mode=mode)
        link = Link(lossy, timeout_s=2.0)
        link.write_line("STR ON")
        t_end = time.monotonic() + 1.2
        while time.monotonic() < t_end:
            link.next_record(1.0)
        link.write_line("STR OFF")
        time.sleep(0.1)
        link.poll()
        s = link.stats
        assert lossy.lost >= 3
        # a lost record leaves a sequence jump of 1 (never two adjacent losses at 1 in 25)
        assert s.gaps == lossy.lost and s.missing == lossy.lost
        if mode == "whole":
            assert s.corrupt == 0
        else:
            # a cut record fails its CRC-16 (every burst of up to 16 bits is caught; a
            # cut shifts the line, which changes far more): counted corrupt, never decoded
            assert s.corrupt == lossy.lost
        assert port.device.service.dropped == 0
    finally:
        port.close()


def test_sim_url_options_and_errors():
    port = open_sim("scenario=steps&gas=Ar&seed=4&speed=2&fault=tc-open@0.5:2&channels=2")
    try:
        link = Link(port, timeout_s=2.0)
        assert link.query("TABL:CAT?") == '"demo_ar","demo_n2"'
        assert link.query("CONF:TABL?") == '"demo_ar","demo_ar"'
        deadline = time.monotonic() + 3.0
        while link.query("STAT:FAUL? (@2)") != "TC-OPEN" and time.monotonic() < deadline:
            time.sleep(0.05)
        assert link.query("MEAS? (@2)") == "NAN,PA,FAULT,TC-OPEN"
    finally:
        port.close()
    with pytest.raises(serial.SerialException) as exc:
        open_sim("speed=2&colour=blue")
    assert str(exc.value) == ("sim://: unknown option 'colour' (known: scenario, gas, seed, speed, "
                              "channels, fault, baud, root, zeroed)")
    with pytest.raises(serial.SerialException) as exc:
        open_sim("zeroed=yes")
    assert str(exc.value) == "sim://: option zeroed='yes' is not a number"
    with pytest.raises(serial.SerialException) as exc:
        open_sim("scenario=nowhere")
    assert str(exc.value) == ("sim://: unknown scenario 'nowhere' (known: ambient-ramp, calibration, "
                              "gas-change, pumpdown, steps, vent)")
    with pytest.raises(serial.SerialException) as exc:
        open_sim("fault=melted@3")
    assert str(exc.value).startswith("sim://: unknown fault 'melted' (known: ")


def test_simulated_time_follows_the_wall_clock_times_speed():
    port = open_sim("scenario=pumpdown&speed=20&seed=2")
    try:
        bench = port.device.bench
        t0_wall, t0_sim = time.monotonic(), bench.clock.time_s
        time.sleep(1.0)
        ratio = (bench.clock.time_s - t0_sim) / (time.monotonic() - t0_wall)
        assert ratio == pytest.approx(20.0, rel=0.1)  # within the 10 ms pacing per step
        assert port.device.lag_resets == 0
    finally:
        port.close()


def test_output_is_paced_at_the_emulated_baud_rate():
    port = open_sim("scenario=pumpdown&speed=1&seed=2&baud=9600")
    try:
        link = Link(port, timeout_s=2.0)
        link.query("*IDN?")
        long_query = ";".join(["*IDN?"] * 40)  # about 1.4 kB of reply
        t0 = time.monotonic()
        reply = link.query(long_query, timeout_s=5.0)
        dt = time.monotonic() - t0
        n = len(reply) + 1
        # 8N1: 10 bits a byte, so 960 bytes/s at 9600 baud; the 256-byte transmit buffer
        # starts full, so the first 256 bytes go at once
        assert dt == pytest.approx((n - 256) / 960.0, rel=0.15)
    finally:
        port.close()


def test_record_lines_use_the_protocol_record_format():
    port = open_sim()
    try:
        link = Link(port, timeout_s=2.0)
        link.write_line("STR ON")
        rec = link.next_record(2.0)
        assert isinstance(rec, record.Record)
        assert rec.ch in (1, 2) and rec.state in ("ok", "under", "over", "invalid")
        link.write_line("STR OFF")
    finally:
        port.close()
