"""`tcgauge log --port PORT --db FILE [--seconds N]`: log a controller to SQLite.

Records go to the log database (tcgauge.log) in small committed batches;
a lost port is reopened with backoff and the gap recorded. Ctrl-C or
SIGTERM ends the run cleanly; even SIGKILL loses at most the last batch.
"""

import signal
import sys
import time

from tcgauge.acquire import Acquirer, Sink
from tcgauge.log import DbSink
from tcgauge.portopen import PortOpener


class _Status(Sink):
    """Prints 'committed N records' lines at most every `every_s` (0: each commit)."""

    def __init__(self, out, every_s):
        self.out = out
        self.every_s = every_s
        self._next = None

    def committed(self, run, n):
        now = time.monotonic()
        if self._next is None or now >= self._next:
            self._next = now + self.every_s
            self.out.write("run %d: committed %d records\n" % (run, n))
            self.out.flush()

    def on_gap(self, gap):
        self.out.write("gap: %s from seq %s to %s\n" % (gap.reason, gap.from_seq, gap.to_seq))
        self.out.flush()


def stop_on_sigterm():
    """A stop() callable that turns true on SIGTERM (so the last batch is committed)."""
    flag = []

    def handler(signum, frame):
        flag.append(signum)

    try:
        signal.signal(signal.SIGTERM, handler)
    except ValueError:  # not the main thread
        pass
    return lambda: bool(flag)


def log_port(port, db, seconds=None, status_every_s=5.0, out=None, backoff_s=None):
    """Log `port` to the database `db`; returns (run id, stats)."""
    out = sys.stdout if out is None else out
    status = _Status(out, status_every_s)
    opener = PortOpener(port)
    sink = DbSink(db, source=opener.source, on_commit=status.committed)
    kw = {} if backoff_s is None else {"backoff_s": backoff_s}
    acq = Acquirer(opener, port_name=port, true_pressure=opener.true_pressure, **kw)
    out.write("logging %s to %s; Ctrl-C stops\n" % (port, db))
    out.flush()
    try:
        stats = acq.run([sink, status], seconds=seconds, stop=stop_on_sigterm())
    except KeyboardInterrupt:
        stats = acq.stats
    finally:
        sink.close()
    out.write("run %d: %d records, %d gaps, %d corrupt, %d reconnects in %s\n"
              % (sink.run or 0, stats["records"], stats["gaps"], stats["corrupt"],
                 stats["reconnects"], db))
    return sink.run, stats


def _cmd(args):
    log_port(args.port, args.db, seconds=args.seconds, status_every_s=args.status_every)
    return 0


def register(subparsers):
    """Add the `log` verb."""
    p = subparsers.add_parser(
        "log", help="log a controller's stream to an SQLite database",
        description="Log the record stream of a controller to an SQLite database (WAL, committed "
        "in small batches). A lost port is reopened and the gap recorded. Setpoints are process "
        "aids, not safety interlocks.")
    p.add_argument("--port", required=True, help="serial port or URL (e.g. /dev/ttyACM0, sim://)")
    p.add_argument("--db", required=True, metavar="FILE", help="log database (created if absent)")
    p.add_argument("--seconds", type=float, default=None, help="stop after N seconds")
    p.add_argument("--status-every", type=float, default=5.0, metavar="S",
                   help="print a progress line at most every S seconds (0: every commit)")
    p.set_defaults(func=_cmd)
