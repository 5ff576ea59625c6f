"""Benchmark of streaming through the virtual device; prints one JSON object.

- link_limit_records_per_s: what the link can carry: 115200 baud, 8N1 (10 bits
  a byte) = 11520 bytes/s, divided by the mean record length (newline included).
- sustained_records_per_s: records per second received by the host `Link`
  from a `sim://` virtual device whose output is paced at 115200 baud, over
  `--seconds` of wall time, with the device producing about `--load` times the
  link limit (sample rate 20 Hz on 2 channels, simulation sped up to match).
- fraction_of_limit: sustained / limit; goal >= 0.8 with zero loss (goal_met):
  no record dropped by the device, no gap and no corrupt record at the host.
- decode_records_per_s: gaugecore.record.decode alone, on CPython here.
- link_records_per_s: the host Link framing, decoding and counting records
  from a port that has them all waiting.

Usage: .venv/bin/python tools/bench/stream.py [--seconds S] [--load F]
"""

import argparse
import json
import platform
import sys
import time

import serial

from gaugecore import record
from tcgauge.link import Link  # registers sim://

BAUD = 115200
BYTES_PER_S = BAUD / 10.0  # 8N1: start bit, 8 data bits, stop bit
RATE_HZ = 20.0
CHANNELS = 2
GOAL = 0.8


def sample_lines(n=2000):
    """Record lines (with newline) as the device writes them, from a short virtual run."""
    port = serial.serial_for_url("sim://?scenario=steps&seed=3&speed=20&baud=0", timeout=0.05)
    try:
        link = Link(port, timeout_s=2.0)
        link.write_line("CONF:RATE %g;:STR ON" % RATE_HZ)
        lines = []
        while len(lines) < 200:
            rec = link.next_record(2.0)
            lines.append(record.encode(*rec.fields()) + "\n")
        link.write_line("STR OFF")
    finally:
        port.close()
    return (lines * (n // len(lines) + 1))[:n]


def sustained(seconds, load, mean_len):
    limit = BYTES_PER_S / mean_len
    speed = load * limit / (RATE_HZ * CHANNELS)
    url = "sim://?scenario=steps&seed=3&speed=%.4f&baud=%d" % (speed, BAUD)
    port = serial.serial_for_url(url, timeout=0.05)
    try:
        link = Link(port, timeout_s=2.0, max_records=10)
        link.write_line("CONF:RATE %g;:STR ON" % RATE_HZ)
        link.next_record(2.0)
        time.sleep(0.5)  # the transmit buffer and queues reach their steady state
        link.poll()
        n0 = link.stats.records
        t0 = time.monotonic()
        while time.monotonic() - t0 < seconds:
            link.poll()
            time.sleep(0.002)
        dt = time.monotonic() - t0
        n = link.stats.records - n0
        link.write_line("STR OFF")
        time.sleep(0.2)
        link.poll()
        dev = port.device
        out = {
            "speed": speed,
            "sustained_records_per_s": n / dt,
            "device_records": dev.service.records,
            "device_dropped": dev.service.dropped,
            "host_gaps": link.stats.gaps,
            "host_missing": link.stats.missing,
            "host_corrupt": link.stats.corrupt,
            "sim_lag_resets": dev.lag_resets,
            "controller_overruns": dev.controller.overruns,
        }
    finally:
        port.close()
    return out


class _Blob:
    """A port with every byte already waiting."""

    def __init__(self, data, chunk=4096):
        self.data = data
        self.pos = 0
        self.chunk = chunk

    @property
    def in_waiting(self):
        return min(self.chunk, len(self.data) - self.pos)

    def read(self, n):
        out = self.data[self.pos:self.pos + n]
        self.pos += len(out)
        return out

    def write(self, data):
        return len(data)


def decode_rate(lines, repeat=3):
    best = 0.0
    for _ in range(repeat):
        t0 = time.perf_counter()
        for line in lines:
            record.decode(line)
        best = max(best, len(lines) / (time.perf_counter() - t0))
    return best


def link_rate(lines, repeat=3):
    # renumber so the stream is contiguous, as the device sends it
    recs = [record.decode(x) for x in lines]
    blob = "".join(record.encode(k, *r.fields()[1:]) + "\n" for k, r in enumerate(recs)).encode()
    best = 0.0
    for _ in range(repeat):
        link = Link(_Blob(blob), max_records=len(lines) + 1)
        t0 = time.perf_counter()
        link.poll()
        dt = time.perf_counter() - t0
        if link.stats.records != len(lines) or link.stats.gaps or link.stats.corrupt:
            raise RuntimeError("link lost records: %r" % link.stats.as_dict())
        best = max(best, len(lines) / dt)
    return best


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seconds", type=float, default=5.0, help="wall seconds of streaming")
    ap.add_argument("--load", type=float, default=0.9,
                    help="device output as a fraction of the link limit")
    args = ap.parse_args(argv)
    lines = sample_lines()
    mean_len = sum(len(x) for x in lines) / float(len(lines))
    limit = BYTES_PER_S / mean_len
    run = sustained(args.seconds, args.load, mean_len)
    frac = run["sustained_records_per_s"] / limit
    lossless = (run["device_dropped"] == 0 and run["host_gaps"] == 0 and run["host_corrupt"] == 0)
    out = {
        "baud": BAUD,
        "bytes_per_s": BYTES_PER_S,
        "mean_record_bytes": mean_len,
        "link_limit_records_per_s": limit,
        "load": args.load,
        "fraction_of_limit": frac,
        "lossless": lossless,
        "goal": GOAL,
        "goal_met": frac >= GOAL and lossless,
        "decode_records_per_s": decode_rate(lines),
        "link_records_per_s": link_rate(lines),
        "python": platform.python_version(),
    }
    out.update(run)
    json.dump(out, sys.stdout, indent=1, sort_keys=True)
    sys.stdout.write("\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
