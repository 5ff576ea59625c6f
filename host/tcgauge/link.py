"""The serial link to a controller: lines out, replies and stream records in.

`Link(port)` wraps a pyserial port, or anything with `write(bytes)` and
`read(n) -> bytes` (b'' when nothing came). While the device streams,
record lines (starting with '!', see gaugecore.record) arrive between
replies; the link decodes them into `records`, counts gaps (sequence
jumps) and corrupted records, and hands only reply lines to `query`.
"""

import collections
import logging
import time

from gaugecore import record
from gaugecore.scpi import LineFramer

from tcgauge.errors import TcgaugeError
import tcgauge.urlhandler  # noqa: F401,E402  (registers the sim:// port URL with pyserial)

log = logging.getLogger(__name__)


class LinkError(TcgaugeError):
    """The link failed: port closed, or the device sent nonsense."""


class LinkTimeout(LinkError):
    """No reply came in time."""


class StreamStats:
    """Counters of the record stream since the link opened (or `reset`)."""

    def __init__(self):
        self.reset()

    def reset(self):
        self.records = 0  # good records received
        self.corrupt = 0  # record lines that failed to decode
        self.gaps = 0  # sequence jumps seen
        self.missing = 0  # records lost in those jumps
        self.restarts = 0  # sequence went backwards (device restarted)

    def as_dict(self):
        return {
            "records": self.records,
            "corrupt": self.corrupt,
            "gaps": self.gaps,
            "missing": self.missing,
            "restarts": self.restarts,
        }


class Link:
    """Line-based link to the device; see the module docstring."""

    def __init__(self, port, timeout_s=1.0, max_records=100000, max_line=4096,
                 clock=time.monotonic):
        self.port = port
        self.timeout_s = timeout_s
        self.records = collections.deque(maxlen=max_records)
        self.stats = StreamStats()
        self.stray = 0  # reply lines that arrived with no query waiting
        self._framer = LineFramer(max_line)
        self._replies = collections.deque()
        self._last_seq = None
        self._clock = clock

    # ---- output -------------------------------------------------------------
    def write_line(self, text):
        """Send one program message (a newline is added)."""
        try:
            self.port.write((text + "\n").encode("ascii"))
        except (OSError, ValueError) as exc:
            raise LinkError("cannot write to the port: %s" % exc) from exc

    def query(self, text, timeout_s=None):
        """Send `text` and return the next reply line (records set aside)."""
        self.poll()
        if self._replies:
            log.warning("discarding %d stray reply line(s)", len(self._replies))
            self.stray += len(self._replies)
            self._replies.clear()
        self.write_line(text)
        return self.read_reply(timeout_s)

    # ---- input --------------------------------------------------------------
    def read_reply(self, timeout_s=None):
        """The next reply line; LinkTimeout if none arrives within the timeout."""
        wait_s = self.timeout_s if timeout_s is None else timeout_s
        deadline = self._clock() + wait_s
        while not self._replies:
            if not self._read_some() and self._clock() >= deadline:
                raise LinkTimeout("no reply within %.3g s" % wait_s)
        return self._replies.popleft()

    def next_record(self, timeout_s=None):
        """The oldest unread stream record; LinkTimeout if none arrives in time."""
        deadline = self._clock() + (self.timeout_s if timeout_s is None else timeout_s)
        while not self.records:
            if not self._read_some() and self._clock() >= deadline:
                raise LinkTimeout("no stream record within the timeout")
        return self.records.popleft()

    def poll(self):
        """Read whatever is waiting. A port that tells what is waiting (`in_waiting`) is
        never blocked on; one that does not is read until a read comes back empty."""
        while getattr(self.port, "in_waiting", 1) and self._read_some():
            pass

    def _read_some(self):
        waiting = getattr(self.port, "in_waiting", 0) or 1
        try:
            data = self.port.read(waiting)
        except (OSError, ValueError) as exc:
            raise LinkError("cannot read from the port: %s" % exc) from exc
        if not data:
            return False
        for line in self._framer.feed(data):
            self._line(line)
        return True

    def _line(self, line):
        if record.is_record(line):
            try:
                rec = record.decode(line)
            except ValueError as exc:
                self.stats.corrupt += 1
                log.debug("corrupt record %r: %s", line, exc)
                return
            self._count(rec)
            self.records.append(rec)
            return
        try:
            self._replies.append(line.decode("ascii"))
        except UnicodeDecodeError:
            self._replies.append(line.decode("ascii", "replace"))

    def _count(self, rec):
        self.stats.records += 1
        if self._last_seq is not None:
            missing = record.gap(self._last_seq, rec.seq)
            if missing > record.SEQ_MOD // 2:
                self.stats.restarts += 1  # went backwards: not a gap
            elif missing:
                self.stats.gaps += 1
                self.stats.missing += missing
        self._last_seq = rec.seq
