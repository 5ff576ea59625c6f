"""Benchmark of a table push at 115200 baud; prints one JSON object.

- raw_s: the bytes of the table file over a 115200 baud 8N1 line (10 bits a
  byte): len(file) / 11520 s. Nothing can be faster.
- push_s: wall time of tcgauge.transfer.push of the same file to a sim://
  virtual device, channel 1, until the device has installed it and the CRC-32
  read back (TABL:CRC? and TABL:ACT?) matches: begin, chunks, end, verify.
- ratio: push_s / raw_s; goal <= 2 (goal_met).
- push_streaming_s: the same while the device streams records at 10 Hz
  (they share the device's output with the replies).

Both directions are paced. The virtual device paces its output itself
(tcgauge.sim.device.ByteRate, 115200 baud). Its input is not paced (the
in-process pipe takes a line at once), so this benchmark wraps the host's
port: each write waits until its bytes would have crossed the line, counted
from when the line became free, and only then hands them to the device, as
the last byte of a real line arrives after len/11520 s. The host's reads are
not delayed further (a USB serial adapter's latency timer is not modelled).

The table: 64 points of the simulated Wren demo tube in N2 (tcgauge.sim.simtable,
invented tube), with its wall model, as `tcgauge table derive` or the
simulator writes it.

Usage: .venv/bin/python tools/bench/push.py [--repeat N]
"""

import argparse
import json
import platform
import sys
import tempfile
import time

import serial

from gaugecore import tablefile
from tcgauge import transfer
from tcgauge.client import Client
from tcgauge.link import Link  # registers sim://
from tcgauge.sim.simtable import make_table

BAUD = 115200
BYTES_PER_S = BAUD / 10.0  # 8N1: start bit, 8 data bits, stop bit
GOAL = 2.0
POINTS = 64


class PacedPort:
    """A pyserial port whose writes take as long as the bytes need on the line."""

    def __init__(self, port, bytes_per_s=BYTES_PER_S, clock=time.monotonic, sleep=time.sleep):
        self.port = port
        self.bytes_per_s = bytes_per_s
        self._clock = clock
        self._sleep = sleep
        self._free_at = clock()  # when the line has sent everything written so far
        self.bytes_written = 0

    def write(self, data):
        now = self._clock()
        self._free_at = max(self._free_at, now) + len(data) / self.bytes_per_s
        wait = self._free_at - now
        if wait > 0:
            self._sleep(wait)
        self.bytes_written += len(data)
        return self.port.write(data)

    def read(self, size=1):
        return self.port.read(size)

    @property
    def in_waiting(self):
        return self.port.in_waiting

    def close(self):
        self.port.close()


def table_bytes():
    t = make_table("wren-demo", "N2", points=POINTS, p_min_pa=0.02, p_max_pa=1000.0)
    return tablefile.dumps(t).encode("utf-8")


def one_push(data, streaming, root):
    raw = serial.serial_for_url("sim://?scenario=calibration&channels=1&speed=1&baud=%d&root=%s"
                                % (BAUD, root), timeout=0.05)
    port = PacedPort(raw)
    try:
        client = Client(Link(port, timeout_s=3.0), channels=1).open()
        if streaming:
            client.set_stream(True)
            time.sleep(0.5)
        n0 = port.bytes_written
        t0 = time.monotonic()
        res = transfer.push(client, data, channel=1, name="bench64")
        dt = time.monotonic() - t0
        return dt, res, port.bytes_written - n0, client.link.stats.records
    finally:
        port.close()


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeat", type=int, default=3, help="pushes per case; the best is reported")
    args = ap.parse_args(argv)
    data = table_bytes()
    raw_s = len(data) / BYTES_PER_S
    quiet, streaming = [], []
    sent = 0
    records = 0
    res = None
    for _ in range(args.repeat):
        with tempfile.TemporaryDirectory() as root:
            dt, res, sent, _ = one_push(data, False, root)
            quiet.append(dt)
        with tempfile.TemporaryDirectory() as root:
            dt, _, _, records = one_push(data, True, root)
            streaming.append(dt)
    push_s = min(quiet)
    out = {
        "table_points": POINTS,
        "table_bytes": len(data),
        "chunks": res.chunks,
        "bytes_sent_by_host": sent,
        "baud": BAUD,
        "raw_s": round(raw_s, 4),
        "push_s": round(push_s, 4),
        "ratio": round(push_s / raw_s, 3),
        "push_streaming_s": round(min(streaming), 4),
        "ratio_streaming": round(min(streaming) / raw_s, 3),
        "records_during_streaming_push": records,
        "goal": "ratio <= %g" % GOAL,
        "goal_met": push_s / raw_s <= GOAL,
        "input_paced": True,
        "python": platform.python_version(),
    }
    json.dump(out, sys.stdout, indent=2)
    print()
    return 0


if __name__ == "__main__":
    sys.exit(main())
